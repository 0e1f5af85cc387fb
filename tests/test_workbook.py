"""The workbook deficiencies.xlsx (issue on output quality, "Workbook"): numbers written as
numbers with a format chosen by their column's unit, severity shading on the Deficiencies
sheet, and a Summary sheet a manager can paste into a memo. Read back with openpyxl as the
reference reader; the CSV files (pandas) are the reference values."""

from __future__ import annotations

import numbers

import openpyxl
import pandas as pd
import pytest

from pipeline.outputs.workbook import number_format


def _expected_format(col: str) -> str:
    """The issue's format table, restated here (not imported) so the test checks the module."""
    if col in ("rank", "curve_no", "hcurve_no", "aadt"):
        return "0"
    if col in ("k", "k_required", "k_sd", "priority_score"):
        return "0.0"
    if col in ("p_deficient", "noise_rho", "corr_al", "significance") or col.startswith("f_"):
        return "0.00"
    if col.endswith("_pct"):
        return "0.00"
    if col.endswith(("_kmh", "_mph")):
        return "0"
    if col.startswith(("fit_rmse_", "noise_sd_")):  # centimetre ground errors: two decimals (this module's choice)
        return "0.00"
    if col.endswith(("_m", "_ft")):
        return "0.0"
    return "General"


def _sheet_columns(ws) -> dict[str, list]:
    header = [c.value for c in ws[1]]
    cols = {h: [] for h in header}
    for row in ws.iter_rows(min_row=2):
        for h, c in zip(header, row):
            cols[h].append(c)
    return cols


@pytest.mark.parametrize("sheet,csv", [("Deficiencies", "deficiencies.csv"), ("Curves", "curves.csv")])
def test_numbers_are_numbers_with_their_unit_format(demo_out, sheet, csv):
    """openpyxl as the reference reader, the CSV (pandas) as the reference values: every numeric
    value of the CSV is a number cell in the workbook (not text), equal to the CSV's (no rounding
    beyond the CSV's), carrying its column's format (chainage 0.0: from_m is '0.0')."""
    ws = openpyxl.load_workbook(demo_out / "deficiencies.xlsx")[sheet]
    ref = pd.read_csv(demo_out / csv)
    cells = _sheet_columns(ws)
    checked = 0
    for col in ref.columns:
        if not pd.api.types.is_numeric_dtype(ref[col]) or pd.api.types.is_bool_dtype(ref[col]):
            continue
        for value, cell in zip(ref[col], cells[col]):
            if pd.isna(value):
                assert cell.value is None, (col, cell.coordinate)
                continue
            assert cell.data_type == "n" and isinstance(cell.value, numbers.Number), (col, cell.coordinate)
            assert cell.value == pytest.approx(float(value), rel=1e-12, abs=1e-12), (col, cell.coordinate)
            assert cell.number_format == _expected_format(col), (col, cell.number_format)
            checked += 1
    assert checked > 100
    if sheet == "Deficiencies":
        assert {c.number_format for c in cells["from_m"]} == {"0.0"}
        assert {c.number_format for c in cells["speed_kmh"]} == {"0"}
        assert {c.number_format for c in cells["a_pct"]} == {"0.00"}


def test_number_format_rule():
    """The issue's table of formats (the requirement itself, no other source)."""
    expect = {"from_m": "0.0", "to_ft": "0.0", "g1_pct": "0.00", "k": "0.0", "k_required": "0.0", "k_sd": "0.0",
              "speed_kmh": "0", "speed_mph": "0", "priority_score": "0.0", "p_deficient": "0.00",
              "f_shortfall": "0.00", "noise_rho": "0.00", "corr_al": "0.00", "significance": "0.00", "rank": "0",
              "curve_no": "0", "hcurve_no": "0", "aadt": "0", "road_id": None, "severity": None}
    assert {c: number_format(c) for c in expect} == expect


def _luminance(argb: str) -> float:
    """Relative luminance of an sRGB colour (WCAG 2 definition) from openpyxl's 'FFRRGGBB'."""
    def lin(c):
        c /= 255
        return c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4
    r, g, b = (int(argb[-6:][i:i + 2], 16) for i in (0, 2, 4))
    return 0.2126 * lin(r) + 0.7152 * lin(g) + 0.0722 * lin(b)


def test_severity_shading_on_the_deficiencies_sheet(demo_out):
    """openpyxl as the reference reader (ws.conditional_formatting); luminance by the WCAG 2
    formula; the order severe darker than moderate darker than minor is common practice, no
    source. Formula rules on the severity column, so the shading follows a sort or a filter."""
    ws = openpyxl.load_workbook(demo_out / "deficiencies.xlsx")["Deficiencies"]
    header = [c.value for c in ws[1]]
    sev_col = openpyxl.utils.get_column_letter(header.index("severity") + 1)
    verdict_col = openpyxl.utils.get_column_letter(header.index("verdict") + 1)
    fills, italic = {}, False
    for cf in ws.conditional_formatting:
        for rule in cf.rules:
            assert rule.type == "expression"
            formula = " ".join(rule.formula)
            for s in ("severe", "moderate", "minor"):
                if f'${sev_col}2="{s}"' in formula and f"{sev_col}2:{sev_col}{ws.max_row}" == str(cf.sqref):
                    fills[s] = rule.dxf.fill.bgColor.rgb
            if f'${verdict_col}2="undetermined"' == formula:
                italic = bool(rule.dxf.font.i) and str(cf.sqref).startswith("A2:")
    assert set(fills) == {"severe", "moderate", "minor"}
    lum = {s: _luminance(c) for s, c in fills.items()}
    assert lum["severe"] < lum["moderate"] < lum["minor"]
    assert italic


def _summary_text(path) -> list[tuple]:
    ws = openpyxl.load_workbook(path)["Summary"]
    return [tuple(v for v in row if v is not None) for row in ws.iter_rows(values_only=True)]


def test_summary_sheet_for_a_memo(demo_out):
    """openpyxl as the reference reader, deficiencies.csv (pandas) as the reference counts: the
    deficient-stretch count and the rank-1 road are on the Summary sheet, with the caution and
    the length audited."""
    rows = _summary_text(demo_out / "deficiencies.xlsx")
    defs = pd.read_csv(demo_out / "deficiencies.csv")
    n = int((defs["verdict"] == "deficient").sum())
    stretch = [r[1] for r in rows if r and r[0] == "Deficient stretches"]
    assert stretch and stretch[0].startswith(f"{n} ")
    brief = [r[1] for r in rows if r and r[0] == "In brief"][0]
    assert f"{n} deficient stretch" in brief and " km in all" in brief and "undetermined" in brief
    top = defs.sort_values("rank").iloc[0]
    first = [r[1] for r in rows if r and r[0] == "Worst site, rank 1"][0]
    assert first.startswith(f"{top['road_id']} {top['road_name']}, curve {int(top['curve_no'])}")
    assert len([r for r in rows if r and str(r[0]).startswith("Worst site")]) == 5
    assert brief.endswith(" The five worst sites, in the order to treat them:")
    assert sum(1 for r in rows if r and r[0] == "Caution" and "licensed engineer" in r[1]) == 2


def test_worst_sites_sentence_in_plain_words():
    """The sentence before the worst sites, counts under ten in words (common style, no source)."""
    from pipeline.outputs.sites import number_word, worst_sites_heading

    assert [number_word(n) for n in (1, 5, 9, 10, 1200)] == ["one", "five", "nine", "10", "1,200"]
    assert worst_sites_heading(5) == "The five worst sites, in the order to treat them:"
    assert worst_sites_heading(1) == "The worst site:"
    assert worst_sites_heading(0) == ""


@pytest.fixture(scope="module")
def us_out(tmp_path_factory):
    """A US-customary run on the sample network, its speeds restated in mph."""
    import geopandas as gpd

    from pipeline.cli import main
    from pipeline.core.resources import sample_paths
    from pipeline.core.units import kmh_per_mph

    d = tmp_path_factory.mktemp("wb_us")
    p = sample_paths()
    roads = gpd.read_file(p["roads"], layer="roads")
    roads["speed_mph"] = roads.pop("speed_kmh") / kmh_per_mph()
    roads.to_file(d / "roads.gpkg", layer="roads")
    assert main(["run", "--roads", str(d / "roads.gpkg"), "--ground", str(p["dem"]), "--units", "us",
                 "--junctions", str(p["junctions"]), "--workers", "1", "--out", str(d / "out"), "-q"]) == 0
    return d / "out"


def test_us_run_formats_feet_and_mph(us_out):
    """openpyxl as the reference reader: in a US run from_ft is '0.0' and speed_mph '0', and the
    summary states miles."""
    ws = openpyxl.load_workbook(us_out / "deficiencies.xlsx")["Deficiencies"]
    cells = _sheet_columns(ws)
    assert cells["from_ft"] and {c.number_format for c in cells["from_ft"]} == {"0.0"}
    assert {c.number_format for c in cells["speed_mph"]} == {"0"}
    assert all(isinstance(c.value, numbers.Number) for c in cells["from_ft"])
    brief = [r[1] for r in _summary_text(us_out / "deficiencies.xlsx") if r and r[0] == "In brief"][0]
    assert " mi in all" in brief


def test_workbook_prints_landscape_fit_to_width_with_header_repeated(tmp_path):
    """Each sheet is set to print landscape, one page wide, with the header row repeated on table
    sheets (read back with openpyxl, a reference reader; common practice, no source)."""
    import openpyxl
    import pandas as pd

    from pipeline.outputs.workbook import write_xlsx

    frame = pd.DataFrame({"road_id": ["R1"] * 3, "length_m": [1.0, 2.0, 3.0]})
    path = tmp_path / "w.xlsx"
    write_xlsx(path, {"Deficiencies": frame}, [("Method", "x")], [("Caution", "y")])
    wb = openpyxl.load_workbook(path)
    for ws in wb.worksheets:
        assert ws.page_setup.orientation == "landscape", ws.title
        # fitToWidth 1 is the file format's default, so it may be left out; fitToHeight 0 is 'as many as needed'
        assert ws.sheet_properties.pageSetUpPr.fitToPage and ws.page_setup.fitToWidth in (None, 1), ws.title
        assert ws.page_setup.fitToHeight == 0, ws.title
        assert str(ws.page_setup.paperSize) == "9", ws.title
    assert wb["Deficiencies"].print_title_rows.replace("$", "") == "1:1"
