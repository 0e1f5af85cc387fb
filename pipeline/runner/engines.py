"""The run engines: the chunks in this process, in a pool of processes, or on a Dask cluster.

``run.engine = "local"`` runs the chunks in a pool of ``run.workers`` spawned processes (all
cores by default), or in this process when there is one chunk or one worker; each worker writes
its chunk straight into the work folder. ``run.engine = "dask"`` sends the chunks to the Dask
scheduler at ``run.scheduler``; the workers return each chunk's tables, written here.

The pool's processes are started as soon as the pool is made (each imports the per-road stages
at once), so that they start while this process reads the inputs. The costliest chunks are
handed out first, so the last to finish are short ones. Workers report each road done through
a queue, so progress moves road by road, in km, rather than chunk by chunk.
"""

from __future__ import annotations

import queue as queue_module
from concurrent.futures import FIRST_COMPLETED, wait
from pathlib import Path

import pandas as pd

from ..core.config import Config
from ..core.errors import InputError
from ..ingest.readers import PointGround
from .roadwork import Job, process_chunk, road_km
from .workfolder import WorkFolder, write_chunk

from . import pool as _pool
from .pool import BLAS_THREAD_VARS, worker_count, worker_pool  # noqa: F401  (their home before)


def run_chunks(job: Job, table: pd.DataFrame, chunks: list, todo: list[int], net_junctions: dict,
               work: WorkFolder, cfg: Config, tick, pool=None, costs=None) -> None:
    """Run the unfinished chunks with the configured engine, writing each into the work folder.

    Parameters
    ----------
    job : Job
        What every chunk needs: settings, criteria, CRS, ground and features.
    table : pandas.DataFrame
        The roads table.
    chunks : list of numpy.ndarray
        Row positions of each chunk's roads (:func:`pipeline.runner.chunks.chunk_rows`).
    todo : list of int
        The chunks still to run.
    net_junctions : dict
        Junctions found from the network, by road id.
    work : WorkFolder
        Where the chunk results go.
    cfg : Config
        The run's settings (``run.engine``, ``run.workers``, ``run.scheduler``).
    tick : callable
        Called with km of road done (road by road where the engine can tell, else chunk by chunk).
    pool : concurrent.futures.Executor, optional
        A pool to run in (otherwise one is made for the call when useful).
    costs : sequence of float, optional
        Each chunk's estimated cost; the costliest are handed out first (by number of roads
        when not given).

    Returns
    -------
    None
    """
    if not todo:
        return

    def rows_of(k):
        rows = table.iloc[chunks[k]]
        return rows, {r: net_junctions[r] for r in rows["road_id"] if r in net_junctions}

    costs = [len(c) for c in chunks] if costs is None else list(costs)
    order = sorted(todo, key=lambda k: (-costs[k], k))  # costliest first
    if cfg["run.engine"] == "dask":
        _run_dask(job, order, rows_of, work, cfg, tick)
        return
    if len(todo) > 1:
        if pool is not None:
            _submit_all(pool, job, order, rows_of, work, tick)
            return
        with worker_pool(cfg) as own:
            if own is not None:
                _submit_all(own, job, order, rows_of, work, tick)
                return
    for k in todo:  # one chunk, or one worker: in this process
        rows, nj = rows_of(k)
        work.write(k, process_chunk(job, rows, nj, on_road=tick))


def _chunk_km(rows: pd.DataFrame) -> float:
    """The km of road in a chunk, as the progress display counts them."""
    return float(sum(road_km(r) for _, r in rows.iterrows()))


def _run_chunk_to_folder(job: Job, rows: pd.DataFrame, net_junctions: dict, folder: str, k: int) -> dict:
    """Worker side of the local engine: run a chunk and write it (the worker shares the disk);
    each road done is reported on the pool's queue, when it has one."""
    q = _pool.road_queue()
    on_road = (lambda km: q.put((k, km))) if q is not None else None
    write_chunk(Path(folder), k, process_chunk(job, rows, net_junctions, on_road=on_road))
    return {"k": k, "n": len(rows)}


def _submit_all(pool, job: Job, order: list[int], rows_of, work: WorkFolder, tick) -> None:
    """Hand each chunk (with only its own ground points) to the pool, in the order given; tick
    road by road as the workers report, and make up each chunk's km when it finishes."""
    road_queue = getattr(pool, "road_queue", None)
    futures, total, done = {}, {}, {}
    _drain(road_queue)  # anything left from an earlier run in the same pool
    for k in order:
        rows, nj = rows_of(k)
        total[k], done[k] = _chunk_km(rows), 0.0
        futures[pool.submit(_run_chunk_to_folder, _job_for(job, rows), rows, nj, str(work.path), k)] = k
    for _ in range(getattr(pool, "_max_workers", 0)):  # each worker, its chunks done, loads matplotlib
        pool.submit(_pool.warm_up_figures)

    def credit(k, km):
        add = min(km, total[k] - done[k])
        if add > 0:
            done[k] += add
            tick(add)

    pending = set(futures)
    while pending:
        finished, pending = wait(pending, timeout=0.2, return_when=FIRST_COMPLETED)
        while road_queue is not None:
            try:
                k, km = road_queue.get_nowait()
            except queue_module.Empty:
                break
            if k in total:
                credit(k, km)
        for f in finished:
            f.result()
            k = futures[f]
            credit(k, total[k] - done[k])


def _drain(road_queue) -> None:
    while road_queue is not None:
        try:
            road_queue.get_nowait()
        except queue_module.Empty:
            return


def _job_for(job: Job, rows: pd.DataFrame) -> Job:
    """The job to send with a chunk: ground points cut down to the chunk's roads."""
    if not isinstance(job.ground, PointGround):
        return job
    return Job(**{**job.__dict__, "ground": job.ground.subset(rows["source_id"])})


def _run_dask(job: Job, todo: list[int], rows_of, work: WorkFolder, cfg: Config, tick) -> None:
    """The chunks on a Dask cluster (``run.scheduler`` is its address): the workers compute and
    return each chunk's tables, which are written here, so no shared disk is needed (but the
    DEM, when one is used, must be readable at the same path on every worker)."""
    try:
        from dask.distributed import Client
        from dask.distributed import as_completed as dask_completed
    except ImportError:
        raise InputError("the dask engine needs dask.distributed: pip install 'sightaudit[cluster]'") from None
    if not cfg["run.scheduler"]:
        raise InputError("the dask engine needs the scheduler's address: --scheduler tcp://HOST:8786")
    with Client(cfg["run.scheduler"]) as client:
        futures = {}
        for k in todo:
            rows, nj = rows_of(k)
            fut = client.submit(process_chunk, _job_for(job, rows), rows, nj, pure=False)
            futures[fut] = (k, _chunk_km(rows))
        for fut in dask_completed(list(futures)):
            k, km = futures[fut]
            work.write(k, fut.result())
            tick(km)
