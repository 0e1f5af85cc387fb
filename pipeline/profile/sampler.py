"""Ground elevation along one road at a time, read from a DEM where the road really is
(:mod:`pipeline.profile.corridor`) or located from ground points (the profile stage's reader)."""

from __future__ import annotations

import numpy as np

from ..core.config import Config
from ..ingest.readers import (DemGround, PointGround, dem_cell_m, feature_chainages, is_ballpark, read_dem_window,
                              structure_ranges, transformer)
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
        arr, aff = read_dem_window(self.ground, gx, gy, margin=2 + int(half))
        extra = {"cell_m": None, "spacing_m": None, "offset_m": np.zeros(n), "filter_m": np.zeros(n)}
        if arr is None:
            return np.full(n, np.nan), extra, []
        cell = dem_cell_m(self.ground, aff, float(np.nanmean(gy)))
        extra["cell_m"] = cell
        if cell <= cfg["profile.corridor_max_cell_m"] and half > 0:
            return self._carriageway_profile(tr, arr, aff, cell, half, (sx, sy), (nx, ny), extra)
        return self._filtered_profile(poly, tr, arr, aff, cell, stations, extra)

    def _carriageway_profile(self, tr, arr, aff, cell: float, half: float, s_xy, n_xy, extra: dict):
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
        section = bilinear(arr, aff, qx, qy)
        off = carriageway_offsets(section, offs, self.cfg["profile.step_m"], self.cfg["profile.carriageway_width_m"])
        extra["offset_m"] = off
        band = np.arange(-1.5, 1.5 + do / 2, do)
        bo = off[:, None] + band[None, :]
        ox, oy = (np.asarray(v).reshape(bo.shape) for v in
                  tr.transform((sx[:, None] + bo * nx[:, None]).ravel(), (sy[:, None] + bo * ny[:, None]).ravel()))
        z = road_surface_elevation(bilinear(arr, aff, ox, oy))
        big = np.abs(off) > 1.0
        if big.any():
            notes.append(("profile read on the carriageway, off the centreline", None, None,
                          f"the carriageway was found {np.median(np.abs(off[big])):.1f} m (up to "
                          f"{np.max(np.abs(off)):.1f} m) from the given centreline over "
                          f"{100 * big.mean():.0f} % of the road; the profile is read there "
                          f"(offsets per station in profiles.parquet, ground_offset_m)"))
        return z, extra, notes

    def _filtered_profile(self, poly: Polyline, tr, arr, aff, cell: float, stations: np.ndarray, extra: dict):
        """On a coarse DEM: the centreline's samples, every quarter cell, filtered against the
        cell-crossing ripple (:func:`cell_crossing_filter`); returns ``(z, extra, notes)``."""
        step = self.cfg["profile.step_m"]
        h = min(step, cell / 4)
        fine = np.arange(0.0, stations[-1] + h / 2, h) if len(stations) else stations
        fx, fy = poly.at(fine)
        qx, qy = (np.asarray(v) for v in tr.transform(fx, fy))
        zf = bilinear(arr, aff, qx, qy)
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
