"""Ground elevation along one road at a time, read from a DEM where the road really is
(:mod:`pipeline.profile.corridor`) or located from ground points (the profile stage's reader)."""

from __future__ import annotations

import contextlib

import numpy as np

from ..core.config import Config
from ..ingest.readers import (DemGround, PointGround, dem_block_size, dem_cell_m, dem_window, feature_chainages,
                              is_ballpark, read_dem_cells, structure_ranges, transformer)
from .corridor import carriageway_offsets, cell_crossing_filter, resolution_length_m
from .stations import MISSING, Polyline, bilinear, point_spacing_m, regularise


class GroundSampler:
    """Ground elevation along one road at a time, from a DEM or from ground points.

    Parameters
    ----------
    ground : DemGround or PointGround
        The opened ground data (:mod:`pipeline.ingest.readers`).
    work_crs : dict
        Working CRS (metric) per key, the roads' coordinates being in these.
    cfg : Config
        Run settings (``[profile]``, ``[ground]``, ``[structures]``, ``[junctions]``).
    structures, junctions : optional
        Known structures and junctions read from the user's layers, or ``None``.
    """

    def __init__(self, ground: DemGround | PointGround, work_crs: dict, cfg: Config, structures=None,
                 junctions=None):
        self.ground = ground
        self.work_crs = work_crs
        self.cfg = cfg
        self.structures = structures
        self.junctions = junctions
        self._tr: dict = {}
        self.points_dropped = 0
        self.points_used = 0
        self.notes: list[str] = []
        self._blocks = DemBlocks(ground) if isinstance(ground, DemGround) else None

    def _to_ground(self, key: str, probe_xy):
        if key not in self._tr:
            src = self.work_crs[key]
            tr = transformer(src, self.ground.crs)
            self._tr[key] = tr
            tr.transform(*probe_xy)
            if is_ballpark(tr):
                self.notes.append(
                    f"transform from {src.name!r} to {self.ground.crs.name!r} has no datum-shift grid "
                    f"(PROJ 'ballpark'); ground positions may be metres off: give both in the same datum"
                )
        return self._tr[key]

    def structure_ranges(self, row, line) -> list:
        """Known structures on one road, as chainage ranges to mask.

        Parameters
        ----------
        row : mapping
            The road's record: ``work_key``, ``road_id``, ``source_id``.
        line : shapely LineString
            Its centreline in the working CRS (m).

        Returns
        -------
        list of (float, float, str)
            ``(from_m, to_m, label)`` per structure (m), widened by ``structures.buffer_m``.
        """
        if self.structures is None:
            return []
        return structure_ranges(self.structures, line, self.work_crs[row["work_key"]], row["road_id"],
                                row["source_id"], self.cfg)

    def junction_points(self, row) -> list:
        """Junctions and accesses from the user's layer on one road.

        Parameters
        ----------
        row : mapping
            The road's record: ``geometry``, ``work_key``, ``road_id``, ``source_id``.

        Returns
        -------
        list of (float, str)
            ``(chainage_m, label)`` per junction within ``junctions.max_offset_m`` of the road.
        """
        if self.junctions is None:
            return []
        found = feature_chainages(self.junctions, row["geometry"], self.work_crs[row["work_key"]],
                                  row["road_id"], row["source_id"], self.cfg["junctions.max_offset_m"])
        return [(lo, label) for lo, hi, _, label in found]

    def sample(self, line, key: str, road_id: str, stations: np.ndarray, polyline=None
               ) -> tuple[np.ndarray, np.ndarray, list, dict]:
        """Ground elevation at the stations of one road, with how it was read.

        Parameters
        ----------
        line : shapely LineString
            The road's centreline in its working CRS (m).
        key : str
            Key of the road's working CRS in ``work_crs``.
        road_id : str
            The road's id as in the source files, which ground points refer to.
        stations : ndarray
            Station chainages (m).
        polyline : Polyline, optional
            ``line`` as a :class:`~pipeline.profile.stations.Polyline`, if already built.

        Returns
        -------
        z_m : ndarray
            Ground elevation per station (m); NaN where missing.
        flag : ndarray of int8
            ``MEASURED``, ``FILLED`` or ``MISSING`` per station (:func:`regularise`).
        notes : list
            ``(kind, from_m, to_m, detail)`` notes on the reading.
        extra : dict
            What the data can resolve: ``cell_m`` (DEM, m) or ``spacing_m`` (points, m), and
            per station ``offset_m`` (where across the corridor the profile was read, m) and
            ``filter_m`` (equivalent length of the cell-crossing filter, m; 0 where none).
        """
        step, max_gap = self.cfg["profile.step_m"], self.cfg["profile.max_gap_m"]
        notes: list = []
        if isinstance(self.ground, DemGround):
            z, extra, dem_notes = self._dem_profile(polyline or Polyline(line), key, stations)
            notes.extend(dem_notes)
            zs, flag = regularise(stations, z, stations, step, max_gap)
            return zs, flag, notes, extra
        extra = {"cell_m": None, "spacing_m": None, "offset_m": np.zeros(len(stations)),
                 "filter_m": np.zeros(len(stations))}
        located = self._located_points(line, key, road_id, stations, polyline, notes)
        if located is None:
            return np.full(len(stations), np.nan), np.full(len(stations), MISSING, dtype=np.int8), notes, extra
        chain, z = located
        zs, flag = regularise(chain, z, stations, step, max_gap)
        extra["spacing_m"] = point_spacing_m(chain)
        return zs, flag, notes, extra

    def _located_points(self, line, key: str, road_id: str, stations: np.ndarray, polyline, notes: list):
        """The road's ground points as ``(chainage_m, z_m)``, those beyond its ends or too far
        from its centreline dropped with a note; ``None`` when the road has none."""
        step = self.cfg["profile.step_m"]
        pts = self.ground.points(road_id)
        if pts is None or len(pts["z_m"]) == 0:
            return None
        if self.ground.mode == "chainage":
            chain = pts["chainage_m"]
            length = float(stations[-1]) if len(stations) else 0.0
            beyond = (chain < -step) | (chain > length + step)
            if beyond.any():
                notes.append(("ground points beyond the road's ends dropped", None, None, f"{int(beyond.sum())} points"))
            chain, z = chain[~beyond], pts["z_m"][~beyond]
            self.points_used += len(chain)
            return chain, z
        if ("points", key) not in self._tr:
            self._tr[("points", key)] = transformer(self.ground.crs, self.work_crs[key])
        tr = self._tr[("points", key)]
        px, py = tr.transform(pts["x"], pts["y"])
        chain, offset = (polyline or Polyline(line)).locate(np.asarray(px), np.asarray(py))
        far = np.abs(offset) > self.cfg["ground.max_offset_m"]
        if far.any():
            self.points_dropped += int(far.sum())
            notes.append(("ground points too far from the centreline dropped", None, None,
                          f"{int(far.sum())} of {len(far)} points beyond {self.cfg['ground.max_offset_m']:g} m"))
        chain, z = chain[~far], pts["z_m"][~far]
        self.points_used += len(chain)
        return chain, z

    def _dem_profile(self, poly: Polyline, key: str, stations: np.ndarray) -> tuple[np.ndarray, dict, list]:
        """Ground elevation along one road from the DEM, read where the road really is.

        On a DEM whose cells are at most ``profile.corridor_max_cell_m``, the carriageway is
        found across a corridor of ``profile.corridor_half_width_m`` either side of the
        centreline and the profile is read on it; on a coarser DEM the centreline's samples
        are filtered against the cell-crossing ripple (both in :mod:`pipeline.profile.corridor`).
        """
        cfg = self.cfg
        n = len(stations)
        tr = self._to_ground(key, poly.at(stations[:1]))
        sx, sy = poly.at(stations)
        tx, ty = poly.at(stations + 0.5)
        bx, by = poly.at(stations - 0.5)
        hx, hy = tx - bx, ty - by
        norm = np.hypot(hx, hy)
        norm[norm == 0] = 1.0
        nx, ny = -hy / norm, hx / norm  # left-hand normal
        half = float(cfg["profile.corridor_half_width_m"])
        gx, gy = (np.asarray(v) for v in tr.transform(sx, sy))
        extra = {"cell_m": None, "spacing_m": None, "offset_m": np.zeros(n), "filter_m": np.zeros(n)}
        with self._blocks.opened() as dem:
            if dem_window(dem.src, gx, gy, margin=2 + int(half)) is None:  # the road lies off the DEM
                return np.full(n, np.nan), extra, []
            cell = dem_cell_m(self.ground, dem.src.transform, float(np.nanmean(gy)))
            extra["cell_m"] = cell
            if cell <= cfg["profile.corridor_max_cell_m"] and half > 0:
                return self._carriageway_profile(tr, dem.bilinear, cell, half, (sx, sy), (nx, ny), extra)
            return self._filtered_profile(poly, tr, dem.bilinear, cell, stations, extra)

    def _carriageway_profile(self, tr, at, cell: float, half: float, s_xy, n_xy, extra: dict):
        """On a fine DEM: the profile read on the carriageway found across the corridor
        (:func:`carriageway_offsets`), as :func:`road_surface_elevation` of a band 1.5 m either
        side of its centre; returns ``(z, extra, notes)``."""
        (sx, sy), (nx, ny) = s_xy, n_xy
        notes = []
        do = max(min(cell / 2, 1.0), 0.25)
        offs = np.arange(-half, half + do / 2, do)
        px = sx[:, None] + offs[None, :] * nx[:, None]
        py = sy[:, None] + offs[None, :] * ny[:, None]
        qx, qy = (np.asarray(v).reshape(px.shape) for v in tr.transform(px.ravel(), py.ravel()))
        section = at(qx, qy)
        off = carriageway_offsets(section, offs, self.cfg["profile.step_m"], self.cfg["profile.carriageway_width_m"])
        extra["offset_m"] = off
        band = np.arange(-1.5, 1.5 + do / 2, do)
        bo = off[:, None] + band[None, :]
        ox, oy = (np.asarray(v).reshape(bo.shape) for v in
                  tr.transform((sx[:, None] + bo * nx[:, None]).ravel(), (sy[:, None] + bo * ny[:, None]).ravel()))
        z = road_surface_elevation(at(ox, oy))
        big = np.abs(off) > 1.0
        if big.any():
            notes.append(("profile read on the carriageway, off the centreline", None, None,
                          f"the carriageway was found {np.median(np.abs(off[big])):.1f} m (up to "
                          f"{np.max(np.abs(off)):.1f} m) from the given centreline over "
                          f"{100 * big.mean():.0f} % of the road; the profile is read there "
                          f"(offsets per station in profiles.parquet, ground_offset_m)"))
        return z, extra, notes

    def _filtered_profile(self, poly: Polyline, tr, at, cell: float, stations: np.ndarray, extra: dict):
        """On a coarse DEM: the centreline's samples, every quarter cell, filtered against the
        cell-crossing ripple (:func:`cell_crossing_filter`); returns ``(z, extra, notes)``."""
        step = self.cfg["profile.step_m"]
        h = min(step, cell / 4)
        fine = np.arange(0.0, stations[-1] + h / 2, h) if len(stations) else stations
        fx, fy = poly.at(fine)
        qx, qy = (np.asarray(v) for v in tr.transform(fx, fy))
        zf = at(qx, qy)
        heading = np.arctan2(np.gradient(qy), np.gradient(qx))
        zf, box = cell_crossing_filter(fine, zf, heading, cell)
        z = np.interp(stations, fine, zf)
        z[~np.isfinite(np.interp(stations, fine, np.where(np.isfinite(zf), 0.0, np.nan)))] = np.nan
        extra["filter_m"] = np.interp(stations, fine, box)
        notes = [("profile filtered against the DEM's cell-crossing ripple", None, None,
                  f"DEM cells of {cell:.1f} m: the profile is averaged over {np.median(box):.0f} m "
                  f"(median) along the road, and no feature shorter than "
                  f"{resolution_length_m(cell, None, step, float(np.median(box))):.0f} m is resolved")]
        return z, extra, notes


class DemBlocks:
    """A DEM read block by block, only the blocks that the points asked for touch.

    A road's corridor crosses a few blocks of the raster; its bounding box may cover thousands
    (a long diagonal road on a 1 m DEM). The blocks are the raster's own tiles where it is
    tiled (:func:`pipeline.ingest.ground.dem_block_size`), each read with a one-cell rim so that
    interpolation near a block's edge sees the same four cells as on the whole raster; the
    last blocks read are kept for the next road (``keep`` of them).

    Parameters
    ----------
    ground : DemGround
        The DEM.
    keep : int, optional
        Blocks kept in memory between reads (each about 2 MB at 512 x 512 cells).
    """

    def __init__(self, ground: DemGround, keep: int = 48):
        self.ground = ground
        self.keep = keep
        self.src = None
        self._cache: dict = {}

    @contextlib.contextmanager
    def opened(self):
        """The DEM open for the reads of one road.

        Returns
        -------
        contextlib.AbstractContextManager
            Yields this object, with ``src`` the open dataset.
        """
        import rasterio

        with rasterio.open(self.ground.path) as src:
            self.src = src
            try:
                yield self
            finally:
                self.src = None

    def bilinear(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        """Bilinear interpolation of the DEM at map coordinates (see
        :func:`pipeline.profile.stations.bilinear`), reading only the blocks the points are in.

        Parameters
        ----------
        x, y : numpy.ndarray
            Map coordinates in the DEM's CRS (any shape, the same for both).

        Returns
        -------
        numpy.ndarray
            Elevations (m), shaped as ``x``; NaN outside the raster or next to nodata.
        """
        src = self.src
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        shape = x.shape
        x, y = x.ravel(), y.ravel()
        out = np.full(x.shape, np.nan)
        inv = ~src.transform
        col = inv.a * x + inv.b * y + inv.c
        row = inv.d * x + inv.e * y + inv.f
        inside = (col >= 0) & (col <= src.width) & (row >= 0) & (row <= src.height)
        if not inside.any():
            return out.reshape(shape)
        bh, bw = dem_block_size(src, self.ground.band)
        idx = np.flatnonzero(inside)
        br = np.minimum(np.floor(row[idx] / bh).astype(np.int64), (src.height - 1) // bh)
        bc = np.minimum(np.floor(col[idx] / bw).astype(np.int64), (src.width - 1) // bw)
        key = br * (src.width // bw + 2) + bc
        order = np.argsort(key, kind="stable")
        keys, starts = np.unique(key[order], return_index=True)
        for j, start in enumerate(starts):
            stop = starts[j + 1] if j + 1 < len(starts) else len(order)
            pick = idx[order[start:stop]]
            arr, aff = self._block(int(br[order[start]]), int(bc[order[start]]), bh, bw)
            out[pick] = bilinear(arr, aff, x[pick], y[pick])
        return out.reshape(shape)

    def _block(self, br: int, bc: int, bh: int, bw: int):
        """Block (``br``, ``bc``) with a one-cell rim, clipped to the raster: cells (m) and transform."""
        k = (br, bc, bh, bw)
        hit = self._cache.pop(k, None)
        if hit is None:
            src = self.src
            r0, c0 = max(br * bh - 1, 0), max(bc * bw - 1, 0)
            r1, c1 = min((br + 1) * bh + 1, src.height), min((bc + 1) * bw + 1, src.width)
            from rasterio.windows import Window

            win = Window(c0, r0, c1 - c0, r1 - r0)
            hit = (read_dem_cells(self.ground, src, win), src.window_transform(win))
        self._cache[k] = hit  # the most recent last
        while len(self._cache) > self.keep:
            self._cache.pop(next(iter(self._cache)))
        return hit


def road_surface_elevation(band_z: np.ndarray, quantile: float = 0.25) -> np.ndarray:
    """Elevation of the road surface at each station from DEM samples across its middle.

    Parameters
    ----------
    band_z : ndarray, shape (stations, samples)
        DEM elevations (m) across the middle of the carriageway (1.5 m either side of its
        centre); NaN where unknown.
    quantile : float, default 0.25
        The quantile taken (fraction).

    Returns
    -------
    ndarray
        The ``quantile`` of each station's samples (m); NaN where any sample is unknown.

    Notes
    -----
    A low sample quantile (numpy's default linear interpolation between order statistics), so
    a canopy or a vehicle over part of the band does not lift the profile. The choice of the
    lower quartile is common practice, no source.
    """
    z = np.full(len(band_z), np.nan)
    whole = np.isfinite(band_z).all(axis=1)
    z[whole] = np.quantile(band_z[whole], quantile, axis=1)
    return z
