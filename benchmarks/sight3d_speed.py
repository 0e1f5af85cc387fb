"""Speed of the 3D sight-line stage on a 1 m DEM road network, against its target (50 km/s on
2 cores).

The ground comes from ``benchmarks/realistic_ground.py`` (roads with known horizontal and
vertical designs, a road prism with cut and fill batters in rolling terrain, 1 m cells); the
design profile stands in for the fitted alignment. Each road is computed as the audit does
(:func:`pipeline.sight.sight3d.sight_3d_road`: a window of the DEM read once per kilometre of
stations, both directions, stations every 5 m, look-ahead 400 m), in one process per core.
Optionally the same ground with trees is given as the surface model.

    python benchmarks/sight3d_speed.py                 # 4 roads of 5 km, 2 processes
    python benchmarks/sight3d_speed.py --roads 2 --km 3 --workers 1
"""

from __future__ import annotations

import argparse
import sys
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

TARGET_KM_S = 50.0
_DATA: dict = {}


def _setup(dem, transform, surface, roads):
    _DATA.update(dem=dem, transform=transform, surface=surface, roads=roads)


def _window(xmin, ymin, xmax, ymax):
    """The DEM cells covering a box, from the array in memory (as the stage reads a file)."""
    dem, t, sfc = _DATA["dem"], _DATA["transform"], _DATA["surface"]
    c0 = max(int(np.floor((xmin - t.c) / t.a)), 0)
    c1 = min(int(np.ceil((xmax - t.c) / t.a)) + 1, dem.shape[1])
    r0 = max(int(np.floor((ymax - t.f) / t.e)), 0)
    r1 = min(int(np.ceil((ymin - t.f) / t.e)) + 1, dem.shape[0])
    if c1 <= c0 or r1 <= r0:
        return None
    from affine import Affine
    arr = dem[r0:r1, c0:c1].astype(float)
    arr[arr <= -9000] = np.nan
    s = None if sfc is None else sfc[r0:r1, c0:c1].astype(float)
    return arr, Affine(t.a, 0, t.c + c0 * t.a, 0, t.e, t.f + r0 * t.e), s


def _one(i: int) -> tuple[float, float, dict]:
    from pipeline.sight.lines import SightRules
    from pipeline.sight.sight3d import LIMIT3D_NAMES, sight_3d_road
    road = _DATA["roads"][i]
    line = road.line[::10]  # stations every 5 m
    s = np.arange(len(line)) * 5.0
    t0 = time.process_time()  # CPU time: on a shared machine the wall clock says more about the others
    r = sight_3d_road(s, line[:, 0], line[:, 1], road.vert.z, _window, SightRules())
    dt = time.process_time() - t0
    kinds = {}
    for d in ("fwd", "back"):
        names, counts = np.unique(LIMIT3D_NAMES[r[f"limit_3d_{d}"]], return_counts=True)
        for a, b in zip(names, counts):
            kinds[a] = kinds.get(a, 0) + int(b)
    return s[-1] / 1000.0, dt, kinds


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--roads", type=int, default=4)
    ap.add_argument("--km", type=float, default=5.0)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--seed", type=int, default=7)
    ap.add_argument("--trees", action="store_true", help="also give a surface model with trees")
    a = ap.parse_args(argv)
    import pickle
    import tempfile

    import realistic_ground as rg
    t0 = time.perf_counter()
    cache = Path(tempfile.gettempdir()) / f"sight3d-bench-v{rg.VERSION}-{a.seed}-{a.roads}-{a.km:g}-{int(a.trees)}.pkl"
    if cache.exists():
        roads, dem, transform, surface = pickle.loads(cache.read_bytes())
    else:
        roads = rg.make_roads(a.seed, a.roads, a.km)
        rng = np.random.default_rng(a.seed)
        for r in roads:
            if a.trees:
                rg.add_trees(rng, r)
            r.prepare()
        dem, transform = rg.build_raster(roads, rg.CONFIG_BY_NAME["lidar1"], rng, log=lambda *x: None)
        surface = None
        if a.trees:
            tcfg = rg.Config("lidar1-trees", 1.0, 0.0, 0.0, 0.0, 0.05, trees=True)
            surface, _ = rg.build_raster(roads, tcfg, rng, log=lambda *x: None)
        cache.write_bytes(pickle.dumps((roads, dem, transform, surface)))
    print(f"ground: {len(roads)} roads x {a.km:g} km, 1 m cells {dem.shape}, built in {time.perf_counter() - t0:.0f} s")
    t1 = time.perf_counter()
    if a.workers > 1:
        with ProcessPoolExecutor(a.workers, initializer=_setup, initargs=(dem, transform, surface, roads)) as ex:
            res = list(ex.map(_one, range(len(roads))))
    else:
        _setup(dem, transform, surface, roads)
        res = [_one(i) for i in range(len(roads))]
    wall = time.perf_counter() - t1
    km = sum(r[0] for r in res)
    cpu = sum(r[1] for r in res)
    kinds: dict = {}
    for r in res:
        for k, v in r[2].items():
            kinds[k] = kinds.get(k, 0) + v
    rate = km / wall
    per_core = km / cpu
    on_two = 2 * per_core  # the stage runs one road per process: two idle cores give twice one core's rate
    print(f"3D sight stage: {km:.1f} km in {wall:.2f} s wall on {a.workers} process(es) ({rate:.1f} km/s on this "
          f"machine as loaded); {per_core:.1f} km/s per core of CPU time (target {TARGET_KM_S / 2:g}), so "
          f"{on_two:.1f} km/s on 2 idle cores against the target of {TARGET_KM_S:g} km/s: "
          f"{'met' if on_two >= TARGET_KM_S else f'NOT met ({100 * on_two / TARGET_KM_S:.0f} % of it)'}")
    print("limits (station-directions):", ", ".join(f"{k} {v}" for k, v in sorted(kinds.items())))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
