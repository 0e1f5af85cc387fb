"""The per-road stages of the audit: profile, artefacts, alignment, plan, sight, speeds and
hazards, for one road and for a chunk of roads (the unit of work a process or a cluster
worker runs).

Nothing here depends on another road, so chunks run anywhere in any order and give the same
result; :mod:`pipeline.batch` hands out the chunks and gathers what they return.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..core.config import Config
from ..ingest.readers import PointGround, transformer
from ..profile.corridor import dem_vertical_error_m, resolution_length_m
from ..profile.sampler import GroundSampler
from ..profile.stations import FILLED, FLAG_NAMES, MASKED, MISSING, Polyline, run_lengths, station_chainages

PREDICTED = "predicted (FHWA-RD-99-171)"


@dataclass
class RoadOutcome:
    road_id: str
    status: str = "evaluated"
    reason: str | None = None
    notes: list[tuple[str, float | None, float | None, str]] = field(default_factory=list)
    profile: pd.DataFrame | None = None
    curves: pd.DataFrame | None = None
    keypoints: pd.DataFrame | None = None
    polyline: object = None
    hcurves: pd.DataFrame | None = None
    hazards: pd.DataFrame | None = None
    road: object = None  # the fitted alignment (alignment.RoadProfile), once the sight stage built it
    data: dict = field(default_factory=dict)  # what the ground data resolve (profile stage)
    seconds: dict[str, float] = field(default_factory=dict)

    def skip(self, reason: str) -> "RoadOutcome":
        self.status, self.reason = "skipped", reason
        return self


def road_profile(row: pd.Series, sampler: GroundSampler, cfg: Config, to_source) -> RoadOutcome:
    """Stations and ground elevation for one road (the profile stage)."""
    out = RoadOutcome(road_id=row["road_id"])
    if isinstance(row["skip_reason"], str):
        return out.skip(row["skip_reason"])
    line = row["geometry"]
    poly = Polyline(line)
    out.polyline = poly
    stations = station_chainages(row["length_m"], cfg["profile.step_m"])
    z, flag, notes, extra = sampler.sample(line, row["work_key"], row["source_id"], stations, poly)
    out.notes.extend(notes)
    have = np.isfinite(z)
    if not have.any():
        return out.skip("no ground data along the road (off the DEM, all nodata, or no ground points)")
    if have.sum() < 3:
        return out.skip("fewer than 3 stations with ground data")
    if not have.all():
        out.notes.append(("road partly without ground data", None, None,
                          f"ground data cover {100 * have.mean():.0f} % of the road; evaluated over that part only"))
    # artefacts: spikes, pits, bridge or culvert dips, humps, known structures
    from ..alignment.fit import noise_sigma
    from ..profile.artefacts import detect, implausible_grades

    known = sampler.structure_ranges(row, line)
    mask, art_notes = detect(stations, z, cfg["profile.step_m"], noise_sigma(z), artefact_options(cfg), known)
    out.notes.extend(art_notes)
    flag = np.where(mask & (flag != MISSING), MASKED, flag).astype(np.int8)
    reason = implausible_grades(stations, np.where(mask, np.nan, z), cfg["artefacts.max_road_grade_pct"])
    if reason:
        return out.skip(reason)
    missing = ~have
    if missing.any():
        step = cfg["profile.step_m"]
        for a, b in run_lengths(missing):
            out.notes.append(("ground data missing", float(stations[a]), float(stations[b - 1]),
                              f"{b - a} station(s), {(b - a) * step:g} m, without ground data; "
                              f"not evaluated there"))
    if (flag == FILLED).any():
        for a, b in run_lengths(flag == FILLED):
            out.notes.append(("short ground gap interpolated", float(stations[a]), float(stations[b - 1]),
                              "elevations filled linearly across the gap and marked 'filled'"))
    x, y = poly.at(stations)
    if to_source is not None:
        x, y = to_source.transform(x, y)
    out.profile = pd.DataFrame({
        "road_id": row["road_id"],
        "chainage_m": stations,
        "x": np.asarray(x, dtype=float),
        "y": np.asarray(y, dtype=float),
        "ground_z_m": z,
        "ground_flag": FLAG_NAMES[flag],
        "ground_offset_m": extra["offset_m"],
        "filter_m": extra["filter_m"],
    })
    stated = float(cfg["ground.vertical_error_m"])
    out.data = {"cell_m": extra["cell_m"], "spacing_m": extra["spacing_m"],
                "vertical_error_m": stated if stated > 0 else dem_vertical_error_m(extra["cell_m"]),
                "resolution_m": resolution_length_m(extra["cell_m"], extra["spacing_m"], cfg["profile.step_m"],
                                                    float(np.median(extra["filter_m"])))}
    return out


def road_alignment(out: RoadOutcome, cfg: Config) -> list:
    """Fit the vertical alignment to a road's profile (the alignment stage), with each
    curve's uncertainty (:mod:`pipeline.uncertainty`); returns the fitted stretches."""
    from ..alignment.fit import fit_profile

    prof = out.profile
    ch = prof["chainage_m"].to_numpy()
    usable = np.where(prof["ground_flag"].to_numpy() == "masked", np.nan, prof["ground_z_m"].to_numpy())
    res_m = float(out.data.get("resolution_m", cfg["profile.step_m"]))
    filt = prof["filter_m"].to_numpy() if "filter_m" in prof else None
    # the ground data's own error and resolution bound what the fit may resolve: the noise is
    # at least the data's stated or assumed vertical error, and structure is sought on bins of
    # half the resolution length
    opts = alignment_options(cfg)
    err = float(out.data.get("vertical_error_m", 0.0))
    coarse = min(res_m / 2, float(ch[-1] - ch[0]) / 10)  # a short road still gets ten bins
    opts |= {"resolution_m": res_m, "noise_floor_m": max(opts["noise_floor_m"], err),
             "bin_m": max(opts["bin_m"], coarse), "min_tangent_m": max(opts["min_tangent_m"], coarse)}
    stretches, curves, fitted, grade = fit_profile(ch, usable, cfg["profile.step_m"], opts,
                                                   filter_m=filt if filt is not None and filt.any() else None)
    prof["fitted_z_m"] = fitted
    prof["grade_pct"] = grade * 100.0
    curves = curves.join(curve_uncertainties(stretches, ch, usable, res_m, opts["noise_floor_m"],
                                             out.data.get("cell_m")))
    _flag_angle_points(curves)
    curves.insert(0, "road_id", out.road_id)
    out.curves = curves
    return stretches


def _flag_angle_points(curves: pd.DataFrame) -> None:
    """Flag curves whose length is within two standard deviations of zero: the data show a
    grade change but cannot tell a short curve from an angle point."""
    if not len(curves):
        return
    short = (curves["length_m"] < 2 * curves["length_sd_m"]) & ~curves["flags"].str.contains("angle point")
    for i in curves.index[short]:
        flag = (f"angle point or very short curve: L = {curves.at[i, 'length_m']:.0f} m is within two standard "
                f"deviations ({2 * curves.at[i, 'length_sd_m']:.0f} m) of none at all")
        curves.at[i, "flags"] = "; ".join(f for f in (curves.at[i, "flags"], flag) if f)
        if curves.at[i, "confidence"] == "high":
            curves.at[i, "confidence"] = "medium"


UNCERTAINTY_COLUMNS = ["a_sd_pct", "length_sd_m", "corr_al", "k_sd", "noise_sd_m", "noise_rho", "significance",
                       "resolution_m", "ground_spacing_m"]


def curve_uncertainties(stretches: list, ch: np.ndarray, z: np.ndarray, res_m: float,
                        sigma_floor_m: float, cell_m: float | None = None) -> pd.DataFrame:
    """One row per curve, in the curve table's order: the standard deviations of A, L and K,
    the residual noise and its correlation, and the significance of the grade change
    (A / sd_A)."""
    from ..alignment.uncertainty import curve_parameter_covariance, k_sd

    rows = []
    for al in stretches:
        for i in range(1, len(al.x) - 1):
            u = curve_parameter_covariance(al, i, ch, z, sigma_floor_m, res_m, cell_m)
            rows.append(u)
    frame = pd.DataFrame(rows, columns=["a_sd_pct", "length_sd_m", "corr_al", "noise_sd_m", "noise_rho"])
    if not len(frame):
        return pd.DataFrame({c: pd.Series(dtype=float) for c in UNCERTAINTY_COLUMNS})
    a = np.concatenate([np.abs(np.diff(al.grades)) * 100 for al in stretches if len(al.x) > 2])
    L = np.concatenate([al.L[1:-1] for al in stretches if len(al.x) > 2])
    frame["k_sd"] = k_sd(a, L, frame["a_sd_pct"], frame["length_sd_m"], frame["corr_al"])
    with np.errstate(divide="ignore"):
        frame["significance"] = a / frame["a_sd_pct"].to_numpy()
    frame["resolution_m"] = res_m
    frame["ground_spacing_m"] = np.nan if cell_m is None else cell_m
    return frame[UNCERTAINTY_COLUMNS]


def artefact_options(cfg: Config) -> dict:
    return {k: cfg[f"artefacts.{k}"] for k in ("spike_m", "max_grade_pct", "min_k", "max_width_m")}


def alignment_options(cfg: Config) -> dict:
    return {k: cfg[f"alignment.{k}"] for k in ("min_tangent_m", "min_grade_change_pct", "split_gap_m",
                                                "short_tangent_m", "bin_m", "noise_floor_m")}


def road_sight(out: RoadOutcome, stretches: list, rules, cfg: Config) -> None:
    """Available sight distance both ways on the fitted alignment (and, as a diagnostic, on
    the ground profile); each curve also seen from its PVC and PVT (the sight stage)."""
    from ..alignment.fit import RoadProfile
    from ..sight.lines import (LIMIT_NAMES, attribute, crest_sight_formula, sag_sight_formula, sight_both_ways,
                        sight_from)
    from ..sight.spread import sight_sd

    prof, curves = out.profile, out.curves
    ch = prof["chainage_m"].to_numpy()
    fine = cfg["sight.fine_step_m"]
    if len(ch) < 2 or not stretches:
        for col in ("sight_fwd_m", "sight_back_m"):
            prof[col] = np.nan
        out.keypoints = None
        return
    road = out.road = RoadProfile(stretches)
    res = sight_both_ways(ch, road.z, rules, fine, curves=curves, grade=road.grade)
    for name in ("fwd", "back"):
        prof[f"sight_{name}_m"] = res[f"sight_{name}_m"]
        prof[f"limit_{name}"] = LIMIT_NAMES[res[f"limit_{name}"]]
        prof[f"curve_{name}"] = res[f"curve_{name}"]
        prof[f"limit_at_{name}_m"] = res[f"limit_at_{name}_m"]
    if cfg["sight.ground_diagnostic"]:
        z = np.where(prof["ground_flag"].to_numpy() == "masked", np.nan, prof["ground_z_m"].to_numpy())
        # the ground is known only at the stations: its lines of sight are checked at that step
        # (the headlight test means little on raw, noisy ground)
        ground = sight_both_ways(ch, lambda x: np.interp(x, ch, z, left=np.nan, right=np.nan), rules,
                                 float(ch[1] - ch[0]), headlight=False)
        prof["ground_sight_fwd_m"] = ground["sight_fwd_m"]
        prof["ground_sight_back_m"] = ground["sight_back_m"]
    # key points: each curve from its PVC looking ahead and from its PVT looking back
    rows = []
    if len(curves):
        for direction, col, sign in (("increasing", "pvc_m", 1), ("decreasing", "pvt_m", -1)):
            eyes = curves[col].to_numpy(dtype=float)
            r = sight_from(eyes, road.z, road.grade, rules, sign, fine)
            no = attribute(eyes, r["limit_at_m"], r["limit"], curves, forward=sign > 0, tol_m=max(1.0, 2 * fine))
            keep = no == curves["curve_no"].to_numpy()
            rows.append(pd.DataFrame({
                "road_id": out.road_id, "chainage_m": eyes[keep], "direction": direction,
                "sight_m": r["sight_m"][keep], "limit_kind": LIMIT_NAMES[r["limit"][keep]],
                "curve_no": no[keep], "grade": sign * road.grade(eyes[keep]),
            }))
        a, L = curves["a_pct"].to_numpy(float), curves["length_m"].to_numpy(float)
        curves["sight_sd_m"] = sight_sd(curves["kind"].to_numpy(), a, L, curves["a_sd_pct"].to_numpy(float),
                                        curves["length_sd_m"].to_numpy(float), curves["corr_al"].to_numpy(float),
                                        rules, extra_sd_m=fine)
        curves["sight_formula_m"] = np.where(
            curves["kind"] == "crest",
            crest_sight_formula(a, L, rules.eye_height_m, rules.object_height_m),
            sag_sight_formula(a, L, rules.headlight_height_m, rules.beam_angle_deg))
    out.keypoints = pd.concat(rows, ignore_index=True) if rows else None


def road_plan(out: RoadOutcome, line, cfg: Config) -> None:
    """Horizontal curves of the centreline, with the minimum-radius check (the plan stage)."""
    from ..plan.horizontal import horizontal_curves

    opts = {k: cfg[f"plan.{k}"] for k in ("smooth_m", "max_radius_m", "min_length_m", "min_deflection_deg")}
    opts["step_m"] = min(cfg["profile.step_m"], 5.0)
    hc = horizontal_curves(line, opts, out.polyline)
    hc.insert(0, "road_id", out.road_id)
    out.hcurves = hc


def road_speeds(out: RoadOutcome, row: pd.Series, cfg: Config) -> None:
    """Predicted operating speed at every station both ways, and the speed each station is
    judged at (the road's speed, or the prediction where the road's basis is predicted)."""
    from ..plan.speed import predict_v85

    prof = out.profile
    ch, g = prof["chainage_m"].to_numpy(), prof["grade_pct"].to_numpy()
    vc = out.curves if out.curves is not None else pd.DataFrame()
    desired = cfg["speed.desired_kmh"]
    prof["v85_fwd_kmh"] = predict_v85(ch, g, vc, out.hcurves, desired, +1)
    prof["v85_back_kmh"] = predict_v85(ch, g, vc, out.hcurves, desired, -1)
    if row["speed_basis"] == PREDICTED:
        prof["speed_fwd_kmh"] = prof["v85_fwd_kmh"]
        prof["speed_back_kmh"] = prof["v85_back_kmh"]
    else:
        prof["speed_fwd_kmh"] = prof["speed_back_kmh"] = float(row["speed_kmh"])
    kp = out.keypoints
    if kp is not None and len(kp):
        fwd = kp["direction"] == "increasing"
        kp["speed_kmh"] = np.where(fwd, np.interp(kp["chainage_m"], ch, prof["speed_fwd_kmh"]),
                                   np.interp(kp["chainage_m"], ch, prof["speed_back_kmh"]))


def road_hazards(out: RoadOutcome, stretches: list, junctions: list, cset, cfg: Config) -> None:
    """Hidden zone beyond every crest, both ways, at the required SSD for the speed judged at the
    crest, and the hazards in it (horizontal curves beginning, junctions and accesses)."""
    from ..alignment.fit import RoadProfile
    from ..sight.hazards import hazards_in_zone, hidden_zone

    rows = []
    crests = out.curves[out.curves["kind"] == "crest"] if out.curves is not None and len(out.curves) else []
    if len(crests) and stretches:
        road = out.road if out.road is not None else RoadProfile(stretches)
        prof = out.profile
        ch = prof["chainage_m"].to_numpy()
        rules = cset.sight_rules()
        for c in crests.itertuples():
            i = int(np.clip(np.searchsorted(ch, c.pvi_m), 0, len(ch) - 1))
            for direction, col in (("increasing", "speed_fwd_kmh"), ("decreasing", "speed_back_kmh")):
                sign = 1 if direction == "increasing" else -1
                v = float(prof[col].iloc[i])
                ssd = float(cset.ssd_design(v / cset.speed_to_kmh)) * cset.length_to_m
                zone = hidden_zone(road.z_grid, c.pvi_m, c.pvt_m if sign > 0 else c.pvc_m, ssd, sign,
                                   rules.eye_height_m, 0.0, cfg["sight.fine_step_m"], float(ch[-1]))
                rows.append({"road_id": out.road_id, "curve_no": c.curve_no, "direction": direction}
                            | hazards_in_zone(zone, sign, out.hcurves, junctions))
    out.hazards = pd.DataFrame(rows, columns=HAZARD_COLUMNS)


HAZARD_COLUMNS = ["road_id", "curve_no", "direction", "hidden_from_m", "hidden_to_m", "hidden_hazard",
                  "hazard_chainage_m", "hazard_detail"]


def process_road(row: pd.Series, sampler: GroundSampler, cfg: Config, to_source, cset,
                 junctions: list | None = None) -> RoadOutcome:
    """Every per-road stage for one road, timed stage by stage."""
    t0 = time.perf_counter()
    if not isinstance(row["skip_reason"], str) and isinstance(row.get("speed_reason"), str):
        return RoadOutcome(road_id=row["road_id"]).skip(row["speed_reason"])
    out = road_profile(row, sampler, cfg, to_source)
    t1 = time.perf_counter()
    out.seconds["profile"] = t1 - t0
    if out.status != "evaluated":
        return out
    stretches = road_alignment(out, cfg)
    t2 = time.perf_counter()
    out.seconds["alignment"] = t2 - t1
    road_plan(out, row["geometry"], cfg)
    t3 = time.perf_counter()
    out.seconds["plan"] = t3 - t2
    road_sight(out, stretches, cset.sight_rules(), cfg)
    t4 = time.perf_counter()
    out.seconds["sight"] = t4 - t3
    road_speeds(out, row, cfg)
    road_hcurve_checks(out, cset, cfg)
    road_hazards(out, stretches, (junctions or []) + sampler.junction_points(row), cset, cfg)
    out.seconds["speed and hazards"] = time.perf_counter() - t4
    return out


# the columns road_hcurve_checks adds to each horizontal curve
HCURVE_CHECK_COLUMNS = ["speed_kmh", "r_min_m", "below_min_radius", "ssd_required_m", "hso_m", "hso_valid",
                        "v85_kmh"]


def road_hcurve_checks(out: RoadOutcome, cset, cfg: Config) -> None:
    """Each horizontal curve's speed (the highest judged on it), predicted operating speed
    (lowest on it), minimum radius for that speed, required SSD and the sight line offset it
    needs (see :mod:`pipeline.plan`)."""
    from ..plan.horizontal import min_radius_m, sight_line_offset

    hc = out.hcurves
    if hc is None or not len(hc):
        return
    prof = out.profile
    ch = prof["chainage_m"].to_numpy()
    sp = np.maximum(prof["speed_fwd_kmh"].to_numpy(), prof["speed_back_kmh"].to_numpy())
    v85 = np.minimum(prof["v85_fwd_kmh"].to_numpy(), prof["v85_back_kmh"].to_numpy())
    speed, vmin = [], []
    for a, b in zip(hc["start_m"].to_numpy(float), hc["end_m"].to_numpy(float)):
        i, j = np.searchsorted(ch, [a, b + 1e-9])
        i, j = min(i, len(ch) - 1), max(j, min(i, len(ch) - 1) + 1)
        speed.append(float(np.nanmax(sp[i:j])))
        vmin.append(float(np.nanmin(v85[i:j])))
    hc["speed_kmh"] = speed
    f = np.interp(hc["speed_kmh"], cset.friction["speed"] * cset.speed_to_kmh, cset.friction["f_max"])
    hc["r_min_m"] = min_radius_m(hc["speed_kmh"], cfg["plan.e_max_pct"] / 100.0, f)
    hc["below_min_radius"] = hc["radius_m"] < hc["r_min_m"]
    hc["ssd_required_m"] = cset.ssd_design(np.asarray(speed) / cset.speed_to_kmh) * cset.length_to_m
    hc["hso_m"] = sight_line_offset(hc["radius_m"] - cfg["plan.lane_width_m"] / 2, hc["ssd_required_m"])
    hc["hso_valid"] = hc["ssd_required_m"] <= hc["length_m"]
    hc["v85_kmh"] = vmin


@dataclass
class Job:
    """Everything a worker needs to run chunks of roads (all of it picklable)."""

    cfg: Config
    cset: object
    work_crs: dict
    source_crs: object
    ground: object
    structures: object = None
    junctions: object = None


def _frame(frames: list, empty: pd.DataFrame | None = None) -> pd.DataFrame:
    frames = [f for f in frames if f is not None and len(f)]
    if not frames:
        return empty if empty is not None else pd.DataFrame()
    return pd.concat(frames, ignore_index=True)


def _spacing(o: RoadOutcome) -> float:
    """The ground data's own spacing on a road: DEM cell, or ground-point spacing (m)."""
    v = o.data.get("cell_m") if o.data.get("cell_m") is not None else o.data.get("spacing_m")
    return float(v) if v is not None else np.nan


def process_chunk(job: Job, rows: pd.DataFrame, net_junctions: dict) -> dict:
    """Run every per-road stage for a chunk of roads; returns plain tables (DataFrames) and
    counts, ready to be written to the run's work folder."""
    ground = job.ground
    if isinstance(ground, PointGround):  # only this chunk's points travel with the job
        ground = ground.subset(rows["source_id"])
    sampler = GroundSampler(ground, job.work_crs, job.cfg, job.structures, job.junctions)
    back = {key: (None if crs == job.source_crs else transformer(crs, job.source_crs))
            for key, crs in job.work_crs.items()}
    outcomes = []
    for _, row in rows.iterrows():
        o = process_road(row, sampler, job.cfg, back.get(row["work_key"]), job.cset,
                         net_junctions.get(row["road_id"], []))
        outcomes.append(o)
    seconds: dict[str, float] = {}
    for o in outcomes:
        for stage, secs in o.seconds.items():
            seconds[stage] = seconds.get(stage, 0.0) + secs
    notes = [{"road_id": o.road_id, "note": n[0], "from_m": n[1], "to_m": n[2], "detail": n[3]}
             for o in outcomes for n in o.notes]
    return {
        "profiles": _frame([o.profile for o in outcomes]),
        "curves": _frame([o.curves for o in outcomes]),
        "keypoints": _frame([o.keypoints for o in outcomes]),
        "hazards": _frame([o.hazards for o in outcomes]),
        "hcurves": _frame([o.hcurves for o in outcomes]),
        "notes": pd.DataFrame(notes, columns=["road_id", "note", "from_m", "to_m", "detail"]),
        "status": pd.DataFrame({"road_id": [o.road_id for o in outcomes], "status": [o.status for o in outcomes],
                                "reason": [o.reason for o in outcomes],
                                "ground_spacing_m": [_spacing(o) for o in outcomes],
                                "resolution_m": [o.data.get("resolution_m", np.nan) for o in outcomes]}),
        "seconds": seconds,
        "points_used": sampler.points_used,
        "points_dropped": sampler.points_dropped,
        "sampler_notes": sampler.notes,
    }
