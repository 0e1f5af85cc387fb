"""Read the road surface, not the batter: resolution-aware profiles from a DEM.

A DEM is a grid of cell means over terrain with the road as a prism in it: a crowned
carriageway, then cut or fill batters to natural ground. Two things go wrong when a profile
is read by bilinear interpolation along a digitised centreline, and this module deals with
each:

1. **The centreline is off the carriageway.** Centrelines digitised from imagery or old maps
   are often 2-10 m off. On a DEM fine enough to show the prism (cells up to about 3 m), the
   carriageway is found across a corridor: at every station the DEM is sampled on a
   cross-section, and the carriageway is the band of the design width whose cross-slope is
   smallest relative to the slopes just outside it (a near-level platform between batters).
   The cost is smoothed along the road, because a digitising offset drifts slowly, and the
   chosen offset is then smoothed again with a running median. The profile is read at that
   offset (:func:`carriageway_offsets`).
2. **Cells are crossed at an angle.** Where the road crosses the grid at a shallow angle
   theta to a grid axis, bilinear samples of cell means mix carriageway and batter in a
   pattern that repeats every ``cell / |sin theta|`` along the road (and every
   ``cell / |cos theta|`` for the other axis). A moving average over exactly one period
   removes a periodic ripple and all its harmonics, so the profile is filtered by two
   running means whose lengths follow the local crossing angle (:func:`cell_crossing_filter`).
   The filter leaves tangents unchanged and the total grade change of a curve too; it widens a
   curve's curvature from a box of length L to the convolution of three boxes, whose second
   moment is ``(L^2 + W1^2 + W2^2) / 12``. The fitted length is corrected back by that moment
   identity (:func:`deconvolved_length`).

The data then support no feature shorter than their *resolution length*
(:func:`resolution_length_m`): twice the cell, and at least the filter length.

References
----------
The moving-average treatment of periodic interpolation error is standard signal processing
(e.g. Smith, *The Scientist and Engineer's Guide to Digital Signal Processing*, 1997, ch. 15:
a moving average has zeros at multiples of 1/width). Road prism geometry (crowned
carriageway, cut and fill batters): AASHTO Green Book (2018), ch. 4, cross-section elements.
The carriageway search is our own method; it is checked on generated prisms in the tests and
the realistic-ground benchmark.
"""

from __future__ import annotations

import numpy as np
from scipy.ndimage import median_filter, uniform_filter1d


def running_mean(x: np.ndarray, y: np.ndarray, width: np.ndarray | float) -> np.ndarray:
    """Mean of the piecewise-linear function through ``(x, y)`` over ``[x - w/2, x + w/2]``.

    Parameters
    ----------
    x : ndarray
        Increasing chainages (m), evenly spaced or not.
    y : ndarray
        Values at ``x``; NaN marks a gap, and any window touching a gap gives NaN.
    width : float or ndarray
        Window length (m), one for all or one per point. Windows are clipped at the ends.

    Returns
    -------
    ndarray
        The windowed mean at every ``x``: the exact integral of the linear interpolant
        (trapezoid rule) divided by the clipped window's length.

    Notes
    -----
    ``mean(x) = (F(x + w/2) - F(x - w/2)) / w`` with F the running integral of the
    piecewise-linear function (cumulative trapezoids plus the partial piece).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    w = np.broadcast_to(np.asarray(width, dtype=float), x.shape)
    if len(x) < 2:
        return y.copy()
    bad = ~np.isfinite(y)
    yy = np.where(bad, 0.0, y)
    area = np.concatenate([[0.0], np.cumsum(0.5 * (yy[1:] + yy[:-1]) * np.diff(x))])
    nbad = np.concatenate([[0.0], np.cumsum((bad[1:] | bad[:-1]).astype(float))])
    lo = np.clip(x - w / 2, x[0], x[-1])
    hi = np.clip(x + w / 2, x[0], x[-1])

    def integral(t):
        i = np.clip(np.searchsorted(x, t, side="right") - 1, 0, len(x) - 2)
        u = t - x[i]
        slope = (yy[i + 1] - yy[i]) / np.maximum(x[i + 1] - x[i], 1e-12)
        return area[i] + u * (yy[i] + 0.5 * slope * u)

    span = hi - lo
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(span > 0, (integral(hi) - integral(lo)) / span, yy)
    i_lo = np.clip(np.searchsorted(x, lo, side="right") - 1, 0, len(x) - 1)
    i_hi = np.clip(np.searchsorted(x, hi, side="left"), 0, len(x) - 1)
    touched = (nbad[i_hi] - nbad[i_lo]) > 0
    out[touched | bad] = np.nan
    return out


def crossing_periods(heading_rad: np.ndarray, cell_m: float, max_m: float) -> tuple[np.ndarray, np.ndarray]:
    """Lengths along the road (m) over which the road crosses one column and one row of cells.

    Parameters
    ----------
    heading_rad : ndarray
        Direction of the road against the grid's x axis (radians).
    cell_m : float
        Cell size (m).
    max_m : float
        Cap on each period (m): a road nearly parallel to a grid axis crosses it very slowly.

    Returns
    -------
    (ndarray, ndarray)
        ``cell / |cos theta|`` and ``cell / |sin theta|``, each capped at ``max_m``.
    """
    c, s = np.abs(np.cos(heading_rad)), np.abs(np.sin(heading_rad))
    with np.errstate(divide="ignore"):
        p1 = np.minimum(np.where(c > 0, cell_m / c, np.inf), max_m)
        p2 = np.minimum(np.where(s > 0, cell_m / s, np.inf), max_m)
    return p1, p2


MAX_FILTER_CELLS = 3.0  # longest cell-crossing filter, in cells


def cell_crossing_filter(chain_m: np.ndarray, z_m: np.ndarray, heading_rad: np.ndarray, cell_m: float,
                         max_factor: float = MAX_FILTER_CELLS) -> tuple[np.ndarray, np.ndarray]:
    """Remove the ripple of bilinear samples of cell means along a road crossing the grid.

    Two running means (:func:`running_mean`) whose lengths are the local crossing periods
    (:func:`crossing_periods`, each capped at ``max_factor`` cells).

    Parameters
    ----------
    chain_m, z_m : ndarray
        Densely sampled profile (m); sample at a quarter of a cell or finer.
    heading_rad : ndarray
        Road direction against the grid's x axis at each sample (radians).
    cell_m : float
        DEM cell size (m).
    max_factor : float
        Longest filter, in cells.

    Returns
    -------
    (ndarray, ndarray)
        The filtered profile (m) and, per sample, the filter's equivalent box length
        ``sqrt(W1^2 + W2^2)`` (m), used by :func:`deconvolved_length`.

    Notes
    -----
    A moving average of width W has zeros at frequencies k / W, so one over exactly a period
    of the ripple removes it with all its harmonics.

    References
    ----------
    Smith, *The Scientist and Engineer's Guide to Digital Signal Processing*, 1997, ch. 15.
    """
    p1, p2 = crossing_periods(heading_rad, cell_m, max_factor * cell_m)
    once = running_mean(chain_m, z_m, p1)
    twice = running_mean(chain_m, once, p2)
    return twice, np.sqrt(p1**2 + p2**2)


def deconvolved_length(length_m: np.ndarray, box_m: np.ndarray) -> np.ndarray:
    """Curve length before a box filter of equivalent length ``box_m`` widened it.

    Parameters
    ----------
    length_m : array_like
        Length of the fitted curve (m), measured on the filtered profile.
    box_m : array_like
        Equivalent box length of the filter applied (m), from :func:`cell_crossing_filter`.

    Returns
    -------
    ndarray
        ``sqrt(max(L_fit^2 - W^2, 0))`` (m).

    Notes
    -----
    A symmetric parabolic curve has uniform curvature over its length L; a running mean of
    length W spreads it, and second moments add: ``L_fit^2 = L^2 + W^2`` (each box's
    variance is length^2 / 12).
    """
    L = np.asarray(length_m, dtype=float)
    W = np.asarray(box_m, dtype=float)
    return np.sqrt(np.maximum(L**2 - W**2, 0.0))


def carriageway_offsets(section_z: np.ndarray, offsets_m: np.ndarray, station_step_m: float,
                        width_m: float = 7.0, along_m: float = 100.0, closeness: float = 0.001) -> np.ndarray:
    """Lateral offset (m, + = left) of the carriageway's centre at each station.

    Parameters
    ----------
    section_z : ndarray, shape (stations, offsets)
        Ground elevations (m) on cross-sections at ``offsets_m``; NaN where unknown.
    offsets_m : ndarray
        Evenly spaced lateral offsets (m) from the digitised centreline.
    station_step_m : float
        Distance between the cross-sections (m).
    width_m : float
        Carriageway width including shoulders (m).
    along_m : float
        Length of road over which the cost is averaged and the offset smoothed (m).
    closeness : float
        Cost per metre of offset, so that on level ground the given line is kept.

    Returns
    -------
    ndarray
        Offset per station (m).

    Notes
    -----
    At each offset o, ``inside`` is the mean absolute cross-slope over ``[o - w/2, o + w/2]``
    and ``outside`` the mean over the two flanks of width w/2 beyond it. The carriageway is a
    near-level platform between batters, so it minimises
    ``cost(o) = inside(o) - (outside_left(o) + outside_right(o)) / 2 + closeness * |o|``,
    averaged over ``along_m`` of road; the argmin is smoothed by a running median over the
    same length.
    """
    o = np.asarray(offsets_m, dtype=float)
    do = float(o[1] - o[0])
    k = max(int(round(width_m / do)), 1)
    cost = platform_cost(np.asarray(section_z, dtype=float), do, k) + closeness * np.abs(o)[None, :]
    n_along = max(int(round(along_m / station_step_m)), 1)
    smooth = _mean_along(cost, n_along)
    # offsets whose window runs off the sampled corridor cannot be judged
    half = k // 2
    smooth[:, :half] = np.inf
    smooth[:, len(o) - half:] = np.inf
    best = np.argmin(smooth, axis=1)
    none = ~np.isfinite(smooth[np.arange(len(best)), best])
    off = np.where(none, 0.0, o[best])
    if len(off) > 2:
        off = median_filter(off, size=n_along | 1, mode="nearest")
    return off


def _windowed_mean(values: np.ndarray, size: int, axis: int, min_share: float) -> np.ndarray:
    """Running mean of the finite values over ``size`` samples along ``axis``; NaN where fewer
    than ``min_share`` of the window is finite."""
    finite = np.isfinite(values)
    total = uniform_filter1d(np.where(finite, values, 0.0), size, axis=axis, mode="nearest")
    share = uniform_filter1d(finite.astype(float), size, axis=axis, mode="nearest")
    return np.where(share > min_share, total / np.maximum(share, 1e-9), np.nan)


def platform_cost(section_z: np.ndarray, offset_step_m: float, width_samples: int) -> np.ndarray:
    """Cost of taking each offset as the carriageway's centre, per station.

    Parameters
    ----------
    section_z : ndarray, shape (stations, offsets)
        Ground elevations on the cross-sections (m); NaN where unknown.
    offset_step_m : float
        Spacing of the offsets (m).
    width_samples : int
        Carriageway width, in offset samples.

    Returns
    -------
    ndarray, shape (stations, offsets)
        The mean absolute cross-slope (fraction) over the band of ``width_samples`` samples,
        less the mean of the two flanks beyond it (see :func:`carriageway_offsets`).
    """
    slope = np.abs(np.gradient(section_z, offset_step_m, axis=1))
    inside = _windowed_mean(slope, width_samples, 1, 0.5)
    side = _windowed_mean(slope, max(width_samples // 2, 1), 1, 0.5)
    shift = max(int(round(0.75 * width_samples)), 1)
    left = np.full_like(side, np.nan)
    right = np.full_like(side, np.nan)
    left[:, shift:] = side[:, :-shift]
    right[:, :-shift] = side[:, shift:]
    outside = 0.5 * (np.where(np.isfinite(left), left, 0.0) + np.where(np.isfinite(right), right, 0.0))
    return inside - outside


def _mean_along(cost: np.ndarray, n_along: int) -> np.ndarray:
    """The cost averaged over ``n_along`` stations (inf where too few are known)."""
    smooth = _windowed_mean(cost, n_along, 0, 0.3)
    return np.where(np.isfinite(smooth), smooth, np.inf)


def dem_vertical_error_m(cell_m: float | None) -> float:
    """Vertical error assumed for a DEM of this cell size when the user states none.

    Parameters
    ----------
    cell_m : float or None
        DEM cell size (m); ``None`` (ground points) gives 0.

    Returns
    -------
    float
        One standard deviation (m): 0.10 up to 3 m cells, 0.5 up to 15 m, 1.5 beyond.

    Notes
    -----
    0.10 m: airborne LiDAR, whose common specification is an RMSEz of 10 cm (USGS Lidar
    Base Specification, quality level 2; from memory). 0.5 m: national DEMs made by
    photogrammetry or from LiDAR resampled (from memory, typical of published accuracy
    statements). 1.5 m: global 30 m products, whose relative (point-to-point) error is of this
    order (from memory). The assumption is stated in ``run.json`` and the report; the
    residuals about the fit replace it where they are larger (``ground.vertical_error_m``).
    """
    if cell_m is None or not np.isfinite(cell_m):
        return 0.0
    if cell_m <= 3.0:
        return 0.10
    if cell_m <= 15.0:
        return 0.5
    return 1.5


def resolution_length_m(cell_m: float | None, spacing_m: float | None, step_m: float,
                        filter_m: float = 0.0) -> float:
    """Shortest feature the ground data can resolve along a road.

    Parameters
    ----------
    cell_m : float or None
        DEM cell size (m).
    spacing_m : float or None
        Typical spacing of ground points (m).
    step_m : float
        Station step of the profile (m).
    filter_m : float, default 0.0
        Equivalent length of the filter applied to the profile (m).

    Returns
    -------
    float
        ``max(2 max(cell, spacing), step, filter)`` (m).

    Notes
    -----
    Two samples per feature at the data's own spacing (the Nyquist limit; a DEM's spacing is
    its cell), never less than the station step or the filter (common practice, no source).
    """
    own = [v for v in (cell_m, spacing_m) if v is not None and np.isfinite(v) and v > 0]
    return float(max([2.0 * max(own) if own else 0.0, step_m, filter_m]))
