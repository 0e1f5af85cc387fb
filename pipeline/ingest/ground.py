"""Ground models: a DEM raster (read a window at a time, never whole) or a file of ground
points (``road_id, x, y, z`` or ``road_id, chainage_m, z``).

rasterio is imported only in the functions that open a raster.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pyproj
import rasterio
import shapely
from rasterio.windows import Window

from ..core.config import Config
from ..core.errors import InputError
from ..core.units import metres_per
from .crs import parse_crs
from .files import GEOMETRY_TEXT_COLUMNS, check_file, id_strings, numeric_column, read_table, short_error
from .roads import Roads

DEM_SUFFIXES = {".tif", ".tiff", ".vrt", ".img", ".asc"}


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
        """The DEM as recorded in the run's metadata.

        Returns
        -------
        dict
            ``kind, crs, band, nodata, bounds`` (bounds in the DEM's CRS units).
        """
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
        """One road's points.

        Parameters
        ----------
        road_id : str
            The road's id as read (its ``source_id``).

        Returns
        -------
        dict or None
            Arrays ``z_m`` (m) and ``x, y`` or ``chainage_m`` (m); ``None`` where the road
            has no points.
        """
        span = self.groups.get(road_id)
        if span is None:
            return None
        a, b = span
        return {k: v[a:b] for k, v in self.arrays.items()}

    def subset(self, road_ids) -> "PointGround":
        """The points of some roads only (what a worker needs for its chunk).

        Parameters
        ----------
        road_ids : iterable of str
            Road ids as read; repeats and ids without points are ignored.

        Returns
        -------
        PointGround
            A new, smaller set, grouped in the order of ``road_ids``.
        """
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
        """The ground points as recorded in the run's metadata.

        Returns
        -------
        dict
            ``kind, mode, rows, crs``.
        """
        return {"kind": "points", "mode": self.mode, "rows": self.rows,
                "crs": self.crs.to_string() if self.crs is not None else None}


def open_ground(path: str | Path, cfg: Config, roads: Roads) -> DemGround | PointGround:
    """Open the ground model: a DEM raster or a file of ground points.

    Parameters
    ----------
    path : str or Path
        A raster (``.tif``, ``.vrt`` ...) or a points file (CSV, vector, Parquet).
    cfg : Config
        The run's settings (``ground.*``; ``ground.elevation_unit`` converts heights to m).
    roads : Roads
        The roads already read; ground points without a CRS take theirs (noted in
        ``roads.notes``).

    Returns
    -------
    DemGround or PointGround
        The DEM's description (nothing read yet), or every point in metres.
    """
    path = check_file(path, "ground")
    factor = metres_per(cfg["ground.elevation_unit"])
    if path.suffix.lower() in DEM_SUFFIXES:
        return _open_dem(path, cfg, factor)
    return _read_points(path, cfg, roads, factor)


def _open_dem(path: Path, cfg: Config, factor: float) -> DemGround:
    """A DEM's CRS, band, nodata value and bounds (no cells are read)."""
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
        raise InputError(f"{path}: cannot be read as a raster ({short_error(exc)}); check the format") from None


def map_to_pixel(affine, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Fractional (column, row) of map coordinates through the inverse of a raster's affine.

    Parameters
    ----------
    affine : affine.Affine
        The raster's (or window's) transform, pixel to map.
    x, y : numpy.ndarray
        Map coordinates, in the raster's CRS units.

    Returns
    -------
    tuple of numpy.ndarray
        Column and row, in pixels (fractional; 0 is the left or top edge).
    """
    inv = ~affine
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    return inv.a * x + inv.b * y + inv.c, inv.d * x + inv.e * y + inv.f


def dem_cell_m(dem: DemGround, affine, y_mid: float) -> float:
    """Size of a DEM cell in metres.

    The geometric mean of the affine's pixel width and height, in the CRS's linear unit
    converted to metres, or for a geographic CRS in degrees at latitude ``y_mid`` (a degree
    of latitude taken as 111,320 m: the WGS 84 meridian, to 0.3 %).

    Parameters
    ----------
    dem : DemGround
        The DEM (for its CRS).
    affine : affine.Affine
        The raster's transform.
    y_mid : float
        The latitude (degrees) where the cell is measured; used for a geographic CRS only.

    Returns
    -------
    float
        The cell size (m).
    """
    w, h = abs(affine.a), abs(affine.e)
    if dem.crs.is_geographic:
        lat = np.radians(np.clip(y_mid, -89.0, 89.0))
        return float(np.sqrt(w * np.cos(lat) * h) * 111_320.0)
    factor = dem.crs.axis_info[0].unit_conversion_factor if dem.crs.axis_info else 1.0
    return float(np.sqrt(w * h) * factor)


def dem_window(src, x: np.ndarray, y: np.ndarray, margin: int = 2):
    """The window of cells around points ``x, y`` (nothing is read).

    Parameters
    ----------
    src : rasterio.DatasetReader
        The open DEM.
    x, y : numpy.ndarray
        Points in the DEM's CRS.
    margin : int, optional
        Cells added on every side of the points' bounding box.

    Returns
    -------
    rasterio.windows.Window or None
        The window, clipped to the raster; ``None`` when the points lie wholly outside it.
    """
    cols, rows = map_to_pixel(src.transform, x, y)
    finite = np.isfinite(cols) & np.isfinite(rows)
    if not finite.any():
        return None
    c0 = int(np.floor(np.nanmin(cols[finite]))) - margin
    c1 = int(np.ceil(np.nanmax(cols[finite]))) + margin
    r0 = int(np.floor(np.nanmin(rows[finite]))) - margin
    r1 = int(np.ceil(np.nanmax(rows[finite]))) + margin
    c0, r0 = max(c0, 0), max(r0, 0)
    c1, r1 = min(c1, src.width), min(r1, src.height)
    if c1 <= c0 or r1 <= r0:
        return None
    return Window(c0, r0, c1 - c0, r1 - r0)


def read_dem_cells(dem: DemGround, src, win) -> np.ndarray:
    """The DEM's cells in a window, in metres, nodata as NaN.

    Parameters
    ----------
    dem : DemGround
        The DEM (band, nodata, elevation unit).
    src : rasterio.DatasetReader
        The open DEM.
    win : rasterio.windows.Window
        The cells to read (inside the raster).

    Returns
    -------
    numpy.ndarray
        Elevations (m), float64.
    """
    data = src.read(dem.band, window=win, masked=True)
    arr = np.asarray(data.filled(np.nan) if np.ma.isMaskedArray(data) else data, dtype=float)
    if dem.nodata is not None and np.isfinite(dem.nodata):
        arr[arr == dem.nodata] = np.nan
    return arr * dem.metres_per_unit


def dem_block_size(src, band: int = 1, default: int = 512) -> tuple[int, int]:
    """The block (rows, columns) to read a DEM by: whole tiles of its own where it is tiled (a
    cloud-optimised or tiled GeoTIFF; as many as make about ``default`` cells a side), else
    ``default`` square.

    Parameters
    ----------
    src : rasterio.DatasetReader
        The open DEM.
    band : int, optional
        The band read.
    default : int, optional
        Block side for a striped or untiled raster (cells).

    Returns
    -------
    tuple of int
        Rows and columns of a block.
    """
    try:
        h, w = src.block_shapes[band - 1]
    except (IndexError, AttributeError):
        return default, default
    if h >= 16 and w >= 16 and (h < src.height or w < src.width):  # tiled: whole tiles, about default a side
        return int(h * max(1, default // h)), int(w * max(1, default // w))
    return default, default


def read_dem_window(dem: DemGround, x: np.ndarray, y: np.ndarray, margin: int = 2):
    """The DEM cells around points ``x, y``.

    Nodata cells become NaN; elevations are converted to metres.

    Parameters
    ----------
    dem : DemGround
        The DEM.
    x, y : numpy.ndarray
        Points in the DEM's CRS.
    margin : int, optional
        Cells added on every side of the points' bounding box.

    Returns
    -------
    tuple
        ``(array_m, affine)``: elevations (m) and the window's transform; ``(None, None)``
        when the points lie wholly outside the raster.
    """
    with rasterio.open(dem.path) as src:
        win = dem_window(src, x, y, margin)
        if win is None:
            return None, None
        return read_dem_cells(dem, src, win), src.window_transform(win)


def _read_points(path: Path, cfg: Config, roads: Roads, factor: float) -> PointGround:
    """Every ground point, heights in metres, sorted and grouped by road id."""
    fast = _read_point_columns(path, cfg)
    if fast is not None:
        frame, crs = fast
    else:
        frame, crs = read_table(path, what="ground", layer=cfg["ground.layer"],
                                layer_setting="ground.layer (--ground-layer)",
                                crs_text=cfg["ground.crs"], crs_setting="ground.crs (--ground-crs)")
    _check_point_columns(frame, path, cfg)
    codes, unique_ids = _point_id_codes(frame[cfg["roads.id_column"]])
    mode, cols = _point_columns(frame, path, cfg["ground.z_column"], factor)
    del frame
    crs_assumed = False
    if mode == "xy":
        if crs is None:
            crs, crs_assumed = roads.source_crs, True
            roads.notes.append(f"{path.name}: no CRS stated for ground points; taken as the roads' CRS")
    keep = codes >= 0
    order = np.argsort(codes, kind="stable")[np.count_nonzero(~keep):]  # rows without an id go first: dropped
    sorted_codes = codes[order]
    starts = np.searchsorted(sorted_codes, np.arange(len(unique_ids)), side="left")
    stops = np.searchsorted(sorted_codes, np.arange(len(unique_ids)), side="right")
    arrays = {c: np.asarray(v, dtype=float)[order] for c, v in cols.items()}
    groups = {u: (int(a), int(b)) for u, a, b in zip(unique_ids, starts, stops)}
    return PointGround(path=path, crs=crs, mode=mode, rows=int(len(order)), arrays=arrays, groups=groups,
                       crs_assumed=crs_assumed)


def _wanted_point_columns(names: list[str], cfg: Config) -> list[str] | None:
    """The columns a ground-points table is read for (road id, height, then ``chainage_m`` or
    ``x, y``), as named in the file; ``None`` when they are not all there plainly (the general
    reader then reads the file and says what is wrong)."""
    if len(set(names)) != len(names) or any(n != n.strip() or n.lower() in GEOMETRY_TEXT_COLUMNS for n in names):
        return None
    need = [cfg["roads.id_column"], cfg["ground.z_column"]]
    if "chainage_m" in names:
        need.append("chainage_m")
    elif {"x", "y"} <= set(names):
        need += ["x", "y"]
    else:
        return None
    return need if set(need) <= set(names) and len(set(need)) == len(need) else None


def _read_point_columns(path: Path, cfg: Config) -> tuple[pd.DataFrame, pyproj.CRS | None] | None:
    """Ground points from a UTF-8 CSV or a plain Parquet file, read with pyarrow: only the
    columns used, heights and coordinates straight to float.

    This is the fast way for the common files; it gives ``None`` (and the general reader,
    :func:`pipeline.ingest.files.read_table`, reads the file and words any error) for every
    other case: a vector file, GeoParquet, another encoding, a point geometry instead of
    columns, a cell that is not a number, an empty file.
    """
    suffix = path.suffix.lower()
    try:
        if suffix in (".csv", ".txt"):
            frame = _arrow_csv(path, cfg)
        elif suffix == ".parquet":
            frame = _arrow_parquet(path, cfg)
        else:
            return None
    except Exception:  # the general reader reads it again and says what is wrong
        return None
    if frame is None or len(frame) == 0:
        return None
    crs = parse_crs(cfg["ground.crs"], "ground.crs (--ground-crs)") if cfg["ground.crs"] else None
    return frame, crs


def _arrow_csv(path: Path, cfg: Config) -> pd.DataFrame | None:
    """The point columns of a UTF-8 CSV (``None`` for another encoding or layout)."""
    import pyarrow as pa
    from pyarrow import csv as pacsv

    with open(path, "rb") as fh:
        head = fh.read(1 << 16)
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return None
    bom = head.startswith(b"\xef\xbb\xbf")
    text = head[3:] if bom else head
    if b"\n" not in text:
        return None
    try:
        header = text.split(b"\n", 1)[0].decode("utf-8").rstrip("\r")
    except UnicodeDecodeError:
        return None
    import csv as stdcsv

    names = next(stdcsv.reader([header]))
    cols = _wanted_point_columns(names, cfg)
    if cols is None:
        return None
    id_col = cfg["roads.id_column"]
    types = {c: (pa.string() if c == id_col else pa.float64()) for c in cols}
    table = pacsv.read_csv(
        path,
        read_options=pacsv.ReadOptions(encoding="utf-8-sig" if bom else "utf8"),
        parse_options=pacsv.ParseOptions(),
        convert_options=pacsv.ConvertOptions(include_columns=cols, column_types=types, null_values=[""],
                                             strings_can_be_null=True, quoted_strings_can_be_null=True))
    return table.to_pandas()


def _arrow_parquet(path: Path, cfg: Config) -> pd.DataFrame | None:
    """The point columns of a plain (not Geo-) Parquet file."""
    import pyarrow.parquet as pq

    schema = pq.read_schema(path)
    if schema.metadata and b"geo" in schema.metadata:
        return None
    cols = _wanted_point_columns(list(schema.names), cfg)
    if cols is None:
        return None
    return pq.read_table(path, columns=cols).to_pandas()


def _check_point_columns(frame: pd.DataFrame, path: Path, cfg: Config) -> None:
    """The points file has rows, a road id column and a height column."""
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


def _point_id_codes(raw_ids: pd.Series) -> tuple[np.ndarray, list[str]]:
    """Each point's road as a code into the list of distinct road ids (-1: no id).

    Ids are factorised as read: only the distinct ids become Python strings; raw values that
    read as the same id (" A1" and "A1", 12.0 and 12) are merged afterwards."""
    raw_codes, raw_uniques = pd.factorize(raw_ids, sort=False, use_na_sentinel=True)
    raw_text = pd.Series(id_strings(pd.Series(raw_uniques)), dtype=object).replace("", None)
    text_codes, uniques = pd.factorize(raw_text, sort=False, use_na_sentinel=True)
    codes = np.where(raw_codes >= 0, np.append(text_codes, -1)[raw_codes], -1)
    return codes, [str(u) for u in uniques]


def _point_columns(frame: pd.DataFrame, path: Path, z_col: str, factor: float
                   ) -> tuple[str, dict[str, np.ndarray]]:
    """The points' mode (``"chainage"`` or ``"xy"``) and columns: ``z_m`` (m) with
    ``chainage_m``, or ``x, y`` from columns or a point geometry."""
    cols = {"z_m": numeric_column(frame, z_col, path) * factor}
    geom = frame["geometry"] if "geometry" in frame.columns else None
    if "chainage_m" in frame.columns:
        cols["chainage_m"] = numeric_column(frame, "chainage_m", path)
        return "chainage", cols
    if {"x", "y"} <= set(frame.columns):
        cols["x"] = numeric_column(frame, "x", path)
        cols["y"] = numeric_column(frame, "y", path)
        return "xy", cols
    if geom is not None:
        cols["x"] = shapely.get_x(geom.to_numpy())
        cols["y"] = shapely.get_y(geom.to_numpy())
        return "xy", cols
    raise InputError(f"{path}: ground points need columns x, y (or a point geometry) or chainage_m")


def _unit_code(text) -> str | None:
    if not text:
        return None
    low = str(text).strip().lower()
    if "survey" in low or low in ("us_ft", "ftus", "us-ft", "us ft"):
        return "us_ft"
    if low in ("m", "metre", "meter", "metres", "meters"):
        return "m"
    if low in ("ft", "foot", "feet", "international foot", "foot (international)", "intl foot"):
        return "ft"
    return None


UNIT_NAMES = {"m": "metres", "ft": "feet (international)", "us_ft": "US survey feet"}


def dem_elevation_unit(dem) -> tuple[str | None, str]:
    """The elevation unit a DEM states: its band's unit, else its CRS's vertical axis.

    Parameters
    ----------
    dem : DemGround
        The DEM.

    Returns
    -------
    (str or None, str)
        The unit ('m', 'ft' or 'us_ft'; None where the file states none) and where it was read.
    """
    with rasterio.open(dem.path) as src:
        band_unit = src.units[dem.band - 1] if src.units else None
    code = _unit_code(band_unit)
    if code:
        return code, f"band {dem.band} unit {band_unit!r}"
    axes = dem.crs.axis_info
    if len(axes) >= 3:
        code = _unit_code(axes[2].unit_name)
        if code:
            return code, f"vertical CRS axis in {axes[2].unit_name}"
    return None, "not stated in the file"
