"""The 3D sight stage for one road, on a DEM: the available sight distance along the lane
over the ground beside the road (and the surface model's trees and buildings, where given),
both ways; the smallest over each vertical and horizontal curve; and, for each stretch where
it falls short of the required SSD while the 2D profile does not, what to clear
(:mod:`pipeline.sight.sight3d`)."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import shapely

from ..core.config import Config
from ..ingest.readers import DemGround, read_dem_window
from ..ingest.surface import open_surface, surface_on_cells
from ..profile.stations import run_lengths
from ..sight.sight3d import LIMIT3D_NAMES, OBJECT, TERRAIN, clearance_road, lane_width, sight_3d_road

PROFILE_COLUMNS = ["sight_3d_fwd_m", "sight_3d_fwd_limit", "sight_3d_back_m", "sight_3d_back_limit"]
CLEARANCE_COLUMNS = ["road_id", "direction", "from_m", "to_m", "limit_kind", "hcurve_no", "ssd_required_m",
                     "sight_3d_m", "clear_area_m2", "object_area_m2", "clear_volume_m3", "max_cut_m",
                     "clearance_wkt", "blocking_wkt"]
_SURFACES: dict = {}  # the surface model opened once per process


@dataclass
class Sight3DStage:
    """What the 3D sight stage gives for one road: the profile's new columns, the smallest 3D
    sight over each vertical curve (``curves``) and horizontal curve (``hcurves``), the
    clearances (:data:`CLEARANCE_COLUMNS`) and notes."""

    columns: dict
    curves: np.ndarray | None = None
    hcurves: np.ndarray | None = None
    clearances: pd.DataFrame | None = None
    notes: list = field(default_factory=list)


def _empty(n: int) -> dict:
    """The profile's 3D columns where the stage does not run: empty (text columns typed as text,
    so that every chunk file reads alike)."""
    return {"sight_3d_fwd_m": np.full(n, np.nan), "sight_3d_fwd_limit": pd.array([None] * n, dtype="string"),
            "sight_3d_back_m": np.full(n, np.nan), "sight_3d_back_limit": pd.array([None] * n, dtype="string")}


def road_sight_3d(row: pd.Series, profile: pd.DataFrame, curves: pd.DataFrame | None, hcurves: pd.DataFrame | None,
                  road, polyline, sampler, cset, cfg: Config, to_source) -> Sight3DStage:
    """Available 3D sight both ways, its minimum per curve, and what to clear (the 3D stage).

    Parameters
    ----------
    row : pandas.Series
        The road's row (``road_id``, ``work_key``).
    profile : pandas.DataFrame
        The profile with the 2D sight (``sight_fwd_m``, ``sight_back_m``, m), the speeds
        (``speed_fwd_kmh``, ``speed_back_kmh``, km/h) and ``grade_pct`` (%); not changed.
    curves, hcurves : pandas.DataFrame or None
        Vertical (``pvc_m, pvt_m``) and horizontal (``hcurve_no, start_m, end_m``) curves (m).
    road : RoadProfile or None
        The fitted alignment: the road surface under the sight lines.
    polyline : Polyline
        The centreline in the working CRS (m).
    sampler : GroundSampler
        The ground (a DEM for this stage to run) and the transform to it.
    cset : CriteriaSet
        The criteria set (required SSD, eye and object heights).
    cfg : Config
        The run's settings (``sight.*``, ``profile.carriageway_width_m``, ``plan.lane_width_m``,
        ``criteria.grade_adjusted``).
    to_source : pyproj.Transformer or None
        Working CRS to the roads' own CRS (for the clearance outlines and blocking points).

    Returns
    -------
    Sight3DStage
        NaN columns (and nothing else) where the ground is not a DEM, the stage is switched off,
        or nothing was fitted.
    """
    ch = profile["chainage_m"].to_numpy(dtype=float)
    n = len(ch)
    ground = sampler.ground
    if not cfg["sight.three_d"] or not isinstance(ground, DemGround) or road is None or n < 2:
        return Sight3DStage(columns=_empty(n))
    if ground.crs.is_geographic:
        return Sight3DStage(columns=_empty(n), notes=[("3D sight lines not measured", None, None,
                                                       "the DEM's CRS is geographic; 3D sight lines need a projected "
                                                       "(metric) DEM")])
    if cfg["sight.surface"] and cfg["sight.surface"] not in _SURFACES:
        _SURFACES[cfg["sight.surface"]] = open_surface(cfg)
    surface = _SURFACES.get(cfg["sight.surface"]) if cfg["sight.surface"] else None
    wx, wy = polyline.at(ch)
    tr = sampler._to_ground(row["work_key"], (wx[:1], wy[:1]))
    gx, gy = (np.asarray(v, dtype=float) for v in tr.transform(wx, wy))

    def window(xmin, ymin, xmax, ymax):
        arr, aff = read_dem_window(ground, np.array([xmin, xmax]), np.array([ymin, ymax]), margin=2)
        if arr is None:
            return None
        sfc = surface_on_cells(surface, arr.shape, aff) if surface is not None else None
        return arr, aff, sfc

    rules = cset.sight_rules()
    opts = {"lane_width_m": lane_width(cfg), "traffic_side": cfg["sight.traffic_side"],
            "carriageway_half_width_m": float(cfg["profile.carriageway_width_m"]) / 2.0,
            "object_min_height_m": float(cfg["sight.object_min_height_m"])}
    res = sight_3d_road(ch, gx, gy, road.z, window, rules, **opts)
    cols = {}
    for d in ("fwd", "back"):
        cols[f"sight_3d_{d}_m"] = res[f"sight_3d_{d}_m"]
        cols[f"sight_3d_{d}_limit"] = pd.array(np.where(np.isnan(res[f"sight_3d_{d}_m"]), None,
                                                        LIMIT3D_NAMES[res[f"limit_3d_{d}"]]), dtype="string")
    notes = []
    if int(res["unknown_cells"]):
        notes.append(("3D sight lines over DEM cells without data", None, None,
                      f"{int(res['unknown_cells'])} nodata cell(s) in the windows read; ground there taken as not "
                      f"blocking"))
    both = np.fmin(cols["sight_3d_fwd_m"], cols["sight_3d_back_m"])
    stage = Sight3DStage(columns=cols, notes=notes,
                         curves=_span_min(ch, both, curves, "pvc_m", "pvt_m"),
                         hcurves=_span_min(ch, both, hcurves, "start_m", "end_m"))
    stage.clearances = _clearances(row["road_id"], profile, res, hcurves, (ch, gx, gy), road, window, rules, opts,
                                   cset, cfg, _back_transform(tr, to_source))
    return stage


def _span_min(ch: np.ndarray, sight: np.ndarray, table: pd.DataFrame | None, a: str, b: str) -> np.ndarray | None:
    """The smallest value of ``sight`` over the stations within each row's ``[a, b]`` (m)."""
    if table is None or not len(table):
        return None
    out = []
    for lo, hi in zip(table[a].to_numpy(float), table[b].to_numpy(float)):
        v = sight[(ch >= lo - 1e-9) & (ch <= hi + 1e-9)]
        out.append(float(np.nanmin(v)) if np.isfinite(v).any() else np.nan)
    return np.asarray(out)


def required_ssd(profile: pd.DataFrame, cset, cfg: Config, name: str) -> np.ndarray:
    """Required SSD (m) at every station in one direction (``fwd`` or ``back``): the criteria set's
    design SSD at the station's speed, on its grade where ``criteria.grade_adjusted``."""
    v = profile[f"speed_{name}_kmh"].to_numpy(float) / cset.speed_to_kmh
    grade = None
    if cfg["criteria.grade_adjusted"]:
        grade = (1 if name == "fwd" else -1) * profile["grade_pct"].to_numpy(float) / 100.0
    ok = np.isfinite(v) & (np.isfinite(grade) if grade is not None else True)
    out = np.full(len(v), np.nan)
    if ok.any():  # once per distinct speed (and grade): the set's look-up is not vectorised
        key = np.column_stack([v[ok], grade[ok] if grade is not None else np.zeros(ok.sum())])
        uniq, inv = np.unique(key, axis=0, return_inverse=True)
        ssd = np.asarray(cset.ssd_design(uniq[:, 0], uniq[:, 1] if grade is not None else None), dtype=float)
        out[ok] = ssd[inv.ravel()] * cset.length_to_m
    return out


def _back_transform(tr, to_source):
    """Coordinates from the DEM's CRS to the roads' own CRS."""
    def f(xy: np.ndarray) -> np.ndarray:
        x, y = tr.transform(xy[:, 0], xy[:, 1], direction="INVERSE")
        if to_source is not None:
            x, y = to_source.transform(x, y)
        return np.column_stack([np.asarray(x, dtype=float), np.asarray(y, dtype=float)])
    return f


def _clearances(road_id: str, profile: pd.DataFrame, res: dict, hcurves, stations, road, window, rules, opts: dict,
                cset, cfg: Config, back) -> pd.DataFrame:
    """One row per stretch and direction where the 3D sight, limited by roadside terrain or an
    object, is shorter than the required SSD while the 2D sight is not: what to clear there."""
    ch, gx, gy = stations
    rows = []
    for name, sign, direction in (("fwd", 1, "increasing"), ("back", -1, "decreasing")):
        req = required_ssd(profile, cset, cfg, name)
        s3 = res[f"sight_3d_{name}_m"]
        lim = res[f"limit_3d_{name}"]
        s2 = profile[f"sight_{name}_m"].to_numpy(float)
        with np.errstate(invalid="ignore"):
            short = np.isin(lim, (TERRAIN, OBJECT)) & (s3 < req - 1e-9) & ~(s2 < req - 1e-9)
        for a, b in run_lengths(short):
            eyes = np.arange(a, b)
            got = clearance_road(ch, gx, gy, road.z, window, rules, eyes, req[eyes], sign, **opts)
            if got is None:
                continue
            kinds = lim[eyes]
            frm, to = float(ch[a]), float(ch[b - 1])
            span = (frm, to + float(np.nanmax(req[eyes]))) if sign > 0 else (frm - float(np.nanmax(req[eyes])), to)
            bx, by = res[f"block_x_{name}"][eyes], res[f"block_y_{name}"][eyes]
            ok = np.isfinite(bx) & np.isfinite(by)
            pts = back(np.column_stack([bx[ok], by[ok]])) if ok.any() else np.empty((0, 2))
            poly = got["polygon"]
            if poly is not None:
                poly = shapely.transform(poly, back)
            rows.append({
                "road_id": road_id, "direction": direction, "from_m": frm, "to_m": to,
                "limit_kind": "roadside object" if np.count_nonzero(kinds == OBJECT) * 2 > len(kinds)
                else "roadside terrain",
                "hcurve_no": _hcurve_involved(hcurves, span),
                "ssd_required_m": float(np.nanmax(req[eyes])), "sight_3d_m": float(np.nanmin(s3[eyes])),
                "clear_area_m2": got["area_m2"], "object_area_m2": got["object_area_m2"],
                "clear_volume_m3": got["volume_m3"], "max_cut_m": got["max_cut_m"],
                "clearance_wkt": poly.wkt if poly is not None else None,
                "blocking_wkt": shapely.multipoints(pts).wkt if len(pts) else None,
            })
    return pd.DataFrame(rows, columns=CLEARANCE_COLUMNS)


def _hcurve_involved(hcurves, span: tuple[float, float]) -> int:
    """The horizontal curve overlapping the span of the required sight lines most (0 = none)."""
    if hcurves is None or not len(hcurves):
        return 0
    lo, hi = span
    over = np.minimum(hcurves["end_m"].to_numpy(float), hi) - np.maximum(hcurves["start_m"].to_numpy(float), lo)
    k = int(np.argmax(over))
    return int(hcurves["hcurve_no"].iloc[k]) if over[k] > 0 else 0
