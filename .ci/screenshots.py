"""Pictures of the outputs for a reviewer (``make screenshots``): runs the demo into
out/screenshots/run and renders, under out/screenshots/:

- report-first-page.png     report.html's first screen, on a 1366 x 900 desktop (headless Chromium)
- report-curve-page.png     the first curve page of the report
- report-road-index.png     the per-road index of the report (its first road)
- workbook-summary.png      the workbook's Summary sheet as LibreOffice Calc shows it (its HTML
                            export of that sheet, drawn by Chromium)
- workbook-summary-print.png  the first printed page of the Summary sheet (LibreOffice's PDF, pdftoppm)
- field-sheet.png           the first page of the field sheets, profiles.pdf (poppler's pdftoppm)

A picture whose program is missing (chromium, soffice, pdftoppm, pdftotext), or whose part of
the report is not there, is skipped with the reason. This is a supporting script, not part of
the package.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
OUT = ROOT / "out" / "screenshots"
CHROME_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                "--disable-background-networking", "--disable-component-update", "--disable-sync",
                "--hide-scrollbars", "--virtual-time-budget=10000"]
DESKTOP = "1366,900"


def _tool(*names: str) -> str | None:
    return next((p for p in map(shutil.which, names) if p), None)


def run_demo(folder: Path) -> None:
    """The whole audit on the sample network, with the field sheets."""
    sys.path.insert(0, str(ROOT))
    from pipeline.cli import main

    code = main(["demo", "--out", str(folder), "--profiles-pdf", "--quiet"])
    if code != 0:
        raise SystemExit(f"screenshots: the demo failed (exit code {code})")


def chromium_shot(chromium: str, html: Path, png: Path, work: Path) -> None:
    """A desktop-size screenshot of the top of an HTML file."""
    subprocess.run([chromium, *CHROME_FLAGS, f"--user-data-dir={work / 'chromium'}", f"--window-size={DESKTOP}",
                    f"--screenshot={png}", html.resolve().as_uri()], capture_output=True, timeout=300, check=True)
    if not png.exists():
        raise RuntimeError("Chromium wrote no picture")


def page_from(report: str, anchor: str) -> str:
    """The report from the element with id ``anchor`` on: its head (the styles) and the body
    starting at that element, so a screenshot of the top of the page shows that section."""
    m = re.search(r"<[a-zA-Z0-9]+[^<>]*\sid=['\"]" + re.escape(anchor) + r"['\"]", report)
    body = report.find("<body")
    body_end = report.find(">", body) + 1
    return report[:body_end] + report[m.start():]


def first_id(report: str, prefix: str) -> str | None:
    m = re.search(r"\sid=['\"](" + re.escape(prefix) + r"[^'\"]+)['\"]", report)
    return m.group(1) if m else None


def report_section(chromium: str, report: str, anchor: str, png: Path, work: Path) -> None:
    copy = work / f"report-{anchor}.html"
    copy.write_text(page_from(report, anchor), encoding="utf-8")
    chromium_shot(chromium, copy, png, work)


def pdf_page_png(pdftoppm: str, pdf: Path, page: int, png: Path, dpi: int = 90) -> None:
    """One page of a PDF as a PNG (poppler's pdftoppm)."""
    stem = png.with_suffix("")
    subprocess.run([pdftoppm, "-png", "-r", str(dpi), "-f", str(page), "-l", str(page), "-singlefile", str(pdf),
                    str(stem)], capture_output=True, timeout=300, check=True)
    if not png.exists():
        raise RuntimeError(f"pdftoppm wrote no picture of page {page}")


def summary_page(pdftotext: str | None, pdf: Path, marker: str) -> int:
    """The first page of the workbook's PDF that holds the Summary sheet's title (page 1 without
    pdftotext)."""
    if pdftotext is None:
        return 1
    text = subprocess.run([pdftotext, "-layout", str(pdf), "-"], capture_output=True, text=True,
                          timeout=300).stdout
    for i, page in enumerate(text.split("\f"), start=1):
        if marker in page:
            return i
    return 1


def _summary_marker(xlsx: Path) -> str:
    """The Summary sheet's first cell (openpyxl reads it), to find its page in the printed workbook."""
    import openpyxl

    wb = openpyxl.load_workbook(xlsx, read_only=True)
    if "Summary" not in wb.sheetnames:
        raise RuntimeError("the workbook has no Summary sheet")
    return str(next(wb["Summary"].iter_rows(max_row=1, values_only=True))[0] or "Summary")


def libreoffice(soffice: str, xlsx: Path, to: str, work: Path) -> Path:
    """The workbook converted by LibreOffice Calc (its own profile) to ``to`` (pdf, html)."""
    subprocess.run([soffice, f"-env:UserInstallation={(work / 'libreoffice').as_uri()}", "--headless",
                    "--convert-to", to, "--outdir", str(work), str(xlsx)], capture_output=True, timeout=300,
                   check=True)
    out = work / f"{xlsx.stem}.{to}"
    if not out.exists():
        raise RuntimeError(f"LibreOffice wrote no {to}")
    return out


def workbook_summary_print(soffice: str, pdftoppm: str, pdftotext: str | None, xlsx: Path, png: Path,
                           work: Path) -> None:
    """The workbook printed to PDF by LibreOffice Calc, the Summary's first page as PNG."""
    marker = _summary_marker(xlsx)
    pdf = libreoffice(soffice, xlsx, "pdf", work)
    pdf_page_png(pdftoppm, pdf, summary_page(pdftotext, pdf, marker), png)


def workbook_summary_screen(soffice: str, chromium: str, xlsx: Path, png: Path, work: Path) -> None:
    """The Summary sheet as LibreOffice Calc exports it to HTML (its first sheet), drawn by Chromium."""
    _summary_marker(xlsx)
    page = libreoffice(soffice, xlsx, "html", work).read_text(encoding="utf-8", errors="replace")
    sheets = [m.start() for m in re.finditer(r"<a name=\"table\d+\">", page, flags=re.I)]
    names = re.findall(r"<a name=\"table\d+\"><h1>[^<]*<em>([^<]*)</em>", page, flags=re.I)
    if "Summary" not in names:
        raise RuntimeError("LibreOffice's HTML export has no Summary sheet")
    i = names.index("Summary")
    end = sheets[i + 1] if i + 1 < len(sheets) else len(page)
    body = page.lower().find("<body")
    copy = work / "summary.html"
    copy.write_text(page[:page.find(">", body) + 1] + page[sheets[i]:end] + "</body></html>", encoding="utf-8")
    chromium_shot(chromium, copy, png, work)


def main() -> int:
    OUT.mkdir(parents=True, exist_ok=True)
    work = OUT / ".work"
    shutil.rmtree(work, ignore_errors=True)
    work.mkdir()
    run = OUT / "run"
    print(f"screenshots: running the demo into {run.relative_to(ROOT)}")
    run_demo(run)
    chromium = _tool("chromium", "chromium-browser")
    soffice = _tool("soffice", "libreoffice")
    pdftoppm, pdftotext = _tool("pdftoppm"), _tool("pdftotext")
    report = (run / "report.html").read_text(encoding="utf-8") if (run / "report.html").exists() else None
    made, skipped = [], []

    def attempt(name: str, why_not: str | None, make) -> None:
        png = OUT / name
        png.unlink(missing_ok=True)
        if why_not:
            skipped.append((name, why_not))
            return
        try:
            make(png)
            made.append(name)
        except Exception as exc:  # one picture lost, the others still made
            skipped.append((name, f"{type(exc).__name__}: {exc}"))

    no_chromium = "headless Chromium not installed (Debian package chromium)" if chromium is None else None
    no_report = "report.html was not written" if report is None else None
    attempt("report-first-page.png", no_chromium or no_report,
            lambda png: chromium_shot(chromium, run / "report.html", png, work))
    curve = first_id(report or "", "curve-")
    attempt("report-curve-page.png", no_chromium or no_report or (None if curve else "the report has no curve page"),
            lambda png: report_section(chromium, report, curve, png, work))
    road = first_id(report or "", "road-")
    attempt("report-road-index.png",
            no_chromium or no_report or (None if road else "the report has no per-road index (no id='road-...')"),
            lambda png: report_section(chromium, report, road, png, work))
    no_soffice = "LibreOffice not installed (Debian package libreoffice-calc-nogui)" if soffice is None else None
    no_pdftoppm = "pdftoppm not installed (Debian package poppler-utils)" if pdftoppm is None else None
    attempt("workbook-summary.png", no_soffice or no_chromium,
            lambda png: workbook_summary_screen(soffice, chromium, run / "deficiencies.xlsx", png, work))
    attempt("workbook-summary-print.png", no_soffice or no_pdftoppm,
            lambda png: workbook_summary_print(soffice, pdftoppm, pdftotext, run / "deficiencies.xlsx", png, work))
    attempt("field-sheet.png",
            no_pdftoppm or (None if (run / "profiles.pdf").exists() else "profiles.pdf was not written"),
            lambda png: pdf_page_png(pdftoppm, run / "profiles.pdf", 1, png))
    shutil.rmtree(work, ignore_errors=True)
    for name in made:
        print(f"made     {(OUT / name).relative_to(ROOT)}")
    for name, why in skipped:
        print(f"skipped  {(OUT / name).relative_to(ROOT)}: {why}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
