"""The structure of a profile: its noise level, straight pieces and first PVIs.

1. **Noise level** sigma from second differences of the profile, robustly: a
   difference-based residual variance estimator (Gasser, Sroka & Jennen-Steinmetz 1986) with
   the median absolute deviation (Hampel 1974) so that curves do not inflate it. For white
   noise, var(z[i+1] - 2 z[i] + z[i-1]) = 6 sigma^2.
2. **Segmentation** into straight pieces by optimal partitioning (Jackson et al. 2005) with
   PELT pruning (Killick, Fearnhead & Eckley 2012); segment cost is the residual sum of
   squares of a least-squares line, from cumulative sums; the penalty per breakpoint is set
   by the caller (deliberately light, so that no real grade change is missed: a long curve
   comes out as several chords).
3. **Initial PVIs** where adjacent chords intersect.

Structure is found on means over bins (:func:`bin_means`), whose noise is smaller.

References
----------
Gasser, T., Sroka, L. & Jennen-Steinmetz, C. (1986). Residual variance and residual pattern
in nonlinear regression. *Biometrika* 73(3), 625-633.

Hampel, F. R. (1974). The influence curve and its role in robust estimation. *Journal of the
American Statistical Association* 69(346), 383-393.

Jackson, B. et al. (2005). An algorithm for optimal partitioning of data on an interval.
*IEEE Signal Processing Letters* 12(2), 105-108.

Killick, R., Fearnhead, P. & Eckley, I. A. (2012). Optimal detection of changepoints with a
linear computational cost. *Journal of the American Statistical Association* 107(500),
1590-1598.
"""

from __future__ import annotations

import numpy as np


def noise_sigma(z: np.ndarray) -> float:
    """Noise standard deviation of a uniformly spaced profile from its second differences.

    Parameters
    ----------
    z : ndarray
        Elevations (m) at evenly spaced stations; NaN differences are ignored.

    Returns
    -------
    float
        sigma (m); 0 with fewer than three usable second differences.

    Notes
    -----
    sigma = 1.4826 MAD(d2) / sqrt(6), d2 = z[i+1] - 2 z[i] + z[i-1].

    References
    ----------
    Gasser et al. (1986); Hampel (1974).
    """
    z = np.asarray(z, dtype=float)
    d2 = z[2:] - 2 * z[1:-1] + z[:-2]
    d2 = d2[np.isfinite(d2)]
    if len(d2) < 3:
        return 0.0
    mad = np.median(np.abs(d2 - np.median(d2)))
    return float(1.4826 * mad / np.sqrt(6.0))


def _cumulative_sums(x: np.ndarray, z: np.ndarray) -> tuple[np.ndarray, ...]:
    """Cumulative sums of x, x^2, z, z^2 and x z (centred and scaled), with a leading 0."""
    xc = (x - x.mean()) / max(np.ptp(x), 1.0)
    zc = z - z.mean()
    return tuple(np.concatenate([[0.0], np.cumsum(v)]) for v in (xc, xc * xc, zc, zc * zc, xc * zc))


def _line_rss(sums, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Residual sum of squares of the least-squares line over stations ``a`` to ``b - 1``."""
    S1, S2, T1, T2, U = sums
    m = b - a
    s1, s2 = S1[b] - S1[a], S2[b] - S2[a]
    t1, t2, u = T1[b] - T1[a], T2[b] - T2[a], U[b] - U[a]
    with np.errstate(invalid="ignore", divide="ignore"):
        sxx = s2 - s1 * s1 / m
        sxz = u - s1 * t1 / m
        return np.maximum(t2 - t1 * t1 / m - np.where(sxx > 0, sxz * sxz / sxx, 0.0), 0.0)


def _backtrack(prev: np.ndarray, n: int) -> np.ndarray:
    """Breakpoints of the optimal partition from the table of each end's best start."""
    bps = []
    t = n
    while t > 0:
        t = int(prev[t])
        if t > 0:
            bps.append(t)
    return np.array(sorted(bps), dtype=int)


def segment_lines(x: np.ndarray, z: np.ndarray, beta: float, min_len: int) -> np.ndarray:
    """Optimal partition of a profile into least-squares lines.

    Parameters
    ----------
    x, z : ndarray
        Chainages and elevations (m), ascending chainage.
    beta : float
        Penalty per segment (m^2), e.g. 2 sigma^2 ln n.
    min_len : int
        Fewest stations in a segment.

    Returns
    -------
    ndarray of int
        Start indices of the segments after the first (breakpoints).

    Notes
    -----
    F(t) = min over tau of F(tau) + C(tau, t) + beta, F(0) = -beta, with C the residual sum
    of squares of a line over stations tau..t-1 (Jackson et al. 2005). A candidate tau with
    F(tau) + C(tau, t) > F(t) is pruned (PELT; Killick et al. 2012). F(t) depends only on
    F(tau) with tau <= t - min_len, so ``min_len`` consecutive values are computed together.

    References
    ----------
    Jackson et al. (2005); Killick, Fearnhead & Eckley (2012).
    """
    n = len(x)
    if n < 2 * min_len:
        return np.array([], dtype=int)
    sums = _cumulative_sums(x, z)
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
        base = F[R][:, None] + _line_rss(sums, np.broadcast_to(R[:, None], m.shape),
                                         np.broadcast_to(ts[None, :], m.shape))
        base[m < min_len] = np.inf
        j = np.argmin(base, axis=0)
        F[ts] = base[j, np.arange(len(ts))] + beta
        prev[ts] = R[j]
        # PELT pruning: once F[tau] + C(tau, t) > F[t] for some t, tau is never optimal later
        R = R[~np.any((base > F[ts][None, :]) & (m >= min_len), axis=1)]
        T = ts[-1] + 1
    return _backtrack(prev, n)


def _line_fit(x: np.ndarray, z: np.ndarray) -> np.ndarray:
    """Intercept and slope of the least-squares line through ``(x, z)``."""
    A = np.column_stack([np.ones_like(x), x])
    coef, *_ = np.linalg.lstsq(A, z, rcond=None)
    return coef


def initial_vertices(x: np.ndarray, z: np.ndarray, bps: np.ndarray) -> np.ndarray:
    """PVI chainages where neighbouring chords of a segmentation meet.

    Parameters
    ----------
    x, z : ndarray
        Chainages and elevations (m), ascending chainage.
    bps : ndarray of int
        Breakpoints from :func:`segment_lines`.

    Returns
    -------
    ndarray
        PVI chainages (m), strictly ascending, the first and last at the data's ends. Where the
        chords' intersection falls outside the middle halves of the two pieces, the PVI is put
        between the pieces' common end stations.

    Notes
    -----
    Chords z = c0 + m0 x and z = c1 + m1 x meet at x = (c1 - c0) / (m0 - m1).
    """
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


def bin_means(xs: np.ndarray, zs: np.ndarray, width_m: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Means of chainage and elevation over consecutive bins.

    Parameters
    ----------
    xs, zs : ndarray
        Chainages and elevations (m), ascending chainage.
    width_m : float
        Bin length (m). A last bin shorter than half of it joins its neighbour.

    Returns
    -------
    xb, zb : ndarray
        Mean chainage and elevation (m) of each non-empty bin.
    count : ndarray of int
        Number of stations in each.

    Notes
    -----
    A mean over m stations has noise sigma / sqrt(m) for independent errors.
    """
    idx = np.floor((xs - xs[0]) / width_m).astype(np.int64)
    last = idx == idx[-1]
    if idx[-1] > 0 and (xs[-1] - xs[last][0]) < width_m / 2:
        idx[last] -= 1  # a short last bin joins its neighbour (a few stations are not a mean)
    cnt = np.bincount(idx)
    keep = cnt > 0
    xb = np.bincount(idx, xs)[keep] / cnt[keep]
    zb = np.bincount(idx, zs)[keep] / cnt[keep]
    return xb, zb, cnt[keep]
