"""Run the audit over a road network and account for every road.

The per-road stages never depend on another road. Each road ends either
``evaluated`` or ``skipped`` with a reason; the run checks at the end that
roads in = roads evaluated + roads skipped, and records all of it in
``run.json``.
"""

from __future__ import annotations

import contextlib
import time
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import pandas as pd

from . import __version__
from .config import Config
from .ingest import (DemGround, PointGround, Roads, file_sha256, is_ballpark, open_ground, read_dem_window,
                     read_roads, transformer)
from .profile import (FILLED, FLAG_NAMES, MASKED, MISSING, bilinear, locate_points, points_along, regularise,
                      run_lengths, station_chainages)

from .export import CAUTION_TEXT as CAUTION


# --------------------------------------------------------------------- progress
class Progress:
    """What the pipeline tells the user while it runs. This one says nothing."""

    @contextlib.contextmanager
    def stage(self, name: str, total: int | None = None):
        yield lambda n=1: None

    def message(self, text: str) -> None:
        pass


# ---------------------------------------------------------------- per road
@dataclass
class RoadOutcome:
    road_id: str
    status: str = "evaluated"
    reason: str | None = None
    notes: list[tuple[str, float | None, float | None, str]] = field(default_factory=list)
    profile: pd.DataFrame | None = None
    curves: pd.DataFrame | None = None
    keypoints: pd.DataFrame | None = None
    hcurves: pd.DataFrame | None = None
    hazards: pd.DataFrame | None = None
    seconds: dict[str, float] = field(default_factory=dict)

    def skip(self, reason: str) -> "RoadOutcome":
        self.status, self.reason = "skipped", reason
        return self


class GroundSampler:
    """Ground elevation along one road at a time, from a DEM or from ground points."""

    def __init__(self, ground: DemGround | PointGround, roads: Roads, cfg: Config, structures=None,
                 junctions=None):
        self.ground = ground
        self.roads = roads
        self.cfg = cfg
        self.structures = structures
        self.junctions = junctions
        self._tr: dict[str, object] = {}
        self.points_dropped = 0
        self.points_used = 0
        self.notes: list[str] = []

    def _to_ground(self, key: str):
        if key not in self._tr:
            src = self.roads.work_crs[key]
            tr = transformer(src, self.ground.crs)
            self._tr[key] = tr
            tr.transform(*self._probe(key))
            if is_ballpark(tr):
                self.notes.append(
                    f"transform from {src.name!r} to {self.ground.crs.name!r} has no datum-shift grid "
                    f"(PROJ 'ballpark'); ground positions may be metres off: give both in the same datum"
                )
        return self._tr[key]

    def structure_ranges(self, row, line) -> list:
        if self.structures is None:
            return []
        from .ingest import structure_ranges

        return structure_ranges(self.structures, line, self.roads.work_crs[row["work_key"]], row["road_id"],
                                row["source_id"], self.cfg)

    def junction_points(self, row) -> list:
        """Junctions and accesses from the user's layer on this road: (chainage, label)."""
        if self.junctions is None:
            return []
        from .ingest import feature_chainages

        found = feature_chainages(self.junctions, row["geometry"], self.roads.work_crs[row["work_key"]],
                                  row["road_id"], row["source_id"], self.cfg["junctions.max_offset_m"])
        return [(lo, label) for lo, hi, _, label in found]

    def _probe(self, key: str):
        line = self.roads.table.loc[self.roads.table["work_key"] == key, "geometry"].dropna().iloc[0]
        x, y = points_along(line, np.array([0.0]))
        return x, y

    def sample(self, line, key: str, road_id: str, stations: np.ndarray) -> tuple[np.ndarray, np.ndarray, list]:
        # (road_id is the id as in the source files: ground points refer to it)
        """``(z_m, flag, notes)`` at ``stations`` (chainage m)."""
        step, max_gap = self.cfg["profile.step_m"], self.cfg["profile.max_gap_m"]
        notes: list = []
        if isinstance(self.ground, DemGround):
            sx, sy = points_along(line, stations)
            gx, gy = self._to_ground(key).transform(sx, sy)
            gx, gy = np.asarray(gx), np.asarray(gy)
            arr, aff = read_dem_window(self.ground, gx, gy)
            if arr is None:
                z = np.full(len(stations), np.nan)
            else:
                z = bilinear(arr, aff, gx, gy)
            zs, flag = regularise(stations, z, stations, step, max_gap)
            return zs, flag, notes
        pts = self.ground.by_road.get(road_id)
        if pts is None or len(pts) == 0:
            return np.full(len(stations), np.nan), np.full(len(stations), MISSING, dtype=np.int8), notes
        if self.ground.mode == "chainage":
            chain = pts["chainage_m"].to_numpy()
            length = float(stations[-1]) if len(stations) else 0.0
            beyond = (chain < -step) | (chain > length + step)
            if beyond.any():
                notes.append(("ground points beyond the road's ends dropped", None, None, f"{int(beyond.sum())} points"))
            chain, z = chain[~beyond], pts["z_m"].to_numpy()[~beyond]
            self.points_used += len(chain)
        else:
            tr = transformer(self.ground.crs, self.roads.work_crs[key])
            px, py = tr.transform(pts["x"].to_numpy(), pts["y"].to_numpy())
            chain, offset = locate_points(line, np.asarray(px), np.asarray(py))
            far = np.abs(offset) > self.cfg["ground.max_offset_m"]
            if far.any():
                self.points_dropped += int(far.sum())
                notes.append(("ground points too far from the centreline dropped", None, None,
                              f"{int(far.sum())} of {len(far)} points beyond {self.cfg['ground.max_offset_m']:g} m"))
            chain, z = chain[~far], pts["z_m"].to_numpy()[~far]
            self.points_used += len(chain)
        zs, flag = regularise(chain, z, stations, step, max_gap)
        return zs, flag, notes


def road_profile(row: pd.Series, sampler: GroundSampler, cfg: Config, to_source) -> RoadOutcome:
    """Stations and ground elevation for one road (the profile stage)."""
    out = RoadOutcome(road_id=row["road_id"])
    if isinstance(row["skip_reason"], str):
        return out.skip(row["skip_reason"])
    line = row["geometry"]
    stations = station_chainages(row["length_m"], cfg["profile.step_m"])
    z, flag, notes = sampler.sample(line, row["work_key"], row["source_id"], stations)
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
    from .alignment import noise_sigma
    from .artefacts import detect, implausible_grades

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
    x, y = points_along(line, stations)
    if to_source is not None:
        x, y = to_source.transform(x, y)
    out.profile = pd.DataFrame({
        "road_id": row["road_id"],
        "chainage_m": stations,
        "x": np.asarray(x, dtype=float),
        "y": np.asarray(y, dtype=float),
        "ground_z_m": z,
        "ground_flag": FLAG_NAMES[flag],
    })
    return out


def road_alignment(out: RoadOutcome, cfg: Config) -> list:
    """Fit the vertical alignment to a road's profile (the alignment stage); returns the
    fitted stretches."""
    from .alignment import fit_profile

    prof = out.profile
    usable = np.where(prof["ground_flag"].to_numpy() == "masked", np.nan, prof["ground_z_m"].to_numpy())
    stretches, curves, fitted, grade = fit_profile(prof["chainage_m"].to_numpy(), usable,
                                                   cfg["profile.step_m"], alignment_options(cfg))
    prof["fitted_z_m"] = fitted
    prof["grade_pct"] = grade * 100.0
    curves.insert(0, "road_id", out.road_id)
    out.curves = curves
    return stretches


def artefact_options(cfg: Config) -> dict:
    return {k: cfg[f"artefacts.{k}"] for k in ("spike_m", "max_grade_pct", "min_k", "max_width_m")}


def alignment_options(cfg: Config) -> dict:
    return {k: cfg[f"alignment.{k}"] for k in ("min_tangent_m", "min_grade_change_pct", "split_gap_m",
                                                "short_tangent_m", "bin_m", "noise_floor_m")}


def road_sight(out: RoadOutcome, stretches: list, rules, cfg: Config) -> None:
    """Available sight distance both ways on the fitted alignment (and, as a diagnostic, on
    the ground profile); each curve also seen from its PVC and PVT (the sight stage)."""
    from .alignment import RoadProfile
    from .sight import (LIMIT_NAMES, attribute, crest_sight_formula, sag_sight_formula, sight_both_ways,
                        sight_from)

    prof, curves = out.profile, out.curves
    ch = prof["chainage_m"].to_numpy()
    fine = cfg["sight.fine_step_m"]
    if len(ch) < 2 or not stretches:
        for col in ("sight_fwd_m", "sight_back_m"):
            prof[col] = np.nan
        out.keypoints = None
        return
    road = RoadProfile(stretches)
    res = sight_both_ways(ch, road.z, rules, fine, curves=curves, grade=road.grade)
    for name in ("fwd", "back"):
        prof[f"sight_{name}_m"] = res[f"sight_{name}_m"]
        prof[f"limit_{name}"] = LIMIT_NAMES[res[f"limit_{name}"]]
        prof[f"curve_{name}"] = res[f"curve_{name}"]
        prof[f"limit_at_{name}_m"] = res[f"limit_at_{name}_m"]
    if cfg["sight.ground_diagnostic"]:
        z = np.where(prof["ground_flag"].to_numpy() == "masked", np.nan, prof["ground_z_m"].to_numpy())
        ground = sight_both_ways(ch, lambda x: np.interp(x, ch, z, left=np.nan, right=np.nan), rules, fine)
        prof["ground_sight_fwd_m"] = ground["sight_fwd_m"]
        prof["ground_sight_back_m"] = ground["sight_back_m"]
    # key points: each curve from its PVC looking ahead and from its PVT looking back
    rows = []
    if len(curves):
        for direction, col, sign in (("increasing", "pvc_m", 1), ("decreasing", "pvt_m", -1)):
            eyes = curves[col].to_numpy(dtype=float)
            r = sight_from(eyes, road.z, road.grade, rules, sign, fine)
            no = attribute(eyes, r["limit_at_m"], r["limit"], curves, forward=sign > 0)
            keep = no == curves["curve_no"].to_numpy()
            rows.append(pd.DataFrame({
                "road_id": out.road_id, "chainage_m": eyes[keep], "direction": direction,
                "sight_m": r["sight_m"][keep], "limit_kind": LIMIT_NAMES[r["limit"][keep]],
                "curve_no": no[keep], "grade": sign * road.grade(eyes[keep]),
            }))
        a, L = curves["a_pct"].to_numpy(float), curves["length_m"].to_numpy(float)
        curves["sight_formula_m"] = np.where(
            curves["kind"] == "crest",
            crest_sight_formula(a, L, rules.eye_height_m, rules.object_height_m),
            sag_sight_formula(a, L, rules.headlight_height_m, rules.beam_angle_deg))
    out.keypoints = pd.concat(rows, ignore_index=True) if rows else None


PREDICTED = "predicted (FHWA-RD-99-171)"


def resolve_speeds(table: pd.DataFrame, cfg: Config) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Speed each road is judged at (km/h), its basis, and a skip reason where there is none.

    With ``speed.source = "attribute"`` (default): the speed column's value plus
    ``speed.margin_kmh``; where it is empty or not positive, the default for the road's class
    (``speed.default_by_class``); else, with ``speed.predict_missing``, the predicted operating
    speed (station by station; the road's figure is then the desired speed, the ceiling);
    otherwise the road is skipped. With ``speed.source = "predicted"`` every road is judged at
    predicted speeds."""
    raw = table["speed_raw"].to_numpy(dtype=float)
    if cfg["output.units"] == "us":  # the speed column is in mph
        from .units import kmh_per_mph

        raw = raw * kmh_per_mph()
    margin = cfg["speed.margin_kmh"]
    defaults = cfg["speed.default_by_class"]
    speed = np.full(len(table), np.nan)
    basis = np.full(len(table), None, dtype=object)
    reason = np.full(len(table), None, dtype=object)
    for i, (v, cls) in enumerate(zip(raw, table["road_class"])):
        if cfg["speed.source"] == "predicted":
            speed[i], basis[i] = cfg["speed.desired_kmh"], PREDICTED
        elif np.isfinite(v) and v > 0:
            speed[i] = v + margin
            basis[i] = "attribute" if margin == 0 else f"attribute + {margin:g} km/h"
        elif cls is not None and cls in defaults:
            speed[i] = float(defaults[cls]) + margin
            basis[i] = f"class default ({cls})"
        elif cfg["speed.predict_missing"]:
            speed[i], basis[i] = cfg["speed.desired_kmh"], PREDICTED
        else:
            reason[i] = (f"no usable speed (column {cfg['roads.speed_column']!r} empty or not positive); "
                         f"fill it in, set speed.default_by_class, or allow speed.predict_missing")
    return speed, basis, reason


def road_plan(out: RoadOutcome, line, cfg: Config) -> None:
    """Horizontal curves of the centreline, with the minimum-radius check (the plan stage)."""
    from .plan import horizontal_curves

    opts = {k: cfg[f"plan.{k}"] for k in ("smooth_m", "max_radius_m", "min_length_m", "min_deflection_deg")}
    opts["step_m"] = min(cfg["profile.step_m"], 5.0)
    hc = horizontal_curves(line, opts)
    hc.insert(0, "road_id", out.road_id)
    out.hcurves = hc


def road_speeds(out: RoadOutcome, row: pd.Series, cfg: Config) -> None:
    """Predicted operating speed at every station both ways, and the speed each station is
    judged at (the road's speed, or the prediction where the road's basis is predicted)."""
    from .speed import predict_v85

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
    kp = getattr(out, "keypoints", None)
    if kp is not None and len(kp):
        fwd = kp["direction"] == "increasing"
        kp["speed_kmh"] = np.where(fwd, np.interp(kp["chainage_m"], ch, prof["speed_fwd_kmh"]),
                                   np.interp(kp["chainage_m"], ch, prof["speed_back_kmh"]))


def road_hazards(out: RoadOutcome, stretches: list, junctions: list, cset, cfg: Config) -> None:
    """Hidden zone beyond every crest, both ways, at the required SSD for the speed judged at the
    crest, and the hazards in it (horizontal curves beginning, junctions and accesses)."""
    from .alignment import RoadProfile
    from .hazards import hazards_in_zone, hidden_zone

    rows = []
    crests = out.curves[out.curves["kind"] == "crest"] if out.curves is not None and len(out.curves) else []
    if len(crests) and stretches:
        road = RoadProfile(stretches)
        prof = out.profile
        ch = prof["chainage_m"].to_numpy()
        rules = cset.sight_rules()
        for c in crests.itertuples():
            i = int(np.clip(np.searchsorted(ch, c.pvi_m), 0, len(ch) - 1))
            for direction, col in (("increasing", "speed_fwd_kmh"), ("decreasing", "speed_back_kmh")):
                sign = 1 if direction == "increasing" else -1
                v = float(prof[col].iloc[i])
                ssd = float(cset.ssd_design(v / cset.speed_to_kmh)) * cset.length_to_m
                zone = hidden_zone(road.z, c.pvi_m, c.pvt_m if sign > 0 else c.pvc_m, ssd, sign,
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
    road_hazards(out, stretches, (junctions or []) + sampler.junction_points(row), cset, cfg)
    out.seconds["speed and hazards"] = time.perf_counter() - t4
    return out


# ------------------------------------------------------------------ network run
@dataclass
class NetworkResult:
    roads: Roads
    outcomes: list[RoadOutcome]
    timings: dict[str, float]
    ground_info: dict
    notes: list[str]
    criteria: object = None
    evaluation: object = None
    step_m: float = 5.0

    @property
    def profiles(self) -> pd.DataFrame:
        frames = [o.profile for o in self.outcomes if o.profile is not None]
        if not frames:
            return empty_profiles()
        return pd.concat(frames, ignore_index=True)

    @property
    def curves(self) -> pd.DataFrame:
        from .alignment import empty_curves

        frames = [o.curves for o in self.outcomes if o.curves is not None and len(o.curves)]
        if not frames:
            empty = empty_curves()
            empty.insert(0, "road_id", pd.Series(dtype=str))
            empty["sight_formula_m"] = pd.Series(dtype=float)
            return empty
        return pd.concat(frames, ignore_index=True)

    def _gather(self, attr: str, columns: list[str]) -> pd.DataFrame:
        frames = [getattr(o, attr) for o in self.outcomes if getattr(o, attr, None) is not None]
        frames = [f for f in frames if len(f)]
        if not frames:
            return pd.DataFrame({c: pd.Series(dtype=object) for c in columns})
        return pd.concat(frames, ignore_index=True)

    @property
    def hcurves(self) -> pd.DataFrame:
        from .plan import HCURVE_COLUMNS

        return self._gather("hcurves", ["road_id"] + HCURVE_COLUMNS)

    @property
    def hazards(self) -> pd.DataFrame:
        frame = self._gather("hazards", HAZARD_COLUMNS)
        for c in ("hidden_from_m", "hidden_to_m", "hazard_chainage_m"):
            frame[c] = frame[c].astype(float)
        frame["curve_no"] = frame["curve_no"].astype("int64")
        for c in ("road_id", "direction", "hidden_hazard", "hazard_detail"):
            frame[c] = frame[c].astype(str)
        return frame

    @property
    def keypoints(self) -> pd.DataFrame:
        frames = [o.keypoints for o in self.outcomes if getattr(o, "keypoints", None) is not None]
        if not frames:
            return pd.DataFrame({"road_id": pd.Series(dtype=str), "chainage_m": pd.Series(dtype=float),
                                 "direction": pd.Series(dtype=str), "sight_m": pd.Series(dtype=float),
                                 "limit_kind": pd.Series(dtype=str), "curve_no": pd.Series(dtype="int64"),
                                 "grade": pd.Series(dtype=float), "speed_kmh": pd.Series(dtype=float)})
        return pd.concat(frames, ignore_index=True)

    def road_table(self) -> pd.DataFrame:
        t = self.roads.table
        status = {o.road_id: o for o in self.outcomes}
        return pd.DataFrame({
            "road_id": t["road_id"],
            "name": t["name"],
            "road_class": t["road_class"],
            "aadt": t["aadt"],
            "speed_kmh": t["speed_kmh"],
            "speed_basis": t["speed_basis"],
            "length_m": t["length_m"].round(2),
            "status": [status[r].status for r in t["road_id"]],
            "reason": [status[r].reason for r in t["road_id"]],
        })

    def data_notes(self) -> pd.DataFrame:
        rows = [
            {"road_id": o.road_id, "note": n[0], "from_m": n[1], "to_m": n[2], "detail": n[3]}
            for o in self.outcomes for n in o.notes
        ]
        return pd.DataFrame(rows, columns=["road_id", "note", "from_m", "to_m", "detail"])


def empty_profiles() -> pd.DataFrame:
    return pd.DataFrame({
        "road_id": pd.Series(dtype=str), "chainage_m": pd.Series(dtype=float), "x": pd.Series(dtype=float),
        "y": pd.Series(dtype=float), "ground_z_m": pd.Series(dtype=float), "ground_flag": pd.Series(dtype=str),
        "fitted_z_m": pd.Series(dtype=float), "grade_pct": pd.Series(dtype=float),
        "sight_fwd_m": pd.Series(dtype=float), "sight_back_m": pd.Series(dtype=float),
        "limit_fwd": pd.Series(dtype=str), "limit_back": pd.Series(dtype=str),
        "curve_fwd": pd.Series(dtype="int64"), "curve_back": pd.Series(dtype="int64"),
        "speed_fwd_kmh": pd.Series(dtype=float), "speed_back_kmh": pd.Series(dtype=float),
    })


def network_junction_points(roads: Roads, cfg: Config) -> dict[str, list]:
    """Junctions where one road's end meets another road (per working CRS)."""
    if not cfg["junctions.from_network"]:
        return {}
    from .hazards import network_junctions

    t = roads.table
    out: dict[str, list] = {}
    for key in roads.work_crs:
        sel = t[(t["work_key"] == key) & t["geometry"].notna()]
        if len(sel) > 1:
            out |= network_junctions(dict(zip(sel["road_id"], sel["geometry"])), cfg["junctions.snap_m"])
    return out


def run_network(roads_path: str | Path, ground_path: str | Path, cfg: Config,
                progress: Progress | None = None) -> NetworkResult:
    """Ingest, the per-road stages and the evaluation, for a whole network. Known structures
    come from ``structures.file`` in the config (or ``--structures``)."""
    from .criteria import get_set
    from .ingest import read_features
    from .evaluate import evaluate

    progress = progress or Progress()
    timings: dict[str, float] = {}
    t0 = time.perf_counter()
    cset = get_set(cfg["criteria.set"], cfg["criteria.files"])
    with progress.stage("reading roads and ground") as tick:
        roads = read_roads(roads_path, cfg)
        ground = open_ground(ground_path, cfg, roads)
        structures = (read_features(cfg["structures.file"], cfg, roads, "structures", cfg["structures.layer"])
                      if cfg["structures.file"] else None)
        junction_layer = (read_features(cfg["junctions.file"], cfg, roads, "junctions", cfg["junctions.layer"])
                          if cfg["junctions.file"] else None)
        tick()
    table = roads.table
    table["speed_kmh"], table["speed_basis"], table["speed_reason"] = resolve_speeds(table, cfg)
    timings["ingest"] = time.perf_counter() - t0

    sampler = GroundSampler(ground, roads, cfg, structures, junction_layer)
    net_junctions = network_junction_points(roads, cfg)
    back = {key: (None if crs is roads.source_crs else transformer(crs, roads.source_crs))
            for key, crs in roads.work_crs.items()}
    outcomes: list[RoadOutcome] = []
    with progress.stage("profiles, curves, sight", total=len(table)) as tick:
        for _, row in table.iterrows():
            outcomes.append(process_road(row, sampler, cfg, back.get(row["work_key"]), cset,
                                         net_junctions.get(row["road_id"], [])))
            tick()
    for o in outcomes:
        for stage, secs in o.seconds.items():
            timings[stage] = timings.get(stage, 0.0) + secs

    ground_info = ground.describe() | {"path": str(ground.path)}
    if isinstance(ground, PointGround):
        ground_info["points_used"] = sampler.points_used
        ground_info["points_dropped_offset"] = sampler.points_dropped
        unknown = sorted(set(ground.by_road) - set(table["road_id"]))
        if unknown:
            ground_info["points_for_unknown_roads"] = len(unknown)
            roads.notes.append(f"ground points for {len(unknown)} road id(s) not in the roads file ignored "
                               f"(e.g. {unknown[0]!r})")
    result = NetworkResult(roads=roads, outcomes=outcomes, timings=timings, ground_info=ground_info,
                           notes=roads.notes + sampler.notes, criteria=cset, step_m=cfg["profile.step_m"])
    t0 = time.perf_counter()
    with progress.stage("judging curves (DuckDB)") as tick:
        prof = result.profiles
        cols = ["road_id", "chainage_m", "grade_pct", "sight_fwd_m", "sight_back_m", "limit_fwd", "limit_back",
                "curve_fwd", "curve_back", "speed_fwd_kmh", "speed_back_kmh"]
        for c in cols:
            if c not in prof:
                prof[c] = empty_profiles()[c]
        result.evaluation = evaluate(result.road_table(), prof[cols], result.curves, result.keypoints,
                                     result.hazards, cset, cfg)
        tick()
    timings["evaluate"] = time.perf_counter() - t0
    return result


def accounting(result: NetworkResult) -> dict:
    """Counts of roads in, evaluated and skipped (with reasons); checks they add up."""
    n_in = len(result.roads.table)
    evaluated = [o for o in result.outcomes if o.status == "evaluated"]
    skipped = [o for o in result.outcomes if o.status == "skipped"]
    if n_in != len(evaluated) + len(skipped) or len(result.outcomes) != n_in:
        raise RuntimeError(f"road accounting broken: {n_in} in, {len(evaluated)} evaluated, {len(skipped)} skipped")
    by_reason: dict[str, int] = {}
    for o in skipped:
        by_reason[o.reason] = by_reason.get(o.reason, 0) + 1
    return {
        "in": n_in,
        "evaluated": len(evaluated),
        "skipped": len(skipped),
        "skipped_by_reason": by_reason,
        "skipped_roads": [{"road_id": o.road_id, "reason": o.reason} for o in skipped],
    }


def network_summary(result: NetworkResult) -> pd.DataFrame:
    """Roads and km in and evaluated, and ground coverage, by road class (``sql/network_summary.sql``)."""
    from .sqlrun import run_sql

    prof = result.profiles[["road_id", "chainage_m", "ground_flag"]]
    return run_sql("network_summary", {"roads": result.road_table(), "stations": prof})


def _units_info(cfg: Config) -> dict:
    from .units import OutputUnits

    u = OutputUnits(cfg["output.units"], cfg["output.us_foot"])
    return {"system": u.system, "length": u.length_label, "speed": u.speed_label, "distance": u.distance_label,
            "factor_km": u.km_per_distance}


def run_audit(roads_path: str | Path, ground_path: str | Path, cfg: Config, out_dir: str | Path,
              progress: Progress | None = None, command: list[str] | None = None) -> dict:
    """The whole audit: read, compute, write every output into ``out_dir``.

    Outputs are written to a temporary folder beside ``out_dir`` and moved into
    place only when complete. Returns the run summary (also in ``run.json``).
    """
    from .export import staging_folder, write_outputs

    progress = progress or Progress()
    started = datetime.now(timezone.utc)
    out_dir = Path(out_dir)
    with staging_folder(out_dir) as tmp:
        result = run_network(roads_path, ground_path, cfg, progress)
        t0 = time.perf_counter()
        summary = {
            "tool": "sightaudit",
            "version": __version__,
            "command": command,
            "started_utc": started.isoformat(timespec="seconds"),
            "config": cfg.as_dict(),
            "config_file": cfg.source,
            "inputs": {
                "roads": {"path": str(Path(roads_path)), "sha256": file_sha256(roads_path),
                          "crs": result.roads.source_crs.to_string()},
                "ground": {"sha256": file_sha256(ground_path)} | result.ground_info,
            },
            "working_crs": {k: v.name for k, v in result.roads.work_crs.items()},
            "roads": accounting(result),
            "criteria": {k: result.criteria.params[k] for k in ("name", "title", "source", "edition", "units")},
            "units": _units_info(cfg),
            "hazard_stretches": int((result.evaluation.inventory["hidden_hazard"] != "none").sum()),
            "network_by_class": network_summary(result).to_dict(orient="records"),
            "audit_summary": result.evaluation.summary.to_dict(orient="records"),
            "notes": result.notes,
            "stage_seconds": result.timings,
            "caution": CAUTION,
        }
        with progress.stage("writing outputs"):
            write_outputs(tmp, result, summary, cfg)
        result.timings["export"] = time.perf_counter() - t0
        summary["finished_utc"] = datetime.now(timezone.utc).isoformat(timespec="seconds")
        from .export import write_run_json

        write_run_json(tmp / "run.json", summary)
    return summary

