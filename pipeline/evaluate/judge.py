"""Judge curves and stations against a criteria set, and build the ranked inventory.

The rules live in SQL (``sql/criteria_macros.sql``, ``sql/evaluate.sql``,
``sql/inventory.sql``, ``sql/roadside.sql``, ``sql/summary.sql``), run by an in-process DuckDB over the
per-road results; this module only assembles the input tables and returns the
results as DataFrames.
"""

from __future__ import annotations

from dataclasses import dataclass

import duckdb
import pandas as pd

from ..core.config import Config
from ..core.sqlrun import parquet_view, sql_text
from .criteria import CriteriaSet
from .formulas import register_formulas


@dataclass
class Evaluation:
    """What the SQL rules give.

    Parameters
    ----------
    curves : DataFrame
        Every curve with its verdict.
    inventory : DataFrame
        Ranked deficient stretches.
    summary : DataFrame
        Network summary by road class.
    """
    curves: pd.DataFrame      # every curve with its verdict
    inventory: pd.DataFrame   # ranked deficient stretches
    summary: pd.DataFrame     # network summary by road class


def params_table(cfg: Config) -> pd.DataFrame:
    """The run settings the SQL rules read, as a one-row table.

    Parameters
    ----------
    cfg : Config
        Run settings (``[inventory]``, ``[confidence]``, ``criteria.grade_adjusted``,
        ``profile.step_m``).

    Returns
    -------
    DataFrame
        One row: severity bands and reconstruction gap (km/h), weights, AADT references
        (vehicles/day), probabilities (fraction), significances (standard deviations), lengths
        (m).
    """
    bands = cfg["inventory.severity_bands_kmh"]
    w = cfg["inventory.priority_weights"]
    return pd.DataFrame([{
        "grade_adjusted": bool(cfg["criteria.grade_adjusted"]),
        "step_m": float(cfg["profile.step_m"]),
        "band_minor_kmh": float(bands[0]), "band_severe_kmh": float(bands[1]),
        "w_shortfall": float(w["shortfall"]), "w_speed": float(w["speed"]), "w_exposure": float(w["exposure"]),
        "aadt_ref": float(cfg["inventory.aadt_ref"]),
        "hazard_weight": float(cfg["inventory.hazard_weight"]),
        "recon_gap_kmh": float(cfg["inventory.reconstruction_gap_kmh"]),
        "recon_aadt": float(cfg["inventory.reconstruction_aadt"]),
        "p_verdict": float(cfg["confidence.p_verdict"]),
        "p_adequate": float(cfg["confidence.p_adequate"]),
        "p_high": float(cfg["confidence.p_high"]),
        "min_significance": float(cfg["confidence.min_significance"]),
        "high_significance": float(cfg["confidence.high_significance"]),
        "fine_resolution_m": float(cfg["confidence.fine_resolution_m"]),
        "max_cell_for_verdict_m": float(cfg["confidence.max_cell_for_verdict_m"]),
    }])


def evaluate(roads: pd.DataFrame, profiles, curves: pd.DataFrame, keypoints, hazards: pd.DataFrame,
             cset: CriteriaSet, cfg: Config, hcurves=None, clearances=None) -> Evaluation:
    """Run the SQL rules over the per-road results.

    Parameters
    ----------
    roads, curves, hazards : DataFrame
        Per-road tables (see ``sql/evaluate.sql`` for the columns each needs; m, km/h).
    profiles, keypoints : DataFrame or list of str
        DataFrames or lists of Parquet files, which DuckDB reads as it goes without loading
        them whole.
    cset : CriteriaSet
        The criteria set judged against.
    cfg : Config
        Run settings (:func:`params_table`).
    hcurves, clearances : DataFrame or list of str, optional
        The horizontal curves and the 3D stage's clearances; given (with the 3D columns in
        ``profiles``), the roadside rows of ``sql/roadside.sql`` join the inventory.

    Returns
    -------
    Evaluation
        Curves with verdicts, the ranked inventory and the summary.
    """
    set_row = pd.DataFrame([cset.params | {"length_to_m": cset.length_to_m, "speed_to_kmh": cset.speed_to_kmh}])
    con = duckdb.connect()
    try:
        tables = {"roads": roads, "profiles": profiles, "keypoints": keypoints, "curves": curves,
                  "hazards": hazards, "cset": set_row,
                  "cspeeds": cset.table, "params": params_table(cfg)}
        roadside = hcurves is not None and clearances is not None
        if roadside:
            tables |= {"hcurves": hcurves, "clearances": clearances}
        for name, frame in tables.items():
            if isinstance(frame, (str, list, tuple)):
                parquet_view(con, name, frame)
            else:
                con.register(name, frame)
        register_formulas(con)
        for name in ("criteria_macros", "evaluate", "inventory"):
            con.sql(sql_text(name))
        roadside = roadside and "sight_3d_fwd_m" in {r[0] for r in con.sql("DESCRIBE profiles").fetchall()}
        if roadside:
            con.sql(sql_text("roadside"))
        curve_eval = con.sql("SELECT * FROM curve_eval ORDER BY road_id, curve_no").df()
        inventory = con.sql("SELECT * FROM inventory_all ORDER BY rank" if roadside else
                            "SELECT *, NULL::BIGINT AS hcurve_no, NULL::DOUBLE AS clear_area_m2, "
                            "NULL::DOUBLE AS clear_volume_m3 FROM inventory ORDER BY rank").df()
        summary = con.sql(sql_text("summary")).df()
    finally:
        con.close()
    return Evaluation(curves=_plain_text(curve_eval), inventory=_plain_text(inventory), summary=summary)


def _plain_text(frame: pd.DataFrame) -> pd.DataFrame:
    """Text columns as plain objects, whether or not a value is present (DuckDB gives an
    all-NULL text column another pandas dtype than one with values)."""
    for col in frame.columns:
        if pd.api.types.is_string_dtype(frame[col]) or frame[col].dtype == object:
            frame[col] = frame[col].astype(object).where(frame[col].notna(), None)
    return frame
