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


def test_dem_read_by_block_equals_the_whole_raster(tmp_path, monkeypatch):
    """A tiled GeoTIFF (128 x 128 tiles, read four by four; nodata cells) sampled block by block gives bit for bit
    the bilinear values of the whole raster in memory (numpy reference: the same
    ``bilinear`` on the full array), at points on block edges, the raster edge and outside it;
    and no read is larger than a block with its one-cell rim."""
    import rasterio
    from rasterio.transform import from_origin

    from pipeline.ingest import ground as ground_mod
    from pipeline.profile import sampler as sampler_mod
    from pipeline.profile.stations import bilinear

    rng = np.random.default_rng(3)
    z = rng.normal(100.0, 5.0, (1300, 1160)).astype("float32")
    z[40:45, 60:70] = -9999.0
    path = tmp_path / "tiled.tif"
    aff = from_origin(1000.0, 5000.0, 1.0, 1.0)
    with rasterio.open(path, "w", driver="GTiff", width=1160, height=1300, count=1, dtype="float32",
                       crs="EPSG:32633", transform=aff, nodata=-9999.0, tiled=True, blockxsize=128,
                       blockysize=128) as dst:
        dst.write(z, 1)
    dem = G.open_ground(path, load_config(None, {}), None)
    full = np.where(z == -9999.0, np.nan, z.astype(float))
    x = np.concatenate([rng.uniform(995.0, 2165.0, 6000), [1000.0, 2160.0, 1512.0, 1511.5, 1000.5, 1512.5]])
    y = np.concatenate([rng.uniform(3695.0, 5005.0, 6000), [5000.0, 3700.0, 4488.0, 4488.5, 4999.5, 4487.5]])
    sizes = []
    real = sampler_mod.read_dem_cells

    def recording(d, src, win):
        sizes.append((win.height, win.width))
        return real(d, src, win)

    monkeypatch.setattr(sampler_mod, "read_dem_cells", recording)
    blocks = sampler_mod.DemBlocks(dem, keep=4)
    with blocks.opened() as b:
        got = b.bilinear(x, y)
    want = bilinear(full, aff, x, y)
    np.testing.assert_array_equal(np.isnan(got), np.isnan(want))
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-9)
    with rasterio.open(path) as src:
        assert max(h for h, _ in sizes) <= ground_mod.dem_block_size(src)[0] + 2 == 514 < 1300
    assert np.isnan(got[(x < 1000) | (x > 2160) | (y < 3700) | (y > 5000)]).all()
    assert np.isfinite(got[[-4, -3]]).all()  # on the corner of four blocks
