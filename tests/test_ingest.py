"""Ingest: CRS handling, lengths and chainage, multi-part lines, ground points."""

from __future__ import annotations

import numpy as np
import pyproj
import pytest
import shapely

from conftest import write_roads_gpkg
from pipeline.core.config import Config
from pipeline.ingest.readers import merge_parts, read_roads
from pipeline.profile.stations import locate_points, station_chainages


def _winding_lonlat(lon0=15.31, lat0=47.92, n=60, seed=3):
    """A winding road of a few km in lon/lat (a random walk with gentle turns)."""
    rng = np.random.default_rng(seed)
    heading = np.cumsum(rng.normal(0, 0.15, n))
    step_m = 80.0
    dx = step_m * np.cos(heading)
    dy = step_m * np.sin(heading)
    lat = lat0 + np.concatenate([[0], np.cumsum(dy)]) / 111_132.0
    lon = lon0 + np.concatenate([[0], np.cumsum(dx)]) / (111_320.0 * np.cos(np.radians(lat0)))
    return np.column_stack([lon, lat])


def test_geographic_and_utm_lengths_match_geodesic(tmp_path):
    """Reference: pyproj.Geod (WGS 84 ellipsoid) geodesic length of the same polyline.
    The same road read in EPSG:4326 and in UTM 33N must agree with it within 0.1 %
    (the acceptance bound; UTM scale error is at most about 0.1 %, Snyder 1987)."""
    lonlat = _winding_lonlat()
    geod = pyproj.Geod(ellps="WGS84")
    geodesic = geod.line_length(lonlat[:, 0], lonlat[:, 1])
    to_utm = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32633", always_xy=True)
    utm = np.column_stack(to_utm.transform(lonlat[:, 0], lonlat[:, 1]))
    write_roads_gpkg(tmp_path / "ll.gpkg", ["A"], [shapely.linestrings(lonlat)], "EPSG:4326")
    write_roads_gpkg(tmp_path / "utm.gpkg", ["A"], [shapely.linestrings(utm)], "EPSG:32633")
    ll = read_roads(tmp_path / "ll.gpkg", Config()).table.iloc[0]
    pr = read_roads(tmp_path / "utm.gpkg", Config()).table.iloc[0]
    assert abs(ll["length_m"] - geodesic) / geodesic < 1e-3
    assert abs(pr["length_m"] - geodesic) / geodesic < 1e-3
    assert abs(ll["length_m"] - pr["length_m"]) / geodesic < 1e-3
    # the chosen zone for a road at 15.3 E is UTM 33 N
    assert ll["work_key"] == "utm33N"
    # chainage of stations stays within the road (shapely length is the reference)
    st = station_chainages(ll["length_m"], 5.0)
    assert st[-1] <= shapely.length(ll["geometry"]) + 1e-9 and st[-1] > ll["length_m"] - 5.0


def test_projected_metric_length_is_shapely_length(tmp_path):
    """Reference: shapely's planar length of the input line (projected metric CRS, no transform)."""
    line = shapely.linestrings([(500000, 5300000), (500300, 5300400), (500900, 5300400), (501000, 5301000)])
    write_roads_gpkg(tmp_path / "r.gpkg", ["7"], [line], "EPSG:32633")
    t = read_roads(tmp_path / "r.gpkg", Config()).table
    assert t.iloc[0]["length_m"] == pytest.approx(shapely.length(line), rel=1e-12)
    assert t.iloc[0]["road_id"] == "7"


@pytest.mark.parametrize("feet_crs, metric_twin", [
    ("EPSG:2229", "EPSG:26945"),  # NAD83 / California zone 5: US survey feet and metres
    ("EPSG:2269", "EPSG:32126"),  # NAD83 / Oregon North: international feet and metres
])
def test_feet_crs_gives_metric_chainage(tmp_path, feet_crs, metric_twin):
    """A road stored in a feet CRS and in its metric twin (same projection, EPSG) must give the
    same metric length within 1 mm per km (acceptance bound). Reference: pyproj's own transform
    between the twins."""
    twin = pyproj.CRS(metric_twin)
    x0, y0 = (1_980_000.0, 550_000.0) if metric_twin == "EPSG:26945" else (2_300_000.0, 220_000.0)
    pts_m = np.array([(x0, y0), (x0 + 1200, y0 + 300), (x0 + 2500, y0 - 400), (x0 + 4100, y0 + 900)])
    to_ft = pyproj.Transformer.from_crs(twin, feet_crs, always_xy=True)
    pts_ft = np.column_stack(to_ft.transform(pts_m[:, 0], pts_m[:, 1]))
    write_roads_gpkg(tmp_path / "m.gpkg", ["A"], [shapely.linestrings(pts_m)], metric_twin)
    write_roads_gpkg(tmp_path / "f.gpkg", ["A"], [shapely.linestrings(pts_ft)], feet_crs)
    lm = read_roads(tmp_path / "m.gpkg", Config()).table.iloc[0]["length_m"]
    lf = read_roads(tmp_path / "f.gpkg", Config()).table.iloc[0]["length_m"]
    assert abs(lm - lf) <= 1e-3 * lm / 1000.0
    # and the feet figure is not the raw number of feet
    assert lf == pytest.approx(shapely.length(shapely.linestrings(pts_m)), rel=1e-6)


def test_multilinestring_parts_merged_in_order():
    """Parts joined end to end (second digitised backwards) become one line starting at the
    first part's start; length equals the sum of part lengths (shapely reference)."""
    a = shapely.linestrings([(0, 0), (100, 0), (200, 50)])
    b = shapely.linestrings([(400, 50), (300, 80), (200, 50)])  # reversed, meets a's end
    line, reason = merge_parts(shapely.multilinestrings([a, b]), 0.5)
    assert reason is None
    assert shapely.get_coordinates(line)[0].tolist() == [0.0, 0.0]
    assert shapely.get_coordinates(line)[-1].tolist() == [400.0, 50.0]
    assert shapely.length(line) == pytest.approx(shapely.length(a) + shapely.length(b))


def test_multilinestring_with_gap_is_skipped_with_reason(tmp_path):
    a = shapely.linestrings([(0, 0), (100, 0)])
    b = shapely.linestrings([(150, 0), (300, 0)])  # 50 m gap
    ok = shapely.linestrings([(0, 500), (300, 500)])
    write_roads_gpkg(tmp_path / "r.gpkg", ["gap", "ok"], [shapely.multilinestrings([a, b]), ok], "EPSG:32633")
    t = read_roads(tmp_path / "r.gpkg", Config()).table.set_index("road_id")
    assert "do not meet" in t.loc["gap", "skip_reason"] and "50.0 m" in t.loc["gap", "skip_reason"]
    assert t.loc["ok", "skip_reason"] is None


def test_located_points_recover_known_chainage():
    """Points placed at known chainages, 0-12 m to either side of a bent centreline, are located
    back by shapely's line_locate_point to within 1e-6 m (reference: the construction itself)."""
    line = shapely.linestrings([(0, 0), (400, 0), (400 + 300 * np.cos(0.5), 300 * np.sin(0.5))])
    # chainages away from the bend so the perpendicular foot is unique
    chain = np.array([10.0, 55.5, 120.0, 250.0, 330.0, 470.0, 520.0, 640.0])
    offset = np.array([3.0, -7.5, 12.0, -1.0, 0.0, 4.0, -11.0, 6.0])
    foot = shapely.get_coordinates(shapely.line_interpolate_point(line, chain))
    tangent = np.where(chain[:, None] < 400, [[1.0, 0.0]], [[np.cos(0.5), np.sin(0.5)]])
    normal = np.column_stack([-tangent[:, 1], tangent[:, 0]])  # left of the direction of travel
    pts = foot + normal * offset[:, None]
    got_chain, got_offset = locate_points(line, pts[:, 0], pts[:, 1])
    np.testing.assert_allclose(got_chain, chain, atol=1e-6)
    np.testing.assert_allclose(got_offset, offset, atol=1e-6)


def test_ground_points_grouped_by_id_like_pandas_groupby(tmp_path):
    """Ground points split by road id must hold exactly the rows pandas' groupby gives for the
    same ids read as text (reference: pandas.DataFrame.groupby); ids that differ only by
    surrounding spaces are one road, rows without an id are dropped
    (common practice, no source)."""
    import pandas as pd

    from pipeline.ingest.readers import open_ground

    from shapely.geometry import LineString

    write_roads_gpkg(tmp_path / "r.gpkg", ["A1", "12"],
                     [LineString([(0, 0), (500, 0)]), LineString([(0, 100), (500, 100)])], crs="EPSG:32633")
    cfg = Config()
    roads = read_roads(tmp_path / "r.gpkg", cfg)
    rng = np.random.default_rng(7)
    n = 400
    ids = rng.choice(np.array(["A1", " A1", "A1 ", "12", "", None], dtype=object), n)
    frame = pd.DataFrame({"road_id": ids, "chainage_m": rng.uniform(0, 500, n), "z": rng.normal(300, 5, n)})
    frame.to_csv(tmp_path / "g.csv", index=False)
    ground = open_ground(tmp_path / "g.csv", cfg, roads)

    back = pd.read_csv(tmp_path / "g.csv", dtype={"road_id": str})
    back["key"] = back["road_id"].str.strip()
    back = back[back["key"].notna() & (back["key"] != "")]
    expected = {k: sorted(g["z"].round(9)) for k, g in back.groupby("key")}
    got = {rid: sorted(np.round(ground.points(rid)["z_m"], 9)) for rid in ground.groups}
    assert set(got) == {"A1", "12"} == set(expected)
    for rid in expected:
        assert got[rid] == pytest.approx(expected[rid])
    assert ground.rows == len(back)
