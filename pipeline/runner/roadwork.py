"""The per-road stages of the audit: profile, artefacts, alignment, plan, sight, speeds and
hazards, for one road and for a chunk of roads (the unit of work a process or a cluster
worker runs).

Each stage is a function that takes what it needs and returns new tables (it never adds
columns to a table it was handed): :mod:`~pipeline.runner.profile_stage`,
:mod:`~pipeline.runner.alignment_stage`, :mod:`~pipeline.runner.plan_stage` (plan, speeds
and the horizontal-curve checks) and :mod:`~pipeline.runner.sight_stage` (sight and
hazards). :func:`process_road` runs them in turn and gathers what they return into a
:class:`RoadOutcome`.

Nothing here depends on another road, so chunks run anywhere in any order and give the same
result; :mod:`pipeline.runner.network` hands out the chunks and gathers what they return.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..core.config import Config
from ..ingest.readers import PointGround, transformer
from ..profile.sampler import GroundSampler
from .alignment_stage import UNCERTAINTY_COLUMNS, alignment_options, curve_uncertainties, road_alignment
from .plan_stage import HCURVE_CHECK_COLUMNS, PREDICTED, road_hcurve_checks, road_plan, road_speeds
from .profile_stage import artefact_options, road_profile
from .sight3d_stage import road_sight_3d
from .sight_stage import HAZARD_COLUMNS, road_hazards, road_sight

__all__ = [
    "HAZARD_COLUMNS", "HCURVE_CHECK_COLUMNS", "PREDICTED", "UNCERTAINTY_COLUMNS", "Job", "RoadOutcome",
    "alignment_options", "artefact_options", "curve_uncertainties", "process_chunk", "process_road",
    "road_alignment", "road_hazards", "road_hcurve_checks", "road_plan", "road_profile", "road_sight",
    "road_speeds",
]


@dataclass
class RoadOutcome:
    """Everything the per-road stages produced for one road."""

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
    clearances: pd.DataFrame | None = None  # what to clear where the 3D sight falls short (3D sight stage)
    data: dict = field(default_factory=dict)  # what the ground data resolve (profile stage)
    seconds: dict[str, float] = field(default_factory=dict)

    def skip(self, reason: str) -> "RoadOutcome":
        """Mark the road as skipped.

        Parameters
        ----------
        reason : str
            Why the road is not evaluated.

        Returns
        -------
        RoadOutcome
            This outcome, with ``status = "skipped"``.
        """
        self.status, self.reason = "skipped", reason
        return self


def process_road(row: pd.Series, sampler: GroundSampler, cfg: Config, to_source, cset,
                 junctions: list | None = None) -> RoadOutcome:
    """Every per-road stage for one road, timed stage by stage.

    Parameters
    ----------
    row : pandas.Series
        The road's row of the roads table (geometry in the working CRS, m; speeds in km/h).
    sampler : GroundSampler
        Reads ground elevation along the road, and the structures and junctions on it.
    cfg : Config
        The run's settings.
    to_source : pyproj.Transformer or None
        Working CRS to the roads' own CRS (``None`` where they are the same).
    cset : CriteriaSet
        The criteria set.
    junctions : list of (float, str), optional
        Junctions found in the network itself: chainage (m) and label.

    Returns
    -------
    RoadOutcome
        The road's tables, notes, status and the seconds each stage took.
    """
    t0 = time.perf_counter()
    if not isinstance(row["skip_reason"], str) and isinstance(row.get("speed_reason"), str):
        return RoadOutcome(road_id=row["road_id"]).skip(row["speed_reason"])
    ps = road_profile(row, sampler, cfg, to_source)
    out = RoadOutcome(road_id=row["road_id"], notes=ps.notes, polyline=ps.polyline, profile=ps.profile,
                      data=ps.data)
    t1 = time.perf_counter()
    out.seconds["profile"] = t1 - t0
    if ps.skip:
        return out.skip(ps.skip)
    al = road_alignment(out.road_id, ps.profile, ps.data, cfg)
    t2 = time.perf_counter()
    out.seconds["alignment"] = t2 - t1
    out.hcurves = road_plan(out.road_id, row["geometry"], ps.polyline, cfg)
    t3 = time.perf_counter()
    out.seconds["plan"] = t3 - t2
    st = road_sight(out.road_id, al.profile, al.curves, al.stretches, cset.sight_rules(), cfg)
    out.curves, out.road = st.curves, st.road
    t4 = time.perf_counter()
    out.seconds["sight"] = t4 - t3
    out.profile, out.keypoints = road_speeds(st.profile, out.curves, out.hcurves, st.keypoints, row, cfg)
    out.hcurves = road_hcurve_checks(out.hcurves, out.profile, cset, cfg)
    out.hazards = road_hazards(out.road_id, out.profile, out.curves, out.hcurves, al.stretches, out.road,
                               (junctions or []) + sampler.junction_points(row), cset, cfg)
    t5 = time.perf_counter()
    out.seconds["speed and hazards"] = t5 - t4
    _sight_3d(out, row, ps.polyline, sampler, cset, cfg, to_source)
    out.seconds["3D sight"] = time.perf_counter() - t5
    return out


def _sight_3d(out: RoadOutcome, row: pd.Series, polyline, sampler: GroundSampler, cset, cfg: Config, to_source) -> None:
    """The 3D sight stage's columns added to the road's profile and curve tables (NaN where it
    does not run), its clearances and notes kept."""
    s3 = road_sight_3d(row, out.profile, out.curves, out.hcurves, out.road, polyline, sampler, cset, cfg, to_source)
    out.profile = out.profile.assign(**s3.columns)
    if out.curves is not None and len(out.curves):
        out.curves = out.curves.assign(sight_3d_min_m=s3.curves if s3.curves is not None else np.nan)
    if out.hcurves is not None and len(out.hcurves):
        out.hcurves = out.hcurves.assign(sight_3d_min_m=s3.hcurves if s3.hcurves is not None else np.nan)
    out.clearances = s3.clearances
    out.notes.extend(s3.notes)


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
    """The non-empty frames concatenated (``empty``, or an empty frame, where there are none)."""
    frames = [f for f in frames if f is not None and len(f)]
    if not frames:
        return empty if empty is not None else pd.DataFrame()
    return pd.concat(frames, ignore_index=True)


def _spacing(o: RoadOutcome) -> float:
    """The ground data's own spacing on a road: DEM cell, or ground-point spacing (m)."""
    v = o.data.get("cell_m") if o.data.get("cell_m") is not None else o.data.get("spacing_m")
    return float(v) if v is not None else np.nan


def road_km(row: pd.Series) -> float:
    """A road's length in km (0 where unknown), as counted by the progress display.

    Parameters
    ----------
    row : pandas.Series
        The road's row of the roads table (``length_m``).

    Returns
    -------
    float
        Length (km).
    """
    v = float(row["length_m"]) if row["length_m"] is not None else 0.0
    return v / 1000.0 if np.isfinite(v) and v > 0 else 0.0


def process_chunk(job: Job, rows: pd.DataFrame, net_junctions: dict, on_road=None) -> dict:
    """Run every per-road stage for a chunk of roads.

    Parameters
    ----------
    job : Job
        The settings, criteria set, CRSs and ground data every worker shares.
    rows : pandas.DataFrame
        The chunk's rows of the roads table.
    net_junctions : dict
        Junctions found in the network, by road id: lists of (chainage in m, label).
    on_road : callable, optional
        Called with each road's length (km; 0 where unknown) as soon as the road is done, for
        the progress display.

    Returns
    -------
    dict
        Plain tables (DataFrames) ``profiles, curves, keypoints, hazards, hcurves, notes,
        status``, the seconds per stage, the ground points used and dropped and the sampler's
        notes, ready to be written to the run's work folder.
    """
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
        if on_road is not None:
            on_road(road_km(row))
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
        "clearances": _frame([o.clearances for o in outcomes]),
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
