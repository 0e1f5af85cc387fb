"""The run engines: the chunks in this process, in a pool of processes, or on a Dask cluster.

``run.engine = "local"`` runs the chunks in a pool of ``run.workers`` spawned processes (all
cores by default), or in this process when there is one chunk or one worker; each worker writes
its chunk straight into the work folder. ``run.engine = "dask"`` sends the chunks to the Dask
scheduler at ``run.scheduler``; the workers return each chunk's tables, written here.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
from concurrent.futures import ProcessPoolExecutor, as_completed
from pathlib import Path

import pandas as pd

from ..core.config import Config
from ..core.errors import InputError
from ..ingest.readers import PointGround
from .roadwork import Job, process_chunk
from .workfolder import WorkFolder, write_chunk

BLAS_THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def worker_count(cfg: Config) -> int:
    """How many worker processes the run uses.

    Parameters
    ----------
    cfg : Config
        The run's settings (``run.workers``; 0 or less means all cores).

    Returns
    -------
    int
        The number of workers, at least 1.
    """
    n = cfg["run.workers"]
    return n if n > 0 else (os.cpu_count() or 1)


@contextlib.contextmanager
def worker_pool(cfg: Config):
    """A pool of worker processes for the run (``None`` with one worker or another engine).

    Workers are started with 'spawn' (clean processes, no inherited threads or open files)
    and one BLAS thread each: the workers already fill the cores, and the matrices are small.
    The environment is set for the pool's whole life because it starts processes lazily.

    Parameters
    ----------
    cfg : Config
        The run's settings (``run.engine``, ``run.workers``).

    Returns
    -------
    contextlib.AbstractContextManager
        Yields a ``ProcessPoolExecutor``, or ``None`` when the run needs no pool.
    """
    workers = worker_count(cfg)
    if cfg["run.engine"] != "local" or workers <= 1:
        yield None
        return
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


def run_chunks(job: Job, table: pd.DataFrame, chunks: list, todo: list[int], net_junctions: dict,
               work: WorkFolder, cfg: Config, tick, pool=None) -> None:
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
        Called with the number of roads each time a chunk is done.
    pool : concurrent.futures.Executor, optional
        A pool to run in (otherwise one is made for the call when useful).

    Returns
    -------
    None
    """
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


def _run_chunk_to_folder(job: Job, rows: pd.DataFrame, net_junctions: dict, folder: str, k: int) -> dict:
    """Worker side of the local engine: run a chunk and write it (the worker shares the disk)."""
    write_chunk(Path(folder), k, process_chunk(job, rows, net_junctions))
    return {"k": k, "n": len(rows)}


def _submit_all(pool, job: Job, todo: list[int], rows_of, work: WorkFolder, tick) -> None:
    """Hand each chunk (with only its own ground points) to the pool; tick as they finish."""
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
            futures[fut] = (k, len(rows))
        for fut in dask_completed(list(futures)):
            k, n = futures[fut]
            work.write(k, fut.result())
            tick(n)
