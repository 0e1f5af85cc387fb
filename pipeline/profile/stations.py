"""Chainage, stations and ground elevation along a road (the long profile).

All functions are plain numpy/shapely computations on one road; reading files
is done in :mod:`pipeline.ingest`.

- Chainage is measured in metres along the centreline from its first vertex
  in the road's metric working CRS (shapely's planar length).
- Stations lie at a uniform step (default 5 m) from chainage 0.
- DEM elevations are interpolated bilinearly between the four surrounding cell
  centres (the standard bilinear form, e.g. Press et al., *Numerical Recipes*,
  3rd ed., section 3.6). A station touching a nodata cell stays missing.
- Ground points are located on the centreline (nearest point, as shapely's
  ``line_locate_point``, found through a KD-tree of the vertices; see
  :class:`Polyline`) and reduced to stations by a local straight-line fit within each station's
  bin of half a step either side, which is unbiased on a constant grade.
- Gaps in the ground data: a station between data points less than
  ``max_gap_m`` apart is interpolated and marked ``filled``; across a longer gap
  it stays missing (NaN, ``missing``). Nothing is filled silently.
"""

from __future__ import annotations

import numpy as np
import shapely
from scipy.spatial import cKDTree

from ..ingest.readers import map_to_pixel

# ground_flag values, in profiles.parquet as text ("masked": an artefact, see pipeline.profile.artefacts)
MEASURED, FILLED, MISSING, MASKED = 0, 1, 2, 3
FLAG_NAMES = np.array(["measured", "filled", "missing", "masked"], dtype=object)


def station_chainages(length_m: float, step_m: float) -> np.ndarray:
    """Chainages of the stations along a road.

    Parameters
    ----------
    length_m : float
        Road length (m), positive.
    step_m : float
        Station step (m), positive.

    Returns
    -------
    ndarray
        ``0, step, 2 step, ...`` up to ``length_m`` (m).

    Raises
    ------
    ValueError
        For a length or step that is not a positive number.
    """
    if not np.isfinite(length_m) or length_m <= 0:
        raise ValueError(f"road length must be positive, got {length_m!r} m")
    if not np.isfinite(step_m) or step_m <= 0:
        raise ValueError(f"profile step must be positive, got {step_m!r} m")
    n = int(np.floor(length_m / step_m + 1e-9)) + 1
    return np.arange(n, dtype=float) * step_m


class Polyline:
    """A centreline as vertex arrays with cumulative chainage, for fast vectorised work.

    Interpolation is a binary search (O(log n) a point); location of points uses a KD-tree of
    the vertices of the line segmentised to ``seg_m``, then exact projection onto the segments
    around the nearest vertices. Same planar geometry as shapely's ``line_interpolate_point``
    and ``line_locate_point``, which walk every vertex for every point.

    Parameters
    ----------
    line : shapely LineString
        The centreline in a metric CRS (m).
    seg_m : float, default 10.0
        Longest segment kept between vertices for the KD-tree (m).
    """

    def __init__(self, line, seg_m: float = 10.0):
        xy = shapely.get_coordinates(shapely.segmentize(line, seg_m))
        keep = np.concatenate([[True], np.any(np.diff(xy, axis=0) != 0, axis=1)])
        self.xy = xy[keep]
        d = np.hypot(*np.diff(self.xy, axis=0).T)
        self.chain = np.concatenate([[0.0], np.cumsum(d)])
        self.length = float(self.chain[-1])
        self._tree = None

    def at(self, chainage_m) -> tuple[np.ndarray, np.ndarray]:
        """Coordinates of the points at given chainages.

        Parameters
        ----------
        chainage_m : float or array_like
            Chainages (m), clipped to the line.

        Returns
        -------
        (ndarray, ndarray)
            x and y (m) of the points, interpolated linearly between vertices.
        """
        c = np.clip(np.asarray(chainage_m, dtype=float), 0.0, self.length)
        return np.interp(c, self.chain, self.xy[:, 0]), np.interp(c, self.chain, self.xy[:, 1])

    def cut(self, start_m: float, end_m: float) -> np.ndarray:
        """Vertices of the piece of line between two chainages.

        Parameters
        ----------
        start_m, end_m : float
            Chainages of the ends (m), in either order, clipped to the line.

        Returns
        -------
        ndarray, shape (n, 2)
            Interpolated ends with the line's own vertices between (m); a single chainage gives
            two equal points.
        """
        a, b = sorted((float(np.clip(start_m, 0, self.length)), float(np.clip(end_m, 0, self.length))))
        i, j = np.searchsorted(self.chain, [a, b], side="right")
        inner = self.xy[i:j] if j > i else self.xy[:0]
        ends = np.column_stack(self.at(np.array([a, b])))
        return np.vstack([ends[:1], inner, ends[1:]])

    def locate(self, x, y, k: int = 4) -> tuple[np.ndarray, np.ndarray]:
        """Chainage of each point's nearest point on the line, and its signed offset.

        Parameters
        ----------
        x, y : array_like
            Point coordinates (m), in the line's CRS.
        k : int, default 4
            Nearest vertices whose adjacent segments are searched.

        Returns
        -------
        chainage : ndarray
            Chainage of the foot of each point (m).
        offset : ndarray
            Distance to the line (m), + left of the direction of increasing chainage.
        """
        if self._tree is None:
            self._tree = cKDTree(self.xy)
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        nseg = len(self.xy) - 1
        if nseg < 1:
            return np.zeros(len(x)), np.hypot(x - self.xy[0, 0], y - self.xy[0, 1])
        _, idx = self._tree.query(np.column_stack([x, y]), k=min(k, len(self.xy)))
        idx = np.atleast_2d(idx.T).T if idx.ndim == 1 else idx
        # segments either side of each candidate vertex
        segs = np.clip(np.concatenate([idx - 1, idx], axis=1), 0, nseg - 1)
        a = self.xy[segs]
        b = self.xy[segs + 1]
        ab = b - a
        L2 = np.maximum(np.sum(ab * ab, axis=2), 1e-300)
        px = np.stack([x, y], axis=1)[:, None, :]
        t = np.clip(np.sum((px - a) * ab, axis=2) / L2, 0.0, 1.0)
        foot = a + t[..., None] * ab
        dist = np.hypot(*(px - foot).transpose(2, 0, 1))
        j = np.argmin(dist, axis=1)
        rows = np.arange(len(x))
        s, tt = segs[rows, j], t[rows, j]
        chain = self.chain[s] + tt * (self.chain[s + 1] - self.chain[s])
        abj = ab[rows, j]
        rel = (px[:, 0, :] - foot[rows, j])
        side = np.sign(abj[:, 0] * rel[:, 1] - abj[:, 1] * rel[:, 0])
        side[side == 0] = 1.0
        return chain, dist[rows, j] * side


def bilinear(array: np.ndarray, affine, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Bilinear interpolation of a raster at map coordinates.

    Parameters
    ----------
    array : ndarray, shape (rows, cols)
        Raster values (m), NaN for nodata.
    affine : affine.Affine
        The raster's transform (rasterio/affine convention: pixel corner at (0, 0)).
    x, y : array_like
        Map coordinates (m) in the raster's CRS.

    Returns
    -------
    ndarray
        Interpolated values (m). NaN outside the raster or where any of the four neighbouring
        cells with a non-zero weight is nodata. Between the outermost cell centres and the
        raster edge the edge cells are used (constant extrapolation over half a cell).

    Notes
    -----
    ``z = (1-fr)(1-fc) z00 + (1-fr) fc z01 + fr (1-fc) z10 + fr fc z11`` with fc, fr the
    fractional column and row from the cell centres. The standard bilinear form (Press et al.,
    *Numerical Recipes*, 3rd ed., section 3.6).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    rows, cols = array.shape
    col_f, row_f = map_to_pixel(affine, x, y)
    inside = (col_f >= 0) & (col_f <= cols) & (row_f >= 0) & (row_f <= rows)
    # continuous index of cell centres
    c = np.clip(col_f - 0.5, 0.0, cols - 1.0)
    r = np.clip(row_f - 0.5, 0.0, rows - 1.0)
    c0 = np.clip(np.floor(c).astype(np.int64), 0, max(cols - 2, 0))
    r0 = np.clip(np.floor(r).astype(np.int64), 0, max(rows - 2, 0))
    c1 = np.minimum(c0 + 1, cols - 1)
    r1 = np.minimum(r0 + 1, rows - 1)
    fc = c - c0
    fr = r - r0
    z00, z01 = array[r0, c0], array[r0, c1]
    z10, z11 = array[r1, c0], array[r1, c1]
    w00, w01 = (1 - fr) * (1 - fc), (1 - fr) * fc
    w10, w11 = fr * (1 - fc), fr * fc
    # a neighbour with zero weight must not spread its nodata
    terms = np.stack([w00 * np.where(w00 > 0, z00, 0.0), w01 * np.where(w01 > 0, z01, 0.0),
                      w10 * np.where(w10 > 0, z10, 0.0), w11 * np.where(w11 > 0, z11, 0.0)])
    nodata = ((w00 > 0) & np.isnan(z00)) | ((w01 > 0) & np.isnan(z01)) | \
             ((w10 > 0) & np.isnan(z10)) | ((w11 > 0) & np.isnan(z11))
    z = terms.sum(axis=0)
    z[nodata | ~inside] = np.nan
    return z


def point_spacing_m(chain_m: np.ndarray) -> float | None:
    """Typical spacing of ground points along a road.

    Parameters
    ----------
    chain_m : array_like
        Chainages of the points (m); non-finite ones are ignored.

    Returns
    -------
    float or None
        The median gap between consecutive distinct chainages (m); ``None`` for fewer than two
        points.
    """
    c = np.unique(np.asarray(chain_m, dtype=float)[np.isfinite(chain_m)])
    if len(c) < 2:
        return None
    return float(np.median(np.diff(c)))


def locate_points(line, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Chainage of each point's nearest point on a line, and its signed offset.

    Parameters
    ----------
    line : shapely LineString
        The centreline (m).
    x, y : ndarray
        Point coordinates (m).

    Returns
    -------
    (ndarray, ndarray)
        Chainage (m) and offset (m, + = left), as :meth:`Polyline.locate`.
    """
    return Polyline(line).locate(x, y)


def regularise(chain: np.ndarray, z: np.ndarray, stations: np.ndarray, step_m: float,
               max_gap_m: float) -> tuple[np.ndarray, np.ndarray]:
    """Ground elevation at ``stations`` from scattered ``(chain, z)`` samples (m).

    Parameters
    ----------
    chain, z : ndarray
        Sample chainages and elevations (m); NaN samples are the gaps and are ignored.
    stations : ndarray
        Evenly spaced station chainages (m).
    step_m, max_gap_m : float
        Station step and longest gap interpolated across (m).

    Returns
    -------
    (ndarray, ndarray)
        Elevation per station (m; :func:`binned_line_fit`, else linear interpolation) and
        flag MEASURED, FILLED or MISSING (see the module notes).
    """
    chain = np.asarray(chain, dtype=float)
    z = np.asarray(z, dtype=float)
    keep = np.isfinite(chain) & np.isfinite(z)
    chain, z = chain[keep], z[keep]
    n_st = len(stations)
    out = np.full(n_st, np.nan)
    flag = np.full(n_st, MISSING, dtype=np.int8)
    if len(chain) == 0:
        return out, flag
    order = np.argsort(chain, kind="stable")
    chain, z = chain[order], z[order]

    half = 0.5 * step_m
    fitted, has = binned_line_fit(chain, z, stations, step_m)

    # interpolation between neighbouring samples, and the width of the bracketing gap
    interp = np.interp(stations, chain, z)
    right = np.searchsorted(chain, stations, side="left")
    left = right - 1
    width = np.full(n_st, np.inf)
    both = (left >= 0) & (right < len(chain))
    width[both] = chain[right[both]] - chain[left[both]]
    exact = (right < len(chain)) & (chain[np.minimum(right, len(chain) - 1)] == stations)
    width[exact] = 0.0
    near_end = ((stations < chain[0]) & (chain[0] - stations <= half)) | \
               ((stations > chain[-1]) & (stations - chain[-1] <= half))
    width[near_end] = 0.0

    spacing = np.median(np.diff(chain)) if len(chain) > 1 else step_m
    normal = max(1.5 * spacing, step_m)  # a bracket wider than usual is a gap, however short
    measured = has | (width <= normal)
    filled = ~measured & (width <= max_gap_m)
    out[measured] = np.where(has[measured], fitted[measured], interp[measured])
    flag[measured] = MEASURED
    out[filled] = interp[filled]
    flag[filled] = FILLED
    return out, flag


def run_lengths(mask: np.ndarray) -> list[tuple[int, int]]:
    """The runs of True in a boolean mask.

    Parameters
    ----------
    mask : array_like of bool
        The mask.

    Returns
    -------
    list of (int, int)
        ``(start, stop)`` index pairs, ``stop`` exclusive.
    """
    m = np.concatenate([[False], np.asarray(mask, dtype=bool), [False]])
    d = np.diff(m.astype(np.int8))
    return list(zip(np.flatnonzero(d == 1), np.flatnonzero(d == -1)))


def binned_line_fit(chain: np.ndarray, z: np.ndarray, stations: np.ndarray, step_m: float
                    ) -> tuple[np.ndarray, np.ndarray]:
    """Elevation at each station from a straight line fitted to the samples in its bin.

    Parameters
    ----------
    chain : ndarray
        Chainages of the samples (m), sorted, all finite.
    z : ndarray
        Elevations of the samples (m), all finite.
    stations : ndarray
        Evenly spaced station chainages (m).
    step_m : float
        Station step (m); each station's bin is half a step either side of it.

    Returns
    -------
    fitted : ndarray
        The fitted line's value at each station (m); the bin's mean where the samples do not
        spread along the road (a single sample, or all at one chainage); NaN for an empty bin.
    has : ndarray of bool
        True where the bin holds at least one sample.

    Notes
    -----
    Ordinary least squares of z on u = chain - station within each bin, from the sums
    ``n, sum u, sum z, sum u^2, sum u z``: slope ``b = Sxy / Sxx`` with
    ``Sxx = sum u^2 - n ubar^2`` and ``Sxy = sum u z - n ubar zbar``, and the value at the
    station ``zbar - b ubar``. Unbiased on a constant grade, unlike the bin mean when the
    samples sit off-centre in their bin. The textbook estimator (e.g. Draper & Smith,
    *Applied Regression Analysis*, ch. 1; from memory).
    """
    n_st = len(stations)
    half = 0.5 * step_m
    idx = np.floor((chain - stations[0] + half) / step_m).astype(np.int64)
    inbin = (idx >= 0) & (idx < n_st)
    bi, u, zz = idx[inbin], chain[inbin] - stations[idx[inbin]], z[inbin]
    cnt = np.bincount(bi, minlength=n_st).astype(float)
    su = np.bincount(bi, u, n_st)
    sz = np.bincount(bi, zz, n_st)
    suu = np.bincount(bi, u * u, n_st)
    suz = np.bincount(bi, u * zz, n_st)
    with np.errstate(invalid="ignore", divide="ignore"):
        ubar, zbar = su / cnt, sz / cnt
        sxx = suu - cnt * ubar**2
        sxy = suz - cnt * ubar * zbar
        slope = np.where(sxx > 1e-9 * step_m**2, sxy / sxx, 0.0)
        fitted = zbar - slope * ubar
    return fitted, cnt > 0

