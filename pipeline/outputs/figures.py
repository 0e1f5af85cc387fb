"""The figures: a deficient curve's long profile and a road's long profile (the network map is
SVG, in :mod:`pipeline.outputs.mapview`).

Drawn with matplotlib (Agg), imported only when a figure is drawn. Severity colours are
:data:`pipeline.outputs.report_style.SEVERITY_COLOURS` (one hue, light to dark, the worst the
darkest), backed by line width so they survive grey printing.
"""

from __future__ import annotations

import base64
import io

import numpy as np
import pandas as pd

from .report_style import ROAD_GREY, SEVERITY_COLOURS

SEVERITY_STYLE = {
    "minor": {"color": SEVERITY_COLOURS["minor"], "lw": 3.0},
    "moderate": {"color": SEVERITY_COLOURS["moderate"], "lw": 4.5},
    "severe": {"color": SEVERITY_COLOURS["severe"], "lw": 6.0},
}


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


_KEPT_FIGURES: dict = {}


def kept_figure(size: tuple[float, float], dpi: int):
    """A figure of this size kept for the calling thread, to draw one page or road after another
    into (:func:`curve_figure` and :func:`road_figure` clear it first); made once, outside pyplot,
    so it is never left open there.

    Parameters
    ----------
    size : (float, float)
        Width and height (inches).
    dpi : int
        Its resolution (dots per inch).

    Returns
    -------
    matplotlib.figure.Figure
        The figure, on the Agg canvas.
    """
    import threading

    key = (threading.get_ident(), size, dpi)
    fig = _KEPT_FIGURES.get(key)
    if fig is None:
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure

        pyplot()  # the figures' font sizes, before the figure takes them
        fig = _KEPT_FIGURES[key] = Figure(figsize=size, dpi=dpi)
        FigureCanvasAgg(fig)
    return fig


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

    A top-level function, so that a pool of processes can draw the pages side by side; each
    process (each thread) draws its pages one after another into one kept figure
    (:func:`kept_figure`), which spares making a figure per page and gives the same PNG.

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
    fig = curve_figure(**spec, fig=kept_figure(CURVE_FIGURE_SIZE, dpi=100))
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=100)
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


CURVE_FIGURE_SIZE = (10.5, 4.3)  # inches


# ------------------------------------------------------------------- curve figure
def curve_figure(prof: pd.DataFrame, curve: pd.Series, rows: pd.DataFrame, hcurves: pd.DataFrame, rules, units,
                 title: str, fig=None):
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
    fig : matplotlib.figure.Figure, optional
        A figure of :data:`CURVE_FIGURE_SIZE` to draw into, cleared first (:func:`kept_figure`);
        a new one when not given.

    Returns
    -------
    matplotlib.figure.Figure
        ``fig`` when given.

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
    lo = max(min(curve["pvc_m"], rows["from_m"].min()) - span, prof["chainage_m"].min())
    hi = min(max(curve["pvt_m"], rows["to_m"].max()) + span, prof["chainage_m"].max())
    p = prof[(prof["chainage_m"] >= lo) & (prof["chainage_m"] <= hi)]
    L, E = units.length, units.length_label
    if fig is None:
        fig, ax = plt.subplots(figsize=CURVE_FIGURE_SIZE)
    else:
        fig.clear()
        ax = fig.add_subplot()
    fig.subplots_adjust(left=0.07, right=0.66, bottom=0.13, top=0.92)
    _profile_and_pv_marks(ax, p, curve, L)
    _sight_lines(ax, p, curve, worst, rules, units)
    _hidden_marks(ax, p, rows, worst, L)
    for h in hcurves.itertuples():
        if h.end_m >= lo and h.start_m <= hi:
            ax.axvspan(L(max(h.start_m, lo)), L(min(h.end_m, hi)), ymin=0, ymax=0.04, color="#4A6FA5", lw=0)
    ax.set_xlim(L(lo), L(hi))
    ax.set_xlabel(f"chainage ({E}); blue bars along the bottom: horizontal curves; hatching: direction of travel")
    ax.set_ylabel(f"elevation ({E})")
    ax.set_title(title)
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.02), framealpha=0.95, fontsize=8)
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
    sd = float(curve.get("sight_sd_m", np.nan))
    if curve["kind"] == "crest":
        ez = zfit(eye_x) + rules.eye_height_m
        for dist, style, label in ((avail, "-", f"sight line, available {L(avail):.0f} {E}"),
                                   (ssd, "--", f"sight line needed, SSD {L(ssd):.0f} {E}")):
            ox = eye_x + sign * dist
            ax.plot([L(eye_x), L(ox)], [L(ez), L(zfit(ox) + rules.object_height_m)], style,
                    color="#C2452D", lw=1.5, label=label)
        ax.plot([L(eye_x)], [L(ez)], "o", color="#C2452D", ms=5, label="driver's eye")
        end_z = zfit(eye_x + sign * avail) + rules.object_height_m
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
        end_z = hz + avail * (g0 + tb)
    if np.isfinite(sd) and sd > 0:  # the spread of the available distance (issue 9's uncertainty)
        ax.errorbar([L(eye_x + sign * avail)], [L(end_z)], xerr=[L(sd)], fmt="none", ecolor="#C2452D", elinewidth=1.2,
                    capsize=4, label=f"available distance \u00b1 1 sd ({L(sd):.0f} {E})")


DIRECTION_HATCH = {"increasing": "////", "decreasing": "\\\\\\\\"}
"""The hatch of each direction's deficient stretch: rising to the right for increasing chainage,
falling for decreasing (common practice, no source: two directions told apart without colour)."""


def deficient_spans(ax, rows: pd.DataFrame, L, lo: float = -np.inf, hi: float = np.inf,
                    what: str = "lacking SSD", what_undecided: str = "may lack SSD") -> list:
    """Shade every deficient stretch of ``rows`` between ``lo`` and ``hi``, each direction with its
    own hatch and each severity in its colour; one legend entry per direction and severity.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        The axes.
    rows : pandas.DataFrame
        Deficient stretches (``direction``, ``from_m``, ``to_m``, ``severity``, ``verdict``).
    L : callable
        Metres to the output length unit.
    lo, hi : float
        The chainages shown (m); stretches outside are left out.
    what, what_undecided : str
        The legend's words for a stretch, and for one of a curve whose verdict is undetermined.

    Returns
    -------
    list of matplotlib.patches.Polygon
        The spans drawn, each with ``gid`` ``deficient-<direction>``.
    """
    spans, labelled = [], set()
    first = rows.assign(_inc=rows["direction"] != "increasing").sort_values(["_inc", "from_m"])
    for _, d in first.iterrows():
        a, b = min(d["from_m"], d["to_m"]), max(d["from_m"], d["to_m"])
        if b < lo or a > hi:
            continue
        colour = SEVERITY_COLOURS.get(d["severity"], ROAD_GREY)
        key = (d["direction"], d["severity"], d.get("verdict"))
        undecided = d.get("verdict") == "undetermined"
        label = (f"{what_undecided if undecided else what}, {d['direction']} ({d['severity']})"
                 if key not in labelled else None)
        labelled.add(key)
        spans.append(ax.axvspan(L(max(a, lo)), L(min(b, hi)) + 1e-9, facecolor=colour, alpha=0.35,
                                hatch=DIRECTION_HATCH.get(d["direction"], "xx"), edgecolor="#5A3A1A",
                                lw=0, label=label, gid=f"deficient-{d['direction']}"))
    return spans


def _hidden_marks(ax, p: pd.DataFrame, rows: pd.DataFrame, worst: pd.Series, L) -> None:
    """Every direction's driver positions lacking SSD, the road hidden at the required SSD and
    the hidden hazard (those of the row ranked first)."""
    deficient_spans(ax, rows, L)
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
                hi: float, size: tuple[float, float] = (11.0, 4.6), fig=None):
    """A road's long profile between two chainages, for the field sheets and the report's road index.

    Parameters
    ----------
    prof : pandas.DataFrame
        The road's stations (``chainage_m``, ``ground_z_m``, ``fitted_z_m``).
    curves : pandas.DataFrame
        The road's vertical curves, labelled with kind, number, K and verdict.
    rows : pandas.DataFrame
        The road's deficient stretches, shaded by severity, each direction hatched its own way
        (:func:`deficient_spans`).
    units : OutputUnits
        The run's output units.
    title : str
        The figure's title.
    lo, hi : float
        The chainages shown (m).
    size : (float, float), default (11.0, 4.6)
        The figure's width and height (inches).
    fig : matplotlib.figure.Figure, optional
        A figure of that size to draw into, cleared first (one a drawing process keeps for all its
        roads, which spares making a figure per road); a new one when not given.

    Returns
    -------
    matplotlib.figure.Figure
        ``fig`` when given.
    """
    plt = pyplot()
    L, E = units.length, units.length_label
    p = prof[(prof["chainage_m"] >= lo) & (prof["chainage_m"] <= hi)]
    if fig is None:
        fig, ax = plt.subplots(figsize=size)
    else:
        fig.clear()
        ax = fig.add_subplot()
    fig.subplots_adjust(left=0.07, right=0.75, bottom=0.12 * 4.6 / size[1], top=1 - 0.08 * 4.6 / size[1])
    ax.plot(L(p["chainage_m"]), L(p["ground_z_m"]), ".", ms=2, color="#7A7A7A", label="ground samples")
    ax.plot(L(p["chainage_m"]), L(p["fitted_z_m"]), "-", color="black", lw=1.3, label="recovered alignment")
    deficient_spans(ax, rows, L, lo, hi, what="deficient", what_undecided="undetermined")
    for _, c in curves.iterrows():
        if c["pvt_m"] < lo or c["pvc_m"] > hi:
            continue
        y = float(np.interp(c["pvi_m"], p["chainage_m"], p["fitted_z_m"])) if len(p) else 0.0
        mark = "deficient" if bool(c.get("deficient", False)) else ""
        ax.annotate(f"{c['kind']} {int(c['curve_no'])}\nK {L(c['k']) if units.us else c['k']:.0f} {mark}",
                    (L(c["pvi_m"]), L(y)), xytext=(0, 14 if c["kind"] == "crest" else -26),
                    textcoords="offset points", ha="center", fontsize=7.5)
    ax.set_xlim(L(lo), L(hi))
    if len(p):  # room above and below for the curves' labels
        z0, z1 = float(np.nanmin(p["fitted_z_m"])), float(np.nanmax(p["fitted_z_m"]))
        span = max(z1 - z0, 1.0)
        ax.set_ylim(L(z0 - 0.3 * span), L(z1 + 0.4 * span))
    ax.set_xlabel(f"chainage ({E}); hatching: direction of travel")
    ax.set_ylabel(f"elevation ({E})")
    ax.set_title(title)
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8)
    return fig
