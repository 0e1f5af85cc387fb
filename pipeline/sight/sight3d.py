"""Sight distance in three dimensions over a ground model, and what to clear where it falls short.

The driver's path runs along the centre of the lane, ``lane_offset_m`` (half a lane) from the
centreline on the side the traffic rule sets (right-hand traffic: the forward direction, with
the chainage, keeps to the right of the centreline; the backward direction to the left). The
eye stands ``eye_height_m`` above the road surface at the station, the object
``object_height_m`` above the surface of the lane ahead (AASHTO Green Book 2018, ch. 3: the
heights of :class:`pipeline.sight.lines.SightRules`, one source for both the 2D and the 3D
checks). The road surface is the fitted vertical alignment, not the raw DEM under the path.

The obstruction model (:func:`obstruction_grid`) is the DEM window on its own cells, in which

- every cell the carriageway covers (``carriageway_half_width_m`` either side of the
  centreline, rasterised at a quarter of a cell along and half a cell across) holds the
  fitted alignment's elevation at the chainage of the cell's centre, level across the road
  (crossfall and superelevation are not modelled): the road prism comes from the alignment,
  so DEM noise and vehicles or verges on the carriageway never block a line, while the
  alignment itself blocks it at a crest;
- every other cell holds the DEM, or, where a surface model is given and stands at least
  ``object_min_height_m`` above the DEM, the surface model (trees, buildings, walls);
- nodata cells hold a very low value: unknown ground never blocks (the stage reports them).

A sight line is blocked where the obstruction surface, interpolated bilinearly between cell
centres (as :func:`pipeline.profile.stations.bilinear`), rises above the straight segment
from the eye to the object anywhere between them. What blocks it is the kind of the cell
holding the highest point above the line: the carriageway ("crest"), the ground
("roadside terrain") or the surface model ("roadside object").

Available sight distance (the first loss of sight, as in 2D): distances are measured along
the lane's path. Objects are tried at ``step_m`` intervals outwards from the eye (the "ladder")
up to the look-ahead or the end of the road; the first hidden one and the last visible one
before it bracket the limit, which bisection narrows to ``tol_m``. Lines are tested
coarse-to-fine: each line is cut into pieces about ``coarse_m`` long, each piece compared with
the maximum of the obstruction over a block of cells wide enough to hold every cell any fine
sample of the piece can touch (a conservative bound, so a piece cleared coarsely is clear);
only pieces not cleared are sampled every half cell. Open ground is cleared almost entirely
at the coarse level, which makes the stage fast (plain numpy; numba was not available to
compare against).

References
----------
AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
ch. 3 (heights, the sight line offset on horizontal curves).
Castro, M., Iglesias, L., Sanchez, J. A., Ambrosio, L. (2011), Sight distance analysis of
highways using GIS tools, *Transportation Research Part C* 19(6) 997-1005 (cited from memory):
the line of sight over a DEM along the driver's path.
Jung, J., Olsen, M. J., Hurwitz, D. S. et al. (2018), 3D virtual intersection sight distance
analysis using lidar data, *Transportation Research Part C* 86, 563-579 (cited from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.ndimage import maximum_filter

# what limits a 3D sight distance (profiles.parquet carries the names)
CREST, TERRAIN, OBJECT, LOOKAHEAD, END = 0, 1, 2, 3, 4
LIMIT3D_NAMES = np.array(["crest", "roadside terrain", "roadside object", "look-ahead", "end of road"],
                         dtype=object)
LOW = -1.0e4  # obstruction height of unknown cells (m): never blocks


@dataclass
class ObstructionGrid:
    """What a sight line may hit, on the DEM window's cells (see :func:`obstruction_grid`).

    ``z`` heights (m), ``kind`` per cell (``CREST`` = carriageway, ``TERRAIN``, ``OBJECT``),
    ``transform`` the window's affine coefficients ``(a, b, c, d, e, f)`` (``x = a col + b
    row + c``, ``y = d col + e row + f``, col/row at cell corners), ``cell_m`` the cell size (m),
    ``factor`` the coarse level's block (cells) and ``zc`` its maxima, ``unknown`` the number
    of nodata cells.
    """

    z: np.ndarray
    kind: np.ndarray
    transform: tuple
    cell_m: float
    factor: int
    zc: np.ndarray | None
    unknown: int = 0

    def pixel(self, x, y) -> tuple[np.ndarray, np.ndarray]:
        """Cell-centre coordinates ``(u, v)`` (column, row; 0 = centre of the first cell)."""
        a, b, c, d, e, f = self.transform
        det = a * e - b * d
        x = np.asarray(x, dtype=float) - c
        y = np.asarray(y, dtype=float) - f
        return (e * x - b * y) / det - 0.5, (-d * x + a * y) / det - 0.5

    def xy(self, u, v) -> tuple[np.ndarray, np.ndarray]:
        """Map coordinates of cell-centre coordinates ``(u, v)``."""
        a, b, c, d, e, f = self.transform
        u = np.asarray(u, dtype=float) + 0.5
        v = np.asarray(v, dtype=float) + 0.5
        return a * u + b * v + c, d * u + e * v + f

    def sample(self, u, v) -> np.ndarray:
        """Bilinear obstruction height (m) at cell-centre coordinates; ``LOW`` off the grid.

        Notes
        -----
        The standard bilinear form between the four surrounding cell centres (e.g. Press et
        al., *Numerical Recipes*, 3rd ed., section 3.6).
        """
        R, C = self.z.shape
        i = np.floor(v).astype(np.int64)
        j = np.floor(u).astype(np.int64)
        inside = (i >= 0) & (j >= 0) & (i < R - 1) & (j < C - 1)
        i = np.clip(i, 0, R - 2)
        j = np.clip(j, 0, C - 2)
        fy = v - i
        fx = u - j
        flat = self.z.ravel()
        k = i * C + j
        z00 = flat[k]
        z01 = flat[k + 1]
        z10 = flat[k + C]
        z11 = flat[k + C + 1]
        val = z00 + fx * (z01 - z00) + fy * (z10 - z00) + fx * fy * (z00 - z01 - z10 + z11)
        return np.where(inside, val, LOW)

    def kind_at(self, u, v) -> np.ndarray:
        """Kind of the cell nearest to cell-centre coordinates (``TERRAIN`` off the grid)."""
        R, C = self.z.shape
        i = np.rint(v).astype(np.int64)
        j = np.rint(u).astype(np.int64)
        inside = (i >= 0) & (j >= 0) & (i < R) & (j < C)
        return np.where(inside, self.kind[np.clip(i, 0, R - 1), np.clip(j, 0, C - 1)], TERRAIN).astype(np.int8)


def _affine6(transform) -> tuple:
    """The six coefficients of an affine transform (an ``affine.Affine`` or a sequence)."""
    t = tuple(float(v) for v in tuple(transform)[:6])
    if len(t) != 6:
        raise ValueError("transform needs six coefficients (a, b, c, d, e, f)")
    return t


class LanePath:
    """The centreline at the stations, with the road surface, and the lane paths beside it.

    Parameters
    ----------
    chainage_m : ndarray
        Station chainages (m), increasing.
    x, y : ndarray
        Centreline position at each station (m, the DEM's CRS).
    road_z : callable or ndarray
        The road surface (fitted alignment) elevation (m): ``road_z(chainage)`` or one value
        per station (interpolated linearly between them); NaN where there is none.

    Notes
    -----
    Between stations the centreline and the lane paths are straight (a 5 m chord on a 200 m
    radius lies 16 mm inside the arc). The normal at a station is the central difference of
    the centreline, normalised.
    """

    def __init__(self, chainage_m, x, y, road_z):
        self.s = np.asarray(chainage_m, dtype=float)
        self.x = np.asarray(x, dtype=float)
        self.y = np.asarray(y, dtype=float)
        if len(self.s) < 2:
            raise ValueError("a lane path needs at least two stations")
        if callable(road_z):
            self._z = road_z
        else:
            zs = np.asarray(road_z, dtype=float)
            self._z = lambda q: np.interp(q, self.s, zs, left=np.nan, right=np.nan)
        tx, ty = np.gradient(self.x), np.gradient(self.y)
        n = np.hypot(tx, ty)
        n[n == 0] = 1.0
        self.tx, self.ty = tx / n, ty / n
        self.nx, self.ny = -self.ty, self.tx  # left-hand normal (of the chainage direction)

    def z(self, s) -> np.ndarray:
        """Road surface elevation (m) at chainages ``s`` (m)."""
        return np.asarray(self._z(np.asarray(s, dtype=float)), dtype=float)

    def lane(self, offset_m: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Vertices of the path ``offset_m`` to the left of the centreline (negative: right) at
        the stations, and the cumulative distance along it (m)."""
        lx = self.x + offset_m * self.nx
        ly = self.y + offset_m * self.ny
        A = np.concatenate([[0.0], np.cumsum(np.hypot(np.diff(lx), np.diff(ly)))])
        return lx, ly, A


def lane_sides(traffic_side: str) -> dict[str, int]:
    """Which side of the centreline each direction's lane is on: +1 left, -1 right of the
    direction of increasing chainage.

    Parameters
    ----------
    traffic_side : str
        ``"right"`` (right-hand traffic) or ``"left"``.

    Returns
    -------
    dict
        ``{"fwd": side, "back": side}``.
    """
    if traffic_side == "right":
        return {"fwd": -1, "back": +1}
    if traffic_side == "left":
        return {"fwd": +1, "back": -1}
    raise ValueError(f"traffic side must be 'right' or 'left', got {traffic_side!r}")


def obstruction_grid(dem: np.ndarray, transform, path: LanePath, carriageway_half_width_m: float,
                     surface: np.ndarray | None = None, object_min_height_m: float = 0.5,
                     coarse_m: float = 8.0) -> ObstructionGrid:
    """The surface a sight line may hit: ground, roadside objects, and the carriageway from the
    fitted alignment (see the module's notes).

    Parameters
    ----------
    dem : ndarray
        Ground elevations (m) of the window, NaN where nodata.
    transform : affine.Affine or sequence
        The window's transform (metric CRS, same as the path's coordinates).
    path : LanePath
        The centreline and its road surface.
    carriageway_half_width_m : float
        Half the width of the carriageway with its shoulders (m).
    surface : ndarray, optional
        A surface model (trees, buildings; m) on the same cells as ``dem``.
    object_min_height_m : float, default 0.5
        The surface model counts as a roadside object where it stands at least this much
        above the DEM (m).
    coarse_m : float, default 8.0
        Length of the pieces a line is first tested in (m).

    Returns
    -------
    ObstructionGrid
    """
    t = _affine6(transform)
    cell = float(np.sqrt(abs(t[0] * t[4] - t[1] * t[3])))
    z = np.array(dem, dtype=float)
    unknown = ~np.isfinite(z)
    kind = np.full(z.shape, TERRAIN, dtype=np.int8)
    if surface is not None:
        sfc = np.asarray(surface, dtype=float)
        if sfc.shape != z.shape:
            raise ValueError("the surface model must lie on the DEM's cells")
        obj = np.isfinite(sfc) & (sfc >= np.where(unknown, np.inf, z) + object_min_height_m)
        z = np.where(obj, sfc, z)
        kind[obj] = OBJECT
        unknown &= ~obj
    z[~np.isfinite(z)] = LOW
    grid = ObstructionGrid(z=z, kind=kind, transform=t, cell_m=cell, factor=1, zc=None, unknown=int(unknown.sum()))
    _burn_carriageway(grid, path, carriageway_half_width_m)
    F = max(int(round(coarse_m / cell)), 1)
    if F > 1:
        grid.factor = F
        grid.zc = maximum_filter(grid.z, size=2 * F + 3, mode="nearest")[::F, ::F].copy()
    return grid


def _burn_carriageway(grid: ObstructionGrid, path: LanePath, half_width: float) -> None:
    """Write the fitted alignment into every cell the carriageway covers: samples every quarter
    cell along and at most half a cell across, each cell getting the alignment at the chainage
    of its own centre (the sample's chainage moved along the tangent)."""
    cell = grid.cell_m
    s0, s1 = path.s[0], path.s[-1]
    sf = np.arange(s0, s1 + 1e-9, cell / 4.0)
    off = np.linspace(-half_width, half_width, max(int(np.ceil(2 * half_width / (cell / 2.0))), 1) + 1)
    cx = np.interp(sf, path.s, path.x)
    cy = np.interp(sf, path.s, path.y)
    tx = np.interp(sf, path.s, path.tx)
    ty = np.interp(sf, path.s, path.ty)
    nt = np.hypot(tx, ty)
    nt[nt == 0] = 1.0
    tx, ty = tx / nt, ty / nt
    px = cx[:, None] - off[None, :] * ty[:, None]
    py = cy[:, None] + off[None, :] * tx[:, None]
    u, v = grid.pixel(px.ravel(), py.ravel())
    R, C = grid.z.shape
    i, j = np.rint(v).astype(np.int64), np.rint(u).astype(np.int64)
    ok = (i >= 0) & (j >= 0) & (i < R) & (j < C)
    i, j = i[ok], j[ok]
    ccx, ccy = grid.xy(j, i)
    ss = np.repeat(sf, len(off))[ok]
    sc = ss + (ccx - px.ravel()[ok]) * np.repeat(tx, len(off))[ok] + (ccy - py.ravel()[ok]) * np.repeat(ty, len(off))[ok]
    zc = path.z(np.clip(sc, s0, s1))
    good = np.isfinite(zc)
    grid.z[i[good], j[good]] = zc[good]
    grid.kind[i[good], j[good]] = CREST


def _pieces(n: np.ndarray):
    """Flattened (line, piece) indices for lines cut into ``n`` pieces each."""
    tot = int(n.sum())
    line = np.repeat(np.arange(len(n)), n)
    k = np.arange(tot) - np.repeat(np.cumsum(n) - n, n)
    return line, k


def visible(grid: ObstructionGrid, x0, y0, z0, x1, y1, z1) -> np.ndarray:
    """Whether each straight line from ``(x0, y0, z0)`` to ``(x1, y1, z1)`` (m) clears the
    obstruction surface.

    Parameters
    ----------
    grid : ObstructionGrid
        The obstruction surface.
    x0, y0, z0, x1, y1, z1 : ndarray
        Ends of the lines (m): eye and object.

    Returns
    -------
    ndarray of bool
        ``True`` where no point of the bilinear surface, sampled every half cell along the
        line, stands above it.

    Notes
    -----
    Coarse to fine (see the module's notes): a piece of at most ``factor`` cells whose bound
    (the maximum of the cells within ``factor + 1`` of its nearest coarse node) lies below the
    lower end of the line over it is clear; the others are sampled.
    """
    u0, v0 = grid.pixel(x0, y0)
    u1, v1 = grid.pixel(x1, y1)
    z0 = np.asarray(z0, dtype=float)
    z1 = np.asarray(z1, dtype=float)
    du, dv, dz = u1 - u0, v1 - v0, z1 - z0
    ell = np.hypot(du, dv)
    F = grid.factor
    n = np.maximum(np.ceil(ell / F), 1).astype(np.int64)
    line, k = _pieces(n)
    nl = n[line]
    if grid.zc is not None:
        tm = (k + 0.5) / nl
        I = np.rint((v0[line] + tm * dv[line]) / F).astype(np.int64)
        J = np.rint((u0[line] + tm * du[line]) / F).astype(np.int64)
        Rc, Cc = grid.zc.shape
        inside = (I >= 0) & (J >= 0) & (I < Rc) & (J < Cc)
        bound = np.where(inside, grid.zc[np.clip(I, 0, Rc - 1), np.clip(J, 0, Cc - 1)], LOW)
        zlow = z0[line] + np.minimum(k * dz[line], (k + 1) * dz[line]) / nl  # the line's lower end over the piece
        keep = bound > zlow
        line, k, nl = line[keep], k[keep], nl[keep]
    m = 2 * F  # samples per piece: every half cell at most
    ll = np.repeat(line, m)
    t = (np.repeat(k, m) + (np.tile(np.arange(m), len(k)) + 0.5) / m) / np.repeat(nl, m)
    ex = grid.sample(u0[ll] + t * du[ll], v0[ll] + t * dv[ll]) - (z0[ll] + t * dz[ll])
    blocked = np.zeros(len(u0), dtype=bool)
    blocked[ll[ex > 0]] = True
    return ~blocked


def highest_point(grid: ObstructionGrid, x0, y0, z0, x1, y1, z1) -> tuple[np.ndarray, ...]:
    """The point of the obstruction standing highest above each line (sampled every half cell).

    Parameters
    ----------
    grid : ObstructionGrid
        The obstruction surface.
    x0, y0, z0, x1, y1, z1 : ndarray
        Ends of the lines (m).

    Returns
    -------
    tuple of ndarray
        ``x, y`` (m), ``excess_m`` (height above the line, m), ``t`` (fraction of the way from
        eye to object) and ``kind`` (``CREST``, ``TERRAIN`` or ``OBJECT``) of that point.
    """
    u0, v0 = grid.pixel(x0, y0)
    u1, v1 = grid.pixel(x1, y1)
    z0 = np.asarray(z0, dtype=float)
    z1 = np.asarray(z1, dtype=float)
    du, dv, dz = u1 - u0, v1 - v0, z1 - z0
    n = np.maximum(np.ceil(2 * np.hypot(du, dv)), 1).astype(np.int64)
    line, k = _pieces(n)
    t = (k + 0.5) / n[line]
    u, v = u0[line] + t * du[line], v0[line] + t * dv[line]
    ex = grid.sample(u, v) - (z0[line] + t * dz[line])
    order = np.lexsort((-ex, line))
    first = np.concatenate([[0], np.cumsum(n)[:-1]])
    best = order[first]
    bx, by = grid.xy(u[best], v[best])
    return bx, by, ex[best], t[best], grid.kind_at(u[best], v[best])


@dataclass
class _Way:
    """One direction's lane path, resolved for the eyes."""

    sign: int
    lx: np.ndarray
    ly: np.ndarray
    A: np.ndarray
    path: LanePath

    def at(self, Ae: np.ndarray, d: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Position ``x, y`` (m), chainage and road elevation (m) on the lane ``d`` (m) ahead of
        the points at lane distance ``Ae``."""
        q = Ae + self.sign * d
        s = np.interp(q, self.A, self.path.s)
        return np.interp(q, self.A, self.lx), np.interp(q, self.A, self.ly), s, self.path.z(s)


def sight_one_way(path: LanePath, grid: ObstructionGrid, rules, lane_side: int, direction: int,
                  lane_offset_m: float, eyes: np.ndarray | None = None, step_m: float = 5.0,
                  tol_m: float = 0.1) -> dict[str, np.ndarray]:
    """Available 3D sight distance from the stations, in one direction of travel.

    Parameters
    ----------
    path : LanePath
        Centreline and road surface.
    grid : ObstructionGrid
        What the lines may hit.
    rules : SightRules
        ``eye_height_m``, ``object_height_m`` and ``lookahead_m`` (m).
    lane_side : int
        +1: the lane lies left of the centreline (in the direction of increasing chainage);
        -1: right (see :func:`lane_sides`).
    direction : int
        +1 with the chainage, -1 against it.
    lane_offset_m : float
        Distance from the centreline to the lane's centre (m): half a lane.
    eyes : ndarray of int, optional
        Indices of the stations to compute (default: all).
    step_m : float, default 5.0
        Spacing of the objects tried outward from each eye (m); a hidden stretch shorter than
        this between two visible objects may be missed.
    tol_m : float, default 0.1
        Width the bracket of the first loss of sight is narrowed to (m).

    Returns
    -------
    dict of ndarray
        One value per eye: ``sight_m`` (m, along the lane; NaN where the road has no surface
        at the eye), ``limit`` (codes of :data:`LIMIT3D_NAMES`), ``block_x``, ``block_y`` (m,
        the point standing highest above the first hidden line; NaN where unlimited),
        ``block_chainage_m`` (chainage of the first hidden object, m).

    Notes
    -----
    The object at distance ``d`` is hidden where ``max over t of G(p(t)) - z(t) > 0`` along the
    segment ``p(t)``, ``z(t) = z_eye + t (z_object - z_eye)`` (0 < t < 1), with ``z_eye`` =
    road + ``eye_height_m`` and ``z_object`` = road + ``object_height_m``. The limit is the
    first hidden object (ladder of ``step_m``, then bisection to ``tol_m``).
    """
    idx = np.arange(len(path.s)) if eyes is None else np.asarray(eyes, dtype=np.int64)
    lx, ly, A = path.lane(lane_side * lane_offset_m)
    way = _Way(direction, lx, ly, A, path)
    ze = path.z(path.s[idx])
    ok = np.isfinite(ze)
    zs = path.z(path.s)
    # the profile ahead ends at the road's end or at the first station without a surface
    bad = ~np.isfinite(zs)
    n = len(path.s)
    pos = np.arange(n)
    if direction > 0:
        nxt = np.minimum.accumulate(np.where(bad, pos, n)[::-1])[::-1]
        lim_i = np.clip(nxt[idx] - 1, 0, n - 1)
        dend = A[lim_i] - A[idx]
    else:
        prv = np.maximum.accumulate(np.where(bad, pos, -1))
        lim_i = np.clip(prv[idx] + 1, 0, n - 1)
        dend = A[idx] - A[lim_i]
    L = float(rules.lookahead_m)
    dmax = np.minimum(dend, L)
    free_kind = np.where(dend < L - 1e-9, END, LOOKAHEAD)
    m = len(idx)
    sight = np.full(m, np.nan)
    limit = np.full(m, END, dtype=np.int8)
    bxy = np.full((2, m), np.nan)
    bch = np.full(m, np.nan)
    e = np.flatnonzero(ok & (dmax > 0))
    if len(e):
        Ae = A[idx[e]]
        x0, y0 = lx[idx[e]], ly[idx[e]]
        z0 = ze[e] + rules.eye_height_m
        h2 = rules.object_height_m
        lo = np.zeros(len(e))
        hi = dmax[e].copy()
        found = np.zeros(len(e), dtype=bool)
        J = int(np.ceil(L / step_m))
        for j in range(1, J + 1):
            act = np.flatnonzero(~found & ((j - 1) * step_m < dmax[e] - 1e-9))
            if not len(act):
                break
            d = np.minimum(j * step_m, dmax[e][act])
            x1, y1, _, zr = way.at(Ae[act], d)
            vis = visible(grid, x0[act], y0[act], z0[act], x1, y1, zr + h2)
            hid = act[~vis]
            found[hid] = True
            hi[hid] = d[~vis]
            lo[hid] = (j - 1) * step_m
        f = np.flatnonzero(found)
        while len(f) and np.max(hi[f] - lo[f]) > tol_m:
            mid = 0.5 * (lo[f] + hi[f])
            x1, y1, _, zr = way.at(Ae[f], mid)
            vis = visible(grid, x0[f], y0[f], z0[f], x1, y1, zr + h2)
            lo[f[vis]] = mid[vis]
            hi[f[~vis]] = mid[~vis]
        res = np.where(found, 0.5 * (lo + hi), dmax[e])
        lim = np.where(found, TERRAIN, free_kind[e]).astype(np.int8)
        if len(f):
            x1, y1, s1, zr = way.at(Ae[f], hi[f])
            px, py, _, _, kind = highest_point(grid, x0[f], y0[f], z0[f], x1, y1, zr + h2)
            lim[f] = kind
            bxy[0, e[f]], bxy[1, e[f]] = px, py
            bch[e[f]] = s1
        sight[e] = res
        limit[e] = lim
    z_ok_none = ok & ~(dmax > 0)
    sight[z_ok_none] = 0.0
    return {"sight_m": sight, "limit": limit, "block_x": bxy[0], "block_y": bxy[1], "block_chainage_m": bch}


def sight_3d_both_ways(path: LanePath, grid: ObstructionGrid, rules, lane_width_m: float = 3.6,
                       traffic_side: str = "right", eyes: np.ndarray | None = None, step_m: float = 5.0,
                       tol_m: float = 0.1) -> dict[str, np.ndarray]:
    """Available 3D sight distance at the stations, both directions of travel.

    Parameters
    ----------
    path : LanePath
        Centreline and road surface (fitted alignment).
    grid : ObstructionGrid
        The ground, roadside objects and carriageway (:func:`obstruction_grid`).
    rules : SightRules
        Eye and object heights and look-ahead (m).
    lane_width_m : float, default 3.6
        Lane width (m); the driver's path runs half of it from the centreline.
    traffic_side : str, default "right"
        ``"right"`` or ``"left"``-hand traffic.
    eyes : ndarray of int, optional
        Stations to compute (default: all).
    step_m, tol_m : float
        See :func:`sight_one_way` (m).

    Returns
    -------
    dict of ndarray
        For ``dir`` in ``fwd``, ``back``: ``sight_3d_{dir}_m`` (m), ``limit_3d_{dir}`` (codes of
        :data:`LIMIT3D_NAMES`), ``block_x_{dir}``, ``block_y_{dir}`` and
        ``block_chainage_{dir}_m`` (m).

    References
    ----------
    AASHTO Green Book 2018, ch. 3 (see the module's notes).
    """
    sides = lane_sides(traffic_side)
    out = {}
    for name, sign in (("fwd", 1), ("back", -1)):
        r = sight_one_way(path, grid, rules, sides[name], sign, lane_width_m / 2.0, eyes, step_m, tol_m)
        out[f"sight_3d_{name}_m"] = r["sight_m"]
        out[f"limit_3d_{name}"] = r["limit"]
        out[f"block_x_{name}"] = r["block_x"]
        out[f"block_y_{name}"] = r["block_y"]
        out[f"block_chainage_{name}_m"] = r["block_chainage_m"]
    return out
