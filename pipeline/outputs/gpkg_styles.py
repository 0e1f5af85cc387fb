"""Styles stored with the GeoPackage layers, so that a desktop GIS opens them coloured.

Each layer gets one row in a ``layer_styles`` table (the table desktop GIS read their default
style from), holding an OGC Symbology Encoding / Styled Layer Descriptor 1.1 document (OGC
05-078r4, an open standard). Deficient stretches and hidden hazards are coloured by severity
with the report's colours (:data:`pipeline.outputs.report_style.SEVERITY_COLOURS`).
"""

from __future__ import annotations

import sqlite3
from datetime import datetime, timezone
from pathlib import Path
from xml.sax.saxutils import escape

from .report_style import ROAD_GREY, SEVERITY_COLOURS

CURVE_BLUE = "#3A6EA5"
HCURVE_GREEN = "#4D8B31"
CLEAR_ORANGE = "#E08A1E"
BLOCK_BROWN = "#7A3B10"

_SLD_HEAD = ('<?xml version="1.0" encoding="UTF-8"?><StyledLayerDescriptor version="1.1.0" '
             'xmlns="http://www.opengis.net/sld" xmlns:se="http://www.opengis.net/se" '
             'xmlns:ogc="http://www.opengis.net/ogc"><NamedLayer><se:Name>{name}</se:Name><UserStyle>'
             '<se:Name>{name}</se:Name><se:FeatureTypeStyle>')
_SLD_TAIL = "</se:FeatureTypeStyle></UserStyle></NamedLayer></StyledLayerDescriptor>"


def _line(colour: str, width: float) -> str:
    return (f'<se:LineSymbolizer><se:Stroke><se:SvgParameter name="stroke">{colour}</se:SvgParameter>'
            f'<se:SvgParameter name="stroke-width">{width}</se:SvgParameter></se:Stroke></se:LineSymbolizer>')


def _point(colour: str, size: float) -> str:
    return (f'<se:PointSymbolizer><se:Graphic><se:Mark><se:WellKnownName>circle</se:WellKnownName><se:Fill>'
            f'<se:SvgParameter name="fill">{colour}</se:SvgParameter></se:Fill><se:Stroke>'
            f'<se:SvgParameter name="stroke">#333333</se:SvgParameter></se:Stroke></se:Mark>'
            f'<se:Size>{size}</se:Size></se:Graphic></se:PointSymbolizer>')


def _polygon(colour: str, opacity: float) -> str:
    return (f'<se:PolygonSymbolizer><se:Fill><se:SvgParameter name="fill">{colour}</se:SvgParameter>'
            f'<se:SvgParameter name="fill-opacity">{opacity}</se:SvgParameter></se:Fill><se:Stroke>'
            f'<se:SvgParameter name="stroke">{colour}</se:SvgParameter>'
            f'<se:SvgParameter name="stroke-width">1</se:SvgParameter></se:Stroke></se:PolygonSymbolizer>')


def _rule(title: str, symbol: str, field: str | None = None, value: str | None = None) -> str:
    where = "" if field is None else (
        f"<ogc:Filter><ogc:PropertyIsEqualTo><ogc:PropertyName>{field}</ogc:PropertyName>"
        f"<ogc:Literal>{escape(value)}</ogc:Literal></ogc:PropertyIsEqualTo></ogc:Filter>")
    return f"<se:Rule><se:Name>{escape(title)}</se:Name>{where}{symbol}</se:Rule>"


def layer_sld(layer: str) -> str:
    """The SLD document styling one of the audit's GeoPackage layers.

    Parameters
    ----------
    layer : str
        ``roads``, ``curves``, ``horizontal_curves``, ``deficiencies``, ``pvis``,
        ``hidden_hazards``, ``sight_limiting_points``, ``sight_clearance`` or
        ``sight_blocking_points``.

    Returns
    -------
    str
        An SLD 1.1 document: grey roads, blue vertical curves, green horizontal curves, PVIs as
        small blue points, deficient stretches, hidden hazards and the crests limiting sight by severity (the worst the
        darkest and widest), the areas to clear for the 3D sight half-transparent orange and the
        blocking points small and brown.
    """
    widths = {"minor": 3.0, "moderate": 4.5, "severe": 6.0}
    if layer in ("deficiencies", "hidden_hazards", "sight_limiting_points"):
        make = (lambda c, s: _line(c, widths[s])) if layer == "deficiencies" else (lambda c, s: _point(c, 7 + widths[s]))
        rules = "".join(_rule(sev, make(colour, sev), "severity", sev) for sev, colour in SEVERITY_COLOURS.items())
    else:
        symbol = {"roads": _line(ROAD_GREY, 1.5), "curves": _line(CURVE_BLUE, 2.5),
                  "horizontal_curves": _line(HCURVE_GREEN, 2.5), "pvis": _point(CURVE_BLUE, 6),
                  "sight_clearance": _polygon(CLEAR_ORANGE, 0.5),
                  "sight_blocking_points": _point(BLOCK_BROWN, 5)}[layer]
        rules = _rule(layer.replace("_", " "), symbol)
    return _SLD_HEAD.format(name=escape(layer)) + rules + _SLD_TAIL


def store_styles(path: Path, layers: list[str]) -> None:
    """Write a default style for each of ``layers`` into the GeoPackage's ``layer_styles`` table,
    registered in ``gpkg_contents`` as an attributes table (GeoPackage 1.2, OGC 12-128r15).

    Parameters
    ----------
    path : pathlib.Path
        The GeoPackage, its layers written.
    layers : list of str
        The layers to style (see :func:`layer_sld`).
    """
    now = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    with sqlite3.connect(path) as con:
        con.execute("CREATE TABLE IF NOT EXISTS layer_styles (id INTEGER PRIMARY KEY AUTOINCREMENT, "
                    "f_table_catalog TEXT, f_table_schema TEXT, f_table_name TEXT, f_geometry_column TEXT, "
                    "styleName TEXT, styleQML TEXT, styleSLD TEXT, useAsDefault BOOLEAN, description TEXT, "
                    "owner TEXT, ui TEXT, update_time DATETIME)")
        con.execute("INSERT OR IGNORE INTO gpkg_contents (table_name, data_type, identifier, description, "
                    "last_change) VALUES ('layer_styles', 'attributes', 'layer_styles', "
                    "'default styles of the layers', ?)", (now,))
        for layer in layers:
            geom = con.execute("SELECT column_name FROM gpkg_geometry_columns WHERE table_name = ?",
                               (layer,)).fetchone()
            con.execute("INSERT INTO layer_styles (f_table_catalog, f_table_schema, f_table_name, "
                        "f_geometry_column, styleName, styleQML, styleSLD, useAsDefault, description, owner, "
                        "ui, update_time) VALUES ('', '', ?, ?, ?, '', ?, 1, ?, 'sightaudit', '', ?)",
                        (layer, geom[0] if geom else "geom", layer, layer_sld(layer),
                         f"sightaudit default style for {layer}", now))
