"""A US customary run speaks in feet and mph everywhere a reader looks: the Method text of the
report and the workbook, the data-quality facts and ``sightaudit validate``; and its K values
are the published US ones, exactly."""

from __future__ import annotations

import html
import json
import re

import numpy as np
import openpyxl
import pandas as pd
import pytest

# a metric quantity in text: a number then m, km or m/s2 (not mi, mph), or the words themselves
# (common practice, no source: what a US reader should never meet in a US run)
METRIC_TEXT = re.compile(r"(?<![\w.])\d[\d,]*(?:\.\d+)?\s?(?:m|km|m/s2)\b|km/h|\bmetres?\b|\bkilomet")

# AASHTO Green Book 2018, US customary: Table 3-1 design SSD (ft) and Tables 3-34 (crest) and 3-36
# (sag) design K (ft per %), by design speed (mph). Values from memory, to be checked against the
# publication; the same values as tests/test_criteria.py.
PUBLISHED_US = {15: (80, 3, 10), 20: (115, 7, 17), 25: (155, 12, 26), 30: (200, 19, 37), 35: (250, 29, 49),
                40: (305, 44, 64), 45: (360, 61, 79), 50: (425, 84, 96), 55: (495, 114, 115),
                60: (570, 151, 136), 65: (645, 193, 157), 70: (730, 247, 181), 75: (820, 312, 206),
                80: (910, 384, 231)}


@pytest.fixture(scope="module")
def us_inputs(tmp_path_factory):
    """The sample network restated for a US agency: speeds in mph (the column speed_mph), DEM
    elevations in international feet (factor from PROJ), junctions as they are."""
    import geopandas as gpd
    import rasterio

    from pipeline.core.resources import sample_paths
    from pipeline.core.units import kmh_per_mph, metres_per

    d = tmp_path_factory.mktemp("us_units")
    p = sample_paths()
    roads = gpd.read_file(p["roads"], layer="roads")
    roads["speed_mph"] = roads.pop("speed_kmh") / kmh_per_mph()
    roads.to_file(d / "roads.gpkg", layer="roads")
    with rasterio.open(p["dem"]) as src:
        arr, prof, nodata = src.read(1), src.profile, src.nodata
    with rasterio.open(d / "dem_ft.tif", "w", **prof) as dst:
        dst.write(np.where(arr == nodata, arr, arr / metres_per("ft")).astype("float32"), 1)
    return {"roads": d / "roads.gpkg", "dem": d / "dem_ft.tif", "junctions": p["junctions"],
            "structures": p["structures"], "dir": d}


@pytest.fixture(scope="module")
def us_run(us_inputs):
    from pipeline.cli import main

    out = us_inputs["dir"] / "out"
    assert main(["run", "--roads", str(us_inputs["roads"]), "--ground", str(us_inputs["dem"]), "--units", "us",
                 "--junctions", str(us_inputs["junctions"]), "--structures", str(us_inputs["structures"]),
                 "--workers", "1", "--out", str(out), "-q"]) == 0
    return out


def _metric_words(text: str) -> list[str]:
    return [text[max(0, m.start() - 40):m.end() + 10] for m in METRIC_TEXT.finditer(text)]


def _method_html(out) -> str:
    page = (out / "report.html").read_text(encoding="utf-8")
    section = page.split("id='method'", 1)[1].split("<h2", 1)[0]
    return html.unescape(re.sub(r"<[^>]+>", " ", section))


def test_metric_pattern_catches_metric_text():
    """The pattern is not vacuous: it finds what it must (common practice, no source)."""
    for words in ("every 5 m along", "at 2,350.5 m", "50 km/h", "in metres", "11.2 m/s2", "40.9 km in all"):
        assert METRIC_TEXT.search(words), words
    for words in ("every 16.4 ft along", "31.1 mph", "25.39 mi in all", "in ft per %", "5 min"):
        assert not METRIC_TEXT.search(words), words


def test_us_method_text_in_feet_and_mph(us_run):
    """The Method sheet of the workbook (openpyxl, the reference reader) and the report's Method
    section: no metre or km/h left; the speeds and lengths the run was judged with in mph and ft."""
    ws = openpyxl.load_workbook(us_run / "deficiencies.xlsx")["Method"]
    sheet = " ".join(str(v) for row in ws.iter_rows(values_only=True) for v in row if v is not None)
    report = _method_html(us_run)
    for text in (sheet, report):
        assert "ft" in text and "mph" in text
        assert _metric_words(text) == []
    # the station step (5 m) in feet, international foot 0.3048 m (PROJ): 16.4 ft
    assert "every 16.4 ft along" in sheet


def test_us_data_quality_facts_in_feet(us_run):
    """The data-quality facts of the run (run.json's statement) as the report and workbook show
    them: lengths in ft, and the sentences of what the data cannot judge too."""
    from pipeline.core.units import OutputUnits
    from pipeline.outputs.method import data_quality_facts

    dq = json.loads((us_run / "run.json").read_text())["data_quality"]
    units = OutputUnits("us")
    text = " ".join(f"{k} {v}" for k, v in data_quality_facts(dq, units))
    text += " ".join(units.text(s) for s in dq["cannot_judge"])
    assert " ft" in text and _metric_words(text) == []
    summary = openpyxl.load_workbook(us_run / "deficiencies.xlsx")["Summary"]
    facts = " ".join(str(r[1]) for r in summary.iter_rows(values_only=True) if r and r[0] and r[1])
    assert "DEM cell" in facts and _metric_words(facts) == []


def test_us_k_values_exactly_as_published(us_run):
    """AASHTO Green Book 2018 Tables 3-34 (crest) and 3-36 (sag), US customary, with Table 3-1's
    design SSD (values from memory, to be checked against the publication): the Method text lists
    every row as published, and no required K is a converted 83.99 for 84."""
    ws = openpyxl.load_workbook(us_run / "deficiencies.xlsx")["Method"]
    rows = {r[0]: r[1] for r in ws.iter_rows(values_only=True) if r and r[0]}
    for speed, (ssd, crest, sag) in PUBLISHED_US.items():
        assert f"{speed} mph: SSD {ssd} ft, K crest {crest}, sag {sag};" in rows["Design values"] + ";"
    assert "as tabulated" in rows["Design values"] and "tool's own criteria table" in rows["Design values"]
    curves = pd.read_csv(us_run / "curves.csv")
    k = curves["k_required"].dropna().to_numpy()
    assert len(k) and np.array_equal(k, np.round(k))  # design K is a whole number (Green Book rounding)
    tabulated = curves[curves["speed_mph"].isin(list(PUBLISHED_US))]
    for _, c in tabulated.iterrows():
        assert c["k_required"] == PUBLISHED_US[int(c["speed_mph"])][1 if c["kind"] == "crest" else 2]


def test_method_says_from_memory_only_of_the_values_from_memory(us_run, demo_out):
    """The Method never says 'from memory' of the tool's own tables: the K values (and, in the
    metric set, the design SSD) carry 'value from memory, to be checked against the publication',
    and nothing else does (common practice, no source)."""
    for out in (us_run, demo_out):
        ws = openpyxl.load_workbook(out / "deficiencies.xlsx")["Method"]
        rows = {r[0]: str(r[1]) for r in ws.iter_rows(values_only=True) if r and r[0]}
        marked = [k for k, v in rows.items() if "memory" in v]
        assert marked == ["Checked against the publication"]
        checked = rows["Checked against the publication"]
        assert checked.count("from memory") == checked.count("value from memory, to be checked against the "
                                                            "publication") == 1
        assert "K (Tables 3-34, 3-36): value from memory" in checked
        assert "M:" not in checked and "tables from memory" not in checked.lower()


def test_us_validate_in_feet_and_mph(us_inputs, samples, run_cli):
    """``sightaudit validate --units us`` reports lengths, spacings and the data's limits in ft and
    miles; the road lengths agree with the metric report on the same centrelines (factor from PROJ)."""
    args = ["validate", "--roads", us_inputs["roads"], "--ground", us_inputs["dem"]]
    code, out, err = run_cli(*args, "--units", "us")
    assert code == 0, err
    assert " mi in all" in out and " ft" in out
    assert _metric_words(out + err) == []
    code, metric, err = run_cli("validate", "--roads", samples["roads"], "--ground", samples["dem"])
    assert code == 0, err
    km = float(re.search(r"([\d.]+) km in all", metric).group(1))
    mi = float(re.search(r"([\d.]+) mi in all", out).group(1))
    assert mi == pytest.approx(km / 1.609344, abs=0.006)  # statute mile 1609.344 m
    shortest_m = float(re.search(r"shortest (\d+) m", metric).group(1))
    shortest_ft = float(re.search(r"shortest (\d+) ft", out).group(1))
    assert shortest_ft == pytest.approx(shortest_m / 0.3048, abs=2.0)  # both rounded to whole units


def _page_text(out) -> str:
    """The whole report as a reader sees it: tags, the inline style and script dropped, entities
    decoded; the CRS name (an EPSG definition written as given) left out."""
    page = (out / "report.html").read_text(encoding="utf-8")
    page = re.sub(r"<(style|script)\b.*?</\1>", " ", page, flags=re.S)
    page = re.sub(r"src='data:[^']*'", "", page)
    text = html.unescape(re.sub(r"<[^>]+>", " ", page))
    return re.sub(r"EPSG:\d+[^;.)]*", " ", text)


def test_us_report_has_no_metric_text_anywhere(us_run):
    """Every word of a US run's report.html (the brief, the curve pages, the road sections, the
    notes) and the text columns of deficiencies.csv and curves.csv: lengths in ft and speeds in mph,
    no metre or km/h left (common practice, no source)."""
    text = _page_text(us_run)
    assert " ft" in text and " mph" in text
    assert _metric_words(text) == []
    for name in ("deficiencies.csv", "curves.csv"):
        table = pd.read_csv(us_run / name)
        words = " ".join(" ".join(table[c].dropna().astype(str)) for c in table.columns
                         if table[c].dtype == object)
        assert _metric_words(words) == [], name
