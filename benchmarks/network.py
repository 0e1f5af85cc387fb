"""Synthetic road networks of any size, for the benchmarks.

Roads of 2 to 15 km are laid out on a grid (so none cross), each with plan
elements (straights and circular arcs of 150-1500 m radius) and a random but
designable vertical alignment (see :func:`pipeline.demo.synthetic.random_alignment`).
Ground data:

- ground points every 2 m along each road, up to 3 m to either side, with 5 cm
  of survey noise (``ground_points.parquet``: road_id, x, y, z);
- optionally a 1 m DEM of the corridors (``dem_1m.tif``), road surface burned
  in, nodata away from the roads; meant for the smaller sizes only (a 1 m DEM
  of 1,000 km of 200 m corridors is 200 million cells).

    python benchmarks/network.py --km 100 --out /tmp/net100 [--dem]
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import pandas as pd

CRS = "EPSG:32633"


def _plan(rng, length):
    elements, used = [], 0.0
    while used < length:
        st = rng.uniform(200, 900)
        elements.append(("straight", min(st, length - used)))
        used += st
        if used >= length:
            break
        r = rng.uniform(150, 1500)
        defl = rng.uniform(5, 35) * rng.choice([-1, 1])
        arc = r * np.radians(abs(defl))
        elements.append(("arc", r, defl))
        used += arc
    return elements


def make_network(km: float, out: Path, seed: int = 1, dem: bool = False, spacing: float = 2.0) -> dict:
    import geopandas as gpd
    import shapely

    from pipeline.demo.synthetic import plan_polyline, random_alignment

    rng = np.random.default_rng(seed)
    out.mkdir(parents=True, exist_ok=True)
    ids, geoms, speeds, aadts, classes = [], [], [], [], []
    pts = []
    total = 0.0
    k = 0
    x0, y0 = 400000.0, 5000000.0
    while total < km * 1000:
        length = float(min(rng.uniform(2000, 15000), km * 1000 - total + 500))
        row, col = divmod(k, 40)
        start = (x0 + col * 20000.0, y0 + row * 3000.0)
        xy = plan_polyline(start, rng.uniform(-3, 3), _plan(rng, length), spacing_m=5.0)
        # keep the road inside its grid cell: the plan may wander, clip the heading changes' effect
        line = shapely.linestrings(xy)
        length = float(line.length)
        va = random_alignment(rng, length, start_elev_m=rng.uniform(100, 600))
        rid = f"S{k:05d}"
        ch = np.arange(0.0, length, spacing)
        p = shapely.get_coordinates(shapely.line_interpolate_point(line, ch))
        q = shapely.get_coordinates(shapely.line_interpolate_point(line, np.minimum(ch + 1.0, length)))
        t = q - p
        n = np.column_stack([-t[:, 1], t[:, 0]]) / np.maximum(np.hypot(t[:, 0], t[:, 1]), 1e-9)[:, None]
        off = rng.uniform(-3, 3, len(ch))
        g = p + n * off[:, None]
        z = va.z(ch) + rng.normal(0, 0.05, len(ch))
        pts.append(pd.DataFrame({"road_id": rid, "x": g[:, 0], "y": g[:, 1], "z": z.astype("float32")}))
        ids.append(rid)
        geoms.append(line)
        speeds.append(float(rng.choice([60, 70, 80, 90, 100])))
        aadts.append(float(rng.integers(100, 8000)))
        classes.append(str(rng.choice(["local", "collector", "arterial"])))
        total += length
        k += 1
    gdf = gpd.GeoDataFrame({"road_id": ids, "name": [f"synthetic road {i}" for i in ids], "speed_kmh": speeds,
                            "aadt": aadts, "road_class": classes}, geometry=geoms, crs=CRS)
    gdf.to_parquet(out / "roads.parquet")
    points = pd.concat(pts, ignore_index=True)
    points.to_parquet(out / "ground_points.parquet", index=False)
    info = {"roads": out / "roads.parquet", "points": out / "ground_points.parquet", "km": total / 1000,
            "n_roads": len(ids), "n_points": len(points)}
    if dem:
        info["dem"] = _dem(gdf, points, out)
    return info


def _dem(gdf, points, out: Path) -> Path:
    """A 1 m corridor DEM from the ground points (nearest point within 6 m), nodata elsewhere.

    A tiled (512 x 512), compressed, sparse GeoTIFF: only the cells within 6 m of a point are
    computed and written, road by road, so a long network's DEM costs its corridors, not its
    bounding box."""
    import rasterio
    from rasterio.transform import from_origin
    from rasterio.windows import Window
    from scipy.spatial import cKDTree

    minx, miny, maxx, maxy = gdf.total_bounds
    minx, miny = np.floor(minx) - 20, np.floor(miny) - 20
    maxx, maxy = np.ceil(maxx) + 20, np.ceil(maxy) + 20
    w, h = int(maxx - minx), int(maxy - miny)
    path = out / "dem_1m.tif"
    tree = cKDTree(points[["x", "y"]].to_numpy())
    zs = points["z"].to_numpy()
    reach = 6
    dc, dr = np.meshgrid(np.arange(-reach, reach + 1), np.arange(-reach, reach + 1))
    with rasterio.open(path, "w+", driver="GTiff", width=w, height=h, count=1, dtype="float32", crs=CRS,
                       transform=from_origin(minx, maxy, 1.0, 1.0), nodata=-9999.0, compress="deflate",
                       tiled=True, blockxsize=512, blockysize=512, BIGTIFF="YES", SPARSE_OK="TRUE") as dst:
        for _, g in points.groupby("road_id", sort=False):
            col = np.floor(g["x"].to_numpy() - minx).astype(np.int64)
            row = np.floor(maxy - g["y"].to_numpy()).astype(np.int64)
            cells = np.unique(((row[:, None] + dr.ravel()) * w + (col[:, None] + dc.ravel())).ravel())
            r, c = np.divmod(cells, w)
            ok = (r >= 0) & (r < h) & (c >= 0) & (c < w)
            r, c = r[ok], c[ok]
            d, i = tree.query(np.column_stack([minx + c + 0.5, maxy - r - 0.5]), distance_upper_bound=float(reach))
            hit = np.isfinite(d)
            r0, c0 = int(r.min()), int(c.min())
            win = Window(c0, r0, int(c.max()) - c0 + 1, int(r.max()) - r0 + 1)
            arr = dst.read(1, window=win)  # keeps a neighbouring road's cells in the window
            arr[r[hit] - r0, c[hit] - c0] = zs[i[hit]]
            dst.write(arr, 1, window=win)
    return path


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--km", type=float, default=100.0)
    ap.add_argument("--out", type=Path, required=True)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--dem", action="store_true", help="also write a 1 m corridor DEM")
    a = ap.parse_args()
    info = make_network(a.km, a.out, a.seed, a.dem)
    print({k: str(v) for k, v in info.items()})
