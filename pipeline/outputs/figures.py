"""The figures: the network map, a deficient curve's long profile and a road's long profile.

Drawn with matplotlib (Agg), imported only when a figure is drawn. Severity colours are
:data:`pipeline.outputs.report_style.SEVERITY_COLOURS` (one hue, light to dark, the worst the
darkest), backed by line width so they survive grey printing; roads grey.
"""

from __future__ import annotations

import base64
import io

import numpy as np
import pandas as pd
import shapely

from ..profile.stations import Polyline
from .report_style import SEVERITY_COLOURS

SEVERITY_STYLE = {
    "minor": {"color": SEVERITY_COLOURS["minor"], "lw": 3.0},
    "moderate": {"color": SEVERITY_COLOURS["moderate"], "lw": 4.5},
    "severe": {"color": SEVERITY_COLOURS["severe"], "lw": 6.0},
}
ROAD_GREY = "#9A9A9A"


def pyplot():
    """matplotlib's pyplot on the Agg backend, with the figures' font sizes.

    Returns
    -------
    module
        ``matplotlib.pyplot``, its ``rcParams`` set for the report's figures.
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    plt.rcParams.update({"font.size": 10, "axes.titlesize": 11, "axes.labelsize": 10, "legend.fontsize": 8.5,
                         "xtick.labelsize": 9, "ytick.labelsize": 9})
    return plt


def png_data_uri(fig, dpi: int = 100) -> str:
    """The figure as an inline PNG; the figure is closed.

    Figures are laid out when made, so one rendering pass does.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The figure.
    dpi : int, default 100
        Resolution of the PNG.

    Returns
    -------
    str
        A ``data:image/png;base64,...`` URI.
    """
    plt = pyplot()
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    plt.close(fig)
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def curve_png(spec: dict) -> str:
    """One curve page's figure as an inline PNG.

    A top-level function, so that a pool of processes can draw the pages side by side.

    Parameters
    ----------
    spec : dict
        The keyword arguments of :func:`curve_figure` (a page's ``spec`` from
        :func:`pipeline.outputs.report.report_pages`).

    Returns
    -------
    str
        A ``data:image/png;base64,...`` URI.
    """
    return png_data_uri(curve_figure(**spec))


# ------------------------------------------------------------------- network map
def network_map(result, inventory: pd.DataFrame, units):
    """The network map: roads in grey, deficient stretches coloured by severity.

    Top ranks are labelled; with a legend, a scale bar and a north arrow; drawn in
    the working (metric, north-up) CRS.

    Parameters
    ----------
    result : NetworkResult
        The run's result (the roads' working-CRS centrelines).
    inventory : pandas.DataFrame
        The ranked deficient stretches, internal units.
    units : OutputUnits
        The run's output units, for the scale bar.

    Returns
    -------
    matplotlib.figure.Figure
    """
    plt = pyplot()
    fig, ax = plt.subplots(figsize=(9.0, 7.0))
    fig.subplots_adjust(left=0.12, right=0.97, bottom=0.14, top=0.94)
    t = result.roads.table
    _draw_roads(ax, t[t["geometry"].notna()])
    polys = _draw_deficiencies(ax, t.set_index("road_id")["geometry"], inventory)
    for _, d in inventory[inventory["rank"] <= 10].iterrows():
        if d["road_id"] in polys:
            xy = polys[d["road_id"]].cut(d["from_m"], d["to_m"])
            ax.annotate(f"#{int(d['rank'])}", xy[len(xy) // 2], fontsize=8.5, fontweight="bold", color="black",
                        xytext=(-6, -12), textcoords="offset points", zorder=6)
    ax.autoscale_view()
    ax.set_aspect("equal")
    ax.set_xlabel("easting in the working CRS (m)")
    ax.set_ylabel("northing in the working CRS (m)")
    ax.set_title("Road network and deficient stretches by severity (labels: rank)")
    handles = [plt.Line2D([], [], color=ROAD_GREY, lw=1.6, label="road audited")]
    handles += [plt.Line2D([], [], color=v["color"], lw=v["lw"], label=f"{k} deficiency")
                for k, v in SEVERITY_STYLE.items()]
    ax.legend(handles=handles, loc="lower right", framealpha=0.9)
    _scale_bar_and_north(ax, units)
    ax.ticklabel_format(useOffset=False, style="plain")
    ax.tick_params(axis="x", labelrotation=30)
    return fig


def _draw_roads(ax, lines: pd.DataFrame) -> None:
    """Every centreline in grey, named where the roads are few enough to read."""
    from matplotlib.collections import LineCollection

    coords = [shapely.get_coordinates(g) for g in lines["geometry"]]
    ax.add_collection(LineCollection(coords, colors=ROAD_GREY, linewidths=1.6, zorder=1))
    if len(lines) <= 60:
        for rid, xy in zip(lines["road_id"], coords):
            mid = xy[len(xy) // 2]
            ax.annotate(str(rid), mid, fontsize=8, color="#404040", xytext=(4, 4), textcoords="offset points")


def _draw_deficiencies(ax, geo: pd.Series, inventory: pd.DataFrame) -> dict:
    """The deficient stretches by severity, severe on top; returns the centrelines used, by road."""
    from matplotlib.collections import LineCollection

    polys: dict = {}
    for sev, st in SEVERITY_STYLE.items():
        rows = inventory[inventory["severity"] == sev]
        segs = []
        for rid, a, b in zip(rows["road_id"], rows["from_m"], rows["to_m"]):
            if rid not in polys and geo.get(rid) is not None:
                polys[rid] = Polyline(geo[rid])
            if rid in polys:
                segs.append(polys[rid].cut(a - 5, b + 5))
        if segs:
            ax.add_collection(LineCollection(segs, colors=st["color"], linewidths=st["lw"],
                                             zorder=2 + list(SEVERITY_STYLE).index(sev)))
    return polys


def _nice_length(span: float) -> float:
    """A round scale-bar length near a fifth of ``span``."""
    target = span / 5.0
    exp = 10 ** np.floor(np.log10(target))
    for m in (1, 2, 5, 10):
        if m * exp >= target:
            return m * exp
    return 10 * exp


def _scale_bar_and_north(ax, units) -> None:
    """A scale bar at the lower left and a north arrow at the upper right."""
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    bar = _nice_length(x1 - x0)
    bx, by = x0 + 0.04 * (x1 - x0), y0 + 0.05 * (y1 - y0)
    ax.plot([bx, bx + bar], [by, by], color="black", lw=3, solid_capstyle="butt")
    label = (f"{units.length(bar):,.0f} {units.length_label}" if bar < 1000 or units.us
             else f"{bar / 1000:g} km")
    ax.text(bx + bar / 2, by + 0.015 * (y1 - y0), label, ha="center", va="bottom", fontsize=9)
    ax.annotate("N", xy=(x1 - 0.05 * (x1 - x0), y1 - 0.05 * (y1 - y0)),
                xytext=(x1 - 0.05 * (x1 - x0), y1 - 0.15 * (y1 - y0)), ha="center", fontsize=11, fontweight="bold",
                arrowprops={"arrowstyle": "-|>", "color": "black", "lw": 1.5})


# ------------------------------------------------------------------- curve figure
def curve_figure(prof: pd.DataFrame, curve: pd.Series, rows: pd.DataFrame, hcurves: pd.DataFrame, rules, units,
                 title: str):
    """The long profile around a deficient curve.

    Ground samples, the fitted alignment, PVC/PVI/PVT, the driver's sight line at
    the worst station for the available and the required distance, the hidden
    stretch and the hidden hazard, and the horizontal curves along the bottom.

    Parameters
    ----------
    prof : pandas.DataFrame
        The road's stations around the curve (``chainage_m``, ``ground_z_m``,
        ``fitted_z_m``, ``grade_pct``, ``ground_flag``, ``sight_fwd_m``, ``sight_back_m``).
    curve : pandas.Series
        The curve (``kind``, ``pvc_m``, ``pvi_m``, ``pvt_m``).
    rows : pandas.DataFrame
        The curve's deficient stretches; the one ranked first is drawn.
    hcurves : pandas.DataFrame
        The road's horizontal curves (``start_m``, ``end_m``).
    rules : SightRules
        Eye, object and headlight heights and the beam angle of the criteria set.
    units : OutputUnits
        The run's output units.
    title : str
        The figure's title.

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    On a crest the sight line runs from the eye (``eye_height_m`` above the
    alignment) to an object ``object_height_m`` high at the available and at the
    required distance; on a sag the headlight beam's upper edge rises at the
    beam angle above the grade at the headlight (AASHTO Green Book, chapter 3).
    """
    plt = pyplot()
    worst = rows.loc[rows["rank"].idxmin()]  # the row that ranks first: the direction that matters most
    span = max(float(worst["ssd_required_m"]), 150.0) * 1.1
    lo = max(min(curve["pvc_m"], worst["from_m"]) - span, prof["chainage_m"].min())
    hi = min(max(curve["pvt_m"], worst["to_m"]) + span, prof["chainage_m"].max())
    p = prof[(prof["chainage_m"] >= lo) & (prof["chainage_m"] <= hi)]
    L, E = units.length, units.length_label
    fig, ax = plt.subplots(figsize=(10.5, 3.9))
    fig.subplots_adjust(left=0.07, right=0.70, bottom=0.14, top=0.91)
    _profile_and_pv_marks(ax, p, curve, L)
    _sight_lines(ax, p, curve, worst, rules, units)
    _hidden_marks(ax, p, worst, L)
    for h in hcurves.itertuples():
        if h.end_m >= lo and h.start_m <= hi:
            ax.axvspan(L(max(h.start_m, lo)), L(min(h.end_m, hi)), ymin=0, ymax=0.04, color="#4A6FA5", lw=0)
    ax.set_xlim(L(lo), L(hi))
    ax.set_xlabel(f"chainage ({E}); blue bars along the bottom: horizontal curves")
    ax.set_ylabel(f"elevation ({E})")
    ax.set_title(title)
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), framealpha=0.95)
    return fig


def _fitted_z(p: pd.DataFrame):
    """The fitted alignment's elevation at any chainage, by interpolation."""
    return lambda x: float(np.interp(x, p["chainage_m"], p["fitted_z_m"]))


def _profile_and_pv_marks(ax, p: pd.DataFrame, curve: pd.Series, L) -> None:
    """Ground samples (masked ones apart), the recovered alignment and the PVC, PVI and PVT."""
    masked = p["ground_flag"] == "masked"
    ax.plot(L(p.loc[~masked, "chainage_m"]), L(p.loc[~masked, "ground_z_m"]), ".", ms=2.5, color="#7A7A7A",
            label="ground samples")
    if masked.any():
        ax.plot(L(p.loc[masked, "chainage_m"]), L(p.loc[masked, "ground_z_m"]), "x", ms=3.5, color="#7A7A7A",
                label="ground masked (artefact)")
    ax.plot(L(p["chainage_m"]), L(p["fitted_z_m"]), "-", color="black", lw=1.4, label="recovered alignment")
    ytop = np.nanmax(p["fitted_z_m"])
    for name, x in (("PVC", curve["pvc_m"]), ("PVI", curve["pvi_m"]), ("PVT", curve["pvt_m"])):
        ax.axvline(L(x), color="#4A6FA5", ls=":", lw=1)
        ax.text(L(x), L(ytop), name, color="#4A6FA5", fontsize=8, ha="center", va="bottom")


def _sight_lines(ax, p: pd.DataFrame, curve: pd.Series, worst: pd.Series, rules, units) -> None:
    """The sight line (crest) or headlight beam (sag) at the worst driver position, for the
    available distance (solid) and the required SSD (dashed)."""
    L, E = units.length, units.length_label
    zfit = _fitted_z(p)
    sign = 1 if worst["direction"] == "increasing" else -1
    ssd = float(worst["ssd_required_m"])
    col = "sight_fwd_m" if sign > 0 else "sight_back_m"
    stretch = p[(p["chainage_m"] >= worst["from_m"] - 1e-6) & (p["chainage_m"] <= worst["to_m"] + 1e-6)]
    eye_x = float(stretch.loc[stretch[col].idxmin(), "chainage_m"]) if len(stretch) else float(worst["from_m"])
    avail = float(worst["sight_available_m"])
    if curve["kind"] == "crest":
        ez = zfit(eye_x) + rules.eye_height_m
        for dist, style, label in ((avail, "-", f"sight line, available {L(avail):.0f} {E}"),
                                   (ssd, "--", f"sight line needed, SSD {L(ssd):.0f} {E}")):
            ox = eye_x + sign * dist
            ax.plot([L(eye_x), L(ox)], [L(ez), L(zfit(ox) + rules.object_height_m)], style,
                    color="#C2452D", lw=1.5, label=label)
        ax.plot([L(eye_x)], [L(ez)], "o", color="#C2452D", ms=5, label="driver's eye")
    else:
        g0 = float(np.interp(eye_x, p["chainage_m"], p["grade_pct"])) / 100.0 * sign
        hz = zfit(eye_x) + rules.headlight_height_m
        tb = np.tan(np.radians(rules.beam_angle_deg))
        for dist, style, label in ((avail, "-", f"headlight beam edge, reach {L(avail):.0f} {E}"),
                                   (ssd, "--", f"reach needed, SSD {L(ssd):.0f} {E}")):
            ox = eye_x + sign * dist
            ax.plot([L(eye_x), L(ox)], [L(hz), L(hz + dist * (g0 + tb))], style, color="#C2452D", lw=1.5,
                    label=label)
        ax.plot([L(eye_x)], [L(hz)], "o", color="#C2452D", ms=5, label="headlight")


def _hidden_marks(ax, p: pd.DataFrame, worst: pd.Series, L) -> None:
    """The driver positions lacking SSD, the road hidden at the required SSD and the hidden hazard."""
    ax.axvspan(L(min(worst["from_m"], worst["to_m"])), L(max(worst["from_m"], worst["to_m"])) + 1e-9,
               color="#F4A259", alpha=0.25, lw=0, label="driver positions lacking SSD")
    if np.isfinite(worst.get("hidden_from_m", np.nan)):
        ax.axvspan(L(worst["hidden_from_m"]), L(worst["hidden_to_m"]), color="#3B1F5C", alpha=0.15, lw=0,
                   label="road hidden at the required SSD")
    if isinstance(worst.get("hidden_hazard"), str) and worst["hidden_hazard"] != "none" \
            and np.isfinite(worst.get("hazard_chainage_m", np.nan)):
        hx = worst["hazard_chainage_m"]
        ax.plot([L(hx)], [L(_fitted_z(p)(hx))], marker="v", ms=9, color="#3B1F5C", ls="none",
                label=f"hidden hazard: {worst['hidden_hazard']}")


# ------------------------------------------------------------------- road figure
def road_figure(prof: pd.DataFrame, curves: pd.DataFrame, rows: pd.DataFrame, units, title: str, lo: float,
                hi: float):
    """A road's long profile between two chainages, for the field sheets.

    Parameters
    ----------
    prof : pandas.DataFrame
        The road's stations (``chainage_m``, ``ground_z_m``, ``fitted_z_m``).
    curves : pandas.DataFrame
        The road's vertical curves, labelled with kind, number, K and verdict.
    rows : pandas.DataFrame
        The road's deficient stretches, shaded by severity.
    units : OutputUnits
        The run's output units.
    title : str
        The figure's title.
    lo, hi : float
        The chainages shown (m).

    Returns
    -------
    matplotlib.figure.Figure
    """
    plt = pyplot()
    L, E = units.length, units.length_label
    p = prof[(prof["chainage_m"] >= lo) & (prof["chainage_m"] <= hi)]
    fig, ax = plt.subplots(figsize=(11.0, 4.6))
    fig.subplots_adjust(left=0.07, right=0.98, bottom=0.12, top=0.92)
    ax.plot(L(p["chainage_m"]), L(p["ground_z_m"]), ".", ms=2, color="#7A7A7A", label="ground samples")
    ax.plot(L(p["chainage_m"]), L(p["fitted_z_m"]), "-", color="black", lw=1.3, label="recovered alignment")
    shown = set()
    for _, d in rows.iterrows():
        if d["to_m"] < lo or d["from_m"] > hi:
            continue
        st = SEVERITY_STYLE[d["severity"]]
        ax.axvspan(L(d["from_m"]), L(d["to_m"]) + 1e-9, color=st["color"], alpha=0.3, lw=0,
                   label=f"{d['severity']} deficiency" if d["severity"] not in shown else None)
        shown.add(d["severity"])
    for _, c in curves.iterrows():
        if c["pvt_m"] < lo or c["pvc_m"] > hi:
            continue
        y = float(np.interp(c["pvi_m"], p["chainage_m"], p["fitted_z_m"])) if len(p) else 0.0
        mark = "deficient" if bool(c.get("deficient", False)) else ""
        ax.annotate(f"{c['kind']} {int(c['curve_no'])}\nK {L(c['k']) if units.us else c['k']:.0f} {mark}",
                    (L(c["pvi_m"]), L(y)), xytext=(0, 14 if c["kind"] == "crest" else -26),
                    textcoords="offset points", ha="center", fontsize=7.5)
    ax.set_xlim(L(lo), L(hi))
    ax.set_xlabel(f"chainage ({E})")
    ax.set_ylabel(f"elevation ({E})")
    ax.set_title(title)
    ax.grid(alpha=0.3)
    ax.legend(loc="best", fontsize=8)
    return fig
