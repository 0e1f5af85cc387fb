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
  centreline, rasterised every half cell along and across) holds the
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
the lane's path. Objects are tried outwards from the eye, every ``step_m`` and then at a
spacing growing to ``grow`` times their distance (the "ladder"), up to the look-ahead or the
end of the road; the first hidden one and the last visible one before it bracket the limit,
which bisection narrows to ``tol_m``. A hidden stretch shorter than the ladder's spacing
between two visible objects can be missed. Where the lane runs straight ahead of the eye, the
objects up to the bend lie on one ray from it and one sweep of slopes along that ray resolves
them all, every ``step_m`` (see :func:`sight_one_way`); the ladder goes on past the bend.

Lines are tested coarse to fine: each line is cut into pieces of 16, then 4, then 2 cells
(``coarse_m`` = 4 m the middle level, on a 1 m DEM), each piece compared with the maximum of
the obstruction over the cells any bilinear sample of the piece can touch (its node's span,
:func:`_node_maxima`: a conservative bound, so a piece cleared coarsely is clear); only the
pieces not cleared are sampled every cell, and each sample is first compared with the highest
of its four cells (one look-up) before the bilinear value is computed. The spans were once
twice as wide as needed, which put the cut batter and the grade ahead into the bound of
every piece along the lane; made exact, with the 2-cell level added, the fine samples per
line fell to a third. Plain numpy: numba is not installed, and the work is a few large
array passes per ladder rung, vectorised over every eye of a window at once.

Measured with ``benchmarks/sight3d_speed.py`` (20 km of roads on a 1 m DEM in rolling
terrain, both directions, stations every 5 m; CPU time of one process, on a machine shared
with another job, so within some 15 %): 1.4 to 1.6 s before these changes (about 13 to
14 km/s per core), 0.9 to 1.1 s after (about 19 to 22 km/s per core). The results are the
same within the bisection's tolerance (0.25 m). Of the time left, about three fifths go to
testing sight lines, a fifth to building the obstruction grid of each window, a sixth to the
straight sweeps.

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
from scipy.ndimage import maximum_filter1d

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
    ``factor`` the finest coarse level's block (cells), ``levels`` the coarse levels from fine to
    coarse as ``(block in cells, maxima)``, ``unknown`` the number of nodata cells, ``peak`` the
    highest of the four cells around each point between cell centres (``peak[i, j]`` = max of
    ``z[i:i+2, j:j+2]``, the bound of the bilinear surface there; made on first use).
    """

    z: np.ndarray
    kind: np.ndarray
    transform: tuple
    cell_m: float
    factor: int
    levels: list
    unknown: int = 0
    peak: np.ndarray | None = None

    def peaks(self) -> np.ndarray:
        """``peak`` (see the class notes), made once."""
        if self.peak is None:
            z = self.z
            self.peak = np.maximum(np.maximum(z[:-1, :-1], z[:-1, 1:]), np.maximum(z[1:, :-1], z[1:, 1:]))
        return self.peak

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
        fy = v - i
        fx = u - j
        flat = self.z.ravel()
        k = np.where(inside, i * C + j, 0)
        z00 = flat[k]
        z01 = flat[k + 1]
        z10 = flat[k + C]
        z11 = flat[k + C + 1]
        val = z00 + fx * (z01 - z00) + fy * (z10 - z00) + fx * fy * (z00 - z01 - z10 + z11)
        return np.where(inside, val, LOW)

    def kind_at(self, u, v) -> np.ndarray:
        """Kind of the highest of the four cells around cell-centre coordinates (the one that
        raises the bilinear surface there; ``TERRAIN`` off the grid)."""
        R, C = self.z.shape
        i = np.clip(np.floor(v).astype(np.int64), 0, R - 2)
        j = np.clip(np.floor(u).astype(np.int64), 0, C - 2)
        ii = np.stack([i, i, i + 1, i + 1])
        jj = np.stack([j, j + 1, j, j + 1])
        top = np.argmax(self.z[ii, jj], axis=0)
        r = np.arange(len(i))
        return self.kind[ii[top, r], jj[top, r]].astype(np.int8)


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


def lane_width(cfg) -> float:
    """The lane width of the 3D sight lines (m): ``sight.lane_width_m``, or ``plan.lane_width_m``
    where that is 0 (one default for both the HSO check and the 3D sight lines).

    Parameters
    ----------
    cfg : Config
        The run's settings.

    Returns
    -------
    float
        Lane width (m).
    """
    w = float(cfg["sight.lane_width_m"])
    return w if w > 0 else float(cfg["plan.lane_width_m"])


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
                     coarse_m: float = 4.0, coarse_levels: int = 2) -> ObstructionGrid:
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
    coarse_m : float, default 4.0
        Length of the coarse pieces a line is tested in (m); where that is an even number of
        cells of at least 4, pieces of half of it are tested too, before the samples.
    coarse_levels : int, default 2
        Coarse levels of ``coarse_m`` and up, each four times the one below.

    Returns
    -------
    ObstructionGrid
    """
    t = _affine6(transform)
    cell = float(np.sqrt(abs(t[0] * t[4] - t[1] * t[3])))
    z = np.array(dem, dtype=np.float32)
    unknown = ~np.isfinite(z)
    kind = np.full(z.shape, TERRAIN, dtype=np.int8)
    if surface is not None:
        sfc = np.asarray(surface, dtype=np.float32)
        if sfc.shape != z.shape:
            raise ValueError("the surface model must lie on the DEM's cells")
        obj = np.isfinite(sfc) & (sfc >= np.where(unknown, np.inf, z) + object_min_height_m)
        z = np.where(obj, sfc, z).astype(np.float32)
        kind[obj] = OBJECT
        unknown &= ~obj
    z[unknown] = LOW
    grid = ObstructionGrid(z=z, kind=kind, transform=t, cell_m=cell, factor=1, levels=[], unknown=int(unknown.sum()))
    _burn_carriageway(grid, path, carriageway_half_width_m)
    F = max(int(round(coarse_m / cell)), 1)
    if F > 1:
        R, C = z.shape
        hs = [F]
        for _ in range(coarse_levels - 1):  # coarser levels, each four times the one below
            if min(-(-R // hs[0]), -(-C // hs[0])) < 8:
                break
            hs.insert(0, 4 * hs[0])
        if F % 2 == 0 and F >= 4:  # and a finer one of half the finest piece (2 m on a 1 m DEM)
            hs.append(F // 2)
        blocks: dict = {}
        grid.levels = [(h, _node_maxima(grid.z, h, blocks)) for h in reversed(hs)]
        grid.factor = hs[-1]
    return grid


def _block_maxima(z: np.ndarray, b: int, blocks: dict) -> np.ndarray:
    """Maxima of the ``b`` x ``b`` blocks of cells (block ``I`` holds cells ``b I`` to ``b I + b
    - 1``; ``LOW`` beyond the grid), halving a finer block grid where ``b`` is even (kept in
    ``blocks`` for the next level)."""
    if b == 1:
        return z
    if b not in blocks:
        if b % 2 == 0:
            f = _block_maxima(z, b // 2, blocks)
            if f.shape[0] % 2:
                f = np.vstack([f, np.full((1, f.shape[1]), LOW, dtype=f.dtype)])
            if f.shape[1] % 2:
                f = np.hstack([f, np.full((f.shape[0], 1), LOW, dtype=f.dtype)])
            f = np.maximum(f[0::2], f[1::2])
            blocks[b] = np.maximum(f[:, 0::2], f[:, 1::2])
        else:
            R, C = z.shape
            P = np.full((-(-R // b) * b, -(-C // b) * b), LOW, dtype=z.dtype)
            P[:R, :C] = z
            blocks[b] = P.reshape(P.shape[0] // b, b, P.shape[1] // b, b).max(axis=(1, 3))
    return blocks[b]


def _node_maxima(z: np.ndarray, h: int, blocks: dict) -> np.ndarray:
    """For the nodes every ``h`` cells (node ``I`` at cell ``h I``, one node beyond the grid's
    last cell), the maximum of the cells ``h I - h`` to ``h I + h + 1`` along each axis: every
    cell a bilinear sample of a piece at most ``h`` cells long whose middle rounds to the node
    can touch (the sample lies within ``h`` of the node; bilinear weights reach the next cell).

    Notes
    -----
    From the maxima of blocks of ``b = h / q`` cells (``q`` 4, 2 or 1, ``b`` >= 2), the nodes'
    span being the blocks ``q I - q`` to ``q I + q`` (exactly the span above where ``b`` is
    2 or ``h`` is 4, a few cells more on one side for coarser levels). This replaced a span of
    ``2 h`` either side (four blocks of ``h``): with half the width across the road, a piece of
    a line along the lane no longer meets the cut batter or the grade beyond it, and far more
    pieces are cleared coarsely (see ``benchmarks/sight3d_speed.py``).
    """
    q = next(q for q in (4, 2, 1) if h % q == 0 and (h // q >= 2 or q == 1))
    b = h // q
    R, C = z.shape
    Rn, Cn = (R - 1) // h + 2, (C - 1) // h + 2
    B = _block_maxima(z, b, blocks)
    Rb, Cb = q * (Rn - 1) + 1, q * (Cn - 1) + 1
    if B.shape != (Rb, Cb):
        P = np.full((Rb, Cb), LOW, dtype=B.dtype)
        r, c = min(Rb, B.shape[0]), min(Cb, B.shape[1])
        P[:r, :c] = B[:r, :c]
        B = P
    w = 2 * q + 1
    B = maximum_filter1d(B, w, axis=0, mode="constant", cval=LOW)[::q]
    return np.ascontiguousarray(maximum_filter1d(B, w, axis=1, mode="constant", cval=LOW)[:, ::q])


def _burn_carriageway(grid: ObstructionGrid, path: LanePath, half_width: float) -> None:
    """Write the fitted alignment into every cell the carriageway covers: samples every half
    cell along and at most half a cell across (every cell whose centre lies on the carriageway
    is hit), each cell getting the alignment at the chainage
    of its own centre (the sample's chainage moved along the tangent)."""
    cell = grid.cell_m
    s0, s1 = path.s[0], path.s[-1]
    sf = np.arange(s0, s1 + 1e-9, cell / 2.0)
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
        ``True`` where no point of the bilinear surface, sampled every cell along the
        line, stands above it.

    Notes
    -----
    Coarse to fine (see the module's notes): at each level, a piece of at most ``h`` cells
    whose bound (the maximum of the cells ``h I - h`` to ``h I + h + 1`` around its nearest
    node ``I``, :func:`_node_maxima`) lies below the lower end of the line over it is clear;
    the others are cut for the next level, and the last ones (``factor`` cells) sampled.
    """
    u0, v0 = grid.pixel(x0, y0)
    u1, v1 = grid.pixel(x1, y1)
    z0 = np.asarray(z0, dtype=float)
    z1 = np.asarray(z1, dtype=float)
    du, dv, dz = u1 - u0, v1 - v0, z1 - z0
    ell = np.hypot(du, dv)
    F = grid.factor
    if grid.levels:
        top = grid.levels[-1][0]
        n = np.maximum(np.ceil(ell / top), 1).astype(np.int64)
        line, k = _pieces(n)
        prev = top
        for lev, (Fl, zc) in enumerate(reversed(grid.levels)):
            if lev:  # each piece kept from the level above is cut in r
                r = prev // Fl
                line, k = np.repeat(line, r), r * np.repeat(k, r) + np.tile(np.arange(r), len(k))
            prev = Fl
            # per line: the middle of its first piece in node units and the step from piece to piece
            nl = n * (top // Fl)
            su, sv, sz = du / (nl * Fl), dv / (nl * Fl), dz / nl
            Rc, Cc = zc.shape
            I = np.rint((v0 / Fl + 0.5 * sv)[line] + k * sv[line]).astype(np.int64)
            J = np.rint((u0 / Fl + 0.5 * su)[line] + k * su[line]).astype(np.int64)
            # nodes off the grid (a border of LOW around it) never block
            np.clip(I + 1, 0, Rc + 1, out=I)
            np.clip(J + 1, 0, Cc + 1, out=J)
            bound = _bordered(grid, lev, zc).ravel()[I * (Cc + 2) + J]
            zlow = (z0 + np.minimum(sz, 0.0))[line] + k * sz[line]  # the line's lower end over the piece
            keep = bound > zlow
            line, k = line[keep], k[keep]
        nl = (n * (top // grid.factor))[line]
    else:
        n = np.maximum(np.ceil(ell / F), 1).astype(np.int64)
        line, k = _pieces(n)
        nl = n[line]
    return ~_blocked_pieces(grid, len(u0), line, k, nl, u0, v0, z0, du, dv, dz)


def _bordered(grid: ObstructionGrid, lev: int, zc: np.ndarray) -> np.ndarray:
    """A level's node maxima with a border of ``LOW`` around them (made once per level)."""
    cache = grid.__dict__.setdefault("_bordered", {})
    if lev not in cache:
        cache[lev] = np.pad(zc, 1, constant_values=LOW)
    return cache[lev]


def _blocked_pieces(grid: ObstructionGrid, nlines: int, line, k, nl, u0, v0, z0, du, dv, dz) -> np.ndarray:
    """Whether any of the pieces ``k`` of ``nl`` of each line (``factor`` samples a piece, one a
    cell, at the middle of each cell-long part) has the bilinear surface above the line.

    Notes
    -----
    A sample is first checked against the highest of its four cells (``ObstructionGrid.peaks``,
    a bound of the bilinear surface there, one look-up); only where that bound stands above the
    line is the bilinear surface computed. The same answer as sampling every point bilinearly,
    for less: measured on the benchmark's 1 m DEM (``benchmarks/sight3d_speed.py``), most fine
    samples are cleared by the bound.
    """
    blocked = np.zeros(nlines, dtype=bool)
    if not len(line):
        return blocked
    m = grid.factor  # samples per piece: one a cell
    t = (k[:, None] + (np.arange(m) + 0.5)[None, :] / m) / nl[:, None]
    u = u0[line][:, None] + t * du[line][:, None]
    v = v0[line][:, None] + t * dv[line][:, None]
    zl = z0[line][:, None] + t * dz[line][:, None]
    peak = grid.peaks()
    R, C = peak.shape
    inside = (v >= 0) & (u >= 0) & (v < R) & (u < C)  # truncation is the floor where inside
    cell = np.where(inside, v.astype(np.int32) * np.int32(C) + u.astype(np.int32), 0)
    hi = peak.ravel()[cell] > zl
    hi &= inside
    pi, si = np.nonzero(hi)
    if len(pi):
        ex = grid.sample(u[pi, si], v[pi, si]) > zl[pi, si]
        blocked[line[pi[ex]]] = True
    return blocked


def highest_point(grid: ObstructionGrid, x0, y0, z0, x1, y1, z1) -> tuple[np.ndarray, ...]:
    """The point of the obstruction standing highest above each line (sampled every cell).

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
    n = np.maximum(np.ceil(np.hypot(du, dv)), 1).astype(np.int64)
    line, k = _pieces(n)
    t = (k + 0.5) / n[line]
    u, v = u0[line] + t * du[line], v0[line] + t * dv[line]
    ex = grid.sample(u, v) - (z0[line] + t * dz[line])
    first = np.concatenate([[0], np.cumsum(n)[:-1]])
    top = np.maximum.reduceat(ex, first)
    hit = np.flatnonzero(ex == top[line])  # the first sample of each line at its maximum
    best = hit[np.concatenate([[True], line[hit][1:] != line[hit][:-1]])]
    bx, by = grid.xy(u[best], v[best])
    return bx, by, ex[best], t[best], grid.kind_at(u[best], v[best])


class _Ways:
    """The lane paths of one or more directions laid end to end in one distance axis, so that
    the eyes of every direction are searched together."""

    def __init__(self, path: LanePath, lanes: list[tuple[int, float]]):
        self.path = path
        self.start = []
        xs, ys, As, ss = [], [], [], []
        base = 0.0
        for side, offset in lanes:
            lx, ly, A = path.lane(side * offset)
            self.start.append(base)
            xs.append(lx)
            ys.append(ly)
            As.append(A + base)
            ss.append(path.s)
            base = As[-1][-1] + 1.0e6
        self.lx, self.ly, self.A, self.s = (np.concatenate(v) for v in (xs, ys, As, ss))

    def at(self, Ae: np.ndarray, d: np.ndarray, sign: np.ndarray):
        """Position ``x, y`` (m), chainage and road elevation (m) on the lane ``d`` (m) ahead of
        the points at (combined) lane distance ``Ae`` in the directions ``sign``."""
        q = Ae + sign * d
        s = np.interp(q, self.A, self.s)
        return np.interp(q, self.A, self.lx), np.interp(q, self.A, self.ly), s, self.path.z(s)


class _Search:
    """The first loss of sight for a set of eyes: a ladder of objects outward from a start
    distance each, then bisection of the bracket (see :func:`sight_one_way`)."""

    def __init__(self, grid, ways, sign, x0, y0, Ae, z0, h2, dmax, step, grow, tol):
        self.grid, self.ways, self.sign = grid, ways, sign
        self.x0, self.y0, self.Ae, self.z0, self.h2 = x0, y0, Ae, z0, h2
        self.dmax, self.step, self.grow, self.tol = dmax, step, grow, tol
        n = len(x0)
        self.found = np.zeros(n, dtype=bool)
        self.lo = np.zeros(n)
        self.hi = dmax.copy()

    def _visible(self, q: np.ndarray, d: np.ndarray) -> np.ndarray:
        x1, y1, _, zr = self.ways.at(self.Ae[q], d, self.sign[q])
        return visible(self.grid, self.x0[q], self.y0[q], self.z0[q], x1, y1, zr + self.h2)

    def straight(self, q: np.ndarray, reach: np.ndarray, ux: np.ndarray, uy: np.ndarray, cell: float) -> np.ndarray:
        """Resolve the eyes ``q`` over the first ``reach`` (m) of their lane, straight there in
        the direction ``(ux, uy)``: the objects lie on one ray from the eye, so one sweep
        along it serves all of them. Returns the distance up to which each eye is known to
        see every object (``reach`` where none is hidden; the eyes with a hidden object are
        marked found, their bracket ``tol`` wide).

        Notes
        -----
        With ``sigma(r) = (G(r) - z_eye) / r`` the slope from the eye to the obstruction at
        ``r`` along the ray (sampled every cell, bilinear) and ``sigma_o(d) = (z_object(d) -
        z_eye) / d``, the object at ``d`` is hidden where ``max over r < d of sigma(r) >
        sigma_o(d)``: the same test as a sight line to it (the line lies above the surface
        exactly where its slope from the eye exceeds the surface's). Objects are tried every
        ``4 tol`` and then every ``tol`` inside the first hidden one's bracket, so a hidden stretch
        shorter than ``4 tol`` can be missed (the ladder's spacing is ``step_m`` and more).
        Measured on ``benchmarks/sight3d_speed.py`` (1 m DEM, roads with straights and curves,
        on a shared machine): the sight lines tested fell from 22 to 10 per station and
        direction, the CPU time about the same as the ladder's alone (the sweep samples every
        cell of the ray, where the ladder's lines over open ground are mostly cleared
        coarsely); kept because it tries the objects on a straight every 5 m, where the ladder
        leaves gaps of a fifth of the distance.
        """
        g = self.grid
        m = np.ceil(reach / cell).astype(np.int64)
        M = int(m.max())
        r = (np.arange(M) + 0.5) * cell
        x0, y0, z0 = self.x0[q], self.y0[q], self.z0[q]
        valid = r[None, :] < reach[:, None] + cell
        px = x0[:, None] + r[None, :] * ux[:, None]
        py = y0[:, None] + r[None, :] * uy[:, None]
        u, v = g.pixel(px[valid], py[valid])
        sig = np.full(valid.shape, -np.inf)
        sig[valid] = (g.sample(u, v) - np.repeat(z0, valid.sum(axis=1))) / np.broadcast_to(r, valid.shape)[valid]
        pm = np.maximum.accumulate(sig, axis=1)

        def hidden(e, d):  # objects at distances d (m) from the eyes e (rows of q)
            _, _, _, zr = self.ways.at(self.Ae[q][e], d, self.sign[q][e])
            so = (zr + self.h2 - z0[e]) / d
            j = np.ceil(d / cell - 0.5).astype(np.int64) - 1  # the last sample nearer than the object
            return (j >= 0) & (pm[e, np.clip(j, 0, M - 1)] > so)

        # objects every step_m, then every 4 tol and every tol inside the first hidden one's bracket
        seen = reach.copy()
        e = np.arange(len(q))
        lo = np.zeros(len(q))
        hi = reach.copy()
        span = reach
        for level, step in enumerate((self.step, 4 * self.tol, self.tol)):
            if level:  # the objects strictly inside the bracket (its upper end is hidden)
                K = np.maximum(np.ceil(span / step - 1e-9).astype(np.int64) - 1, 0)
            else:
                K = np.floor(span / step + 1e-9).astype(np.int64)
            ee, k = _pieces(K)
            hid = hidden(e[ee], lo[ee] + (k + 1) * step)
            first = np.full(len(e), -1, dtype=np.int64)
            hk = np.flatnonzero(hid)[::-1]
            first[ee[hk]] = k[hk]  # the first hidden object of each eye
            got = first >= 0
            if not level:  # eyes with no hidden object within reach are done
                e, lo, hi, first, got, K = e[got], lo[got], hi[got], first[got], got[got], K[got]
                if not len(e):
                    return seen
            lo, hi = np.where(got, lo + first * step, lo + K * step), np.where(got, lo + (first + 1) * step, hi)
            span = hi - lo
        qf = q[e]
        self.found[qf] = True
        self.lo[qf] = lo
        self.hi[qf] = hi
        seen[e] = lo
        return seen

    def run(self, q: np.ndarray, start: np.ndarray, known: np.ndarray | None = None) -> None:
        """Search the eyes ``q``, each trusted to see every object up to ``start`` (m), which is
        checked first unless ``known`` (found by the straight sweep): where it is hidden the
        eye is searched from itself."""
        cur = np.asarray(start, dtype=float).copy()
        warm = cur > 0
        if known is not None and known.any():
            # known to see everything up to start: go on from the last rung of the ladder
            # searched from the eye below it, so the rungs beyond are the ones it would try
            warm &= ~known
            rungs = [0.0]
            top = float(np.max(cur[known]))
            while rungs[-1] < top:
                rungs.append(rungs[-1] + max(self.step, self.grow * rungs[-1]))
            rungs = np.asarray(rungs)
            cur[known] = rungs[np.searchsorted(rungs, cur[known], side="right") - 1]
        if warm.any():
            w = np.flatnonzero(warm)
            ok = self._visible(q[w], np.minimum(cur[w], self.dmax[q[w]]))
            cur[w[~ok]] = 0.0
        act = np.arange(len(q))
        while len(act):
            c = cur[act]
            nxt = np.minimum(c + np.maximum(self.step, self.grow * c), self.dmax[q[act]])
            vis = self._visible(q[act], nxt)
            hid = act[~vis]
            self.found[q[hid]] = True
            self.lo[q[hid]] = cur[hid]
            self.hi[q[hid]] = nxt[~vis]
            cur[act[vis]] = nxt[vis]
            act = act[vis & (nxt < self.dmax[q[act]] - 1e-9)]
        f = q[self.found[q]]
        while len(f) and np.max(self.hi[f] - self.lo[f]) > self.tol:
            f = f[self.hi[f] - self.lo[f] > self.tol]
            mid = 0.5 * (self.lo[f] + self.hi[f])
            vis = self._visible(f, mid)
            self.lo[f[vis]] = mid[vis]
            self.hi[f[~vis]] = mid[~vis]


def _straight_reach(W: "_Ways", n: int, station: np.ndarray, way: np.ndarray, directions: list) -> tuple:
    """How far each eye's lane runs straight ahead (m; to the next vertex where its heading turns
    by more than 1e-6 rad, so a straight drawn with several vertices counts as one) and the unit
    direction ``(ux, uy)`` of travel there."""
    ds = np.zeros(len(station))
    ux = np.zeros(len(station))
    uy = np.zeros(len(station))
    pos = np.arange(n)
    for w, direction in enumerate(directions):
        e = np.flatnonzero(way == w)
        if not len(e) or n < 2:
            continue
        lx, ly, A = W.lx[w * n:(w + 1) * n], W.ly[w * n:(w + 1) * n], W.A[w * n:(w + 1) * n]
        dx, dy = np.diff(lx), np.diff(ly)
        ln = np.hypot(dx, dy)
        phi = np.arctan2(dy, dx)
        turn = np.abs((np.diff(phi) + np.pi) % (2 * np.pi) - np.pi)
        bend = np.ones(n, dtype=bool)
        bend[1:-1] = (turn > 1e-6) | (ln[1:] == 0) | (ln[:-1] == 0)
        nxt = np.minimum.accumulate(np.where(bend, pos, n - 1)[::-1])[::-1]  # first bend at or after
        prv = np.maximum.accumulate(np.where(bend, pos, 0))  # last bend at or before
        i = station[e]
        if direction > 0:
            j = np.minimum(i + 1, n - 1)
            ok = i < n - 1
            ds[e] = np.where(ok, A[nxt[j]] - A[i], 0.0)
            seg = np.minimum(i, n - 2)
            lseg = np.where(ln[seg] > 0, ln[seg], 1.0)
            ux[e], uy[e] = dx[seg] / lseg, dy[seg] / lseg
        else:
            j = np.maximum(i - 1, 0)
            ok = i > 0
            ds[e] = np.where(ok, A[i] - A[prv[j]], 0.0)
            seg = np.maximum(i - 1, 0)
            lseg = np.where(ln[seg] > 0, ln[seg], 1.0)
            ux[e], uy[e] = -dx[seg] / lseg, -dy[seg] / lseg
        ds[e] = np.where(ln[seg] > 0, ds[e], 0.0)
    return ds, ux, uy


def sight_one_way(path: LanePath, grid: ObstructionGrid, rules, lane_side: int, direction: int,
                  lane_offset_m: float, eyes: np.ndarray | None = None, step_m: float = 5.0,
                  tol_m: float = 0.25, grow: float = 0.2, warm: int = 1,
                  straight: bool = True) -> dict[str, np.ndarray]:
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
        Spacing of the first objects tried outward from each eye (m).
    tol_m : float, default 0.25
        Width the bracket of the first loss of sight is narrowed to (m).
    grow : float, default 0.2
        Beyond ``step_m / grow`` the objects tried are this fraction of their distance apart (a
        hidden stretch shorter than that spacing between two visible objects may be missed).
    warm : int, default 1
        One eye in ``warm`` is searched from the eye itself; the next ones from where the eye
        before them (one station back) lost sight, less the distance between them, after
        checking that that object is in view (1: every eye from itself).
    straight : bool, default True
        Along the straight stretch of lane ahead of each eye, resolve the objects with one
        sweep along the ray from the eye (see the notes) before the ladder.

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
    first hidden object: objects are tried outward (every ``step_m``, the spacing growing to
    ``grow`` times the distance), then the bracket of the first hidden one is bisected to
    ``tol_m``. Consecutive stations see nearly the same lines: an eye one station ahead of an
    eye that saw every object up to ``S`` is trusted to see every object up to ``S`` less the
    station spacing, once the line to that object is checked, and searched onward from
    there (the incremental horizon). It is wrong only where a new obstruction appears
    within that distance while the object itself stays in view.

    Where the lane runs straight ahead of the eye (to the first vertex where its heading turns
    by more than 1e-6 rad), every object up to the bend lies on one ray from the eye: with
    ``sigma(r) = (G(r) - z_eye) / r`` the slope from the eye to the obstruction at ``r`` along
    the ray, the object at ``d`` is hidden where the largest ``sigma`` nearer than ``d`` exceeds
    ``(z_object - z_eye) / d``, the same test as its sight line. One sweep along the ray (a
    sample every cell, a running maximum) serves every object there: objects every ``step_m``,
    then every ``4 tol_m`` and every ``tol_m`` inside the first hidden one's bracket. Past the
    bend the ladder goes on from its own rung below the bend, so it tries the objects a search
    from the eye would (see :meth:`_Search.straight` for what it was measured to give).
    """
    r = _sight_ways(path, grid, rules, [(lane_side, direction)], lane_offset_m, eyes, step_m, tol_m, grow, warm,
                    straight)
    return r[0]


def _sight_ways(path: LanePath, grid: ObstructionGrid, rules, ways: list[tuple[int, int]], lane_offset_m: float,
                eyes, step_m: float, tol_m: float, grow: float, warm: int,
                straight: bool = True) -> list[dict[str, np.ndarray]]:
    """:func:`sight_one_way` for several ``(lane_side, direction)`` at once (one search)."""
    idx = np.arange(len(path.s)) if eyes is None else np.asarray(eyes, dtype=np.int64)
    W = _Ways(path, [(side, lane_offset_m) for side, _ in ways])
    n = len(path.s)
    m = len(idx)
    ze = path.z(path.s[idx])
    ok = np.isfinite(ze)
    bad = ~np.isfinite(path.z(path.s))
    pos = np.arange(n)
    nxt = np.minimum.accumulate(np.where(bad, pos, n)[::-1])[::-1]
    prv = np.maximum.accumulate(np.where(bad, pos, -1))
    L = float(rules.lookahead_m)
    cols = {k: [] for k in ("Ae", "sign", "dmax", "free", "x0", "y0", "z0", "w", "i", "order")}
    for w, (side, direction) in enumerate(ways):
        A = W.A[w * n:(w + 1) * n]
        # the profile ahead ends at the road's end or at the first station without a surface
        if direction > 0:
            dend = A[np.clip(nxt[idx] - 1, 0, n - 1)] - A[idx]
        else:
            dend = A[idx] - A[np.clip(prv[idx] + 1, 0, n - 1)]
        e = np.flatnonzero(ok & (np.minimum(dend, L) > 0))
        cols["Ae"].append(A[idx[e]])
        cols["sign"].append(np.full(len(e), direction, dtype=float))
        cols["dmax"].append(np.minimum(dend, L)[e])
        cols["free"].append(np.where(dend[e] < L - 1e-9, END, LOOKAHEAD))
        cols["x0"].append(W.lx[w * n + idx[e]])
        cols["y0"].append(W.ly[w * n + idx[e]])
        cols["z0"].append(ze[e] + rules.eye_height_m)
        cols["w"].append(np.full(len(e), w))
        cols["i"].append(e)
        # eyes in the order of travel, per direction
        cols["order"].append(np.argsort(idx[e] * direction, kind="stable"))
    offs = np.cumsum([0] + [len(v) for v in cols["i"]])
    c = {k: np.concatenate(v) for k, v in cols.items() if k != "order"}
    out = [{"sight_m": np.where(ok, 0.0, np.nan), "limit": np.full(m, END, dtype=np.int8),
            "block_x": np.full(m, np.nan), "block_y": np.full(m, np.nan), "block_chainage_m": np.full(m, np.nan)}
           for _ in ways]
    if not len(c["i"]):
        return out
    srch = _Search(grid, W, c["sign"], c["x0"], c["y0"], c["Ae"], c["z0"], rules.object_height_m, c["dmax"],
                   step_m, grow, tol_m)
    # every ``warm``-th eye is searched from itself, the others from where the eye before them
    # (in the order of travel) lost sight (see the notes)
    orders = [offs[w] + o for w, o in enumerate(cols["order"])]
    rank = np.empty(len(c["i"]), dtype=np.int64)
    prev = np.full(len(c["i"]), -1, dtype=np.int64)
    for o in orders:
        rank[o] = np.arange(len(o))
        prev[o[1:]] = o[:-1]
    # along a straight lane every object lies on one ray from the eye: one sweep along it
    # resolves the objects up to the bend (see _Search.straight)
    seen = np.zeros(len(c["i"]))
    ds, ux, uy = _straight_reach(W, n, idx[c["i"]], c["w"], [d for _, d in ways])
    ds = np.minimum(ds, c["dmax"])
    q = np.flatnonzero(ds >= 2 * step_m)
    if straight and len(q):
        seen[q] = srch.straight(q, ds[q], ux[q], uy[q], grid.cell_m)
    for p in range(warm):
        q = np.flatnonzero(rank % warm == p)
        start = np.zeros(len(q))
        if p:
            pq = prev[q]
            g = np.abs(c["Ae"][q] - c["Ae"][pq])
            sp = np.where(srch.found[pq], srch.lo[pq], srch.dmax[pq]) - g - tol_m
            start = np.where(g <= 2 * step_m, np.maximum(sp, 0.0), 0.0)
        known = seen[q] >= start
        start = np.maximum(start, seen[q])
        todo = ~srch.found[q] & (start < srch.dmax[q] - 1e-9)
        srch.run(q[todo], start[todo], known[todo] & (start[todo] > 0))
    found, lo, hi = srch.found, srch.lo, srch.hi
    res = np.where(found, 0.5 * (lo + hi), c["dmax"])
    lim = np.where(found, TERRAIN, c["free"]).astype(np.int8)
    bx = np.full(len(res), np.nan)
    by = np.full(len(res), np.nan)
    bch = np.full(len(res), np.nan)
    f = np.flatnonzero(found)
    if len(f):
        x1, y1, s1, zr = W.at(c["Ae"][f], hi[f], c["sign"][f])
        bx[f], by[f], _, _, lim[f] = highest_point(grid, c["x0"][f], c["y0"][f], c["z0"][f], x1, y1,
                                                   zr + rules.object_height_m)
        bch[f] = s1
    for w in range(len(ways)):
        sl = slice(offs[w], offs[w + 1])
        e = c["i"][sl]
        out[w]["sight_m"][e] = res[sl]
        out[w]["limit"][e] = lim[sl]
        out[w]["block_x"][e], out[w]["block_y"][e], out[w]["block_chainage_m"][e] = bx[sl], by[sl], bch[sl]
    return out


def sight_3d_both_ways(path: LanePath, grid: ObstructionGrid, rules, lane_width_m: float = 3.6,
                       traffic_side: str = "right", eyes: np.ndarray | None = None, step_m: float = 5.0,
                       tol_m: float = 0.25, grow: float = 0.2, warm: int = 1,
                       straight: bool = True) -> dict[str, np.ndarray]:
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
    step_m, tol_m, grow, warm, straight
        See :func:`sight_one_way` (m; ``grow`` a fraction, ``warm`` a count).

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
    res = _sight_ways(path, grid, rules, [(sides["fwd"], 1), (sides["back"], -1)], lane_width_m / 2.0, eyes,
                      step_m, tol_m, grow, warm, straight)
    out = {}
    for name, r in zip(("fwd", "back"), res):
        out[f"sight_3d_{name}_m"] = r["sight_m"]
        out[f"limit_3d_{name}"] = r["limit"]
        out[f"block_x_{name}"] = r["block_x"]
        out[f"block_y_{name}"] = r["block_y"]
        out[f"block_chainage_{name}_m"] = r["block_chainage_m"]
    return out


def sight_3d_road(chainage_m, x, y, road_z, window, rules, lane_width_m: float = 3.6, traffic_side: str = "right",
                  carriageway_half_width_m: float = 3.5, object_min_height_m: float = 0.5, piece_m: float = 3000.0,
                  step_m: float = 5.0, tol_m: float = 0.25) -> dict[str, np.ndarray]:
    """Available 3D sight distance along a whole road, a piece of road at a time, each piece's
    ground read once as one window.

    Parameters
    ----------
    chainage_m, x, y : ndarray
        Stations: chainage and centreline position (m, the ground's metric CRS).
    road_z : callable or ndarray
        Road surface (fitted alignment) elevation (m), see :class:`LanePath`.
    window : callable
        ``window(xmin, ymin, xmax, ymax)`` gives ``(dem, transform, surface)`` covering the box
        (m; ``surface`` ``None`` without a surface model), or ``None`` off the ground data.
    rules : SightRules
        Eye and object heights and look-ahead (m).
    lane_width_m, traffic_side, carriageway_half_width_m, object_min_height_m
        See :func:`sight_3d_both_ways` and :func:`obstruction_grid` (m).
    piece_m : float, default 3000.0
        Stations computed per window (m of road).
    step_m, tol_m : float
        See :func:`sight_one_way` (m).

    Returns
    -------
    dict of ndarray
        The columns of :func:`sight_3d_both_ways`, one value per station (NaN where no window
        could be read), and ``unknown_cells`` (nodata cells met, summed over the windows).
    """
    s = np.asarray(chainage_m, dtype=float)
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    n = len(s)
    out = {}
    for name in ("fwd", "back"):
        out[f"sight_3d_{name}_m"] = np.full(n, np.nan)
        out[f"limit_3d_{name}"] = np.full(n, END, dtype=np.int8)
        out[f"block_x_{name}"] = np.full(n, np.nan)
        out[f"block_y_{name}"] = np.full(n, np.nan)
        out[f"block_chainage_{name}_m"] = np.full(n, np.nan)
    zfun = road_z if callable(road_z) else (lambda q, zs=np.asarray(road_z, float): np.interp(q, s, zs, left=np.nan,
                                                                                              right=np.nan))
    reach = 1.15 * rules.lookahead_m + 2 * step_m
    unknown = 0
    for a in np.arange(s[0], s[-1] + 1e-9, piece_m):
        eyes = np.flatnonzero((s >= a) & (s < a + piece_m))
        if not len(eyes):
            continue
        sel = np.flatnonzero((s >= s[eyes[0]] - reach) & (s <= s[eyes[-1]] + reach))
        pad = lane_width_m + carriageway_half_width_m + 5.0
        got = window(x[sel].min() - pad, y[sel].min() - pad, x[sel].max() + pad, y[sel].max() + pad)
        if got is None:
            continue
        dem, transform, surface = got
        path = LanePath(s[sel], x[sel], y[sel], zfun)
        grid = obstruction_grid(dem, transform, path, carriageway_half_width_m, surface, object_min_height_m)
        unknown += grid.unknown
        res = sight_3d_both_ways(path, grid, rules, lane_width_m, traffic_side, eyes - sel[0], step_m, tol_m)
        for k, v in res.items():
            out[k][eyes] = v
    out["unknown_cells"] = np.asarray(unknown)
    return out


def clearance(path: LanePath, grid: ObstructionGrid, rules, eyes, required_m, lane_side: int, direction: int,
              lane_offset_m: float, object_step_m: float = 1.0, batch: int = 16) -> dict:
    """What to clear so that every eye of a stretch sees the required distance: the ground or
    roadside objects standing above the sight lines it needs.

    Parameters
    ----------
    path : LanePath
        Centreline and road surface (fitted alignment).
    grid : ObstructionGrid
        The obstruction surface.
    rules : SightRules
        Eye and object heights (m).
    eyes : ndarray of int
        Stations of the stretch (indices into the path).
    required_m : float or ndarray
        Required sight distance (SSD) at each eye (m, along the lane).
    lane_side, direction, lane_offset_m
        The lane and direction of travel (see :func:`sight_one_way`).
    object_step_m : float, default 1.0
        Spacing of the object positions each eye must see, up to the required distance (m).
    batch : int, default 16
        Eyes handled at once (bounds memory).

    Returns
    -------
    dict
        ``cut_m`` (per cell of the grid, the height by which it stands above the lowest required
        line passing over it, m; 0 elsewhere and on the carriageway), ``area_m2`` (plan area of
        the cells to clear, m²), ``object_area_m2`` (of them, roadside objects, m²),
        ``volume_m3`` (ground to cut: the terrain cells' heights above the lowest line times the
        cell area, m³), ``max_cut_m`` (m) and ``polygon`` (the cells to clear as one shapely
        geometry in the grid's CRS, ``None`` where nothing stands in the way).

    Notes
    -----
    The envelope is every straight line from each eye (``eye_height_m`` above the lane) to every
    object position (``object_height_m`` above the lane) up to the required distance, sampled
    every half cell; a cell is to be cleared where its own height stands above the lowest of
    those lines over it (the lines of every eye of the stretch, so that each sees its
    required distance with nothing else changed). Objects are cleared, not cut: their cells
    count in the area, not in the volume (the ground under them is not known from the
    surface model). Common practice, no source: clearing the sight triangle / sight line
    envelope on the inside of curves (AASHTO Green Book 2018, ch. 3, horizontal sight line
    offset).
    """
    eyes = np.atleast_1d(np.asarray(eyes, dtype=np.int64))
    req = np.broadcast_to(np.asarray(required_m, dtype=float), eyes.shape)
    W = _Ways(path, [(lane_side, lane_offset_m)])
    n = len(path.s)
    R, C = grid.z.shape
    lowest = np.full(R * C, np.inf)
    ze = path.z(path.s[eyes]) + rules.eye_height_m
    for b0 in range(0, len(eyes), batch):
        e = eyes[b0:b0 + batch]
        z0 = ze[b0:b0 + batch]
        r = req[b0:b0 + batch]
        room = (W.A[n - 1] - W.A[e]) if direction > 0 else W.A[e]
        reach = np.minimum(r, room)
        k = np.maximum(np.floor(reach / object_step_m).astype(np.int64), 0)
        ok = np.isfinite(z0) & (k > 0)
        if not ok.any():
            continue
        le, lo = _pieces(np.where(ok, k, 0))
        d = (lo + 1) * object_step_m
        x1, y1, _, zr = W.at(W.A[e][le], d, np.full(len(le), float(direction)))
        u0, v0 = grid.pixel(W.lx[e][le], W.ly[e][le])
        u1, v1 = grid.pixel(x1, y1)
        za, zb = z0[le], zr + rules.object_height_m
        m = np.maximum(np.ceil(2 * np.hypot(u1 - u0, v1 - v0)), 1).astype(np.int64)
        ln, j = _pieces(m)
        t = (j + 0.5) / m[ln]
        i_ = np.rint(v0[ln] + t * (v1 - v0)[ln]).astype(np.int64)
        j_ = np.rint(u0[ln] + t * (u1 - u0)[ln]).astype(np.int64)
        inside = (i_ >= 0) & (j_ >= 0) & (i_ < R) & (j_ < C)
        cell = (i_ * C + j_)[inside]
        zl = (za[ln] + t * (zb - za)[ln])[inside]
        np.minimum.at(lowest, cell, zl)
    zflat = grid.z.ravel().astype(float)
    kflat = grid.kind.ravel()
    cut = np.where(np.isfinite(lowest) & (kflat != CREST), zflat - lowest, 0.0)
    cut = np.maximum(cut, 0.0).reshape(R, C)
    a = grid.cell_m ** 2
    hit = cut > 0
    kind = grid.kind
    out = {"cut_m": cut, "area_m2": float(hit.sum() * a), "object_area_m2": float((hit & (kind == OBJECT)).sum() * a),
           "volume_m3": float(cut[hit & (kind == TERRAIN)].sum() * a),
           "max_cut_m": float(cut.max()) if hit.any() else 0.0, "polygon": None}
    if hit.any():
        out["polygon"] = _cells_polygon(hit, grid.transform)
    return out


def _cells_polygon(mask: np.ndarray, transform: tuple):
    """The cells of ``mask`` as one shapely geometry (their outlines merged)."""
    import shapely
    from affine import Affine
    from rasterio.features import shapes
    from shapely.geometry import shape

    geoms = [shape(g) for g, v in shapes(mask.astype(np.uint8), mask=mask, transform=Affine(*transform)) if v]
    return shapely.union_all(geoms) if geoms else None


def clearance_road(chainage_m, x, y, road_z, window, rules, eyes, required_m, direction: int,
                   lane_width_m: float = 3.6, traffic_side: str = "right", carriageway_half_width_m: float = 3.5,
                   object_min_height_m: float = 0.5) -> dict | None:
    """:func:`clearance` for one stretch of a road, its ground read as one window.

    Parameters
    ----------
    chainage_m, x, y, road_z, window, rules, lane_width_m, traffic_side, carriageway_half_width_m,
    object_min_height_m
        As for :func:`sight_3d_road`.
    eyes : ndarray of int
        The stretch's stations (indices).
    required_m : ndarray
        Required sight distance at each of them (m).
    direction : int
        +1 with the chainage, -1 against it.

    Returns
    -------
    dict or None
        What :func:`clearance` gives (``cut_m`` dropped); ``None`` where no window could be read.
    """
    s = np.asarray(chainage_m, dtype=float)
    eyes = np.asarray(eyes, dtype=np.int64)
    req = np.asarray(required_m, dtype=float)
    reach = 1.15 * float(np.nanmax(req)) + 20.0
    sel = np.flatnonzero((s >= s[eyes].min() - reach) & (s <= s[eyes].max() + reach))
    pad = lane_width_m + carriageway_half_width_m + 5.0
    got = window(x[sel].min() - pad, y[sel].min() - pad, x[sel].max() + pad, y[sel].max() + pad)
    if got is None:
        return None
    dem, transform, surface = got
    path = LanePath(s[sel], x[sel], y[sel], road_z)
    grid = obstruction_grid(dem, transform, path, carriageway_half_width_m, surface, object_min_height_m)
    side = lane_sides(traffic_side)["fwd" if direction > 0 else "back"]
    out = clearance(path, grid, rules, eyes - sel[0], req, side, direction, lane_width_m / 2.0)
    out.pop("cut_m")
    return out
