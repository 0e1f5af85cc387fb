"""The sight stage for one road: available sight distance both ways on the fitted alignment
(and, as a diagnostic, on the ground profile), each vertical curve seen from its PVC and PVT,
and the zone hidden beyond every crest with the hazards in it."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..alignment.fit import RoadProfile
from ..core.config import Config
from ..sight.hazards import hazards_in_zone, hidden_zone
from ..sight.attribution import LIMIT_NAMES, attribute
from ..sight.closed_form import crest_sight_formula, sag_sight_formula
from ..sight.lines import sight_both_ways, sight_from
from ..sight.spread import sight_sd

HAZARD_COLUMNS = ["road_id", "curve_no", "direction", "hidden_from_m", "hidden_to_m", "hidden_hazard",
                  "hazard_chainage_m", "hazard_detail"]


@dataclass
class SightStage:
    """What the sight stage gives for one road: the profile with the sight columns added,
    the curve table with ``sight_sd_m`` and ``sight_formula_m`` added (where there are
    curves), the key points (each curve from its PVC and PVT; ``None`` where none) and the
    fitted alignment as a whole (``None`` where nothing was fitted)."""

    profile: pd.DataFrame
    curves: pd.DataFrame
    keypoints: pd.DataFrame | None = None
    road: RoadProfile | None = None


def road_sight(road_id: str, profile: pd.DataFrame, curves: pd.DataFrame, stretches: list, rules,
               cfg: Config) -> SightStage:
    """Available sight distance both ways on the fitted alignment (the sight stage).

    Parameters
    ----------
    road_id : str
        The road.
    profile : pandas.DataFrame
        The alignment stage's profile (``chainage_m``, ``ground_z_m``, ``ground_flag``; m);
        not changed.
    curves : pandas.DataFrame
        The alignment stage's curve table (``curve_no, kind, pvc_m, pvt_m, a_pct, length_m``
        and their standard deviations); not changed.
    stretches : list of Alignment
        The fitted stretches.
    rules : SightRules
        Eye, object and headlight heights (m) and beam angle (degrees) of the criteria set.
    cfg : Config
        The run's settings (``sight.fine_step_m``, m; ``sight.ground_diagnostic``).

    Returns
    -------
    SightStage
        New profile and curve tables with the sight columns (m) added, the key points and
        the fitted alignment.
    """
    ch = profile["chainage_m"].to_numpy()
    fine = cfg["sight.fine_step_m"]
    if len(ch) < 2 or not stretches:
        return SightStage(profile=profile.assign(sight_fwd_m=np.nan, sight_back_m=np.nan), curves=curves)
    road = RoadProfile(stretches)
    res = sight_both_ways(ch, road.z, rules, fine, curves=curves, grade=road.grade)
    cols = {}
    for name in ("fwd", "back"):
        cols[f"sight_{name}_m"] = res[f"sight_{name}_m"]
        cols[f"limit_{name}"] = LIMIT_NAMES[res[f"limit_{name}"]]
        cols[f"curve_{name}"] = res[f"curve_{name}"]
        cols[f"limit_at_{name}_m"] = res[f"limit_at_{name}_m"]
    if cfg["sight.ground_diagnostic"]:
        cols |= _ground_sight(profile, rules)
    keypoints = None
    if len(curves):
        keypoints = _keypoints(road_id, curves, road, rules, fine)
        curves = curves.assign(**_curve_sight(curves, rules, fine))
    return SightStage(profile=profile.assign(**cols), curves=curves, keypoints=keypoints, road=road)


def _ground_sight(profile: pd.DataFrame, rules) -> dict[str, np.ndarray]:
    """Sight distance both ways on the ground profile itself (a diagnostic). The ground is
    known only at the stations: its lines of sight are checked at that step (the headlight
    test means little on raw, noisy ground)."""
    ch = profile["chainage_m"].to_numpy()
    z = np.where(profile["ground_flag"].to_numpy() == "masked", np.nan, profile["ground_z_m"].to_numpy())
    ground = sight_both_ways(ch, lambda x: np.interp(x, ch, z, left=np.nan, right=np.nan), rules,
                             float(ch[1] - ch[0]), headlight=False)
    return {"ground_sight_fwd_m": ground["sight_fwd_m"], "ground_sight_back_m": ground["sight_back_m"]}


def _keypoints(road_id: str, curves: pd.DataFrame, road: RoadProfile, rules, fine: float) -> pd.DataFrame:
    """Each curve seen from its PVC looking ahead and from its PVT looking back, where the
    curve itself limits the sight there."""
    rows = []
    for direction, col, sign in (("increasing", "pvc_m", 1), ("decreasing", "pvt_m", -1)):
        eyes = curves[col].to_numpy(dtype=float)
        r = sight_from(eyes, road.z, road.grade, rules, sign, fine)
        no = attribute(eyes, r["limit_at_m"], r["limit"], curves, forward=sign > 0, tol_m=max(1.0, 2 * fine))
        keep = no == curves["curve_no"].to_numpy()
        rows.append(pd.DataFrame({
            "road_id": road_id, "chainage_m": eyes[keep], "direction": direction,
            "sight_m": r["sight_m"][keep], "limit_kind": LIMIT_NAMES[r["limit"][keep]],
            "curve_no": no[keep], "grade": sign * road.grade(eyes[keep]),
        }))
    return pd.concat(rows, ignore_index=True)


def _curve_sight(curves: pd.DataFrame, rules, fine: float) -> dict[str, np.ndarray]:
    """Each curve's sight-distance spread from its parameters' uncertainty
    (``sight_sd_m``) and its closed-form sight distance (``sight_formula_m``), both m."""
    a, L = curves["a_pct"].to_numpy(float), curves["length_m"].to_numpy(float)
    sd = sight_sd(curves["kind"].to_numpy(), a, L, curves["a_sd_pct"].to_numpy(float),
                  curves["length_sd_m"].to_numpy(float), curves["corr_al"].to_numpy(float),
                  rules, extra_sd_m=fine)
    formula = np.where(curves["kind"] == "crest",
                       crest_sight_formula(a, L, rules.eye_height_m, rules.object_height_m),
                       sag_sight_formula(a, L, rules.headlight_height_m, rules.beam_angle_deg))
    return {"sight_sd_m": sd, "sight_formula_m": formula}


def road_hazards(road_id: str, profile: pd.DataFrame, curves: pd.DataFrame | None, hcurves: pd.DataFrame | None,
                 stretches: list, road: RoadProfile | None, junctions: list, cset, cfg: Config) -> pd.DataFrame:
    """Hidden zone beyond every crest, both ways, and the hazards in it.

    The zone is found at the required SSD for the speed judged at the crest; the hazards are
    horizontal curves beginning in it, and junctions and accesses in it.

    Parameters
    ----------
    road_id : str
        The road.
    profile : pandas.DataFrame
        The profile with ``chainage_m`` and ``speed_fwd_kmh``, ``speed_back_kmh`` (km/h).
    curves : pandas.DataFrame or None
        The vertical curve table (``kind``, ``curve_no``, ``pvi_m``, ``pvc_m``, ``pvt_m``; m).
    hcurves : pandas.DataFrame or None
        The horizontal curves (chainages in m).
    stretches : list of Alignment
        The fitted stretches.
    road : RoadProfile or None
        The fitted alignment from the sight stage (built from ``stretches`` where ``None``).
    junctions : list of (float, str)
        Junctions and accesses on the road: chainage (m) and label.
    cset : CriteriaSet
        The criteria set (design SSD, its units, the sight rules).
    cfg : Config
        The run's settings (``sight.fine_step_m``, m).

    Returns
    -------
    pandas.DataFrame
        :data:`HAZARD_COLUMNS`, one row per crest and direction (none without crests).
    """
    rows = []
    crests = curves[curves["kind"] == "crest"] if curves is not None and len(curves) else []
    if len(crests) and stretches:
        road = road if road is not None else RoadProfile(stretches)
        ch = profile["chainage_m"].to_numpy()
        rules = cset.sight_rules()
        for c in crests.itertuples():
            i = int(np.clip(np.searchsorted(ch, c.pvi_m), 0, len(ch) - 1))
            for direction, col in (("increasing", "speed_fwd_kmh"), ("decreasing", "speed_back_kmh")):
                sign = 1 if direction == "increasing" else -1
                v = float(profile[col].iloc[i])
                # on the grade a driver comes up the crest on, where the requirement is on grade
                grade = (c.g1_pct if sign > 0 else -c.g2_pct) / 100.0 if cfg["criteria.grade_adjusted"] else None
                ssd = float(cset.ssd_design(v / cset.speed_to_kmh, grade)) * cset.length_to_m
                zone = hidden_zone(road.z_grid, c.pvi_m, c.pvt_m if sign > 0 else c.pvc_m, ssd, sign,
                                   rules.eye_height_m, 0.0, cfg["sight.fine_step_m"], float(ch[-1]))
                rows.append({"road_id": road_id, "curve_no": c.curve_no, "direction": direction}
                            | hazards_in_zone(zone, sign, hcurves, junctions))
    return pd.DataFrame(rows, columns=HAZARD_COLUMNS)
