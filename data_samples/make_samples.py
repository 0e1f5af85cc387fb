"""Generate the bundled sample network (an invented scenario).

Wendle Vale is a fictional rural district; its roads office wants a screening of
its ten rural roads for stopping-sight-distance shortfalls. Every road below is
designed here: plan elements (straights and circular arcs) and a vertical
alignment (PVIs with symmetric parabolic curves), some of them deliberately too
sharp for the road's speed. The ground model is then made from the design:

- ``wendle_vale_dem.tif``: a corridor DEM (5 m cells, float32 metres, nodata
  farther than about 200 m from any road), road surface burned in, a little
  survey noise, a stream valley under the Coldwater Road bridge (a bare-earth
  DEM shows the valley floor, not the deck), a void on Juniper Gate Road and a
  cut bank on the inside of Brindle Hill Lane's 200 m curve (for the 3D sight lines);
- ``wendle_vale_roads.gpkg``: layer ``roads`` with ``road_id, name, speed_kmh,
  aadt, road_class`` (EPSG:32633; Fallowfield Road is stored in two parts, one
  digitised backwards; Hazelmoor Lane has no posted speed);
- ``wendle_vale_ground_points.csv``: ``road_id, x, y, z`` sampled from the DEM
  every 2 m with up to 2 m of lateral scatter;
- ``wendle_vale_structures.csv``: the district's bridge register (one bridge,
  as a point with its length), to mask known structures explicitly;
- ``wendle_vale_junctions.csv``: private accesses (farm and forestry entrances)
  beside the roads; junctions between the district's own roads are found from
  the network itself;
- ``wendle_vale_design.json``: the design itself (the truth the audit should
  recover), for the curious.

Run ``python data_samples/make_samples.py`` to regenerate; output is identical
for the same numpy version (fixed seed).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
CRS = "EPSG:32633"
CELL = 5.0
SEED = 20261202


# road_id, name, class, speed (None = not posted), AADT, start (x, y), heading (deg from east),
# plan elements, start elevation, first grade (%), PVIs as (chainage m, next grade %, curve length m)
ROADS = [
    dict(road_id="WV-01", name="Ashcombe Road", road_class="collector", speed_kmh=80, aadt=2400,
         start=(600, 1700), heading=2.0,
         plan=[("straight", 1400), ("arc", 700, 15), ("straight", 1200), ("arc", 900, -15),
               ("straight", 1400), ("arc", 600, -10), ("straight", 1400)],
         z0=180.0, g0=2.0,
         pvis=[(600, -1.5, 200), (1300, 3.0, 180), (2300, -3.0, 72), (3000, 1.0, 160),
               (3900, -2.0, 150), (4700, 2.0, 160), (5400, 0.0, 120)]),
    dict(road_id="WV-02", name="Brindle Hill Lane", road_class="local", speed_kmh=80, aadt=1100,
         start=(500, 6100), heading=-3.0,
         plan=[("straight", 1600), ("arc", 200, 35), ("straight", 800), ("arc", 500, -25),
               ("straight", 1200)],
         z0=240.0, g0=1.0,
         pvis=[(700, 4.0, 90), (1550, -2.0, 72), (2300, 3.0, 70), (3100, -1.0, 200)]),
    dict(road_id="WV-03", name="Coldwater Road", road_class="arterial", speed_kmh=100, aadt=6500,
         start=(300, 5000), heading=0.0,
         plan=[("straight", 2000), ("arc", 1200, 10), ("straight", 2000), ("arc", 1000, -12),
               ("straight", 2100)],
         z0=200.0, g0=0.5,
         pvis=[(1000, -2.0, 300), (1800, 1.5, 200), (2600, -1.0, 250), (3300, 3.0, 100),
               (4200, -1.0, 300), (5200, 1.0, 150)]),
    dict(road_id="WV-04", name="Dunmere Road", road_class="collector", speed_kmh=80, aadt=2600,
         start=(3900, 600), heading=0.0,
         plan=[("straight", 2000), ("arc", 800, 12), ("straight", 2300)],
         z0=150.0, g0=-1.0,
         pvis=[(400, 2.0, 150), (1000, -4.0, 72), (1700, 1.0, 200), (3000, -1.0, 120), (3800, 1.0, 100)]),
    dict(road_id="WV-05", name="Elmstead Lane", road_class="local", speed_kmh=60, aadt=350,
         start=("WV-01", 2350), heading=None,
         plan=[("straight", 700), ("arc", 250, -30), ("straight", 600), ("arc", 300, 30),
               ("straight", 600)],
         z0=None, g0=-2.0,
         pvis=[(500, 3.0, 80), (1200, -2.0, 30), (1700, 1.0, 60)]),
    dict(road_id="WV-06", name="Fallowfield Road", road_class="collector", speed_kmh=90, aadt=3000,
         start=(500, 3700), heading=4.0,
         plan=[("straight", 1800), ("arc", 900, -10), ("straight", 1500), ("arc", 900, 10),
               ("straight", 1400)],
         z0=210.0, g0=1.5,
         pvis=[(900, -1.0, 150), (1900, 2.0, 160), (2900, -1.5, 220), (3900, 0.5, 100)]),
    dict(road_id="WV-07", name="Greyling Road", road_class="local", speed_kmh=70, aadt=650,
         start=(6300, 4200), heading=-5.0,
         plan=[("straight", 900), ("arc", 300, -20), ("straight", 900), ("arc", 300, 20),
               ("straight", 900)],
         z0=190.0, g0=4.0,
         pvis=[(500, 1.0, 60), (640, -3.0, 80), (1400, 3.0, 72), (2200, 0.0, 90)]),
    dict(road_id="WV-08", name="Hazelmoor Lane", road_class="local", speed_kmh=None, aadt=300,
         start=(6600, 2900), heading=0.0,
         plan=[("straight", 1000), ("arc", 400, -12), ("straight", 1900)],
         z0=170.0, g0=-2.0,
         pvis=[(700, 2.0, 100), (1500, -3.0, 75), (2300, 0.0, 90)]),
    dict(road_id="WV-09", name="Ivywell Road", road_class="collector", speed_kmh=100, aadt=5200,
         start=(500, 3000), heading=1.0,
         plan=[("straight", 2500), ("arc", 1500, -8), ("straight", 2300)],
         z0=160.0, g0=4.0,
         pvis=[(1200, -4.0, 320), (2400, 1.0, 250), (3600, -1.0, 200)]),
    dict(road_id="WV-10", name="Juniper Gate Road", road_class="local", speed_kmh=60, aadt=150,
         start=(5200, 6700), heading=-20.0,
         plan=[("straight", 800), ("arc", 150, 40), ("straight", 1000)],
         z0=260.0, g0=-3.0,
         pvis=[(600, 1.0, 32), (1300, -2.0, 60)]),
]
BRIDGE = dict(road_id="WV-03", chainage_m=5600.0, depth_m=6.0, width_m=40.0, name="Coldwater Brook bridge")
VOID = dict(road_id="WV-10", chainage_m=1015.0, along_m=30.0, across_m=40.0)
# a cut bank on the inside (left) of Brindle Hill Lane's 200 m curve: 1:1 from 10 m off the centreline,
# up to 6 m high, tapered over 25 m at each end (the 3D sight lines find it)
CUT = dict(road_id="WV-02", from_m=1590.0, to_m=1750.0, taper_m=25.0, toe_m=10.0, slope=1.0, height_m=6.0,
           side="left")
# private accesses: (road, chainage, side offset m, name)
ACCESSES = [("WV-09", 1320.0, 9.0, "Ivywell Farm access"), ("WV-06", 2400.0, -8.0, "Fallow Wood forestry gate"),
            ("WV-03", 800.0, 10.0, "Coldwater Mill entrance")]


def build(out_dir: Path = HERE) -> dict:
    import geopandas as gpd
    import rasterio
    import shapely
    from rasterio.transform import from_origin
    from scipy.spatial import cKDTree

    from pipeline.demo.synthetic import VerticalAlignment, plan_polyline

    rng = np.random.default_rng(SEED)
    x0, y0 = 520000.0, 5310000.0  # local origin of the scenario in UTM 33N

    lines, aligns, design = {}, {}, []
    for r in ROADS:
        if isinstance(r["start"][0], str):
            # begins at a junction on another road, square to it
            host = lines[r["start"][0]]
            c = r["start"][1]
            p = shapely.line_interpolate_point(host, c)
            a = shapely.line_interpolate_point(host, c + 1)
            hx, hy = a.x - p.x, a.y - p.y
            heading = np.degrees(np.arctan2(hy, hx)) - 90.0
            start = (p.x, p.y)
            z0 = float(aligns[r["start"][0]].z(np.array([c]))[0])
        else:
            start = (x0 + r["start"][0], y0 + r["start"][1])
            heading = r["heading"]
            z0 = r["z0"]
        xy = plan_polyline(start, heading, r["plan"], spacing_m=5.0)
        line = shapely.linestrings(xy)
        length = float(shapely.length(line))
        pv = [0.0] + [p[0] for p in r["pvis"]] + [length]
        grades = [r["g0"]] + [p[1] for p in r["pvis"]]
        elev = [z0]
        for i in range(1, len(pv)):
            elev.append(elev[-1] + grades[i - 1] / 100 * (pv[i] - pv[i - 1]))
        va = VerticalAlignment(np.array(pv), np.array(elev), np.array([0.0] + [p[2] for p in r["pvis"]] + [0.0]))
        lines[r["road_id"]] = line
        aligns[r["road_id"]] = va
        design.append({"road_id": r["road_id"], "name": r["name"], "length_m": round(length, 2),
                       "speed_kmh": r["speed_kmh"], "curves": va.curves()})

    # no two roads may come close except where one begins on another
    ids = list(lines)
    for i, a in enumerate(ids):
        for b in ids[i + 1:]:
            d = shapely.distance(lines[a], lines[b])
            junction = any(isinstance(r["start"][0], str) and {r["road_id"], r["start"][0]} == {a, b} for r in ROADS)
            if d < 150 and not junction:
                raise SystemExit(f"roads {a} and {b} come within {d:.0f} m; move one")

    # centreline samples every metre: chainage, elevation, road index
    dense = []
    for k, rid in enumerate(ids):
        ch = np.arange(0.0, shapely.length(lines[rid]), 1.0)
        pts = shapely.get_coordinates(shapely.line_interpolate_point(lines[rid], ch))
        z = aligns[rid].z(ch)
        if rid == BRIDGE["road_id"]:
            z = z - _valley(ch - BRIDGE["chainage_m"], BRIDGE["depth_m"], BRIDGE["width_m"])
        dense.append(np.column_stack([pts, ch, z, np.full(len(ch), k)]))
    dense = np.vstack(dense)

    minx, miny = dense[:, 0].min() - 250, dense[:, 1].min() - 250
    maxx, maxy = dense[:, 0].max() + 250, dense[:, 1].max() + 250
    minx, miny = np.floor(minx / CELL) * CELL, np.floor(miny / CELL) * CELL
    ncol = int(np.ceil((maxx - minx) / CELL))
    nrow = int(np.ceil((maxy - miny) / CELL))
    transform = from_origin(minx, miny + nrow * CELL, CELL, CELL)
    cx = minx + (np.arange(ncol) + 0.5) * CELL
    cy = miny + nrow * CELL - (np.arange(nrow) + 0.5) * CELL
    gx, gy = np.meshgrid(cx, cy)
    tree = cKDTree(dense[:, :2])
    dist, idx = tree.query(np.column_stack([gx.ravel(), gy.ravel()]), distance_upper_bound=200.0)
    near = np.isfinite(dist)
    dem = np.full(gx.size, -9999.0)
    zr = dense[idx[near], 3]
    d = dist[near]
    # natural ground beside the road: a smooth field of a few metres, faded in beyond the verge
    px, py = gx.ravel()[near], gy.ravel()[near]
    field = 4.0 * np.sin(px / 310.0 + 1.3) * np.cos(py / 270.0) + 2.5 * np.sin((px + py) / 150.0)
    fade = np.clip((d - 7.0) / 45.0, 0.0, 1.0) ** 2 * (3 - 2 * np.clip((d - 7.0) / 45.0, 0.0, 1.0))
    dem[near] = zr + fade * field
    dem[near] += rng.normal(0.0, 0.03, near.sum())  # survey noise
    # a cut bank on the inside of a horizontal curve (hides the road ahead round the bend)
    k_cut = ids.index(CUT["road_id"])
    on = np.flatnonzero(near)[dense[idx[near], 4] == k_cut]
    j = idx[on]
    nxt = np.minimum(j + 1, len(dense) - 1)
    tx, ty = dense[nxt, 0] - dense[j, 0], dense[nxt, 1] - dense[j, 1]
    left = tx * (gy.ravel()[on] - dense[j, 1]) - ty * (gx.ravel()[on] - dense[j, 0]) > 0
    ch_cut = dense[j, 2]
    along = np.clip(np.minimum(ch_cut - CUT["from_m"], CUT["to_m"] - ch_cut) / CUT["taper_m"], 0.0, 1.0)
    rise = np.clip((dist[on] - CUT["toe_m"]) * CUT["slope"], 0.0, CUT["height_m"]) * along
    inside = left if CUT["side"] == "left" else ~left
    dem[on] = np.where(inside & (rise > 0), np.maximum(dem[on], dense[j, 3] + rise), dem[on])
    dem = dem.reshape(nrow, ncol).astype(np.float32)
    # a void (nodata patch) on Juniper Gate Road
    vl = lines[VOID["road_id"]]
    vp = shapely.line_interpolate_point(vl, VOID["chainage_m"])
    void = (np.abs(gx - vp.x) < VOID["along_m"] / 2 + 5) & (np.abs(gy - vp.y) < VOID["across_m"] / 2)
    dem[void] = -9999.0

    out_dir.mkdir(parents=True, exist_ok=True)
    dem_path = out_dir / "wendle_vale_dem.tif"
    with rasterio.open(dem_path, "w", driver="GTiff", width=ncol, height=nrow, count=1, dtype="float32",
                       crs=CRS, transform=transform, nodata=-9999.0, compress="deflate", predictor=3,
                       tiled=True, blockxsize=256, blockysize=256) as dst:
        dst.write(dem, 1)
        dst.update_tags(DESCRIPTION="Wendle Vale corridor DEM (invented sample data), metres")
        dst.units = ("metre",)  # the elevation unit, stated in the file (sightaudit reads it)

    # roads layer
    geoms = []
    for r in ROADS:
        line = lines[r["road_id"]]
        if r["road_id"] == "WV-06":
            # stored in two parts, the second digitised backwards
            c = shapely.get_coordinates(line)
            half = len(c) // 2
            geoms.append(shapely.multilinestrings([shapely.linestrings(c[: half + 1]), shapely.linestrings(c[half:][::-1])]))
        else:
            geoms.append(line)
    gdf = gpd.GeoDataFrame({
        "road_id": [r["road_id"] for r in ROADS],
        "name": [r["name"] for r in ROADS],
        "speed_kmh": [r["speed_kmh"] for r in ROADS],
        "aadt": [r["aadt"] for r in ROADS],
        "road_class": [r["road_class"] for r in ROADS],
    }, geometry=geoms, crs=CRS)
    gdf["speed_kmh"] = gdf["speed_kmh"].astype("Float64")
    roads_path = out_dir / "wendle_vale_roads.gpkg"
    if roads_path.exists():
        roads_path.unlink()
    gdf.to_file(roads_path, layer="roads", driver="GPKG", engine="pyogrio")

    # ground points sampled from the DEM, every 2 m with lateral scatter
    from pipeline.profile.stations import bilinear

    rows = []
    with rasterio.open(dem_path) as src:
        arr = src.read(1).astype(float)
        arr[arr == -9999.0] = np.nan
        for r in ROADS:
            line = lines[r["road_id"]]
            ch = np.arange(0.0, shapely.length(line), 2.0)
            p = shapely.get_coordinates(shapely.line_interpolate_point(line, ch))
            q = shapely.get_coordinates(shapely.line_interpolate_point(line, np.minimum(ch + 1, shapely.length(line))))
            t = q - p
            n = np.column_stack([-t[:, 1], t[:, 0]]) / np.maximum(np.hypot(*t.T), 1e-9)[:, None]
            off = rng.uniform(-2.0, 2.0, len(ch))
            xy = p + n * off[:, None]
            z = bilinear(arr, src.transform, xy[:, 0], xy[:, 1])
            ok = np.isfinite(z)
            for (x, y), zz in zip(xy[ok], z[ok]):
                rows.append(f"{r['road_id']},{x:.2f},{y:.2f},{zz:.3f}")
    (out_dir / "wendle_vale_ground_points.csv").write_text("road_id,x,y,z\n" + "\n".join(rows) + "\n")

    bp = shapely.line_interpolate_point(lines[BRIDGE["road_id"]], BRIDGE["chainage_m"])
    (out_dir / "wendle_vale_structures.csv").write_text(
        "structure_id,name,x,y,length_m\n"
        f"B-01,{BRIDGE['name']},{bp.x:.2f},{bp.y:.2f},{BRIDGE['width_m']:.0f}\n")

    rows = ["name,kind,x,y"]
    for rid, c, off, name in ACCESSES:
        p = shapely.line_interpolate_point(lines[rid], c)
        q = shapely.line_interpolate_point(lines[rid], c + 1.0)
        nx, ny = -(q.y - p.y), q.x - p.x
        rows.append(f"{name},private access,{p.x + off * nx:.2f},{p.y + off * ny:.2f}")
    (out_dir / "wendle_vale_junctions.csv").write_text("\n".join(rows) + "\n")

    (out_dir / "wendle_vale_design.json").write_text(json.dumps({
        "scenario": "Wendle Vale District (invented)", "crs": CRS, "roads": design,
        "bridge": BRIDGE, "void": VOID, "cut": CUT,
    }, indent=1))
    return {"dem": dem_path, "roads": roads_path, "cells": (nrow, ncol)}


def _valley(u: np.ndarray, depth: float, width: float) -> np.ndarray:
    """Depth of the stream valley at signed distance ``u`` from its axis: flat floor, steep banks."""
    half = width / 2
    bank = 5.0
    return depth * np.clip((half - np.abs(u)) / bank, 0.0, 1.0)


if __name__ == "__main__":
    info = build()
    print(f"wrote {info['roads']}, {info['dem']} ({info['cells'][0]} x {info['cells'][1]} cells)")
