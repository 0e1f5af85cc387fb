"""The GeoPackage ``audit.gpkg``: the roads, curves, deficient stretches and horizontal curves.

Every layer is in the roads' own CRS. Curves and stretches are cut from the
centreline (held in the working CRS) by chainage and transformed back.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from ..profile.stations import Polyline
from .tables import round_for_reading
from .gpkg_styles import store_styles



# GeoPackage 1.2 (OGC 12-128r15): read without warnings by GDAL 3.6 and the desktop GIS built on
# it, which warn that a 1.4 file "may only be partially supported"
GPKG_OPTIONS = {"VERSION": "1.2"}

def write_gpkg(path: Path, result, curves: pd.DataFrame, deficiencies: pd.DataFrame,
               hcurves: pd.DataFrame, units=None) -> None:
    """Write the GeoPackage's layers.

    Parameters
    ----------
    path : pathlib.Path
        The ``.gpkg`` file to write.
    result : NetworkResult
        The run's result: the roads with their geometry in the source and working CRS.
    curves : pandas.DataFrame
        The curve table, internal units; drawn from PVC to PVT.
    deficiencies : pandas.DataFrame
        The deficiency table, internal units; each stretch drawn half a station
        beyond its end stations.
    hcurves : pandas.DataFrame
        The horizontal curves, internal units; drawn from start to end.
    units : OutputUnits, optional
        The run's output units for the attributes; internal units without.

    Returns
    -------
    None
        Layers ``roads``, ``curves``, ``deficiencies`` and ``horizontal_curves`` (lines),
        ``pvis``, ``hidden_hazards`` and ``sight_limiting_points`` (points), and where the 3D sight found something to clear
        ``sight_clearance`` (polygons) and ``sight_blocking_points`` (points).
    """
    roads = result.roads
    t = roads.table.set_index("road_id", drop=False)
    crs = roads.source_crs
    conv = (lambda f: round_for_reading(units.table(f))) if units is not None else (lambda f: f)
    road_attrs = result.road_table()
    gpd.GeoDataFrame(conv(road_attrs), geometry=list(t["geometry_src"].reindex(road_attrs["road_id"])), crs=crs) \
        .to_file(path, layer="roads", driver="GPKG", engine="pyogrio", dataset_options=GPKG_OPTIONS)
    cut = _centreline_cutter(roads, t)
    step = result.step_m
    for layer, frame, geom in (("curves", curves, cut(curves, "pvc_m", "pvt_m", 0.0)),
                               ("deficiencies", deficiencies, cut(deficiencies, "from_m", "to_m", step / 2)),
                               ("horizontal_curves", hcurves, cut(hcurves, "start_m", "end_m", 0.0))):
        gpd.GeoDataFrame(conv(frame), geometry=geom, crs=crs).to_file(path, layer=layer, driver="GPKG",
                                                                    engine="pyogrio")
    for layer, frame in _point_layers(curves, deficiencies):
        points = [shapely.points(shapely.get_coordinates(g)[0]) for g in cut(frame, "at_m", "at_m", 0.0)]
        gpd.GeoDataFrame(conv(frame), geometry=points, crs=crs).to_file(path, layer=layer, driver="GPKG",
                                                                      engine="pyogrio")
    layers = ["roads", "curves", "deficiencies", "horizontal_curves"] + [layer for layer, _ in
                                                                          _point_layers(curves, deficiencies)]
    layers += _clearance_layers(path, result, deficiencies, crs, conv)
    store_styles(path, layers)


def _clearance_layers(path: Path, result, deficiencies: pd.DataFrame, crs, conv) -> list[str]:
    """The 3D sight's areas to clear (``sight_clearance``, polygons) and blocking points
    (``sight_blocking_points``), each with the rank of its roadside row in the inventory; none
    where the 3D stage found nothing to clear. Geometry as the stage wrote it, in the roads' CRS."""
    cl = result.clearances
    cl = cl[cl["clearance_wkt"].notna()] if len(cl) else cl
    if not len(cl):
        return []
    road = deficiencies[deficiencies["kind"] == "roadside"] if "kind" in deficiencies else deficiencies.iloc[:0]
    ranks = []
    for r in cl.itertuples():
        m = road[(road["road_id"] == r.road_id) & (road["direction"] == r.direction)
                 & (road["from_m"] <= r.to_m + result.step_m / 2) & (road["to_m"] >= r.from_m - result.step_m / 2)]
        ranks.append(int(m["rank"].min()) if len(m) else None)
    attrs = cl.drop(columns=["clearance_wkt", "blocking_wkt"]).assign(rank=pd.array(ranks, dtype="Int64"))
    gpd.GeoDataFrame(conv(attrs.reset_index(drop=True)), geometry=list(shapely.from_wkt(cl["clearance_wkt"])),
                     crs=crs).to_file(path, layer="sight_clearance", driver="GPKG", engine="pyogrio")
    pts, rows = [], []
    for i, w in enumerate(cl["blocking_wkt"]):
        if isinstance(w, str):
            g = shapely.get_parts(shapely.from_wkt(w))
            pts.extend(g)
            rows.extend([i] * len(g))
    layers = ["sight_clearance"]
    if pts:
        keep = ["road_id", "direction", "from_m", "to_m", "limit_kind", "hcurve_no", "rank"]
        gpd.GeoDataFrame(conv(attrs[keep].iloc[rows].reset_index(drop=True)), geometry=pts, crs=crs).to_file(
            path, layer="sight_blocking_points", driver="GPKG", engine="pyogrio")
        layers.append("sight_blocking_points")
    return layers


def _point_layers(curves: pd.DataFrame, deficiencies: pd.DataFrame) -> list[tuple[str, pd.DataFrame]]:
    """The point layers: each vertical curve's PVI (``pvis``), each hazard hidden beyond a crest
    where a driver first meets it (``hidden_hazards``), and the crest's high point that limits the
    sight of each deficient or undetermined crest stretch (``sight_limiting_points``; a sag has no
    one such point, its headlight reach moving with the car, and roadside limits are in
    ``sight_blocking_points``); ``at_m`` is the point's chainage."""
    pvis = curves[["road_id", "curve_no", "kind", "pvi_m", "a_pct", "length_m", "k", "verdict",
                   "confidence"]].assign(at_m=curves["pvi_m"])
    hidden = deficiencies[(deficiencies["hidden_hazard"] != "none") & deficiencies["hazard_chainage_m"].notna()]
    hazards = hidden[["rank", "road_id", "curve_no", "direction", "hidden_hazard", "hazard_detail",
                      "hazard_chainage_m", "severity", "verdict"]].assign(at_m=hidden["hazard_chainage_m"])
    crest = deficiencies[deficiencies["kind"] == "crest"][["rank", "road_id", "curve_no", "direction", "severity",
                                                            "verdict", "sight_available_m", "ssd_required_m"]]
    tops = curves[["road_id", "curve_no", "turn_m", "turn_elev_m"]]
    limits = crest.merge(tops, on=["road_id", "curve_no"], how="inner")
    limits = limits[limits["turn_m"].notna()].assign(limit_kind="crest", at_m=lambda f: f["turn_m"])
    return [("pvis", pvis), ("hidden_hazards", hazards), ("sight_limiting_points", limits.reset_index(drop=True))]


def _centreline_cutter(roads, t: pd.DataFrame):
    """A function giving pieces of the working-CRS centrelines by chainage, back in the roads' CRS."""
    crs = roads.source_crs
    back = {k: roads.to_source(k) if roads.work_crs[k] is not crs else None for k in roads.work_crs}
    polylines: dict[str, Polyline] = {}

    def cut(frame: pd.DataFrame, a_col: str, b_col: str, pad: float) -> list:
        out = []
        for rid, a, b in zip(frame["road_id"], frame[a_col], frame[b_col]):
            if rid not in polylines:
                polylines[rid] = Polyline(t.at[rid, "geometry"])
            xy = polylines[rid].cut(a - pad, b + pad)
            tr = back[t.at[rid, "work_key"]]
            if tr is not None:
                xy = np.column_stack(tr.transform(xy[:, 0], xy[:, 1]))
            out.append(shapely.linestrings(xy))
        return out

    return cut
