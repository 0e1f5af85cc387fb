"""The public Python interface: :func:`audit`, :func:`validate`, :class:`AuditResult` and
:class:`~pipeline.core.config.Settings`. The ``sightaudit`` command is a thin layer over these.

>>> import pipeline
>>> result = pipeline.audit("roads.gpkg", "dem.tif", pipeline.Settings().replace(profile__step_m=2.0))
>>> result.deficiencies.head()          # the ranked inventory, a DataFrame
>>> result.write("audit_out")           # every output file

Inputs may be files or objects in memory: roads as a path or a GeoDataFrame (one line per road,
with its CRS); ground as a DEM path, an open rasterio dataset, a path to ground points, or a
DataFrame of ground points (``road_id, x, y, z`` or ``road_id, chainage_m, z``). Objects in
memory are handed to the readers through a temporary GeoParquet or Parquet file, so they are
read, checked and reported exactly as files are; ``run.json`` names them as given in memory.
"""

from __future__ import annotations

import contextlib
import shutil
import tempfile
import time
import weakref
from datetime import datetime, timezone
from pathlib import Path

import geopandas as gpd
import pandas as pd

from .core.config import Config, Settings, load_config
from .ingest.surface import check_sight_settings
from .outputs.export import staging_folder, write_outputs, write_run_json
from .runner.checks import check_inputs
from .runner.network import Progress, run_network, run_summary, worker_pool


def _config(settings) -> Config:
    """Run settings from typed :class:`Settings`, a :class:`Config`, a TOML path or None."""
    if settings is None:
        return load_config(None, {})
    if isinstance(settings, Config):
        return settings
    if isinstance(settings, Settings):
        return settings.to_config()
    return load_config(settings, {})


def _as_path(obj, folder: Path, name: str) -> tuple[str, bool]:
    """A path the readers take for ``obj``: the path itself, an open raster's file, or a
    temporary (Geo)Parquet file written into ``folder`` for a frame in memory."""
    if isinstance(obj, (str, Path)):
        return str(obj), False
    if hasattr(obj, "read") and hasattr(obj, "name") and hasattr(obj, "transform"):  # an open rasterio dataset
        return str(obj.name), False
    if isinstance(obj, pd.DataFrame):
        path = folder / f"{name}.parquet"
        if isinstance(obj, gpd.GeoDataFrame):  # GeoParquet, whatever its geometry column is called
            obj.to_parquet(path)
        else:
            obj.to_parquet(path, index=False)
        return str(path), True
    raise TypeError(f"{name}: give a path, a (Geo)DataFrame or an open raster, not {type(obj).__name__}")


class AuditResult:
    """What an audit found, in memory; :meth:`write` writes every output file.

    Attributes
    ----------
    curves : DataFrame
        Every vertical curve with its verdict, uncertainty and criteria (``curves.csv``).
    deficiencies : DataFrame
        The ranked inventory of deficient stretches (``deficiencies.csv``).
    roads : DataFrame
        Every road with its status, speed basis and ground resolution (``roads.csv``).
    horizontal_curves : DataFrame
        Horizontal curves with their checks (``horizontal_curves.csv``).
    data_notes : DataFrame
        What was masked, substituted or dropped, road by road (``data_notes.csv``).
    summary : dict
        The run summary (``run.json``): inputs, settings, accounting, data quality, timings.
    """

    def __init__(self, network, summary: dict, cfg: Config, keep=None):
        self._network = network
        self.summary = summary
        self._cfg = cfg
        self._keep = keep  # temporary files of inputs given in memory, removed with the result

    @property
    def curves(self) -> pd.DataFrame:
        return self._network.evaluation.curves

    @property
    def deficiencies(self) -> pd.DataFrame:
        return self._network.evaluation.inventory

    @property
    def roads(self) -> pd.DataFrame:
        return self._network.road_table()

    @property
    def horizontal_curves(self) -> pd.DataFrame:
        return self._network.hcurves

    @property
    def data_notes(self) -> pd.DataFrame:
        return self._network.data_notes()

    @property
    def profiles(self) -> pd.DataFrame:
        """Every station of every evaluated road (``profiles.parquet``), read on first use."""
        parts = self._network.road_profiles(set(self._network.road_table()["road_id"]))
        order = [r for r in self._network.road_table()["road_id"] if r in parts]
        return pd.concat([parts[r] for r in order], ignore_index=True) if order else pd.DataFrame()

    def write(self, out_dir: str | Path, pool=None, progress: Progress | None = None) -> dict:
        """Write every output file into ``out_dir`` (made complete or not at all).

        Parameters
        ----------
        out_dir : str or Path
            Output folder; replaced only if it holds an earlier run.
        pool : executor, optional
            Worker processes to draw figures in.
        progress : Progress, optional
            Where to report each output written (silent by default).

        Returns
        -------
        dict
            The run summary as written to ``run.json``, with ``output_failures`` listing any
            extra output (report, figures, PDF) that could not be made.
        """
        t0 = time.perf_counter()
        summary = dict(self.summary)
        with staging_folder(Path(out_dir)) as tmp:
            summary["output_failures"] = write_outputs(tmp, self._network, summary, self._cfg, pool, progress)
            self._network.timings["export"] = time.perf_counter() - t0
            finished = datetime.now(timezone.utc)
            summary["finished_utc"] = finished.isoformat(timespec="seconds")
            started = datetime.fromisoformat(summary["started_utc"])
            summary["total_seconds"] = round((finished - started).total_seconds(), 2)
            write_run_json(tmp / "run.json", summary)
        return summary


def _summary(network, cfg: Config, roads_path: str, ground_path: str, started: datetime, command,
             in_memory: dict) -> dict:
    """The run summary (``run.json``, :func:`pipeline.runner.network.run_summary`), with inputs
    given in memory named so rather than by their temporary files."""
    summary = run_summary(network, roads_path, ground_path, cfg, command, started)
    for key, mem in in_memory.items():
        if mem:
            summary["inputs"][key]["path"] = "given in memory"
    return summary


def audit(roads, ground, settings=None, *, progress: Progress | None = None, work_dir: str | Path | None = None,
          resume: bool = False, pool=None, command: list[str] | None = None) -> AuditResult:
    """Audit a road network: profiles, vertical alignments, sight distance, verdicts, inventory.

    Parameters
    ----------
    roads : str, Path or GeoDataFrame
        Road centrelines: a GeoPackage, GeoParquet or CSV with a WKT column, or a GeoDataFrame.
    ground : str, Path, rasterio dataset or DataFrame
        A DEM (path or open dataset), or ground points (path, or a DataFrame with ``road_id,
        x, y, z`` or ``road_id, chainage_m, z``).
    settings : Settings, Config, str or None
        Typed settings, run settings, a TOML file, or None for the defaults.
    progress : Progress, optional
        Progress display (none by default).
    work_dir : str or Path, optional
        Folder for the per-chunk results (a temporary one by default); with ``resume`` finished
        chunks found there are reused.
    resume : bool
        Reuse finished chunks in ``work_dir``.
    pool : executor, optional
        Worker processes to use (one is started from ``run.workers`` otherwise).
    command : list of str, optional
        The command line, recorded in the summary.

    Returns
    -------
    AuditResult
        The results as DataFrames and the run summary; ``write(out_dir)`` writes the files.

    Raises
    ------
    pipeline.core.errors.InputError
        An input that cannot be read or contradicts the settings (one line saying what to fix).
    """
    cfg = _config(settings)
    check_sight_settings(cfg)
    started = datetime.now(timezone.utc)
    temp = Path(tempfile.mkdtemp(prefix="sightaudit-inputs-"))
    try:
        roads_path, roads_mem = _as_path(roads, temp, "roads")
        ground_path, ground_mem = _as_path(ground, temp, "ground")
        with contextlib.ExitStack() as stack:
            if pool is None:
                pool = stack.enter_context(worker_pool(cfg))
            network = run_network(roads_path, ground_path, cfg, progress or Progress(), work_dir=work_dir,
                                  resume=resume, pool=pool)
        summary = _summary(network, cfg, roads_path, ground_path, started, command,
                           {"roads": roads_mem, "ground": ground_mem})
    except BaseException:  # a refused or failed run leaves no temporary folder behind
        shutil.rmtree(temp, ignore_errors=True)
        raise
    result = AuditResult(network, summary, cfg, keep=temp)
    weakref.finalize(result, shutil.rmtree, temp, True)
    return result


def validate(roads, ground, settings=None) -> dict:
    """What a run would find in the inputs, without running it (``sightaudit validate``).

    Parameters
    ----------
    roads, ground, settings
        As for :func:`audit`.

    Returns
    -------
    dict
        Roads, CRS, lengths, speed coverage, ground coverage and grades, what the ground data
        can support, the problems a run would meet and whether it would be refused.
    """
    cfg = _config(settings)
    with tempfile.TemporaryDirectory(prefix="sightaudit-inputs-") as temp:
        roads_path, _ = _as_path(roads, Path(temp), "roads")
        ground_path, _ = _as_path(ground, Path(temp), "ground")
        return check_inputs(roads_path, ground_path, cfg)
