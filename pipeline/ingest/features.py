"""Point and line layers located onto roads: known structures (bridges, culverts), whose
chainage ranges the artefact stage masks, and junctions and accesses, which the hazard
stage looks for in the zone hidden beyond a crest."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pyproj
import shapely

from ..core.config import Config
from ..core.errors import InputError
from .crs import transform_geometries, transformer
from .files import check_file, id_strings, numeric_column, read_table
from .roads import Roads


@dataclass
class Features:
    """Points or lines located onto roads (known structures; junctions and accesses):
    geometries in their CRS, an optional road id each, an optional length and a label."""

    path: Path
    crs: pyproj.CRS
    geometry: np.ndarray
    road_id: np.ndarray
    length_m: np.ndarray
    label: np.ndarray


def read_features(path: str | Path, cfg: Config, roads: Roads, what: str, layer: str = "") -> Features:
    """Read a layer of points or lines (CSV with ``x, y`` or ``wkt``, or any vector file).

    Parameters
    ----------
    path : str or Path
        The file.
    cfg : Config
        The run's settings (``roads.id_column`` names the optional road id column).
    roads : Roads
        The roads already read; a layer without a CRS takes theirs (noted in ``roads.notes``).
    what : str
        What the layer holds ("structures", "junctions"), for messages and default labels.
    layer : str, optional
        The layer to read from a vector file with several.

    Returns
    -------
    Features
        Geometries, road ids (``None`` where not given), lengths (m, NaN where not given)
        and labels (from a ``name``, ``label``, ``kind`` or ``type`` column, else numbered).
    """
    path = check_file(path, what)
    frame, crs = read_table(path, what=what, layer=layer, layer_setting=f"the {what} layer", wkt_column="wkt")
    if len(frame) == 0:
        raise InputError(f"{path}: no {what} in the file; fill it in or leave it out")
    if "geometry" in frame.columns:
        geom = frame["geometry"].to_numpy(dtype=object)
    elif {"x", "y"} <= set(frame.columns):
        geom = shapely.points(numeric_column(frame, "x", path), numeric_column(frame, "y", path))
    else:
        raise InputError(f"{path}: {what} need a geometry, a 'wkt' column or 'x' and 'y' columns")
    if crs is None:
        crs = roads.source_crs
        roads.notes.append(f"{path.name}: no CRS stated for {what}; taken as the roads' CRS")
    id_col = cfg["roads.id_column"]
    rid = id_strings(frame[id_col]) if id_col in frame.columns else np.full(len(frame), None, dtype=object)
    length = numeric_column(frame, "length_m", path) if "length_m" in frame.columns else np.full(len(frame), np.nan)
    label_col = next((c for c in ("name", "label", "kind", "type") if c in frame.columns), None)
    label = (frame[label_col].fillna(what).astype(str).to_numpy(dtype=object) if label_col
             else np.array([f"{what} {i + 1}" for i in range(len(frame))], dtype=object))
    return Features(path=path, crs=crs, geometry=geom, road_id=rid, length_m=length, label=label)


def feature_chainages(ft: Features, line, work_crs: pyproj.CRS, road_id: str, source_id: str,
                      max_offset_m: float) -> list[tuple[float, float, float, str]]:
    """The features on one road: within ``max_offset_m`` of it, and given to it or to no road.

    Parameters
    ----------
    ft : Features
        The layer.
    line : shapely.LineString
        The road's centreline in ``work_crs`` (m).
    work_crs : pyproj.CRS
        The road's working CRS.
    road_id, source_id : str
        The road's id and its id as read (either matches a feature's road id).
    max_offset_m : float
        The greatest distance (m) from the centreline at which a feature counts.

    Returns
    -------
    list of tuple
        ``(from_m, to_m, length_m, label)``: chainages (m) of the feature's located extent
        (a point has from_m == to_m) and its stated length (m, NaN where none).
    """
    geoms = transform_geometries(ft.geometry, transformer(ft.crs, work_crs), False)
    ok = np.array([g is not None and not shapely.is_empty(g) for g in geoms])
    near = np.zeros(len(geoms), dtype=bool)
    near[ok] = shapely.distance(geoms[ok].astype(object), line) <= max_offset_m
    mine = np.array([r is None or r in (road_id, source_id) for r in ft.road_id])
    out = []
    for g, length, label in zip(geoms[near & mine], ft.length_m[near & mine], ft.label[near & mine]):
        c = shapely.line_locate_point(line, shapely.points(shapely.get_coordinates(g)))
        out.append((float(np.min(c)), float(np.max(c)), float(length), str(label)))
    return out


def structure_ranges(st: Features, line, work_crs: pyproj.CRS, road_id: str, source_id: str,
                     cfg: Config) -> list[tuple[float, float, str]]:
    """Chainage ranges of the known structures on one road, with their labels.

    A line's located span, or a point's given length (else ``structures.default_length_m``)
    centred on it, plus ``structures.buffer_m`` each side.

    Parameters
    ----------
    st : Features
        The structures layer.
    line : shapely.LineString
        The road's centreline in ``work_crs`` (m).
    work_crs : pyproj.CRS
        The road's working CRS.
    road_id, source_id : str
        The road's id and its id as read.
    cfg : Config
        The run's settings (``structures.*``, in m).

    Returns
    -------
    list of tuple
        ``(from_m, to_m, label)``, chainages in m.
    """
    buf, default = cfg["structures.buffer_m"], cfg["structures.default_length_m"]
    out = []
    for lo, hi, length, label in feature_chainages(st, line, work_crs, road_id, source_id,
                                                   cfg["structures.max_offset_m"]):
        if hi - lo < 1e-6:
            half = (length if np.isfinite(length) else default) / 2
            lo, hi = lo - half, hi + half
        out.append((lo - buf, hi + buf, label))
    return out
