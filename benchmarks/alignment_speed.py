"""Speed of the vertical-alignment fit, its hot spots, and whether a change moved its results.

A fixed set of generated profiles (fixed seeds, 5 m stations, white noise of 0.05 m):

- ``design``: 5 km roads from the realistic-ground generator's vertical design
  (``benchmarks/realistic_ground.py``: A 1-9 %, crest K 5-120, sag K 8-100);
- ``random``: 5 km roads from the accuracy benchmark's generator
  (``pipeline.demo.synthetic.random_alignment`` as used by ``benchmarks/alignment_accuracy.py``:
  A 1-10 %, K 3-150, tangents 100-800 m).

For each set the fit (:func:`pipeline.alignment.fit.fit_profile`) is timed (CPU and wall
clock, median of ``--repeats``), scored against the known curves (recall, median PVI and K
errors, as in ``alignment_accuracy.py``) and its fitted PVIs are kept. ``--save FILE``
writes them to an ``.npz``; ``--compare FILE`` gives the largest differences in PVI
chainage, elevation, curve length and K against a saved run.

``--scaling 50 100 200 400`` times single profiles of those lengths (km), to show whether the
cost per km stays constant; ``--profile`` prints the top functions of a cProfile run;
``--solvers`` times the fit with each way of solving the Levenberg-Marquardt step that was
considered (the one kept, a banded Cholesky, a sparse LU, and ``scipy.optimize.least_squares``
for every problem) and compares their PVIs with the kept one's.

The process keeps the BLAS's default threads, as a run in one process does (one worker, or
one chunk); ``OPENBLAS_NUM_THREADS=1`` gives the case of the worker processes.

    python benchmarks/alignment_speed.py --save before.npz --profile
    python benchmarks/alignment_speed.py --compare before.npz --scaling 50 100 200 400

Measured 2026-12-02 on a busy 2-core machine (CPU ms per km, median of 3): with dense
Levenberg-Marquardt products, design 28-54 and random 44-70 (14-15 and 16-18 with one BLAS
thread); with the sparse Jacobian and products, 14-19 and 17-26 either way, the same PVIs to
1e-11 m. Scaling, one profile of 50 / 100 / 200 / 400 km: 16-19, 14-17, 16-17, 17-18 ms per km.
"""

from __future__ import annotations

import argparse
import cProfile
import io
import pstats
import sys
import time
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from scipy.linalg import solveh_banded
from scipy.sparse.csgraph import reverse_cuthill_mckee
from scipy.sparse.linalg import spsolve

sys.path.insert(0, str(Path(__file__).resolve().parent))

from alignment_accuracy import match  # noqa: E402
from realistic_ground import random_vertical  # noqa: E402

import pipeline.alignment.optimisation as optimisation  # noqa: E402
from pipeline.alignment.fit import fit_profile  # noqa: E402
from pipeline.demo.synthetic import random_alignment  # noqa: E402

STEP_M = 5.0
NOISE_M = 0.05
ROAD_KM = 5.0


def _design_truth(v) -> list[dict]:
    """Curves of a realistic-ground design in the form ``match`` expects."""
    out = []
    for c in v.curves():
        out.append({"pvi_m": c["pvi_m"], "kind": c["kind"], "a_pct": c["a_pct"], "length_m": c["length_m"],
                    "k": c["k"], "g1": c["g1_pct"] / 100, "g2": c["g2_pct"] / 100})
    return out


def profiles(n_roads: int, seed: int = 15) -> dict[str, list[tuple[np.ndarray, np.ndarray, list[dict]]]]:
    """The fixed profiles: ``{set name: [(chainage, elevation, true curves), ...]}``."""
    rng = np.random.default_rng(seed)
    ch = np.arange(0.0, ROAD_KM * 1000 + 1e-9, STEP_M)
    sets: dict[str, list] = {"design": [], "random": []}
    for _ in range(n_roads):
        v = random_vertical(rng, ROAD_KM * 1000)
        sets["design"].append((ch, v.z(ch) + rng.normal(0.0, NOISE_M, len(ch)), _design_truth(v)))
        va = random_alignment(rng, ROAD_KM * 1000)
        sets["random"].append((ch, va.z(ch) + rng.normal(0.0, NOISE_M, len(ch)), va.curves()))
    return sets


def fit_all(items):
    """Fit every profile; the PVIs of each and its curve table."""
    out = []
    for ch, z, _ in items:
        als, curves, _, _ = fit_profile(ch, z, STEP_M)
        out.append((als, curves))
    return out


def timed(fn, repeats: int):
    """Median CPU and wall seconds of ``fn()`` over ``repeats`` runs, and its last result."""
    cpu, wall = [], []
    res = None
    for _ in range(repeats):
        c0, w0 = time.process_time(), time.perf_counter()
        res = fn()
        cpu.append(time.process_time() - c0)
        wall.append(time.perf_counter() - w0)
    return float(np.median(cpu)), float(np.median(wall)), res


def score(items, fits) -> dict:
    """Recall and precision of curves with A >= 1.5 %, median PVI error (m) and K error (%)."""
    n_true = found = n_fit = good = 0
    dx, dk = [], []
    for (_, _, truth), (_, curves) in zip(items, fits):
        pairs, a, b, c, d = match(truth, curves)
        n_true, found, n_fit, good = n_true + a, found + b, n_fit + c, good + d
        for t, f in pairs:
            if t["a_pct"] >= 1.5:
                dx.append(abs(f["pvi_m"] - t["pvi_m"]))
                dk.append(abs(f["k"] - t["k"]) / t["k"])
    return {"curves": n_true, "recall": found / max(n_true, 1), "precision": good / max(n_fit, 1),
            "pvi_med_m": float(np.median(dx)) if dx else np.nan,
            "k_med_pct": float(np.median(dk)) * 100 if dk else np.nan}


def flatten(fits) -> dict[str, np.ndarray]:
    """Fitted PVIs of every road, one array per quantity, with the road index alongside."""
    road, X, Y, L = [], [], [], []
    for r, (als, _) in enumerate(fits):
        for al in als:
            road.append(np.full(len(al.x), r))
            X.append(al.x)
            Y.append(al.y)
            L.append(al.L)
    return {"road": np.concatenate(road), "X": np.concatenate(X), "Y": np.concatenate(Y), "L": np.concatenate(L)}


def k_values(X, Y, L) -> np.ndarray:
    """K (m per %) of every interior PVI of a run of PVIs (NaN at the ends)."""
    G = np.diff(Y) / np.diff(X)
    k = np.full(len(X), np.nan)
    a = np.abs(np.diff(G)) * 100
    with np.errstate(divide="ignore", invalid="ignore"):
        k[1:-1] = L[1:-1] / a
    return k


def compare(name: str, now: dict, before: dict) -> str:
    """Largest differences of the fitted PVIs against a saved run (roads with the same count)."""
    same, differ = [], []
    for r in np.unique(before["road"]):
        b, n = before["road"] == r, now["road"] == r
        (same if b.sum() == n.sum() else differ).append(r)
    dX = dY = dL = dK = 0.0
    for r in same:
        b, n = before["road"] == r, now["road"] == r
        dX = max(dX, float(np.max(np.abs(now["X"][n] - before["X"][b]))))
        dY = max(dY, float(np.max(np.abs(now["Y"][n] - before["Y"][b]))))
        dL = max(dL, float(np.max(np.abs(now["L"][n] - before["L"][b]))))
        kn = k_values(now["X"][n], now["Y"][n], now["L"][n])
        kb = k_values(before["X"][b], before["Y"][b], before["L"][b])
        ok = np.isfinite(kn) & np.isfinite(kb)
        if ok.any():
            dK = max(dK, float(np.max(np.abs(kn[ok] - kb[ok]))))
    return (f"{name}: {len(same)} roads with the same PVIs: max |dX| {dX:.3g} m, |dY| {dY:.3g} m, "
            f"|dL| {dL:.3g} m, |dK| {dK:.3g} m/%; {len(differ)} roads with another number of PVIs "
            f"{[int(r) for r in differ]}")


def scaling(lengths_km, repeats: int, seed: int = 16):
    """CPU ms per km for single profiles of each length (design generator, same density)."""
    rows = []
    for km in lengths_km:
        rng = np.random.default_rng(seed)
        v = random_vertical(rng, km * 1000)
        ch = np.arange(0.0, km * 1000 + 1e-9, STEP_M)
        z = v.z(ch) + rng.normal(0.0, NOISE_M, len(ch))
        cpu, wall, (als, _, _, _) = timed(lambda: fit_profile(ch, z, STEP_M), repeats)
        rows.append((km, sum(len(a.x) - 2 for a in als), cpu / km * 1000, wall / km * 1000))
    return rows


def banded_step(N, d, lam, g):
    """The damped step by a banded Cholesky: parameters in reverse Cuthill-McKee order, which
    puts the neighbouring PVIs' chainages, elevations and lengths together."""
    M = (sp.csr_matrix(N) + sp.diags(lam * d)).tocsr()
    perm = reverse_cuthill_mckee(M, symmetric_mode=True)
    C = M[perm][:, perm].tocoo()
    upper = C.col >= C.row
    u = int(np.max(C.col[upper] - C.row[upper]))
    ab = np.zeros((u + 1, M.shape[0]))
    ab[u + C.row[upper] - C.col[upper], C.col[upper]] = C.data[upper]
    x = np.empty(len(g))
    x[perm] = solveh_banded(ab, -g[perm])
    return x


def sparse_lu_step(N, d, lam, g):
    """The damped step by a sparse LU (SuperLU)."""
    x = spsolve((sp.csc_matrix(N) + sp.diags(lam * d)).tocsc(), -g)
    if not np.all(np.isfinite(x)):
        raise np.linalg.LinAlgError("singular")
    return x


def solvers(items, repeats: int):
    """Time the fit with each candidate way of solving the Levenberg-Marquardt step."""
    kept_step, kept_max = optimisation.damped_step, optimisation.LM_MAX_PARAMS
    variants = {"dense LU (kept)": (kept_step, kept_max), "banded Cholesky": (banded_step, kept_max),
                "sparse LU": (sparse_lu_step, kept_max), "least_squares trf, all": (kept_step, 0)}
    rows, ref = [], None
    for name, (step, most) in variants.items():
        optimisation.damped_step, optimisation.LM_MAX_PARAMS = step, most
        try:
            cpu, wall, fits = timed(lambda: fit_all(items), repeats)
        finally:
            optimisation.damped_step, optimisation.LM_MAX_PARAMS = kept_step, kept_max
        flat = flatten(fits)
        ref = ref or flat
        rows.append((name, cpu, wall, compare("vs kept", flat, ref)))
    return rows


def profile_top(items, n: int) -> str:
    """cProfile of one fit of the profiles: the top ``n`` functions by own time, then by total."""
    pr = cProfile.Profile()
    pr.enable()
    fit_all(items)
    pr.disable()
    buf = io.StringIO()
    st = pstats.Stats(pr, stream=buf).strip_dirs()
    st.sort_stats("tottime").print_stats(n)
    st.sort_stats("cumulative").print_stats(n + 15)
    return buf.getvalue()


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--roads", type=int, default=6, help="5 km roads per set")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--save", help="write the fitted PVIs to this .npz")
    ap.add_argument("--compare", help="compare the fitted PVIs with this .npz")
    ap.add_argument("--scaling", type=float, nargs="*", default=(), help="km of single profiles to time")
    ap.add_argument("--profile", action="store_true", help="print the cProfile hot spots")
    ap.add_argument("--solvers", action="store_true", help="time each way of solving the LM step")
    ap.add_argument("--top", type=int, default=12)
    args = ap.parse_args(argv)

    sets = profiles(args.roads)
    saved = {}
    before = np.load(args.compare) if args.compare else None
    print(f"alignment fit: {args.roads} roads of {ROAD_KM:g} km per set, step {STEP_M:g} m, noise {NOISE_M:g} m, "
          f"median of {args.repeats}")
    print("set     km  cpu ms/km  wall ms/km  curves  recall  precision  PVI err m  K err %")
    for name, items in sets.items():
        km = len(items) * ROAD_KM
        cpu, wall, fits = timed(lambda: fit_all(items), args.repeats)
        s = score(items, fits)
        print(f"{name:7s} {km:3.0f} {cpu / km * 1000:10.1f} {wall / km * 1000:11.1f} {s['curves']:7d} "
              f"{s['recall']:7.3f} {s['precision']:10.3f} {s['pvi_med_m']:10.2f} {s['k_med_pct']:8.2f}", flush=True)
        flat = flatten(fits)
        saved.update({f"{name}_{k}": v for k, v in flat.items()})
        if before is not None:
            print("  " + compare(name, flat, {k: before[f"{name}_{k}"] for k in flat}))
    if args.save:
        np.savez(args.save, **saved)
    if args.scaling:
        print("\nscaling (one profile per length): km, PVIs, cpu ms/km, wall ms/km")
        for km, nv, cpu, wall in scaling(args.scaling, repeats=1):
            print(f"{km:5.0f} {nv:6d} {cpu:9.1f} {wall:10.1f}", flush=True)
    if args.solvers:
        items = [it for v in sets.values() for it in v]
        print(f"\nsolvers of the LM step, all {len(items) * ROAD_KM:g} km: cpu s, wall s (median of {args.repeats})")
        for name, cpu, wall, cmp in solvers(items, args.repeats):
            print(f"{name:24s} {cpu:6.2f} {wall:6.2f}  {cmp}", flush=True)
    if args.profile:
        print(profile_top([it for items in sets.values() for it in items], args.top))


if __name__ == "__main__":
    main()
