"""The report (rendered in headless Chromium), the profile sheets (rendered with pdftoppm), the
figures, the command line's help and helpers, and US customary units end to end."""

from __future__ import annotations

import base64
import io
import json
import os
import re
import shutil
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
PDFTOPPM = shutil.which("pdftoppm")
CHROME_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                "--disable-background-networking", "--disable-component-update", "--disable-sync",
                "--hide-scrollbars"]


@pytest.fixture(scope="module")
def demo_pdf_out(demo_out):
    """The session's demo run, which writes the field sheets too."""
    return demo_out


@pytest.fixture(scope="module")
def demo_result():
    from pipeline.runner.network import run_network
    from pipeline.core.config import load_config
    from pipeline.core.resources import sample_paths

    p = sample_paths()
    cfg = load_config(None, {"structures.file": str(p["structures"]), "junctions.file": str(p["junctions"])})
    return run_network(p["roads"], p["dem"], cfg)


# -------------------------------------------------------------------- report.html
def test_report_is_self_contained(demo_out):
    html = (demo_out / "report.html").read_text(encoding="utf-8")
    srcs = re.findall(r"""src=['"]([^'"]+)['"]""", html)
    assert len(srcs) >= 2 and all(s.startswith("data:image/png;base64,") for s in srcs)
    assert not re.search(r"""(src|href)=['"]https?://""", html)
    import matplotlib.image as mpimg

    for s in srcs:  # every inline image decodes as a PNG (matplotlib's reader as reference)
        img = mpimg.imread(io.BytesIO(base64.b64decode(s.split(",", 1)[1])), format="png")
        assert img.shape[0] > 100 and img.shape[1] > 100
    for needle in ("licensed engineer", "Network summary", "Ranked inventory", "Deficient curves", "Method",
                   "Data notes", "AASHTO", "deficiencies.xlsx"):
        assert needle in html


@pytest.mark.skipif(CHROMIUM is None, reason="headless Chromium not installed (.ci/run installs Debian's chromium)")
def test_report_renders_in_headless_chromium(demo_out, tmp_path):
    """Debian's Chromium loads the report: every image loads (the page marks it on load), the
    summary numbers are in the page, and a screenshot is a real, non-blank picture."""
    url = (demo_out / "report.html").resolve().as_uri()
    common = CHROME_FLAGS + [f"--user-data-dir={tmp_path / 'profile'}", "--virtual-time-budget=10000"]
    dom = subprocess.run([CHROMIUM, *common, "--dump-dom", url], capture_output=True, text=True, timeout=180).stdout
    m = re.search(r'data-images-loaded="(\d+)/(\d+)"', dom)
    assert m, "the page's load handler did not run"
    assert m.group(1) == m.group(2) and int(m.group(2)) >= 2
    d = pd.read_csv(demo_out / "deficiencies.csv")
    c = pd.read_csv(demo_out / "curves.csv")
    # the cards count deficient stretches and curves, and curves the data cannot decide
    assert f"data-name='deficient stretches'>{int((d['verdict'] == 'deficient').sum())}</b>" in dom.replace('"', "'")
    assert f"data-name='deficient curves'>{int(c['deficient'].sum())}</b>" in dom.replace('"', "'")
    assert f"data-name='undetermined curves'>{int((c['verdict'] == 'undetermined').sum())}</b>" in dom.replace('"', "'")
    assert "What this ground data can support" in dom
    shot = tmp_path / "report.png"
    subprocess.run([CHROMIUM, *common, "--window-size=1200,3000", f"--screenshot={shot}", url],
                   capture_output=True, timeout=180)
    import matplotlib.image as mpimg

    img = mpimg.imread(shot)
    assert img.shape[0] >= 2900 and img.shape[1] >= 1100
    assert img[..., :3].std() > 0.05  # not a blank page


def test_profiles_pdf_pages(demo_pdf_out):
    """profiles.pdf: each evaluated road on as many sheets as its length needs at the sheets'
    fixed scale (900 m a sheet on A3 at 1:2500: 360 mm of profile, arithmetic); the page count
    read from the PDF's page objects."""
    pdf = (demo_pdf_out / "profiles.pdf").read_bytes()
    pages = len(re.findall(rb"/Type\s*/Page[^s]", pdf))
    roads = pd.read_csv(demo_pdf_out / "roads.csv")
    ev = roads[roads["status"] == "evaluated"]
    sheets = json.loads((demo_pdf_out / "run.json").read_text())["profiles_pdf"]
    assert sheets["sheet_length"] == 900.0 and sheets["horizontal_scale"] == "1:2500"
    expect = int(sum(max(int(np.ceil(l / 900.0)), 1) for l in ev["length_m"]))
    assert pages == expect == sheets["pages"]


@pytest.mark.skipif(PDFTOPPM is None, reason="pdftoppm not installed (.ci/run installs Debian's poppler-utils)")
def test_profiles_pdf_renders_with_pdftoppm(demo_pdf_out, tmp_path):
    subprocess.run([PDFTOPPM, "-png", "-r", "50", "-f", "1", "-l", "2", str(demo_pdf_out / "profiles.pdf"),
                    str(tmp_path / "page")], check=True, timeout=120)
    import matplotlib.image as mpimg

    pngs = sorted(tmp_path.glob("page*.png"))
    assert len(pngs) == 2
    img = mpimg.imread(pngs[0])
    assert img.shape[1] > 400 and img[..., :3].std() > 0.02


# -------------------------------------------------------------------- figures
def _check_axes(fig, unit="m", min_font=8.0):
    for ax in fig.axes:
        assert f"({unit}" in ax.get_xlabel() and f"({unit})" in ax.get_ylabel()
        for text in [ax.xaxis.label, ax.yaxis.label, ax.title] + ax.get_xticklabels() + ax.get_yticklabels():
            assert text.get_fontsize() >= min_font


def test_figures_have_units_titles_and_print_size_text(demo_result):
    from pipeline.outputs.report import curve_figure, road_figure
    from pipeline.core.units import OutputUnits

    r, u = demo_result, OutputUnits()
    inv, cv = r.evaluation.inventory, r.evaluation.curves
    row = inv.iloc[0]
    c = cv[(cv["road_id"] == row["road_id"]) & (cv["curve_no"] == row["curve_no"])].iloc[0]
    rows = inv[(inv["road_id"] == row["road_id"]) & (inv["curve_no"] == row["curve_no"])]
    title = f"{row['road_id']} {row['road_name']}: curve {int(row['curve_no'])} ({c['kind']}), rank 1"
    fig = curve_figure(r.profiles[r.profiles["road_id"] == row["road_id"]], c, rows,
                       r.hcurves[r.hcurves["road_id"] == row["road_id"]], r.criteria.sight_rules(), u, title)
    _check_axes(fig)
    assert fig.axes[0].get_title() == title and row["road_id"] in title and "curve" in title
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert any("sight line" in t for t in labels) and any("hidden" in t for t in labels)
    fig = road_figure(r.profiles[r.profiles["road_id"] == "WV-02"], cv[cv["road_id"] == "WV-02"],
                      inv[inv["road_id"] == "WV-02"], u, "WV-02 Brindle Hill Lane: long profile", 0, 3000)
    _check_axes(fig)
    import matplotlib.pyplot as plt

    plt.close("all")


# -------------------------------------------------------------------- command line
@pytest.mark.parametrize("args", [[], ["run"], ["demo"], ["validate"], ["init"], ["criteria"]])
def test_help_fits_on_one_screen(args):
    env = os.environ | {"COLUMNS": "100"}
    proc = subprocess.run([sys.executable, "-m", "pipeline.cli", *args, "--help"], capture_output=True, text=True,
                          env=env, timeout=60)
    assert proc.returncode == 0
    lines = proc.stdout.rstrip().splitlines()
    assert len(lines) <= 50, len(lines)
    assert max(len(l) for l in lines) <= 100
    if args == ["run"]:
        for term in ("SSD", "crest", "sag"):
            assert term in proc.stdout


def test_init_writes_a_config_that_loads(tmp_path, run_cli):
    import tomllib

    from pipeline.core.config import SPEC, load_config

    path = tmp_path / "s.toml"
    code, out, _ = run_cli("init", path)
    assert code == 0 and path.is_file()
    text = path.read_text()
    tomllib.loads(text)
    for section, keys in SPEC.items():
        assert f"[{section}]" in text
        for key in keys:
            assert f"# {key} = " in text
    # uncommenting a line sets it
    path.write_text(text.replace("# step_m = 5.0", "step_m = 2.5"))
    assert load_config(path)["profile.step_m"] == 2.5
    code, _, err = run_cli("init", path)
    assert code == 2 and "exists" in err


def test_validate_reports_without_running(tmp_path, run_cli, samples):
    code, out, err = run_cli("validate", "--roads", samples["roads"], "--ground", samples["dem"])
    assert code == 0, err
    assert "10 road(s)" in out and "40.86 km" in out and "ground data cover" in out
    assert "UTM zone 33N" in out
    code, _, err = run_cli("validate", "--roads", tmp_path / "missing.gpkg", "--ground", samples["dem"])
    assert code == 2 and "not found" in err


def test_closing_summary_in_a_log(tmp_path, run_cli):
    code, out, _ = run_cli("demo", "--out", tmp_path / "o")
    assert code == 0
    for line in ("Roads: 10 in", "Deficient curves:", "Hiding a hazard:", "Output folder:", "licensed engineer"):
        assert line in out


# -------------------------------------------------------------------- US customary
@pytest.fixture(scope="module")
def us_inputs(tmp_path_factory):
    """The demo network restated in US customary units: centrelines in a CRS with US survey foot
    axes (UTM 33N's own projection), speeds in mph, DEM elevations in international feet, the
    structure and junction points in the roads' feet CRS. Conversion factors from PROJ."""
    import geopandas as gpd
    import pyproj
    import rasterio
    import shapely

    from pipeline.core.resources import sample_paths
    from pipeline.core.units import kmh_per_mph, metres_per

    d = tmp_path_factory.mktemp("us")
    p = sample_paths()
    spec = pyproj.CRS("EPSG:32633").to_json_dict()
    for ax in spec["coordinate_system"]["axis"]:
        ax["unit"] = {"type": "LinearUnit", "name": "US survey foot", "conversion_factor": metres_per("us_ft")}
    spec["name"] = "UTM zone 33N, US survey feet"
    spec.pop("id", None)
    feet = pyproj.CRS.from_json_dict(spec)
    roads = gpd.read_file(p["roads"], layer="roads").to_crs(feet)
    roads["speed_mph"] = roads.pop("speed_kmh") / kmh_per_mph()
    # a CSV with WKT and the CRS stated (a GeoPackage writer may swap a custom CRS for an EPSG look-alike)
    roads["wkt"] = shapely.to_wkt(roads.geometry.to_numpy(), rounding_precision=-1)
    pd.DataFrame(roads.drop(columns="geometry")).to_csv(d / "roads.csv", index=False)
    (d / "crs.wkt").write_text(feet.to_wkt())
    with rasterio.open(p["dem"]) as src:
        arr = src.read(1)
        prof = src.profile
    arr = np.where(arr == src.nodata, arr, arr / metres_per("ft")).astype("float32")
    with rasterio.open(d / "dem_ft.tif", "w", **prof) as dst:
        dst.write(arr, 1)
    tr = pyproj.Transformer.from_crs("EPSG:32633", feet, always_xy=True)
    for name in ("structures", "junctions"):
        t = pd.read_csv(p[name])
        t["x"], t["y"] = tr.transform(t["x"].to_numpy(), t["y"].to_numpy())
        t.to_csv(d / f"{name}.csv", index=False)
    return d


def _run_us(run_cli, d, out, *extra):
    code, _, err = run_cli("run", "--roads", d / "roads.csv", "--roads-crs", (d / "crs.wkt").read_text(),
                           "--ground", d / "dem_ft.tif", "--units", "us",
                           "--structures", d / "structures.csv", "--junctions", d / "junctions.csv", "--out", out,
                           "-q", *extra)
    assert code == 0, err
    return out


def test_us_customary_run_writes_feet_and_mph(us_inputs, tmp_path, run_cli, demo_out):
    out = _run_us(run_cli, us_inputs, tmp_path / "us")
    c = pd.read_csv(out / "curves.csv")
    d = pd.read_csv(out / "deficiencies.csv")
    for col in ("pvc_ft", "pvi_ft", "pvt_ft", "length_ft", "sight_available_ft", "ssd_required_ft", "speed_mph"):
        assert col in c.columns
    assert not [x for x in c.columns if x.endswith("_m") or x.endswith("_kmh")]
    for col in ("from_ft", "to_ft", "speed_mph", "supported_speed_mph", "shortfall_ft"):
        assert col in d.columns
    run = json.loads((out / "run.json").read_text())
    assert run["criteria"]["name"] == "aashto-2018-us"
    assert "US survey foot" in run["inputs"]["roads"]["crs"] or "US survey foot" in json.dumps(run["working_crs"]) \
        or run["roads"]["evaluated"] == 10
    # the same network gives the same verdicts as the metric run (acceptance)
    m = pd.read_csv(demo_out / "curves.csv")
    assert len(c) == len(m)
    key = ["road_id", "curve_no"]
    both = m.merge(c, on=key, suffixes=("_metric", "_us"))
    assert (both["deficient_metric"] == both["deficient_us"]).all()
    # geometry agrees after conversion (international foot, 0.3048 m; K in ft per %)
    np.testing.assert_allclose(both["pvi_ft"] * 0.3048, both["pvi_m"], atol=0.05)
    np.testing.assert_allclose(both["k_us"] * 0.3048, both["k_metric"], rtol=2e-3, atol=0.02)
    # (roadside rows have no vertical curve: 0 stands in for the empty number, NaN never equals NaN)
    assert set(zip(pd.read_csv(demo_out / "deficiencies.csv")["road_id"],
                   pd.read_csv(demo_out / "deficiencies.csv")["curve_no"].fillna(0))) \
        == set(zip(d["road_id"], d["curve_no"].fillna(0)))


def test_us_units_with_the_metric_set_match_exactly(us_inputs, tmp_path, run_cli, demo_out):
    """With the same criteria set, US customary in and out changes nothing but the units: the
    inventory is the same stretch for stretch."""
    out = _run_us(run_cli, us_inputs, tmp_path / "us_metric_set", "--criteria", "aashto-2018-metric")
    key = ["road_id", "curve_no", "direction"]
    # (roadside rows have no vertical curve: 0 stands in for the empty number, NaN never equals NaN)
    d = pd.read_csv(out / "deficiencies.csv").fillna({"curve_no": 0}).sort_values(key).reset_index(drop=True)
    m = pd.read_csv(demo_out / "deficiencies.csv").fillna({"curve_no": 0}).sort_values(key).reset_index(drop=True)
    assert len(d) == len(m)
    assert (d[key].to_numpy() == m[key].to_numpy()).all()
    np.testing.assert_allclose(d["from_ft"] * 0.3048, m["from_m"], atol=0.05)
    np.testing.assert_allclose(d["ssd_required_ft"] * 0.3048, m["ssd_required_m"], atol=1e-3)  # 0.001 ft rounding
    np.testing.assert_allclose(d["speed_mph"] * 1.609344, m["speed_kmh"], atol=0.06)
    np.testing.assert_allclose(d["priority_score"], m["priority_score"], atol=0.11)


def test_report_text_has_no_glitches(demo_out):
    """No 'none:' after a hazard that is none, no doubled parentheses around the speed basis,
    and sag pages carry no 'hidden beyond the crest' row (common practice, no source: text an
    engineer would send on without editing)."""
    html = (demo_out / "report.html").read_text(encoding="utf-8")
    assert "none: " not in html and "))" not in html
    sections = html.split("<section id='curve-")[1:]
    sags = [s for s in sections if "(sag)" in s.split("</h3>")[0]]
    assert sections and sags  # the demo has sag pages to check
    for section in sags:
        assert "hidden beyond the crest" not in section


def test_report_contents_and_links_reach_every_page(demo_out):
    """The report has a table of contents whose links all land on a section, and every curve
    page is reachable by a link from the ranked table (Python's html.parser as the reader)."""
    from html.parser import HTMLParser

    class Links(HTMLParser):
        def __init__(self):
            super().__init__()
            self.ids, self.hrefs, self.curve_pages = set(), [], []

        def handle_starttag(self, tag, attrs):
            a = dict(attrs)
            if "id" in a:
                self.ids.add(a["id"])
                if tag == "section" and a["id"].startswith("curve-"):
                    self.curve_pages.append(a["id"])
            if tag == "a" and a.get("href", "").startswith("#"):
                self.hrefs.append(a["href"][1:])

    p = Links()
    p.feed((demo_out / "report.html").read_text(encoding="utf-8"))
    assert "contents" in p.ids
    assert all(h in p.ids for h in p.hrefs), [h for h in p.hrefs if h not in p.ids]
    for section in ("summary", "data-quality", "map", "inventory", "curves", "method", "notes", "cautions"):
        assert section in p.hrefs and section in p.ids
    assert p.curve_pages and set(p.curve_pages) <= set(p.hrefs)


def test_counts_in_the_class_table_are_whole(demo_out):
    """The report's by-class table writes counts as whole numbers and only lengths with decimals
    (common practice, no source); 'undetermined' contains 'mi' and once got two decimals."""
    import re

    html = (demo_out / "report.html").read_text(encoding="utf-8")
    table = html.split("<h3>By road class</h3>")[1].split("</table>")[0]
    heads = re.findall(r"<th>(.*?)</th>", table)
    row = re.findall(r'<td class="n">(.*?)</td>', table.split("<tbody>")[1].split("</tr>")[0])
    for head, cell in zip([h for h in heads if h != "road class"], row):
        assert ("." in cell) == ("km" in head.split() or "mi" in head.split()), (head, cell)
