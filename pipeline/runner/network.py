"""Run the audit over a road network, in chunks, and account for every road.

The per-road stages (:mod:`pipeline.runner.roadwork`) never depend on another road, so the
network is cut into chunks of roads of about equal cost (at least two per worker, at most
``run.chunk_km`` of road each; :func:`pipeline.runner.chunks.chunk_rows`) that run one after
the other in this process, in a pool of processes (``run.workers``, default all cores) or on a
Dask cluster (``run.engine = "dask"``). Each chunk's results are written to Parquet files in a
work folder as soon as they exist, so memory holds one chunk per worker, not the network;
DuckDB then judges the curves and builds the inventory straight from those files. A run that
is interrupted and started again with ``--resume`` reuses the chunks already finished.

Each road ends either ``evaluated`` or ``skipped`` with a reason; the run checks that
roads in = roads evaluated + roads skipped, and records all of it in ``run.json``.

This module holds the orchestration (:func:`run_network`, :func:`run_summary`; the whole
audit with its outputs is :func:`pipeline.api.audit`); the jobs it
orchestrates live beside it: the speed policy (:mod:`.speeds`), junctions from the network
(:mod:`.junctions`), chunks and table layouts (:mod:`.chunks`), the work folder
(:mod:`.workfolder`), the engines (:mod:`.engines`), the result and its accounting
(:mod:`.result`) and progress reporting (:mod:`.progress`).
"""

from __future__ import annotations

import shutil
import tempfile
import time
import weakref
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

import pandas as pd

from ..core.version import __version__
from ..core.config import Config
from ..evaluate.criteria import get_set
from ..evaluate.judge import evaluate
from ..evaluate.quality import data_quality
from ..ingest.readers import PointGround, Roads, file_sha256, open_ground, read_features, read_roads
from ..outputs.export import CAUTION_TEXT as CAUTION
from ..outputs.method import run_units
from .chunks import chunk_layout_key, chunk_rows, road_costs
from .engines import run_chunks, worker_count, worker_pool
from .evidence import examine, screen_speeds, speed_notes
from .junctions import network_junction_points
from .progress import Progress
from .result import NetworkResult, accounting, network_summary
from .roadwork import Job
from .speeds import resolve_speeds
from .workfolder import WorkFolder, run_key

__all__ = ["NetworkResult", "Progress", "accounting", "chunk_rows", "network_junction_points",
           "network_summary", "resolve_speeds", "run_network", "worker_pool"]


@dataclass
class _Inputs:
    """What the run reads before the chunks: roads, ground, features and the inputs' evidence."""

    roads: Roads
    ground: object
    structures: object
    junctions: object
    evidence: dict


def run_network(roads_path: str | Path, ground_path: str | Path, cfg: Config,
                progress: Progress | None = None, work_dir: str | Path | None = None,
                resume: bool = False, pool=None) -> NetworkResult:
    """Ingest, the per-road stages in chunks, and the evaluation, for a whole network.

    Known structures come from ``structures.file`` and junctions from ``junctions.file``.

    Parameters
    ----------
    roads_path, ground_path : str or pathlib.Path
        The roads file and the ground model (DEM or ground points).
    cfg : Config
        The run's settings.
    progress : Progress, optional
        Where to report progress (silent by default).
    work_dir : str or pathlib.Path, optional
        Holds the chunk results; when not given, a temporary folder removed with the result.
    resume : bool
        Reuse the chunks already finished in ``work_dir`` for the same inputs and settings.
    pool : concurrent.futures.Executor, optional
        A pool of workers to run the chunks in (see :func:`pipeline.runner.pool.worker_pool`).

    Returns
    -------
    NetworkResult
        The roads, the chunk results, timings, notes and the evaluation.
    """
    progress = progress or Progress()
    timings: dict[str, float] = {}
    t0 = time.perf_counter()
    cset = get_set(cfg["criteria.set"], cfg["criteria.files"])
    inputs = _read_inputs(roads_path, ground_path, cfg, progress)
    extra_notes = _settle_speeds(inputs, cfg)
    net_junctions = network_junction_points(inputs.roads, cfg)
    timings["ingest"] = time.perf_counter() - t0

    owner, work_dir = _work_dir(work_dir)
    table = inputs.roads.table
    cost = road_costs(table, cfg["profile.step_m"],
                      inputs.ground.groups if isinstance(inputs.ground, PointGround) else None)
    chunks = chunk_rows(table, cfg["run.chunk_km"], _pool_width(cfg, pool), cost)
    key = run_key(roads_path, ground_path, cfg) + chunk_layout_key(table, chunks)
    work = WorkFolder(Path(work_dir), key, resume)
    todo = [k for k in range(len(chunks)) if not work.done(k)]
    job = Job(cfg=cfg, cset=cset, work_crs=inputs.roads.work_crs, source_crs=inputs.roads.source_crs,
              ground=inputs.ground, structures=inputs.structures, junctions=inputs.junctions)
    costs = [float(cost[c].sum()) for c in chunks]
    wall = _run_stages(job, table, chunks, todo, net_junctions, work, cfg, progress, pool, costs)
    points_used, points_dropped, sampler_notes = _chunk_reports(work, len(chunks), timings)
    timings["per-road stages, wall clock"] = wall
    ground_info = _ground_info(inputs, points_used, points_dropped)
    result = NetworkResult(roads=inputs.roads, work=work, timings=timings, ground_info=ground_info,
                           notes=inputs.roads.notes + inputs.evidence["notes"] + sampler_notes, criteria=cset,
                           step_m=cfg["profile.step_m"], evidence=inputs.evidence, extra_notes=extra_notes,
                           chunks={"total": len(chunks), "computed": len(todo), "reused": len(chunks) - len(todo),
                                   "workers": worker_count(cfg), "engine": cfg["run.engine"]})
    if owner is not None:
        weakref.finalize(result, shutil.rmtree, owner, True)
    _judge(result, cfg, progress)
    return result


def _read_inputs(roads_path, ground_path, cfg: Config, progress: Progress) -> _Inputs:
    """Read the roads, the ground, the optional structures and junctions, and examine them."""
    with progress.stage("reading roads and ground") as tick:
        roads = read_roads(roads_path, cfg)
        ground = open_ground(ground_path, cfg, roads)
        structures = (read_features(cfg["structures.file"], cfg, roads, "structures", cfg["structures.layer"])
                      if cfg["structures.file"] else None)
        junctions = (read_features(cfg["junctions.file"], cfg, roads, "junctions", cfg["junctions.layer"])
                     if cfg["junctions.file"] else None)
        evidence = examine(roads, ground, cfg)
        tick()
    return _Inputs(roads=roads, ground=ground, structures=structures, junctions=junctions, evidence=evidence)


def _settle_speeds(inputs: _Inputs, cfg: Config) -> pd.DataFrame:
    """Set each road's speed, basis and skip reason in the roads table; return the per-road
    notes on substituted speeds (and count those roads in the evidence)."""
    table = inputs.roads.table
    found = screen_speeds(table, cfg)
    table["speed_kmh"], table["speed_basis"], table["speed_reason"] = resolve_speeds(table, cfg)
    extra_notes = speed_notes(table, found, cfg)
    inputs.evidence["roads_at_substituted_speeds"] = int(len(extra_notes) - extra_notes["detail"].str.contains(
        "road skipped").sum()) if len(extra_notes) else 0
    return extra_notes


def _work_dir(work_dir: str | Path | None) -> tuple[str | None, str | Path]:
    """The work folder to use, and the temporary folder made for it (``None`` when given one)."""
    if work_dir is not None:
        return None, work_dir
    owner = tempfile.mkdtemp(prefix="sightaudit-work-")
    return owner, Path(owner) / "work"


def _pool_width(cfg: Config, pool) -> int:
    """How many workers the chunks are shared among: the pool's, else ``run.workers``."""
    n = getattr(pool, "_max_workers", None)
    return int(n) if isinstance(n, int) and n > 0 else worker_count(cfg)


def _run_stages(job: Job, table: pd.DataFrame, chunks: list, todo: list[int], net_junctions: dict,
                work: WorkFolder, cfg: Config, progress: Progress, pool, costs: list[float]) -> float:
    """The per-road stages over the unfinished chunks (the finished ones count as done at once),
    counted in km of road; returns the wall-clock seconds."""
    t0 = time.perf_counter()
    km = (pd.to_numeric(table["length_m"], errors="coerce").clip(lower=0).fillna(0.0) / 1000.0).to_numpy()
    with progress.stage("profiles, curves, sight", total=float(km.sum()), unit="km") as tick:
        for k in set(range(len(chunks))) - set(todo):
            tick(float(km[chunks[k]].sum()))
        run_chunks(job, table, chunks, todo, net_junctions, work, cfg, tick, pool, costs)
    return time.perf_counter() - t0


def _chunk_reports(work: WorkFolder, n_chunks: int, timings: dict) -> tuple[int, int, list[str]]:
    """What the chunks report: stage seconds (added into ``timings``), ground points used and
    dropped, and the sampler's notes (each once)."""
    points_used = points_dropped = 0
    sampler_notes: list[str] = []
    for k in range(n_chunks):
        meta = work.meta(k)
        for stage, secs in meta["seconds"].items():
            timings[stage] = timings.get(stage, 0.0) + secs
        points_used += meta["points_used"]
        points_dropped += meta["points_dropped"]
        sampler_notes += [n for n in meta["sampler_notes"] if n not in sampler_notes]
    return points_used, points_dropped, sampler_notes


def _ground_info(inputs: _Inputs, points_used: int, points_dropped: int) -> dict:
    """The ground model as described in ``run.json``; ground points for roads not in the roads
    file are counted and noted."""
    ground = inputs.ground
    info = ground.describe() | {"path": str(ground.path)}
    if isinstance(ground, PointGround):
        info["points_used"] = points_used
        info["points_dropped_offset"] = points_dropped
        unknown = sorted(set(ground.groups) - set(inputs.roads.table["source_id"]))
        if unknown:
            info["points_for_unknown_roads"] = len(unknown)
            inputs.roads.notes.append(f"ground points for {len(unknown)} road id(s) not in the roads file ignored "
                                      f"(e.g. {unknown[0]!r})")
    return info


def _judge(result: NetworkResult, cfg: Config, progress: Progress) -> None:
    """Judge the curves (DuckDB, straight from the chunk files) into ``result.evaluation``."""
    t0 = time.perf_counter()
    with progress.stage("judging curves (DuckDB)") as tick:
        result.evaluation = evaluate(result.road_table(), result.work.files("profiles"), result.curves,
                                     result.work.files("keypoints"), result.hazards, result.criteria, cfg,
                                     hcurves=result.work.files("hcurves") or None,
                                     clearances=result.work.files("clearances") or None)
        tick()
    result.timings["evaluate"] = time.perf_counter() - t0


def run_summary(result: NetworkResult, roads_path: str | Path, ground_path: str | Path, cfg: Config,
                command: list[str] | None, started: datetime) -> dict:
    """The run summary of ``run.json``, before the outputs are written.

    Parameters
    ----------
    result : NetworkResult
        The finished run.
    roads_path, ground_path : str or pathlib.Path
        The input files (hashed into the summary).
    cfg : Config
        The run's settings.
    command : list of str or None
        The command line.
    started : datetime.datetime
        When the run started (UTC).

    Returns
    -------
    dict
        Tool and version, inputs, settings, road accounting, evidence, criteria, units, the
        audit's summary tables, data quality, notes and timings. ``stage_seconds`` is the
        result's own timings dict, so stages timed later still appear.
    """
    return {
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
        "roads": accounting(result) | {
            "judged_at_substituted_speeds": result.evidence.get("roads_at_substituted_speeds", 0)},
        "evidence": result.evidence,
        "criteria": {k: result.criteria.params[k] for k in ("name", "title", "source", "edition", "units")},
        "units": _units_info(cfg),
        "hazard_stretches": int((result.evaluation.inventory["hidden_hazard"] != "none").sum()),
        "network_by_class": network_summary(result).to_dict(orient="records"),
        "audit_summary": result.evaluation.summary.to_dict(orient="records"),
        "data_quality": data_quality(result.ground_info["kind"], result.road_table(),
                                     result.evaluation.curves, cfg["ground.vertical_error_m"],
                                     cfg["confidence.max_cell_for_verdict_m"]),
        "notes": result.notes,
        "stage_seconds": result.timings,
        "chunks": result.chunks,
        "caution": CAUTION,
    }


def _units_info(cfg: Config) -> dict:
    """The output units as recorded in ``run.json``."""
    u = run_units(cfg)
    return {"system": u.system, "length": u.length_label, "speed": u.speed_label, "distance": u.distance_label,
            "factor_km": u.km_per_distance}
