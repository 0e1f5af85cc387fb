"""Input files: existence checks, checksums, text encodings, and the reading of a CSV,
GeoPackage (or any vector file GDAL reads) or Parquet file into a DataFrame with a shapely
``geometry`` column. Nothing here knows what the rows mean (roads, ground points or
structures); that is for :mod:`~pipeline.ingest.roads`, :mod:`~pipeline.ingest.ground` and
:mod:`~pipeline.ingest.features`.

geopandas and pyogrio are imported only where a vector or Parquet file is read (they are
slow to import and a CSV run never needs them).
"""

from __future__ import annotations

import hashlib
import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pyproj
import shapely

from ..core.errors import InputError
from .crs import parse_crs

VECTOR_SUFFIXES = {".gpkg", ".shp", ".geojson", ".json", ".fgb", ".gml", ".kml", ".sqlite"}
GEOMETRY_TEXT_COLUMNS = ("wkt", "geometry", "geom")  # matched without regard to case


def check_file(path: str | Path, what: str) -> Path:
    """The path of an input file that exists, is a file and is not empty.

    Parameters
    ----------
    path : str or Path
        The file named by the user.
    what : str
        What the file holds ("roads", "ground" ...), for the message.

    Returns
    -------
    Path
        ``path`` as a :class:`~pathlib.Path`.

    Raises
    ------
    InputError
        Where the file is missing, is a folder or is empty.
    """
    p = Path(path)
    if not p.exists():
        raise InputError(f"{p}: {what} file not found; check the path")
    if p.is_dir():
        raise InputError(f"{p}: is a folder, expected a {what} file")
    if p.stat().st_size == 0:
        raise InputError(f"{p}: {what} file is empty; export the data again")
    return p


def file_sha256(path: str | Path) -> str:
    """The SHA-256 checksum of a file, read in blocks of 1 MiB.

    Parameters
    ----------
    path : str or Path
        The file.

    Returns
    -------
    str
        The checksum as 64 hexadecimal digits.
    """
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def short_error(exc: BaseException) -> str:
    """An exception's message on one line, at most 160 characters (for an error message).

    Parameters
    ----------
    exc : BaseException
        The exception a library raised.

    Returns
    -------
    str
        Its text, whitespace collapsed, cut at 160 characters.
    """
    return " ".join(str(exc).split())[:160]


def csv_encoding(path: Path) -> str:
    """The text encoding of a CSV file.

    UTF-16 or UTF-8 where a byte-order mark says so, UTF-8 where the bytes decode as UTF-8,
    otherwise Windows-1252 (what spreadsheet programs write on Windows; every byte decodes,
    so accented names survive). Anything but plain UTF-8 is named in a note by the caller.

    Parameters
    ----------
    path : Path
        The CSV file.

    Returns
    -------
    str
        A Python codec name: ``"utf-16"``, ``"utf-8-sig"``, ``"utf-8"`` or ``"cp1252"``.
    """
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


def geometry_text_column(columns, path: Path, wanted: str = "", explicit: bool = False) -> str | None:
    """The CSV column holding geometry as WKT.

    ``wanted`` when present (or when set explicitly, else :class:`InputError`), otherwise
    the one column named ``wkt``, ``geometry`` or ``geom`` in any case (``WKT`` too, as
    GeoPandas and GIS exports write them). Two such columns and no choice made stop the run.

    Parameters
    ----------
    columns : iterable
        The CSV's column names.
    path : Path
        The CSV file, for messages.
    wanted : str, optional
        The column the settings name (``roads.wkt_column``).
    explicit : bool, optional
        True where the user set ``wanted`` (it must then exist).

    Returns
    -------
    str or None
        The column name, or ``None`` when there is none.
    """
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

    Parameters
    ----------
    path : Path
        A CSV (``.csv``, ``.txt``), Parquet or vector file.
    what : str
        What the file holds ("roads", "ground" ...): for messages, and the layer chosen
        where a vector file has several and one is so named.
    layer, layer_setting : str, optional
        The layer to read from a vector file, and the setting that names it (for messages).
    wkt_column : str, optional
        The CSV column with the geometry as WKT (see :func:`geometry_text_column`).
    crs_text, crs_setting : str, optional
        A CRS stated by the user (overrides the file's), and the setting that holds it.
    wkt_explicit : bool, optional
        True where the user set ``wkt_column``.

    Returns
    -------
    frame : pandas.DataFrame
        One row per feature; for a CSV, the WKT column used is named in
        ``frame.attrs["geometry_column"]`` and the encoding in ``frame.attrs["encoding"]``.
    crs : pyproj.CRS or None
        ``None`` where neither the file nor the settings give one.
    """
    suffix = path.suffix.lower()
    crs = parse_crs(crs_text, crs_setting) if crs_text else None
    if suffix == ".csv" or suffix == ".txt":
        return _read_csv(path, what, wkt_column, wkt_explicit), crs
    if suffix == ".parquet":
        gdf, plain = _read_parquet(path)
        if plain is not None:
            return plain, crs
    else:
        gdf = _read_vector(path, layer, what, layer_setting)
    frame = pd.DataFrame(gdf.drop(columns=gdf.geometry.name))
    frame["geometry"] = gdf.geometry.to_numpy()
    if crs is None and gdf.crs is not None:
        crs = pyproj.CRS.from_user_input(gdf.crs)
    return frame, crs


def _read_csv(path: Path, what: str, wkt_column: str, wkt_explicit: bool) -> pd.DataFrame:
    """A CSV as text columns, its WKT column (if any) parsed into ``geometry``."""
    encoding = csv_encoding(path)
    try:
        frame = pd.read_csv(path, dtype=str, keep_default_na=False, na_values=[""], encoding=encoding)
    except (pd.errors.ParserError, UnicodeDecodeError, UnicodeError) as exc:
        raise InputError(f"{path}: not a readable CSV file ({short_error(exc)}); save it as UTF-8 CSV") from None
    except pd.errors.EmptyDataError:
        raise InputError(f"{path}: {what} file has no rows; export the data again") from None
    frame.columns = [str(c).strip() for c in frame.columns]
    if len(frame) == 0:
        raise InputError(f"{path}: {what} file has a header but no rows; export the data again")
    wkt_column = geometry_text_column(frame.columns, path, wkt_column, wkt_explicit)
    if wkt_column:
        geoms = _parse_wkt(frame[wkt_column], path, wkt_column)
        frame = frame.drop(columns=[wkt_column])
        frame["geometry"] = geoms
        frame.attrs["geometry_column"] = wkt_column
    frame.attrs["encoding"] = encoding
    return frame


def _parse_wkt(column: pd.Series, path: Path, name: str) -> np.ndarray:
    """Shapely geometries from WKT text (blank cells give ``None``); invalid WKT stops the run
    naming its row."""
    text = np.array([v if isinstance(v, str) and v.strip() else None for v in column], dtype=object)
    with warnings.catch_warnings():  # invalid WKT is reported below, row by row
        warnings.simplefilter("ignore", RuntimeWarning)
        geoms = shapely.from_wkt(text, on_invalid="ignore")
    bad = np.flatnonzero(pd.isna(geoms) & np.array([t is not None for t in text]))
    if len(bad):
        raise InputError(f"{path}: row {bad[0] + 2}, column {name}: not valid WKT; fix or remove the row")
    return geoms


def _read_parquet(path: Path):
    """``(GeoDataFrame, None)`` for GeoParquet, else ``(None, DataFrame)`` for plain Parquet."""
    try:
        return gpd.read_parquet(path), None
    except Exception as exc:
        try:
            return None, pd.read_parquet(path)
        except Exception:
            raise InputError(f"{path}: not a readable Parquet file ({short_error(exc)})") from None


def _read_vector(path: Path, layer: str, what: str, setting: str):
    """One layer of a vector file GDAL reads, as a GeoDataFrame."""
    lyr = _vector_layer(path, layer, what, setting)
    try:
        return gpd.read_file(path, layer=lyr, engine="pyogrio")
    except Exception as exc:
        raise InputError(f"{path}: cannot be read ({short_error(exc)}); check the format") from None


def _vector_layer(path: Path, layer: str, what: str, setting: str) -> str | None:
    """The layer to read: the one named, the only one, or the one called ``what``."""
    try:
        layers = [row[0] for row in pyogrio.list_layers(path)]
    except Exception as exc:  # GDAL raises its own error types
        raise InputError(f"{path}: cannot be read as a vector file ({short_error(exc)}); check the format") from None
    if layer:
        if layer not in layers:
            raise InputError(f"{path}: no layer {layer!r} (layers: {', '.join(layers)}); fix {setting}")
        return layer
    if len(layers) == 1:
        return layers[0]
    if what in layers:
        return what
    raise InputError(f"{path}: has layers {', '.join(layers)}; choose one with {setting}")


def numeric_column(frame: pd.DataFrame, column: str, path: Path) -> np.ndarray:
    """A column as float; a non-numeric entry stops the run naming its row.

    Parameters
    ----------
    frame : pandas.DataFrame
        The table read from ``path``.
    column : str
        The column to convert (values in whatever unit the file uses).
    path : Path
        The file, for messages.

    Returns
    -------
    numpy.ndarray
        The values as float64; empty cells are NaN.
    """
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
    """Identifiers as text (vectorised); 12.0 read from a numeric column becomes '12'.

    Parameters
    ----------
    values : pandas.Series
        Identifiers as read (text or numbers).

    Returns
    -------
    numpy.ndarray
        Object array of stripped strings, ``None`` where the value is missing.
    """
    values = pd.Series(values)
    if pd.api.types.is_float_dtype(values):
        finite = values.dropna()
        if len(finite) and np.all(np.mod(finite, 1) == 0):
            values = values.astype("Int64")
    text = values.astype("string").str.strip()
    return text.to_numpy(dtype=object, na_value=None)
