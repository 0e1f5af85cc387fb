"""How well the ground data determine each vertical curve and the sight distance over it.

For every curve the fitted alignment's parameters near it are perturbed to get the local
Jacobian of the model, and the covariance of the grade change A and length L follows from the
linearised least-squares result (e.g. Seber & Wild, *Nonlinear Regression*, Wiley 1989,
sec. 2.1):

    Cov(theta) = s^2 (J^T J)^-1,      theta = (Y_{i-1}, X_i, Y_i, Y_{i+1}, L_i)

with ``s^2`` the residual variance around the curve, robustly estimated (1.4826 MAD; Hampel
1974, *JASA* 69(346) 383-393) and inflated for errors correlated from one station to the next
by the AR(1) factor ``(1 + rho) / (1 - rho)``, rho the lag-1 autocorrelation of the residuals
(the effective sample size of a mean under AR(1) errors; Box, Jenkins & Reinsel, *Time Series
Analysis*, 4th ed., Wiley 2008, ch. 3). DEM errors and what is left of cell-crossing ripple are
correlated over tens of metres, so this factor matters: with rho = 0.8 the variance is nine
times the white-noise value.

Two terms are added to the variance of L for what the data cannot resolve: a feature shorter
than the data's resolution length lambda (two cells, or two point spacings, or the profile
filter; :func:`pipeline.corridor.resolution_length_m`) is only known to within lambda, whose
uniform-error variance is lambda^2 / 12 (common practice, no source).

The sight distance's standard deviation follows from Cov(A, L) in
:func:`pipeline.sight.spread.sight_sd`.
"""

from __future__ import annotations

import numpy as np

from .model import Alignment, model_z


def residual_noise(r: np.ndarray) -> tuple[float, float]:
    """Robust spread and lag-1 autocorrelation of residuals.

    Parameters
    ----------
    r : ndarray
        Residuals (m) at evenly spaced stations, NaN ignored.

    Returns
    -------
    (float, float)
        ``sigma`` = 1.4826 MAD (m; Hampel 1974) and ``rho``, the lag-1 autocorrelation
        clipped to [0, 0.95] (0 for fewer than 8 residuals).
    """
    r = np.asarray(r, dtype=float)
    ok = np.isfinite(r)
    if ok.sum() < 3:
        return 0.0, 0.0
    v = r[ok]
    sigma = float(1.4826 * np.median(np.abs(v - np.median(v))))
    if ok.sum() < 8:
        return sigma, 0.0
    rc = np.where(ok, r - v.mean(), 0.0)
    pair = ok[1:] & ok[:-1]
    den = float(rc[ok] @ rc[ok])
    rho = float(rc[1:][pair] @ rc[:-1][pair]) / den * (ok.sum() / max(pair.sum(), 1)) if den > 0 else 0.0
    return sigma, float(np.clip(rho, 0.0, 0.95))


def ar1_variance_factor(rho: float) -> float:
    """Variance inflation of a mean for AR(1) errors.

    Parameters
    ----------
    rho : float
        Lag-1 autocorrelation of the errors (dimensionless), below 1.

    Returns
    -------
    float
        The factor (dimensionless).

    Notes
    -----
    factor = (1 + rho) / (1 - rho).

    References
    ----------
    Box, Jenkins & Reinsel, *Time Series Analysis*, 4th ed., Wiley 2008, ch. 3.
    """
    return (1.0 + rho) / (1.0 - rho)


def _jacobian(al: Alignment, i: int, xs: np.ndarray) -> np.ndarray:
    """d z(xs) / d theta for theta = (Y_{i-1}, X_i, Y_i, Y_{i+1}, L_i), central differences
    (forward for L near 0, which cannot go negative)."""
    X, Y, L = al.x.astype(float), al.y.astype(float), al.L.astype(float)
    cols = []
    for kind, j, d in (("y", i - 1, 0.01), ("x", i, 0.25), ("y", i, 0.01), ("y", i + 1, 0.01), ("l", i, 0.5)):
        lo_h, hi_h = d, d
        if kind == "l" and L[j] < d:
            lo_h = 0.0
        zs = []
        for h in (hi_h, -lo_h):
            X2, Y2, L2 = X.copy(), Y.copy(), L.copy()
            {"x": X2, "y": Y2, "l": L2}[kind][j] += h
            zs.append(model_z(X2, Y2, L2, xs))
        cols.append((zs[0] - zs[1]) / (hi_h + lo_h))
    return np.column_stack(cols)


def _a_l_covariance(X: np.ndarray, Y: np.ndarray, i: int, cov: np.ndarray) -> np.ndarray:
    """Covariance of (A in %, L in m) from that of theta = (Y_{i-1}, X_i, Y_i, Y_{i+1}, L_i),
    by the delta method: D Cov(theta) D^T with D the derivatives of A = |G2 - G1| and L."""
    d1, d2 = X[i] - X[i - 1], X[i + 1] - X[i]
    g1, g2 = (Y[i] - Y[i - 1]) / d1, (Y[i + 1] - Y[i]) / d2
    dg1 = np.array([-1 / d1, -g1 / d1, 1 / d1, 0.0, 0.0])
    dg2 = np.array([0.0, g2 / d2, -1 / d2, 1 / d2, 0.0])
    sgn = 1.0 if g2 >= g1 else -1.0
    D = np.vstack([100.0 * sgn * (dg2 - dg1), [0.0, 0.0, 0.0, 0.0, 1.0]])
    return D @ cov @ D.T


def curve_parameter_covariance(al: Alignment, i: int, xs: np.ndarray, zs: np.ndarray,
                               sigma_floor_m: float, resolution_m: float, cell_m: float | None = None) -> dict:
    """Covariance of the grade change A (%) and length L (m) of the curve at PVI ``i``.

    Parameters
    ----------
    al : Alignment
        Fitted alignment of the stretch (``i`` an interior PVI).
    xs, zs : ndarray
        The stretch's stations (m) and ground elevations (m) used by the fit (NaN = unused).
    sigma_floor_m : float
        The ground data's vertical error, stated or assumed (m): each DEM cell's own error.
    cell_m : float, optional
        DEM cell size (m). A cell's error reaches every station within about a cell of it, and
        the cell-crossing filter spreads it over about one more, so in a profile at step h the
        stations carry independent error of variance ``sigma_floor^2 * 2 c / h`` each (the
        information of one sample per half cell crossed; checked against the realistic-ground
        benchmark, where the spread of the sight-distance errors matches the standard
        deviations given for 5 and 10 m DEMs).
    resolution_m : float
        Resolution length lambda of the ground data (m); adds lambda^2 / 12 to var(L).

    Returns
    -------
    dict
        ``a_sd_pct, length_sd_m, corr_al`` (correlation of A and L), ``noise_sd_m``,
        ``noise_rho``, ``stations``.
    """
    X, Y, L = al.x, al.y, al.L
    lo, hi = X[i - 1], X[i + 1]
    on = (xs >= lo) & (xs <= hi) & np.isfinite(zs)
    x = xs[on]
    r_full = np.where((xs >= lo) & (xs <= hi), zs - al.z(xs), np.nan)
    sigma, rho = residual_noise(r_full[(xs >= lo) & (xs <= hi)])
    step = float(np.median(np.diff(xs))) if len(xs) > 1 else 1.0
    spread = max(2.0 * cell_m / step, 1.0) if cell_m else 1.0
    s2 = max(sigma**2 * ar1_variance_factor(rho), sigma_floor_m**2 * spread)
    # the scatter reported is the residuals' own; the floor shows in the standard deviations
    out = {"a_sd_pct": np.inf, "length_sd_m": np.inf, "corr_al": 0.0, "noise_sd_m": sigma, "noise_rho": rho,
           "stations": int(on.sum())}
    if len(x) < 6:
        return out
    # only PVIs i-2 .. i+2 shape the window (curves never overlap), so the Jacobian is taken on
    # that piece of the alignment, with its end PVIs' curves dropped
    a, b = max(i - 2, 0), min(i + 3, len(X))
    piece = Alignment(x=X[a:b].copy(), y=Y[a:b].copy(), L=L[a:b].copy())
    piece.L[0] = piece.L[-1] = 0.0
    J = _jacobian(piece, i - a, x)
    C = _a_l_covariance(X, Y, i, s2 * np.linalg.pinv(J.T @ J))
    C[1, 1] += resolution_m**2 / 12.0
    a_sd, l_sd = float(np.sqrt(max(C[0, 0], 0.0))), float(np.sqrt(max(C[1, 1], 0.0)))
    out.update(a_sd_pct=a_sd, length_sd_m=l_sd,
               corr_al=float(C[0, 1] / (a_sd * l_sd)) if a_sd > 0 and l_sd > 0 else 0.0)
    return out


def k_sd(a_pct, length_m, a_sd_pct, length_sd_m, corr_al):
    """Standard deviation of K = L / A by the delta method.

    Parameters
    ----------
    a_pct, a_sd_pct : array_like
        Grade change A and its standard deviation (%).
    length_m, length_sd_m : array_like
        Curve length L and its standard deviation (m).
    corr_al : array_like
        Correlation of A and L (dimensionless).

    Returns
    -------
    ndarray
        sd(K) (m per %); NaN or inf where A = 0.

    Notes
    -----
    var(K) = (L / A^2)^2 var(A) + var(L) / A^2 - 2 (L / A^3) corr sd(A) sd(L).

    References
    ----------
    JCGM 100:2008, *Evaluation of measurement data - Guide to the expression of uncertainty in
    measurement*, 5.1.
    """
    a = np.asarray(a_pct, dtype=float)
    L = np.asarray(length_m, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        dk_da, dk_dl = -L / a**2, 1.0 / a
        var = (dk_da * a_sd_pct) ** 2 + (dk_dl * length_sd_m) ** 2 \
            + 2 * dk_da * dk_dl * corr_al * a_sd_pct * length_sd_m
    return np.sqrt(np.maximum(var, 0.0))
