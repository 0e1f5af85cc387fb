"""Run the audit over a road network, in chunks, and account for every road.

The per-road stages (:mod:`pipeline.roadwork`) never depend on another road, so the
network is cut into chunks of roads (``run.chunk_km`` of road each) that run one after the
other in this process, in a pool of processes (``run.workers``, default all cores) or on a
Dask cluster (``run.engine = "dask"``). Each chunk's results are written to Parquet files in a
work folder as soon as they exist, so memory holds one chunk per worker, not the network;
DuckDB then judges the curves and builds the inventory straight from those files. A run that
is interrupted and started again with ``--resume`` reuses the chunks already finished.

Each road ends either ``evaluated`` or ``skipped`` with a reason; the run checks that
roads in = roads evaluated + roads skipped, and records all of it in ``run.json``.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import shutil
import tempfile
import time
import weakref
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd

from .. import __version__
from ..core.config import Config
from ..outputs.export import CAUTION_TEXT as CAUTION
from ..ingest.readers import PointGround, Roads, file_sha256, open_ground, read_roads
from .roadwork import HAZARD_COLUMNS, HCURVE_CHECK_COLUMNS, PREDICTED, Job, process_chunk


# --------------------------------------------------------------------- progress
class Progress:
    """What the pipeline tells the user while it runs. This one says nothing."""

    @contextlib.contextmanager
    def stage(self, name: str, total: int | None = None):
        yield lambda n=1: None

    def message(self, text: str) -> None:
        pass


# ------------------------------------------------------------------- speeds
def resolve_speeds(table: pd.DataFrame, cfg: Config) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Speed each road is judged at (km/h), its basis, and a skip reason where there is none.

    With ``speed.source = "attribute"`` (default): the speed column's value plus
    ``speed.margin_kmh``; where it is empty or not positive, the default for the road's class
    (``speed.default_by_class``); else, with ``speed.predict_missing``, the predicted operating
    speed (station by station; the road's figure is then the desired speed, the ceiling);
    otherwise the road is skipped. With ``speed.source = "predicted"`` every road is judged at
    predicted speeds."""
    from .evidence import speed_unit

    raw = table["speed_raw"].to_numpy(dtype=float)
    if speed_unit(cfg) == "mph":  # the speed column is in mph
        from ..core.units import kmh_per_mph

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



def network_junction_points(roads: Roads, cfg: Config) -> dict[str, list]:
    """Junctions where one road's end meets another road (per working CRS)."""
    if not cfg["junctions.from_network"]:
        return {}
    from ..sight.hazards import network_junctions

    t = roads.table
    out: dict[str, list] = {}
    for key in roads.work_crs:
        sel = t[(t["work_key"] == key) & t["geometry"].notna()]
        if len(sel) > 1:
            out |= network_junctions(dict(zip(sel["road_id"], sel["geometry"])), cfg["junctions.snap_m"])
    return out


def chunk_rows(table: pd.DataFrame, chunk_km: float) -> list[np.ndarray]:
    """Row positions of the roads in each chunk: consecutive roads, about ``chunk_km`` of road
    a chunk (a road is never split)."""
    length = np.nan_to_num(table["length_m"].to_numpy(dtype=float), nan=0.0)
    chunks, cur, acc = [], [], 0.0
    for i, L in enumerate(length):
        cur.append(i)
        acc += L
        if acc >= chunk_km * 1000.0:
            chunks.append(np.array(cur))
            cur, acc = [], 0.0
    if cur:
        chunks.append(np.array(cur))
    return chunks


# ----------------------------------------------------------------- work folder
TABLES = ("profiles", "curves", "keypoints", "hazards", "hcurves", "notes", "status")


class WorkFolder:
    """Where chunk results are kept, one folder per chunk, each completed by ``done.json``."""

    def __init__(self, path: Path, key: str, resume: bool):
        self.path = Path(path)
        key_file = self.path / "key.json"
        if self.path.exists():
            same = key_file.is_file() and json.loads(key_file.read_text()).get("key") == key
            if not (resume and same):
                shutil.rmtree(self.path)
        self.path.mkdir(parents=True, exist_ok=True)
        key_file.write_text(json.dumps({"key": key}))

    def chunk(self, k: int) -> Path:
        return chunk_folder(self.path, k)

    def done(self, k: int) -> bool:
        return (self.chunk(k) / "done.json").is_file()

    def write(self, k: int, result: dict) -> None:
        write_chunk(self.path, k, result)

    def meta(self, k: int) -> dict:
        return json.loads((self.chunk(k) / "done.json").read_text())

    def files(self, name: str) -> list[str]:
        """The chunk files of table ``name`` (a list: paths never go into SQL text)."""
        return sorted(str(p) for p in self.path.glob(f"chunk_*/{name}.parquet"))


def chunk_folder(work_path: Path, k: int) -> Path:
    return Path(work_path) / f"chunk_{k:05d}"


def write_chunk(work_path: Path, k: int, result: dict) -> None:
    """Write one chunk's tables into the work folder at ``work_path`` (from this process or a
    worker); the chunk's folder is renamed into place only once complete."""
    final = chunk_folder(work_path, k)
    tmp = Path(work_path) / f".tmp_{k:05d}_{os.getpid()}"
    if tmp.exists():
        shutil.rmtree(tmp)
    tmp.mkdir()
    for name in TABLES:
        _typed(name, result[name]).to_parquet(tmp / f"{name}.parquet", index=False)
    meta = {key: result[key] for key in ("seconds", "points_used", "points_dropped", "sampler_notes")}
    (tmp / "done.json").write_text(json.dumps(meta))
    if final.exists():
        shutil.rmtree(final)
    tmp.rename(final)


def _typed(name: str, frame: pd.DataFrame) -> pd.DataFrame:
    """A chunk table with a fixed schema even when empty (so every chunk file reads alike)."""
    if frame is not None and len(frame):
        return frame
    from ..alignment.fit import empty_curves

    if name == "profiles":
        return empty_profiles()
    if name == "curves":
        e = empty_curves()
        e.insert(0, "road_id", pd.Series(dtype=str))
        from .roadwork import UNCERTAINTY_COLUMNS

        for col in UNCERTAINTY_COLUMNS + ["sight_sd_m", "sight_formula_m"]:
            e[col] = pd.Series(dtype=float)
        return e
    if name == "keypoints":
        return pd.DataFrame({"road_id": pd.Series(dtype=str), "chainage_m": pd.Series(dtype=float),
                             "direction": pd.Series(dtype=str), "sight_m": pd.Series(dtype=float),
                             "limit_kind": pd.Series(dtype=str), "curve_no": pd.Series(dtype="int64"),
                             "grade": pd.Series(dtype=float), "speed_kmh": pd.Series(dtype=float)})
    if name == "hazards":
        return pd.DataFrame({c: pd.Series(dtype="int64" if c == "curve_no" else
                                          (float if c.endswith("_m") else str)) for c in HAZARD_COLUMNS})
    if name == "hcurves":
        from ..plan.horizontal import HCURVE_COLUMNS

        cols = ["road_id"] + HCURVE_COLUMNS + HCURVE_CHECK_COLUMNS
        kinds = {"road_id": str, "direction": str, "hcurve_no": "int64", "below_min_radius": bool,
                 "hso_valid": bool}
        return pd.DataFrame({c: pd.Series(dtype=kinds.get(c, float)) for c in cols})
    if name == "notes":
        return pd.DataFrame({"road_id": pd.Series(dtype=str), "note": pd.Series(dtype=str),
                             "from_m": pd.Series(dtype=float), "to_m": pd.Series(dtype=float),
                             "detail": pd.Series(dtype=str)})
    if name == "status":
        return pd.DataFrame({"road_id": pd.Series(dtype=str), "status": pd.Series(dtype=str),
                             "reason": pd.Series(dtype=str), "ground_spacing_m": pd.Series(dtype=float),
                             "resolution_m": pd.Series(dtype=float)})
    raise KeyError(name)


def empty_profiles() -> pd.DataFrame:
    return pd.DataFrame({
        "road_id": pd.Series(dtype=str), "chainage_m": pd.Series(dtype=float), "x": pd.Series(dtype=float),
        "y": pd.Series(dtype=float), "ground_z_m": pd.Series(dtype=float), "ground_flag": pd.Series(dtype=str),
        "ground_offset_m": pd.Series(dtype=float), "filter_m": pd.Series(dtype=float),
        "fitted_z_m": pd.Series(dtype=float), "grade_pct": pd.Series(dtype=float),
        "sight_fwd_m": pd.Series(dtype=float), "sight_back_m": pd.Series(dtype=float),
        "limit_fwd": pd.Series(dtype=str), "limit_back": pd.Series(dtype=str),
        "curve_fwd": pd.Series(dtype="int64"), "curve_back": pd.Series(dtype="int64"),
        "speed_fwd_kmh": pd.Series(dtype=float), "speed_back_kmh": pd.Series(dtype=float),
    })


def _run_chunk_to_folder(job: Job, rows: pd.DataFrame, net_junctions: dict, folder: str, k: int) -> dict:
    """Worker side of the local engine: run a chunk and write it (the worker shares the disk)."""
    write_chunk(Path(folder), k, process_chunk(job, rows, net_junctions))
    return {"k": k, "n": len(rows)}


# ------------------------------------------------------------------ the result
@dataclass
class NetworkResult:
    """A finished network run: the roads, where the chunk results are, and the verdicts."""

    roads: Roads
    work: WorkFolder
    timings: dict[str, float]
    ground_info: dict
    notes: list[str]
    criteria: object = None
    evaluation: object = None
    step_m: float = 5.0
    chunks: dict = field(default_factory=dict)
    evidence: dict = field(default_factory=dict)  # what the inputs say (pipeline.evidence)
    extra_notes: pd.DataFrame | None = None  # per-road notes made before the chunks (substituted speeds)

    def _read(self, name: str) -> pd.DataFrame:
        from ..core.sqlrun import parquet_relation

        files = self.work.files(name)
        if not files:
            return _typed(name, None)
        with duckdb.connect() as con:
            frame = parquet_relation(con, files).df()
        return frame if len(frame) else _typed(name, None)

    def _order(self, frame: pd.DataFrame, by: list[str]) -> pd.DataFrame:
        pos = {r: i for i, r in enumerate(self.roads.table["road_id"])}
        frame = frame.assign(_o=frame["road_id"].map(pos)).sort_values(["_o"] + by, kind="stable")
        return frame.drop(columns="_o").reset_index(drop=True)

    @property
    def profiles(self) -> pd.DataFrame:
        """Every station of every road (read in full: for small networks and tests)."""
        return self._order(self._read("profiles"), ["chainage_m"])

    def road_profile(self, road_id: str) -> pd.DataFrame:
        return self.road_profiles([road_id]).get(road_id, _typed("profiles", None))

    def road_profiles(self, road_ids) -> dict[str, pd.DataFrame]:
        """The stations of several roads, read in one pass over the chunk files."""
        ids = sorted({str(r) for r in road_ids})
        if not ids:
            return {}
        from ..core.sqlrun import parquet_view

        with duckdb.connect() as con:
            con.register("wanted", pd.DataFrame({"road_id": ids}))
            parquet_view(con, "stations", self.work.files("profiles"))
            frame = con.sql("SELECT p.* FROM stations p JOIN wanted USING (road_id) ORDER BY road_id, chainage_m").df()
        return {rid: g.reset_index(drop=True) for rid, g in frame.groupby("road_id", sort=False)}

    @property
    def curves(self) -> pd.DataFrame:
        return self._order(self._read("curves"), ["curve_no"])

    @property
    def hcurves(self) -> pd.DataFrame:
        return self._order(self._read("hcurves"), ["hcurve_no"])

    @property
    def hazards(self) -> pd.DataFrame:
        return self._read("hazards")

    @property
    def keypoints(self) -> pd.DataFrame:
        return self._read("keypoints")

    def status(self) -> pd.DataFrame:
        return self._read("status")

    def road_table(self) -> pd.DataFrame:
        t = self.roads.table
        st = self.status().set_index("road_id")
        return pd.DataFrame({
            "road_id": t["road_id"],
            "name": t["name"],
            "road_class": t["road_class"],
            "aadt": t["aadt"],
            "speed_kmh": t["speed_kmh"],
            "speed_basis": t["speed_basis"],
            "length_m": t["length_m"].round(2),
            "status": st["status"].reindex(t["road_id"]).to_numpy(),
            "reason": st["reason"].reindex(t["road_id"]).to_numpy(),
            "ground_spacing_m": st["ground_spacing_m"].reindex(t["road_id"]).to_numpy(dtype=float),
            "resolution_m": st["resolution_m"].reindex(t["road_id"]).to_numpy(dtype=float),
        })

    def data_notes(self) -> pd.DataFrame:
        notes = self._read("notes")
        if self.extra_notes is not None and len(self.extra_notes):
            notes = pd.concat([self.extra_notes.astype(notes.dtypes.to_dict()), notes], ignore_index=True)
        return self._order(notes, [])


# ------------------------------------------------------------------- the run
def _run_key(roads_path, ground_path, cfg: Config) -> str:
    """What the results of a run depend on: inputs, settings and the version."""
    h = hashlib.sha256()
    for p in (roads_path, ground_path, cfg["structures.file"], cfg["junctions.file"], *cfg["criteria.files"]):
        h.update((file_sha256(p) if p else "-").encode())
    settings = {s: v for s, v in cfg.as_dict().items() if s != "run"}
    h.update(json.dumps(settings, sort_keys=True, default=str).encode())
    h.update(__version__.encode())
    return h.hexdigest()


def _workers(cfg: Config) -> int:
    n = cfg["run.workers"]
    return n if n > 0 else (os.cpu_count() or 1)


def run_network(roads_path: str | Path, ground_path: str | Path, cfg: Config,
                progress: Progress | None = None, work_dir: str | Path | None = None,
                resume: bool = False, pool=None) -> NetworkResult:
    """Ingest, the per-road stages in chunks, and the evaluation, for a whole network. Known
    structures come from ``structures.file`` and junctions from ``junctions.file``.

    ``work_dir`` holds the chunk results (a temporary folder, removed with the result, when
    not given); with ``resume`` the chunks already finished there for the same inputs and
    settings are reused."""
    from ..evaluate.criteria import get_set
    from ..evaluate.judge import evaluate
    from ..ingest.readers import read_features

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
        from .evidence import examine, screen_speeds, speed_notes

        evidence = examine(roads, ground, cfg)
        tick()
    table = roads.table
    found = screen_speeds(table, cfg)
    table["speed_kmh"], table["speed_basis"], table["speed_reason"] = resolve_speeds(table, cfg)
    extra_notes = speed_notes(table, found, cfg)
    evidence["roads_at_substituted_speeds"] = int(len(extra_notes) - extra_notes["detail"].str.contains(
        "road skipped").sum()) if len(extra_notes) else 0
    net_junctions = network_junction_points(roads, cfg)
    timings["ingest"] = time.perf_counter() - t0

    owner = None
    if work_dir is None:
        owner = tempfile.mkdtemp(prefix="sightaudit-work-")
        work_dir = Path(owner) / "work"
    work = WorkFolder(Path(work_dir), _run_key(roads_path, ground_path, cfg), resume)
    job = Job(cfg=cfg, cset=cset, work_crs=roads.work_crs, source_crs=roads.source_crs, ground=ground,
              structures=structures, junctions=junction_layer)
    chunks = chunk_rows(table, cfg["run.chunk_km"])
    todo = [k for k in range(len(chunks)) if not work.done(k)]
    t0 = time.perf_counter()
    with progress.stage("profiles, curves, sight", total=len(table)) as tick:
        for k in set(range(len(chunks))) - set(todo):
            tick(len(chunks[k]))
        _run_chunks(job, table, chunks, todo, net_junctions, work, cfg, tick, pool)
    wall = time.perf_counter() - t0

    # what the chunks report
    points_used = points_dropped = 0
    sampler_notes: list[str] = []
    for k in range(len(chunks)):
        meta = work.meta(k)
        for stage, secs in meta["seconds"].items():
            timings[stage] = timings.get(stage, 0.0) + secs
        points_used += meta["points_used"]
        points_dropped += meta["points_dropped"]
        sampler_notes += [n for n in meta["sampler_notes"] if n not in sampler_notes]
    timings["per-road stages, wall clock"] = wall
    ground_info = ground.describe() | {"path": str(ground.path)}
    if isinstance(ground, PointGround):
        ground_info["points_used"] = points_used
        ground_info["points_dropped_offset"] = points_dropped
        unknown = sorted(set(ground.groups) - set(table["source_id"]))
        if unknown:
            ground_info["points_for_unknown_roads"] = len(unknown)
            roads.notes.append(f"ground points for {len(unknown)} road id(s) not in the roads file ignored "
                               f"(e.g. {unknown[0]!r})")
    result = NetworkResult(roads=roads, work=work, timings=timings, ground_info=ground_info,
                           notes=roads.notes + evidence["notes"] + sampler_notes, criteria=cset,
                           step_m=cfg["profile.step_m"], evidence=evidence, extra_notes=extra_notes,
                           chunks={"total": len(chunks), "computed": len(todo), "reused": len(chunks) - len(todo),
                                   "workers": _workers(cfg), "engine": cfg["run.engine"]})
    if owner is not None:
        weakref.finalize(result, shutil.rmtree, owner, True)
    t0 = time.perf_counter()
    with progress.stage("judging curves (DuckDB)") as tick:
        result.evaluation = evaluate(result.road_table(), work.files("profiles"), result.curves,
                                     work.files("keypoints"), result.hazards, cset, cfg)
        tick()
    timings["evaluate"] = time.perf_counter() - t0
    return result


BLAS_THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


@contextlib.contextmanager
def worker_pool(cfg: Config):
    """A pool of worker processes for the run (``None`` with one worker or another engine).

    Workers are started with 'spawn' (clean processes, no inherited threads or open files)
    and one BLAS thread each: the workers already fill the cores, and the matrices are small.
    The environment is set for the pool's whole life because it starts processes lazily."""
    workers = _workers(cfg)
    if cfg["run.engine"] != "local" or workers <= 1:
        yield None
        return
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor

    saved = {k: os.environ.get(k) for k in BLAS_THREAD_VARS + ("MPLBACKEND",)}
    os.environ.update({k: "1" for k in BLAS_THREAD_VARS} | {"MPLBACKEND": "Agg"})
    try:
        with ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("spawn")) as pool:
            yield pool
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


def _run_chunks(job: Job, table: pd.DataFrame, chunks: list, todo: list[int], net_junctions: dict,
                work: WorkFolder, cfg: Config, tick, pool=None) -> None:
    """Run the unfinished chunks with the configured engine (in ``pool`` when given)."""
    if not todo:
        return

    def rows_of(k):
        rows = table.iloc[chunks[k]]
        return rows, {r: net_junctions[r] for r in rows["road_id"] if r in net_junctions}

    if cfg["run.engine"] == "dask":
        _run_dask(job, todo, rows_of, work, cfg, tick)
        return
    if len(todo) > 1:
        if pool is not None:
            _submit_all(pool, job, todo, rows_of, work, tick)
            return
        with worker_pool(cfg) as own:
            if own is not None:
                _submit_all(own, job, todo, rows_of, work, tick)
                return
    for k in todo:  # one chunk, or one worker: in this process
        rows, nj = rows_of(k)
        work.write(k, process_chunk(job, rows, nj))
        tick(len(rows))


def _submit_all(pool, job: Job, todo: list[int], rows_of, work: WorkFolder, tick) -> None:
    """Hand each chunk (with only its own ground points) to the pool; tick as they finish."""
    from concurrent.futures import as_completed

    futures = {}
    for k in todo:
        rows, nj = rows_of(k)
        futures[pool.submit(_run_chunk_to_folder, _job_for(job, rows), rows, nj, str(work.path), k)] = len(rows)
    for f in as_completed(futures):
        f.result()
        tick(futures[f])


def _job_for(job: Job, rows: pd.DataFrame) -> Job:
    """The job to send with a chunk: ground points cut down to the chunk's roads."""
    if not isinstance(job.ground, PointGround):
        return job
    return Job(**{**job.__dict__, "ground": job.ground.subset(rows["source_id"])})


def _run_dask(job: Job, todo: list[int], rows_of, work: WorkFolder, cfg: Config, tick) -> None:
    """The chunks on a Dask cluster (``run.scheduler`` is its address): the workers compute and
    return each chunk's tables, which are written here, so no shared disk is needed (but the
    DEM, when one is used, must be readable at the same path on every worker)."""
    from ..core.errors import InputError

    try:
        from dask.distributed import Client, as_completed
    except ImportError:
        raise InputError("the dask engine needs dask.distributed: pip install 'sightaudit[cluster]'") from None
    if not cfg["run.scheduler"]:
        raise InputError("the dask engine needs the scheduler's address: --scheduler tcp://HOST:8786")
    with Client(cfg["run.scheduler"]) as client:
        futures = {}
        for k in todo:
            rows, nj = rows_of(k)
            fut = client.submit(process_chunk, _job_for(job, rows), rows, nj, pure=False)
            futures[fut] = (k, len(rows))
        for fut in as_completed(list(futures)):
            k, n = futures[fut]
            work.write(k, fut.result())
            tick(n)


def accounting(result: NetworkResult) -> dict:
    """Counts of roads in, evaluated and skipped (with reasons); checks they add up."""
    n_in = len(result.roads.table)
    st = result.status()
    evaluated = st[st["status"] == "evaluated"]
    skipped = st[st["status"] == "skipped"]
    if n_in != len(evaluated) + len(skipped) or len(st) != n_in or set(st["road_id"]) != set(result.roads.table["road_id"]):
        raise RuntimeError(f"road accounting broken: {n_in} in, {len(evaluated)} evaluated, {len(skipped)} skipped")
    order = {r: i for i, r in enumerate(result.roads.table["road_id"])}
    skipped = skipped.assign(_o=skipped["road_id"].map(order)).sort_values("_o")
    by_reason: dict[str, int] = {}
    for reason in skipped["reason"]:
        by_reason[reason] = by_reason.get(reason, 0) + 1
    return {
        "in": n_in,
        "evaluated": int(len(evaluated)),
        "skipped": int(len(skipped)),
        "skipped_by_reason": by_reason,
        "skipped_roads": [{"road_id": r, "reason": w} for r, w in zip(skipped["road_id"], skipped["reason"])],
    }


def network_summary(result: NetworkResult) -> pd.DataFrame:
    """Roads and km in and evaluated, and ground coverage, by road class (``sql/network_summary.sql``)."""
    from ..core.sqlrun import parquet_relation, sql_text

    with duckdb.connect() as con:
        con.register("roads", result.road_table())
        parquet_relation(con, result.work.files("profiles")).project(
            "road_id, chainage_m, ground_flag").create_view("stations")
        return con.sql(sql_text("network_summary")).df()


def _units_info(cfg: Config) -> dict:
    from ..core.units import OutputUnits

    u = OutputUnits(cfg["output.units"], cfg["output.us_foot"])
    return {"system": u.system, "length": u.length_label, "speed": u.speed_label, "distance": u.distance_label,
            "factor_km": u.km_per_distance}


def run_audit(roads_path: str | Path, ground_path: str | Path, cfg: Config, out_dir: str | Path,
              progress: Progress | None = None, command: list[str] | None = None, resume: bool = False) -> dict:
    """The whole audit: read, compute, write every output into ``out_dir``.

    Outputs are written to a temporary folder beside ``out_dir`` and moved into
    place only when complete. Chunk results are kept in a work folder beside it
    (``.NAME.work``) until then, so that ``resume`` can reuse them after an
    interruption. Returns the run summary (also in ``run.json``).
    """
    from ..outputs.export import staging_folder, write_outputs
    from ..evaluate.quality import data_quality

    progress = progress or Progress()
    started = datetime.now(timezone.utc)
    out_dir = Path(out_dir)
    work_dir = out_dir.resolve().parent / f".{out_dir.resolve().name}.work"
    with staging_folder(out_dir) as tmp, worker_pool(cfg) as pool:
        result = run_network(roads_path, ground_path, cfg, progress, work_dir=work_dir, resume=resume, pool=pool)
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
        with progress.stage("writing outputs"):
            summary["output_failures"] = write_outputs(tmp, result, summary, cfg, pool)
        result.timings["export"] = time.perf_counter() - t0
        finished = datetime.now(timezone.utc)
        summary["finished_utc"] = finished.isoformat(timespec="seconds")
        summary["total_seconds"] = round((finished - started).total_seconds(), 2)
        from ..outputs.export import write_run_json

        write_run_json(tmp / "run.json", summary)
    shutil.rmtree(work_dir, ignore_errors=True)
    return summary

