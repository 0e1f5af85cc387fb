"""Shared test set-up: libraries that write to $HOME get a temporary home, and
small helpers that write input files of every supported kind."""

from __future__ import annotations

import atexit
import os
import shutil
import tempfile

_HOME = tempfile.mkdtemp(prefix="sightaudit-test-home-")
atexit.register(shutil.rmtree, _HOME, True)
os.environ.setdefault("MPLCONFIGDIR", os.path.join(_HOME, "mpl"))
os.environ["XDG_CACHE_HOME"] = os.path.join(_HOME, "cache")
os.environ["HOME"] = _HOME
os.environ.setdefault("MPLBACKEND", "Agg")

from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402


def write_roads_gpkg(path: Path, ids, geoms, crs: str, **columns) -> Path:
    import geopandas as gpd

    data = {"road_id": list(ids)} | {k: list(v) for k, v in columns.items()}
    gpd.GeoDataFrame(data, geometry=list(geoms), crs=crs).to_file(path, layer="roads", driver="GPKG",
                                                                  engine="pyogrio")
    return path


def write_dem(path: Path, array: np.ndarray, transform, crs: str | None, nodata: float | None = -9999.0) -> Path:
    import rasterio

    with rasterio.open(path, "w", driver="GTiff", width=array.shape[1], height=array.shape[0], count=1,
                       dtype="float32", crs=crs, transform=transform, nodata=nodata) as dst:
        dst.write(array.astype("float32"), 1)
    return path


@pytest.fixture
def run_cli(capsys):
    """Call the command in-process; returns (exit code, stdout, stderr)."""
    from pipeline.cli import main

    def call(*argv):
        code = main([str(a) for a in argv])
        out = capsys.readouterr()
        return code, out.out, out.err

    return call


@pytest.fixture(scope="session")
def samples():
    from pipeline.core.resources import sample_paths

    return sample_paths()


@pytest.fixture(scope="session")
def demo_out(tmp_path_factory):
    """The demo's output folder, with the field sheets, run once per test session (the tests of
    the report, the tables, the sheets and the real clients all read this one run)."""
    from pipeline.cli import main

    out = tmp_path_factory.mktemp("demo") / "out"
    assert main(["demo", "--out", str(out), "--quiet", "--profiles-pdf"]) == 0
    return out
