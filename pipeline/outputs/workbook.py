"""The workbook ``deficiencies.xlsx``, for the asset-management spreadsheet.

A summary sheet a manager can paste into a memo (the run's lines, a short account
in plain words, the five worst sites, the table by road class), one sheet per table
(frozen header row with a filter, column widths to fit, a note on each header cell
saying what it holds and its unit, a number format chosen by the column's unit, and
on the Deficiencies sheet rows shaded by severity) and a method sheet with the
criteria set's source and the cautions. Values are written as numbers at the precision
of the CSV tables; the display format rounds only what is shown. xlsxwriter is imported
only when a workbook is written.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from .method import CAUTION_TEXT, data_quality_facts
from .report_style import SEVERITY_COLOURS
from .tables import column_note


# severity shading in the report's colours (one hue, lightest to darkest), so the order reads
# without telling hues apart: (severity, fill, font colour)
SEVERITY_SHADES = tuple((s, SEVERITY_COLOURS[s], "#FFFFFF" if s == "severe" else "#000000")
                        for s in ("severe", "moderate", "minor"))
UNDETERMINED_FONT = "#6E6E6E"  # grey italics for rows whose verdict is undetermined

# the table of pipeline.core.tables each data sheet holds (its header notes come from there)
SHEET_TABLES = {"Deficiencies": "deficiencies", "Curves": "curves", "Horizontal curves": "horizontal_curves",
                "Roads": "roads", "Data notes": "data_notes"}


def number_format(column: str) -> str | None:
    """The display format of a column's numbers, chosen from its name (which carries its unit).

    The rule, first match wins: counts and ids (``rank``, ``curve_no``, ``hcurve_no``,
    ``aadt``) ``0``; K values (``k``, ``k_required``, ``k_sd``) ``0.0``; the score
    (``priority_score``) ``0.0``; probabilities and factors (``p_deficient``,
    ``noise_rho``, ``corr_al``, ``significance``, ``f_*``) ``0.00``; grades and
    percentages (``*_pct``) ``0.00``; speeds (``*_kmh``, ``*_mph``) ``0``; ground
    errors of a few centimetres (``fit_rmse_*``, ``noise_sd_*``) ``0.00``; chainages,
    lengths and distances (``*_m``, ``*_ft``) ``0.0``; network lengths in kilometres
    or miles (``km_*``, ``mi_*``, ``*_km_*``, ``*_mi_*``) ``0.00``; angles (``*_deg``)
    ``0.0``; anything else the spreadsheet's General format.

    Parameters
    ----------
    column : str
        The column's name as written (metric ``_m``/``_kmh`` or US ``_ft``/``_mph``).

    Returns
    -------
    str or None
        The Excel number format, or None for General.
    """
    if column in ("rank", "curve_no", "hcurve_no", "aadt"):
        return "0"
    if column in ("k", "k_required", "k_sd", "priority_score"):
        return "0.0"
    if column in ("p_deficient", "noise_rho", "corr_al", "significance") or column.startswith("f_") \
            or column.endswith("_pct"):
        return "0.00"
    if column.endswith(("_kmh", "_mph")):
        return "0"
    if column.startswith(("fit_rmse_", "noise_sd_")):
        return "0.00"
    if column.endswith(("_m", "_ft", "_deg")):
        return "0.0"
    if column.startswith(("km_", "mi_")) or "_km_" in column or "_mi_" in column \
            or column.endswith(("_km", "_mi")):
        return "0.00"
    return None


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


def brief_lines(sheets: dict[str, pd.DataFrame]) -> list[tuple[str, str]]:
    """The run told in plain words, for a manager to paste into a memo.

    Parameters
    ----------
    sheets : dict of str to pandas.DataFrame
        The workbook's tables as :func:`write_xlsx` takes them: ``Deficiencies``,
        ``Curves`` and ``Roads``, and ``_summary`` (the table by road class, whose
        ``network`` row gives the lengths) where there is one.

    Returns
    -------
    list of (str, str)
        ``In brief`` (roads and length audited, curves found, deficient and
        undetermined, deficient stretches and their length by severity), one line per
        worst site (:func:`worst_sites`) and the caution.
    """
    defs = sheets.get("Deficiencies", pd.DataFrame())
    curves = sheets.get("Curves", pd.DataFrame())
    net = _network_row(sheets)
    dist = "mi" if "mi_audited" in net else "km"
    n, done = int(net.get("roads_in", 0)), int(net.get("roads_evaluated", 0))
    text = [f"Audited: {_count(done, 'road')}, {float(net.get(f'{dist}_audited', 0.0)):.1f} {dist} in all"
            + (f"; {n - done} could not be (see the Roads sheet)." if n > done else ".")]
    if "verdict" in curves:
        text.append(f"{_count(len(curves), 'vertical curve')} found: {int((curves['verdict'] == 'deficient').sum())} "
                    f"deficient (too short a stopping sight distance for the speed), "
                    f"{int((curves['verdict'] == 'undetermined').sum())} undetermined at this data quality "
                    f"(a survey or finer ground data would settle them).")
    deficient = defs[defs["verdict"] == "deficient"] if "verdict" in defs else defs.iloc[0:0]
    by_sev = {s: float(net.get(f"deficient_{dist}_{s}", 0.0)) for s, _, _ in SEVERITY_SHADES}
    text.append(f"{_count(len(deficient), 'deficient stretch', 'es')}, {sum(by_sev.values()):.2f} {dist} in all: "
                + ", ".join(f"{by_sev[s]:.2f} {dist} {s}" for s, _, _ in SEVERITY_SHADES) + ".")
    sites = worst_sites(defs)
    if len(sites):
        text.append(f"The worst {_count(len(sites), 'site')}, first to fix first, follow.")
    lines = [("In brief", " ".join(text))]
    lines += [(f"Worst site, rank {int(r['rank'])}", _site_text(r)) for _, r in sites.iterrows()]
    return lines + [("Caution", CAUTION_TEXT)]


def worst_sites(defs: pd.DataFrame, n: int = 5) -> pd.DataFrame:
    """The worst deficient sites: one row per curve (its best-ranked direction), by rank.

    Parameters
    ----------
    defs : pandas.DataFrame
        The Deficiencies sheet (``rank``, ``road_id``, ``curve_no``, ``verdict``, ...).
    n : int, optional
        How many sites.

    Returns
    -------
    pandas.DataFrame
        At most ``n`` rows of ``defs`` whose verdict is deficient, rank 1 first.
    """
    if not len(defs) or not {"rank", "road_id", "curve_no"} <= set(defs.columns):
        return defs.iloc[0:0]
    d = defs[defs["verdict"] == "deficient"] if "verdict" in defs else defs
    return d.sort_values("rank").drop_duplicates(["road_id", "curve_no"]).head(n)


def _network_row(sheets: dict[str, pd.DataFrame]) -> dict:
    """The ``network`` row of the table by road class, else the figures counted from the sheets."""
    net = sheets.get("_summary")
    if net is not None and "road_class" in net and (net["road_class"] == "network").any():
        return net[net["road_class"] == "network"].iloc[0].to_dict()
    defs, roads = sheets.get("Deficiencies", pd.DataFrame()), sheets.get("Roads", pd.DataFrame())
    unit, dist, per = ("ft", "mi", 5280.0) if "stretch_length_ft" in defs else ("m", "km", 1000.0)
    done = roads[roads["status"] != "skipped"] if "status" in roads else roads
    out = {"roads_in": len(roads), "roads_evaluated": len(done),
           f"{dist}_audited": float(done.get(f"length_{unit}", pd.Series(dtype=float)).sum()) / per}
    if {"verdict", "severity", f"stretch_length_{unit}"} <= set(defs.columns):
        d = defs[defs["verdict"] == "deficient"]
        for s, _, _ in SEVERITY_SHADES:
            out[f"deficient_{dist}_{s}"] = float(d.loc[d["severity"] == s, f"stretch_length_{unit}"].sum()) / per
    return out


def _count(n: int, word: str, plural: str = "s") -> str:
    return f"{n} {word}" + ("" if n == 1 else plural)


def _site_text(r: pd.Series) -> str:
    """One worst site in words: road and name, curve, what is hidden, shortfall, treatment hint."""
    unit = "ft" if "shortfall_ft" in r.index else "m"
    name = r.get("road_name")
    road = f"{r['road_id']} {name}" if isinstance(name, str) and name else str(r["road_id"])
    kind = f" ({r['kind']})" if isinstance(r.get("kind"), str) else ""
    hazard, detail = r.get("hidden_hazard"), r.get("hazard_detail")
    if not isinstance(hazard, str) or hazard == "none":
        hidden = "hides no junction or bend, only the road ahead"
    else:
        hidden = f"hides a {hazard}" + (f" ({detail})" if isinstance(detail, str) and detail else "")
    need = r.get(f"ssd_required_{unit}")
    short = f"sight distance {float(r[f'shortfall_{unit}']):.0f} {unit} short" \
        + (f" of the {float(need):.0f} {unit} required" if pd.notna(need) else "")
    hint = r.get("treatment_hint")
    cno, hno = r.get("curve_no"), r.get("hcurve_no")
    where = f"curve {int(cno)}" if pd.notna(cno) else (
        f"horizontal curve {int(hno)}" if pd.notna(hno) and hno else "roadside")  # roadside rows: 3D sight lines
    if r.get("kind") == "roadside":
        hidden = f"{r.get('limit_kind')} blocks the view of the road ahead"
    return f"{road}, {where}{kind}: {hidden}; {short}" \
        + (f"; {hint}" if isinstance(hint, str) and hint else "") + "."


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
        The Summary sheet's first lines (:func:`summary_sheet_lines`); the lines of
        :func:`brief_lines` follow them.
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
    _summary_sheet(wb, fmt, summary_lines + [("", "")] + brief_lines(sheets), sheets.get("_summary"))
    for name, frame in sheets.items():
        if not name.startswith("_"):
            sh = _table_sheet(wb, fmt, name, frame, units, notes)
            if name == "Deficiencies":
                _severity_shading(wb, sh, frame)
    _method_sheet(wb, fmt, method_lines)
    wb.close()


def _formats(wb) -> dict:
    """The cell formats: header, text, title, warning, and one per number format (``num:0.0``)."""
    fmt = {
        "head": wb.add_format({"bold": True, "bg_color": "#DDE4EE", "border": 1, "text_wrap": True,
                               "valign": "top"}),
        "bold": wb.add_format({"bold": True, "valign": "top"}),
        "wrap": wb.add_format({"text_wrap": True, "valign": "top"}),
        "title": wb.add_format({"bold": True, "font_size": 14}),
        "warn": wb.add_format({"bold": True, "font_color": "#9C2A00", "text_wrap": True, "valign": "top"}),
    }
    for code in ("0", "0.0", "0.00"):
        fmt[f"num:{code}"] = wb.add_format({"num_format": code})
    return fmt


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
            ws.write_column(row + 1, j, [_cell(v) for v in net[col]], _number_fmt(fmt, col, net[col]))
        ws.set_column(2, len(net.columns), 14)


def _table_sheet(wb, fmt: dict, name: str, frame: pd.DataFrame, units, notes: dict[str, str] | None):
    """One table on its own sheet (returned): noted header, formatted numbers, frozen header, filter."""
    sh = wb.add_worksheet(name)
    for j, col in enumerate(frame.columns):
        sh.write(0, j, col, fmt["head"])
        note = (notes or {}).get(col) or column_note(col, units, SHEET_TABLES.get(name))
        if note:
            sh.write_comment(0, j, note, {"x_scale": 2})
        values = [_cell(v) for v in frame[col]]
        sh.write_column(1, j, values, _number_fmt(fmt, col, frame[col]))
        width = max([len(str(col))] + [len(_shown(v, number_format(col))) for v in values[:200]]) + 2
        sh.set_column(j, j, min(max(width, 8), 60))
    sh.freeze_panes(1, 0)
    sh.autofilter(0, 0, max(len(frame), 1), max(len(frame.columns) - 1, 0))
    return sh


def _severity_shading(wb, sh, frame: pd.DataFrame) -> None:
    """Conditional formats (live when sorted or filtered): the severity cell shaded on every row,
    the whole row on rows not undetermined, undetermined rows in grey italics."""
    if "severity" not in frame or not len(frame):
        return
    last_row, last_col, sev = len(frame), len(frame.columns) - 1, frame.columns.get_loc("severity")
    sev_ref = f"${_col_letter(sev)}2"
    undetermined = f'${_col_letter(frame.columns.get_loc("verdict"))}2="undetermined"' \
        if "verdict" in frame else None
    shades = [(s, wb.add_format({"bg_color": fill, "font_color": font})) for s, fill, font in SEVERITY_SHADES]
    for s, f in shades:
        sh.conditional_format(1, sev, last_row, sev, {"type": "formula", "criteria": f'={sev_ref}="{s}"',
                                                      "format": f})
    if undetermined:
        grey = wb.add_format({"italic": True, "font_color": UNDETERMINED_FONT})
        sh.conditional_format(1, 0, last_row, last_col, {"type": "formula", "criteria": f"={undetermined}",
                                                         "format": grey})
    for s, f in shades:
        rule = f'{sev_ref}="{s}"'
        rule = f"=AND({rule},NOT({undetermined}))" if undetermined else f"={rule}"
        sh.conditional_format(1, 0, last_row, last_col, {"type": "formula", "criteria": rule, "format": f})


def _method_sheet(wb, fmt: dict, lines: list[tuple[str, str]]) -> None:
    ms = wb.add_worksheet("Method")
    ms.set_column(0, 0, 28)
    ms.set_column(1, 1, 110)
    for i, (k, v) in enumerate(lines):
        ms.write(i, 0, k, fmt["bold"])
        ms.write(i, 1, v, fmt["warn"] if k == "Caution" else fmt["wrap"])


def _number_fmt(fmt: dict, col: str, values: pd.Series):
    """The cell format of a numeric column (by :func:`number_format`), None for any other."""
    code = number_format(col)
    numeric = pd.api.types.is_numeric_dtype(values) and not pd.api.types.is_bool_dtype(values)
    return fmt[f"num:{code}"] if code and numeric else None


def _shown(v, code: str | None) -> str:
    """A value as its number format shows it (for the column width)."""
    if code and isinstance(v, (int, float)) and not isinstance(v, bool):
        return f"{v:.{len(code) - 2 if '.' in code else 0}f}"
    return str(v)


def _col_letter(j: int) -> str:
    """The spreadsheet letters of the 0-based column ``j`` (0 is A, 26 is AA)."""
    letters, j = "", j + 1
    while j:
        j, r = divmod(j - 1, 26)
        letters = chr(65 + r) + letters
    return letters


def _cell(v):
    """A value as the workbook takes it: missing as empty, numpy scalars as Python ones."""
    if v is None or (isinstance(v, (float, np.floating)) and not np.isfinite(v)) or v is pd.NA:
        return ""
    if isinstance(v, (np.bool_, bool)):
        return bool(v)
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, np.floating):
        return float(v)
    return v if isinstance(v, (int, float, str)) else str(v)
