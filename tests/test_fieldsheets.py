"""The field sheets (profiles.pdf), read back with poppler's pdfinfo and pdftotext: standard
landscape paper, every word on the page, stations, PV marks, grades, K and L, and the stated
vertical exaggeration, for a metric and a US customary run of the sample network."""

from __future__ import annotations

import json
import math
import re
import shutil
import subprocess

import pandas as pd
import pytest

PDFINFO = shutil.which("pdfinfo")
PDFTOTEXT = shutil.which("pdftotext")
needs_poppler = pytest.mark.skipif(PDFINFO is None or PDFTOTEXT is None,
                                   reason="pdfinfo/pdftotext not installed (.ci/run installs Debian's poppler-utils)")

# landscape page sizes in PostScript points (1 pt = 1/72 in): ISO 216 A3 is 420 x 297 mm, ANSI
# Tabloid 17 x 11 in (published paper standards; the mm to pt conversion is exact arithmetic)
A3_PT = (420 / 25.4 * 72, 297 / 25.4 * 72)  # 1190.55 x 841.89
TABLOID_PT = (17 * 72.0, 11 * 72.0)  # 1224 x 792
METRIC_STATION = re.compile(r"\b\d+\+\d{3}(\.\d)?\b")
US_STATION = re.compile(r"\b\d+\+\d{2}(\.\d)?\b")


def _sheets_run(tmp_path_factory, *extra, config: str = "", roads: int | None = None):
    """A run of the bundled sample with field sheets; ``roads``: only the first that many roads
    (the sheets cost about half a second each, so the runs that check one setting stay small)."""
    from pipeline.cli import main
    from pipeline.core.resources import sample_paths

    p = sample_paths()
    folder = tmp_path_factory.mktemp("sheets")
    (folder / "c.toml").write_text(config)
    out = folder / "out"
    roads_file = p["roads"]
    if roads is not None:
        import geopandas as gpd

        roads_file = folder / "roads.gpkg"
        gpd.read_file(p["roads"]).head(roads).to_file(roads_file)
    code = main(["run", "--roads", str(roads_file), "--ground", str(p["dem"]), "--structures", str(p["structures"]),
                 "--junctions", str(p["junctions"]), "--config", str(folder / "c.toml"), "--out", str(out), "--quiet",
                 "--profiles-pdf", *extra])
    assert code == 0
    return out


@pytest.fixture(scope="module")
def metric_out(demo_out):
    """The session's demo run (the bundled sample, metric, with the field sheets)."""
    return demo_out


@pytest.fixture(scope="module")
def us_out(tmp_path_factory):
    # the sample's speeds are in km/h, read as such in this US customary run
    return _sheets_run(tmp_path_factory, "--units", "us",
                       config='[roads]\nspeed_unit = "kmh"\nspeed_column = "speed_kmh"\n', roads=3)


def _page_sizes(pdf) -> list[tuple[float, float]]:
    """Every page's size (pt) as pdfinfo reports it."""
    n = int(re.search(r"Pages:\s+(\d+)", subprocess.run([PDFINFO, str(pdf)], capture_output=True, text=True,
                                                         check=True).stdout).group(1))
    info = subprocess.run([PDFINFO, "-f", "1", "-l", str(n), str(pdf)], capture_output=True, text=True,
                          check=True).stdout
    sizes = [(float(a), float(b)) for a, b in re.findall(r"Page\s+\d+\s+size:\s+([\d.]+) x ([\d.]+) pts", info)]
    assert len(sizes) == n
    return sizes


def _words(pdf) -> list[dict]:
    """Each page's size and words with their boxes (pt, origin top left), from ``pdftotext -bbox``."""
    html = subprocess.run([PDFTOTEXT, "-bbox", str(pdf), "-"], capture_output=True, text=True, check=True).stdout
    pages = []
    for m in re.finditer(r'<page width="([\d.]+)" height="([\d.]+)">(.*?)</page>', html, re.S):
        words = [(float(a), float(b), float(c), float(d), w) for a, b, c, d, w in re.findall(
            r'<word xMin="([-\d.]+)" yMin="([-\d.]+)" xMax="([-\d.]+)" yMax="([-\d.]+)">([^<]*)</word>', m.group(3))]
        pages.append({"width": float(m.group(1)), "height": float(m.group(2)), "words": words,
                      "text": " ".join(w[4] for w in words).replace("&amp;", "&")})
    return pages


def _marks_and_labels(pages, unit: str, per_station: float = 1000.0):
    """The PV marks (station as a number, elevation) by road and name, and each curve's L and K
    by road and curve number, read from the sheets' text (the road from each sheet's heading)."""
    marks: dict = {}
    labels: dict = {}
    for page in pages:
        road = re.search(r"(\S+?)(?: [^:]*)?: long profile,", page["text"]).group(1)
        for nm, whole, rest, z in re.findall(r"(PVC|PVI|PVT) (\d+)\+([\d.]+) EL (-?[\d.]+)", page["text"]):
            marks.setdefault((road, nm), []).append((int(whole) * per_station + float(rest), float(z)))
        for no, length, k in re.findall(rf"(?:crest|sag) (\d+) \(\w+\): L ([\d.]+) {unit}, K ([\d.]+) {unit}/%",
                                        page["text"]):
            labels[(road, int(no))] = (float(length), float(k))
    return marks, labels


def _evaluated(out) -> pd.DataFrame:
    roads = pd.read_csv(out / "roads.csv")
    return roads[roads["status"] == "evaluated"]


# -------------------------------------------------------------------- stations
def test_station_label():
    """Stations as km + m (metric) and 100 ft stations (US): common practice, no source."""
    from pipeline.outputs.fieldsheets import station_label

    assert station_label(12345.6, 1000) == "12+345.6"
    assert station_label(12345.6, 100) == "123+45.6"
    assert station_label(0.0, 1000) == "0+000.0"
    assert station_label(999.96, 1000) == "1+000.0"  # rounds into the next station, never "0+1000.0"
    assert station_label(1200.0, 1000, decimals=0) == "1+200"
    assert station_label(100.0, 100, decimals=0) == "1+00"
    assert station_label(7.04, 100) == "0+07.0"


def test_station_in_output_units():
    """1000 international feet are 304.8 m (0.3048 m a foot, EPSG:9002 through pyproj)."""
    from pipeline.core.units import OutputUnits
    from pipeline.outputs.fieldsheets import station

    assert station(304.8, OutputUnits("us")) == "10+00.0"
    assert station(2264.802, OutputUnits()) == "2+264.8"


def test_sheet_setup_papers():
    """Paper sizes of the standards (ISO 216 A3/A4, ANSI Tabloid/Letter, landscape), and each
    sheet's length at its scale fits the paper beside the band's labels."""
    from pipeline.core.units import OutputUnits
    from pipeline.outputs.fieldsheets import sheet_setup

    m, us = OutputUnits(), OutputUnits("us")
    assert sheet_setup(m)["paper"] == "A3" and sheet_setup(us)["paper"] == "tabloid"
    assert "auto" in sheet_setup(m)["paper_choice"]
    expect = {"A3": (420, 297), "A4": (297, 210), "tabloid": (431.8, 279.4), "letter": (279.4, 215.9)}
    for paper, size in expect.items():
        for u in (m, us):
            s = sheet_setup(u, paper)
            assert s["size_mm"] == pytest.approx(size)
            drawn_mm = s["sheet_length_m"] * 1000.0 / s["ratio"]
            lay = s["layout"]
            assert lay["axes_left"] + drawn_mm <= size[0] - lay["right"] + 1e-9
            assert drawn_mm > 0.75 * size[0]  # the profile uses most of the sheet's width
            assert s["sheet_length"] % 100 == 0  # whole hundreds of m or ft
    assert sheet_setup(m, "A3")["scale_text"] == "1:2500"
    assert sheet_setup(us, "tabloid")["scale_text"].startswith('1" = 200 ft')


def test_bad_paper_stops_the_run():
    from pipeline.core.config import load_config
    from pipeline.core.errors import InputError

    with pytest.raises(InputError, match="sheet_paper"):
        load_config(None, {"output.sheet_paper": "B5"})


# -------------------------------------------------------------------- the metric sheets
@needs_poppler
def test_metric_sheets_are_a3_landscape(metric_out):
    pdf = metric_out / "profiles.pdf"
    sizes = _page_sizes(pdf)
    ev = _evaluated(metric_out)
    assert len(sizes) >= len(ev)
    for w, h in sizes:
        assert w == pytest.approx(A3_PT[0], abs=1) and h == pytest.approx(A3_PT[1], abs=1)
    run = json.loads((metric_out / "run.json").read_text())
    sheets = run["profiles_pdf"]
    assert sheets["paper"].startswith("A3") and "auto" in sheets["paper_choice"]
    assert sheets["pages"] == len(sizes)
    # a fixed length of road a sheet: each road takes ceil(length / sheet length) sheets
    assert len(sizes) == sum(math.ceil(l / sheets["sheet_length"] - 1e-9) for l in ev["length_m"])


@needs_poppler
def test_metric_sheets_words_inside_and_apart(metric_out):
    """No word leaves its page, and no two words of a sheet print over each other (pdftotext's
    word boxes take the font's full ascent and descent, so adjacent lines' boxes touch: each box
    is taken 15 % smaller on every side for the overlap)."""
    for i, page in enumerate(_words(metric_out / "profiles.pdf")):
        W, H = page["width"], page["height"]
        words = page["words"]
        assert words, f"page {i + 1} has no text"
        for x0, y0, x1, y1, w in words:
            assert 0 <= x0 and x1 <= W and 0 <= y0 and y1 <= H, (i + 1, w, x0, y0, x1, y1)
        inner = [(x0 + 0.25 * (x1 - x0), y0 + 0.25 * (y1 - y0), x1 - 0.25 * (x1 - x0), y1 - 0.25 * (y1 - y0), w)
                 for x0, y0, x1, y1, w in words]
        for a in range(len(inner)):
            for b in range(a + 1, len(inner)):
                p, q = inner[a], inner[b]
                ox = min(p[2], q[2]) - max(p[0], q[0])
                oy = min(p[3], q[3]) - max(p[1], q[1])
                assert not (ox > 0 and oy > 0), (i + 1, words[a], words[b])


@needs_poppler
def test_metric_sheets_content(metric_out):
    pages = _words(metric_out / "profiles.pdf")
    for i, page in enumerate(pages):
        assert "exaggeration" in page["text"], f"page {i + 1}"
        assert METRIC_STATION.search(page["text"]), f"page {i + 1}"
        assert "licensed engineer" in page["text"] or "licensed" in page["text"]
        assert re.search(r"sheet \d+ of \d+", page["text"])
    text = " ".join(p["text"] for p in pages)
    assert "PVC" in text and "PVT" in text and "PVI" in text
    # every curve's PVC, PVI and PVT station and elevation, and its L and K, as in curves.csv (which
    # rounds to 0.001 m and 0.01: compared to the last digit written, half a unit either way)
    curves = pd.read_csv(metric_out / "curves.csv")
    marks, labels = _marks_and_labels(pages, "m")
    for c in curves.itertuples():
        for nm, x in (("PVC", c.pvc_m), ("PVI", c.pvi_m), ("PVT", c.pvt_m)):
            assert any(abs(v - x) <= 0.051 for v, _ in marks.get((c.road_id, nm), [])), (c.road_id, c.curve_no, nm)
        pvi = [z for v, z in marks[(c.road_id, "PVI")] if abs(v - c.pvi_m) <= 0.051]
        assert abs(pvi[0] - c.pvi_elev_m) <= 0.0051
        length, k = labels[(c.road_id, c.curve_no)]
        assert abs(length - c.length_m) <= 0.051 and abs(k - c.k) <= 0.051, (c.road_id, c.curve_no)
    # grades: signed, two decimals; the grade after most curves is written on its tangent
    grades = [f"{g:+.2f} %" for g in curves["g2_pct"]]
    assert sum(g in text for g in grades) >= 0.8 * len(grades)
    # the deficient stretches and the hidden zones are in the legend where there are any
    assert "deficiency, increasing chainage" in text
    assert "deficiency, decreasing chainage" in text
    assert "road hidden at the required SSD" in text


# -------------------------------------------------------------------- the US sheets
@needs_poppler
def test_us_sheets_are_tabloid_in_feet(us_out):
    pdf = us_out / "profiles.pdf"
    sizes = _page_sizes(pdf)
    assert len(sizes) >= len(_evaluated(us_out))
    for w, h in sizes:
        assert w == pytest.approx(TABLOID_PT[0], abs=1) and h == pytest.approx(TABLOID_PT[1], abs=1)
    pages = _words(pdf)
    for i, page in enumerate(pages):
        assert "exaggeration" in page["text"], f"page {i + 1}"
        assert US_STATION.search(page["text"]), f"page {i + 1}"
        for x0, y0, x1, y1, w in page["words"]:
            assert 0 <= x0 and x1 <= page["width"] and 0 <= y0 and y1 <= page["height"], (i + 1, w)
    text = " ".join(p["text"] for p in pages)
    assert not METRIC_STATION.search(text)
    curves = pd.read_csv(us_out / "curves.csv")
    marks, labels = _marks_and_labels(pages, "ft", per_station=100)
    # K in ft per %; K needed as tabulated (whole numbers: AASHTO Green Book 2018, Table 3-35)
    for c in curves.itertuples():
        assert any(abs(v - c.pvi_ft) <= 0.051 for v, _ in marks[(c.road_id, "PVI")]), (c.road_id, c.curve_no)
        length, k = labels[(c.road_id, c.curve_no)]
        assert abs(length - c.length_ft) <= 0.051 and abs(k - c.k) <= 0.051, (c.road_id, c.curve_no)
        assert f"K needed {c.k_required:.0f}" in text
    run = json.loads((us_out / "run.json").read_text())
    assert run["profiles_pdf"]["paper"].startswith("Tabloid") and run["profiles_pdf"]["unit"] == "ft"


# -------------------------------------------------------------------- paper as set
@needs_poppler
def test_paper_as_set_a4(tmp_path_factory):
    """output.sheet_paper = "A4": ISO 216 A4 landscape, 297 x 210 mm = 841.89 x 595.28 pt, at the
    smaller sheets' scale of 1:5000; the choice is recorded in run.json."""
    out = _sheets_run(tmp_path_factory, config='[output]\nsheet_paper = "A4"\n', roads=2)
    sizes = _page_sizes(out / "profiles.pdf")
    for w, h in sizes:
        assert w == pytest.approx(297 / 25.4 * 72, abs=1) and h == pytest.approx(210 / 25.4 * 72, abs=1)
    sheets = json.loads((out / "run.json").read_text())["profiles_pdf"]
    assert sheets["paper"] == "A4 landscape" and "as set" in sheets["paper_choice"]
    assert sheets["horizontal_scale"] == "1:5000"
    ev = _evaluated(out)
    assert len(sizes) == sum(math.ceil(l / sheets["sheet_length"] - 1e-9) for l in ev["length_m"])
    for i, page in enumerate(_words(out / "profiles.pdf")):
        assert "1:5000" in page["text"] and "exaggeration" in page["text"], f"page {i + 1}"
        for x0, y0, x1, y1, w in page["words"]:
            assert 0 <= x0 and x1 <= page["width"] and 0 <= y0 and y1 <= page["height"], (i + 1, w)
