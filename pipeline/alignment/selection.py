"""Model selection: how many PVIs, and where, by the Bayesian information criterion.

Starting from the segmentation's PVIs (one per chord end, so a long curve comes out as several
chords), a PVI is removed, or two or more neighbouring PVIs that bend the same way are merged
into one curve, while doing so raises the residual sum of squares by less than the Bayesian
information criterion's price of the three parameters (X, Y, L) of a PVI,

    price = 3 sigma^2 ln n

(Schwarz 1978). A PVI whose grade change is below ``min_grade_change_pct`` is removed
regardless. Each curve's length is fitted by least squares over a grid of lengths on the
samples around its PVI, and the whole model is then refined jointly
(:mod:`pipeline.alignment.optimisation`).

The price is re-set from the residuals of a fitted model: their robust spread (1.4826 MAD;
Hampel 1974) and, for noise correlated from one sample to the next (a DEM sampled at about its
cell size), the AR(1) variance inflation (1 + rho) / (1 - rho), rho the lag-1 autocorrelation
of the residuals (Box, Jenkins & Reinsel 2008, ch. 3), capped at 4.

References
----------
Schwarz, G. (1978). Estimating the dimension of a model. *Annals of Statistics* 6(2), 461-464.

Hampel, F. R. (1974). The influence curve and its role in robust estimation. *Journal of the
American Statistical Association* 69(346), 383-393.

Box, G. E. P., Jenkins, G. M. & Reinsel, G. C. (2008). *Time Series Analysis: Forecasting and
Control*, 4th ed., ch. 3. Wiley.
"""

from __future__ import annotations

import numpy as np

from .local import Candidate, LocalFits
from .model import model_z
from .optimisation import close_overlaps, nls_fit, solve_elevations

_LENGTH_FACTORS = np.array([0.5, 0.7, 0.85, 1.0, 1.15, 1.3])  # merged curve's lengths to try


class StretchFitter(LocalFits):
    """Selection and refinement of the alignment of one stretch ``(xs, zs)`` (m).

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
        super().__init__(xs, zs, sigma, opts)
        self.price = 3.0 * sigma**2 * np.log(max(self.n, 3))
        self.min_dg = opts["min_grade_change_pct"] / 100.0
        self.min_arm = opts["min_tangent_m"]

    def calibrate(self, X, Y, L, floor: float) -> None:
        """Re-set the price of a PVI from the residuals of a fitted model.

        Parameters
        ----------
        X, Y, L : ndarray
            PVI chainages, elevations and curve lengths (m).
        floor : float
            Least noise standard deviation to assume (m).

        Notes
        -----
        sigma = max(sigma, 1.4826 MAD(r), floor); price = 3 sigma^2 ln n (1 + rho) / (1 - rho),
        rho the lag-1 autocorrelation of the residuals clipped to [0, 0.6].

        References
        ----------
        Hampel (1974); Box, Jenkins & Reinsel (2008), ch. 3; Schwarz (1978).
        """
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

    # --------------------------------------------------------------- moves
    def removal(self, X, Y, L, i) -> Candidate:
        """PVI ``i`` removed, its neighbours keeping their curves, elevations around re-solved.

        Returns
        -------
        Candidate
            The new model; ``rss`` is the change of the residual sum of squares (m^2).
        """
        base, _ = self.local(X, Y, L, i - 2, i + 2)
        X2, Y2, L2 = np.delete(X, i), np.delete(Y, i), np.delete(L, i)
        rss, Y2 = self.local(X2, Y2, L2, i - 2, i + 1)  # the same stations as the base window
        return Candidate(rss - base, X2, Y2, L2)

    @staticmethod
    def _meeting_point(X, Y, i, j):
        """Where the tangent into PVI ``i`` meets the tangent out of PVI ``j``, or None."""
        G = np.diff(Y) / np.diff(X)
        g_in, g_out = G[i - 1], G[j]
        if abs(g_in - g_out) < 1e-9:
            return None
        xn = (Y[j + 1] - Y[i - 1] + g_in * X[i - 1] - g_out * X[j + 1]) / (g_in - g_out)
        if not (X[i - 1] < xn < X[j + 1]):
            return None
        return xn, Y[i - 1] + g_in * (xn - X[i - 1])

    def merge(self, X, Y, L, i, j=None, place: bool = False) -> Candidate | None:
        """PVIs ``i`` to ``j`` (default ``i + 1``) made one curve.

        Parameters
        ----------
        X, Y, L : ndarray
            PVI chainages, elevations and curve lengths (m).
        i, j : int
            First and last PVI of the run.
        place : bool
            Fit the new PVI's chainage too, not only its length.

        Returns
        -------
        Candidate or None
            The new model, its PVI at the intersection of the tangent into ``i`` and the
            tangent out of ``j`` (with ``place``, at the best chainage near it); ``rss`` is the
            change of the residual sum of squares (m^2). None where the tangents do not meet
            between the run's neighbours or the new PVI has no room.
        """
        j = i + 1 if j is None else j
        if i < 1 or j > len(X) - 2 or j <= i:
            return None
        meet = self._meeting_point(X, Y, i, j)
        if meet is None:
            return None
        xn, yn = meet
        base, _ = self.local(X, Y, L, i - 2, j + 2)
        X2 = np.concatenate([X[:i], [xn], X[j + 1:]])
        Y2 = np.concatenate([Y[:i], [yn], Y[j + 1:]])
        L2 = np.concatenate([L[:i], [0.0], L[j + 1:]])
        span = 2 * max(xn - (X[i] - L[i] / 2), (X[j] + L[j] / 2) - xn)
        if place:
            return self._placed_merge(X2, Y2, L2, i, span, base)
        best = self.best_length(X2, Y2, L2, i, span * _LENGTH_FACTORS)
        if best is None:
            return None
        return Candidate(best.rss - base, *best.model)

    def _placed_merge(self, X, Y, L, i, span, base) -> Candidate | None:
        """The merged PVI ``i`` placed by :meth:`best_place`; a borderline result is settled by
        :meth:`local_nls`. ``rss`` of the result is the change from ``base`` (m^2)."""
        best = self.best_place(X, Y, L, i, span)
        if best is None:
            return None
        move = Candidate(best.rss - base, *best.model)
        if self.price <= move.rss < 10 * self.price:
            # borderline on the grid: let the merged PVI and its neighbours settle exactly
            fitted = self.local_nls(*best.model, i - 2, i + 2)
            if fitted is not None and fitted.rss - base < move.rss:
                move = Candidate(fitted.rss - base, *fitted.model)
        return move

    def removal_is_hopeless(self, X, Y, L, i) -> bool:
        """True when removing PVI ``i`` certainly costs more than the price.

        Parameters
        ----------
        X, Y, L : ndarray
            PVI chainages (m), elevations (m) and curve lengths (m).
        i : int
            The PVI.

        Returns
        -------
        bool

        Notes
        -----
        A bend of grade change dG between arms of length l leaves at least n dG^2 l^2 / 48 of
        squared residual (variance of |u| on [-l, l] times (dG/2)^2), taken with a wide margin
        (30 times the price); the arms are counted from the ends of the PVI's curve.
        """
        G = np.diff(Y) / np.diff(X)
        arm = min(X[i] - X[i - 1], X[i + 1] - X[i]) - L[i] / 2
        if arm <= 0:
            return False
        lo, hi = np.searchsorted(self.xs, [X[i] - arm, X[i] + arm])
        est = (hi - lo) * (G[i] - G[i - 1]) ** 2 * arm**2 / 48.0
        return est > 30.0 * self.price

    def merge_is_hopeless(self, X, L, i) -> bool:
        """True when PVIs ``i`` and ``i + 1`` are separated by a tangent much longer than their
        curves (3 times the longer curve plus 4 bins): one curve cannot stand for a long
        straight between two bends.

        Parameters
        ----------
        X, L : ndarray
            PVI chainages (m) and curve lengths (m).
        i : int
            The first of the two PVIs.

        Returns
        -------
        bool
        """
        tangent = (X[i + 1] - L[i + 1] / 2) - (X[i] + L[i] / 2)
        return tangent > 3.0 * max(L[i], L[i + 1]) + 4.0 * self.opts["bin_m"]

    # ------------------------------------------------------------ selection
    def coalesce(self, X, Y, L):
        """Replace each run of two or more PVIs bending the same way by one curve.

        Parameters
        ----------
        X, Y, L : ndarray
            PVI chainages, elevations and curve lengths (m).

        Returns
        -------
        (X, Y, L)
            The alignment with the runs merged where that passes the information criterion (a
            long curve first segmented as several chords). A run that cannot be one curve is
            split at its longest chord (most likely the tangent between two curves) and each
            part tried in turn.
        """
        sgn = np.sign(np.diff(np.diff(Y) / np.diff(X)))
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
        move = self.merge(X, Y, L, i, j)
        if move is not None and move.rss < self.price:
            return move.model
        if depth >= 6 or j - i < 2:
            return X, Y, L
        k = i + int(np.argmax(np.diff(X[i:j + 1])))  # longest chord lies between k and k + 1
        X, Y, L = self._coalesce_run(X, Y, L, k + 1, j, depth + 1)
        return self._coalesce_run(X, Y, L, i, k, depth + 1)

    def _weakest(self, X, Y) -> int | None:
        """The interior PVI with the smallest grade change among those too weak to keep (too
        small a grade change, or too little data beyond it to define the next grade)."""
        dG = np.diff(np.diff(Y) / np.diff(X))
        weak = (np.abs(dG) < self.min_dg) | (X[1:-1] - X[0] < self.min_arm) | (X[-1] - X[1:-1] < self.min_arm)
        small = np.flatnonzero(weak) + 1
        if not len(small):
            return None
        return int(small[np.argmin(np.abs(dG[small - 1]))])

    def _fill_costs(self, X, Y, L, rem: list, mer: list, place: bool) -> None:
        """Fill the cached cost changes of removing and of merging each PVI (inf: not possible
        or certainly too dear)."""
        nv = len(X)
        dG = np.diff(np.diff(Y) / np.diff(X))
        for i in range(1, nv - 1):
            if rem[i] is None:
                rem[i] = np.inf if self.removal_is_hopeless(X, Y, L, i) else self.removal(X, Y, L, i).rss
            if mer[i] is None:
                same = i + 1 <= nv - 2 and np.sign(dG[i - 1]) == np.sign(dG[i])
                move = None if not same or self.merge_is_hopeless(X, L, i) else self.merge(X, Y, L, i, place=place)
                mer[i] = np.inf if move is None else move.rss

    def select(self, X, Y, L, place: bool = False):
        """Greedy removal and merging of PVIs while the information criterion improves.

        Parameters
        ----------
        X, Y, L : ndarray
            PVI chainages, elevations and curve lengths (m).
        place : bool
            Fit a merged PVI's chainage too (used once the current model has been refined, so
            that the comparison is fair); otherwise it sits where the tangents either side
            meet, with its length fitted.

        Returns
        -------
        (X, Y, L)
            The selected alignment.

        Notes
        -----
        Each step makes the cheapest move while its RSS change is below the price
        3 sigma^2 ln n (Schwarz 1978). Cost changes are cached and recomputed only near the
        last change.
        """
        rem: list = [None] * len(X)
        mer: list = [None] * len(X)
        for _ in range(4 * len(X) + 10):
            nv = len(X)
            if nv <= 2:
                break
            i = self._weakest(X, Y)
            if i is not None:
                X, Y, L = self.removal(X, Y, L, i).model
            else:
                self._fill_costs(X, Y, L, rem, mer, place)
                r, m = np.array(rem[1:nv - 1]), np.array(mer[1:nv - 1])
                if min(r.min(), m.min()) >= self.price:
                    break
                if r.min() <= m.min():
                    i = int(np.argmin(r)) + 1
                    X, Y, L = self.removal(X, Y, L, i).model
                else:
                    i = int(np.argmin(m)) + 1
                    X, Y, L = self.merge(X, Y, L, i, place=place).model
            rem, mer = self._forget(rem, i, 1), self._forget(mer, i, 1)
        return X, Y, L

    @staticmethod
    def _forget(cache: list, i: int, removed: int) -> list:
        """Drop ``removed`` entries at ``i`` and invalidate the neighbourhood of the change."""
        cache = cache[:i] + cache[i + removed:]
        for j in range(max(i - 4, 0), min(i + 5, len(cache))):
            cache[j] = None
        return cache

    # ------------------------------------------------------------ refinement
    def lengths(self, X, Y, L):
        """Each curve's length by least squares, neighbours fixed, largest grade change first.

        Parameters
        ----------
        X, Y, L : ndarray
            PVI chainages, elevations and curve lengths (m).

        Returns
        -------
        (X, Y, L)
            The alignment with the lengths (m) from :meth:`best_length`.
        """
        G = np.diff(Y) / np.diff(X)
        order = np.argsort(-np.abs(np.diff(G))) + 1
        L = L.copy()
        for i in order:
            best = self.best_length(X, Y, L, i)
            if best is not None:
                L[i] = best.L[i]
                Y = best.Y
        return X, Y, L

    def refine(self, X, Y, L, block: int = 10):
        """Joint nonlinear least squares of the chainages, elevations and lengths of all PVIs.

        Parameters
        ----------
        X, Y, L : ndarray
            PVI chainages, elevations and curve lengths (m).
        block : int
            Most PVIs refined together in one problem.

        Returns
        -------
        (X, Y, L)
            The refined alignment, overlaps closed (:func:`close_overlaps`).

        Notes
        -----
        Longer roads are refined in overlapping blocks of ``block`` PVIs, swept along the road
        (block coordinate descent), which keeps the cost proportional to the road's length.
        """
        nv = len(X)
        if nv <= 2:
            Y, _ = solve_elevations(X, L, self.xs, self.zs)
            return X, Y, L
        if nv - 2 <= block:
            inner = np.arange(1, nv - 1)
            X, Y, L, _ = nls_fit(X, Y, L, self.xs, self.zs, inner, np.arange(nv), inner)
            return close_overlaps(X, Y, L, self.xs, self.zs)
        start = 0
        while start < nv - 2:
            end = min(start + block + 1, nv - 1)
            fitted = self.local_nls(X, Y, L, start, end, max_nfev=25, ftol=1e-7)
            if fitted is not None:
                X, Y, L = fitted.model
            if end >= nv - 1:
                break
            start = end - 3  # blocks overlap by two PVIs
        return close_overlaps(X, Y, L, self.xs, self.zs)
