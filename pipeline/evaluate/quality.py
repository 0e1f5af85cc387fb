"""What the ground data can support: resolution, estimated error, and in plain words what
this data cannot judge. Shown in ``run.json``, the report's summary, the workbook and by
``sightaudit validate`` before a run."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..profile.corridor import dem_vertical_error_m


def _median(values) -> float | None:
    v = pd.to_numeric(pd.Series(values), errors="coerce").to_numpy(dtype=float)
    v = v[np.isfinite(v)]
    return float(np.median(v)) if len(v) else None


def cannot_judge(ground_kind: str, spacing_m: float | None, resolution_m: float | None,
                 max_cell_for_verdict_m: float = 20.0) -> list[str]:
    """Plain sentences on what ground data of this kind and resolution cannot judge.

    Parameters
    ----------
    ground_kind : str
        'dem' or 'points'.
    spacing_m : float or None
        DEM cell or ground-point spacing (m).
    resolution_m : float or None
        Shortest feature the profile resolves (m), :func:`pipeline.profile.corridor.resolution_length_m`.
    max_cell_for_verdict_m : float
        DEM cells coarser than this get no curve verdict (``confidence.max_cell_for_verdict_m``).

    Returns
    -------
    list of str
        The sentences, at least one.

    Notes
    -----
    The thresholds are common practice, no source: DEMs of 1-2 m from airborne LiDAR show the
    road prism; at 5-10 m a cell mixes carriageway and batters; national DEMs of 30 m and
    coarser are made for terrain, not roads.
    """
    out = []
    if resolution_m is None or spacing_m is None:
        return ["the ground data's resolution is unknown: no road had usable ground data"]
    what = f"DEM cells of {spacing_m:.1f} m" if ground_kind == "dem" else f"ground points every {spacing_m:.1f} m"
    if ground_kind == "dem" and spacing_m > max_cell_for_verdict_m:
        out.append(f"{what} cannot support a verdict on a single vertical curve of a rural road: the cells are "
                   f"as long as many curves and mix the road with the land beside it. No curve is judged here: "
                   f"every verdict is undetermined, and the curves found are only pointers for a survey or a "
                   f"finer DEM.")
    if resolution_m > 4.0:
        out.append(f"With {what}, no feature shorter than about {resolution_m:.0f} m is resolved: a short, sharp "
                   f"crest or sag (L under about {2 * resolution_m:.0f} m) may be missed or smoothed into a "
                   f"gentler one, so a curve judged adequate here can still be deficient where a short crest "
                   f"sits on it. Verdicts near the requirement are left undetermined; a DEM of 2 m or finer, "
                   f"or a survey, settles them.")
    if ground_kind == "dem" and spacing_m > 3.0:
        out.append("The carriageway cannot be told from its cut and fill batters at this cell size: the profile "
                   "follows the cells' mean, filtered against the grid's ripple, not the road surface itself.")
    if not out:
        out.append(f"With {what}, curves of 10 m and longer are resolved; what remains uncertain is shown per "
                   f"curve (standard deviations, probability of deficiency and verdict).")
    return out


def data_quality(ground_kind: str, roads: pd.DataFrame, curves: pd.DataFrame, stated_error_m: float = 0.0,
                 max_cell_for_verdict_m: float = 20.0) -> dict:
    """The data-quality statement of a run.

    Parameters
    ----------
    ground_kind : str
        'dem' or 'points'.
    stated_error_m : float
        ``ground.vertical_error_m``; 0 = assumed from the DEM's cell size.
    max_cell_for_verdict_m : float
        ``confidence.max_cell_for_verdict_m``.
    roads : DataFrame
        The road table with ``status``, ``length_m``, ``ground_spacing_m`` and ``resolution_m``.
    curves : DataFrame
        The judged curves with ``confidence``, ``verdict``, ``noise_sd_m`` and ``noise_rho``.

    Returns
    -------
    dict
        ``ground_kind, spacing_m, resolution_m, noise_sd_m, noise_rho`` (medians over roads and
        curves), ``curves``, ``curves_high_pct``, ``curves_undetermined_pct``,
        ``km_evaluated``, ``km_high_pct`` (km of road all of whose curves have high-confidence
        verdicts; a road with no curve counts in full) and ``cannot_judge`` (sentences).
    """
    ev = roads[roads["status"] == "evaluated"] if len(roads) else roads
    spacing = _median(ev["ground_spacing_m"]) if "ground_spacing_m" in ev else None
    res = _median(ev["resolution_m"]) if "resolution_m" in ev else None
    if stated_error_m > 0:
        err, basis = stated_error_m, "stated (ground.vertical_error_m)"
    elif ground_kind == "dem" and spacing is not None:
        err, basis = dem_vertical_error_m(spacing), "assumed from the DEM's cell size (ground.vertical_error_m = 0)"
    else:
        err, basis = None, "estimated from the ground points' scatter about the fit"
    n = len(curves)
    high = (curves["confidence"] == "high") if n else pd.Series(dtype=bool)
    km = float(ev["length_m"].sum()) / 1000.0 if len(ev) else 0.0
    if n:
        all_high = high.groupby(curves["road_id"]).all()
        ok = ev["road_id"].map(all_high).fillna(True).astype(bool)
        km_high = float(ev.loc[ok.to_numpy(), "length_m"].sum()) / 1000.0
    else:
        km_high = km
    return {
        "ground_kind": ground_kind,
        "spacing_m": None if spacing is None else round(spacing, 2),
        "resolution_m": None if res is None else round(res, 1),
        "noise_sd_m": None if not n else _round(_median(curves["noise_sd_m"]), 3),
        "noise_rho": None if not n else _round(_median(curves["noise_rho"]), 2),
        "curves": int(n),
        "curves_high_pct": round(100.0 * float(high.mean()), 1) if n else None,
        "curves_undetermined_pct": round(100.0 * float((curves["verdict"] == "undetermined").mean()), 1) if n else None,
        "km_evaluated": round(km, 3),
        "km_high_pct": round(100.0 * km_high / km, 1) if km > 0 else None,
        "vertical_error_m": err,
        "vertical_error_basis": basis,
        "cannot_judge": cannot_judge(ground_kind, spacing, res, max_cell_for_verdict_m),
    }


def _round(v, nd):
    return None if v is None else round(v, nd)
