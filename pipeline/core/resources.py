"""Where the bundled files live: the SQL and criteria tables (``sql/``) and the
sample network (``data_samples/``), both at the top of the source tree; an installed wheel
carries them inside the package as ``pipeline/_sql`` and ``pipeline/_samples``
(``pyproject.toml``, ``[tool.setuptools.package-dir]``)."""

from __future__ import annotations

from pathlib import Path

from .errors import InputError

_ROOT = Path(__file__).resolve().parents[2]
_PACKAGE = Path(__file__).resolve().parents[1]
_INSTALLED = {"sql": "_sql", "data_samples": "_samples"}


def _folder(name: str) -> Path:
    """The bundled folder ``name``: in a source checkout at the top of the tree, in an installed
    wheel inside the package."""
    for path in (_PACKAGE / _INSTALLED[name], _ROOT / name):
        if path.is_dir():
            return path
    raise InputError(f"{_ROOT / name}: bundled folder missing; reinstall sightaudit (pip install .)")


def sql_dir() -> Path:
    """The folder of the bundled SQL files and criteria tables (``sql/``).

    Returns
    -------
    Path
        In a source checkout the top-level ``sql/``, in an installed wheel ``pipeline/_sql``.
    """
    return _folder("sql")


def samples_dir() -> Path:
    """The folder of the bundled sample network (``data_samples/``).

    Returns
    -------
    Path
        In a source checkout the top-level ``data_samples/``, in a wheel ``pipeline/_samples``.
    """
    return _folder("data_samples")


def sample_paths() -> dict[str, Path]:
    """The files of the bundled sample network (the Wendle Vale roads).

    Returns
    -------
    dict of str to Path
        ``roads`` (GeoPackage), ``dem`` (GeoTIFF), ``points``, ``structures`` and
        ``junctions`` (CSV).
    """
    d = samples_dir()
    return {
        "roads": d / "wendle_vale_roads.gpkg",
        "dem": d / "wendle_vale_dem.tif",
        "points": d / "wendle_vale_ground_points.csv",
        "structures": d / "wendle_vale_structures.csv",
        "junctions": d / "wendle_vale_junctions.csv",
    }
