"""Accuracy (and cost) of the vertical-alignment recovery on synthetic roads.

Roads with known alignments are generated (grades up to 8 %, A from 1 to 10 %,
K from 3 to 150 log-uniform, tangents 100-800 m between curves, crests and sags
in any order, so consecutive crests and consecutive sags occur), white ground
noise is added, and the fitted curves are matched to the true ones.

For each noise level and profile step the table gives, over curves with
A >= 1.5 %:

- recall: true curves found (a fitted curve of the same kind whose PVI lies
  within max(15 m, L/4) of the true PVI);
- precision: fitted curves (A >= 1.5 %) that match a true curve;
- median and 95th-percentile error of PVI chainage (m), of the grades either
  side (percentage points) and of K (relative).

Then the cost: milliseconds per km of the alignment stage for roads of 1 to
50 km, and km per second.

    python benchmarks/alignment_accuracy.py            # the full table (a few minutes)
    python benchmarks/alignment_accuracy.py --quick    # fewer roads
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from pipeline.alignment.fit import fit_profile
from pipeline.demo.synthetic import random_alignment

NOISES = (0.02, 0.05, 0.1, 0.25, 0.5)
STEPS = (1.0, 2.0, 5.0, 10.0)


def match(true: list[dict], fitted, a_min: float = 1.5):
    """One-to-one matching of fitted to true curves by PVI distance (same kind)."""
    pairs = []
    used = set()
    fit = fitted.reset_index(drop=True)
    for t in sorted(true, key=lambda c: -c["a_pct"]):
        tol = max(15.0, t["length_m"] / 4)
        cand = fit[(fit["kind"] == t["kind"]) & (np.abs(fit["pvi_m"] - t["pvi_m"]) <= tol)]
        cand = cand[~cand.index.isin(used)]
        if len(cand):
            j = (cand["pvi_m"] - t["pvi_m"]).abs().idxmin()
            used.add(j)
            pairs.append((t, fit.loc[j]))
    n_true = sum(1 for t in true if t["a_pct"] >= a_min)
    found = sum(1 for t, _ in pairs if t["a_pct"] >= a_min)
    big = fit[fit["a_pct"] >= a_min]
    good = sum(1 for j in big.index if j in used)
    return pairs, n_true, found, len(big), good


def run_cell(noise: float, step: float, km: float, seed: int):
    rng = np.random.default_rng(seed)
    n_true = found = n_fit = good = 0
    dx, dg, dk = [], [], []
    road_km = 5.0
    for _ in range(int(round(km / road_km))):
        va = random_alignment(rng, road_km * 1000)
        ch = np.arange(0.0, road_km * 1000 + 1e-9, step)
        z = va.z(ch) + rng.normal(0.0, noise, len(ch))
        _, curves, _, _ = fit_profile(ch, z, step)
        pairs, a, b, c, d = match(va.curves(), curves)
        n_true += a
        found += b
        n_fit += c
        good += d
        for t, f in pairs:
            if t["a_pct"] < 1.5:
                continue
            dx.append(abs(f["pvi_m"] - t["pvi_m"]))
            dg.extend([abs(f["g1_pct"] - t["g1"] * 100), abs(f["g2_pct"] - t["g2"] * 100)])
            dk.append(abs(f["k"] - t["k"]) / t["k"])
    q = lambda v, p: float(np.percentile(v, p)) if v else float("nan")  # noqa: E731
    return {
        "noise": noise, "step": step, "curves": n_true,
        "recall": found / max(n_true, 1), "precision": good / max(n_fit, 1),
        "pvi_med": q(dx, 50), "pvi_p95": q(dx, 95), "grade_med": q(dg, 50), "grade_p95": q(dg, 95),
        "k_med": q(dk, 50), "k_p95": q(dk, 95),
    }


def cost(lengths_km=(1, 5, 20, 50), noise=0.05, step=5.0, total_km=100.0, seed=3, repeats=3):
    """ms per km for roads of each length, all cut from the same 50 km roads so that the
    density of curves is the same whatever the length (median of ``repeats`` runs)."""
    rng = np.random.default_rng(seed)
    long_roads = []
    for _ in range(int(total_km // 50)):
        va = random_alignment(rng, 50_000.0)
        ch = np.arange(0.0, 50_000.0 + 1e-9, step)
        long_roads.append(va.z(ch) + rng.normal(0.0, noise, len(ch)))
    rows = []
    for L in lengths_km:
        per = int(round(L * 1000 / step))
        pieces = [z[i:i + per + 1] for z in long_roads for i in range(0, len(z) - per, per)]
        times = []
        for _ in range(repeats):
            t0 = time.perf_counter()
            for z in pieces:
                fit_profile(np.arange(len(z)) * step, z, step)
            times.append(time.perf_counter() - t0)
        dt = float(np.median(times))
        km = len(pieces) * L
        rows.append((L, len(pieces), dt / km * 1000, km / dt))
    return rows


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="25 km per cell instead of 100")
    ap.add_argument("--km", type=float, default=None, help="km of road per cell")
    ap.add_argument("--noise", type=float, nargs="*", default=NOISES)
    ap.add_argument("--step", type=float, nargs="*", default=STEPS)
    ap.add_argument("--no-cost", action="store_true")
    args = ap.parse_args(argv)
    km = args.km or (25.0 if args.quick else 100.0)
    print(f"alignment accuracy: {km:g} km of synthetic road per cell, curves with A >= 1.5 %")
    print("noise_m step_m curves recall precision | PVI err m med/p95 | grade err pp med/p95 | K err med/p95")
    for noise in args.noise:
        for step in args.step:
            r = run_cell(noise, step, km, seed=int(noise * 1000 + step * 7))
            print(f"{r['noise']:7.2f} {r['step']:6.0f} {r['curves']:6d} {r['recall']:6.3f} {r['precision']:9.3f} | "
                  f"{r['pvi_med']:6.2f} {r['pvi_p95']:7.2f} | {r['grade_med']:7.3f} {r['grade_p95']:7.3f} | "
                  f"{r['k_med'] * 100:5.1f}% {r['k_p95'] * 100:6.1f}%", flush=True)
    if not args.no_cost:
        print("\ncost (noise 0.05 m, step 5 m): road km, roads, ms per km, km per second")
        for L, n, ms, kms in cost():
            print(f"{L:5.0f} {n:5d} {ms:8.1f} {kms:8.1f}", flush=True)


if __name__ == "__main__":
    main()
