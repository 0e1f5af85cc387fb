"""3D sight lines over a DEM: against the AASHTO sight line offset on a curve in a cut, the 2D
line of sight over a crest, the look-ahead on open ground, and a plain brute force on a
generated network; and the area and volume to clear against a hand integral."""

from __future__ import annotations

import numpy as np
import pytest
from affine import Affine
from scipy.ndimage import gaussian_filter, map_coordinates
from scipy.spatial import cKDTree

from pipeline.sight.attribution import LOS
from pipeline.sight.lines import SightRules, sight_both_ways
from pipeline.sight.sight3d import (CREST, END, LOOKAHEAD, OBJECT, TERRAIN, LanePath, obstruction_grid,
                                    sight_3d_both_ways)

RULES = SightRules()  # eye 1.08 m, object 0.60 m, look-ahead 400 m (AASHTO Green Book 2018, ch. 3)
HALF_WIDTH = 3.5      # carriageway edge from the centreline (m), the batter's toe


def _arc_road(R: float, length: float, step: float = 5.0):
    """Stations along a circular arc of radius R (m) turning left, centred on the origin."""
    s = np.arange(0.0, length + 1e-9, step)
    th = s / R - length / R / 2
    return s, R * np.cos(th), R * np.sin(th)


def _grid_xy(x0, x1, y0, y1, cell=1.0):
    """Cell-centre coordinates of a north-up raster covering a box, and its transform."""
    xs = np.arange(x0, x1, cell) + cell / 2
    ys = np.arange(y1, y0, -cell) - cell / 2
    X, Y = np.meshgrid(xs, ys)
    return X, Y, Affine(cell, 0, x0, 0, -cell, y1)


def _batter_curve(R=200.0, level=100.0, cell=1.0):
    """A circular curve on level ground with a 1:2 (V:H) cut batter rising from the carriageway
    edge on the inside of the curve."""
    s, x, y = _arc_road(R, 700.0)
    X, Y, tr = _grid_xy(-20, 220, -220, 220, cell)
    inward = R - np.hypot(X, Y)  # offset from the centreline towards the curve's centre (m)
    dem = level + np.where(inward > HALF_WIDTH, (inward - HALF_WIDTH) / 2.0, 0.0)
    path = LanePath(s, x, y, lambda q: np.full(np.shape(q), level))
    return s, path, dem, tr


def _hso_sight(radius, m):
    """S from AASHTO's horizontal sight line offset M = R (1 - cos(28.65 S / R)) (Green Book 2018,
    Eq. 3-37, from memory), angle in degrees, solved for S."""
    return radius / 28.65 * np.degrees(np.arccos(1.0 - m / radius))


def test_curve_in_cut_matches_the_sight_line_offset_relation():
    """AASHTO Green Book 2018 horizontal sight line offset (from memory): on a circular curve in
    a 1:2 cut, the available sight from each lane equals S solved from M = R (1 - cos(28.65 S /
    R)), R the lane centre's radius and M from the lane centre to where the batter reaches the
    height of the sight line's middle (between eye and object heights), within 3 %."""
    R = 200.0
    s, path, dem, tr = _batter_curve(R)
    grid = obstruction_grid(dem, tr, path, HALF_WIDTH)
    res = sight_3d_both_ways(path, grid, RULES, lane_width_m=3.6, traffic_side="right")
    mid = (s > 200) & (s < 500)
    h_mid = (RULES.eye_height_m + RULES.object_height_m) / 2
    batter_at = HALF_WIDTH + 2 * h_mid  # offset from the centreline where the batter is h_mid high
    # right-hand traffic on a left-hand curve: forward is the outside lane, backward the inside one
    for name, lane_r in (("fwd", R + 1.8), ("back", R - 1.8)):
        M = batter_at - (R - lane_r)
        expected = _hso_sight(lane_r, M)
        got = res[f"sight_3d_{name}_m"][mid]
        assert got == pytest.approx(np.full(mid.sum(), expected), rel=0.03)
        assert np.all(res[f"limit_3d_{name}"][mid] == TERRAIN)
    # the two lanes differ as the relation says (inside lane sees less)
    assert np.median(res["sight_3d_back_m"][mid]) < np.median(res["sight_3d_fwd_m"][mid])


def test_left_hand_traffic_swaps_the_lanes():
    """Common practice, no source: with left-hand traffic the forward direction drives the
    inside lane of a left-hand curve, so it sees what the backward direction sees with
    right-hand traffic (same geometry, mirrored lane)."""
    s, path, dem, tr = _batter_curve()
    grid = obstruction_grid(dem, tr, path, HALF_WIDTH)
    right = sight_3d_both_ways(path, grid, RULES, traffic_side="right")
    left = sight_3d_both_ways(path, grid, RULES, traffic_side="left")
    mid = (s > 200) & (s < 500)
    assert left["sight_3d_fwd_m"][mid] == pytest.approx(right["sight_3d_back_m"][mid], rel=0.01)
    assert left["sight_3d_back_m"][mid] == pytest.approx(right["sight_3d_fwd_m"][mid], rel=0.01)


def _crest_profile(level=100.0, g1=0.03, g2=-0.03, L=200.0, pvi=600.0):
    """A symmetric parabolic crest (AASHTO Green Book ch. 3 form), tangents beyond."""
    def z(q):
        q = np.asarray(q, dtype=float)
        pvc = pvi - L / 2
        x = np.clip(q - pvc, 0.0, L)
        return level + g1 * (q - pvc) + np.where(q > pvc, (g2 - g1) * x ** 2 / (2 * L)
                                                   + (g2 - g1) * np.maximum(q - pvc - L, 0.0), 0.0)
    return z


def test_crest_on_a_straight_road_in_open_ground_equals_2d():
    """The 2D line of sight of pipeline.sight.lines (itself checked against the AASHTO crest
    closed form in tests/test_sight.py): on a straight road whose ground beside it follows the
    road (open ground), the 3D sight equals it within 1 % where the crest limits it, and the
    crest is named as the limit."""
    z = _crest_profile()
    s = np.arange(0.0, 1200.0 + 1e-9, 5.0)
    ang = np.radians(30.0)  # the road crosses the grid at an angle
    x, y = 50 + s * np.cos(ang), 50 + s * np.sin(ang)
    X, Y, tr = _grid_xy(0, 1150, 0, 700)
    along = (X - 50) * np.cos(ang) + (Y - 50) * np.sin(ang)
    dem = z(along)  # open ground: level across the road
    path = LanePath(s, x, y, z)
    res = sight_3d_both_ways(path, obstruction_grid(dem, tr, path, HALF_WIDTH), RULES)
    two = sight_both_ways(s, z, RULES, fine_step_m=0.5, headlight=False)
    for name in ("fwd", "back"):
        crest = two[f"limit_{name}"] == LOS
        assert crest.sum() > 20
        assert res[f"sight_3d_{name}_m"][crest] == pytest.approx(two[f"sight_{name}_m"][crest], rel=0.01)
        assert np.all(res[f"limit_3d_{name}"][crest] == CREST)


def test_straight_road_in_open_level_ground_sees_the_lookahead():
    """Common practice, no source: nothing blocks a straight level road in level ground, so every
    station sees the look-ahead, or the road's end where that comes first."""
    s = np.arange(0.0, 1000.0 + 1e-9, 5.0)
    x, y = 20 + s * 0.8, 20 + s * 0.6
    X, Y, tr = _grid_xy(0, 840, 0, 640)
    dem = np.full(X.shape, 50.0)
    path = LanePath(s, x, y, np.full(len(s), 50.0))
    res = sight_3d_both_ways(path, obstruction_grid(dem, tr, path, HALF_WIDTH), RULES)
    to_end = {"fwd": s[-1] - s, "back": s}
    for name in ("fwd", "back"):
        expected = np.minimum(to_end[name], RULES.lookahead_m)
        has = to_end[name] > 0
        assert res[f"sight_3d_{name}_m"][has] == pytest.approx(expected[has], abs=1e-6)
        lim = res[f"limit_3d_{name}"][has]
        assert np.all(lim == np.where(to_end[name][has] < RULES.lookahead_m, END, LOOKAHEAD))


def test_trees_in_a_surface_model_are_a_roadside_object():
    """Common practice, no source: a stand of trees on the inside of a curve in level ground,
    given as a surface model, limits the sight and is named a roadside object; without the
    surface model the same curve sees further."""
    R = 200.0
    s, x, y = _arc_road(R, 700.0)
    X, Y, tr = _grid_xy(-20, 220, -220, 220)
    dem = np.full(X.shape, 100.0)
    inward = R - np.hypot(X, Y)
    trees = np.where((inward > 8.0) & (inward < 30.0), 112.0, 100.0)
    path = LanePath(s, x, y, np.full(len(s), 100.0))
    bare = sight_3d_both_ways(path, obstruction_grid(dem, tr, path, HALF_WIDTH), RULES)
    wooded = sight_3d_both_ways(path, obstruction_grid(dem, tr, path, HALF_WIDTH, surface=trees), RULES)
    mid = (s > 200) & (s < 500)
    assert np.all(wooded["limit_3d_back"][mid] == OBJECT)
    assert np.all(wooded["sight_3d_back_m"][mid] < bare["sight_3d_back_m"][mid] - 50)
    # the inside lane's centre is 8 - 1.8 = 6.2 m from the trees' edge; on the raster the edge
    # is a ramp one cell wide between the last ground and the first tree cell centres
    # (bilinear), which a 12 m canopy lifts to the line's height almost at once: the relation
    # (AASHTO, as above) gives S for M between 5.2 and 6.2 m
    lo, hi = _hso_sight(R - 1.8, 8.0 - 1.0 - 1.8), _hso_sight(R - 1.8, 8.0 - 1.8)
    got = wooded["sight_3d_back_m"][mid]
    assert np.all((got > 0.97 * lo) & (got < 1.03 * hi))


# --------------------------------------------------------------------------- brute force
def _network(seed: int):
    """A small generated network (invented, test data only): two roads on a 1 m DEM with crests,
    sags, horizontal curves, cut and fill batters and rolling roadside ground."""
    rng = np.random.default_rng(seed)
    roads = []
    # road 1: tangent, a 150 m radius left-hand curve, tangent; road 2: an S-bend
    for k, (radii, y0) in enumerate((([np.inf, 150.0, np.inf], 0.0), ([np.inf, -220.0, 260.0, np.inf], 420.0))):
        seg = 0.5
        heading, pts, s_pts = 0.0, [np.array([60.0, 60.0 + y0])], [0.0]
        for R in radii:
            for _ in range(int(round(120 / seg))):
                if np.isfinite(R):
                    heading += seg / R
                pts.append(pts[-1] + seg * np.array([np.cos(heading), np.sin(heading)]))
                s_pts.append(s_pts[-1] + seg)
        pts = np.array(pts)
        s_pts = np.array(s_pts)
        a, g1, g2 = rng.uniform(200, 300), rng.uniform(0.02, 0.05), -rng.uniform(0.02, 0.05)
        L = 120.0

        def zf(q, a=a, g1=g1, g2=g2, L=L):
            q = np.asarray(q, dtype=float)
            x = np.clip(q - a, 0, L)
            return 100 + g1 * q + np.where(q > a, (g2 - g1) * x ** 2 / (2 * L) + (g2 - g1) * np.maximum(q - a - L, 0), 0)
        roads.append((pts, s_pts, zf))
    X, Y, tr = _grid_xy(0, 560, -60, 900)
    dem = np.full(X.shape, np.nan)
    hills = gaussian_filter(rng.standard_normal(X.shape), 25.0)
    hills = hills / hills.std() * 3.0
    for pts, s_pts, zf in roads:
        d, i = cKDTree(pts).query(np.column_stack([X.ravel(), Y.ravel()]))
        d, i = d.reshape(X.shape), i.reshape(X.shape)
        near = d < 80
        zr = zf(s_pts[i])
        off = np.maximum(d - HALF_WIDTH, 0.0)
        cut = np.clip(hills, -off / 3.0, off / 2.0)  # 1:2 cut, 1:3 fill batters up to the roadside ground
        z = np.where(d <= HALF_WIDTH, zr, zr + cut)
        dem = np.where(near & (np.isnan(dem) | (d < 40)), z, dem)
    return roads, dem, tr


def _brute(dem, tr, path, eyes_i, side, sign, lane_off, rules, obj_step=1.0):
    """Plainly: from each eye, objects every ``obj_step`` metres along the lane, each line
    sampled every 0.5 m on the raw DEM (scipy bilinear), the first hidden object is the sight."""
    inv = ~tr
    lx, ly, A = path.lane(side * lane_off)
    out = []
    for i in eyes_i:
        d = np.arange(obj_step, rules.lookahead_m + 1e-9, obj_step)
        q = A[i] + sign * d
        d = d[(q >= A[0]) & (q <= A[-1])]
        q = A[i] + sign * d
        sight = min(rules.lookahead_m, A[-1] - A[i] if sign > 0 else A[i] - A[0])
        z0 = path.z(path.s[i]) + rules.eye_height_m
        for dd, qq in zip(d, q):
            ox, oy = np.interp(qq, A, lx), np.interp(qq, A, ly)
            z1 = path.z(np.interp(qq, A, path.s)) + rules.object_height_m
            n = max(int(np.ceil(np.hypot(ox - lx[i], oy - ly[i]) / 0.5)), 1)
            t = (np.arange(1, n)) / n
            px, py = lx[i] + t * (ox - lx[i]), ly[i] + t * (oy - ly[i])
            col, row = inv * (px, py)
            g = map_coordinates(dem, [row - 0.5, col - 0.5], order=1, mode="nearest")
            if np.any(g > z0 + t * (z1 - z0)):
                sight = dd
                break
        out.append(sight)
    return np.array(out)


@pytest.mark.parametrize("seed", [3, 11])
def test_equal_to_a_brute_force_within_one_station(seed):
    """A plain brute force (every sight line sampled every 0.5 m on the DEM, objects every metre,
    written above): the fast search agrees within one station (5 m) on a generated network."""
    roads, dem, tr = _network(seed)
    rules = SightRules(lookahead_m=150.0)
    for pts, s_pts, zf in roads:
        s = np.arange(0.0, s_pts[-1] + 1e-9, 5.0)
        x, y = np.interp(s, s_pts, pts[:, 0]), np.interp(s, s_pts, pts[:, 1])
        path = LanePath(s, x, y, zf)
        fast = sight_3d_both_ways(path, obstruction_grid(dem, tr, path, HALF_WIDTH), rules)
        eyes = np.arange(0, len(s), 3)
        for name, side, sign in (("fwd", -1, 1), ("back", 1, -1)):
            slow = _brute(dem, tr, path, eyes, side, sign, 1.8, rules)
            got = fast[f"sight_3d_{name}_m"][eyes]
            assert np.all(np.abs(got - slow) <= 5.0), (name, np.c_[s[eyes], got, slow][np.abs(got - slow) > 5.0])
            assert (slow < rules.lookahead_m - 1).sum() > 5  # the network does limit sight


def test_straight_sweep_finds_a_short_hidden_stretch_like_the_brute_force():
    """The plain brute force written above (every line sampled every 0.5 m, objects every metre)
    on a straight level road with a short hollow 285-300 m along it (invented, test data only):
    from the eyes before it the road in the hollow is hidden behind its near edge and seen
    again beyond it. The one sweep along the straight lane (objects every 5 m) finds that
    stretch within one station of the brute force from every eye; the ladder alone, its
    objects a fifth of their distance apart out there, steps over it from some eyes (the
    limit the sweep is there to narrow)."""
    def z(q):
        q = np.asarray(q, dtype=float)
        return 100.0 - 1.5 * np.clip(1.0 - np.abs(q - 292.5) / 7.5, 0.0, 1.0)
    s = np.arange(0.0, 700.0 + 1e-9, 5.0)
    ang = np.radians(20.0)
    x, y = 30 + s * np.cos(ang), 30 + s * np.sin(ang)
    X, Y, tr = _grid_xy(0, 720, 0, 300)
    dem = z((X - 30) * np.cos(ang) + (Y - 30) * np.sin(ang))
    path = LanePath(s, x, y, z)
    grid = obstruction_grid(dem, tr, path, HALF_WIDTH)
    sweep = sight_3d_both_ways(path, grid, RULES)
    ladder = sight_3d_both_ways(path, grid, RULES, straight=False)
    eyes = np.arange(0, 56, 4)  # 0 to 275 m: the hollow within the look-ahead
    slow = _brute(dem, tr, path, eyes, -1, 1, 1.8, RULES)
    assert (slow < 300.0 - s[eyes]).all()  # the brute force does see the hollow hide the road
    assert np.all(np.abs(sweep["sight_3d_fwd_m"][eyes] - slow) <= 5.0)
    assert np.any(np.abs(ladder["sight_3d_fwd_m"][eyes] - slow) > 5.0)


# --------------------------------------------------------------------------- what to clear
def test_clearance_in_a_cut_matches_a_hand_integral():
    """Area and volume to clear on the batter curve, against the cross-section integrated by hand
    (common practice, no source, as laid out here): on a long circular curve the lowest required
    line over a point ``o`` inside the lane centre is the chord to the object at the required
    distance S (sagitta M = R (1 - cos(S / 2R)), AASHTO Green Book 2018, from memory), which
    passes over it at ``t2 = (1 + sqrt(1 - o / M)) / 2`` of the way from the eye, at height
    ``h1 + t2 (h2 - h1)``; the batter stands ``(o - 1.7) / 2`` there. The cut per metre of
    curve is the integral of the difference where positive, times the length of the stretch
    (at the cells' radius). Within 10 %."""
    from pipeline.sight.sight3d import clearance, lane_sides
    R, S = 200.0, 110.0
    s, path, dem, tr = _batter_curve(R)
    grid = obstruction_grid(dem, tr, path, HALF_WIDTH)
    eyes = np.flatnonzero((s >= 150) & (s <= 450))
    side = lane_sides("right")["back"]
    res = clearance(path, grid, RULES, eyes, S, side, -1, 1.8)
    assert res["area_m2"] > 0 and res["volume_m3"] > 0 and res["object_area_m2"] == 0
    assert res["polygon"] is not None and res["polygon"].area == pytest.approx(res["area_m2"], rel=1e-6)
    # the fully developed part: eyes travel backwards (decreasing chainage), each sees S ahead,
    # so stations 150 + S .. 450 have the full envelope; integrate the cells in that sector
    Rl = R - 1.8
    X, Y = np.meshgrid(np.arange(-20, 220) + 0.5, np.arange(220, -220, -1) - 0.5)
    ang = np.arctan2(Y, X)
    lo, hi = 150.0 / R - 350 / R + S / Rl, 450.0 / R - 350 / R
    sector = (ang > lo + 0.02) & (ang < hi - 0.02)
    vol_cells = res["cut_m"][sector].sum()
    area_cells = (res["cut_m"][sector] > 0).sum()
    M = Rl * (1 - np.cos(S / (2 * Rl)))
    o = np.linspace(0.0, M, 20001)
    t2 = (1 + np.sqrt(np.clip(1 - o / M, 0, 1))) / 2
    line = RULES.eye_height_m + t2 * (RULES.object_height_m - RULES.eye_height_m)
    c = np.maximum((o + 1.8 - HALF_WIDTH) / 2 - line, 0.0)
    width = (c > 0).sum() * (o[1] - o[0])
    o_mid = np.sum(o * c) / np.sum(c)
    span = (hi - lo - 0.04)
    vol_hand = np.trapezoid(c, o) * span * (Rl - o_mid)
    area_hand = width * span * (Rl - np.mean(o[c > 0]))
    assert vol_cells == pytest.approx(vol_hand, rel=0.10)
    assert area_cells == pytest.approx(area_hand, rel=0.10)


# --------------------------------------------------------------------------- the whole run
def test_demo_shows_the_cut_bank_as_a_roadside_deficiency(demo_out):
    """The demo's cut bank on the inside of Brindle Hill Lane's 200 m curve (invented sample
    data, data_samples/make_samples.py): the drivers travelling back round the bend lose sight
    of the road to the bank, not to the crest before it; the inventory carries a roadside row
    with the horizontal curve, the area and volume to clear, and audit.gpkg the two layers.
    The check of the sight against the bank: AASHTO's sight line offset (from memory), with M
    from the inside lane's centre (1.8 m off the centreline) to where a 1:1 bank from 10 m
    reaches 0.84 m, give or take the 5 m cells' ramp."""
    import geopandas as gpd
    import pandas as pd

    d = pd.read_csv(demo_out / "deficiencies.csv")
    road = d[d["kind"] == "roadside"]
    assert len(road) >= 1
    row = road[(road["road_id"] == "WV-02") & (road["direction"] == "decreasing")].iloc[0]
    assert row["limit_kind"] == "roadside terrain" and row["hcurve_no"] == 1
    assert row["clear_area_m2"] > 0 and row["clear_volume_m3"] > 0
    assert row["sight_available_m"] < row["ssd_required_m"]
    lo = _hso_sight(200.0 - 1.8, 10.0 + 0.84 - 5.0 - 1.8)
    hi = _hso_sight(200.0 - 1.8, 10.0 + 0.84 + 5.0 - 1.8)
    assert lo <= row["sight_available_m"] <= hi
    h = pd.read_csv(demo_out / "horizontal_curves.csv")
    assert h.loc[(h["road_id"] == "WV-02") & (h["hcurve_no"] == 1), "sight_3d_min_m"].iloc[0] < 130.0
    p = pd.read_parquet(demo_out / "profiles.parquet")
    assert {"sight_3d_fwd_m", "sight_3d_fwd_limit", "sight_3d_back_m", "sight_3d_back_limit"} <= set(p.columns)
    clear = gpd.read_file(demo_out / "audit.gpkg", layer="sight_clearance")
    pts = gpd.read_file(demo_out / "audit.gpkg", layer="sight_blocking_points")
    assert len(clear) >= 1 and len(pts) >= 1
    # the outline holds the area to clear (shapely's area of the cells' union, in the roads' CRS)
    c = clear[(clear["road_id"] == "WV-02") & (clear["direction"] == "decreasing")].iloc[0]
    assert c.geometry.area == pytest.approx(c["clear_area_m2"], rel=1e-6)
    assert int(c["rank"]) == int(row["rank"])
    # the blocking points lie on the inside of the curve, beyond the carriageway edge
    roads = gpd.read_file(demo_out / "audit.gpkg", layer="roads")
    line = roads.loc[roads["road_id"] == "WV-02"].geometry.iloc[0]
    wv02 = pts[pts["road_id"] == "WV-02"]
    assert (wv02.geometry.distance(line) > 3.5).all()


def test_a_surface_model_adds_trees_as_roadside_objects(tmp_path):
    """A stand of trees given with --surface (sight.surface): the demo DEM with 15 m of canopy
    from 8 to 30 m inside Brindle Hill Lane's 200 m curve (invented, test data only). The
    trees, standing nearer the road than the demo's cut bank, become what limits the sight
    there: a roadside-object row whose area to clear lies within the stand (rasterio and
    shapely as the references for the stand's outline and area)."""
    import geopandas as gpd
    import pandas as pd
    import rasterio
    import shapely
    from rasterio.features import geometry_mask
    from shapely.ops import substring

    from pipeline.cli import main
    from pipeline.core.resources import sample_paths

    paths = sample_paths()
    line = gpd.read_file(paths["roads"], layer="roads").set_index("road_id").geometry["WV-02"]
    line = shapely.line_merge(line) if line.geom_type != "LineString" else line
    bend = substring(line, 1590.0, 1750.0)
    stand = shapely.difference(bend.offset_curve(19.0).buffer(11.0, cap_style="flat"), line.buffer(8.0))
    with rasterio.open(paths["dem"]) as src:
        dem, prof = src.read(1), src.profile
        inside = ~geometry_mask([stand], out_shape=dem.shape, transform=src.transform)
    sfc = np.where(inside & (dem != prof["nodata"]), dem + 15.0, dem).astype("float32")
    surface = tmp_path / "surface.tif"
    with rasterio.open(surface, "w", **prof) as dst:
        dst.write(sfc, 1)
    out = tmp_path / "out"
    assert main(["run", "--roads", str(paths["roads"]), "--ground", str(paths["dem"]), "--surface", str(surface),
                 "--out", str(out), "--quiet"]) == 0
    d = pd.read_csv(out / "deficiencies.csv")
    obj = d[(d["kind"] == "roadside") & (d["road_id"] == "WV-02") & (d["limit_kind"] == "roadside object")]
    assert len(obj) >= 1 and (obj["clear_area_m2"] > 0).all()
    clear = gpd.read_file(out / "audit.gpkg", layer="sight_clearance")
    mine = clear[(clear["road_id"] == "WV-02") & (clear["object_area_m2"] > 0)]
    assert len(mine) >= 1
    # the cells to clear of the stand lie within it (give or take a 5 m cell)
    assert mine.geometry.iloc[0].intersection(stand.buffer(7.5)).area > 0.5 * mine["object_area_m2"].iloc[0]
    # a surface model that is not a raster stops the run with exit code 2
    bad = tmp_path / "surface.csv"
    bad.write_text("x,y\n1,2\n")
    assert main(["run", "--roads", str(paths["roads"]), "--ground", str(paths["dem"]), "--surface", str(bad),
                 "--out", str(tmp_path / "bad"), "--quiet"]) == 2
