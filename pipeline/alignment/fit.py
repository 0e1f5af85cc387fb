"""Recover the vertical alignment (tangents and symmetric parabolic curves) from a profile.

The model (:mod:`pipeline.alignment.model`; AASHTO Green Book, ch. 3) is a chain of PVIs
joined by constant-grade tangents, each interior PVI carrying a symmetric parabolic curve.
Method, in order:

1. **Noise level** sigma from second differences of the profile, robustly (Gasser, Sroka &
   Jennen-Steinmetz 1986; Hampel 1974): :func:`pipeline.alignment.segmentation.noise_sigma`.
2. **Segmentation** into straight pieces by optimal partitioning (Jackson et al. 2005) with
   PELT pruning (Killick, Fearnhead & Eckley 2012), penalty per breakpoint 2 sigma^2 ln n:
   :mod:`pipeline.alignment.segmentation`.
3. **Initial model**: PVIs where adjacent chords intersect, elevations by linear least
   squares, and each curve's length by least squares over a grid of lengths on the samples
   around its PVI.
4. **Model selection** by the Bayesian information criterion, price 3 sigma^2 ln n per PVI
   (Schwarz 1978): :mod:`pipeline.alignment.selection`.
5. **Joint refinement** of all PVI chainages, elevations and curve lengths by nonlinear least
   squares (Levenberg-Marquardt; Marquardt 1963): :mod:`pipeline.alignment.optimisation`.

Steps 1 to 4 work on means over bins of ``bin_m`` metres, the refinement on every station.
The curve table is built by :mod:`pipeline.alignment.curves`.

References
----------
AASHTO (2018). *A Policy on Geometric Design of Highways and Streets*, 7th ed., ch. 3.

Gasser, T., Sroka, L. & Jennen-Steinmetz, C. (1986). *Biometrika* 73(3), 625-633.

Jackson, B. et al. (2005). *IEEE Signal Processing Letters* 12(2), 105-108.

Killick, R., Fearnhead, P. & Eckley, I. A. (2012). *JASA* 107(500), 1590-1598.

Schwarz, G. (1978). *Annals of Statistics* 6(2), 461-464.

Marquardt, D. W. (1963). *J. SIAM* 11(2), 431-441.
"""

from __future__ import annotations

import numpy as np

from ..profile.corridor import deconvolved_length
from .curves import CURVE_COLUMNS, curve_table, empty_curves
from .model import Alignment, design_matrix, model_grade, model_z
from .optimisation import _jacobian, levenberg_marquardt, nls_fit, solve_elevations
from .segmentation import bin_means, initial_vertices, noise_sigma, segment_lines
from .selection import StretchFitter
from ..core.spec import section_defaults

__all__ = ["DEFAULTS", "CURVE_COLUMNS", "Alignment", "RoadProfile", "_jacobian", "bin_means", "design_matrix",
           "empty_curves", "fit_profile", "fit_stretch", "levenberg_marquardt", "model_grade", "model_z",
           "nls_fit", "noise_sigma", "segment_lines"]

DEFAULTS = section_defaults("alignment")  # the [alignment] settings (pipeline/core/spec.py)


def _initial_model(xs, zs, step_m: float, sigma: float, opts: dict):
    """Bin the stretch, segment the bin means, and put PVIs where the chords meet.

    Returns the fitter on the bin means and the first ``(X, Y, L)`` (no curves yet).
    """
    width = max(opts["bin_m"], step_m)
    per_bin = max(int(round(width / step_m)), 1)
    if per_bin > 1:
        xb, zb, _ = bin_means(xs, zs, width)
        sigma_b = sigma / np.sqrt(per_bin)
    else:
        xb, zb, sigma_b = xs, zs, sigma
    coarse = StretchFitter(xb, zb, sigma_b, opts)
    min_len = max(3, int(np.ceil(opts["min_tangent_m"] / width)))
    beta = 2.0 * sigma_b**2 * np.log(max(len(xb), 3))
    X = initial_vertices(xb, zb, segment_lines(xb, zb, beta, min_len))
    X[0], X[-1] = xs[0], xs[-1]  # the alignment spans every station, not just the bin means
    L = np.zeros(len(X))
    Y, _ = solve_elevations(X, L, xb, zb)
    return coarse, (X, Y, L)


def fit_stretch(xs: np.ndarray, zs: np.ndarray, step_m: float, opts: dict | None = None,
                sigma: float | None = None) -> Alignment:
    """Fit the vertical alignment of one stretch of valid profile.

    Parameters
    ----------
    xs, zs : ndarray
        Station chainages and elevations (m), ascending chainage, no NaN.
    step_m : float
        Station spacing (m).
    opts : dict, optional
        Settings overriding :data:`DEFAULTS`.
    sigma : float, optional
        Noise standard deviation (m); default from :func:`noise_sigma`.

    Returns
    -------
    Alignment
        The fitted alignment.

    Notes
    -----
    The structure (how many PVIs, roughly where) is found on means over bins of ``bin_m``
    metres, whose noise is sigma / sqrt(stations per bin); the joint refinement then uses
    every station, and selection with fitted PVI chainages follows until it changes nothing
    (at most three rounds).

    References
    ----------
    See the module notes.
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
    coarse, (X, Y, L) = _initial_model(xs, zs, step_m, sigma, opts)
    fine = StretchFitter(xs, zs, sigma, opts)
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


class RoadProfile:
    """The fitted alignment of a whole road (one or more stretches).

    Elevation and grade at any chainage, NaN outside the fitted stretches.

    Parameters
    ----------
    stretches : list of Alignment
        The road's fitted stretches, in chainage order.
    """

    def __init__(self, stretches: list[Alignment]):
        self.stretches = stretches
        self.starts = np.array([a.x[0] for a in stretches])
        self.ends = np.array([a.x[-1] for a in stretches])
        self._grid = None

    def z_grid(self, x, step_m: float = 1.0):
        """Elevation by linear interpolation in a table of the alignment, computed once.

        Parameters
        ----------
        x : array_like
            Chainages (m).
        step_m : float
            Spacing of the table (m); for the many look-ups of the hazard stage, where a few
            millimetres do not matter.

        Returns
        -------
        ndarray
            Elevation (m); NaN off the fitted stretches.
        """
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
        """Elevation of the fitted alignment.

        Parameters
        ----------
        x : array_like
            Chainages (m).

        Returns
        -------
        ndarray
            Elevation (m); NaN off the fitted stretches.
        """
        return self._each(x, lambda a, v: a.z(v))

    def grade(self, x):
        """Grade of the fitted alignment.

        Parameters
        ----------
        x : array_like
            Chainages (m).

        Returns
        -------
        ndarray
            Grade (fraction, + uphill with increasing chainage); NaN off the fitted stretches.
        """
        return self._each(x, lambda a, v: a.grade(v))


def _fit_piece(ch, z, piece, step_m, opts, sigma, min_len, filter_m) -> Alignment:
    """The alignment of one stretch of valid stations ``piece`` (indices)."""
    if len(piece) < max(min_len, 3):
        # too short for a PVI with tangents either side: one least-squares grade
        xs, zs = ch[piece], z[piece]
        b, a = np.polyfit(xs - xs[0], zs, 1) if np.ptp(xs) > 0 else (0.0, float(zs.mean()))
        return Alignment(x=np.array([xs[0], xs[-1]]), y=np.array([a, a + b * (xs[-1] - xs[0])]),
                         L=np.zeros(2), sigma=sigma, n=len(piece))
    al = fit_stretch(ch[piece], z[piece], step_m, opts, sigma=sigma)
    if filter_m is not None and len(al.x) > 2:
        box = np.interp(al.x[1:-1], ch, filter_m)
        al.L[1:-1] = deconvolved_length(al.L[1:-1], box)
    return al


def fit_profile(chainage_m: np.ndarray, z_m: np.ndarray, step_m: float, opts: dict | None = None,
                filter_m: np.ndarray | None = None):
    """Fit a road's profile.

    Parameters
    ----------
    chainage_m : ndarray
        Station chainages (m), ascending.
    z_m : ndarray
        Ground elevations (m); NaN = no data.
    step_m : float
        Station spacing (m).
    opts : dict, optional
        Settings overriding :data:`DEFAULTS`.
    filter_m : ndarray, optional
        Per station, the equivalent length (m) of a running mean the profile went through
        (:func:`pipeline.profile.corridor.cell_crossing_filter`); each fitted curve's length is
        corrected for it (:func:`pipeline.profile.corridor.deconvolved_length`).

    Returns
    -------
    (alignments, curves, fitted_z, grade)
        One :class:`Alignment` per stretch; a DataFrame with one row per curve
        (:func:`pipeline.alignment.curves.curve_table`); fitted elevation (m) and grade
        (fraction) per station, NaN outside fitted stretches.

    Notes
    -----
    The profile is split where data are missing over more than ``split_gap_m``; each stretch
    gets its own alignment (:func:`fit_stretch`), or one least-squares grade where it is too
    short for a PVI with tangents either side.

    References
    ----------
    See the module notes.
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
        return stretches, curve_table([], ch, z, fitted, opts), fitted, grade
    sigma = noise_sigma(np.where(valid, z, np.nan))
    breaks = np.flatnonzero(np.diff(ch[idx]) > opts["split_gap_m"])
    min_len = max(3, int(np.ceil(opts["min_tangent_m"] / step_m)))
    for piece in np.split(idx, breaks + 1):
        if len(piece) < 2:
            continue
        al = _fit_piece(ch, z, piece, step_m, opts, sigma, min_len, filter_m)
        stretches.append(al)
        span = (ch >= al.x[0]) & (ch <= al.x[-1])
        fitted[span] = al.z(ch[span])
        grade[span] = al.grade(ch[span])
    return stretches, curve_table(stretches, ch, z, fitted, opts), fitted, grade
