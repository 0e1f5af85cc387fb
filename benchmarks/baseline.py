"""The per-road stages written the obvious way, to measure what vectorising them buys.

Same job as the product's profile and sight stages, one point and one station at a time:

- ground points located with shapely's per-point ``line.project`` and the stations made with
  per-point ``line.interpolate``; station elevations by looping over the points in each bin;
- (DEM variant) the DEM read one station at a time with rasterio's ``sample`` (nearest cell);
- available sight distance by a Python loop over stations and, for each, over the road ahead
  until the line of sight is lost or the headlight beam meets the road.

The vertical alignment is the product's own fit (there is no obvious way to write it that
would still be the same method), so its time is the same on both sides of the ratio.
"""

from __future__ import annotations

import math
import time

import numpy as np
import pandas as pd
import shapely
from shapely.geometry import Point


def profile_from_points(line, px, py, pz, step: float, max_offset: float = 15.0):
    chain, z = [], []
    for x, y, zz in zip(px, py, pz):
        p = Point(x, y)
        c = line.project(p)
        if line.interpolate(c).distance(p) <= max_offset:
            chain.append(c)
            z.append(zz)
    n = int(line.length // step) + 1
    stations = [i * step for i in range(n)]
    xs, ys, zs = [], [], []
    for s in stations:
        pt = line.interpolate(s)
        xs.append(pt.x)
        ys.append(pt.y)
        acc, cnt = 0.0, 0
        for c, v in zip(chain, z):
            if abs(c - s) <= step / 2:
                acc += v
                cnt += 1
        zs.append(acc / cnt if cnt else float("nan"))
    return np.array(stations), np.array(zs), np.array(xs), np.array(ys)


def profile_from_dem(line, dem_path: str, step: float):
    import rasterio

    n = int(line.length // step) + 1
    stations, zs = [], []
    with rasterio.open(dem_path) as src:
        for i in range(n):
            pt = line.interpolate(i * step)
            v = next(src.sample([(pt.x, pt.y)]))[0]
            stations.append(i * step)
            zs.append(float("nan") if v == src.nodata else float(v))
    return np.array(stations), np.array(zs)


def sight_loops(chainage, z_of, grade_of, eye=1.08, obj=0.6, head=0.6, beam_deg=1.0, lookahead=400.0, h=2.0):
    """Forward sight distance at each station, loop by loop."""
    tb = math.tan(math.radians(beam_deg))
    out = []
    end = chainage[-1]
    for s in chainage:
        e = z_of(s) + eye
        g = grade_of(s)
        steepest = -math.inf
        sight = min(lookahead, end - s)
        d = h
        while d <= min(lookahead, end - s):
            zr = z_of(s + d)
            slope_obj = (zr + obj - e) / d
            if slope_obj < steepest:
                sight = d
                break
            if zr >= z_of(s) + head + d * (g + tb):
                sight = d
                break
            steepest = max(steepest, (zr - e) / d)
            d += h
        out.append(sight)
    return np.array(out)


def run(roads: pd.DataFrame, points: pd.DataFrame | None, step: float = 5.0, dem: str | None = None) -> dict:
    """Seconds spent per stage on these roads by the obvious implementation."""
    from pipeline.alignment.fit import RoadProfile, fit_profile

    t = {"profile": 0.0, "alignment": 0.0, "sight": 0.0}
    grouped = dict(tuple(points.groupby("road_id"))) if points is not None else {}
    km = 0.0
    for rid, line in zip(roads["road_id"], roads["geometry"]):
        t0 = time.perf_counter()
        if dem:
            ch, z = profile_from_dem(line, dem, step)
        else:
            g = grouped[rid]
            ch, z, _, _ = profile_from_points(line, g["x"].to_numpy(), g["y"].to_numpy(), g["z"].to_numpy(), step)
        t1 = time.perf_counter()
        stretches, curves, fitted, grade = fit_profile(ch, z, step)
        t2 = time.perf_counter()
        road = RoadProfile(stretches)
        z_of = lambda x: float(road.z(np.array([x]))[0])  # noqa: E731
        g_of = lambda x: float(road.grade(np.array([x]))[0])  # noqa: E731
        sight_loops(ch, z_of, g_of)
        t3 = time.perf_counter()
        t["profile"] += t1 - t0
        t["alignment"] += t2 - t1
        t["sight"] += t3 - t2
        km += shapely.length(line) / 1000
    t["km"] = km
    return t
