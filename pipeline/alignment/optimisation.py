"""Least squares of the alignment to a profile: linear in the elevations, nonlinear in all.

* **Elevations** for fixed PVI chainages and curve lengths: linear least squares on the
  design matrix (:func:`pipeline.alignment.model.design_matrix`), whose normal equations are
  banded and solved by a sparse factorisation.
* **Joint refinement** of PVI chainages, elevations and curve lengths: nonlinear least
  squares with the analytic Jacobian (:func:`_jacobian`, a sparse matrix: each PVI's
  parameters touch only the stations near it), by Levenberg-Marquardt (Marquardt 1963) for
  small problems and ``scipy.optimize.least_squares`` (trust region
  reflective; Branch, Coleman & Li 1999) for larger ones. The curves are kept within the road
  and apart by bounds and a penalty; overlaps left are closed by shortening both curves
  (:func:`close_overlaps`).

References
----------
Marquardt, D. W. (1963). An algorithm for least-squares estimation of nonlinear parameters.
*Journal of the Society for Industrial and Applied Mathematics* 11(2), 431-441.

Branch, M. A., Coleman, T. F. & Li, Y. (1999). A subspace, interior, and conjugate gradient
method for large-scale bound-constrained minimization problems. *SIAM Journal on Scientific
Computing* 21(1), 1-23.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.optimize import least_squares
from scipy.sparse.linalg import spsolve

from .model import _under_curves, design_matrix, model_z

LM_MAX_PARAMS = 120  # larger problems go to scipy.optimize.least_squares (nls_fit)


def solve_elevations(X: np.ndarray, L: np.ndarray, xs: np.ndarray, zs: np.ndarray) -> tuple[np.ndarray, float]:
    """Least-squares PVI elevations for fixed chainages and lengths, over a whole stretch.

    Parameters
    ----------
    X : ndarray
        PVI chainages (m).
    L : ndarray
        Curve lengths (m).
    xs, zs : ndarray
        Station chainages and elevations (m).

    Returns
    -------
    Y : ndarray
        PVI elevations (m).
    rss : float
        Residual sum of squares (m^2).

    Notes
    -----
    Y = (Phi^T Phi)^-1 Phi^T z. The normal equations are banded (each station touches at
    most four vertices), so a sparse factorisation keeps this linear in the road's length.
    """
    A = design_matrix(X, L, xs, sparse=True)
    N = (A.T @ A).tocsc()
    Y = np.asarray(spsolve(N, A.T @ zs)) if len(X) > 2 else np.linalg.solve(N.toarray(), A.T @ zs)
    r = A @ Y - zs
    return Y, float(r @ r)


def close_overlaps(X: np.ndarray, Y: np.ndarray, L: np.ndarray, xs: np.ndarray, zs: np.ndarray):
    """Shorten overlapping neighbouring curves in proportion, then re-solve the elevations.

    Parameters
    ----------
    X, Y, L : ndarray
        PVI chainages, elevations and curve lengths (m).
    xs, zs : ndarray
        Station chainages and elevations (m).

    Returns
    -------
    (X, Y, L)
        The alignment with ``L_i / 2 + L_{i+1} / 2 <= X_{i+1} - X_i`` everywhere and
        elevations from :func:`solve_elevations`.
    """
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
    Y, _ = solve_elevations(X, L, xs, zs)
    return X, Y, L


# ------------------------------------------------------------- the Jacobian
def _column_maps(nv: int, free_x, free_y, free_l):
    """Column of the Jacobian of each vertex's chainage, elevation and length (-1 = held)."""
    xcol = np.full(nv, -1)
    xcol[free_x] = np.arange(len(free_x))
    ycol = np.full(nv, -1)
    ycol[free_y] = len(free_x) + np.arange(len(free_y))
    lcol = np.full(nv, -1)
    lcol[free_l] = len(free_x) + len(free_y) + np.arange(len(free_l))
    return xcol, ycol, lcol


def _tangent_entries(X, G, xs, xcol, ycol, out):
    """Derivatives of the broken grade line z = (1 - t) Y_k + t Y_{k+1}."""
    D = np.diff(X)
    k = np.clip(np.searchsorted(X, xs, side="right") - 1, 0, len(X) - 2)
    t = (xs - X[k]) / D[k]
    r = np.arange(len(xs))
    for kk, val, colmap in ((k, 1 - t, ycol), (k + 1, t, ycol), (k, -G[k] * (1 - t), xcol),
                            (k + 1, -G[k] * t, xcol)):
        m = colmap[kk] >= 0
        out[0].append(r[m])
        out[1].append(colmap[kk][m])
        out[2].append(val[m])


def _curve_entries(X, L, G, xs, cols, out):
    """Derivatives of every curve's correction dG_i w_i(x), w_i = max(0, L_i/2 - |x - X_i|)^2 / (2 L_i),
    for all curves at once (one entry per station under a curve and parameter of that curve)."""
    xcol, ycol, lcol = cols
    D = np.diff(X)
    c, rr = _under_curves(X, L, xs)  # the curve and station of each entry
    if not len(rr):
        return
    Lc, Dl, Dr, Gl, Gr = L[c], D[c - 1], D[c], G[c - 1], G[c]
    d = xs[rr] - X[c]
    q = np.maximum(Lc / 2 - np.abs(d), 0.0)
    w = q**2 / (2 * Lc)
    dgi = Gr - Gl
    parts = (
        (ycol[c - 1], w / Dl),
        (ycol[c], -w * (1 / Dl + 1 / Dr)),
        (ycol[c + 1], w / Dr),
        (lcol[c], dgi * q * (Lc - q) / (2 * Lc**2)),
        (xcol[c], w * (Gr / Dr + Gl / Dl) + dgi * q * np.sign(d) / Lc),
        (xcol[c - 1], -w * Gl / Dl),
        (xcol[c + 1], -w * Gr / Dr),
    )
    for col, v in parts:
        m = col >= 0
        out[0].append(rr[m])
        out[1].append(col[m])
        out[2].append(v[m])


def _overlap_entries(X, L, n, rho, xcol, lcol, out):
    """Derivatives of the overlap penalties rho max(0, L_i/2 + L_{i+1}/2 - (X_{i+1} - X_i))."""
    D = np.diff(X)
    for i in range(len(X) - 1):
        if L[i] / 2 + L[i + 1] / 2 - D[i] > 0:
            for c, v in ((lcol[i], rho / 2), (lcol[i + 1], rho / 2), (xcol[i], rho), (xcol[i + 1], -rho)):
                if c >= 0:
                    out[0].append(np.array([n + i]))
                    out[1].append(np.array([c]))
                    out[2].append(np.array([v]))


def _jacobian(X, Y, L, xs, free_x: np.ndarray, free_y: np.ndarray, free_l: np.ndarray, rho: float,
              dense: bool = False):
    """Jacobian of the residuals (model minus data, then overlap penalties).

    Parameters
    ----------
    X, Y, L : ndarray
        PVI chainages, elevations and curve lengths (m).
    xs : ndarray
        Station chainages (m), ascending.
    free_x, free_y, free_l : ndarray of int
        Vertices whose chainage, elevation and length are parameters, in that order.
    rho : float
        Weight of the overlap penalties (dimensionless).
    dense : bool
        Return a dense array instead of a CSR matrix.

    Returns
    -------
    ndarray or scipy.sparse.csr_matrix
        Shape (n + nv - 1, number of parameters): d residual / d parameter (dimensionless for
        chainages, elevations and lengths alike).

    Notes
    -----
    The derivatives of z(x) = (1 - t) Y_k + t Y_{k+1} + sum_i (G_i - G_{i-1}) w_i(x) (see
    :mod:`pipeline.alignment.model`) by hand; with q = max(0, L_i/2 - |x - X_i|),
    dz/dL_i = (G_i - G_{i-1}) q (L_i - q) / (2 L_i^2). Checked against finite differences in
    the tests.
    """
    nv, n = len(X), len(xs)
    G = np.diff(Y) / np.diff(X)
    cols = _column_maps(nv, free_x, free_y, free_l)
    out: tuple[list, list, list] = ([], [], [])
    _tangent_entries(X, G, xs, cols[0], cols[1], out)
    _curve_entries(X, L, G, xs, cols, out)
    _overlap_entries(X, L, n, rho, cols[0], cols[2], out)
    rows, cs, vals = out
    ncol = len(free_x) + len(free_y) + len(free_l)
    if dense:
        J = np.zeros((n + nv - 1, ncol))
        for rr, cc, vv in zip(rows, cs, vals):
            np.add.at(J, (rr, cc), vv)  # overlapping curves share entries
        return J
    return sp.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cs))),
                         shape=(n + nv - 1, ncol))


# ------------------------------------------------------ Levenberg-Marquardt
@dataclass
class _LMState:
    """Parameters, residuals and their sum of squares, damping, evaluations so far."""

    p: np.ndarray
    r: np.ndarray
    cost: float
    lam: float = 1e-3
    nfev: int = 1


def damped_step(N, d: np.ndarray, lam: float, g: np.ndarray) -> np.ndarray:
    """Levenberg-Marquardt step: the solution of (N + lambda diag(d)) dp = -g.

    Parameters
    ----------
    N : scipy.sparse matrix or ndarray
        Normal matrix J^T J (parameters x parameters; dimensionless, as chainages, elevations
        and lengths are all in metres).
    d : ndarray
        Marquardt's scaling, the diagonal of N (floored at 1e-12).
    lam : float
        Damping (dimensionless).
    g : ndarray
        Gradient J^T r (m).

    Returns
    -------
    ndarray
        The step dp (m); raises ``numpy.linalg.LinAlgError`` when the damped matrix is singular.

    Notes
    -----
    LU solve of the small dense matrix (LAPACK gesv through numpy), the library's own. Measured
    with ``benchmarks/alignment_speed.py --solvers`` (60 km of generated profiles, problems of
    up to 32 parameters and 1,000 stations; CPU s for the whole fit, median of 3, two runs on a
    busy two-core machine): this 1.21-1.26 s, a banded Cholesky (``scipy.linalg.solveh_banded``,
    parameters in reverse Cuthill-McKee order) 1.33-1.38 s, a sparse LU
    (``scipy.sparse.linalg.spsolve``) 1.41-1.90 s, all three giving the same PVIs to 2e-11 m.
    The refinement hands over at most about 32 parameters (blocks of ten PVIs), so the O(p^3)
    of the dense solve stays negligible; problems of more than ``LM_MAX_PARAMS`` parameters go
    to ``scipy.optimize.least_squares`` (:func:`nls_fit`).
    """
    if sp.issparse(N):
        N = N.toarray()
    return np.linalg.solve(N + lam * np.diag(d), -g)


def _lm_iteration(fun, st: _LMState, A, g, lb, ub, max_nfev: int, ftol: float, xtol: float):
    """Raise the damping until a step lowers the cost. Returns ``(improved, converged)``."""
    d = np.maximum(A.diagonal(), 1e-12)
    while st.nfev < max_nfev:
        try:
            step = damped_step(A, d, st.lam, g)
        except np.linalg.LinAlgError:
            st.lam *= 10.0
            continue
        p_new = np.clip(st.p + step, lb, ub)
        r_new = fun(p_new)
        st.nfev += 1
        cost_new = float(r_new @ r_new)
        if np.isfinite(cost_new) and cost_new <= st.cost:
            moved = np.max(np.abs(p_new - st.p) / (np.abs(st.p) + 1.0))
            done = st.cost - cost_new <= ftol * max(st.cost, 1e-300) or moved <= xtol
            st.p, st.r, st.cost = p_new, r_new, cost_new
            st.lam = max(st.lam / 3.0, 1e-12)
            return True, done
        st.lam *= 4.0
        if st.lam > 1e12:
            break
    return False, False


def normal_equations(J, r: np.ndarray):
    """J^T J and J^T r of a Jacobian, sparse or dense.

    Parameters
    ----------
    J : scipy.sparse matrix or ndarray
        Jacobian of the residuals, (residuals x parameters).
    r : ndarray
        Residuals (m).

    Returns
    -------
    (N, g)
        The normal matrix (parameters x parameters; CSR when ``J`` is sparse) and the gradient
        J^T r (m).

    Notes
    -----
    With a sparse J the products cost in proportion to its non-zeros (a station touches at
    most seven parameters, ten under two overlapping curves) and never call the BLAS. The dense
    ``J.T @ J`` of 1,000 x 32 used before went to the BLAS, which splits it over its threads:
    in a process with the default BLAS threads (a run in one process) the fit of
    ``benchmarks/alignment_speed.py`` cost 40-56 ms of CPU per km, against 14-18 ms with these
    sparse products (the same as before with one BLAS thread, as in the worker processes).
    """
    if sp.issparse(J):
        return (J.T @ J).tocsr(), np.asarray(J.T @ r).ravel()
    return J.T @ J, J.T @ r


def levenberg_marquardt(fun, jac, p0, lb, ub, max_nfev: int = 40, ftol: float = 1e-9, xtol: float = 1e-10):
    """Least squares by Levenberg-Marquardt for the small problems of the alignment.

    Parameters
    ----------
    fun : callable
        ``fun(p)`` gives the residuals (m).
    jac : callable
        ``jac(p)`` gives their Jacobian, sparse (any ``scipy.sparse`` matrix) or dense.
    p0, lb, ub : ndarray
        Start and bounds of the parameters (m).
    max_nfev : int
        Most evaluations of ``fun``.
    ftol, xtol : float
        Stop when a step lowers the cost by less than ``ftol`` of it, or moves no parameter by
        more than ``xtol`` relative to (|p| + 1).

    Returns
    -------
    p : ndarray
        The parameters.
    r : ndarray
        The residuals there.

    Notes
    -----
    Step (J^T J + lambda diag(J^T J)) dp = -J^T r, Marquardt's diagonal scaling; steps clipped
    to the bounds; lambda divided by 3 after a success, multiplied by 4 after a failure. The
    normal equations come from :func:`normal_equations` and are solved by :func:`damped_step`.

    References
    ----------
    Marquardt (1963).
    """
    p = np.clip(np.asarray(p0, dtype=float), lb, ub)
    r = fun(p)
    st = _LMState(p=p, r=r, cost=float(r @ r))
    while st.nfev < max_nfev:
        N, g = normal_equations(jac(st.p), st.r)
        improved, done = _lm_iteration(fun, st, N, g, lb, ub, max_nfev, ftol, xtol)
        if not improved or done:
            break
    return st.p, st.r


# ------------------------------------------------------ nonlinear least squares
class _Problem:
    """Residuals and (sparse) Jacobian of the alignment as functions of its free parameters."""

    def __init__(self, X, Y, L, xs, zs, free_x, free_y, free_l):
        self.X, self.Y, self.L = X, Y, L
        self.xs, self.zs = xs, zs
        self.free = (free_x, free_y, free_l)
        self.rho = 10.0 * np.sqrt(max(len(xs), 1))

    def bounds(self):
        """Start, lower and upper bounds: each free chainage may move up to 40 % of the way to
        its neighbours (so the PVIs keep their order), lengths from 1 mm to twice the longer
        neighbouring tangent."""
        free_x, free_y, free_l = self.free
        X, D = self.X, np.diff(self.X)
        p0 = np.concatenate([X[free_x], self.Y[free_y], self.L[free_l]])
        lb = np.concatenate([X[free_x] - 0.4 * D[free_x - 1], np.full(len(free_y), -np.inf),
                             np.full(len(free_l), 1e-3)])
        ub = np.concatenate([X[free_x] + 0.4 * D[free_x], np.full(len(free_y), np.inf),
                             2 * np.maximum(D[free_l - 1], D[free_l])])
        width = ub - lb
        margin = np.where(np.isfinite(width), 1e-9 * width, 0.0)
        return np.clip(p0, lb + margin, ub - margin), lb, ub

    def unpack(self, p):
        """The alignment ``(X, Y, L)`` at parameters ``p``."""
        free_x, free_y, free_l = self.free
        nx, ny = len(free_x), len(free_y)
        Xp, Yp, Lp = self.X.copy(), self.Y.copy(), self.L.copy()
        Xp[free_x], Yp[free_y], Lp[free_l] = p[:nx], p[nx:nx + ny], p[nx + ny:]
        return Xp, Yp, Lp

    def residuals(self, p):
        """Model minus data (m), then rho times each overlap of neighbouring curves (m)."""
        Xp, Yp, Lp = self.unpack(p)
        r = model_z(Xp, Yp, Lp, self.xs) - self.zs
        over = np.maximum(Lp[:-1] / 2 + Lp[1:] / 2 - np.diff(Xp), 0.0)
        return np.concatenate([r, self.rho * over])

    def jacobian(self, p):
        """:func:`_jacobian` at parameters ``p``."""
        Xp, Yp, Lp = self.unpack(p)
        return _jacobian(Xp, Yp, Lp, self.xs, *self.free, self.rho)


def nls_fit(X, Y, L, xs, zs, free_x, free_y, free_l, max_nfev: int = 40, ftol: float = 1e-9):
    """Nonlinear least squares of the alignment to a profile over some of its parameters.

    Parameters
    ----------
    X, Y, L : ndarray
        PVI chainages, elevations and curve lengths (m), the start.
    xs, zs : ndarray
        Station chainages and elevations (m).
    free_x, free_y, free_l : array_like of int
        Vertices whose chainage, elevation and length are fitted; the others are held.
    max_nfev : int
        Most evaluations of the residuals.
    ftol : float
        Relative reduction of the cost below which the fit stops.

    Returns
    -------
    (X, Y, L, rss)
        The fitted alignment (m) and its residual sum of squares over ``xs`` (m^2); overlaps
        left are not closed here.

    Notes
    -----
    Minimises sum (z(x_j) - z_j)^2 + rho^2 sum max(0, L_i/2 + L_{i+1}/2 - D_i)^2 with
    rho = 10 sqrt(n); up to 120 parameters by :func:`levenberg_marquardt`, beyond by
    ``scipy.optimize.least_squares`` (trust region reflective, LSMR), both with the analytic
    Jacobian as a sparse matrix, so no product ever costs more than the Jacobian's non-zeros.

    References
    ----------
    Marquardt (1963); Branch, Coleman & Li (1999).
    """
    X, Y, L = X.astype(float), Y.astype(float), L.astype(float)
    free = tuple(np.asarray(v, dtype=int) for v in (free_x, free_y, free_l))
    prob = _Problem(X, Y, L, xs, zs, *free)
    p0, lb, ub = prob.bounds()
    # scipy.optimize.least_squares ('trf', sparse Jacobian) on every problem was measured too
    # (benchmarks/alignment_speed.py --solvers): 1.70-2.08 s against 1.21-1.26 s of CPU for the
    # whole fit, and it stops elsewhere (curve lengths up to 2.3 m apart), so the small problems
    # keep this Levenberg-Marquardt
    if len(p0) <= LM_MAX_PARAMS:
        x_opt, resid = levenberg_marquardt(prob.residuals, prob.jacobian, p0, lb, ub, max_nfev=max_nfev, ftol=ftol)
    else:
        res = least_squares(prob.residuals, p0, jac=prob.jacobian, bounds=(lb, ub), method="trf", x_scale="jac",
                            ftol=ftol, xtol=1e-10, gtol=1e-10, max_nfev=max_nfev, tr_solver="lsmr")
        x_opt, resid = res.x, res.fun
    Xp, Yp, Lp = prob.unpack(x_opt)
    r = resid[: len(xs)]
    return Xp, Yp, Lp, float(r @ r)
