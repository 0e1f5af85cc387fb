"""Local fits: a few PVIs re-fitted with the rest of the alignment held.

Model selection (:mod:`pipeline.alignment.selection`) compares alignments that differ near one
PVI, so each comparison is a small problem on the stations of a window of PVIs: the
elevations of the PVIs strictly inside re-solved by linear least squares (many candidate
chainages and lengths at once, in one batched solve), or all their parameters by nonlinear
least squares (:func:`pipeline.alignment.optimisation.nls_fit`).

Notes
-----
For fixed chainages and lengths the model is linear in the elevations, z = Phi Y
(:func:`pipeline.alignment.model.design_matrix`); with the held vertices' part moved to the
right-hand side, the free elevations solve (A^T A) Y_free = A^T (z - Phi_held Y_held).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .model import curve_weights, design_matrix, grade_change_matrix
from .optimisation import nls_fit


@dataclass
class Candidate:
    """A candidate alignment and its cost.

    Attributes
    ----------
    rss : float
        Residual sum of squares over the stations considered (m^2), or, for a move in model
        selection, the change of it that the move makes.
    X, Y, L : ndarray
        PVI chainages, elevations and curve lengths (m).
    """

    rss: float
    X: np.ndarray
    Y: np.ndarray
    L: np.ndarray

    @property
    def model(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The alignment as ``(X, Y, L)``."""
        return self.X, self.Y, self.L


@dataclass
class _Window:
    """Stations and vertices of a local problem: PVIs ``va..vb`` shape stations ``lo..hi``;
    the elevations of ``free`` (indices into the window) are re-solved."""

    va: int
    vb: int
    lo: int
    hi: int
    free: np.ndarray


class LocalFits:
    """Local least-squares problems on one stretch's stations ``(xs, zs)`` (m).

    Parameters
    ----------
    xs, zs : ndarray
        Station chainages and elevations (m).
    sigma : float
        Noise standard deviation (m).
    opts : dict
        Fitting settings (:data:`pipeline.alignment.fit.DEFAULTS`).
    """

    def __init__(self, xs, zs, sigma, opts):
        self.xs, self.zs = xs, zs
        self.sigma = sigma
        self.opts = opts
        self.n = len(xs)

    def _bounds(self, X, L, a, b):
        """Clipped vertex range ``(a, b)`` and the stations ``lo..hi`` it shapes."""
        a, b = max(a, 0), min(b, len(X) - 1)
        lo, hi = np.searchsorted(self.xs, [X[a] - L[a] / 2, X[b] + L[b] / 2], side="left")
        return a, b, lo, max(hi, lo)

    def _window(self, X, L, a, b) -> _Window:
        a, b, lo, hi = self._bounds(X, L, a, b)
        va, vb = max(a - 1, 0), min(b + 1, len(X) - 1)
        return _Window(va, vb, lo, hi, np.arange(a + 1 - va, b - va))

    def _designs(self, X, L, w: _Window, vary, lgrid, xgrid) -> np.ndarray:
        """Design matrices of the window, one per candidate, shape (nc, n, nv)."""
        xs = self.xs[w.lo:w.hi]
        Xw, Lw = X[w.va:w.vb + 1], L[w.va:w.vb + 1].copy()
        Lw[0] = Lw[-1] = 0.0  # the boundary vertices' curves end before the window (no overlap)
        if vary is None:
            return design_matrix(Xw, Lw, xs)[None]
        iv = vary - w.va
        if xgrid is None:
            # only the length of PVI ``vary`` changes: its curve's column of W times row iv of C
            Lw[iv] = 0.0
            weights = curve_weights(Xw[iv], np.asarray(lgrid, dtype=float)[:, None], xs[None, :])
            return design_matrix(Xw, Lw, xs)[None] + weights[:, :, None] * grade_change_matrix(Xw)[iv][None, None, :]
        Xs = np.repeat(Xw[None, :], len(lgrid), axis=0)
        Ls = np.repeat(Lw[None, :], len(lgrid), axis=0)
        Xs[:, iv] = xgrid
        Ls[:, iv] = lgrid
        return design_matrix(Xs, Ls, xs)

    def _solve(self, Y, w: _Window, phis):
        """Free elevations of each candidate by least squares: ``(rss, Y)`` per candidate."""
        zs = self.zs[w.lo:w.hi]
        Yw = Y[w.va:w.vb + 1]
        is_free = np.zeros(w.vb + 1 - w.va, dtype=bool)
        is_free[w.free] = True
        fixed = np.flatnonzero(~is_free)
        nc = phis.shape[0]
        rhs = zs[None, :] - phis[:, :, fixed] @ Yw[fixed]
        if len(w.free):
            A = phis[:, :, w.free]
            At = np.swapaxes(A, 1, 2)
            N = At @ A + 1e-12 * np.eye(len(w.free))[None]
            sol = np.linalg.solve(N, (At @ rhs[:, :, None]))[:, :, 0]
            res = (A @ sol[:, :, None])[:, :, 0] - rhs
        else:
            sol = np.zeros((nc, 0))
            res = -rhs
        Ys = np.repeat(Y[None, :], nc, axis=0)
        Ys[:, w.va + w.free] = sol
        return np.einsum("ij,ij->i", res, res), Ys

    def local(self, X, Y, L, a, b) -> tuple[float, np.ndarray]:
        """Residual sum of squares over window ``(a, b)`` with the inner elevations re-solved.

        Parameters
        ----------
        X, Y, L : ndarray
            PVI chainages, elevations and curve lengths (m).
        a, b : int
            The window's end vertices; those strictly inside are free, the rest held.

        Returns
        -------
        rss : float
            Over the stations from the PVC of ``a`` to the PVT of ``b`` (m^2).
        Y : ndarray
            All elevations (m), the inner ones re-solved.
        """
        w = self._window(X, L, a, b)
        rss, Ys = self._solve(Y, w, self._designs(X, L, w, None, None, None))
        return float(rss[0]), Ys[0]

    def local_grid(self, X, Y, L, a, b, vary: int, lgrid, xgrid=None) -> tuple[np.ndarray, np.ndarray]:
        """:meth:`local` for each length of ``lgrid`` (m) of PVI ``vary`` (and chainage of
        ``xgrid`` (m), if given), in one batched solve.

        Returns
        -------
        rss : ndarray
            Per candidate (m^2).
        Y : ndarray
            Per candidate, all elevations (m), shape (nc, nv).
        """
        w = self._window(X, L, a, b)
        return self._solve(Y, w, self._designs(X, L, w, vary, lgrid, xgrid))

    def local_nls(self, X, Y, L, a, b, max_nfev: int = 12, ftol: float = 1e-6) -> Candidate | None:
        """Window ``(a, b)`` re-fitted by nonlinear least squares.

        Parameters
        ----------
        X, Y, L : ndarray
            PVI chainages, elevations and curve lengths (m).
        a, b : int
            The window's end vertices; chainage, elevation and length of every PVI strictly
            inside are free (and the elevation of a stretch end inside the window).
        max_nfev : int
            Most evaluations of the residuals.
        ftol : float
            Relative cost reduction at which to stop.

        Returns
        -------
        Candidate or None
            The whole alignment with the window re-fitted and the RSS over the window's
            stations (m^2); None where the fitted curves overlap.
        """
        a, b, lo, hi = self._bounds(X, L, a, b)
        va, vb = max(a - 1, 0), min(b + 1, len(X) - 1)
        Xw, Yw, Lw = X[va:vb + 1], Y[va:vb + 1], L[va:vb + 1].copy()
        Lw[0] = Lw[-1] = 0.0
        inner = np.arange(a + 1 - va, b - va)
        inner = inner[(inner > 0) & (inner < len(Xw) - 1)]
        if not len(inner) or hi - lo < 3:
            rss, Yn = self.local(X, Y, L, a, b)
            return Candidate(rss, X, Yn, L)
        # the stretch's own end points keep their chainage but not their elevation
        free_y = np.concatenate([[0] if a == 0 else [], inner, [len(Xw) - 1] if b == len(X) - 1 else []])
        free_y = free_y.astype(int)
        Xn, Yn, Ln, rss = nls_fit(Xw, Yw, Lw, self.xs[lo:hi], self.zs[lo:hi], inner, free_y, inner,
                                 max_nfev=max_nfev, ftol=ftol)
        over = Ln[:-1] / 2 + Ln[1:] / 2 - np.diff(Xn)
        if np.any(over > 1e-6):
            return None
        X2, Y2, L2 = X.copy(), Y.copy(), L.copy()
        X2[va + inner], L2[va + inner] = Xn[inner], Ln[inner]
        Y2[va + free_y] = Yn[free_y]
        return Candidate(rss, X2, Y2, L2)

    def best_length(self, X, Y, L, i, grid: np.ndarray | None = None) -> Candidate | None:
        """Least-squares length of curve ``i``, neighbouring curves fixed, elevations re-solved.

        Parameters
        ----------
        X, Y, L : ndarray
            PVI chainages, elevations and curve lengths (m).
        i : int
            Interior PVI.
        grid : ndarray, optional
            Lengths to try (m); default 0 and 24 lengths in geometric progression up to the
            room between the neighbouring curves. A finer grid around the best follows.

        Returns
        -------
        Candidate or None
            The alignment with the best length and the RSS over PVIs ``i - 2..i + 2`` (m^2);
            None where the PVI has no room for a curve.
        """
        room_l = X[i] - X[i - 1] - L[i - 1] / 2
        room_r = X[i + 1] - X[i] - L[i + 1] / 2
        lmax = 2 * max(min(room_l, room_r), 0.0)
        if lmax <= 0:
            return None
        if grid is None:
            grid = np.concatenate([[0.0], np.geomspace(max(lmax / 400, 0.5), lmax, 24)])
        grid = np.unique(np.clip(grid, 0.0, lmax))
        rss, Ys = self.local_grid(X, Y, L, i - 2, i + 2, vary=i, lgrid=grid)
        j = int(np.argmin(rss))
        best = (float(grid[j]), Ys[j], float(rss[j]))
        lo_g = grid[max(j - 1, 0)]
        hi_g = grid[min(j + 1, len(grid) - 1)]
        if hi_g > lo_g:
            fine = np.linspace(lo_g, hi_g, 11)
            rss2, Ys2 = self.local_grid(X, Y, L, i - 2, i + 2, vary=i, lgrid=fine)
            j2 = int(np.argmin(rss2))
            if rss2[j2] < rss[j]:
                best = (float(fine[j2]), Ys2[j2], float(rss2[j2]))
        L2 = L.copy()
        L2[i] = best[0]
        return Candidate(best[2], X, best[1], L2)

    def best_place(self, X, Y, L, i, span: float) -> Candidate | None:
        """Least-squares chainage and length of PVI ``i`` together.

        Parameters
        ----------
        X, Y, L : ndarray
            PVI chainages, elevations and curve lengths (m).
        i : int
            Interior PVI.
        span : float
            Curve length to start from (m).

        Returns
        -------
        Candidate or None
            The best alignment on a grid around the present chainage (+-20 % of the curve's
            half length) and ``span`` (50 % to 130 %), then on a finer grid around the best
            pair, with the RSS over PVIs ``i - 2..i + 2`` (m^2); neighbours fixed, elevations
            re-solved. None where the PVI has no room.
        """
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
                break
            xg, lg = xg[ok], np.minimum(lg[ok], room[ok])
            rss, Ys = self.local_grid(X, Y, L, i - 2, i + 2, vary=i, lgrid=lg, xgrid=xg)
            j = int(np.argmin(rss))
            if best is None or rss[j] < best[3]:
                best = (float(xg[j]), float(lg[j]), Ys[j], float(rss[j]))
            x0, span = best[0], best[1]
            dx = np.array([-0.05, -0.025, 0.0, 0.025, 0.05]) * half
            fl = np.array([0.9, 0.95, 1.0, 1.05, 1.1])
        if best is None:
            return None
        X2, L2 = X.copy(), L.copy()
        X2[i], L2[i] = best[0], best[1]
        return Candidate(best[3], X2, best[2], L2)
