"""The vertical alignment model: tangents and symmetric parabolic curves.

The road's grade line is a chain of vertices (PVIs) ``(X_k, Y_k)`` from the first to the
last station, joined by constant-grade tangents ``G_k = (Y_{k+1} - Y_k) / (X_{k+1} - X_k)``,
and every interior PVI carries a symmetric parabolic curve of length ``L_k`` centred on it
(AASHTO, *A Policy on Geometric Design of Highways and Streets* (the Green Book), ch. 3).
Written as the broken grade line plus one correction per curve,

    z(x) = Y_k + G_k (x - X_k)                         (x between X_k and X_{k+1})
         + sum_i (G_i - G_{i-1}) / (2 L_i) * max(0, L_i/2 - |x - X_i|)^2

which equals the textbook form y = y_PVC + g1 u + (g2 - g1) / (2 L) u^2 on each curve (u from
the PVC) and is linear in the PVI elevations ``Y`` for fixed chainages and lengths:
``z = Phi Y`` with the design matrix

    Phi = H + W C

``H`` the hat (linear interpolation) functions of the vertices, ``W`` the curve weights
``w_i(x) = max(0, L_i/2 - |x - X_i|)^2 / (2 L_i)`` and ``C`` the derivatives of the grade
changes ``G_i - G_{i-1}`` with respect to ``Y``. :func:`design_matrix` is the one builder of
``Phi``; the fitting modules take its pieces from here.

References
----------
AASHTO (2018). *A Policy on Geometric Design of Highways and Streets*, 7th ed., ch. 3
(vertical curves). American Association of State Highway and Transportation Officials.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp


@dataclass
class Alignment:
    """Fitted vertical alignment of one stretch of profile (metres, grades as fractions).

    Attributes
    ----------
    x : ndarray
        PVI chainages (m); the first and last are the stretch ends.
    y : ndarray
        PVI elevations (m).
    L : ndarray
        Curve lengths (m), 0 at both ends.
    sigma : float
        Noise standard deviation of the profile (m).
    n : int
        Number of stations fitted.
    flags : dict
        Free-form notes on the fit.
    """

    x: np.ndarray
    y: np.ndarray
    L: np.ndarray
    sigma: float = 0.0
    n: int = 0
    flags: dict = field(default_factory=dict)

    @property
    def grades(self) -> np.ndarray:
        """Tangent grades ``G_k`` (fraction), one per pair of consecutive PVIs."""
        return np.diff(self.y) / np.diff(self.x)

    def z(self, xs: np.ndarray) -> np.ndarray:
        """Elevation of this alignment (:func:`model_z`).

        Parameters
        ----------
        xs : ndarray
            Chainages (m), any order.

        Returns
        -------
        ndarray
            Elevation (m).
        """
        return model_z(self.x, self.y, self.L, xs)

    def grade(self, xs: np.ndarray) -> np.ndarray:
        """Grade of this alignment (:func:`model_grade`).

        Parameters
        ----------
        xs : ndarray
            Chainages (m), any order.

        Returns
        -------
        ndarray
            Grade (fraction).
        """
        return model_grade(self.x, self.y, self.L, xs)


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
    """Elevation of the alignment at given chainages.

    Parameters
    ----------
    X, Y : ndarray
        PVI chainages and elevations (m), chainages ascending.
    L : ndarray
        Curve lengths (m), 0 at both ends.
    xs : ndarray
        Chainages (m), any order and shape.

    Returns
    -------
    ndarray
        Elevation (m) at ``xs``, same shape.

    Notes
    -----
    z(x) = Y_k + G_k (x - X_k) + sum_i (G_i - G_{i-1}) / (2 L_i) max(0, L_i/2 - |x - X_i|)^2.

    References
    ----------
    AASHTO Green Book (2018), ch. 3.
    """
    G = (Y[1:] - Y[:-1]) / (X[1:] - X[:-1])
    k = _segment(X, xs)
    z = Y[k] + G[k] * (xs - X[k])
    c, rr = _under_curves(X, L, xs)
    if len(rr):
        q = L[c] / 2 - np.abs(xs[rr] - X[c])
        corr = (G[c] - G[c - 1]) * np.maximum(q, 0.0) ** 2 / (2 * L[c])
        if np.all(rr[1:] > rr[:-1]):
            z[rr] += corr
        else:  # overlapping curves: add in curve order
            np.add.at(z, rr, corr)
    return z


def _under_curves(X: np.ndarray, L: np.ndarray, xs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each (curve, station) pair with the station between the curve's ends, curve by curve.

    Parameters
    ----------
    X, L : ndarray
        PVI chainages and curve lengths (m).
    xs : ndarray
        Station chainages (m), ascending.

    Returns
    -------
    (curve, station) : ndarray of int
        Index of the PVI and of the station of every pair, ordered by curve, then station.
    """
    i = np.flatnonzero(L[1:-1] > 0) + 1
    lo = np.searchsorted(xs, X[i] - L[i] / 2)
    hi = np.searchsorted(xs, X[i] + L[i] / 2)
    size = np.maximum(hi - lo, 0)
    station = np.arange(size.sum()) - np.repeat(np.cumsum(size) - size, size) + np.repeat(lo, size)
    return np.repeat(i, size), station


@_ascending
def model_grade(X: np.ndarray, Y: np.ndarray, L: np.ndarray, xs: np.ndarray) -> np.ndarray:
    """Grade of the alignment at given chainages: the derivative of :func:`model_z`.

    Parameters
    ----------
    X, Y : ndarray
        PVI chainages and elevations (m), chainages ascending.
    L : ndarray
        Curve lengths (m), 0 at both ends.
    xs : ndarray
        Chainages (m), any order and shape.

    Returns
    -------
    ndarray
        Grade (fraction) at ``xs``; at a PVI without a curve, the grade of the next tangent.

    Notes
    -----
    dz/dx = G_k - sum_i (G_i - G_{i-1}) / L_i max(0, L_i/2 - |x - X_i|) sign(x - X_i).

    References
    ----------
    AASHTO Green Book (2018), ch. 3.
    """
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


# ------------------------------------------------------- the design matrix
def hat_weights(X: np.ndarray, xs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The tangent each station lies on and its position along it.

    Parameters
    ----------
    X : ndarray
        PVI chainages (m), shape (nv,) or a batch (nc, nv), ascending along the last axis.
    xs : ndarray
        Station chainages (m), shape (n,).

    Returns
    -------
    k : ndarray of int
        Tangent index (between PVIs k and k + 1), shape (n,) or (nc, n).
    t : ndarray
        Fraction of the tangent, ``(x - X_k) / (X_{k+1} - X_k)``; the hat function of PVI k
        is ``1 - t`` there and that of PVI k + 1 is ``t``.
    """
    nv = X.shape[-1]
    D = X[..., 1:] - X[..., :-1]
    if X.ndim == 1:
        k = _segment(X, xs)
        return k, (xs - X[k]) / D[k]
    k = np.clip((xs[None, :, None] >= X[:, None, 1:-1]).sum(axis=2), 0, nv - 2)
    x0 = np.take_along_axis(X, k, axis=1)
    return k, (xs[None, :] - x0) / np.take_along_axis(D, k, axis=1)


def curve_weights(x_pvi, length, xs) -> np.ndarray:
    """Weight of a curve's grade change in the elevation: the parabolic correction's shape.

    Parameters
    ----------
    x_pvi : float or ndarray
        Chainage of the curve's PVI (m); broadcast against ``length`` and ``xs``.
    length : float or ndarray
        Curve length L (m); 0 means no curve.
    xs : float or ndarray
        Station chainages (m).

    Returns
    -------
    ndarray
        ``w`` (m), broadcast shape of the inputs.

    Notes
    -----
    w(x) = max(0, L/2 - |x - X_i|)^2 / (2 L), and 0 where L = 0; the curve adds
    (G_i - G_{i-1}) w(x) to the broken grade line.
    """
    length = np.asarray(length, dtype=float)
    safe = np.where(length > 0, length, 1.0)
    q = np.maximum(length / 2 - np.abs(xs - x_pvi), 0.0)
    return np.where(length > 0, q * q / (2 * safe), 0.0)


def grade_change_matrix(X: np.ndarray) -> np.ndarray:
    """Derivatives of the grade changes with respect to the PVI elevations.

    Parameters
    ----------
    X : ndarray
        PVI chainages (m), shape (nv,) or a batch (nc, nv).

    Returns
    -------
    ndarray
        ``C``, shape (..., nv, nv): row i holds d(G_i - G_{i-1}) / dY (1/m); the end rows are 0.

    Notes
    -----
    G_i - G_{i-1} = Y_{i-1} / D_{i-1} - Y_i (1 / D_{i-1} + 1 / D_i) + Y_{i+1} / D_i,
    D_k = X_{k+1} - X_k.
    """
    nv = X.shape[-1]
    C = np.zeros(X.shape[:-1] + (nv, nv))
    i = np.arange(1, nv - 1)
    C[..., i, i - 1], C[..., i, i], C[..., i, i + 1] = _grade_change_coefficients(X)
    return C


def _grade_change_coefficients(X):
    """The three non-zero entries of the interior rows of :func:`grade_change_matrix`."""
    inv = 1.0 / (X[..., 1:] - X[..., :-1])
    return inv[..., :-1], -inv[..., :-1] - inv[..., 1:], inv[..., 1:]


def _dense_factors(X, L, xs):
    """``H``, ``W`` and ``C`` as dense arrays, for a window or a batch of windows."""
    k, t = hat_weights(X, xs)
    H = np.zeros(X.shape[:-1] + (len(xs), X.shape[-1]))
    np.put_along_axis(H, k[..., None], (1 - t)[..., None], axis=-1)
    np.put_along_axis(H, (k + 1)[..., None], t[..., None], axis=-1)
    W = curve_weights(X[..., None, :], L[..., None, :], xs[:, None])
    return H, W, grade_change_matrix(X)


def _sparse_factors(X, L, xs):
    """``H``, ``W`` and ``C`` as CSR matrices, for a whole stretch: each station lies on one
    tangent and under at most one curve, and each grade change involves three vertices."""
    nv, n = len(X), len(xs)
    k, t = hat_weights(X, xs)
    r = np.arange(n)
    H = sp.csr_matrix((np.concatenate([1 - t, t]), (np.concatenate([r, r]), np.concatenate([k, k + 1]))),
                      shape=(n, nv))
    rows, cols, vals = [np.zeros(0, dtype=int)], [np.zeros(0, dtype=int)], [np.zeros(0)]
    for i in np.flatnonzero(L[1:-1] > 0) + 1:
        lo, hi = np.searchsorted(xs, [X[i] - L[i] / 2, X[i] + L[i] / 2])
        rows.append(r[lo:hi])
        cols.append(np.full(len(rows[-1]), i))
        vals.append(curve_weights(X[i], L[i], xs[lo:hi]))
    W = sp.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n, nv))
    i = np.arange(1, nv - 1)
    C = sp.csr_matrix((np.concatenate(_grade_change_coefficients(X)),
                       (np.concatenate([i, i, i]), np.concatenate([i - 1, i, i + 1]))), shape=(nv, nv))
    return H, W, C


def design_matrix(X: np.ndarray, L: np.ndarray, xs: np.ndarray, sparse: bool = False):
    """Matrix ``Phi`` with ``model_z(X, Y, L, xs) = Phi @ Y``.

    Parameters
    ----------
    X : ndarray
        PVI chainages (m), shape (nv,), or with ``sparse=False`` a batch (nc, nv) of vertex
        sets at the same stations.
    L : ndarray
        Curve lengths (m), same shape as ``X``.
    xs : ndarray
        Station chainages (m), ascending, shape (n,).
    sparse : bool
        Return a CSR matrix (for a whole stretch; each station touches at most four
        vertices) instead of a dense array (for a short window or a batch).

    Returns
    -------
    ndarray or scipy.sparse.csr_matrix
        ``Phi`` (dimensionless), shape (n, nv) or (nc, n, nv).

    Notes
    -----
    Phi = H + W C: column k is the hat function of vertex k plus the curve corrections that
    depend on Y_k through the grades either side of it (:func:`hat_weights`,
    :func:`curve_weights`, :func:`grade_change_matrix`).
    """
    xs = np.asarray(xs, dtype=float)
    H, W, C = _sparse_factors(X, L, xs) if sparse else _dense_factors(X, L, xs)
    return H + W @ C
