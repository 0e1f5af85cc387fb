"""The network runner: per-road stages, chunks, engines, the work folder and input checks.

- :mod:`.network`     the orchestration: :func:`run_network` and :func:`run_summary`
- :mod:`.speeds`      the speed each road is judged at
- :mod:`.junctions`   junctions found from the network itself
- :mod:`.chunks`      chunks of roads and the layouts of the tables they write
- :mod:`.workfolder`  chunk results on disk, and when they can be reused
- :mod:`.engines`     one process, a pool of processes, or a Dask cluster
- :mod:`.pool`        the pool of worker processes (a light module, made before the rest loads)
- :mod:`.result`      a finished run read back with DuckDB, and its accounting
- :mod:`.progress`    what the run tells the user
- :mod:`.roadwork`    the per-road stages of one chunk
- :mod:`.evidence`    what the inputs say, before assuming anything
- :mod:`.checks`      checking the inputs without running (``sightaudit validate``)
"""

__all__ = ["accounting", "run_network", "run_summary"]


def __getattr__(name: str):
    """The orchestration's names, imported on first use (so that importing a light module of
    this package, such as :mod:`.progress`, does not import every stage)."""
    if name in __all__:
        from . import network

        return getattr(network, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
