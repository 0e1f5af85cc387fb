"""Throughput and memory of the whole audit on synthetic networks, against the floor and a plain baseline.

For each network size (default 100, 2,000 and 10,000 km of road; ground points every 2 m,
read from CSV and from Parquet) and a network on a 1 m DEM (default 500 km), the audit is run
end to end through the command line (`sightaudit run`, every core), several times; the table
gives the median wall time, km per second, the time of each part (reading the inputs, the
per-road stages on the wall clock, the DuckDB evaluation, writing the outputs) and the peak
resident memory of the whole process tree (the run and its workers, sampled every 0.1 s from
/proc; the largest single process from getrusage alongside).

In the same run it measures two yardsticks:

- the floor: the time to read the ground file alone (pyarrow for CSV and Parquet; for the
  DEM, each road's window of cells with rasterio), which no audit can beat;
- the plain baseline (benchmarks/baseline.py: per-point shapely calls, Python loops over
  stations, one process) on the first roads of the smallest network, as seconds per km of
  the stages it implements; the ratio is that over the audit's whole end-to-end time per km.

    python benchmarks/throughput.py                         # the full table (long)
    python benchmarks/throughput.py --sizes 100 --dem-km 0 --repeat 1   # a quick look
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))


def _tree_rss_kb(root: int) -> int:
    """Resident memory (kB) of a process and all its descendants, from /proc."""
    children: dict[int, list[int]] = {}
    for d in os.listdir("/proc"):
        if not d.isdigit():
            continue
        try:
            with open(f"/proc/{d}/stat") as fh:
                ppid = int(fh.read().rsplit(")", 1)[1].split()[1])
            children.setdefault(ppid, []).append(int(d))
        except (OSError, ValueError, IndexError):
            continue
    total, todo = 0, [root]
    while todo:
        pid = todo.pop()
        try:
            with open(f"/proc/{pid}/status") as fh:
                for line in fh:
                    if line.startswith("VmRSS:"):
                        total += int(line.split()[1])
                        break
        except OSError:
            pass
        todo += children.get(pid, [])
    return total


def run_once(roads: Path, ground: Path, out: Path, workers: int = 0) -> dict:
    cmd = [sys.executable, "-m", "pipeline.cli", "run", "--roads", str(roads), "--ground", str(ground),
           "--out", str(out), "-q"]
    if workers:
        cmd += ["--workers", str(workers)]
    peak = [0]
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)

    def watch():
        while proc.poll() is None:
            peak[0] = max(peak[0], _tree_rss_kb(proc.pid))
            time.sleep(0.1)

    th = threading.Thread(target=watch, daemon=True)
    th.start()
    _, err = proc.communicate()
    wall = time.perf_counter() - t0
    th.join()
    if proc.returncode != 0:
        raise RuntimeError(err.decode()[-2000:])
    run = json.loads((out / "run.json").read_text())
    largest = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024  # MB, the largest child so far
    return {"wall": wall, "peak_mb": peak[0] / 1024, "largest_mb": largest, "stages": run["stage_seconds"]}


def floor_seconds(ground: Path, roads: Path) -> float:
    """The time to read the ground file alone: pyarrow for CSV and Parquet, each road's window
    of the DEM with rasterio."""
    t0 = time.perf_counter()
    if ground.suffix == ".parquet":
        import pyarrow.parquet as pq

        pq.read_table(ground)
    elif ground.suffix == ".csv":
        from pyarrow import csv as pacsv

        pacsv.read_csv(ground)
    else:
        import geopandas as gpd
        import rasterio
        from rasterio.windows import from_bounds

        lines = gpd.read_parquet(roads).geometry
        t0 = time.perf_counter()
        with rasterio.open(ground) as src:
            for g in lines:
                minx, miny, maxx, maxy = g.bounds
                win = from_bounds(minx - 20, miny - 20, maxx + 20, maxy + 20, src.transform).round_offsets().round_lengths()
                src.read(1, window=win, boundless=False)
    return time.perf_counter() - t0


def baseline(net: dict, km: float = 10.0) -> dict:
    import geopandas as gpd
    import pandas as pd

    import baseline as base

    roads = gpd.read_parquet(net["roads"])
    take, acc = [], 0.0
    for i, g in enumerate(roads.geometry):
        take.append(i)
        acc += g.length / 1000
        if acc >= km:
            break
    sub = roads.iloc[take]
    points = pd.read_parquet(net["points"])
    points = points[points["road_id"].isin(sub["road_id"])]
    return base.run(sub, points)


def _network(size: float, data: Path, dem: bool = False) -> dict:
    """The synthetic network of ``size`` km (made once, then reused), with a CSV copy of its
    ground points."""
    from network import make_network

    d = data / (f"dem{int(size)}" if dem else f"net{int(size)}")
    if not (d / "info.json").exists():
        print(f"generating a {size:g} km network{' with a 1 m DEM' if dem else ''} in {d} ...", flush=True)
        info = make_network(size, d, seed=int(size), dem=dem)
        (d / "info.json").write_text(json.dumps({"km": info["km"], "n_points": info["n_points"]}))
    info = json.loads((d / "info.json").read_text())
    net = {"roads": d / "roads.parquet", "points": d / "ground_points.parquet", "km": info["km"],
           "n_points": info["n_points"]}
    if dem:
        net["dem"] = d / "dem_1m.tif"
    elif not (d / "ground_points.csv").exists():
        import pyarrow.parquet as pq
        from pyarrow import csv as pacsv

        pacsv.write_csv(pq.read_table(net["points"]), d / "ground_points.csv")
    net["csv"] = d / "ground_points.csv"
    return net


def measure(label: str, net: dict, ground: Path, repeat: int, workers: int) -> dict:
    runs, floors = [], []
    for r in range(repeat):
        with tempfile.TemporaryDirectory() as tmp:
            runs.append(run_once(net["roads"], ground, Path(tmp) / "out", workers))
        floors.append(floor_seconds(ground, net["roads"]))
        print(f"  {label}, run {r + 1}: {runs[-1]['wall']:.1f} s, peak {runs[-1]['peak_mb']:.0f} MB, "
              f"floor {floors[-1]:.2f} s", flush=True)
    med = lambda f: statistics.median(f(x) for x in runs)  # noqa: E731
    st = lambda k: med(lambda x: x["stages"].get(k, float("nan")))  # noqa: E731
    return {"label": label, "km": net["km"], "wall": med(lambda x: x["wall"]), "read": st("ingest"),
            "per_road": st("per-road stages, wall clock"), "evaluate": st("evaluate"), "outputs": st("export"),
            "peak_mb": max(x["peak_mb"] for x in runs), "largest_mb": max(x["largest_mb"] for x in runs),
            "floor": statistics.median(floors),
            "cpu": {k: st(k) for k in ("profile", "alignment", "plan", "sight", "speed and hazards")}}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=float, nargs="*", default=[100.0, 2000.0, 10000.0],
                    help="km of road of the ground-point networks")
    ap.add_argument("--formats", nargs="*", default=["csv", "parquet"], choices=["csv", "parquet"])
    ap.add_argument("--dem-km", type=float, default=500.0, help="km of road on a 1 m DEM (0: none)")
    ap.add_argument("--repeat", "--repeats", dest="repeat", type=int, default=3, help="runs per row (median)")
    ap.add_argument("--workers", type=int, default=0, help="--workers of the runs (0: every core)")
    ap.add_argument("--data", type=Path, default=Path(tempfile.gettempdir()) / "sightaudit-bench")
    ap.add_argument("--baseline-km", type=float, default=10.0)
    ap.add_argument("--readme", action="store_true", help="write the table into benchmarks/README.md")
    args = ap.parse_args(argv)

    rows, nets = [], {}
    for size in args.sizes:
        nets[size] = net = _network(size, args.data)
        for fmt in args.formats:
            rows.append(measure(f"{net['km']:,.0f} km, points {fmt.upper()}", net,
                                net["csv"] if fmt == "csv" else net["points"], args.repeat, args.workers))
    if args.dem_km > 0:
        net = _network(args.dem_km, args.data, dem=True)
        rows.append(measure(f"{net['km']:,.0f} km, 1 m DEM", net, net["dem"], args.repeat, args.workers))

    base_ms = None
    btxt = []
    if nets:
        small = nets[min(nets)]
        print(f"\nbaseline (per-point, per-station loops, one process) on {args.baseline_km:g} km ...", flush=True)
        base = baseline(small, args.baseline_km)
        base_ms = (base["profile"] + base["alignment"] + base["sight"]) / base["km"] * 1000
        ours = next(r for r in rows if r["km"] == small["km"])
        btxt = ["| stage | baseline ms/km | sightaudit ms/km (CPU, summed over workers) | ratio |", "|---|---|---|---|"]
        for s in ("profile", "alignment", "sight"):
            b, o = base[s] / base["km"] * 1000, ours["cpu"][s] / ours["km"] * 1000
            btxt.append(f"| {s} | {b:,.1f} | {o:,.1f} | {b / o:,.1f} x |")

    lines = ["| network | end to end | km/s | read | per-road stages | evaluation | outputs | peak memory "
             "(tree / largest process) | floor: reading the ground alone | x floor | baseline speed-up |",
             "|---|---|---|---|---|---|---|---|---|---|---|"]
    for r in rows:
        speed_up = f"{base_ms / (r['wall'] / r['km'] * 1000):,.0f} x" if base_ms and "DEM" not in r["label"] else "-"
        lines.append(f"| {r['label']} | {r['wall']:.1f} s | {r['km'] / r['wall']:,.0f} | {r['read']:.1f} s | "
                     f"{r['per_road']:.1f} s | {r['evaluate']:.1f} s | {r['outputs']:.1f} s | "
                     f"{r['peak_mb']:,.0f} / {r['largest_mb']:,.0f} MB | {r['floor']:.2f} s | "
                     f"{r['wall'] / r['floor']:,.0f} x | {speed_up} |")
    table = "\n".join(lines)
    print()
    print(table)
    if btxt:
        print()
        print("\n".join(btxt))
    if args.readme:
        readme = HERE / "README.md"
        text = readme.read_text() if readme.exists() else ""
        marker = "<!-- throughput table -->"
        block = (f"{marker}\nMeasured {time.strftime('%Y-%m-%d')} on this machine ({os.cpu_count()} cores), median of "
                 f"{args.repeat} run(s):\n\n{table}\n\n"
                 + ("Baseline, same stages, on the first roads of the smallest network:\n\n" + "\n".join(btxt)
                    + f"\n\n{ALIGNMENT_NOTE}\n" if btxt else "") + marker)
        if marker in text:
            pre, _, rest = text.partition(marker)
            _, _, post = rest.partition(marker)
            text = pre + block + post
        else:
            text = text + "\n" + block + "\n"
        readme.write_text(text)


ALIGNMENT_NOTE = ("The alignment fit is the same code on both sides; its ratio only reflects the different "
                  "input (the baseline's profile is a plain bin mean with no spike masking, on the first "
                  "roads of the network rather than all of them), not a change of method. The baseline "
                  "speed-up in the main table compares the baseline's time per km for these stages alone "
                  "with the audit's whole end-to-end time per km.")


if __name__ == "__main__":
    main()
