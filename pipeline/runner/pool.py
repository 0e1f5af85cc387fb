"""The local engine's pool of worker processes, in a light module: the command makes the pool
before it imports pandas or any stage, so that the workers start (and import the per-road
stages) while this process imports the rest and reads the inputs.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
from concurrent.futures import ProcessPoolExecutor

from ..core.config import Config

BLAS_THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")

_ROAD_QUEUE = None  # in a worker of the local pool: where each road done is reported


def _init_worker(road_queue) -> None:
    """Worker start-up: keep the queue that progress goes to, and import the per-road stages
    (:mod:`pipeline.runner.roadwork`) at once, while the main process reads the inputs."""
    global _ROAD_QUEUE
    _ROAD_QUEUE = road_queue
    from . import roadwork  # noqa: F401  (the stages, imported once per worker)


def road_queue():
    """In a worker of the local pool, the queue each road done is reported on; else ``None``."""
    return _ROAD_QUEUE


def _warm_up() -> int:
    """A no-op task: handing one to each worker starts the processes at once."""
    return os.getpid()


def warm_up_figures() -> int:
    """Import matplotlib (Agg) in a worker whose chunks are done, while the main process judges
    the network: the report's figures are drawn in the pool next, and the import takes about a
    second.

    Returns
    -------
    int
        The worker's process id.
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot  # noqa: F401

    return os.getpid()


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
    Every process is started at once (one no-op task each), so that they start up while this
    process reads the inputs; the environment is set for the pool's whole life (any process
    it starts inherits it). Each worker reports the roads it finishes on the pool's
    ``road_queue`` (for the progress display).

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
    ctx = multiprocessing.get_context("spawn")
    road_queue = ctx.Queue()
    try:
        with ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=_init_worker,
                                 initargs=(road_queue,)) as pool:
            pool.road_queue = road_queue
            for _ in range(workers):  # start every process now, while the inputs are read
                pool.submit(_warm_up)
            yield pool
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v
        road_queue.close()
