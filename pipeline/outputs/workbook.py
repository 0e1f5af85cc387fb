"""The workbook ``deficiencies.xlsx``, for the asset-management spreadsheet.

A summary sheet, one sheet per table (frozen header row, column widths to fit, a
note on each header cell saying what it holds and its unit) and a method sheet
with the criteria set's source and the cautions. xlsxwriter is imported only
when a workbook is written.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from .method import CAUTION_TEXT, data_quality_facts
from .tables import column_note


# the table of pipeline.core.tables each data sheet holds (its header notes come from there)
SHEET_TABLES = {"Deficiencies": "deficiencies", "Curves": "curves", "Horizontal curves": "horizontal_curves",
                "Roads": "roads", "Data notes": "data_notes"}


def data_quality_lines(dq: dict | None, units) -> list[tuple[str, str]]:
    """The data-quality statement as workbook summary lines.

    Parameters
    ----------
    dq : dict or None
        The run's data-quality statement (:func:`pipeline.evaluate.quality.data_quality`).
    units : OutputUnits
        The run's output units.

    Returns
    -------
    list of (str, str)
        Ground spacing and resolution, vertical error, estimated ground error,
        share judged with high confidence, then what the data cannot judge; empty
        without a statement.
    """
    if not dq:
        return []
    lines = [(label[0].upper() + label[1:], text) for label, text in data_quality_facts(dq, units)]
    lines += [("What this data cannot judge", units.text(t)) for t in dq["cannot_judge"]]
    return lines


def summary_sheet_lines(result, summary: dict, units, curves: pd.DataFrame,
                        defs: pd.DataFrame) -> list[tuple[str, str]]:
    """The workbook's Summary sheet as (heading, text) lines.

    Parameters
    ----------
    result : NetworkResult
        The run's result (its criteria set).
    summary : dict
        The run summary (``roads``, ``data_quality``, ``version``, ``started_utc``).
    units : OutputUnits
        The run's output units.
    curves : pandas.DataFrame
        The curve table (:func:`pipeline.outputs.tables.curves_table`).
    defs : pandas.DataFrame
        The deficiency table (:func:`pipeline.outputs.tables.deficiencies_table`).

    Returns
    -------
    list of (str, str)
        Caution, criteria set, units, the counts of roads, curves and stretches,
        the data quality and the run.
    """
    r = summary["roads"]
    return [
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


def write_xlsx(path: Path, sheets: dict[str, pd.DataFrame], method_lines: list[tuple[str, str]],
               summary_lines: list[tuple[str, str]], units=None, notes: dict[str, str] | None = None) -> None:
    """Write the workbook.

    Parameters
    ----------
    path : pathlib.Path
        The ``.xlsx`` file to write.
    sheets : dict of str to pandas.DataFrame
        One sheet per table, in order; a name starting with ``_`` is not a sheet
        (``_summary``, the table by road class, goes on the Summary sheet).
    method_lines : list of (str, str)
        The Method sheet (:func:`pipeline.outputs.method.method_lines`).
    summary_lines : list of (str, str)
        The Summary sheet's lines (:func:`summary_sheet_lines`).
    units : OutputUnits, optional
        The run's output units, for the header notes.
    notes : dict of str to str, optional
        Header notes that replace those of :func:`pipeline.outputs.tables.column_note`.

    Returns
    -------
    None
    """
    import xlsxwriter

    wb = xlsxwriter.Workbook(str(path), {"nan_inf_to_errors": True, "strings_to_numbers": False})
    fmt = _formats(wb)
    _summary_sheet(wb, fmt, summary_lines, sheets.get("_summary"))
    for name, frame in sheets.items():
        if not name.startswith("_"):
            _table_sheet(wb, fmt, name, frame, units, notes)
    _method_sheet(wb, fmt, method_lines)
    wb.close()


def _formats(wb) -> dict:
    return {
        "head": wb.add_format({"bold": True, "bg_color": "#DDE4EE", "border": 1, "text_wrap": True,
                               "valign": "top"}),
        "bold": wb.add_format({"bold": True}),
        "wrap": wb.add_format({"text_wrap": True, "valign": "top"}),
        "title": wb.add_format({"bold": True, "font_size": 14}),
        "warn": wb.add_format({"bold": True, "font_color": "#9C2A00", "text_wrap": True}),
    }


def _summary_sheet(wb, fmt: dict, lines: list[tuple[str, str]], net: pd.DataFrame | None) -> None:
    """The Summary sheet: title, the summary lines, then the table by road class."""
    ws = wb.add_worksheet("Summary")
    ws.write(0, 0, "Stopping-sight-distance screening audit", fmt["title"])
    row = 2
    for k, v in lines:
        ws.write(row, 0, k, fmt["bold"])
        ws.write(row, 1, v, fmt["warn"] if k == "Caution" else fmt["wrap"])
        row += 1
    row += 1
    ws.set_column(0, 0, 28)
    ws.set_column(1, 1, 90)
    if net is not None:
        ws.write(row, 0, "By road class", fmt["bold"])
        row += 1
        for j, col in enumerate(net.columns):
            ws.write(row, j, col, fmt["head"])
        for i, rec in enumerate(net.itertuples(index=False), start=row + 1):
            for j, v in enumerate(rec):
                ws.write(i, j, _cell(v))
        ws.set_column(2, len(net.columns), 14)


def _table_sheet(wb, fmt: dict, name: str, frame: pd.DataFrame, units, notes: dict[str, str] | None) -> None:
    """One table on its own sheet: noted header, fitted widths, frozen header, filter."""
    sh = wb.add_worksheet(name)
    for j, col in enumerate(frame.columns):
        sh.write(0, j, col, fmt["head"])
        note = (notes or {}).get(col) or column_note(col, units, SHEET_TABLES.get(name))
        if note:
            sh.write_comment(0, j, note, {"x_scale": 2})
        values = frame[col]
        width = max([len(str(col))] + [len(str(_cell(v))) for v in values.head(200)]) + 2
        sh.set_column(j, j, min(max(width, 8), 60))
    for i, rec in enumerate(frame.itertuples(index=False), start=1):
        sh.write_row(i, 0, [_cell(v) for v in rec])
    sh.freeze_panes(1, 0)
    sh.autofilter(0, 0, max(len(frame), 1), max(len(frame.columns) - 1, 0))


def _method_sheet(wb, fmt: dict, lines: list[tuple[str, str]]) -> None:
    ms = wb.add_worksheet("Method")
    ms.set_column(0, 0, 28)
    ms.set_column(1, 1, 110)
    for i, (k, v) in enumerate(lines):
        ms.write(i, 0, k, fmt["bold"])
        ms.write(i, 1, v, fmt["warn"] if k == "Caution" else fmt["wrap"])


def _cell(v):
    """A value as the workbook takes it: missing as empty, numpy scalars as Python ones."""
    if v is None or (isinstance(v, float) and not np.isfinite(v)) or v is pd.NA:
        return ""
    if isinstance(v, (np.bool_, bool)):
        return bool(v)
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, np.floating):
        return float(v)
    return v if isinstance(v, (int, float, str)) else str(v)
