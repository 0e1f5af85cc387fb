"""Recover the vertical alignment (tangents and symmetric parabolic curves) from a profile.

Model (AASHTO Green Book, ch. 3; common practice): the road's grade line is a
chain of vertices (PVIs) ``(X_k, Y_k)`` from the first to the last station,
joined by constant-grade tangents ``G_k = (Y_{k+1} - Y_k) / (X_{k+1} - X_k)``,
and every interior PVI carries a symmetric parabolic curve of length ``L_k``
centred on it. Written as the broken grade line plus one correction per curve,

    z(x) = Y_k + G_k (x - X_k)                         (x between X_k and X_{k+1})
         + sum_i (G_i - G_{i-1}) / (2 L_i) * max(0, L_i/2 - |x - X_i|)^2

which equals the textbook form y = y_PVC + g1 u + (g2 - g1) / (2 L) u^2 on each
curve (u from the PVC) and is linear in the PVI elevations ``Y`` for fixed
chainages and lengths.

Method, in order:

1. **Noise level** sigma from second differences of the profile, robustly: a
   difference-based residual variance estimator (Gasser, Sroka & Jennen-Steinmetz
   1986, *Biometrika* 73(3) 625-633) with the median absolute deviation
   (Hampel 1974) so that curves do not inflate it. For white noise,
   var(z[i+1] - 2 z[i] + z[i-1]) = 6 sigma^2.
2. **Segmentation** into straight pieces by optimal partitioning (Jackson et al.
   2005, *IEEE Signal Processing Letters* 12(2) 105-108) with PELT pruning
   (Killick, Fearnhead & Eckley 2012, *JASA* 107(500) 1590-1598); segment cost
   is the residual sum of squares of a least-squares line, from cumulative
   sums; penalty per breakpoint 2 sigma^2 ln n, deliberately light so that no
   real grade change is missed (a long curve comes out as several chords).
3. **Initial model**: PVIs where adjacent chords intersect, elevations by linear
   least squares, and each curve's length by least squares over a grid of
   lengths on the samples around its PVI.
4. **Model selection**: a PVI is removed, or two neighbouring PVIs that bend the
   same way are merged into one curve, while doing so raises the residual sum of
   squares by less than the Bayesian information criterion's price of the three
   parameters (X, Y, L) of a PVI, 3 sigma^2 ln n (Schwarz 1978, *Annals of
   Statistics* 6(2) 461-464). A PVI whose grade change is below
   ``min_grade_change_pct`` is removed regardless.
5. **Joint refinement** of all PVI chainages, elevations and curve lengths by
   nonlinear least squares (Levenberg-Marquardt with the analytic Jacobian, in
   overlapping blocks of ten PVIs along long roads;
   ``scipy.optimize.least_squares`` for larger problems), the curves kept within
   the road and apart by bounds and a penalty; remaining overlaps are closed by
   shortening both curves, and the elevations re-solved.

Per curve: kind (crest where G2 < G1), PVC/PVI/PVT, G1, G2, A, L, K = L/A, the
turning point where it falls on the curve (x = -g1 L / (g2 - g1) from the PVC),
the RMSE of the fit over the curve, and a confidence flag with its reasons.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy.optimize import least_squares

from ..profile.corridor import deconvolved_length

# ---------------------------------------------------------------- settings
DEFAULTS = {
    "min_tangent_m": 20.0,        # shortest straight piece the segmentation may create
    "min_grade_change_pct": 0.5,  # a PVI with a smaller grade change is not a curve
    "noise_floor_m": 0.002,       # noise assumed at least this (exact data has none)
    "split_gap_m": 150.0,         # profiles are fitted separately across longer data gaps
    "short_tangent_m": 60.0,      # same-kind curves closer than this are flagged broken-back
    "bin_m": 10.0,                # structure is found on means over bins this long
}


@dataclass
class Alignment:
    """Fitted vertical alignment of one stretch of profile (metres, grades as fractions)."""

    x: np.ndarray  # PVI chainages, first and last are the stretch ends
    y: np.ndarray  # PVI elevations
    L: np.ndarray  # curve lengths (0 at both ends)
    sigma: float = 0.0
    n: int = 0
    flags: dict = field(default_factory=dict)

    @property
    def grades(self) -> np.ndarray:
        return np.diff(self.y) / np.diff(self.x)

    def z(self, xs: np.ndarray) -> np.ndarray:
        return model_z(self.x, self.y, self.L, xs)

    def grade(self, xs: np.ndarray) -> np.ndarray:
        return model_grade(self.x, self.y, self.L, xs)


# ------------------------------------------------------------- the model
def _ascending(fn):
    """Let a function written for ascending chainages take them in any order."""
    def wrapper(X, Y, L, xs):
        xs = np.asarray(xs, dtype=float)
        if xs.ndim == 1 and (len(xs) < 2 or np.all(xs[1:] >= xs[:-1])):
            return fn(X, Y, L, xs)
        flat = xs.ravel()
        order = np.argsort(flat, kind="stable")
        out = np.empty(len(flat))
        out[order] = fn(X, Y, L, flat[order])
        return out.reshape(xs.shape)
    wrapper.__doc__ = fn.__doc__
    wrapper.__name__ = fn.__name__
    return wrapper


def _segment(X: np.ndarray, xs: np.ndarray) -> np.ndarray:
    """Index of the tangent (between PVIs k and k + 1) each chainage falls on."""
    k = np.searchsorted(X, xs, side="right") - 1
    np.minimum(k, len(X) - 2, out=k)
    np.maximum(k, 0, out=k)
    return k


@_ascending
def model_z(X: np.ndarray, Y: np.ndarray, L: np.ndarray, xs: np.ndarray) -> np.ndarray:
    """Elevation (m) of the alignment at chainages ``xs`` (m, any order); see module notes."""
    G = (Y[1:] - Y[:-1]) / (X[1:] - X[:-1])
    k = _segment(X, xs)
    z = Y[k] + G[k] * (xs - X[k])
    dG = np.diff(G)
    for i in np.flatnonzero(L[1:-1] > 0) + 1:
        lo, hi = np.searchsorted(xs, [X[i] - L[i] / 2, X[i] + L[i] / 2])
        q = L[i] / 2 - np.abs(xs[lo:hi] - X[i])
        z[lo:hi] += dG[i - 1] * np.maximum(q, 0.0) ** 2 / (2 * L[i])
    return z


@_ascending
def model_grade(X: np.ndarray, Y: np.ndarray, L: np.ndarray, xs: np.ndarray) -> np.ndarray:
    """Grade (fraction) of the alignment at chainages ``xs`` (any order): the derivative of
    :func:`model_z`."""
    G = np.diff(Y) / np.diff(X)
    k = np.clip(np.searchsorted(X, xs, side="right") - 1, 0, len(G) - 1)
    g = G[k].astype(float)
    dG = np.diff(G)
    for i in np.flatnonzero(L[1:-1] > 0) + 1:
        lo, hi = np.searchsorted(xs, [X[i] - L[i] / 2, X[i] + L[i] / 2])
        d = xs[lo:hi] - X[i]
        q = np.maximum(L[i] / 2 - np.abs(d), 0.0)
        side = np.where(d >= 0, 1.0, -1.0)  # at the PVI itself the tangent is the next one
        g[lo:hi] += -dG[i - 1] * q * side / L[i]
    return g


def design_matrix(X: np.ndarray, L: np.ndarray, xs: np.ndarray):
    """Matrix ``Phi`` with ``model_z(X, Y, L, xs) = Phi @ Y``.

    Column k is the hat function of vertex k plus the curve corrections that
    depend on Y_k through the grades either side of it. Sparse (CSR): each
    station touches at most four vertices.
    """
    xs = np.asarray(xs, dtype=float)
    nv, n = len(X), len(xs)
    D = np.diff(X)
    k = np.clip(np.searchsorted(X, xs, side="right") - 1, 0, nv - 2)
    t = (xs - X[k]) / D[k]
    r = np.arange(n)
    rows, cols, vals = [r, r], [k, k + 1], [1 - t, t]
    for i in np.flatnonzero(L[1:-1] > 0) + 1:
        lo, hi = np.searchsorted(xs, [X[i] - L[i] / 2, X[i] + L[i] / 2])
        if hi <= lo:
            continue
        w = np.maximum(L[i] / 2 - np.abs(xs[lo:hi] - X[i]), 0.0) ** 2 / (2 * L[i])
        rr = r[lo:hi]
        for c, coef in ((i - 1, 1 / D[i - 1]), (i, -1 / D[i - 1] - 1 / D[i]), (i + 1, 1 / D[i])):
            rows.append(rr)
            cols.append(np.full(len(rr), c))
            vals.append(w * coef)
    return sp.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n, nv))


def design_dense(X: np.ndarray, L: np.ndarray, xs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Dense ``Phi`` (as :func:`design_matrix`) for a short window, built with a fixed number of
    array operations whatever the number of curves. Also returns the curve-coefficient matrix
    ``C`` (nv x nv): row i holds d(G_i - G_{i-1})/dY."""
    nv, n = len(X), len(xs)
    D = X[1:] - X[:-1]
    k = np.searchsorted(X, xs, side="right") - 1
    np.minimum(k, nv - 2, out=k)
    np.maximum(k, 0, out=k)
    t = (xs - X[k]) / D[k]
    r = np.arange(n)
    phi = np.zeros((n, nv))
    phi[r, k] = 1 - t
    phi[r, k + 1] = t
    C = np.zeros((nv, nv))
    i = np.arange(1, nv - 1)
    inv = 1.0 / D
    C[i, i - 1] = inv[:-1]
    C[i, i] = -inv[:-1] - inv[1:]
    C[i, i + 1] = inv[1:]
    cv = np.flatnonzero(L > 0)
    if len(cv):
        q = np.maximum(L[cv] / 2 - np.abs(xs[:, None] - X[cv]), 0.0)
        phi += (q * q / (2 * L[cv])) @ C[cv]
    return phi, C


def design_batch(Xs: np.ndarray, Ls: np.ndarray, xs: np.ndarray) -> np.ndarray:
    """:func:`design_dense` for a batch of vertex sets ``Xs`` (nc, nv) with lengths ``Ls``
    (nc, nv) at the same stations ``xs``: shape (nc, n, nv), one array pass for the batch."""
    nc, nv = Xs.shape
    n = len(xs)
    D = np.diff(Xs, axis=1)  # (nc, nv-1)
    k = np.clip((xs[None, :, None] >= Xs[:, None, 1:-1]).sum(axis=2), 0, nv - 2)  # (nc, n)
    x0 = np.take_along_axis(Xs, k, axis=1)
    t = (xs[None, :] - x0) / np.take_along_axis(D, k, axis=1)
    phi = np.zeros((nc, n, nv))
    np.put_along_axis(phi, k[:, :, None], (1 - t)[:, :, None], axis=2)
    np.put_along_axis(phi, (k + 1)[:, :, None], t[:, :, None], axis=2)
    C = np.zeros((nc, nv, nv))
    i = np.arange(1, nv - 1)
    C[:, i, i - 1] = 1 / D[:, i - 1]
    C[:, i, i] = -1 / D[:, i - 1] - 1 / D[:, i]
    C[:, i, i + 1] = 1 / D[:, i]
    Lsafe = np.where(Ls > 0, Ls, 1.0)
    q = np.maximum(Ls[:, None, :] / 2 - np.abs(xs[None, :, None] - Xs[:, None, :]), 0.0)
    W = np.where(Ls[:, None, :] > 0, q * q / (2 * Lsafe[:, None, :]), 0.0)
    return phi + W @ C


def _curve_column_weights(X: np.ndarray, xs: np.ndarray, i: int, lengths: np.ndarray) -> np.ndarray:
    """w_i(x) = max(0, L/2 - |x - X_i|)^2 / (2 L) for each length in ``lengths``: shape (nL, n)."""
    Lc = np.maximum(lengths, 1e-12)[:, None]
    q = np.maximum(Lc / 2 - np.abs(xs[None, :] - X[i]), 0.0)
    return np.where(lengths[:, None] > 0, q**2 / (2 * Lc), 0.0)


def _jacobian(X, Y, L, xs, free_x: np.ndarray, free_y: np.ndarray, free_l: np.ndarray, rho: float,
              dense: bool = False):
    """Sparse Jacobian of the residuals (model minus data, then overlap penalties)
    with respect to ``[X[free_x], Y[free_y], L[free_l]]`` (derivatives in the module notes
    differentiated by hand; checked against finite differences in the tests)."""
    nv = len(X)
    n = len(xs)
    D = np.diff(X)
    G = np.diff(Y) / D
    dG = np.diff(G)
    xcol = np.full(nv, -1)
    xcol[free_x] = np.arange(len(free_x))
    ycol = np.full(nv, -1)
    ycol[free_y] = len(free_x) + np.arange(len(free_y))
    lcol = np.full(nv, -1)
    lcol[free_l] = len(free_x) + len(free_y) + np.arange(len(free_l))
    rows, cols, vals = [], [], []

    k = np.clip(np.searchsorted(X, xs, side="right") - 1, 0, nv - 2)
    t = (xs - X[k]) / D[k]
    r = np.arange(n)
    for kk, val, colmap in ((k, 1 - t, ycol), (k + 1, t, ycol), (k, -G[k] * (1 - t), xcol),
                            (k + 1, -G[k] * t, xcol)):
        m = colmap[kk] >= 0
        rows.append(r[m])
        cols.append(colmap[kk][m])
        vals.append(val[m])

    for i in range(1, nv - 1):
        if L[i] <= 0:
            continue
        lo, hi = np.searchsorted(xs, [X[i] - L[i] / 2, X[i] + L[i] / 2])
        if hi <= lo:
            continue
        d = xs[lo:hi] - X[i]
        q = np.maximum(L[i] / 2 - np.abs(d), 0.0)
        w = q**2 / (2 * L[i])
        rr = np.arange(lo, hi)
        dgi = dG[i - 1]
        parts = [
            (ycol[i - 1], w / D[i - 1]),
            (ycol[i], -w * (1 / D[i - 1] + 1 / D[i])),
            (ycol[i + 1], w / D[i]),
        ]
        if lcol[i] >= 0:
            parts.append((lcol[i], dgi * q * (L[i] - q) / (2 * L[i] ** 2)))
        if xcol[i] >= 0:
            parts.append((xcol[i], w * (G[i] / D[i] + G[i - 1] / D[i - 1]) + dgi * q * np.sign(d) / L[i]))
        if xcol[i - 1] >= 0:
            parts.append((xcol[i - 1], -w * G[i - 1] / D[i - 1]))
        if xcol[i + 1] >= 0:
            parts.append((xcol[i + 1], -w * G[i] / D[i]))
        for c, v in parts:
            if c >= 0:
                rows.append(rr)
                cols.append(np.full(len(rr), c))
                vals.append(v)

    # overlap penalties between consecutive curves (and the stretch ends)
    pr = n
    for i in range(nv - 1):
        over = L[i] / 2 + L[i + 1] / 2 - D[i]
        if over > 0:
            for c, v in ((lcol[i], rho / 2), (lcol[i + 1], rho / 2), (xcol[i], rho), (xcol[i + 1], -rho)):
                if c >= 0:
                    rows.append(np.array([pr]))
                    cols.append(np.array([c]))
                    vals.append(np.array([v]))
        pr += 1
    ncol = len(free_x) + len(free_y) + len(free_l)
    if dense:
        J = np.zeros((n + nv - 1, ncol))
        for rr, cc, vv in zip(rows, cols, vals):
            J[rr, cc] += vv  # (row, column) pairs are distinct within a block
        return J
    return sp.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                         shape=(n + nv - 1, ncol))


# ---------------------------------------------------------- noise, segments
def noise_sigma(z: np.ndarray) -> float:
    """Noise standard deviation (m) of a uniformly spaced profile from its second
    differences: 1.4826 MAD(d2) / sqrt(6) (Gasser et al. 1986; Hampel 1974)."""
    z = np.asarray(z, dtype=float)
    d2 = z[2:] - 2 * z[1:-1] + z[:-2]
    d2 = d2[np.isfinite(d2)]
    if len(d2) < 3:
        return 0.0
    mad = np.median(np.abs(d2 - np.median(d2)))
    return float(1.4826 * mad / np.sqrt(6.0))


def segment_lines(x: np.ndarray, z: np.ndarray, beta: float, min_len: int) -> np.ndarray:
    """Optimal partition of ``(x, z)`` into least-squares lines with penalty ``beta`` per
    segment (Jackson et al. 2005) and PELT pruning (Killick et al. 2012).

    Returns the start indices of the segments after the first (breakpoints).
    """
    n = len(x)
    if n < 2 * min_len:
        return np.array([], dtype=int)
    xc = (x - x.mean()) / max(np.ptp(x), 1.0)
    zc = z - z.mean()
    c = lambda v: np.concatenate([[0.0], np.cumsum(v)])  # noqa: E731
    S1, S2, T1, T2, U = c(xc), c(xc * xc), c(zc), c(zc * zc), c(xc * zc)

    # F[t] depends only on F[tau] with tau <= t - min_len, so min_len consecutive values of
    # F are computed together (one array operation per block instead of per station).
    F = np.full(n + 1, np.inf)
    F[0] = -beta
    prev = np.zeros(n + 1, dtype=np.int64)
    R = np.array([0], dtype=np.int64)
    added = 1  # candidates tau < added have been offered to R
    T = min_len
    while T <= n:
        ts = np.arange(T, min(T + min_len, n + 1))
        new = np.arange(max(added, min_len), ts[-1] - min_len + 1)
        if len(new):
            R = np.concatenate([R, new[np.isfinite(F[new])]])
            added = ts[-1] - min_len + 1
        m = ts[None, :] - R[:, None]  # segment lengths, (|R|, block)
        a_idx = np.broadcast_to(R[:, None], m.shape)
        b_idx = np.broadcast_to(ts[None, :], m.shape)
        s1, s2 = S1[b_idx] - S1[a_idx], S2[b_idx] - S2[a_idx]
        t1, t2, u = T1[b_idx] - T1[a_idx], T2[b_idx] - T2[a_idx], U[b_idx] - U[a_idx]
        with np.errstate(invalid="ignore", divide="ignore"):
            sxx = s2 - s1 * s1 / m
            sxz = u - s1 * t1 / m
            rss = np.maximum(t2 - t1 * t1 / m - np.where(sxx > 0, sxz * sxz / sxx, 0.0), 0.0)
        base = F[R][:, None] + rss
        base[m < min_len] = np.inf
        j = np.argmin(base, axis=0)
        F[ts] = base[j, np.arange(len(ts))] + beta
        prev[ts] = R[j]
        # PELT pruning: once F[tau] + C(tau, t) > F[t] for some t, tau is never optimal later
        R = R[~np.any((base > F[ts][None, :]) & (m >= min_len), axis=1)]
        T = ts[-1] + 1
    bps = []
    t = n
    while t > 0:
        t = int(prev[t])
        if t > 0:
            bps.append(t)
    return np.array(sorted(bps), dtype=int)


def _line_fit(x, z):
    A = np.column_stack([np.ones_like(x), x])
    coef, *_ = np.linalg.lstsq(A, z, rcond=None)
    return coef  # intercept, slope


def _initial_vertices(x: np.ndarray, z: np.ndarray, bps: np.ndarray) -> np.ndarray:
    """PVI chainages where neighbouring chords meet (or their common end)."""
    bounds = np.concatenate([[0], bps, [len(x)]])
    lines = [_line_fit(x[a:b], z[a:b]) for a, b in zip(bounds[:-1], bounds[1:])]
    X = [x[0]]
    for j, b in enumerate(bps):
        (c0, m0), (c1, m1) = lines[j], lines[j + 1]
        lo = 0.5 * (x[bounds[j]] + x[b - 1])
        hi = 0.5 * (x[b] + x[bounds[j + 2] - 1])
        xi = 0.5 * (x[b - 1] + x[b])
        if abs(m0 - m1) > 1e-12:
            cross = (c1 - c0) / (m0 - m1)
            if lo < cross < hi:
                xi = cross
        X.append(max(xi, X[-1] + 1e-6))
    X.append(max(x[-1], X[-1] + 1e-6))
    return np.array(X)


def _solve_y(X, L, xs, zs):
    """Least-squares PVI elevations for fixed chainages and lengths, over a whole stretch.
    Returns ``(Y, rss)``. The normal equations are banded (each station touches at most
    four vertices), so a sparse factorisation keeps this linear in the road's length."""
    from scipy.sparse.linalg import spsolve

    A = design_matrix(X, L, xs)
    N = (A.T @ A).tocsc()
    Y = np.asarray(spsolve(N, A.T @ zs)) if len(X) > 2 else np.linalg.solve(N.toarray(), A.T @ zs)
    r = A @ Y - zs
    return Y, float(r @ r)


# ------------------------------------------------------- model selection
class _Fitter:
    """State of one stretch while its alignment is being selected and refined."""

    def __init__(self, xs, zs, sigma, opts):
        self.xs, self.zs = xs, zs
        self.sigma = sigma
        self.opts = opts
        self.n = len(xs)
        self.price = 3.0 * sigma**2 * np.log(max(self.n, 3))
        self.min_dg = opts["min_grade_change_pct"] / 100.0
        self.min_arm = opts["min_tangent_m"]

    def calibrate(self, X, Y, L, floor: float) -> None:
        """Re-set the price of a PVI from the residuals of a fitted model: their robust spread
        (1.4826 MAD) and, for noise correlated from one sample to the next (a DEM sampled at
        about its cell size), the AR(1) variance inflation (1 + rho) / (1 - rho) with rho the
        lag-1 autocorrelation of the residuals (e.g. Box, Jenkins & Reinsel, *Time Series
        Analysis*, 4th ed., ch. 3), capped at 4."""
        r = self.zs - model_z(X, Y, L, self.xs)
        if len(r) < 10:
            return
        spread = 1.4826 * np.median(np.abs(r - np.median(r)))
        rc = r - r.mean()
        denom = float(rc @ rc)
        rho = float(rc[:-1] @ rc[1:]) / denom if denom > 0 else 0.0
        rho = min(max(rho, 0.0), 0.6)
        self.sigma = max(self.sigma, spread, floor)
        self.price = 3.0 * self.sigma**2 * np.log(max(self.n, 3)) * (1 + rho) / (1 - rho)

    # --- local problems: vertices strictly inside (a, b) re-solved, the rest held
    def _window(self, X, L, a, b):
        a, b = max(a, 0), min(b, len(X) - 1)
        lo, hi = np.searchsorted(self.xs, [X[a] - L[a] / 2, X[b] + L[b] / 2], side="left")
        return a, b, lo, max(hi, lo)

    def _local(self, X, Y, L, a, b, vary: int | None = None, lgrid=None, xgrid=None):
        """RSS over the stations of window (a, b) with the elevations of the vertices
        strictly inside re-solved by least squares. With ``vary``, PVI ``vary`` takes each
        length of ``lgrid`` (and chainage of ``xgrid``, if given) in turn, in one batched solve.

        Returns ``(rss, Y)`` or, with ``vary``, ``(rss_per_candidate, Y_per_candidate)``.
        """
        a, b, lo, hi = self._window(X, L, a, b)
        va, vb = max(a - 1, 0), min(b + 1, len(X) - 1)
        xs, zs = self.xs[lo:hi], self.zs[lo:hi]
        Xw, Lw = X[va:vb + 1], L[va:vb + 1].copy()
        Lw[0] = Lw[-1] = 0.0  # the boundary vertices' curves end before the window (no overlap)
        Yw = Y[va:vb + 1]
        free = np.arange(a + 1 - va, b - va)
        is_free = np.zeros(len(Xw), dtype=bool)
        is_free[free] = True
        fixed = np.flatnonzero(~is_free)
        if vary is None:
            phis = design_dense(Xw, Lw, xs)[0][None]
        elif xgrid is None:
            lengths = np.asarray(lgrid, dtype=float)
            Lw[vary - va] = 0.0
            phi, C = design_dense(Xw, Lw, xs)
            w = _curve_column_weights(Xw, xs, vary - va, lengths)  # (nL, n)
            phis = phi[None] + w[:, :, None] * C[vary - va][None, None, :]
        else:
            nc = len(lgrid)
            Xs = np.repeat(Xw[None, :], nc, axis=0)
            Ls = np.repeat(Lw[None, :], nc, axis=0)
            Xs[:, vary - va] = xgrid
            Ls[:, vary - va] = lgrid
            phis = design_batch(Xs, Ls, xs)
        nc = phis.shape[0]
        rhs = zs[None, :] - phis[:, :, fixed] @ Yw[fixed]
        if len(free):
            A = phis[:, :, free]
            At = np.swapaxes(A, 1, 2)
            N = At @ A + 1e-12 * np.eye(len(free))[None]
            sol = np.linalg.solve(N, (At @ rhs[:, :, None]))[:, :, 0]
            res = (A @ sol[:, :, None])[:, :, 0] - rhs
        else:
            sol = np.zeros((nc, 0))
            res = -rhs
        rss = np.einsum("ij,ij->i", res, res)
        Ys = np.repeat(Y[None, :], nc, axis=0)
        Ys[:, va + free] = sol
        if vary is None:
            return float(rss[0]), Ys[0]
        return rss, Ys

    def local_nls(self, X, Y, L, a, b, max_nfev: int = 12, ftol: float = 1e-6):
        """Window (a, b) re-fitted by nonlinear least squares: chainage, elevation and length of
        every PVI strictly inside free. Returns ``(rss, (X, Y, L))`` over the window's stations."""
        a, b, lo, hi = self._window(X, L, a, b)
        va, vb = max(a - 1, 0), min(b + 1, len(X) - 1)
        Xw, Yw, Lw = X[va:vb + 1], Y[va:vb + 1], L[va:vb + 1].copy()
        Lw[0] = Lw[-1] = 0.0
        inner = np.arange(a + 1 - va, b - va)
        inner = inner[(inner > 0) & (inner < len(Xw) - 1)]
        if not len(inner) or hi - lo < 3:
            rss, Yn = self._local(X, Y, L, a, b)
            return rss, (X, Yn, L)
        # the stretch's own end points keep their chainage but not their elevation
        free_y = np.concatenate([[0] if a == 0 else [], inner, [len(Xw) - 1] if b == len(X) - 1 else []])
        free_y = free_y.astype(int)
        Xn, Yn, Ln, rss = nls_fit(Xw, Yw, Lw, self.xs[lo:hi], self.zs[lo:hi], inner, free_y, inner,
                                 max_nfev=max_nfev, ftol=ftol)
        over = Ln[:-1] / 2 + Ln[1:] / 2 - np.diff(Xn)
        if np.any(over > 1e-6):
            return np.inf, None
        X2, Y2, L2 = X.copy(), Y.copy(), L.copy()
        X2[va + inner], L2[va + inner] = Xn[inner], Ln[inner]
        Y2[va + free_y] = Yn[free_y]
        return rss, (X2, Y2, L2)

    def best_length(self, X, Y, L, i, grid: np.ndarray | None = None):
        """Least-squares length of curve ``i`` (grid search, then a finer grid around the best),
        neighbouring curves fixed, elevations re-solved locally. Returns ``(L_i, Y, rss)``."""
        room_l = X[i] - X[i - 1] - L[i - 1] / 2
        room_r = X[i + 1] - X[i] - L[i + 1] / 2
        lmax = 2 * max(min(room_l, room_r), 0.0)
        if lmax <= 0:
            return 0.0, None, np.inf
        if grid is None:
            grid = np.concatenate([[0.0], np.geomspace(max(lmax / 400, 0.5), lmax, 24)])
        grid = np.unique(np.clip(grid, 0.0, lmax))
        rss, Ys = self._local(X, Y, L, i - 2, i + 2, vary=i, lgrid=grid)
        j = int(np.argmin(rss))
        lo_g = grid[max(j - 1, 0)]
        hi_g = grid[min(j + 1, len(grid) - 1)]
        if hi_g > lo_g:
            fine = np.linspace(lo_g, hi_g, 11)
            rss2, Ys2 = self._local(X, Y, L, i - 2, i + 2, vary=i, lgrid=fine)
            j2 = int(np.argmin(rss2))
            if rss2[j2] < rss[j]:
                return float(fine[j2]), Ys2[j2], float(rss2[j2])
        return float(grid[j]), Ys[j], float(rss[j])

    def best_place(self, X, Y, L, i, span: float):
        """Least-squares chainage and length of PVI ``i`` together, on a grid around the
        present chainage (+-20 % of the curve's half length) and ``span``, then a finer grid
        around the best pair; neighbours fixed, elevations re-solved. Returns ``(X, L, Y, rss)``
        or ``None`` where the PVI has no room."""
        x0 = X[i]
        best = None
        half = max(span / 2, 1.0)
        dx = np.array([-0.2, -0.1, 0.0, 0.1, 0.2]) * half
        fl = np.array([0.5, 0.7, 0.85, 1.0, 1.15, 1.3])
        for _ in range(2):
            xg, lg = np.meshgrid(x0 + dx, span * fl, indexing="ij")
            xg, lg = xg.ravel(), lg.ravel()
            room = 2 * np.minimum(xg - X[i - 1] - L[i - 1] / 2, X[i + 1] - xg - L[i + 1] / 2)
            ok = room > 0
            if not ok.any():
                return best
            xg, lg = xg[ok], np.minimum(lg[ok], room[ok])
            rss, Ys = self._local(X, Y, L, i - 2, i + 2, vary=i, lgrid=lg, xgrid=xg)
            j = int(np.argmin(rss))
            if best is None or rss[j] < best[3]:
                best = (float(xg[j]), float(lg[j]), Ys[j], float(rss[j]))
            x0, span = best[0], best[1]
            dx = np.array([-0.05, -0.025, 0.0, 0.025, 0.05]) * half
            fl = np.array([0.9, 0.95, 1.0, 1.05, 1.1])
        return best

    def removal(self, X, Y, L, i):
        """Change of RSS, and the new model, when PVI ``i`` is removed (its neighbours keep
        their curves; elevations around re-solved)."""
        base, _ = self._local(X, Y, L, i - 2, i + 2)
        X2, Y2, L2 = np.delete(X, i), np.delete(Y, i), np.delete(L, i)
        rss, Y2 = self._local(X2, Y2, L2, i - 2, i + 1)  # the same stations as the base window
        return rss - base, (X2, Y2, L2)

    def merge(self, X, Y, L, i, j=None, place: bool = False):
        """Change of RSS, and the new model, when PVIs ``i`` to ``j`` (default ``i + 1``) become
        one curve at the intersection of the tangent into ``i`` and the tangent out of ``j``
        (with ``place``, at the best chainage near it)."""
        j = i + 1 if j is None else j
        if i < 1 or j > len(X) - 2 or j <= i:
            return np.inf, None
        G = np.diff(Y) / np.diff(X)
        g_in, g_out = G[i - 1], G[j]
        if abs(g_in - g_out) < 1e-9:
            return np.inf, None
        xn = (Y[j + 1] - Y[i - 1] + g_in * X[i - 1] - g_out * X[j + 1]) / (g_in - g_out)
        if not (X[i - 1] < xn < X[j + 1]):
            return np.inf, None
        yn = Y[i - 1] + g_in * (xn - X[i - 1])
        base, _ = self._local(X, Y, L, i - 2, j + 2)
        X2 = np.concatenate([X[:i], [xn], X[j + 1:]])
        Y2 = np.concatenate([Y[:i], [yn], Y[j + 1:]])
        L2 = np.concatenate([L[:i], [0.0], L[j + 1:]])
        span = 2 * max(xn - (X[i] - L[i] / 2), (X[j] + L[j] / 2) - xn)
        if place:
            best = self.best_place(X2, Y2, L2, i, span)
            if best is None:
                return np.inf, None
            X2[i], L2[i] = best[0], best[1]
            d, model = best[3] - base, (X2, best[2], L2)
            if self.price <= d < 10 * self.price:
                # borderline on the grid: let the merged PVI and its neighbours settle exactly
                rss, fitted = self.local_nls(X2, best[2], L2, i - 2, i + 2)
                if fitted is not None and rss - base < d:
                    d, model = rss - base, fitted
            return d, model
        Lbest, Ybest, rss = self.best_length(X2, Y2, L2, i, span * np.array([0.5, 0.7, 0.85, 1.0, 1.15, 1.3]))
        if Ybest is None:
            return np.inf, None
        L2[i] = Lbest
        return rss - base, (X2, Ybest, L2)

    def removal_is_hopeless(self, X, Y, L, i) -> bool:
        """True when removing PVI ``i`` certainly costs more than the price: a bend of grade
        change dG between arms of length l leaves at least n dG^2 l^2 / 48 of squared residual
        (variance of |u| on [-l, l] times (dG/2)^2), taken with a wide margin; the arms are
        counted from the ends of the PVI's curve."""
        G = np.diff(Y) / np.diff(X)
        arm = min(X[i] - X[i - 1], X[i + 1] - X[i]) - L[i] / 2
        if arm <= 0:
            return False
        lo, hi = np.searchsorted(self.xs, [X[i] - arm, X[i] + arm])
        est = (hi - lo) * (G[i] - G[i - 1]) ** 2 * arm**2 / 48.0
        return est > 30.0 * self.price

    def merge_is_hopeless(self, X, L, i) -> bool:
        """True when PVIs ``i`` and ``i + 1`` are separated by a tangent much longer than their
        curves: one curve cannot stand for a long straight between two bends."""
        tangent = (X[i + 1] - L[i + 1] / 2) - (X[i] + L[i] / 2)
        return tangent > 3.0 * max(L[i], L[i + 1]) + 4.0 * self.opts["bin_m"]

    def coalesce(self, X, Y, L):
        """Replace each run of two or more PVIs bending the same way by one curve where that
        passes the information criterion (a long curve first segmented as several chords). A run
        that cannot be one curve is split at its longest chord (most likely the tangent between
        two curves) and each part tried in turn."""
        dG = np.diff(np.diff(Y) / np.diff(X))
        sgn = np.sign(dG)
        runs = []
        i = 1
        while i < len(X) - 1:
            j = i
            while j + 1 <= len(X) - 2 and sgn[j] == sgn[i - 1]:
                j += 1
            if j > i:
                runs.append((i, j))
            i = j + 1
        # right to left, so that merging a run leaves the indices of the runs before it valid
        for i, j in reversed(runs):
            X, Y, L = self._coalesce_run(X, Y, L, i, j)
        return X, Y, L

    def _coalesce_run(self, X, Y, L, i, j, depth: int = 0):
        if j <= i:
            return X, Y, L
        d, model = self.merge(X, Y, L, i, j)
        if model is not None and d < self.price:
            return model
        if depth >= 6 or j - i < 2:
            return X, Y, L
        k = i + int(np.argmax(np.diff(X[i:j + 1])))  # longest chord lies between k and k + 1
        X, Y, L = self._coalesce_run(X, Y, L, k + 1, j, depth + 1)
        return self._coalesce_run(X, Y, L, i, k, depth + 1)

    def select(self, X, Y, L, place: bool = False):
        """Greedy removal and merging of PVIs while the information criterion improves.

        A merge's new PVI sits where the tangents either side meet, with its length fitted;
        with ``place`` (used once the current model has been refined, so that the comparison
        is fair) its chainage is fitted too. Cost changes are cached and recomputed only near
        the last change.
        """
        rem: list = [None] * len(X)
        mer: list = [None] * len(X)
        for _ in range(4 * len(X) + 10):
            nv = len(X)
            if nv <= 2:
                break
            dG = np.diff(np.diff(Y) / np.diff(X))
            # too small a grade change, or too little data beyond it to define the next grade
            weak = (np.abs(dG) < self.min_dg) | (X[1:-1] - X[0] < self.min_arm) | (X[-1] - X[1:-1] < self.min_arm)
            small = np.flatnonzero(weak) + 1
            if len(small):
                i = int(small[np.argmin(np.abs(dG[small - 1]))])
                _, (X, Y, L) = self.removal(X, Y, L, i)
                rem, mer = self._forget(rem, i, 1), self._forget(mer, i, 1)
                continue
            for i in range(1, nv - 1):
                if rem[i] is None:
                    rem[i] = np.inf if self.removal_is_hopeless(X, Y, L, i) else self.removal(X, Y, L, i)[0]
                if mer[i] is None:
                    same = i + 1 <= nv - 2 and np.sign(dG[i - 1]) == np.sign(dG[i])
                    hopeless = not same or self.merge_is_hopeless(X, L, i)
                    mer[i] = np.inf if hopeless else self.merge(X, Y, L, i, place=place)[0]
            r, m = np.array(rem[1:nv - 1]), np.array(mer[1:nv - 1])
            if min(r.min(), m.min()) >= self.price:
                break
            if r.min() <= m.min():
                i = int(np.argmin(r)) + 1
                _, (X, Y, L) = self.removal(X, Y, L, i)
            else:
                i = int(np.argmin(m)) + 1
                _, (X, Y, L) = self.merge(X, Y, L, i, place=place)
            rem, mer = self._forget(rem, i, 1), self._forget(mer, i, 1)
        return X, Y, L

    @staticmethod
    def _forget(cache: list, i: int, removed: int) -> list:
        """Drop ``removed`` entries at ``i`` and invalidate the neighbourhood of the change."""
        cache = cache[:i] + cache[i + removed:]
        for j in range(max(i - 4, 0), min(i + 5, len(cache))):
            cache[j] = None
        return cache

    def lengths(self, X, Y, L):
        """Each curve's length by least squares, neighbours fixed, largest grade change first."""
        G = np.diff(Y) / np.diff(X)
        order = np.argsort(-np.abs(np.diff(G))) + 1
        L = L.copy()
        for i in order:
            Lbest, Ybest, _ = self.best_length(X, Y, L, i)
            if Ybest is not None:
                L[i] = Lbest
                Y = Ybest
        return X, Y, L

    def refine(self, X, Y, L, block: int = 10):
        """Joint nonlinear least squares of the chainages, elevations and lengths of all PVIs.

        Up to ``block`` PVIs are refined together in one problem; longer roads are refined in
        overlapping blocks of that many PVIs, swept along the road (block coordinate descent),
        which keeps the cost proportional to the road's length.
        """
        nv = len(X)
        if nv <= 2:
            Y, _ = _solve_y(X, L, self.xs, self.zs)
            return X, Y, L
        if nv - 2 <= block:
            inner = np.arange(1, nv - 1)
            X, Y, L, _ = nls_fit(X, Y, L, self.xs, self.zs, inner, np.arange(nv), inner)
            return self.close_overlaps(X, Y, L)
        start = 0
        while start < nv - 2:
            end = min(start + block + 1, nv - 1)
            _, model = self.local_nls(X, Y, L, start, end, max_nfev=25, ftol=1e-7)
            if model is not None:
                X, Y, L = model
            if end >= nv - 1:
                break
            start = end - 3  # blocks overlap by two PVIs
        return self.close_overlaps(X, Y, L)

    def close_overlaps(self, X, Y, L):
        L = L.copy()
        for _ in range(3):
            over = L[:-1] / 2 + L[1:] / 2 - np.diff(X)
            bad = np.flatnonzero(over > 1e-9)
            if not len(bad):
                break
            for i in bad:
                tot = L[i] + L[i + 1]
                if tot <= 0:
                    continue
                room = 2 * (X[i + 1] - X[i])
                L[i] *= room / tot * (1 - 1e-12)
                L[i + 1] *= room / tot * (1 - 1e-12)
            L[0] = L[-1] = 0.0
        Y, _ = _solve_y(X, L, self.xs, self.zs)
        return X, Y, L


def levenberg_marquardt(fun, jac, p0, lb, ub, max_nfev: int = 40, ftol: float = 1e-9, xtol: float = 1e-10):
    """Least squares by Levenberg-Marquardt (Marquardt 1963, *J. SIAM* 11(2) 431-441) with
    Marquardt's diagonal scaling and steps clipped to the bounds, for the small dense problems
    of the alignment. ``fun(p)`` gives residuals, ``jac(p)`` their (dense) Jacobian.
    Returns the parameters and the residuals there."""
    p = np.clip(np.asarray(p0, dtype=float), lb, ub)
    r = fun(p)
    cost = float(r @ r)
    lam = 1e-3
    nfev = 1
    while nfev < max_nfev:
        J = jac(p)
        A = J.T @ J
        g = J.T @ r
        d = np.maximum(np.diag(A), 1e-12)
        improved = False
        while nfev < max_nfev:
            try:
                step = np.linalg.solve(A + lam * np.diag(d), -g)
            except np.linalg.LinAlgError:
                lam *= 10.0
                continue
            p_new = np.clip(p + step, lb, ub)
            r_new = fun(p_new)
            nfev += 1
            cost_new = float(r_new @ r_new)
            if np.isfinite(cost_new) and cost_new <= cost:
                moved = np.max(np.abs(p_new - p) / (np.abs(p) + 1.0))
                done = cost - cost_new <= ftol * max(cost, 1e-300) or moved <= xtol
                p, r, cost = p_new, r_new, cost_new
                lam = max(lam / 3.0, 1e-12)
                improved = True
                break
            lam *= 4.0
            if lam > 1e12:
                break
        if not improved or done:
            break
    return p, r


def nls_fit(X, Y, L, xs, zs, free_x, free_y, free_l, max_nfev: int = 40, ftol: float = 1e-9):
    """Nonlinear least squares of the alignment to ``(xs, zs)`` over the chainages ``X[free_x]``,
    elevations ``Y[free_y]`` and lengths ``L[free_l]`` (the others held), with
    ``scipy.optimize.least_squares`` (trust region reflective) and the analytic Jacobian.

    Each free chainage may move up to 40 % of the way to its neighbours (so the PVIs keep
    their order); curves are kept apart by a penalty on any overlap. Returns
    ``(X, Y, L, rss)``; overlaps left are not closed here.
    """
    X, Y, L = X.astype(float), Y.astype(float), L.astype(float)
    free_x, free_y, free_l = (np.asarray(v, dtype=int) for v in (free_x, free_y, free_l))
    nx, ny = len(free_x), len(free_y)
    D = np.diff(X)
    rho = 10.0 * np.sqrt(max(len(xs), 1))
    lo_x = X[free_x] - 0.4 * D[free_x - 1]
    hi_x = X[free_x] + 0.4 * D[free_x]
    lmax = 2 * np.maximum(D[free_l - 1], D[free_l])
    p0 = np.concatenate([X[free_x], Y[free_y], L[free_l]])
    lb = np.concatenate([lo_x, np.full(ny, -np.inf), np.full(len(free_l), 1e-3)])
    ub = np.concatenate([hi_x, np.full(ny, np.inf), lmax])
    width = ub - lb
    margin = np.where(np.isfinite(width), 1e-9 * width, 0.0)
    p0 = np.clip(p0, lb + margin, ub - margin)

    def unpack(p):
        Xp, Yp, Lp = X.copy(), Y.copy(), L.copy()
        Xp[free_x], Yp[free_y], Lp[free_l] = p[:nx], p[nx:nx + ny], p[nx + ny:]
        return Xp, Yp, Lp

    def fun(p):
        Xp, Yp, Lp = unpack(p)
        r = model_z(Xp, Yp, Lp, xs) - zs
        over = np.maximum(Lp[:-1] / 2 + Lp[1:] / 2 - np.diff(Xp), 0.0)
        return np.concatenate([r, rho * over])

    dense = len(p0) <= 120

    def jac(p):
        Xp, Yp, Lp = unpack(p)
        return _jacobian(Xp, Yp, Lp, xs, free_x, free_y, free_l, rho, dense=dense)

    if dense:
        x_opt, resid = levenberg_marquardt(fun, jac, p0, lb, ub, max_nfev=max_nfev, ftol=ftol)
    else:
        res = least_squares(fun, p0, jac=jac, bounds=(lb, ub), method="trf", x_scale="jac",
                            ftol=ftol, xtol=1e-10, gtol=1e-10, max_nfev=max_nfev, tr_solver="lsmr")
        x_opt, resid = res.x, res.fun
    Xp, Yp, Lp = unpack(x_opt)
    r = resid[: len(xs)]
    return Xp, Yp, Lp, float(r @ r)


def bin_means(xs: np.ndarray, zs: np.ndarray, width_m: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Means of chainage and elevation over consecutive bins of ``width_m`` (m), and the
    number of stations in each (empty bins dropped)."""
    idx = np.floor((xs - xs[0]) / width_m).astype(np.int64)
    last = idx == idx[-1]
    if idx[-1] > 0 and (xs[-1] - xs[last][0]) < width_m / 2:
        idx[last] -= 1  # a short last bin joins its neighbour (a few stations are not a mean)
    cnt = np.bincount(idx)
    keep = cnt > 0
    xb = np.bincount(idx, xs)[keep] / cnt[keep]
    zb = np.bincount(idx, zs)[keep] / cnt[keep]
    return xb, zb, cnt[keep]


def fit_stretch(xs: np.ndarray, zs: np.ndarray, step_m: float, opts: dict | None = None,
                sigma: float | None = None) -> Alignment:
    """Fit the vertical alignment of one stretch of valid profile ``(xs, zs)`` (m).

    The structure (how many PVIs, roughly where) is found on means over bins of
    ``bin_m`` metres, whose noise is sigma / sqrt(stations per bin); the joint
    refinement then uses every station.
    """
    opts = DEFAULTS | (opts or {})
    xs = np.asarray(xs, dtype=float)
    zs = np.asarray(zs, dtype=float)
    n = len(xs)
    if n < 2:
        raise ValueError("a stretch needs at least two stations")
    if sigma is None:
        sigma = noise_sigma(zs)
    sigma = max(sigma, opts["noise_floor_m"])
    width = max(opts["bin_m"], step_m)
    per_bin = max(int(round(width / step_m)), 1)
    if per_bin > 1:
        xb, zb, _ = bin_means(xs, zs, width)
        sigma_b = sigma / np.sqrt(per_bin)
    else:
        xb, zb, sigma_b = xs, zs, sigma
    coarse = _Fitter(xb, zb, sigma_b, opts)
    fine = _Fitter(xs, zs, sigma, opts)
    min_len = max(3, int(np.ceil(opts["min_tangent_m"] / width)))
    beta = 2.0 * sigma_b**2 * np.log(max(len(xb), 3))
    bps = segment_lines(xb, zb, beta, min_len)
    X = _initial_vertices(xb, zb, bps)
    X[0], X[-1] = xs[0], xs[-1]  # the alignment spans every station, not just the bin means
    L = np.zeros(len(X))
    Y, _ = _solve_y(X, L, xb, zb)
    X, Y, L = coarse.coalesce(X, Y, L)
    X, Y, L = coarse.lengths(X, Y, L)
    X, Y, L = coarse.select(X, Y, L)
    for it in range(3):
        X, Y, L = fine.refine(X, Y, L)
        if it == 0:
            coarse.calibrate(X, Y, L, opts["noise_floor_m"])
        nx = len(X)
        X, Y, L = coarse.select(X, Y, L, place=True)
        if len(X) == nx:
            break
        X, Y, L = coarse.lengths(X, Y, L)
    return Alignment(x=X, y=Y, L=L, sigma=sigma, n=n)


# ------------------------------------------------------------- a whole road
class RoadProfile:
    """The fitted alignment of a whole road (one or more stretches): elevation and grade at
    any chainage, NaN outside the fitted stretches."""

    def __init__(self, stretches: list[Alignment]):
        self.stretches = stretches
        self.starts = np.array([a.x[0] for a in stretches])
        self.ends = np.array([a.x[-1] for a in stretches])
        self._grid = None

    def z_grid(self, x, step_m: float = 1.0):
        """Elevation by linear interpolation in a table of the alignment every ``step_m``
        (computed once): for the many look-ups of the hazard stage, where a few millimetres
        do not matter."""
        if self._grid is None:
            g = np.arange(self.starts.min(), self.ends.max() + step_m, step_m)
            self._grid = (g, self.z(g))
        g, zg = self._grid
        return np.interp(x, g, zg, left=np.nan, right=np.nan)

    def _each(self, x, fn):
        x = np.asarray(x, dtype=float)
        out = np.full(x.shape, np.nan)
        flat, res = x.ravel(), out.ravel()
        for a, lo, hi in zip(self.stretches, self.starts, self.ends):
            on = (flat >= lo) & (flat <= hi)
            if on.any():
                res[on] = fn(a, flat[on])
        return res.reshape(x.shape)

    def z(self, x):
        return self._each(x, lambda a, v: a.z(v))

    def grade(self, x):
        return self._each(x, lambda a, v: a.grade(v))



def fit_profile(chainage_m: np.ndarray, z_m: np.ndarray, step_m: float, opts: dict | None = None,
                filter_m: np.ndarray | None = None):
    """Fit a road's profile (NaN = no data). Returns ``(alignments, curves, fitted_z, grade)``.

    The profile is split where data are missing over more than ``split_gap_m``;
    each stretch gets its own alignment. ``curves`` is a DataFrame, one row per
    curve; ``fitted_z`` and ``grade`` (fraction) are per station (NaN outside
    fitted stretches). ``filter_m`` (per station, m) is the equivalent length of a running
    mean the profile went through (:func:`pipeline.corridor.cell_crossing_filter`); each
    fitted curve's length is corrected for it (:func:`pipeline.corridor.deconvolved_length`).
    """
    opts = DEFAULTS | (opts or {})
    ch = np.asarray(chainage_m, dtype=float)
    z = np.asarray(z_m, dtype=float)
    valid = np.isfinite(z)
    fitted = np.full(len(ch), np.nan)
    grade = np.full(len(ch), np.nan)
    stretches: list[Alignment] = []
    idx = np.flatnonzero(valid)
    if len(idx) == 0:
        return stretches, _curve_table([], ch, z, fitted, opts), fitted, grade
    sigma = noise_sigma(np.where(valid, z, np.nan))
    breaks = np.flatnonzero(np.diff(ch[idx]) > opts["split_gap_m"])
    pieces = np.split(idx, breaks + 1)
    min_len = max(3, int(np.ceil(opts["min_tangent_m"] / step_m)))
    for piece in pieces:
        if len(piece) < 2:
            continue
        if len(piece) < max(min_len, 3):
            # too short for a PVI with tangents either side: one least-squares grade
            xs, zs = ch[piece], z[piece]
            b, a = np.polyfit(xs - xs[0], zs, 1) if np.ptp(xs) > 0 else (0.0, float(zs.mean()))
            al = Alignment(x=np.array([xs[0], xs[-1]]), y=np.array([a, a + b * (xs[-1] - xs[0])]),
                           L=np.zeros(2), sigma=sigma, n=len(piece))
        else:
            al = fit_stretch(ch[piece], z[piece], step_m, opts, sigma=sigma)
            if filter_m is not None and len(al.x) > 2:
                box = np.interp(al.x[1:-1], ch, filter_m)
                al.L[1:-1] = deconvolved_length(al.L[1:-1], box)
        stretches.append(al)
        span = (ch >= al.x[0]) & (ch <= al.x[-1])
        fitted[span] = al.z(ch[span])
        grade[span] = al.grade(ch[span])
    curves = _curve_table(stretches, ch, z, fitted, opts)
    return stretches, curves, fitted, grade


CURVE_COLUMNS = ["curve_no", "kind", "pvc_m", "pvi_m", "pvt_m", "pvi_elev_m", "g1_pct", "g2_pct", "a_pct",
                 "length_m", "k", "fit_rmse_m", "turn_m", "turn_elev_m", "confidence", "flags", "judged"]


def empty_curves() -> pd.DataFrame:
    """A curve table with no rows but the right column types."""
    text = {"kind", "confidence", "flags"}
    types = {"curve_no": "int64", "judged": bool}
    return pd.DataFrame({c: pd.Series(dtype=types.get(c, str if c in text else float)) for c in CURVE_COLUMNS})


def _curve_table(stretches, ch, z, fitted, opts) -> pd.DataFrame:
    rows = []
    step = float(np.median(np.diff(ch))) if len(ch) > 1 else 1.0
    valid = np.isfinite(z)
    for al in stretches:
        G = al.grades
        kinds = []
        for i in range(1, len(al.x) - 1):
            kinds.append("crest" if G[i] < G[i - 1] else "sag")
        for j, i in enumerate(range(1, len(al.x) - 1)):
            g1, g2, L = G[i - 1], G[i], float(al.L[i])
            a_pct = abs(g2 - g1) * 100
            pvc, pvt = al.x[i] - L / 2, al.x[i] + L / 2
            flags = []
            zone = (ch >= min(pvc, al.x[i] - step)) & (ch <= max(pvt, al.x[i] + step))
            resid = (z - fitted)[zone & valid]
            rmse = float(np.sqrt(np.mean(resid**2))) if len(resid) else np.nan
            n_on = int(((ch >= pvc) & (ch <= pvt) & valid).sum())
            res_m = float(opts.get("resolution_m", 0.0))
            if L < max(res_m, step):
                flags.append(f"angle point or very short curve: L under the {max(res_m, step):.0f} m "
                             f"the data resolve")
            elif n_on < 4:
                flags.append("few samples on the curve")
            judged = True
            if (zone & ~valid).any():
                flags.append("curve cut by a data gap")
                if (zone & ~valid).sum() > 0.5 * zone.sum():
                    judged = False
                    flags.append("curve zone mostly without usable ground data: no verdict")
            if pvc < al.x[0] + step or pvt > al.x[-1] - step:
                flags.append("curve at the end of the data")
            if np.isfinite(rmse) and rmse > max(3 * al.sigma, 0.05):
                flags.append("poor fit")
            # same-kind neighbour across a short tangent: broken-back or compound curve
            for nb in (j - 1, j + 1):
                if 0 <= nb < len(kinds) and kinds[nb] == kinds[j]:
                    ii = nb + 1
                    gap = (al.x[max(i, ii)] - al.L[max(i, ii)] / 2) - (al.x[min(i, ii)] + al.L[min(i, ii)] / 2)
                    if gap < opts["short_tangent_m"]:
                        flags.append("irregular: two " + kinds[j] + "s on a short tangent (broken-back or compound)")
                        break
            if len(resid) >= 12 and rmse > 1.5 * al.sigma:
                s = np.sign(resid)
                s = s[s != 0]
                runs = 1 + int((s[1:] != s[:-1]).sum()) if len(s) else 0
                n1, n2 = (s > 0).sum(), (s < 0).sum()
                if n1 and n2:
                    mu = 2 * n1 * n2 / (n1 + n2) + 1
                    var = 2 * n1 * n2 * (2 * n1 * n2 - n1 - n2) / ((n1 + n2) ** 2 * (n1 + n2 - 1))
                    if var > 0 and (runs - mu) / np.sqrt(var) < -3:
                        flags.append("irregular: residuals systematic (not one symmetric parabola)")
            turn_m = turn_z = np.nan
            if L > 0 and g2 != g1:
                u = -g1 * L / (g2 - g1)
                if 0 <= u <= L:
                    turn_m = pvc + u
                    turn_z = al.y[i] - g1 * L / 2 + g1 * u + (g2 - g1) / (2 * L) * u**2
            low = any(f.startswith(("curve cut", "curve at", "poor")) for f in flags)
            rows.append({
                "kind": "crest" if g2 < g1 else "sag",
                "pvc_m": pvc, "pvi_m": float(al.x[i]), "pvt_m": pvt, "pvi_elev_m": float(al.y[i]),
                "g1_pct": g1 * 100, "g2_pct": g2 * 100, "a_pct": a_pct, "length_m": L,
                "k": L / a_pct if a_pct > 0 else np.nan, "fit_rmse_m": rmse,
                "turn_m": turn_m, "turn_elev_m": turn_z,
                "confidence": "low" if low else ("medium" if flags else "high"),
                "flags": "; ".join(dict.fromkeys(flags)),
                "judged": judged,
            })
    if not rows:
        return empty_curves()
    frame = pd.DataFrame(rows, columns=CURVE_COLUMNS[1:])
    frame.insert(0, "curve_no", np.arange(1, len(frame) + 1))
    return frame
