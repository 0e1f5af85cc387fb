"""Ground points read the fast way (pyarrow, only the columns used) give exactly what the
general reader gives, and every file the fast way does not take still meets the general
reader's checks."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipeline.core.config import load_config
from pipeline.core.errors import InputError
from pipeline.ingest import ground as G
from pipeline.ingest.readers import read_roads


@pytest.fixture(scope="module")
def roads(samples):
    return read_roads(samples["roads"], load_config(None, {}))


def _both(path, roads, cfg=None):
    cfg = cfg or load_config(None, {})
    fast = G.open_ground(path, cfg, roads)
    real = G._read_point_columns
    try:
        G._read_point_columns = lambda p, c: None
        general = G.open_ground(path, cfg, roads)
    finally:
        G._read_point_columns = real
    return fast, general


def _same(a, b):
    assert a.mode == b.mode and a.rows == b.rows and a.groups == b.groups and a.crs == b.crs
    for k in b.arrays:
        np.testing.assert_array_equal(a.arrays[k], b.arrays[k])  # bit for bit


def test_csv_and_parquet_read_fast_equal_the_general_reader(tmp_path, samples, roads):
    """The sample's ground points as CSV, as Parquet and as CSV with extra columns, a byte-order
    mark and blank heights: the fast read is taken (pyarrow) and equals the general one."""
    pts = pd.read_csv(samples["points"], dtype={"road_id": str})
    assert G._read_point_columns(samples["points"], load_config(None, {})) is not None
    _same(*_both(samples["points"], roads))
    pq = tmp_path / "g.parquet"
    pts.to_parquet(pq, index=False)
    assert G._read_point_columns(pq, load_config(None, {})) is not None
    _same(*_both(pq, roads))
    odd = pts.assign(note="x", z=pts["z"].where(np.arange(len(pts)) % 97 != 0))
    csv = tmp_path / "odd.csv"
    csv.write_bytes(b"\xef\xbb\xbf" + odd.to_csv(index=False).encode())
    assert G._read_point_columns(csv, load_config(None, {})) is not None
    _same(*_both(csv, roads))


def test_files_the_fast_read_leaves_get_the_general_checks(tmp_path, samples, roads):
    """A height that is not a number, a WKT geometry column and a Windows-1252 file go to the
    general reader: the first stops naming its row, the others read as before."""
    cfg = load_config(None, {})
    pts = pd.read_csv(samples["points"], dtype={"road_id": str}).head(50)
    bad = pts.astype({"z": object})
    bad.loc[7, "z"] = "12,5"
    path = tmp_path / "bad.csv"
    bad.to_csv(path, index=False)
    assert G._read_point_columns(path, cfg) is None
    with pytest.raises(InputError, match=r"row 9, column z"):
        G.open_ground(path, cfg, roads)
    wkt = pts.assign(geometry=[f"POINT ({x} {y})" for x, y in zip(pts["x"], pts["y"])])
    path = tmp_path / "wkt.csv"
    wkt.to_csv(path, index=False)
    assert G._read_point_columns(path, cfg) is None
    _same(*_both(path, roads))
    path = tmp_path / "cp1252.csv"
    path.write_bytes(pts.assign(note="caf\xe9").to_csv(index=False).encode("cp1252"))
    _same(*_both(path, roads))
