"""Throughput and memory of the whole audit on synthetic networks, against a plain baseline.

For each network size (default 100, 1,000 and 10,000 km of road; ground points every 2 m)
the audit is run end to end through the command line (`sightaudit run`, every core), several
times; the table gives the median: km per second end to end and per stage (per-road stages
as CPU time summed over the workers), and the peak resident memory of the whole process tree
(the run and its workers, sampled every 0.1 s from /proc).

The baseline (benchmarks/baseline.py: per-point shapely calls, per-point raster sampling,
Python loops over stations) runs on the first roads of the 100 km network, one process; the
ratio compares the same stages' time per km.

    python benchmarks/throughput.py                     # the full table (about 15 minutes)
    python benchmarks/throughput.py --sizes 100 1000    # quicker
"""

from __future__ import annotations

import argparse
import json
import os
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


def run_once(net: dict, out: Path, workers: int = 0) -> dict:
    cmd = [sys.executable, "-m", "pipeline.cli", "run", "--roads", str(net["roads"]), "--ground",
           str(net["points"]), "--out", str(out), "-q"]
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
    return {"wall": wall, "peak_mb": peak[0] / 1024, "stages": run["stage_seconds"], "km": net["km"]}


ALIGNMENT_NOTE = ("The alignment fit is the same code on both sides; its ratio only reflects the different "
                  "input (the baseline's profile is a plain bin mean with no spike masking, on the first "
                  "roads of the network rather than all of them), not a change of method.")


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


def main(argv=None):
    from network import make_network

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=float, nargs="*", default=[100.0, 1000.0, 10000.0])
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--data", type=Path, default=Path(tempfile.gettempdir()) / "sightaudit-bench")
    ap.add_argument("--baseline-km", type=float, default=10.0)
    ap.add_argument("--readme", action="store_true", help="write the table into benchmarks/README.md")
    args = ap.parse_args(argv)

    rows = []
    nets = {}
    for size in args.sizes:
        d = args.data / f"net{int(size)}"
        if not (d / "roads.parquet").exists():
            print(f"generating a {size:g} km network in {d} ...", flush=True)
            info = make_network(size, d, seed=int(size))
            (d / "info.json").write_text(json.dumps({"km": info["km"], "n_points": info["n_points"]}))
        info = json.loads((d / "info.json").read_text())
        nets[size] = net = {"roads": d / "roads.parquet", "points": d / "ground_points.parquet", "km": info["km"]}
        runs = []
        for r in range(args.repeats):
            with tempfile.TemporaryDirectory() as tmp:
                runs.append(run_once(net, Path(tmp) / "out"))
            print(f"  {size:g} km, run {r + 1}: {runs[-1]['wall']:.1f} s, peak {runs[-1]['peak_mb']:.0f} MB", flush=True)
        med = lambda f: statistics.median(f(x) for x in runs)  # noqa: E731
        stage_names = ["ingest", "profile", "alignment", "plan", "sight", "speed and hazards", "evaluate", "export"]
        row = {"km": net["km"], "wall_s": med(lambda x: x["wall"]), "peak_mb": max(x["peak_mb"] for x in runs)}
        for s in stage_names:
            row[s] = med(lambda x, s=s: x["stages"].get(s, float("nan")))
        rows.append(row)

    print()
    lines = ["| network | end to end | km/s end to end | ingest | profile | alignment | plan | sight | speed & hazards"
             " | evaluate | export | peak memory |",
             "|---|---|---|---|---|---|---|---|---|---|---|---|"]
    for r in rows:
        kms = lambda s: f"{r['km'] / r[s]:,.0f}" if r[s] and r[s] == r[s] else "-"  # noqa: E731
        lines.append(f"| {r['km']:,.0f} km | {r['wall_s']:.1f} s | {r['km'] / r['wall_s']:.1f} | {kms('ingest')} | "
                     f"{kms('profile')} | {kms('alignment')} | {kms('plan')} | {kms('sight')} | "
                     f"{kms('speed and hazards')} | {kms('evaluate')} | {kms('export')} | {r['peak_mb']:,.0f} MB |")
    table = "\n".join(lines)
    print(table)
    ratio = ""
    if len(rows) >= 2 and rows[-2]["km"] > 0:
        a, b = rows[-2], rows[-1]
        ratio = (f"cost ratio {b['km']:,.0f} km / {a['km']:,.0f} km: {b['wall_s'] / a['wall_s']:.2f} x the time for "
                 f"{b['km'] / a['km']:.1f} x the road")
        print("\n" + ratio)

    # baseline on the smallest network
    small = nets[min(nets)]
    print(f"\nbaseline (per-point, per-station loops, one process) on {args.baseline_km:g} km ...", flush=True)
    base = baseline(small, args.baseline_km)
    ours = rows[0]
    per = lambda secs, km: secs / km * 1000  # ms per km  # noqa: E731
    btxt = ["| stage | baseline ms/km | sightaudit ms/km (CPU) | ratio |", "|---|---|---|---|"]
    for s in ("profile", "alignment", "sight"):
        b_ms, o_ms = per(base[s], base["km"]), per(ours[s], ours["km"])
        btxt.append(f"| {s} | {b_ms:,.1f} | {o_ms:,.1f} | {b_ms / o_ms:,.1f} x |")
    b_tot = per(base["profile"] + base["alignment"] + base["sight"], base["km"])
    o_tot = per(ours["profile"] + ours["alignment"] + ours["sight"], ours["km"])
    btxt.append(f"| these stages together | {b_tot:,.1f} | {o_tot:,.1f} | {b_tot / o_tot:,.1f} x |")
    wall_ms = per(ours["wall_s"], ours["km"])
    btxt.append(f"| whole run, end to end (wall clock, every core) | {b_tot:,.1f} (+ the rest) | {wall_ms:,.1f} | "
                f"at least {b_tot / wall_ms:,.1f} x |")
    print("\n".join(btxt))
    if args.readme:
        readme = HERE / "README.md"
        text = readme.read_text() if readme.exists() else ""
        marker = "<!-- throughput table -->"
        block = (f"{marker}\nMeasured {time.strftime('%Y-%m-%d')} on this machine ({os.cpu_count()} cores), median of "
                 f"{args.repeats} run(s):\n\n{table}\n\n{ratio}\n\nBaseline, same stages:\n\n" + "\n".join(btxt)
                 + f"\n\n{ALIGNMENT_NOTE}\n{marker}")
        if marker in text:
            pre, _, rest = text.partition(marker)
            _, _, post = rest.partition(marker)
            text = pre + block + post
        else:
            text = text + "\n" + block + "\n"
        readme.write_text(text)


if __name__ == "__main__":
    main()
