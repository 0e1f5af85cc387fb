"""The outputs opened in the programs a reader uses: LibreOffice Calc reads the workbook, GDAL's
``ogrinfo`` the GeoPackage, headless Chromium the report. Each test skips, with the reason, where
its program is not installed (``.ci/run`` installs them from Debian's packages)."""

from __future__ import annotations

import re
import shutil
import sqlite3
import subprocess
from html.parser import HTMLParser

import pandas as pd
import pytest

SOFFICE = shutil.which("soffice") or shutil.which("libreoffice")
OGRINFO = shutil.which("ogrinfo")
CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
PDFINFO = shutil.which("pdfinfo")
CHROME_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                "--disable-background-networking", "--disable-component-update", "--disable-sync",
                "--hide-scrollbars"]
# LibreOffice's CSV export filter options, by position: field separator 44 (,), text delimiter
# 34 ("), character set 76 (UTF-8), start row 1, no column formats, language 0, quote all text
# false, detect special numbers true, save cell contents as shown true, export formulas false,
# remove spaces false, sheet -1 (every sheet to its own file, LibreOffice 7.2 and later)
CSV_FILTER = "csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,true,false,false,-1"


# -------------------------------------------------------------------- LibreOffice
@pytest.fixture(scope="module")
def calc_csv(demo_out, tmp_path_factory):
    """Every sheet of deficiencies.xlsx as LibreOffice Calc shows it, one CSV per sheet."""
    if SOFFICE is None:
        pytest.skip("LibreOffice not installed (.ci/run installs Debian's libreoffice-calc-nogui)")
    d = tmp_path_factory.mktemp("calc")
    run = subprocess.run([SOFFICE, f"-env:UserInstallation={(d / 'profile').as_uri()}", "--headless",
                          "--convert-to", CSV_FILTER, "--outdir", str(d / "csv"), str(demo_out / "deficiencies.xlsx")],
                         capture_output=True, text=True, timeout=300)
    files = {p.stem.split("-", 1)[1]: p for p in (d / "csv").glob("deficiencies-*.csv")}
    if run.returncode != 0 or not files:
        pytest.fail(f"LibreOffice did not convert the workbook: {run.stdout[-300:]} {run.stderr[-300:]}")
    return files


def _decimals(text: str) -> int:
    return len(text.split(".", 1)[1]) if "." in text else 0


def test_libreoffice_reads_every_sheet(calc_csv, demo_out):
    """LibreOffice writes one CSV per sheet, the sheets openpyxl (the reference reader) finds."""
    import openpyxl

    assert set(calc_csv) == set(openpyxl.load_workbook(demo_out / "deficiencies.xlsx", read_only=True).sheetnames)


def test_libreoffice_deficiencies_match_the_csv(calc_csv, demo_out):
    """The Deficiencies sheet as Calc displays it has the rows and columns of deficiencies.csv,
    text for text, and every number equal to the CSV's within half a unit of the last digit Calc
    shows (its display rounding; common practice, no source)."""
    shown = pd.read_csv(calc_csv["Deficiencies"], dtype=str, keep_default_na=False)
    plain = pd.read_csv(demo_out / "deficiencies.csv", dtype=str, keep_default_na=False)
    assert list(shown.columns) == list(plain.columns)
    assert len(shown) == len(plain) > 0
    rounded = 0
    for col in plain.columns:
        for i, (a, b) in enumerate(zip(shown[col], plain[col])):
            where = f"{col} row {i + 1}: Calc shows {a!r}, the CSV has {b!r}"
            try:
                x, y = float(a.replace(",", "")), float(b)
            except ValueError:
                assert a == b, where
                continue
            assert abs(x - y) <= 0.5 * 10.0 ** -_decimals(a) + 1e-9, where
            rounded += _decimals(a) < _decimals(b)
    assert rounded > 0  # Calc shows the workbook's rounding, not the full values


# -------------------------------------------------------------------- GDAL
def _ogr(*args) -> subprocess.CompletedProcess:
    return subprocess.run([OGRINFO, *args], capture_output=True, text=True, timeout=120)


def _sql_one(path, sql: str) -> dict:
    """The first row of an ``ogrinfo -dialect sqlite`` query, as {field: text}."""
    run = _ogr("-q", "-dialect", "sqlite", "-sql", sql, str(path))
    assert run.returncode == 0 and "ERROR" not in run.stderr, f"{sql}: {run.stderr}"
    return dict(re.findall(r"^\s+(\w+) \([^)]*\) = (.*)$", run.stdout, flags=re.M))


@pytest.mark.skipif(OGRINFO is None, reason="GDAL's ogrinfo not installed (.ci/run installs Debian's gdal-bin)")
def test_ogrinfo_opens_the_geopackage_without_warnings(demo_out):
    """``ogrinfo -so -al`` reads every layer of audit.gpkg and says nothing on standard error (a
    GeoPackage version GDAL does not fully support gives a warning there)."""
    run = _ogr("-so", "-al", str(demo_out / "audit.gpkg"))
    assert run.returncode == 0
    assert run.stderr.strip() == "", run.stderr
    with sqlite3.connect(demo_out / "audit.gpkg") as con:
        spatial = {t for (t,) in con.execute("SELECT table_name FROM gpkg_geometry_columns")}
    seen = set(re.findall(r"^Layer name: (\S+)", run.stdout, flags=re.M))
    assert spatial and spatial <= seen


@pytest.mark.skipif(OGRINFO is None, reason="GDAL's ogrinfo not installed (.ci/run installs Debian's gdal-bin)")
def test_every_layer_has_a_style_and_valid_geometry(demo_out):
    """Each layer of gpkg_geometry_columns has its style in layer_styles (sqlite3 reads the
    tables), and every feature's geometry is present and valid by GDAL's SQLite dialect
    (ST_IsValid, the OGC simple-features validity)."""
    path = demo_out / "audit.gpkg"
    with sqlite3.connect(path) as con:
        layers = dict(con.execute("SELECT table_name, column_name FROM gpkg_geometry_columns").fetchall())
        styles = {(t, g): (q or "") + (s or "") for t, g, q, s in con.execute(
            "SELECT f_table_name, f_geometry_column, styleQML, styleSLD FROM layer_styles")}
        counts = {t: con.execute(f'SELECT count(*) FROM "{t}"').fetchone()[0] for t in layers}
    assert layers
    for table, geom in layers.items():
        assert styles.get((table, geom), "").strip(), f"layer {table} has no style in layer_styles"
    # the check can fail: a bow-tie polygon is invalid (OGC simple features)
    control = _sql_one(path, "SELECT ST_IsValid(ST_GeomFromText('POLYGON((0 0, 1 1, 1 0, 0 1, 0 0))')) AS ok")
    if control.get("ok") != "0":
        import geopandas as gpd  # GDAL's SQLite dialect without SpatiaLite: shapely's validity instead

        for table in layers:
            g = gpd.read_file(path, layer=table).geometry
            assert len(g) == counts[table] and g.notna().all() and g.is_valid.all(), table
        return
    for table, geom in layers.items():
        row = _sql_one(path, f'SELECT count(*) AS n, sum(CASE WHEN "{geom}" IS NULL OR NOT ST_IsValid("{geom}") '
                             f'THEN 1 ELSE 0 END) AS bad FROM "{table}"')
        assert int(row["n"]) == counts[table]
        assert counts[table] == 0 or row["bad"] == "0", f"{table}: {row['bad']} invalid geometries"


# -------------------------------------------------------------------- Chromium
class _Links(HTMLParser):
    """The ids, the in-page links (and the section each sits in), the contents and the table rows
    of a page."""

    def __init__(self):
        super().__init__()
        self.ids: list[str] = []
        self.links: list[tuple[str, str]] = []  # (target, the id of the h2 section the link is under)
        self.toc: list[str] = []
        self.h2: list[str] = []
        self.rows: list[tuple[str, list[str], list[str]]] = []  # (section, cell texts, link targets)
        self._section = ""
        self._nav = 0
        self._row = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if a.get("id"):
            self.ids.append(a["id"])
        if tag == "h2" and a.get("id"):
            self._section = a["id"]
            self.h2.append(a["id"])
        if tag == "nav" and a.get("id") == "contents":
            self._nav = 1
        elif tag == "nav" and self._nav:
            self._nav += 1
        if tag == "tr":
            self._row = ([], [])
        if tag in ("td", "th") and self._row is not None:
            self._row[0].append("")
        href = a.get("href") or ""
        if tag == "a" and href.startswith("#"):
            self.links.append((href[1:], self._section))
            if self._nav:
                self.toc.append(href[1:])
            if self._row is not None:
                self._row[1].append(href[1:])

    def handle_endtag(self, tag):
        if tag == "nav" and self._nav:
            self._nav -= 1
        if tag == "tr" and self._row is not None:
            self.rows.append((self._section, *self._row))
            self._row = None

    def handle_data(self, data):
        if self._row is not None and self._row[0]:
            self._row[0][-1] += data


@pytest.fixture(scope="module")
def chromium_dom(demo_out, tmp_path_factory):
    """report.html as Chromium builds it (the DOM after its scripts ran)."""
    if CHROMIUM is None:
        pytest.skip("headless Chromium not installed (.ci/run installs Debian's chromium)")
    d = tmp_path_factory.mktemp("chromium")
    run = subprocess.run([CHROMIUM, *CHROME_FLAGS, f"--user-data-dir={d / 'profile'}", "--virtual-time-budget=10000",
                          "--dump-dom", (demo_out / "report.html").resolve().as_uri()],
                         capture_output=True, text=True, timeout=180)
    assert "<body" in run.stdout, run.stderr[-500:]
    page = _Links()
    page.feed(run.stdout)
    return page


def test_report_links_resolve_in_chromium(chromium_dom, demo_out):
    """The table of contents names every section, every in-page link lands on an element that
    exists, every curve page is reached by a link from outside itself, and each row of the ranked
    table whose curve has a page links to that page (common practice, no source: what a reader of
    the report clicks)."""
    page = chromium_dom
    ids = set(page.ids)
    assert len(ids) == len(page.ids), "an id is used twice"
    assert page.toc, "no table of contents (nav#contents)"
    assert set(page.h2) <= set(page.toc), f"sections missing from the contents: {set(page.h2) - set(page.toc)}"
    assert {t for t, _ in page.links} <= ids, f"links to nowhere: {sorted({t for t, _ in page.links} - ids)}"
    curves = [i for i in page.ids if i.startswith("curve-")]
    assert curves, "no curve pages"
    reached = {t for t, section in page.links if section != t}
    assert set(curves) <= reached, f"curve pages no link reaches: {sorted(set(curves) - reached)}"
    rows = [(cells, targets) for section, cells, targets in page.rows if section == "inventory" and cells]
    defs = pd.read_csv(demo_out / "deficiencies.csv")
    paged = {(r.road_id, int(r.curve_no)) for r in defs.itertuples()
             if pd.notna(r.curve_no) and f"curve-{r.road_id}-{int(r.curve_no)}" in ids}  # roadside rows: no curve
    linked = 0
    for cells, targets in rows[1:]:  # the header row first
        road, curve = cells[1].split()[0], cells[2].strip()
        if curve.isdigit() and (road, int(curve)) in paged:
            assert f"curve-{road}-{curve}" in targets, f"rank {cells[0]}: no link to its curve page"
            linked += 1
    assert linked > 0


@pytest.mark.skipif(CHROMIUM is None, reason="headless Chromium not installed (.ci/run installs Debian's chromium)")
def test_report_renders_on_a_desktop_screen_and_on_a4(demo_out, tmp_path):
    """Chromium draws report.html on a 1366 x 900 desktop screen (a real, non-blank picture, read
    by matplotlib) and prints it to A4 (595 x 842 pt, ISO 216; page size and count from poppler's
    pdfinfo)."""
    url = (demo_out / "report.html").resolve().as_uri()
    common = CHROME_FLAGS + [f"--user-data-dir={tmp_path / 'profile'}", "--virtual-time-budget=10000"]
    shot = tmp_path / "desktop.png"
    subprocess.run([CHROMIUM, *common, "--window-size=1366,900", f"--screenshot={shot}", url],
                   capture_output=True, timeout=180)
    import matplotlib.image as mpimg

    img = mpimg.imread(shot)
    assert img.shape[:2] == (900, 1366)
    assert img[..., :3].std() > 0.05  # not a blank page
    pdf = tmp_path / "report.pdf"
    subprocess.run([CHROMIUM, *common, "--no-pdf-header-footer", f"--print-to-pdf={pdf}", url],
                   capture_output=True, timeout=180)
    assert pdf.exists() and pdf.read_bytes()[:5] == b"%PDF-"
    if PDFINFO is None:
        pytest.skip("pdfinfo not installed (.ci/run installs Debian's poppler-utils); the PDF was written")
    info = subprocess.run([PDFINFO, str(pdf)], capture_output=True, text=True, timeout=60).stdout
    assert int(re.search(r"^Pages:\s+(\d+)", info, flags=re.M).group(1)) >= 1
    w, h = map(float, re.search(r"^Page size:\s+([\d.]+) x ([\d.]+) pts", info, flags=re.M).groups())
    assert abs(w - 595.3) < 1.5 and abs(h - 841.9) < 1.5
