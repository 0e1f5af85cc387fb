"""Profile numerics: stations, bilinear DEM sampling, reduction of ground points, gaps."""

from __future__ import annotations

import numpy as np
import pytest
from rasterio.transform import from_origin

from pipeline.profile.stations import FILLED, MEASURED, MISSING, bilinear, regularise, station_chainages

# 3 x 3 raster, 10 m cells, upper-left corner at (0, 30): cell (row r, col c) has its centre
# at x = 5 + 10 c, y = 25 - 10 r. Values form the plane z = 10 + 10 c + 30 r.
GRID = np.array([[10.0, 20.0, 30.0], [40.0, 50.0, 60.0], [70.0, 80.0, 90.0]])
AFF = from_origin(0.0, 30.0, 10.0, 10.0)


@pytest.mark.parametrize("x, y, expected", [
    # computed by hand: (10, 20) lies midway between the four upper-left centres -> mean(10, 20, 40, 50)
    (10.0, 20.0, 30.0),
    # c = 0.2, r = 0.1: 0.72*10 + 0.18*20 + 0.08*40 + 0.02*50 = 15.0
    (7.0, 24.0, 15.0),
    # exactly on the centre of the lower-right cell
    (25.0, 5.0, 90.0),
    # inside the raster but outside the outer centres: the edge cell's value
    (2.0, 28.0, 10.0),
])
def test_bilinear_by_hand(x, y, expected):
    got = bilinear(GRID, AFF, np.array([x]), np.array([y]))[0]
    assert got == pytest.approx(expected, abs=1e-12)


def test_bilinear_outside_and_nodata():
    grid = GRID.copy()
    grid[1, 1] = np.nan  # nodata in the middle cell
    z = bilinear(grid, AFF, np.array([31.0, 10.0, 5.0]), np.array([10.0, 20.0, 25.0]))
    assert np.isnan(z[0])  # outside the raster
    assert np.isnan(z[1])  # touches the nodata cell
    assert z[2] == pytest.approx(10.0)  # on a centre: the nodata neighbour has zero weight


def test_bilinear_matches_scipy_regular_grid_interpolator():
    """Reference library: scipy.interpolate.RegularGridInterpolator (method 'linear') over the
    cell centres gives the same values to 1e-9 on a random raster."""
    from scipy.interpolate import RegularGridInterpolator

    rng = np.random.default_rng(11)
    arr = rng.normal(300, 20, (20, 30))
    aff = from_origin(1000.0, 2000.0, 2.5, 2.5)
    xc = 1000.0 + (np.arange(30) + 0.5) * 2.5
    yc = 2000.0 - (np.arange(20) + 0.5) * 2.5
    ref = RegularGridInterpolator((yc[::-1], xc), arr[::-1, :], method="linear")
    px = rng.uniform(xc[0], xc[-1], 500)
    py = rng.uniform(yc[-1], yc[0], 500)
    np.testing.assert_allclose(bilinear(arr, aff, px, py), ref(np.column_stack([py, px])), rtol=0, atol=1e-9)


def test_stations_uniform_and_within_road():
    st = station_chainages(1003.0, 5.0)
    assert st[0] == 0 and st[-1] == 1000.0 and np.allclose(np.diff(st), 5.0)
    with pytest.raises(ValueError, match="positive"):
        station_chainages(0.0, 5.0)
    with pytest.raises(ValueError, match="positive"):
        station_chainages(100.0, -1.0)


def test_points_reduce_exactly_on_a_constant_grade():
    """Points every 2 m with jitter, on a straight grade (z = 100 + 0.04 c), reduce to the exact
    line at each station (a local straight-line fit is unbiased on a grade; common practice,
    no source)."""
    rng = np.random.default_rng(5)
    c = np.arange(0.0, 501.0, 2.0) + rng.uniform(-0.6, 0.6, 251)
    z = 100.0 + 0.04 * c
    st = station_chainages(500.0, 5.0)
    zs, flag = regularise(c, z, st, 5.0, 20.0)
    assert np.all(flag == MEASURED)
    ok = flag == MEASURED
    np.testing.assert_allclose(zs[ok], 100.0 + 0.04 * st[ok], atol=1e-9)


def test_gaps_are_marked_never_filled_silently():
    st = station_chainages(300.0, 5.0)
    z = 50.0 + 0.01 * st
    keep = ~((st > 100) & (st < 115)) & ~((st > 200) & (st < 260))  # a 15 m and a 60 m hole
    zs, flag = regularise(st[keep], z[keep], st, 5.0, 20.0)
    short = (st > 100) & (st < 115)
    long_ = (st > 200) & (st < 260)
    assert np.all(flag[short] == FILLED)
    np.testing.assert_allclose(zs[short], z[short])  # linear fill of a linear profile
    assert np.all(flag[long_] == MISSING) and np.all(np.isnan(zs[long_]))
    assert np.all(flag[keep] == MEASURED)
