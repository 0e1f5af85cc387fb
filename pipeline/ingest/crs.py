"""Coordinate reference systems: parsing the user's, choosing the metric working CRS each
road is measured in, and transforming coordinates and geometries between them.

Working CRS (all lengths are measured in it, in metres):

- projected CRS in metres: used as it is;
- projected CRS in another linear unit (international or US survey feet): the
  same projection with metre axes, so pyproj converts the unit (no typed-in
  factor);
- geographic CRS (lon/lat): the UTM zone of each road's centroid on the file's
  own geodetic datum, so no datum shift (and no "ballpark" transform) is
  involved. UTM keeps grid distances within about 0.1 % of the ellipsoid
  (Snyder 1987, *Map Projections: A Working Manual*, USGS PP 1395, ch. 8).
"""

from __future__ import annotations

import numpy as np
import pyproj
import shapely
from pyproj.crs import ProjectedCRS
from pyproj.crs.coordinate_operation import UTMConversion

from ..core.errors import InputError


def parse_crs(text: str, where: str) -> pyproj.CRS:
    """A CRS from the user's text (EPSG code, WKT, PROJ string).

    Parameters
    ----------
    text : str
        What the user wrote.
    where : str
        The setting or option it came from, for the message.

    Returns
    -------
    pyproj.CRS
        The CRS; an unknown one raises :class:`InputError`.
    """
    try:
        return pyproj.CRS.from_user_input(text)
    except pyproj.exceptions.CRSError:
        raise InputError(
            f"{where}: unknown CRS {text!r}; give an EPSG code such as 'EPSG:32633' or a WKT string"
        ) from None


def working_crs_key(crs: pyproj.CRS, lon: float | None = None, lat: float | None = None) -> str:
    """A key naming the metric working CRS for data in ``crs`` at ``lon, lat``.

    Parameters
    ----------
    crs : pyproj.CRS
        The data's CRS.
    lon, lat : float, optional
        A representative position (degrees), needed for a geographic CRS only.

    Returns
    -------
    str
        ``"utm<zone><N|S>"`` for a geographic CRS, else ``"source"``.
    """
    if crs.is_geographic:
        zone = int(np.clip(np.floor((lon + 180.0) / 6.0) + 1, 1, 60))
        return f"utm{zone}{'S' if lat < 0 else 'N'}"
    return "source"


def working_crs(crs: pyproj.CRS, key: str) -> pyproj.CRS:
    """The metric CRS for ``key`` (see :func:`working_crs_key`).

    Parameters
    ----------
    crs : pyproj.CRS
        The data's CRS.
    key : str
        From :func:`working_crs_key`.

    Returns
    -------
    pyproj.CRS
        A UTM zone on ``crs``'s datum, the metre-axis twin of a projected CRS in feet, or
        ``crs`` itself where it is already in metres.
    """
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
    """A transformer from ``src`` to ``dst`` taking and giving ``x, y`` (easting or longitude first).

    Parameters
    ----------
    src, dst : pyproj.CRS
        The CRS transformed from and to.

    Returns
    -------
    pyproj.Transformer
        With ``always_xy=True``.
    """
    return pyproj.Transformer.from_crs(src, dst, always_xy=True)


def is_ballpark(tr: pyproj.Transformer) -> bool:
    """True where PROJ fell back to a transform without datum shift grids.

    Parameters
    ----------
    tr : pyproj.Transformer
        The transformer to judge.

    Returns
    -------
    bool
        True for a "ballpark" transform (errors of metres or more between datums).
    """
    desc = (tr.description or "").lower()
    return "ballpark" in desc


def transform_geometries(geoms: np.ndarray, tr: pyproj.Transformer, identity: bool) -> np.ndarray:
    """Transform an array of shapely geometries (vectorised over all their vertices).

    Parameters
    ----------
    geoms : numpy.ndarray
        Object array of shapely geometries.
    tr : pyproj.Transformer
        The transform to apply.
    identity : bool
        True where source and target CRS are the same object: ``geoms`` are returned as given.

    Returns
    -------
    numpy.ndarray
        The transformed geometries.
    """
    if identity:
        return geoms
    return shapely.transform(geoms, lambda xy: np.column_stack(tr.transform(xy[:, 0], xy[:, 1])))
