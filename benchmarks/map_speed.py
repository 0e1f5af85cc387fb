"""Speed of the report's inline SVG overview map (``pipeline.outputs.mapview``) on big networks.

Synthetic networks (fixed seed): ``roads`` roads of 10 km each, vertices every 10 m, each a
smooth random walk (heading changing by a few degrees per vertex) started at a random point
of a square sized for about 1 km of road per km2, a county's density; ``stretches`` deficient
stretches of 60-200 m spread over the roads (severities and verdicts cycled, every fifth
stretch with a curve page). For each size the map is built as the report builds it
(:func:`map_inputs` then :func:`map_svg`) and the wall and CPU time (medians of
``--repeats``; CPU time is the steadier on a busy machine), the SVG's size and how many
stretches went to the list under the drawing are printed.
``--profile`` prints the top functions of a cProfile run of the largest size.

    python benchmarks/map_speed.py
    python benchmarks/map_speed.py --sizes 200:400 --profile

Measured 2026-12-02 on a busy 2-core machine (CPU s, which is about the wall time when the
machine is quiet: before one run, after the median of 3; SVG size; stretches listed under
the drawing):

    roads / stretches   before (all-pairs tests)   after (grid, one pass per label)
    100 / 150           0.87 s, 287 kB, 0 listed   0.22 s, 287 kB, 0 listed (the same SVG)
    200 / 400           2.76 s, 669 kB, 35 listed  0.51 s, 669 kB, 36 listed
    1,000 / 2,000       13.2 s, 2,827 kB, 1,641    2.8 s, 2,827 kB, 1,642

The 200-road map differs in one label: #331 is listed instead of drawn on a ring, as a label
anchored in the same grid cell found no spot at all before it (the cap that keeps a crowded
map linear), and one more road is named in the room it leaves.
"""

from __future__ import annotations

import argparse
import cProfile
import io
import pstats
import time

import numpy as np
import pandas as pd
import shapely

from pipeline.core.units import OutputUnits
from pipeline.outputs.mapview import map_inputs, map_svg

ROAD_M = 10_000.0
STEP_M = 10.0


def network(n_roads: int, n_stretches: int, seed: int = 7) -> tuple[pd.DataFrame, pd.DataFrame, set]:
    """A synthetic road table, ranked inventory and set of paged curves (see the module text)."""
    rng = np.random.default_rng(seed)
    side = np.sqrt(n_roads * ROAD_M / 1000.0) * 1000.0  # m; about 1 km of road per km2
    n = int(ROAD_M / STEP_M) + 1
    geoms = []
    for _ in range(n_roads):
        turn = np.convolve(rng.normal(0.0, 0.02, n), np.ones(25) / 25.0, mode="same")
        heading = rng.uniform(0, 2 * np.pi) + np.cumsum(turn)
        xy = np.column_stack([np.cos(heading), np.sin(heading)]) * STEP_M
        xy = np.vstack([[0.0, 0.0], np.cumsum(xy[:-1], axis=0)]) + rng.uniform(0, side, 2)
        geoms.append(shapely.LineString(xy))
    ids = [f"R{k:04d}" for k in range(n_roads)]
    table = pd.DataFrame({"road_id": ids, "name": [f"Road {k}" for k in range(n_roads)],
                          "geometry": geoms, "skip_reason": [None] * n_roads})
    road = rng.integers(0, n_roads, n_stretches)
    start = rng.uniform(0, ROAD_M - 300.0, n_stretches)
    rank = np.arange(1, n_stretches + 1)
    inv = pd.DataFrame({"rank": rank, "road_id": [ids[r] for r in road], "from_m": start,
                        "to_m": start + rng.uniform(60.0, 200.0, n_stretches),
                        "severity": np.array(["severe", "moderate", "minor"])[rank % 3],
                        "verdict": np.where(rank % 7 == 0, "undetermined", "deficient"),
                        "curve_no": rank % 9 + 1, "kind": "crest",
                        "direction": np.where(rank % 2 == 0, "decreasing", "increasing"),
                        "shortfall_m": 20.0 + rank % 50})
    paged = {(ids[r], int(c)) for r, c, k in zip(road, inv["curve_no"], rank) if k % 5 == 0}
    return table, inv, paged


def build(table, inv, paged) -> str:
    units = OutputUnits()
    roads, stretches = map_inputs(table, inv, units, paged)
    return map_svg(roads, stretches, units)


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", nargs="+", default=["100:150", "200:400", "1000:2000"],
                    help="roads:stretches pairs")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--profile", action="store_true", help="cProfile the largest size")
    args = ap.parse_args(argv)
    print(f"{'roads':>6} {'stretches':>9} {'wall s':>8} {'CPU s':>7} {'SVG kB':>8} {'listed':>7}")
    for size in args.sizes:
        nr, ns = (int(v) for v in size.split(":"))
        table, inv, paged = network(nr, ns)
        times, cpu = [], []
        for _ in range(args.repeats):
            t0, c0 = time.perf_counter(), time.process_time()
            svg = build(table, inv, paged)
            times.append(time.perf_counter() - t0)
            cpu.append(time.process_time() - c0)
        listed = svg.count("class='rank-entry'")
        print(f"{nr:>6} {ns:>9} {np.median(times):>8.2f} {np.median(cpu):>7.2f} {len(svg) / 1000:>8.0f} "
              f"{listed:>7}", flush=True)
    if args.profile:
        prof = cProfile.Profile()
        prof.enable()
        build(table, inv, paged)
        prof.disable()
        out = io.StringIO()
        pstats.Stats(prof, stream=out).sort_stats("cumulative").print_stats(25)
        print(out.getvalue())


if __name__ == "__main__":
    main()
