"""Write the audit's output files.

Outputs go into a staging folder beside the requested one and are moved into
place only when every file is written, so a failed run leaves the previous
output as it was and never a folder that looks complete.
"""

from __future__ import annotations

import contextlib
import json
import os
import shutil
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd

from ..core.errors import InputError


@contextlib.contextmanager
def staging_folder(final: Path):
    """Yield a temporary folder; on success it replaces ``final``.

    An existing ``final`` is replaced only if it is empty or an earlier output
    of this tool (it holds ``run.json``), never an unrelated folder.
    """
    final = Path(final).resolve()
    if final.exists():
        if not final.is_dir():
            raise InputError(f"{final}: exists and is a file; choose a folder for --out")
        if any(final.iterdir()) and not (final / "run.json").is_file():
            raise InputError(f"{final}: folder is not empty and holds no earlier audit output; choose another --out")
    final.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{final.name}.partial-", dir=final.parent))
    try:
        yield tmp
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    old = None
    if final.exists():
        old = final.parent / f".{final.name}.old-{os.getpid()}"
        if old.exists():
            shutil.rmtree(old)
        final.rename(old)
    tmp.rename(final)
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)


def _json_default(obj):
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.floating,)):
        return None if not np.isfinite(obj) else float(obj)
    if isinstance(obj, Path):
        return str(obj)
    raise TypeError(f"cannot write {type(obj).__name__} to JSON")


def write_run_json(path: Path, summary: dict) -> None:
    path.write_text(json.dumps(summary, indent=2, default=_json_default) + "\n", encoding="utf-8")


def write_profiles_from_work(path: Path, result, units) -> None:
    """profiles.parquet straight from the chunk files (DuckDB streams them; the network's
    stations are never all in memory), in road order then chainage, in the run's units."""
    import duckdb

    from ..core.sqlrun import parquet_view, write_parquet_from

    with duckdb.connect() as con:
        parquet_view(con, "stations", result.work.files("profiles"))
        cols = [r[0] for r in con.sql("DESCRIBE SELECT * FROM stations").fetchall()]
        exprs = [f'"{c}" / {units.divisor(c)!r} AS "{units.column(c)}"' if units.divisor(c) != 1.0 else f'"{c}"'
                 for c in cols]
        con.register("road_order", pd.DataFrame({"road_id": result.roads.table["road_id"],
                                                 "_order": np.arange(len(result.roads.table))}))
        write_parquet_from(con.sql(f"SELECT {', '.join(exprs)} FROM stations p "
                                   f"JOIN road_order USING (road_id) ORDER BY _order, chainage_m"), path)


CURVE_CONTRACT = ["road_id", "curve_no", "kind", "pvc_m", "pvi_m", "pvt_m", "pvi_elev_m", "g1_pct", "g2_pct",
                  "a_pct", "length_m", "k", "fit_rmse_m", "sight_available_m", "ssd_required_m", "speed_kmh",
                  "deficient"]
CURVE_EXTRA = ["judged", "supported_speed_kmh", "k_required", "k_below_table", "sight_increasing_m",
               "sight_decreasing_m", "sight_formula_m", "sight_limited_by", "turn_m", "turn_elev_m", "verdict",
               "p_deficient", "confidence", "to_settle", "sight_sd_m", "k_sd", "a_sd_pct", "length_sd_m",
               "significance", "noise_sd_m", "noise_rho", "resolution_m", "fit_confidence", "flags"]
DEFICIENCY_CONTRACT = ["rank", "road_id", "curve_no", "kind", "direction", "from_m", "to_m", "speed_kmh",
                       "supported_speed_kmh", "ssd_required_m", "sight_available_m", "shortfall_m", "k",
                       "k_required", "aadt", "priority_score"]
DEFICIENCY_EXTRA = ["severity", "hidden_hazard", "hazard_chainage_m", "hazard_detail", "hidden_from_m",
                    "hidden_to_m", "treatment_hint", "speed_gap_kmh", "stretch_length_m", "road_name", "road_class",
                    "speed_basis", "a_pct", "curve_length_m", "pvi_m", "verdict", "p_deficient", "confidence",
                    "to_settle", "limit_kind", "f_shortfall", "f_speed", "f_exposure"]

# what each column means, for the spreadsheet's header notes and the method sheet
COLUMN_NOTES = {
    "road_id": "road identifier from the roads file",
    "curve_no": "vertical curve number along the road, from its first vertex",
    "kind": "crest (grade decreases) or sag (grade increases)",
    "pvc_m": "chainage of the start of the curve (m from the road's first vertex)",
    "pvi_m": "chainage of the point of vertical intersection (m)",
    "pvt_m": "chainage of the end of the curve (m)",
    "pvi_elev_m": "elevation of the PVI (m)",
    "g1_pct": "grade entering the curve, in the direction of increasing chainage (%)",
    "g2_pct": "grade leaving the curve (%)",
    "a_pct": "algebraic difference of grades A = |g2 - g1| (%)",
    "length_m": "horizontal length of the curve L (m)",
    "k": "rate of vertical curvature K = L / A (m per %)",
    "fit_rmse_m": "root-mean-square misfit of the fitted curve to the ground profile (m)",
    "sight_available_m": "shortest sight distance this curve allows a driver, either direction (m)",
    "ssd_required_m": "stopping sight distance required at the road's speed by the criteria set (m)",
    "speed_kmh": "speed the road is judged at (km/h)",
    "judged": "false where the curve's zone is mostly without usable ground data: no verdict given",
    "supported_speed_kmh": "highest speed whose SSD the available sight distance meets (km/h)",
    "k_required": "K the criteria set tabulates for the road's speed (m per %)",
    "k_below_table": "true where K is below the table value (a short curve may still give enough sight)",
    "sight_increasing_m": "shortest sight distance travelling with increasing chainage (m)",
    "sight_decreasing_m": "shortest sight distance travelling with decreasing chainage (m)",
    "sight_formula_m": "sight distance from the closed-form AASHTO expression for this A and L (m)",
    "sight_limited_by": "whether this curve limits any driver's sight within the look-ahead",
    "turn_m": "chainage of the high (crest) or low (sag) point where it lies on the curve (m)",
    "turn_elev_m": "elevation of the high or low point (m)",
    "deficient": "true only where the verdict is 'deficient'",
    "verdict": "deficient, adequate, or undetermined at this data quality (the probability is between the "
               "decision thresholds, the grade change is not clear in the data, or the curve lacks ground data)",
    "p_deficient": "probability that the sight distance over the curve is below the required SSD, from its "
                   "standard deviation (0-1)",
    "confidence": "high: the verdict's probability is beyond the high threshold, the fit clean and the grade "
                  "change clear; medium: decided but less sure; low: undetermined, or the fit is poor",
    "to_settle": "what would settle an undetermined verdict",
    "sight_sd_m": "standard deviation of the sight distance over the curve, from the fit's covariance (m)",
    "k_sd": "standard deviation of K (m per %)",
    "a_sd_pct": "standard deviation of A (%)",
    "length_sd_m": "standard deviation of L, including what the data cannot resolve (m)",
    "significance": "A divided by its standard deviation: how clearly the data show the grade change",
    "noise_sd_m": "spread of the ground profile about the fitted curve (robust, m)",
    "noise_rho": "correlation of that misfit from one station to the next (0-0.95)",
    "resolution_m": "shortest feature the ground data resolve along the road (m)",
    "ground_spacing_m": "the ground data's own spacing on the road: DEM cell size or median ground-point spacing (m)",
    "fit_confidence": "how well the curve fits the ground data alone: high, medium or low (see flags)",
    "flags": "why the fit's confidence is not high",
    "rank": "1 = first to fix",
    "direction": "direction of travel: increasing or decreasing chainage",
    "from_m": "start of the deficient stretch: driver positions lacking SSD (m)",
    "to_m": "end of the deficient stretch (m)",
    "shortfall_m": "required SSD minus available sight distance (m)",
    "aadt": "annual average daily traffic (vehicles/day)",
    "priority_score": "higher first (0-100, plus 100 x hazard weight where the crest hides a hazard); formula "
                      "in the Method sheet",
    "severity": "minor / moderate / severe by the speed gap",
    "speed_gap_kmh": "road speed minus supported speed (km/h)",
    "stretch_length_m": "length of the deficient stretch (m)",
    "road_name": "road name",
    "road_class": "road class",
    "speed_basis": "where the judged speed comes from",
    "curve_length_m": "length of the curve (m)",
    "limit_kind": "what limits sight: line of sight (crest) or headlight (sag)",
    "f_shortfall": "priority factor: shortfall / required SSD (0-1)",
    "f_speed": "priority factor: speed gap / 50 km/h (0-1)",
    "f_exposure": "priority factor: ln(1 + AADT) / ln(1 + reference AADT) (0-1)",
    "hidden_hazard": "what the crest hides from a driver at the required SSD: none, horizontal curve, junction or both",
    "hazard_chainage_m": "chainage of the first hidden hazard a driver meets (m)",
    "hazard_detail": "the hidden hazards and where they are",
    "hidden_from_m": "start of the road surface hidden beyond the crest at the required SSD (m)",
    "hidden_to_m": "end of the hidden road surface (m)",
    "treatment_hint": "first thought on treatment (TRB SR 214 3R guidance); for the engineer to decide",
    "hcurve_no": "horizontal curve number along the road",
    "start_m": "chainage where the horizontal curve begins (m)",
    "end_m": "chainage where the horizontal curve ends (m)",
    "radius_m": "radius of the least-squares circle through the curve (m)",
    "deflection_deg": "change of heading through the curve (degrees)",
    "r_min_m": "minimum radius for the speed: V^2 / (127 (e + f)) (m)",
    "below_min_radius": "true where the radius is below the minimum for the speed",
    "hso_m": "lateral clearance from the inside lane's centre needed for the required SSD (m), to verify in the field",
    "hso_valid": "false where the required SSD is longer than the curve (the HSO formula then overstates)",
    "v85_kmh": "predicted 85th-percentile car speed on the curve (FHWA-RD-99-171) (km/h)",
    "status": "evaluated, or skipped with a reason",
    "reason": "why the road was skipped",
    "length_m_road": "road length (m)",
}


def priority_formula(cfg) -> str:
    """The priority score's formula with the run's weights, written once: the inventory SQL
    computes exactly this (``sql/inventory.sql``), and the report, the workbook's Method sheet and
    the header note of ``priority_score`` all show this text."""
    w, h = cfg["inventory.priority_weights"], cfg["inventory.hazard_weight"]
    return (f"priority_score = 100 * {h:g} * hidden + 100 * ({w['shortfall']:g} * f_shortfall + {w['speed']:g} * "
            f"f_speed + {w['exposure']:g} * f_exposure) / {sum(w.values()):g}")


def priority_terms(cfg) -> str:
    return ("hidden = 1 where the crest hides a hazard (hidden_hazard not 'none'), else 0; f_shortfall = shortfall / "
            "required SSD; f_speed = (speed judged at - supported speed) / 50 km/h; f_exposure = ln(1 + AADT) / "
            f"ln(1 + {cfg['inventory.aadt_ref']:g}), 0 where AADT is unknown; each factor at most 1")


def column_note(col: str, units=None) -> str | None:
    """What a column holds, in the units it is written in."""
    if units is not None and units.us:
        internal = col[:-3] + "_m" if col.endswith("_ft") else col[:-4] + "_kmh" if col.endswith("_mph") else col
        note = COLUMN_NOTES.get(internal)
        if note:
            note = note.replace("(m)", f"({units.length_label})").replace("(km/h)", "(mph)").replace(
                "m per %", f"{units.length_label} per %").replace("km/h", "mph")
        return note
    return COLUMN_NOTES.get(col)


def _round(frame: pd.DataFrame) -> pd.DataFrame:
    """Round for reading: metres to the millimetre, grades to 1e-4 %, K to 0.01, speeds and
    scores to 0.1."""
    out = frame.copy()
    for col in out.columns:
        if not pd.api.types.is_float_dtype(out[col]):
            continue
        if col.endswith("_pct"):
            out[col] = out[col].round(4)
        elif col in ("k", "k_required"):
            out[col] = out[col].round(2)
        elif col.endswith("_kmh") or col == "priority_score":
            out[col] = out[col].round(1)
        elif col.startswith("f_"):
            out[col] = out[col].round(3)
        elif col.endswith(("_m", "_ft")):
            out[col] = out[col].round(3)
        elif col.endswith("_mph"):
            out[col] = out[col].round(1)
    return out


def curves_table(evaluation_curves: pd.DataFrame) -> pd.DataFrame:
    c = evaluation_curves.copy()
    if "k_below_table" not in c:
        c["k_below_table"] = c["k"] < c["k_required"]
    cols = CURVE_CONTRACT + [x for x in CURVE_EXTRA if x in c]
    return _round(c[cols])


def deficiencies_table(inventory: pd.DataFrame) -> pd.DataFrame:
    cols = DEFICIENCY_CONTRACT + [x for x in DEFICIENCY_EXTRA if x in inventory]
    out = _round(inventory[cols])
    out["curve_no"] = out["curve_no"].astype("Int64")
    return out


def data_quality_lines(dq: dict | None, units) -> list[tuple[str, str]]:
    """The data-quality statement (:mod:`pipeline.quality`) as workbook summary lines."""
    if not dq:
        return []
    L, E = units.length, units.length_label
    kind = "DEM cell" if dq["ground_kind"] == "dem" else "ground-point spacing"
    spacing = "unknown" if dq["spacing_m"] is None else f"{L(dq['spacing_m']):.1f} {E}"
    res = "unknown" if dq["resolution_m"] is None else f"{L(dq['resolution_m']):.0f} {E}"
    lines = [
        ("Ground data", f"{kind} {spacing}; shortest feature resolved {res}"),
        ("Vertical error of the ground", "not stated" if dq.get("vertical_error_m") is None else
         f"{L(dq['vertical_error_m']):.2f} {E}, {dq['vertical_error_basis']}"),
        ("Estimated ground error", "no curves" if dq["noise_sd_m"] is None else
         f"{L(dq['noise_sd_m']):.2f} {E} about the fit (station-to-station correlation {dq['noise_rho']:.2f})"),
        ("Judged with high confidence", "no curves" if dq["curves_high_pct"] is None else
         f"{dq['curves_high_pct']:.0f} % of curves; {dq['km_high_pct'] or 0:.0f} % of the road length has "
         f"every curve judged with high confidence"),
    ]
    lines += [("What this data cannot judge", t) for t in dq["cannot_judge"]]
    return lines


def write_xlsx(path: Path, sheets: dict[str, pd.DataFrame], method_lines: list[tuple[str, str]],
               summary_lines: list[tuple[str, str]], units=None, notes: dict[str, str] | None = None) -> None:
    """A workbook for the asset-management spreadsheet: a summary sheet, one sheet per table
    (frozen header row, column widths to fit, a note on each header cell saying what it holds
    and its unit) and a method sheet with the criteria set's source and the cautions."""
    import xlsxwriter

    wb = xlsxwriter.Workbook(str(path), {"nan_inf_to_errors": True, "strings_to_numbers": False})
    head = wb.add_format({"bold": True, "bg_color": "#DDE4EE", "border": 1, "text_wrap": True, "valign": "top"})
    bold = wb.add_format({"bold": True})
    wrap = wb.add_format({"text_wrap": True, "valign": "top"})
    title = wb.add_format({"bold": True, "font_size": 14})
    warn = wb.add_format({"bold": True, "font_color": "#9C2A00", "text_wrap": True})

    ws = wb.add_worksheet("Summary")
    ws.write(0, 0, "Stopping-sight-distance screening audit", title)
    row = 2
    for k, v in summary_lines:
        ws.write(row, 0, k, bold)
        ws.write(row, 1, v, warn if k == "Caution" else wrap)
        row += 1
    row += 1
    ws.set_column(0, 0, 28)
    ws.set_column(1, 1, 90)
    net = sheets.get("_summary")
    if net is not None:
        ws.write(row, 0, "By road class", bold)
        row += 1
        for j, col in enumerate(net.columns):
            ws.write(row, j, col, head)
        for i, rec in enumerate(net.itertuples(index=False), start=row + 1):
            for j, v in enumerate(rec):
                ws.write(i, j, _cell(v))
        ws.set_column(2, len(net.columns), 14)

    for name, frame in sheets.items():
        if name.startswith("_"):
            continue
        sh = wb.add_worksheet(name)
        for j, col in enumerate(frame.columns):
            sh.write(0, j, col, head)
            note = (notes or {}).get(col) or column_note(col, units)
            if note:
                sh.write_comment(0, j, note, {"x_scale": 2})
            values = frame[col]
            width = max([len(str(col))] + [len(str(_cell(v))) for v in values.head(200)]) + 2
            sh.set_column(j, j, min(max(width, 8), 60))
        for i, rec in enumerate(frame.itertuples(index=False), start=1):
            sh.write_row(i, 0, [_cell(v) for v in rec])
        sh.freeze_panes(1, 0)
        sh.autofilter(0, 0, max(len(frame), 1), max(len(frame.columns) - 1, 0))

    ms = wb.add_worksheet("Method")
    ms.set_column(0, 0, 28)
    ms.set_column(1, 1, 110)
    for i, (k, v) in enumerate(method_lines):
        ms.write(i, 0, k, bold)
        ms.write(i, 1, v, warn if k == "Caution" else wrap)
    wb.close()


def _cell(v):
    if v is None or (isinstance(v, float) and not np.isfinite(v)) or v is pd.NA:
        return ""
    if isinstance(v, (np.bool_, bool)):
        return bool(v)
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, np.floating):
        return float(v)
    return v if isinstance(v, (int, float, str)) else str(v)


def write_gpkg(path: Path, result, curves: pd.DataFrame, deficiencies: pd.DataFrame,
               hcurves: pd.DataFrame, units=None) -> None:
    """Layers ``roads``, ``curves`` (PVC-PVT lines), ``deficiencies`` (the deficient
    stretches, cut from the centreline by chainage and drawn half a station beyond their end
    stations) and ``horizontal_curves``, all in the roads' CRS."""
    import geopandas as gpd
    import shapely

    from ..profile.stations import Polyline

    roads = result.roads
    t = roads.table.set_index("road_id", drop=False)
    crs = roads.source_crs
    step = result.step_m
    conv = (lambda f: _round(units.table(f))) if units is not None else (lambda f: f)
    road_attrs = result.road_table()
    gpd.GeoDataFrame(conv(road_attrs), geometry=list(t["geometry_src"].reindex(road_attrs["road_id"])), crs=crs) \
        .to_file(path, layer="roads", driver="GPKG", engine="pyogrio")

    back = {k: roads.to_source(k) if roads.work_crs[k] is not crs else None for k in roads.work_crs}
    polylines: dict[str, Polyline] = {}

    def cut(frame: pd.DataFrame, a_col: str, b_col: str, pad: float):
        """Pieces of the working-CRS centrelines by chainage, back in the roads' CRS."""
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

    for layer, frame, geom in (("curves", curves, cut(curves, "pvc_m", "pvt_m", 0.0)),
                               ("deficiencies", deficiencies, cut(deficiencies, "from_m", "to_m", step / 2)),
                               ("horizontal_curves", hcurves, cut(hcurves, "start_m", "end_m", 0.0))):
        gpd.GeoDataFrame(conv(frame), geometry=geom, crs=crs).to_file(path, layer=layer, driver="GPKG",
                                                                    engine="pyogrio")


def method_lines(result, cfg) -> list[tuple[str, str]]:
    c = result.criteria.params
    bands = cfg["inventory.severity_bands_kmh"]
    return [
        ("Caution", CAUTION_TEXT),
        ("Criteria set", f"{c['name']}: {c['title']}"),
        ("Source", str(c["source"])),
        ("Edition", str(c["edition"])),
        ("Source confidence", str(c["source_marks"])),
        ("Heights", f"eye {c['eye_height']}, object {c['object_height']}, headlight {c['headlight_height']} "
                    f"({'m' if c['units'] == 'metric' else 'ft'}); beam {c['beam_angle_deg']} degrees up"),
        ("Braking", f"reaction time {c['reaction_time_s']} s, deceleration {c['deceleration']} "
                    f"{'m/s2' if c['units'] == 'metric' else 'ft/s2'}"),
        ("Required SSD", "design SSD of the criteria table at a tabulated speed; between rows the set's formula "
                         "rounded up to its step" + (" on the grade of each station" if cfg["criteria.grade_adjusted"]
                                                     else " (level road, as the K tables assume)")),
        ("Profile", "ground elevation every " + f"{cfg['profile.step_m']:g} m along each centreline"),
        ("Alignment", "tangents and symmetric parabolic curves recovered from the profile: optimal "
                      "segmentation (Jackson et al. 2005; Killick et al. 2012), model selection by the Bayesian "
                      "information criterion (Schwarz 1978), joint nonlinear least squares"),
        ("Sight distance", "on the recovered alignment, both directions: line of sight from eye to object over "
                           "crests, headlight reach on sags (AASHTO Green Book ch. 3); checked against the "
                           "closed-form expressions"),
        ("Deficient", "a curve whose available sight distance is below the required SSD in either direction; "
                      "K below the table is reported separately (k_below_table)"),
        ("Severity", f"speed gap below {bands[0]:g} km/h minor, {bands[0]:g}-{bands[1]:g} moderate, "
                     f"over {bands[1]:g} severe"),
        ("Priority score", f"{priority_formula(cfg)}; {priority_terms(cfg)}"),
    ]


CAUTION_TEXT = ("Screening results only. Every finding must be confirmed by field survey and by a licensed engineer "
                "before any decision; local design codes and agency policy govern over the published criteria "
                "used here.")


def _failure(what: str, exc: BaseException) -> dict:
    return {"output": what, "error": f"{type(exc).__name__}: {' '.join(str(exc).split())[:200]}"}


def write_outputs(folder: Path, result, summary: dict, cfg, pool=None) -> list[dict]:
    """Every output file of the run, into ``folder``, in the run's units. With a process
    ``pool``, the report's figures are drawn there while the tables are written here.

    The data outputs (CSV, workbook, GeoPackage, Parquet) are written first and a fault in them
    stops the run. The report, its figures and the PDF come after: a fault there is caught and
    returned (``[{"output", "error"}]``, recorded in ``run.json``), the output at fault is left
    out rather than left half-written, and one curve's figure failing gives a placeholder on
    its page instead of losing the report."""
    from .report import build_report, curve_png, network_map, png_data_uri, report_pages, write_profiles_pdf
    from ..core.units import OutputUnits

    failures: list[dict] = []
    units = OutputUnits(cfg["output.units"], cfg["output.us_foot"])
    try:
        pages = report_pages(result, cfg, units)
    except Exception as exc:  # the report is lost, the data are not
        pages = None
        failures.append(_failure("report.html", exc))
    # drawing in the pool pays when its processes are already running or the pages are many
    warm = result.chunks.get("computed", 0) > 1
    use_pool = pool is not None and pages is not None and (warm or len(pages) >= 25)
    futures = [pool.submit(curve_png, p["spec"]) for p in pages] if use_pool else None
    ev = result.evaluation
    curves = curves_table(ev.curves)
    defs = deficiencies_table(ev.inventory)
    hcurves = _round(result.hcurves)
    roads = result.road_table()
    notes = result.data_notes()
    out = {name: _round(units.table(frame)) for name, frame in
           (("curves", curves), ("deficiencies", defs), ("hcurves", hcurves), ("roads", roads), ("notes", notes),
            ("summary", ev.summary))}
    write_profiles_from_work(folder / "profiles.parquet", result, units)
    out["curves"].to_csv(folder / "curves.csv", index=False)
    out["deficiencies"].to_csv(folder / "deficiencies.csv", index=False)
    out["hcurves"].to_csv(folder / "horizontal_curves.csv", index=False)
    out["roads"].to_csv(folder / "roads.csv", index=False)
    out["notes"].to_csv(folder / "data_notes.csv", index=False)
    r = summary["roads"]
    summary_lines = [
        ("Caution", CAUTION_TEXT),
        ("Criteria set", f"{result.criteria.params['name']} ({result.criteria.params['title']})"),
        ("Units", f"lengths {units.length_label}, speeds {units.speed_label}, K in {units.length_label} per %"),
        ("Roads", f"{r['in']} in, {r['evaluated']} evaluated, {r['skipped']} skipped (see the Roads sheet)"),
        ("Curves", f"{len(curves)} found, {int(curves['deficient'].sum())} deficient, "
                   f"{int((curves['verdict'] == 'undetermined').sum())} undetermined at this data quality"),
        ("Deficient stretches", f"{int((defs['verdict'] == 'deficient').sum())} (ranked in the Deficiencies sheet; "
                                f"rank 1 first to fix), then {int((defs['verdict'] == 'undetermined').sum())} "
                                f"stretch(es) of undetermined curves"),
    ] + data_quality_lines(summary.get("data_quality"), units) + [
        ("Run", f"sightaudit {summary['version']}, {summary['started_utc']}"),
    ]
    method = method_lines(result, cfg)
    write_xlsx(folder / "deficiencies.xlsx",
               {"_summary": out["summary"], "Deficiencies": out["deficiencies"], "Curves": out["curves"],
                "Horizontal curves": out["hcurves"], "Roads": out["roads"], "Data notes": out["notes"]},
               method, summary_lines, units,
               notes={"priority_score": f"higher first: {priority_formula(cfg)}; {priority_terms(cfg)}"})
    write_gpkg(folder / "audit.gpkg", result, curves, defs, hcurves, units)

    # the extra outputs: a fault here loses that output only
    if pages is not None:
        try:
            map_png = png_data_uri(network_map(result, ev.inventory, units))
        except Exception as exc:
            map_png = ""  # a placeholder in the report
            failures.append(_failure("report.html overview map", exc))
        pngs = []
        for i, page in enumerate(pages):
            try:
                pngs.append(futures[i].result() if futures is not None else curve_png(page["spec"]))
            except Exception as exc:
                pngs.append(None)  # a placeholder on that page
                failures.append(_failure(f"report.html figure of road {page['road_id']} curve {page['curve_no']}",
                                         exc))
        try:
            html_text = build_report(result, summary, cfg, units, CAUTION_TEXT, method, pages, pngs, map_png)
            (folder / "report.html").write_text(html_text, encoding="utf-8")
        except Exception as exc:
            (folder / "report.html").unlink(missing_ok=True)
            failures.append(_failure("report.html", exc))
    if cfg["output.profiles_pdf"]:
        try:
            write_profiles_pdf(folder / "profiles.pdf", result, units)
        except Exception as exc:
            (folder / "profiles.pdf").unlink(missing_ok=True)
            failures.append(_failure("profiles.pdf", exc))
    return failures
