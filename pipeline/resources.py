"""Where the bundled files live: the SQL and criteria tables (``sql/``) and the
sample network (``data_samples/``), both at the top of the source tree."""

from __future__ import annotations

from pathlib import Path

from .errors import InputError

_ROOT = Path(__file__).resolve().parent.parent


def _folder(name: str) -> Path:
    path = _ROOT / name
    if not path.is_dir():
        raise InputError(f"{path}: bundled folder missing; install sightaudit from its source tree (pip install -e .)")
    return path


def sql_dir() -> Path:
    return _folder("sql")


def samples_dir() -> Path:
    return _folder("data_samples")


def sample_paths() -> dict[str, Path]:
    d = samples_dir()
    return {
        "roads": d / "wendle_vale_roads.gpkg",
        "dem": d / "wendle_vale_dem.tif",
        "points": d / "wendle_vale_ground_points.csv",
        "structures": d / "wendle_vale_structures.csv",
        "junctions": d / "wendle_vale_junctions.csv",
    }
