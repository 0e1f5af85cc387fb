"""The joint refinement's solver: sparse Jacobian, normal equations and damped step against
dense references (numpy, scipy), and the fitted alignment against scipy's own least squares.
Timings are never asserted here; ``benchmarks/alignment_speed.py`` measures them."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.optimize import least_squares

from pipeline.alignment.model import model_z
from pipeline.alignment.optimisation import (_jacobian, damped_step, levenberg_marquardt, nls_fit,
                                             normal_equations, solve_elevations)

# a small stretch with three curves, known exactly (invented test data)
X_TRUE = np.array([0.0, 300.0, 700.0, 1100.0, 1500.0])
Y_TRUE = np.array([100.0, 109.0, 97.0, 105.0, 101.0])
L_TRUE = np.array([0.0, 200.0, 150.0, 260.0, 0.0])
XS = np.arange(0.0, 1500.0 + 1e-9, 5.0)


def noisy_profile(seed: int = 7, sd: float = 0.05) -> np.ndarray:
    return model_z(X_TRUE, Y_TRUE, L_TRUE, XS) + np.random.default_rng(seed).normal(0.0, sd, len(XS))


def start(zs):
    """A start off the truth: chainages moved by up to 12 m, lengths by up to 25 %."""
    X = X_TRUE + np.array([0.0, 12.0, -9.0, 7.0, 0.0])
    L = L_TRUE * np.array([1.0, 1.25, 0.8, 1.1, 1.0])
    Y, _ = solve_elevations(X, L, XS, zs)
    return X, Y, L


def test_sparse_jacobian_matches_finite_differences_with_penalty_rows():
    """Reference: central finite differences (numpy) of the model and of the overlap penalty
    rho max(0, L_i/2 + L_{i+1}/2 - D_i), at a point where curves 1 and 2 overlap."""
    X = np.array([0.0, 180.0, 330.0, 700.0, 1000.0])
    Y = np.array([50.0, 56.0, 49.0, 55.0, 52.0])
    L = np.array([0.0, 200.0, 140.0, 150.0, 0.0])  # 100 + 70 > 150: curves 1 and 2 overlap
    xs = np.arange(0.0, 1000.0, 3.7)
    free, allv, rho = np.arange(1, 4), np.arange(5), 3.0
    J = _jacobian(X, Y, L, xs, free, allv, free, rho=rho)
    assert sp.issparse(J)
    p0 = np.concatenate([X[free], Y, L[free]])

    def f(p):
        Xp, Yp, Lp = X.copy(), Y.copy(), L.copy()
        Xp[free], Yp[:], Lp[free] = p[:3], p[3:8], p[8:]
        over = np.maximum(Lp[:-1] / 2 + Lp[1:] / 2 - np.diff(Xp), 0.0)
        return np.concatenate([model_z(Xp, Yp, Lp, xs), rho * over])

    h = 1e-6
    num = np.column_stack([(f(p0 + h * e) - f(p0 - h * e)) / (2 * h) for e in np.eye(len(p0))])
    np.testing.assert_allclose(J.toarray(), num, atol=1e-6)
    assert np.any(J.toarray()[len(xs):] != 0)  # the penalty rows are in play
    # the dense builder adds overlapping curves' entries in another order: equal to rounding
    np.testing.assert_allclose(J.toarray(), _jacobian(X, Y, L, xs, free, allv, free, rho=rho, dense=True),
                               rtol=1e-14, atol=1e-15)


def test_normal_equations_of_sparse_jacobian_equal_numpy_products():
    """Reference: numpy's dense J^T J and J^T r."""
    zs = noisy_profile()
    X, Y, L = start(zs)
    free, allv = np.arange(1, 4), np.arange(5)
    J = _jacobian(X, Y, L, XS, free, allv, free, rho=10.0)
    r = np.random.default_rng(1).normal(size=J.shape[0])
    N, g = normal_equations(J, r)
    Jd = J.toarray()
    np.testing.assert_allclose(N.toarray(), Jd.T @ Jd, rtol=1e-12, atol=1e-9)
    np.testing.assert_allclose(g, Jd.T @ r, rtol=1e-12, atol=1e-9)


def test_damped_step_is_the_least_squares_solution_of_the_augmented_system():
    """Reference: numpy.linalg.lstsq on [J; sqrt(lambda diag(d))] dp = [-r; 0], the
    Levenberg-Marquardt step written as a linear least-squares problem (Marquardt 1963)."""
    zs = noisy_profile()
    X, Y, L = start(zs)
    free, allv = np.arange(1, 4), np.arange(5)
    J = _jacobian(X, Y, L, XS, free, allv, free, rho=10.0)
    r = model_z(X, Y, L, XS) - zs
    r = np.concatenate([r, np.zeros(len(X) - 1)])
    N, g = normal_equations(J, r)
    d = N.diagonal()
    for lam in (1e-6, 1e-3, 1.0):
        A = np.vstack([J.toarray(), np.diag(np.sqrt(lam * d))])
        ref = np.linalg.lstsq(A, np.concatenate([-r, np.zeros(len(d))]), rcond=None)[0]
        np.testing.assert_allclose(damped_step(N, d, lam, g), ref, rtol=1e-6, atol=1e-9)


def test_sparse_and_dense_levenberg_marquardt_take_the_same_steps():
    """Reference: the same iteration fed numpy's dense Jacobian and products (numpy)."""
    zs = noisy_profile()
    X, Y, L = start(zs)
    inner, allv = np.arange(1, 4), np.arange(5)

    def unpack(p):
        Xp, Yp, Lp = X.copy(), Y.copy(), L.copy()
        Xp[inner], Yp[:], Lp[inner] = p[:3], p[3:8], p[8:]
        return Xp, Yp, Lp

    def fun(p):
        Xp, Yp, Lp = unpack(p)
        over = np.maximum(Lp[:-1] / 2 + Lp[1:] / 2 - np.diff(Xp), 0.0)
        return np.concatenate([model_z(Xp, Yp, Lp, XS) - zs, 10.0 * over])

    p0 = np.concatenate([X[inner], Y, L[inner]])
    lb, ub = np.full(len(p0), -np.inf), np.full(len(p0), np.inf)
    sparse = levenberg_marquardt(fun, lambda p: _jacobian(*unpack(p), XS, inner, allv, inner, 10.0), p0, lb, ub)[0]
    dense = levenberg_marquardt(fun, lambda p: _jacobian(*unpack(p), XS, inner, allv, inner, 10.0, dense=True),
                                p0, lb, ub)[0]
    np.testing.assert_allclose(sparse, dense, rtol=0, atol=1e-8)


def test_refinement_reaches_scipy_least_squares_optimum():
    """Reference library: scipy.optimize.least_squares (MINPACK Levenberg-Marquardt, dense,
    its own finite-difference Jacobian), from the same start, on model minus data; the
    bounds and the overlap penalty of nls_fit are inactive at this optimum."""
    zs = noisy_profile()
    X, Y, L = start(zs)
    inner, allv = np.arange(1, 4), np.arange(5)
    Xf, Yf, Lf, rss = nls_fit(X, Y, L, XS, zs, inner, allv, inner)

    def fun(p):
        Xp, Yp, Lp = X.copy(), Y.copy(), L.copy()
        Xp[inner], Yp[:], Lp[inner] = p[:3], p[3:8], p[8:]
        return model_z(Xp, Yp, Lp, XS) - zs

    ref = least_squares(fun, np.concatenate([X[inner], Y, L[inner]]), method="lm", xtol=1e-12, ftol=1e-12,
                        gtol=1e-12)
    assert ref.success
    np.testing.assert_allclose(Xf[inner], ref.x[:3], atol=1e-4)   # m
    np.testing.assert_allclose(Yf, ref.x[3:8], atol=1e-5)         # m
    np.testing.assert_allclose(Lf[inner], ref.x[8:], atol=1e-3)   # m
    assert abs(rss - 2 * ref.cost) <= 1e-8 * rss
    # and the fit found the invented curves (noise 0.05 m: a few metres at most)
    np.testing.assert_allclose(Xf[inner], X_TRUE[1:4], atol=4.0)
    np.testing.assert_allclose(Lf[inner], L_TRUE[1:4], rtol=0.1)
