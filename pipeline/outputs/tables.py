"""The audit's tables: what each holds, and the CSV and Parquet files.

The column contracts fix the order of the columns every run writes first
(``CURVE_CONTRACT``, ``DEFICIENCY_CONTRACT``); the columns a run may add after
them follow in the order of the ``_EXTRA`` lists. ``COLUMN_NOTES`` says what each
column holds; the workbook's header notes and the GeoPackage carry the same
columns, so one set of notes serves every output.
"""

from __future__ import annotations

from pathlib import Path

import duckdb
import numpy as np
import pandas as pd

from ..core.sqlrun import parquet_view, write_parquet_from


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


# the CSV files of the run, by the key of the table each holds
CSV_FILES = {"curves": "curves.csv", "deficiencies": "deficiencies.csv", "hcurves": "horizontal_curves.csv",
             "roads": "roads.csv", "notes": "data_notes.csv"}


def column_note(col: str, units=None) -> str | None:
    """What a column holds, in the units it is written in.

    Parameters
    ----------
    col : str
        Column name as written (``_ft`` and ``_mph`` names in US units).
    units : OutputUnits, optional
        The run's output units; without them the metric note is returned.

    Returns
    -------
    str or None
        The note from :data:`COLUMN_NOTES` with its units translated, or ``None``
        for a column without a note.
    """
    if units is not None and units.us:
        internal = col[:-3] + "_m" if col.endswith("_ft") else col[:-4] + "_kmh" if col.endswith("_mph") else col
        note = COLUMN_NOTES.get(internal)
        if note:
            note = note.replace("(m)", f"({units.length_label})").replace("(km/h)", "(mph)").replace(
                "m per %", f"{units.length_label} per %").replace("km/h", "mph")
        return note
    return COLUMN_NOTES.get(col)


def round_for_reading(frame: pd.DataFrame) -> pd.DataFrame:
    """Round a table's float columns for reading.

    Parameters
    ----------
    frame : pandas.DataFrame
        Any output table; columns are recognised by name.

    Returns
    -------
    pandas.DataFrame
        A copy with lengths (``_m``, ``_ft``) to the millimetre (three decimals),
        grades (``_pct``) to 1e-4 %, K to 0.01, speeds (``_kmh``, ``_mph``) and the
        priority score to 0.1, and the priority factors (``f_``) to 0.001.
    """
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
    """The vertical-curve table in contract order, rounded for reading.

    Parameters
    ----------
    evaluation_curves : pandas.DataFrame
        The evaluated curves (``Evaluation.curves``), internal metric units.

    Returns
    -------
    pandas.DataFrame
        :data:`CURVE_CONTRACT` columns, then those of :data:`CURVE_EXTRA` present;
        ``k_below_table`` (K below the criteria table's K) is added where missing.
    """
    c = evaluation_curves.copy()
    if "k_below_table" not in c:
        c["k_below_table"] = c["k"] < c["k_required"]
    cols = CURVE_CONTRACT + [x for x in CURVE_EXTRA if x in c]
    return round_for_reading(c[cols])


def deficiencies_table(inventory: pd.DataFrame) -> pd.DataFrame:
    """The ranked deficiency inventory in contract order, rounded for reading.

    Parameters
    ----------
    inventory : pandas.DataFrame
        The ranked deficient stretches (``Evaluation.inventory``), internal metric units.

    Returns
    -------
    pandas.DataFrame
        :data:`DEFICIENCY_CONTRACT` columns, then those of :data:`DEFICIENCY_EXTRA`
        present; ``curve_no`` as a nullable integer (a stretch no curve limits has none).
    """
    cols = DEFICIENCY_CONTRACT + [x for x in DEFICIENCY_EXTRA if x in inventory]
    out = round_for_reading(inventory[cols])
    out["curve_no"] = out["curve_no"].astype("Int64")
    return out


def write_tables(folder: Path, tables: dict[str, pd.DataFrame]) -> None:
    """Write the CSV tables of the run.

    Parameters
    ----------
    folder : pathlib.Path
        The (staging) output folder.
    tables : dict of str to pandas.DataFrame
        The tables in the run's units, keyed as in :data:`CSV_FILES`.

    Returns
    -------
    None
        One CSV per key of :data:`CSV_FILES`, without the index.
    """
    for key, name in CSV_FILES.items():
        tables[key].to_csv(folder / name, index=False)


def write_profiles_from_work(path: Path, result, units) -> None:
    """Write ``profiles.parquet`` straight from the run's chunk files.

    DuckDB streams the chunk files, so the network's stations are never all in
    memory.

    Parameters
    ----------
    path : pathlib.Path
        The Parquet file to write.
    result : NetworkResult
        The run's result; its work folder holds the per-chunk station profiles.
    units : OutputUnits
        The run's output units; length and speed columns are converted and renamed.

    Returns
    -------
    None
        Stations in road order, then by chainage.
    """
    with duckdb.connect() as con:
        parquet_view(con, "stations", result.work.files("profiles"))
        cols = [r[0] for r in con.sql("DESCRIBE SELECT * FROM stations").fetchall()]
        exprs = [f'"{c}" / {units.divisor(c)!r} AS "{units.column(c)}"' if units.divisor(c) != 1.0 else f'"{c}"'
                 for c in cols]
        con.register("road_order", pd.DataFrame({"road_id": result.roads.table["road_id"],
                                                 "_order": np.arange(len(result.roads.table))}))
        write_parquet_from(con.sql(f"SELECT {', '.join(exprs)} FROM stations p "
                                   f"JOIN road_order USING (road_id) ORDER BY _order, chainage_m"), path)
