"""The plan and speed stages for one road: horizontal curves of the centreline
(:mod:`pipeline.plan.horizontal`), the predicted operating speed both ways
(:mod:`pipeline.plan.speed`), the speed each station is judged at, and each horizontal
curve's minimum-radius and sight-line-offset checks."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..core.config import Config
from ..plan.horizontal import horizontal_curves, min_radius_m, sight_line_offset
from ..plan.speed import predict_v85

PREDICTED = "predicted (FHWA-RD-99-171)"

# the columns road_hcurve_checks adds to each horizontal curve
HCURVE_CHECK_COLUMNS = ["speed_kmh", "r_min_m", "below_min_radius", "ssd_required_m", "hso_m", "hso_valid",
                        "v85_kmh"]


def road_plan(road_id: str, line, polyline, cfg: Config) -> pd.DataFrame:
    """Horizontal curves of the centreline (the plan stage).

    Parameters
    ----------
    road_id : str
        The road.
    line : shapely.LineString
        The centreline in the working CRS (m).
    polyline : Polyline
        The same line prepared for chainage look-ups (from the profile stage).
    cfg : Config
        The run's settings (``plan.*``: ``smooth_m``, ``max_radius_m``, ``min_length_m`` in m,
        ``min_deflection_deg`` in degrees; ``profile.step_m`` in m).

    Returns
    -------
    pandas.DataFrame
        One row per horizontal curve (``road_id`` first; chainages, radius and length in m).
    """
    opts = {k: cfg[f"plan.{k}"] for k in ("smooth_m", "max_radius_m", "min_length_m", "min_deflection_deg")}
    opts["step_m"] = min(cfg["profile.step_m"], 5.0)
    hc = horizontal_curves(line, opts, polyline)
    hc.insert(0, "road_id", road_id)
    return hc


def road_speeds(profile: pd.DataFrame, curves: pd.DataFrame | None, hcurves: pd.DataFrame | None,
                keypoints: pd.DataFrame | None, row: pd.Series, cfg: Config
                ) -> tuple[pd.DataFrame, pd.DataFrame | None]:
    """Predicted operating speed at every station both ways, and the speed each station is
    judged at (the road's speed, or the prediction where the road's basis is predicted).

    Parameters
    ----------
    profile : pandas.DataFrame
        The profile with ``chainage_m`` (m) and ``grade_pct`` (%); not changed.
    curves : pandas.DataFrame or None
        The vertical curve table.
    hcurves : pandas.DataFrame or None
        The horizontal curves.
    keypoints : pandas.DataFrame or None
        The sight stage's key points (``chainage_m``, ``direction``); not changed.
    row : pandas.Series
        The road's row (``speed_basis``, ``speed_kmh`` in km/h).
    cfg : Config
        The run's settings (``speed.desired_kmh``, km/h).

    Returns
    -------
    profile : pandas.DataFrame
        A new profile with ``v85_fwd_kmh, v85_back_kmh, speed_fwd_kmh, speed_back_kmh``
        (km/h) added.
    keypoints : pandas.DataFrame or None
        New key points with ``speed_kmh`` (km/h) added; as given where there are none.
    """
    ch, g = profile["chainage_m"].to_numpy(), profile["grade_pct"].to_numpy()
    vc = curves if curves is not None else pd.DataFrame()
    desired = cfg["speed.desired_kmh"]
    v85_fwd = predict_v85(ch, g, vc, hcurves, desired, +1)
    v85_back = predict_v85(ch, g, vc, hcurves, desired, -1)
    profile = profile.assign(v85_fwd_kmh=v85_fwd, v85_back_kmh=v85_back)
    if row["speed_basis"] == PREDICTED:
        profile = profile.assign(speed_fwd_kmh=profile["v85_fwd_kmh"], speed_back_kmh=profile["v85_back_kmh"])
    else:
        profile = profile.assign(speed_fwd_kmh=float(row["speed_kmh"]), speed_back_kmh=float(row["speed_kmh"]))
    if keypoints is not None and len(keypoints):
        fwd = keypoints["direction"] == "increasing"
        keypoints = keypoints.assign(speed_kmh=np.where(
            fwd, np.interp(keypoints["chainage_m"], ch, profile["speed_fwd_kmh"]),
            np.interp(keypoints["chainage_m"], ch, profile["speed_back_kmh"])))
    return profile, keypoints


def road_hcurve_checks(hcurves: pd.DataFrame | None, profile: pd.DataFrame, cset, cfg: Config
                       ) -> pd.DataFrame | None:
    """Each horizontal curve's checks (see :mod:`pipeline.plan`).

    Parameters
    ----------
    hcurves : pandas.DataFrame or None
        The horizontal curves (``start_m, end_m, radius_m, length_m``; m); not changed.
    profile : pandas.DataFrame
        The profile with ``chainage_m`` (m) and the speeds of :func:`road_speeds` (km/h).
    cset : CriteriaSet
        The criteria set (side friction by speed, design SSD, their units).
    cfg : Config
        The run's settings (``plan.e_max_pct``, %; ``plan.lane_width_m``, m; with
        ``criteria.grade_adjusted`` the required SSD is that on the curve's grade downhill).

    Returns
    -------
    pandas.DataFrame or None
        A new table with :data:`HCURVE_CHECK_COLUMNS` added: the speed judged on the curve
        (the highest on it, km/h), the minimum radius for it (m), the required SSD (m), the
        sight line offset it needs (m) and whether that is valid (SSD within the curve), and
        the lowest predicted operating speed on it (km/h). As given where there are no curves.
    """
    if hcurves is None or not len(hcurves):
        return hcurves
    speed, vmin = _curve_speeds(hcurves, profile)
    f = np.interp(speed, cset.friction["speed"] * cset.speed_to_kmh, cset.friction["f_max"])
    r_min = min_radius_m(speed, cfg["plan.e_max_pct"] / 100.0, f)
    ssd = cset.ssd_design(speed / cset.speed_to_kmh) * cset.length_to_m
    if cfg["criteria.grade_adjusted"]:
        # on grade, the requirement of the downhill direction on the curve (the longer one)
        g = np.abs(np.interp(0.5 * (hcurves["start_m"] + hcurves["end_m"]), profile["chainage_m"],
                             profile["grade_pct"])) / 100.0
        ssd = cset.ssd_design(speed / cset.speed_to_kmh, -g) * cset.length_to_m
    hso = sight_line_offset(hcurves["radius_m"] - cfg["plan.lane_width_m"] / 2, ssd)
    return hcurves.assign(speed_kmh=speed, r_min_m=r_min, below_min_radius=hcurves["radius_m"] < r_min,
                          ssd_required_m=ssd, hso_m=hso, hso_valid=ssd <= hcurves["length_m"], v85_kmh=vmin)


def _curve_speeds(hcurves: pd.DataFrame, profile: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """Each horizontal curve's judged speed (the highest either way on it) and predicted
    operating speed (the lowest either way on it), km/h."""
    ch = profile["chainage_m"].to_numpy()
    sp = np.maximum(profile["speed_fwd_kmh"].to_numpy(), profile["speed_back_kmh"].to_numpy())
    v85 = np.minimum(profile["v85_fwd_kmh"].to_numpy(), profile["v85_back_kmh"].to_numpy())
    speed, vmin = [], []
    for a, b in zip(hcurves["start_m"].to_numpy(float), hcurves["end_m"].to_numpy(float)):
        i, j = np.searchsorted(ch, [a, b + 1e-9])
        i, j = min(i, len(ch) - 1), max(j, min(i, len(ch) - 1) + 1)
        speed.append(float(np.nanmax(sp[i:j])))
        vmin.append(float(np.nanmin(v85[i:j])))
    return np.asarray(speed, dtype=float), np.asarray(vmin, dtype=float)
