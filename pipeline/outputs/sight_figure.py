"""The report's section on roadside sight (the 3D sight lines): for each roadside deficiency,
its facts and a plan view of the road, the sight lines the drivers need, the ones they have,
the area to clear and the points that block the view.

Drawn with matplotlib (Agg, through :func:`pipeline.outputs.figures.pyplot`); everything is in
the roads' own CRS, as written in ``audit.gpkg``.
"""

from __future__ import annotations

import html

import numpy as np
import pandas as pd
import shapely

from ..sight.sight3d import lane_width
from .figures import png_data_uri, pyplot

CLEAR = "#E08A1E"
BLOCK = "#7A3B10"
HAVE = "#8B1A1A"


def _lane_xy(p: pd.DataFrame, ch: np.ndarray, side: int, offset: float) -> np.ndarray:
    """Points ``offset`` m to the left (``side`` +1) or right (-1) of the stations' line at
    chainages ``ch`` (m), from the stations' ``x, y``."""
    s, x, y = p["chainage_m"].to_numpy(float), p["x"].to_numpy(float), p["y"].to_numpy(float)
    tx, ty = np.gradient(x), np.gradient(y)
    n = np.hypot(tx, ty)
    n[n == 0] = 1.0
    px, py = np.interp(ch, s, x), np.interp(ch, s, y)
    nx, ny = np.interp(ch, s, -ty / n), np.interp(ch, s, tx / n)
    return np.column_stack([px + side * offset * nx, py + side * offset * ny])


def roadside_png(row: pd.Series, stations: pd.DataFrame, clear: pd.DataFrame, lane_offset_m: float,
                 traffic_side: str) -> str:
    """A plan view of one roadside deficiency, as a PNG data URI.

    Parameters
    ----------
    row : pandas.Series
        The inventory row (``direction, from_m, to_m, ssd_required_m, sight_available_m``; m).
    stations : pandas.DataFrame
        The road's stations (``chainage_m, x, y`` in the roads' CRS, ``sight_3d_fwd_m``,
        ``sight_3d_back_m``; m).
    clear : pandas.DataFrame
        The stage's clearance rows for the stretch (``clearance_wkt``, ``blocking_wkt``).
    lane_offset_m : float
        Half a lane (m).
    traffic_side : str
        ``right`` or ``left``.

    Returns
    -------
    str
        The figure: the centreline, the lane's sight lines each driver position needs (to the
        required SSD; thin) and has (to the 3D sight; thick), the area to clear and the blocking
        points. Equal scales; the planar coordinates of the roads' CRS (a projected CRS gives
        metres).
    """
    plt = pyplot()
    fig, ax = plt.subplots(figsize=(7.5, 5.5))
    sign = 1 if row["direction"] == "increasing" else -1
    side = (-1 if traffic_side == "right" else 1) * sign
    need = float(row["ssd_required_m"])
    lo, hi = float(row["from_m"]), float(row["to_m"])
    span = (lo - 30, hi + need + 30) if sign > 0 else (lo - need - 30, hi + 30)
    s = stations["chainage_m"].to_numpy(float)
    near = stations[(s >= span[0]) & (s <= span[1])]
    ax.plot(near["x"], near["y"], color="#555555", lw=1.2, label="centreline")
    for w in clear["clearance_wkt"].dropna():
        for g in shapely.get_parts(shapely.from_wkt(w)):
            for ring in [g.exterior, *g.interiors]:
                xy = np.asarray(ring.coords)
                ax.fill(xy[:, 0], xy[:, 1], color=CLEAR, alpha=0.55, lw=0)
    ax.fill([], [], color=CLEAR, alpha=0.55, label="area to clear")
    eyes = np.unique(np.linspace(lo, hi, 6).round(1))
    have_col = "sight_3d_fwd_m" if sign > 0 else "sight_3d_back_m"
    have = np.interp(eyes, s, stations[have_col].to_numpy(float))
    e_xy = _lane_xy(stations, eyes, side, lane_offset_m)
    n_xy = _lane_xy(stations, np.clip(eyes + sign * need, s[0], s[-1]), side, lane_offset_m)
    h_xy = _lane_xy(stations, np.clip(eyes + sign * have, s[0], s[-1]), side, lane_offset_m)
    for i in range(len(eyes)):
        ax.plot([e_xy[i, 0], h_xy[i, 0]], [e_xy[i, 1], h_xy[i, 1]], color=HAVE, lw=2.2, zorder=3,
                label="sight available (3D)" if i == 0 else None)
        ax.plot([e_xy[i, 0], n_xy[i, 0]], [e_xy[i, 1], n_xy[i, 1]], color="#3A6EA5", lw=0.9, ls="--", zorder=4,
                label="sight line needed (required SSD)" if i == 0 else None)
    ax.scatter(e_xy[:, 0], e_xy[:, 1], s=14, color="black", zorder=5, label="driver positions")
    pts = [np.asarray(shapely.get_coordinates(shapely.from_wkt(w))) for w in clear["blocking_wkt"].dropna()]
    if pts:
        p = np.vstack(pts)
        ax.scatter(p[:, 0], p[:, 1], s=9, color=BLOCK, zorder=6, label="blocking points")
    ax.set_aspect("equal", adjustable="datalim")
    ax.ticklabel_format(useOffset=False, style="plain")
    ax.tick_params(labelsize=7)
    ax.legend(fontsize=7, loc="best")
    ax.set_title(f"{row['road_id']} {row['direction']} chainage, {lo:.0f}-{hi:.0f} m: plan view", fontsize=9)
    return png_data_uri(fig)


def _roadside_rows(result) -> pd.DataFrame:
    """The inventory's roadside rows, in rank order."""
    inv = result.evaluation.inventory
    road = inv[inv["kind"] == "roadside"] if "kind" in inv else inv.iloc[:0]
    return road.sort_values("rank")


def _roadside_spec(result, r, cfg) -> dict:
    """The keyword arguments of :func:`roadside_png` for one roadside row ``r`` (a named tuple)."""
    cl = result.clearances
    mine = cl[(cl["road_id"] == r.road_id) & (cl["direction"] == r.direction)
              & (cl["from_m"] <= r.to_m + result.step_m / 2) & (cl["to_m"] >= r.from_m - result.step_m / 2)] \
        if len(cl) else cl
    return {"row": pd.Series(r._asdict()), "stations": result.road_profile(r.road_id), "clear": mine,
            "lane_offset_m": lane_width(cfg) / 2.0, "traffic_side": cfg["sight.traffic_side"]}


def roadside_pngs(result, cfg, pool=None) -> dict:
    """The plan views of the roadside rows, drawn in ``pool`` when given.

    Parameters
    ----------
    result : NetworkResult
        The run's result (inventory, stations, clearances).
    cfg : Config
        The run's settings (lane width, traffic side).
    pool : concurrent.futures.Executor, optional
        Where to draw them; without it they are drawn here, one after another.

    Returns
    -------
    dict
        ``rank -> value``: a ``data:image/png`` URI, a future of one (with a pool), or the
        exception that stopped the figure (a placeholder in :func:`roadside_section`).
    """
    out: dict = {}
    for r in _roadside_rows(result).itertuples():
        try:
            spec = _roadside_spec(result, r, cfg)
            out[r.rank] = pool.submit(_roadside_png_of, spec) if pool is not None else roadside_png(**spec)
        except Exception as exc:  # a figure that fails leaves a placeholder
            out[r.rank] = exc
    return out


def _roadside_png_of(spec: dict) -> str:
    """:func:`roadside_png` of one spec (a top-level function, for a pool of processes)."""
    return roadside_png(**spec)


def roadside_section(result, units, cfg, pngs: dict | None = None) -> list[str]:
    """The report's section on roadside sight: one entry per roadside row of the inventory, in
    rank order, with its facts and plan view (a placeholder where the figure fails).

    Parameters
    ----------
    result : NetworkResult
        The run's result (inventory, stations, clearances).
    units : OutputUnits
        The run's output units (distances and speeds in the facts; areas and volumes stay in m²
        and m³).
    cfg : Config
        The run's settings (lane width, traffic side).
    pngs : dict, optional
        The plan views from :func:`roadside_pngs` (drawn here when not given).

    Returns
    -------
    list of str
        HTML parts; a sentence saying why where there is no roadside row.
    """
    road = _roadside_rows(result)
    head = "<section id='roadside'><h2>Roadside sight (3D sight lines)</h2>"
    if not len(road):
        dem = (result.ground_info or {}).get("kind") == "dem"
        why = ("No stretch where the ground or objects beside the road hide the road ahead within the required "
               "stopping sight distance while the road's profile does not." if dem and cfg["sight.three_d"] else
               "Not measured: the 3D sight lines need a DEM as the ground model (and sight.three_d on).")
        return [head, f"<p>{html.escape(why)}</p></section>"]
    if pngs is None:
        pngs = roadside_pngs(result, cfg)
    parts = [head,
             "<p>Stretches where the ground or objects beside the road, not the road's own profile, hide the "
             "road ahead within the required stopping sight distance: the sight lines measured in 3D over the DEM "
             "from the centre of the lane. Each plan view shows the lines a driver needs (dashed), the sight "
             "available (solid), the area to clear and the points that block the view.</p>"]
    L = units.length_label
    conv = (lambda v: v / units.divisor("x_m"))  # noqa: E731
    for r in road.itertuples():
        facts = [("rank", str(r.rank)), ("road", f"{r.road_id} {r.road_name or ''}".strip()),
                 ("direction", r.direction), ("driver positions", f"{conv(r.from_m):.0f}-{conv(r.to_m):.0f} {L}"),
                 ("horizontal curve", str(int(r.hcurve_no)) if pd.notna(r.hcurve_no) and r.hcurve_no else "none"),
                 ("limited by", str(r.limit_kind)),
                 ("sight available / required", f"{conv(r.sight_available_m):.0f} / {conv(r.ssd_required_m):.0f} {L}"),
                 ("speed the sight supports", f"{r.supported_speed_kmh / units.divisor('speed_kmh'):.0f} "
                                              f"{units.speed_label}"),
                 ("area to clear", f"{r.clear_area_m2:.0f} m²" if pd.notna(r.clear_area_m2) else "-"),
                 ("ground to cut", f"{r.clear_volume_m3:.0f} m³" if pd.notna(r.clear_volume_m3) else "-"),
                 ("verdict", f"{r.verdict} ({r.confidence} confidence)"), ("first thought", str(r.treatment_hint))]
        rows = "".join(f"<tr><th>{html.escape(k)}</th><td>{html.escape(v)}</td></tr>" for k, v in facts)
        try:
            png = pngs.get(r.rank)
            png = png.result() if hasattr(png, "result") else png
            if not isinstance(png, str):
                raise png if isinstance(png, Exception) else ValueError("no plan view")
            img = f"<img alt='Plan view of {html.escape(str(r.road_id))} roadside sight' src='{png}'>"
        except Exception:  # a figure that fails leaves a placeholder; the facts stand
            img = "<p class='small'>(the plan view could not be drawn)</p>"
        parts.append(f"<section class='curve' id='roadside-{r.rank}'><h3>Rank {r.rank}: {html.escape(str(r.road_id))}, "
                     f"{html.escape(r.direction)}</h3><table class='facts'>{rows}</table>{img}</section>")
    parts.append("</section>")
    return parts
