"""Read road centrelines and ground data, and put every road in a metric CRS.

Roads come from a GeoPackage (layer selectable), GeoParquet, any other vector
file GDAL reads, or a CSV with a WKT column and a stated CRS. Ground comes from
a DEM GeoTIFF or from ground points (``road_id, x, y, z`` or
``road_id, chainage_m, z``).

Working CRS (all lengths are measured in it, in metres):

- projected CRS in metres: used as it is;
- projected CRS in another linear unit (international or US survey feet): the
  same projection with metre axes, so pyproj converts the unit (no typed-in
  factor);
- geographic CRS (lon/lat): the UTM zone of each road's centroid on the file's
  own geodetic datum, so no datum shift (and no "ballpark" transform) is
  involved. UTM keeps grid distances within about 0.1 % of the ellipsoid
  (Snyder 1987, *Map Projections: A Working Manual*, USGS PP 1395, ch. 8).

Functions here only read and check; they do no profile numerics.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import pyproj
import shapely
from pyproj.crs import ProjectedCRS
from pyproj.crs.coordinate_operation import UTMConversion

from ..core.config import Config
from ..core.errors import InputError

VECTOR_SUFFIXES = {".gpkg", ".shp", ".geojson", ".json", ".fgb", ".gml", ".kml", ".sqlite"}
DEM_SUFFIXES = {".tif", ".tiff", ".vrt", ".img", ".asc"}


# --------------------------------------------------------------------------- files
def check_file(path: str | Path, what: str) -> Path:
    """The path exists, is a file and is not empty, else :class:`InputError`."""
    p = Path(path)
    if not p.exists():
        raise InputError(f"{p}: {what} file not found; check the path")
    if p.is_dir():
        raise InputError(f"{p}: is a folder, expected a {what} file")
    if p.stat().st_size == 0:
        raise InputError(f"{p}: {what} file is empty; export the data again")
    return p


def file_sha256(path: str | Path) -> str:
    import hashlib

    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def parse_crs(text: str, where: str) -> pyproj.CRS:
    try:
        return pyproj.CRS.from_user_input(text)
    except pyproj.exceptions.CRSError:
        raise InputError(
            f"{where}: unknown CRS {text!r}; give an EPSG code such as 'EPSG:32633' or a WKT string"
        ) from None


def _vector_layer(path: Path, layer: str, what: str, setting: str) -> str | None:
    import pyogrio

    try:
        layers = [row[0] for row in pyogrio.list_layers(path)]
    except Exception as exc:  # GDAL raises its own error types
        raise InputError(f"{path}: cannot be read as a vector file ({_short(exc)}); check the format") from None
    if layer:
        if layer not in layers:
            raise InputError(f"{path}: no layer {layer!r} (layers: {', '.join(layers)}); fix {setting}")
        return layer
    if len(layers) == 1:
        return layers[0]
    if what in layers:
        return what
    raise InputError(f"{path}: has layers {', '.join(layers)}; choose one with {setting}")


def _short(exc: BaseException) -> str:
    return " ".join(str(exc).split())[:160]


GEOMETRY_TEXT_COLUMNS = ("wkt", "geometry", "geom")  # matched without regard to case


def geometry_text_column(columns, path: Path, wanted: str = "", explicit: bool = False) -> str | None:
    """The CSV column holding geometry as WKT: ``wanted`` when present (or when set
    explicitly, else :class:`InputError`), otherwise the one column named ``wkt``,
    ``geometry`` or ``geom`` in any case (``WKT`` too, as GeoPandas and GIS exports write
    them). Two such columns and no choice made stop the run. ``None`` when there is none."""
    columns = [str(c) for c in columns]
    if wanted and wanted in columns:
        return wanted
    if wanted and explicit:
        raise InputError(f"{path}: no column {wanted!r} with the geometry as WKT "
                         f"(columns: {', '.join(columns[:12])}); fix roads.wkt_column")
    found = [c for c in columns if c.strip().lower() in GEOMETRY_TEXT_COLUMNS]
    if len(found) > 1:
        raise InputError(f"{path}: several geometry columns ({', '.join(found)}); choose one with roads.wkt_column")
    return found[0] if found else None


def read_table(path: Path, *, what: str, layer: str = "", layer_setting: str = "", wkt_column: str = "",
               crs_text: str = "", crs_setting: str = "", wkt_explicit: bool = False
               ) -> tuple[pd.DataFrame, pyproj.CRS | None]:
    """Read a vector or CSV file as a DataFrame with a shapely ``geometry`` column (or none).

    Returns the frame and its CRS (``None`` where neither the file nor the
    config gives one). For a CSV, the WKT column used is named in
    ``frame.attrs["geometry_column"]`` (see :func:`geometry_text_column`).
    """
    import geopandas as gpd

    suffix = path.suffix.lower()
    crs = parse_crs(crs_text, crs_setting) if crs_text else None
    if suffix == ".csv" or suffix == ".txt":
        encoding = csv_encoding(path)
        try:
            frame = pd.read_csv(path, dtype=str, keep_default_na=False, na_values=[""], encoding=encoding)
        except (pd.errors.ParserError, UnicodeDecodeError, UnicodeError) as exc:
            raise InputError(f"{path}: not a readable CSV file ({_short(exc)}); save it as UTF-8 CSV") from None
        except pd.errors.EmptyDataError:
            raise InputError(f"{path}: {what} file has no rows; export the data again") from None
        frame.columns = [str(c).strip() for c in frame.columns]
        if len(frame) == 0:
            raise InputError(f"{path}: {what} file has a header but no rows; export the data again")
        wkt_column = geometry_text_column(frame.columns, path, wkt_column, wkt_explicit)
        if wkt_column:
            text = np.array([v if isinstance(v, str) and v.strip() else None for v in frame[wkt_column]],
                            dtype=object)
            with warnings.catch_warnings():  # invalid WKT is reported below, row by row
                warnings.simplefilter("ignore", RuntimeWarning)
                geoms = shapely.from_wkt(text, on_invalid="ignore")
            bad = np.flatnonzero(pd.isna(geoms) & np.array([t is not None for t in text]))
            if len(bad):
                raise InputError(
                    f"{path}: row {bad[0] + 2}, column {wkt_column}: not valid WKT; fix or remove the row"
                )
            frame = frame.drop(columns=[wkt_column])
            frame["geometry"] = geoms
            frame.attrs["geometry_column"] = wkt_column
        frame.attrs["encoding"] = encoding
        return frame, crs
    if suffix == ".parquet":
        try:
            gdf = gpd.read_parquet(path)
        except Exception as exc:
            try:
                return pd.read_parquet(path), crs
            except Exception:
                raise InputError(f"{path}: not a readable Parquet file ({_short(exc)})") from None
    else:
        lyr = _vector_layer(path, layer, what, layer_setting)
        try:
            gdf = gpd.read_file(path, layer=lyr, engine="pyogrio")
        except Exception as exc:
            raise InputError(f"{path}: cannot be read ({_short(exc)}); check the format") from None
    frame = pd.DataFrame(gdf.drop(columns=gdf.geometry.name))
    frame["geometry"] = gdf.geometry.to_numpy()
    if crs is None and gdf.crs is not None:
        crs = pyproj.CRS.from_user_input(gdf.crs)
    return frame, crs


def numeric_column(frame: pd.DataFrame, column: str, path: Path) -> np.ndarray:
    """A column as float; a non-numeric entry stops the run naming its row."""
    raw = frame[column]
    values = pd.to_numeric(raw, errors="coerce")
    bad = np.flatnonzero(values.isna().to_numpy() & raw.notna().to_numpy())
    if len(bad):
        row = bad[0]
        raise InputError(
            f"{path}: row {row + 2}, column {column}: {raw.iloc[row]!r} is not a number; fix or remove the row"
        )
    return values.to_numpy(dtype=float)


def id_strings(values: pd.Series) -> np.ndarray:
    """Identifiers as text (vectorised); 12.0 read from a numeric column becomes '12'."""
    values = pd.Series(values)
    if pd.api.types.is_float_dtype(values):
        finite = values.dropna()
        if len(finite) and np.all(np.mod(finite, 1) == 0):
            values = values.astype("Int64")
    text = values.astype("string").str.strip()
    return text.to_numpy(dtype=object, na_value=None)


# ------------------------------------------------------------------------ CRS
def working_crs_key(crs: pyproj.CRS, lon: float | None = None, lat: float | None = None) -> str:
    """A key naming the metric working CRS for data in ``crs`` at ``lon, lat``."""
    if crs.is_geographic:
        zone = int(np.clip(np.floor((lon + 180.0) / 6.0) + 1, 1, 60))
        return f"utm{zone}{'S' if lat < 0 else 'N'}"
    return "source"


def working_crs(crs: pyproj.CRS, key: str) -> pyproj.CRS:
    """The metric CRS for ``key`` (see :func:`working_crs_key`)."""
    if key.startswith("utm"):
        zone, south = int(key[3:-1]), key.endswith("S")
        return ProjectedCRS(
            conversion=UTMConversion(zone, 'S' if south else 'N'),
            geodetic_crs=crs.geodetic_crs,
            name=f"UTM zone {zone}{'S' if south else 'N'} on {crs.geodetic_crs.name}",
        )
    unit = crs.axis_info[0].unit_conversion_factor if crs.axis_info else 1.0
    if crs.is_projected and abs(unit - 1.0) > 1e-12:
        spec = crs.to_json_dict()
        for axis in spec["coordinate_system"]["axis"]:
            axis["unit"] = "metre"
        spec["name"] = f"{spec.get('name', 'projected CRS')} (metre axes)"
        spec.pop("id", None)
        return pyproj.CRS.from_json_dict(spec)
    return crs


def transformer(src: pyproj.CRS, dst: pyproj.CRS) -> pyproj.Transformer:
    return pyproj.Transformer.from_crs(src, dst, always_xy=True)


def is_ballpark(tr: pyproj.Transformer) -> bool:
    """True where PROJ fell back to a transform without datum shift grids."""
    desc = (tr.description or "").lower()
    return "ballpark" in desc


# ---------------------------------------------------------------------- roads
@dataclass
class Roads:
    """The road network after ingest.

    ``table`` has one row per input road, in input order, with
    ``road_id, name, speed_raw, aadt, road_class, geometry_src, geometry``
    (working CRS, metres), ``work_key``, ``length_m`` and ``skip_reason``
    (``None`` where the road can be processed).
    """

    path: Path
    table: pd.DataFrame
    source_crs: pyproj.CRS
    work_crs: dict[str, pyproj.CRS] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)

    def to_source(self, key: str) -> pyproj.Transformer:
        return transformer(self.work_crs[key], self.source_crs)


def merge_parts(geom, tolerance_m: float) -> tuple[object | None, str | None]:
    """One LineString from a (Multi)LineString, parts joined end to end in order.

    Returns ``(line, None)`` or ``(None, reason)``. A part may be digitised in
    either direction; the first part fixes the road's direction. Gaps up to
    ``tolerance_m`` between consecutive parts are closed.
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
    tol = tolerance_m
    chain = parts[0]
    for i, nxt in enumerate(parts[1:], start=1):
        if i == 1:
            # the first part may also be reversed to meet the second
            ends = [(chain[-1], nxt[0], False, False), (chain[-1], nxt[-1], False, True),
                    (chain[0], nxt[0], True, False), (chain[0], nxt[-1], True, True)]
        else:
            ends = [(chain[-1], nxt[0], False, False), (chain[-1], nxt[-1], False, True)]
        gap, rev_chain, rev_next = min((float(np.hypot(*(a - b))), rc, rn) for a, b, rc, rn in ends)
        if gap > tol:
            merged = shapely.line_merge(geom)
            if shapely.get_type_id(merged) == 1:
                line = shapely.force_2d(merged)
                first = parts[0][0]
                start = shapely.get_coordinates(line)[0]
                if np.hypot(*(start - first)) > np.hypot(*(shapely.get_coordinates(line)[-1] - first)):
                    line = shapely.reverse(line)
                return line, None
            return None, (
                f"parts {i} and {i + 1} of the multi-part line do not meet "
                f"(gap {gap:.1f} m); join them in the source data"
            )
        if rev_chain:
            chain = chain[::-1]
        seg = nxt[::-1] if rev_next else nxt
        chain = np.vstack([chain, seg[1:] if gap == 0 else seg])
    return shapely.linestrings(chain[:, :2]), None


def unique_ids(ids: np.ndarray) -> tuple[np.ndarray, list[tuple[str, list[str]]]]:
    """Road ids made unique: the first of a duplicated id keeps it, later ones get ``~2``,
    ``~3`` ... (both roads are evaluated, apart). Returns the ids and the renamings."""
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
    """Read the centrelines, merge multi-part lines, project to a metric CRS."""
    path = check_file(path, "roads")
    frame, crs = read_table(
        path, what="roads", layer=cfg["roads.layer"], layer_setting="roads.layer (--roads-layer)",
        wkt_column=cfg["roads.wkt_column"], crs_text=cfg["roads.crs"], crs_setting="roads.crs (--roads-crs)",
        wkt_explicit="roads.wkt_column" in cfg.explicit,
    )
    geometry_column = frame.attrs.get("geometry_column")
    encoding = frame.attrs.get("encoding", "utf-8")
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
    from .columns import check_road_columns

    column_notes = check_road_columns([c for c in frame.columns if c != "geometry"], cfg, path)
    if crs is None:
        raise InputError(f"{path}: no CRS in the file; state it with roads.crs or --roads-crs (e.g. EPSG:32633)")
    if not (crs.is_geographic or crs.is_projected):
        raise InputError(f"{path}: CRS {crs.name!r} is neither geographic nor projected; reproject the roads")

    ids = id_strings(frame[id_col])
    missing = [i for i, v in enumerate(ids) if v is None or v == ""]
    if missing:
        raise InputError(f"{path}: row {missing[0] + 2}, column {id_col}: empty road identifier; fill it in")
    source_ids = ids.copy()
    ids, duplicated = unique_ids(ids)

    def optional_numeric(column: str) -> np.ndarray:
        if column and column in frame.columns:
            return numeric_column(frame, column, path)
        return np.full(len(frame), np.nan)

    def optional_text(column: str) -> np.ndarray:
        if column and column in frame.columns:
            return np.array([None if pd.isna(v) else str(v) for v in frame[column]], dtype=object)
        return np.full(len(frame), None, dtype=object)

    table = pd.DataFrame({
        "road_id": ids,
        "name": optional_text(cfg["roads.name_column"]),
        "speed_raw": optional_numeric(cfg["roads.speed_column"]),
        "aadt": optional_numeric(cfg["roads.aadt_column"]),
        "road_class": optional_text(cfg["roads.class_column"]),
    })
    raw = frame["geometry"].to_numpy(dtype=object)
    present = np.array([g is not None and not shapely.is_empty(g) for g in raw])
    # coordinates that are not numbers (NaN, infinite) cannot be measured or projected
    finite = np.array([not p or bool(np.isfinite(shapely.get_coordinates(g)).all()) for g, p in zip(raw, present)])
    bad_coords = present & ~finite
    present &= finite

    # each road's working CRS: one for projected data, the UTM zone of its centroid for lon/lat
    keys = np.full(len(table), "source", dtype=object)
    if crs.is_geographic and present.any():
        cent = shapely.centroid(raw[present])
        keys[present] = [working_crs_key(crs, a, b) for a, b in zip(shapely.get_x(cent), shapely.get_y(cent))]
    table["source_id"] = source_ids
    roads = Roads(path=path, table=table, source_crs=crs)
    roads.notes += column_notes
    if geometry_column:
        roads.notes.append(f"{path.name}: centrelines read as WKT from column {geometry_column!r}")
    if encoding not in ("utf-8", "utf-8-sig"):
        roads.notes.append(f"{path.name}: not UTF-8; read as {encoding} (names with accents may need checking)")
    for orig, renamed in duplicated:
        roads.notes.append(f"road id {orig!r} appears more than once; the later copies are kept apart as "
                           f"{', '.join(repr(r) for r in renamed)}")
    lines = np.full(len(table), None, dtype=object)
    src_lines = np.full(len(table), None, dtype=object)
    reasons = np.full(len(table), None, dtype=object)
    reasons[~present] = "no geometry"
    reasons[bad_coords] = "coordinates that are not finite numbers (NaN or infinite) in the geometry"
    tol = cfg["roads.join_tolerance_m"]
    for key in sorted(set(keys[present])) if present.any() else []:
        wcrs = working_crs(crs, key)
        roads.work_crs[key] = wcrs
        sel = np.flatnonzero((keys == key) & present)
        fwd, back = transformer(crs, wcrs), transformer(wcrs, crs)
        work = _apply(raw[sel], fwd, wcrs is crs)
        for i, geom in zip(sel, work):
            line, reason = merge_parts(geom, tol)  # metres in the working CRS
            lines[i], reasons[i] = line, reason
        merged = np.flatnonzero(np.array([lines[i] is not None for i in sel]))
        if len(merged):
            src_lines[sel[merged]] = _apply(lines[sel[merged]], back, wcrs is crs)
    table["geometry_src"] = src_lines
    table["geometry"] = lines
    table["work_key"] = keys
    have = np.array([g is not None for g in lines])
    length = np.full(len(table), np.nan)
    length[have] = shapely.length(lines[have])
    table["length_m"] = length
    reasons[have & ~(length > 0)] = "zero-length line"
    table["skip_reason"] = pd.Series(reasons, dtype=object)
    if crs.is_geographic:
        roads.notes.append(
            f"roads in geographic CRS {crs.name!r} measured in "
            + ", ".join(roads.work_crs[k].name for k in sorted(roads.work_crs))
        )
    elif "source" in roads.work_crs and roads.work_crs["source"] is not crs:
        roads.notes.append(f"roads CRS {crs.name!r} has non-metre axes; lengths measured in its metre twin")
    return roads


def _apply(geoms: np.ndarray, tr: pyproj.Transformer, identity: bool) -> np.ndarray:
    """Transform an array of shapely geometries (vectorised over all their vertices)."""
    if identity:
        return geoms
    return shapely.transform(geoms, lambda xy: np.column_stack(tr.transform(xy[:, 0], xy[:, 1])))


# --------------------------------------------------------------------- ground
@dataclass
class DemGround:
    """A DEM raster; windows are read per road (never the whole raster)."""

    path: Path
    crs: pyproj.CRS
    band: int
    metres_per_unit: float
    nodata: float | None
    bounds: tuple[float, float, float, float]
    kind: str = "dem"

    def describe(self) -> dict:
        return {"kind": "dem", "crs": self.crs.to_string(), "band": self.band, "nodata": self.nodata,
                "bounds": list(self.bounds)}


@dataclass
class PointGround:
    """Ground points, sorted and grouped by road id in compact arrays: ``x, y`` (in ``crs``) or
    ``chainage_m``, and ``z_m``. :meth:`points` gives one road's points, :meth:`subset` a
    smaller set to hand to a worker."""

    path: Path
    crs: pyproj.CRS | None
    mode: str  # "xy" or "chainage"
    rows: int
    arrays: dict[str, np.ndarray]
    groups: dict[str, tuple[int, int]]
    kind: str = "points"
    crs_assumed: bool = False  # no CRS stated: taken as the roads' CRS

    def points(self, road_id: str) -> dict[str, np.ndarray] | None:
        span = self.groups.get(road_id)
        if span is None:
            return None
        a, b = span
        return {k: v[a:b] for k, v in self.arrays.items()}

    def subset(self, road_ids) -> "PointGround":
        parts = {k: [] for k in self.arrays}
        groups, n = {}, 0
        for rid in dict.fromkeys(road_ids):
            p = self.points(rid)
            if p is None:
                continue
            m = len(p["z_m"])
            for k in parts:
                parts[k].append(p[k])
            groups[rid] = (n, n + m)
            n += m
        arrays = {k: (np.concatenate(v) if v else np.zeros(0)) for k, v in parts.items()}
        return PointGround(path=self.path, crs=self.crs, mode=self.mode, rows=n, arrays=arrays, groups=groups)

    def describe(self) -> dict:
        return {"kind": "points", "mode": self.mode, "rows": self.rows,
                "crs": self.crs.to_string() if self.crs is not None else None}


def open_ground(path: str | Path, cfg: Config, roads: Roads) -> DemGround | PointGround:
    """Open the ground model: a DEM raster or a file of ground points."""
    from ..core.units import metres_per

    path = check_file(path, "ground")
    factor = metres_per(cfg["ground.elevation_unit"])
    if path.suffix.lower() in DEM_SUFFIXES:
        return _open_dem(path, cfg, roads, factor)
    return _read_points(path, cfg, roads, factor)


def _open_dem(path: Path, cfg: Config, roads: Roads, factor: float) -> DemGround:
    import rasterio

    try:
        with rasterio.open(path) as src:
            band = cfg["ground.band"]
            if not 1 <= band <= src.count:
                raise InputError(f"{path}: has {src.count} band(s), ground.band = {band}; fix ground.band")
            crs = src.crs
            if crs is None:
                if not cfg["ground.crs"]:
                    raise InputError(f"{path}: DEM has no CRS; state it with ground.crs or --ground-crs")
                crs = parse_crs(cfg["ground.crs"], "ground.crs")
            else:
                crs = pyproj.CRS.from_user_input(crs.to_wkt())
            nodata = src.nodatavals[band - 1]
            return DemGround(path=path, crs=crs, band=band, metres_per_unit=factor,
                             nodata=None if nodata is None else float(nodata), bounds=tuple(src.bounds))
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"{path}: cannot be read as a raster ({_short(exc)}); check the format") from None


def map_to_pixel(affine, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Fractional (column, row) of map coordinates through the inverse of a raster's affine."""
    inv = ~affine
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    return inv.a * x + inv.b * y + inv.c, inv.d * x + inv.e * y + inv.f


def dem_cell_m(dem: DemGround, affine, y_mid: float) -> float:
    """Size (m) of a DEM cell: the geometric mean of the affine's pixel width and height, in
    the CRS's linear unit converted to metres, or for a geographic CRS in degrees at latitude
    ``y_mid`` (a degree of latitude taken as 111,320 m: the WGS 84 meridian, to 0.3 %)."""
    w, h = abs(affine.a), abs(affine.e)
    if dem.crs.is_geographic:
        lat = np.radians(np.clip(y_mid, -89.0, 89.0))
        return float(np.sqrt(w * np.cos(lat) * h) * 111_320.0)
    factor = dem.crs.axis_info[0].unit_conversion_factor if dem.crs.axis_info else 1.0
    return float(np.sqrt(w * h) * factor)


def csv_encoding(path: Path) -> str:
    """The text encoding of a CSV: UTF-16 or UTF-8 where a byte-order mark says so, UTF-8 where
    the bytes decode as UTF-8, otherwise Windows-1252 (what spreadsheet programs write on
    Windows; every byte decodes, so accented names survive). Anything but plain UTF-8 is named
    in a note by the caller."""
    head = Path(path).read_bytes()
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "utf-16"
    if head.startswith(b"\xef\xbb\xbf"):
        return "utf-8-sig"
    try:
        head.decode("utf-8")
        return "utf-8"
    except UnicodeDecodeError:
        return "cp1252"


def read_dem_window(dem: DemGround, x: np.ndarray, y: np.ndarray, margin: int = 2):
    """The DEM cells around points ``x, y`` (DEM CRS): ``(array_m, affine)``.

    Nodata cells become NaN; elevations are converted to metres. Returns
    ``(None, None)`` when the points lie wholly outside the raster.
    """
    import rasterio
    from rasterio.windows import Window


    with rasterio.open(dem.path) as src:
        cols, rows = map_to_pixel(src.transform, x, y)
        finite = np.isfinite(cols) & np.isfinite(rows)
        if not finite.any():
            return None, None
        c0 = int(np.floor(np.nanmin(cols[finite]))) - margin
        c1 = int(np.ceil(np.nanmax(cols[finite]))) + margin
        r0 = int(np.floor(np.nanmin(rows[finite]))) - margin
        r1 = int(np.ceil(np.nanmax(rows[finite]))) + margin
        c0, r0 = max(c0, 0), max(r0, 0)
        c1, r1 = min(c1, src.width), min(r1, src.height)
        if c1 <= c0 or r1 <= r0:
            return None, None
        win = Window(c0, r0, c1 - c0, r1 - r0)
        data = src.read(dem.band, window=win, masked=True)
        arr = np.asarray(data.filled(np.nan) if np.ma.isMaskedArray(data) else data, dtype=float)
        if dem.nodata is not None and np.isfinite(dem.nodata):
            arr[arr == dem.nodata] = np.nan
        return arr * dem.metres_per_unit, src.window_transform(win)


def _read_points(path: Path, cfg: Config, roads: Roads, factor: float) -> PointGround:
    frame, crs = read_table(path, what="ground", layer=cfg["ground.layer"],
                            layer_setting="ground.layer (--ground-layer)",
                            crs_text=cfg["ground.crs"], crs_setting="ground.crs (--ground-crs)")
    if len(frame) == 0:
        raise InputError(f"{path}: no ground points in the file; export them again")
    id_col = cfg["roads.id_column"]
    z_col = cfg["ground.z_column"]
    for col in (id_col, z_col):
        if col not in frame.columns:
            raise InputError(
                f"{path}: no column {col!r} (columns: {', '.join(map(str, frame.columns[:12]))}); "
                f"ground points need {id_col}, {z_col} and either x, y or chainage_m"
            )
    # ids are factorised as read: only the distinct ids become Python strings; raw values
    # that read as the same id (" A1" and "A1", 12.0 and 12) are merged afterwards
    raw_codes, raw_uniques = pd.factorize(frame[id_col], sort=False, use_na_sentinel=True)
    raw_text = pd.Series(id_strings(pd.Series(raw_uniques)), dtype=object).replace("", None)
    text_codes, uniques = pd.factorize(raw_text, sort=False, use_na_sentinel=True)
    codes = np.where(raw_codes >= 0, np.append(text_codes, -1)[raw_codes], -1)
    unique_ids = [str(u) for u in uniques]
    keep = codes >= 0
    cols = {"z_m": numeric_column(frame, z_col, path) * factor}
    geom = frame["geometry"] if "geometry" in frame.columns else None
    if "chainage_m" in frame.columns:
        mode = "chainage"
        cols["chainage_m"] = numeric_column(frame, "chainage_m", path)
    elif {"x", "y"} <= set(frame.columns):
        mode = "xy"
        cols["x"] = numeric_column(frame, "x", path)
        cols["y"] = numeric_column(frame, "y", path)
    elif geom is not None:
        mode = "xy"
        cols["x"] = shapely.get_x(geom.to_numpy())
        cols["y"] = shapely.get_y(geom.to_numpy())
    else:
        raise InputError(f"{path}: ground points need columns x, y (or a point geometry) or chainage_m")
    del frame
    crs_assumed = False
    if mode == "xy":
        if crs is None:
            crs, crs_assumed = roads.source_crs, True
            roads.notes.append(f"{path.name}: no CRS stated for ground points; taken as the roads' CRS")
    order = np.argsort(codes, kind="stable")[np.count_nonzero(~keep):]  # rows without an id go first: dropped
    sorted_codes = codes[order]
    starts = np.searchsorted(sorted_codes, np.arange(len(uniques)), side="left")
    stops = np.searchsorted(sorted_codes, np.arange(len(uniques)), side="right")
    arrays = {c: np.asarray(v, dtype=float)[order] for c, v in cols.items()}
    groups = {u: (int(a), int(b)) for u, a, b in zip(unique_ids, starts, stops)}
    return PointGround(path=path, crs=crs, mode=mode, rows=int(len(order)), arrays=arrays, groups=groups,
                       crs_assumed=crs_assumed)



# ------------------------------------------------- point and line layers
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
    """Read a layer of points or lines (CSV with ``x, y`` or ``wkt``, or any vector file)."""
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
    """The features on one road (within ``max_offset_m`` of it, and given to it or to no road):
    ``(from_m, to_m, length_m, label)``; a point has from_m == to_m."""
    geoms = _apply(ft.geometry, transformer(ft.crs, work_crs), False)
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
    """Chainage ranges (m) of the known structures on one road, with their labels: a line's
    located span, or a point's given length (else ``structures.default_length_m``) centred on
    it, plus ``structures.buffer_m`` each side."""
    buf, default = cfg["structures.buffer_m"], cfg["structures.default_length_m"]
    out = []
    for lo, hi, length, label in feature_chainages(st, line, work_crs, road_id, source_id,
                                                   cfg["structures.max_offset_m"]):
        if hi - lo < 1e-6:
            half = (length if np.isfinite(length) else default) / 2
            lo, hi = lo - half, hi + half
        out.append((lo - buf, hi + buf, label))
    return out
