"""Road centrelines: read from a GeoPackage (layer selectable), GeoParquet, any other vector
file GDAL reads, or a CSV with a WKT column and a stated CRS; multi-part lines merged into
one line each; every road put in a metric working CRS (see :mod:`pipeline.ingest.crs`).

Functions here only read and check; they do no profile numerics.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import pyproj
import shapely

from ..core.config import Config
from ..core.errors import InputError
from .columns import check_road_columns
from .crs import transform_geometries, transformer, working_crs, working_crs_key
from .files import check_file, id_strings, numeric_column, read_table


@dataclass
class Roads:
    """The road network after ingest.

    ``table`` has one row per input road, in input order, with
    ``road_id, name, speed_raw, aadt, road_class, source_id, geometry_src, geometry``
    (working CRS, metres), ``work_key``, ``length_m`` and ``skip_reason``
    (``None`` where the road can be processed).
    """

    path: Path
    table: pd.DataFrame
    source_crs: pyproj.CRS
    work_crs: dict[str, pyproj.CRS] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)

    def to_source(self, key: str) -> pyproj.Transformer:
        """The transformer from working CRS ``key`` back to the roads' own CRS.

        Parameters
        ----------
        key : str
            A key of :attr:`work_crs`.

        Returns
        -------
        pyproj.Transformer
            Working CRS (metres) to source CRS.
        """
        return transformer(self.work_crs[key], self.source_crs)


def merge_parts(geom, tolerance_m: float) -> tuple[object | None, str | None]:
    """One LineString from a (Multi)LineString, parts joined end to end in order.

    A part may be digitised in either direction; the first part fixes the road's direction.
    Gaps up to ``tolerance_m`` between consecutive parts are closed.

    Parameters
    ----------
    geom : shapely geometry or None
        The road's geometry, in a metric CRS.
    tolerance_m : float
        The largest gap (m) closed between consecutive parts.

    Returns
    -------
    tuple
        ``(line, None)`` or ``(None, reason)``.
    """
    if geom is None or shapely.is_empty(geom):
        return None, "no geometry"
    kind = shapely.get_type_id(geom)
    if kind == 1:  # LineString
        return shapely.force_2d(geom), None
    if kind != 5:  # not MultiLineString
        return None, f"geometry is a {geom.geom_type}, not a line"
    parts = [shapely.get_coordinates(p) for p in shapely.get_parts(geom) if not shapely.is_empty(p)]
    if not parts:
        return None, "no geometry"
    chain = parts[0]
    for i, nxt in enumerate(parts[1:], start=1):
        if i == 1:
            # the first part may also be reversed to meet the second
            ends = [(chain[-1], nxt[0], False, False), (chain[-1], nxt[-1], False, True),
                    (chain[0], nxt[0], True, False), (chain[0], nxt[-1], True, True)]
        else:
            ends = [(chain[-1], nxt[0], False, False), (chain[-1], nxt[-1], False, True)]
        gap, rev_chain, rev_next = min((float(np.hypot(*(a - b))), rc, rn) for a, b, rc, rn in ends)
        if gap > tolerance_m:
            return _merge_unordered(geom, parts[0][0], i, gap)
        if rev_chain:
            chain = chain[::-1]
        seg = nxt[::-1] if rev_next else nxt
        chain = np.vstack([chain, seg[1:] if gap == 0 else seg])
    return shapely.linestrings(chain[:, :2]), None


def _merge_unordered(geom, first: np.ndarray, i: int, gap: float) -> tuple[object | None, str | None]:
    """Parts that do not meet in order: shapely's line merge where it gives one line
    (directed to start nearest the first part's first vertex), else the reason."""
    merged = shapely.line_merge(geom)
    if shapely.get_type_id(merged) == 1:
        line = shapely.force_2d(merged)
        start = shapely.get_coordinates(line)[0]
        if np.hypot(*(start - first)) > np.hypot(*(shapely.get_coordinates(line)[-1] - first)):
            line = shapely.reverse(line)
        return line, None
    return None, (
        f"parts {i} and {i + 1} of the multi-part line do not meet "
        f"(gap {gap:.1f} m); join them in the source data"
    )


def unique_ids(ids: np.ndarray) -> tuple[np.ndarray, list[tuple[str, list[str]]]]:
    """Road ids made unique: the first of a duplicated id keeps it, later ones get ``~2``,
    ``~3`` ... (both roads are evaluated, apart).

    Parameters
    ----------
    ids : numpy.ndarray
        Object array of road ids as read.

    Returns
    -------
    ids : numpy.ndarray
        The unique ids, in the same order.
    renamed : list of (str, list of str)
        Each duplicated id with the new names of its later copies.
    """
    seen: dict[str, int] = {}
    out = ids.copy()
    renamed: dict[str, list[str]] = {}
    taken = set(ids)
    for i, v in enumerate(ids):
        if v in seen:
            seen[v] += 1
            new = f"{v}~{seen[v]}"
            while new in taken:
                seen[v] += 1
                new = f"{v}~{seen[v]}"
            taken.add(new)
            out[i] = new
            renamed.setdefault(v, []).append(new)
        else:
            seen[v] = 1
    return out, list(renamed.items())


def read_roads(path: str | Path, cfg: Config) -> Roads:
    """Read the centrelines, merge multi-part lines, project to a metric CRS.

    Parameters
    ----------
    path : str or Path
        The roads file (vector, GeoParquet or CSV with WKT).
    cfg : Config
        The run's settings (``roads.*``; ``roads.join_tolerance_m`` in metres).

    Returns
    -------
    Roads
        One row per input road, in input order; roads that cannot be processed carry a
        ``skip_reason``. Problems with the file as a whole raise :class:`InputError`.
    """
    path = check_file(path, "roads")
    frame, crs, column_notes = _road_frame(path, cfg)
    table, source_ids, duplicated = _attribute_table(frame, cfg, path)
    raw = frame["geometry"].to_numpy(dtype=object)
    present, bad_coords = _usable_geometry(raw)
    keys = _work_keys(crs, raw, present)
    table["source_id"] = source_ids
    lines, src_lines, merge_reasons, work_crs = _project_lines(raw, keys, present, crs,
                                                               cfg["roads.join_tolerance_m"])
    reasons = np.full(len(table), None, dtype=object)
    reasons[~present] = "no geometry"
    reasons[bad_coords] = "coordinates that are not finite numbers (NaN or infinite) in the geometry"
    reasons[present] = merge_reasons[present]
    table["geometry_src"] = src_lines
    table["geometry"] = lines
    table["work_key"] = keys
    have = np.array([g is not None for g in lines])
    length = np.full(len(table), np.nan)
    length[have] = shapely.length(lines[have])
    table["length_m"] = length
    reasons[have & ~(length > 0)] = "zero-length line"
    table["skip_reason"] = pd.Series(reasons, dtype=object)
    notes = column_notes + _read_notes(path, frame.attrs, duplicated) + _crs_notes(crs, work_crs)
    return Roads(path=path, table=table, source_crs=crs, work_crs=work_crs, notes=notes)


def _road_frame(path: Path, cfg: Config) -> tuple[pd.DataFrame, pyproj.CRS, list[str]]:
    """The roads file read and checked as a whole: rows, geometry, the id column, the columns
    the settings name, and a geographic or projected CRS. Returns the frame, its CRS and the
    notes on its columns."""
    frame, crs = read_table(
        path, what="roads", layer=cfg["roads.layer"], layer_setting="roads.layer (--roads-layer)",
        wkt_column=cfg["roads.wkt_column"], crs_text=cfg["roads.crs"], crs_setting="roads.crs (--roads-crs)",
        wkt_explicit="roads.wkt_column" in cfg.explicit,
    )
    id_col = cfg["roads.id_column"]
    if len(frame) == 0:
        raise InputError(f"{path}: no roads in the file; export the centrelines again")
    if "geometry" not in frame.columns:
        raise InputError(
            f"{path}: no geometry; a CSV needs a WKT column named wkt, geometry or geom "
            f"(or set roads.wkt_column)"
        )
    if id_col not in frame.columns:
        raise InputError(
            f"{path}: no column {id_col!r} for the road identifier "
            f"(columns: {', '.join(map(str, frame.columns[:12]))}); set roads.id_column or --id-column"
        )
    column_notes = check_road_columns([c for c in frame.columns if c != "geometry"], cfg, path)
    if crs is None:
        raise InputError(f"{path}: no CRS in the file; state it with roads.crs or --roads-crs (e.g. EPSG:32633)")
    if not (crs.is_geographic or crs.is_projected):
        raise InputError(f"{path}: CRS {crs.name!r} is neither geographic nor projected; reproject the roads")
    return frame, crs, column_notes


def _attribute_table(frame: pd.DataFrame, cfg: Config, path: Path
                     ) -> tuple[pd.DataFrame, np.ndarray, list[tuple[str, list[str]]]]:
    """The roads' attributes (``road_id, name, speed_raw, aadt, road_class``), the ids as
    read (``source_id``) and the renamings of duplicated ids. An empty id stops the run."""
    id_col = cfg["roads.id_column"]
    ids = id_strings(frame[id_col])
    missing = [i for i, v in enumerate(ids) if v is None or v == ""]
    if missing:
        raise InputError(f"{path}: row {missing[0] + 2}, column {id_col}: empty road identifier; fill it in")
    source_ids = ids.copy()
    ids, duplicated = unique_ids(ids)
    table = pd.DataFrame({
        "road_id": ids,
        "name": _optional_text(frame, cfg["roads.name_column"]),
        "speed_raw": _optional_numeric(frame, cfg["roads.speed_column"], path),
        "aadt": _optional_numeric(frame, cfg["roads.aadt_column"], path),
        "road_class": _optional_text(frame, cfg["roads.class_column"]),
    })
    return table, source_ids, duplicated


def _optional_numeric(frame: pd.DataFrame, column: str, path: Path) -> np.ndarray:
    """A numeric column where the settings name one the file has, else NaN throughout."""
    if column and column in frame.columns:
        return numeric_column(frame, column, path)
    return np.full(len(frame), np.nan)


def _optional_text(frame: pd.DataFrame, column: str) -> np.ndarray:
    """A text column where the settings name one the file has, else ``None`` throughout."""
    if column and column in frame.columns:
        return np.array([None if pd.isna(v) else str(v) for v in frame[column]], dtype=object)
    return np.full(len(frame), None, dtype=object)


def _usable_geometry(raw: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Which roads have a geometry whose coordinates are all finite numbers (``present``),
    and which have one with NaN or infinite coordinates (``bad_coords``): these cannot be
    measured or projected."""
    present = np.array([g is not None and not shapely.is_empty(g) for g in raw])
    finite = np.array([not p or bool(np.isfinite(shapely.get_coordinates(g)).all()) for g, p in zip(raw, present)])
    bad_coords = present & ~finite
    return present & finite, bad_coords


def _work_keys(crs: pyproj.CRS, raw: np.ndarray, present: np.ndarray) -> np.ndarray:
    """Each road's working CRS key: one for projected data, the UTM zone of its centroid
    for lon/lat."""
    keys = np.full(len(raw), "source", dtype=object)
    if crs.is_geographic and present.any():
        cent = shapely.centroid(raw[present])
        keys[present] = [working_crs_key(crs, a, b) for a, b in zip(shapely.get_x(cent), shapely.get_y(cent))]
    return keys


def _read_notes(path: Path, attrs: dict, duplicated: list[tuple[str, list[str]]]) -> list[str]:
    """Notes on how the file was read: a WKT column, an encoding other than UTF-8, and
    duplicated road ids kept apart."""
    notes = []
    geometry_column = attrs.get("geometry_column")
    encoding = attrs.get("encoding", "utf-8")
    if geometry_column:
        notes.append(f"{path.name}: centrelines read as WKT from column {geometry_column!r}")
    if encoding not in ("utf-8", "utf-8-sig"):
        notes.append(f"{path.name}: not UTF-8; read as {encoding} (names with accents may need checking)")
    for orig, renamed in duplicated:
        notes.append(f"road id {orig!r} appears more than once; the later copies are kept apart as "
                     f"{', '.join(repr(r) for r in renamed)}")
    return notes


def _project_lines(raw: np.ndarray, keys: np.ndarray, present: np.ndarray, crs: pyproj.CRS, tol: float
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray, dict[str, pyproj.CRS]]:
    """Each usable road projected to its working CRS and merged into one line (``lines``,
    metres), that line back in the source CRS (``src_lines``), why a road could not be
    merged (``reasons``, ``None`` where it was) and the working CRSs used, by key."""
    lines = np.full(len(raw), None, dtype=object)
    src_lines = np.full(len(raw), None, dtype=object)
    reasons = np.full(len(raw), None, dtype=object)
    work_crs: dict[str, pyproj.CRS] = {}
    for key in sorted(set(keys[present])) if present.any() else []:
        wcrs = work_crs[key] = working_crs(crs, key)
        sel = np.flatnonzero((keys == key) & present)
        fwd, back = transformer(crs, wcrs), transformer(wcrs, crs)
        work = transform_geometries(raw[sel], fwd, wcrs is crs)
        for i, geom in zip(sel, work):
            lines[i], reasons[i] = merge_parts(geom, tol)  # metres in the working CRS
        merged = np.flatnonzero(np.array([lines[i] is not None for i in sel]))
        if len(merged):
            src_lines[sel[merged]] = transform_geometries(lines[sel[merged]], back, wcrs is crs)
    return lines, src_lines, reasons, work_crs


def _crs_notes(crs: pyproj.CRS, work_crs: dict[str, pyproj.CRS]) -> list[str]:
    """What the lengths were measured in, where that is not the roads' own CRS."""
    if crs.is_geographic:
        return [f"roads in geographic CRS {crs.name!r} measured in "
                + ", ".join(work_crs[k].name for k in sorted(work_crs))]
    if "source" in work_crs and work_crs["source"] is not crs:
        return [f"roads CRS {crs.name!r} has non-metre axes; lengths measured in its metre twin"]
    return []
