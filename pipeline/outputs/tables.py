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
from ..core.tables import TABLES, column_names, meaning


# the columns every run writes first, in this order; the rest of each table follows in the order
# of pipeline.core.tables, where every column's type, unit and meaning is written once
CURVE_CONTRACT = column_names("curves")[:17]
CURVE_EXTRA = column_names("curves")[17:]
DEFICIENCY_CONTRACT = column_names("deficiencies")[:16]
DEFICIENCY_EXTRA = column_names("deficiencies")[16:]

# what each column means, whichever table it is in (for a column of a known table,
# pipeline.core.tables.meaning is more exact: roads' length_m is not a curve's)
COLUMN_NOTES = {c.name: c.meaning for name in reversed(list(TABLES)) for c in TABLES[name]}


# the CSV files of the run, by the key of the table each holds
CSV_FILES = {"curves": "curves.csv", "deficiencies": "deficiencies.csv", "hcurves": "horizontal_curves.csv",
             "roads": "roads.csv", "notes": "data_notes.csv"}


def column_note(col: str, units=None, table: str | None = None) -> str | None:
    """What a column holds, in the units it is written in.

    Parameters
    ----------
    col : str
        Column name as written (``_ft`` and ``_mph`` names in US units).
    units : OutputUnits, optional
        The run's output units; without them the metric note is returned.
    table : str, optional
        The table the column is in (a key of :data:`pipeline.core.tables.TABLES`); its own
        meaning is used where it has one.

    Returns
    -------
    str or None
        The meaning from :mod:`pipeline.core.tables` with its units translated, or ``None``
        for a column without one.
    """
    us = units is not None and units.us
    internal = (col[:-3] + "_m" if col.endswith("_ft") else col[:-4] + "_kmh" if col.endswith("_mph") else col) \
        if us else col
    note = (meaning(table, internal) if table else None) or COLUMN_NOTES.get(internal)
    if note and us:
        note = note.replace("(m)", f"({units.length_label})").replace("(km/h)", "(mph)").replace(
            "m per %", f"{units.length_label} per %").replace("km/h", "mph")
    return note


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
    """The vertical-curve table in contract order (rounded later, once, in the written units).

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
    return c[cols]


def deficiencies_table(inventory: pd.DataFrame) -> pd.DataFrame:
    """The ranked deficiency inventory in contract order (rounded later, once, in the written
    units).

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
    out = inventory[cols].copy()
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
