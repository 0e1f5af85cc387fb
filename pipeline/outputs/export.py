"""Write every output file of a run: ``write_outputs`` and what it calls on.

The data outputs (CSV, Parquet, workbook, GeoPackage) come first and a fault in
them stops the run; the report, its figures and the field sheets come after, and
a fault there loses that output only. The files are written into the staging
folder of :func:`staging_folder` (:mod:`pipeline.outputs.runfiles`).

The functions and tables each output is made with live in the modules named for
what they write (:mod:`~pipeline.outputs.tables`, :mod:`~pipeline.outputs.workbook`,
:mod:`~pipeline.outputs.geopackage`, :mod:`~pipeline.outputs.runfiles`,
:mod:`~pipeline.outputs.method`, :mod:`~pipeline.outputs.report`); they are
importable from here too.
"""

from __future__ import annotations

import contextlib
from pathlib import Path

from . import report
from .geopackage import write_gpkg
from .method import CAUTION_TEXT, method_lines, priority_formula, priority_terms, run_units
from .runfiles import staging_folder, write_run_json
from .tables import (COLUMN_NOTES, CURVE_CONTRACT, CURVE_EXTRA, DEFICIENCY_CONTRACT, DEFICIENCY_EXTRA, column_note,
                     curves_table, deficiencies_table, round_for_reading, write_profiles_from_work, write_tables)
from .workbook import data_quality_lines, summary_sheet_lines, write_xlsx

__all__ = ["CAUTION_TEXT", "COLUMN_NOTES", "CURVE_CONTRACT", "CURVE_EXTRA", "DEFICIENCY_CONTRACT", "DEFICIENCY_EXTRA",
           "column_note", "curves_table", "data_quality_lines", "deficiencies_table", "method_lines", "output_steps",
           "priority_formula", "priority_terms", "staging_folder", "write_gpkg", "write_outputs",
           "write_profiles_from_work", "write_run_json", "write_xlsx"]


def _failure(what: str, exc: BaseException) -> dict:
    return {"output": what, "error": f"{type(exc).__name__}: {' '.join(str(exc).split())[:200]}"}


@contextlib.contextmanager
def _no_progress(name, total=None, unit=""):
    yield lambda n=1, what=None: None


def output_steps(pages: list | None, roads: list | None, cfg) -> int:
    """How many steps writing the outputs takes, as the progress display counts them: the
    tables, the workbook, the GeoPackage, the map, each curve figure, each road's long profile,
    the report and the PDF.

    Parameters
    ----------
    pages : list or None
        The report's curve pages (``None`` when the report cannot be made).
    roads : list or None
        The report's road profiles (:func:`pipeline.outputs.report.road_pages`).
    cfg : Config
        The run's settings (``output.profiles_pdf``).

    Returns
    -------
    int
        The number of steps.
    """
    report_steps = 0 if pages is None else 2 + len(pages) + len(roads or ())
    return 3 + report_steps + (1 if cfg["output.profiles_pdf"] else 0)


def write_outputs(folder: Path, result, summary: dict, cfg, pool=None, progress=None) -> list[dict]:
    """Write every output file of the run into ``folder``, in the run's units.

    The data outputs (CSV, workbook, GeoPackage, Parquet) are written first and a
    fault in them stops the run. The report, its figures and the PDF come after:
    a fault there is caught and returned, the output at fault is left out rather
    than left half-written, and one curve's figure failing gives a placeholder on
    its page instead of losing the report. With a pool, the curve figures are
    drawn there while the tables, the workbook,
    the GeoPackage and the map are written here.

    Parameters
    ----------
    folder : pathlib.Path
        The (staging) output folder.
    result : NetworkResult
        The run's result.
    summary : dict
        The run summary so far (``run.json`` without the failures and end time).
    cfg : Config
        The run's settings (``output.*`` choose the units, the curve pages and the PDF).
    pool : concurrent.futures.Executor, optional
        A process pool; with it the report's figures are drawn there while the
        tables are written here.
    progress : Progress, optional
        Where to report the steps (:func:`output_steps`) as they are done.

    Returns
    -------
    list of dict
        The outputs lost, each ``{"output", "error"}`` (recorded in ``run.json``).
    """
    failures: list[dict] = []
    units = run_units(cfg)
    try:
        pages = report.report_pages(result, cfg, units)
        roads = report.road_pages(result, cfg, units)
    except Exception as exc:  # the report is lost, the data are not
        pages = roads = None
        failures.append(_failure("report.html", exc))
    stage = progress.stage if progress is not None else _no_progress
    with stage("writing outputs", total=output_steps(pages, roads, cfg)) as tick:
        use_pool = pool is not None and pages is not None
        futures = [pool.submit(report.curve_png, p["spec"]) for p in pages] if use_pool else None
        road_futures = [pool.submit(report.road_png, p["spec"]) for p in roads] if use_pool else None
        roadside = _roadside_figures(result, cfg, pool if use_pool else None, failures) if pages is not None else {}
        method = _write_data_outputs(folder, result, summary, cfg, units, tick)
        if pages is not None:
            _write_report(folder, result, summary, cfg, units, method, pages, futures, failures, roads,
                          road_futures, tick, roadside)
        if cfg["output.profiles_pdf"]:
            try:
                summary["profiles_pdf"] = report.write_profiles_pdf(folder / "profiles.pdf", result, units,
                                                                    cfg["output.sheet_paper"])
            except Exception as exc:
                (folder / "profiles.pdf").unlink(missing_ok=True)
                failures.append(_failure("profiles.pdf", exc))
            tick(what="profiles.pdf")
    return failures


def _roadside_figures(result, cfg, pool, failures: list[dict]) -> dict | None:
    """The roadside rows' plan views (:func:`pipeline.outputs.sight_figure.roadside_pngs`), started
    in ``pool`` when given; ``None`` (drawn with the report) where they cannot be gathered."""
    try:
        return report.roadside_pngs(result, cfg, pool) if pool is not None else None
    except Exception as exc:
        failures.append(_failure("report.html roadside plan views", exc))
        return None


def _write_data_outputs(folder: Path, result, summary: dict, cfg, units, tick) -> list[tuple[str, str]]:
    """The Parquet profiles, the CSV tables, the workbook and the GeoPackage; returns the method lines."""
    ev = result.evaluation
    curves = curves_table(ev.curves)
    defs = deficiencies_table(ev.inventory)
    hcurves = result.hcurves
    roads = result.road_table()
    notes = result.data_notes()
    out = {name: round_for_reading(units.table(frame)) for name, frame in
           (("curves", curves), ("deficiencies", defs), ("hcurves", hcurves), ("roads", roads), ("notes", notes),
            ("summary", ev.summary))}
    write_profiles_from_work(folder / "profiles.parquet", result, units)
    write_tables(folder, out)
    tick(what="tables")
    method = method_lines(result, cfg)
    write_xlsx(folder / "deficiencies.xlsx",
               {"_summary": out["summary"], "Deficiencies": out["deficiencies"], "Curves": out["curves"],
                "Horizontal curves": out["hcurves"], "Roads": out["roads"], "Data notes": out["notes"]},
               method, summary_sheet_lines(result, summary, units, curves, defs), units,
               notes={"priority_score": f"higher first: {priority_formula(cfg)}; {priority_terms(cfg)}"})
    tick(what="workbook")
    write_gpkg(folder / "audit.gpkg", result, curves, defs, hcurves, units)
    tick(what="GeoPackage")
    return method


def _write_report(folder: Path, result, summary: dict, cfg, units, method: list[tuple[str, str]],
                  pages: list[dict], futures: list | None, failures: list[dict], roads: list[dict],
                  road_futures: list | None, tick, roadside: dict | None = None) -> None:
    """The overview map (inline SVG, its labels linked to the curve pages), the curve figures,
    the roads' long profiles and the roadside plan views (from ``futures``, ``road_futures`` and
    ``roadside`` where drawn in a pool) and report.html; a figure that fails gives a placeholder,
    a report that fails is left out."""
    try:
        paged = {(p["road_id"], int(p["curve_no"])) for p in pages}
        map_svg = report.network_map_svg(result, result.evaluation.inventory, units, paged)
    except Exception as exc:
        map_svg = ""  # a placeholder in the report
        failures.append(_failure("report.html overview map", exc))
    tick(what="map")
    pngs = []
    for i, page in enumerate(pages):
        try:
            pngs.append(futures[i].result() if futures is not None else report.curve_png(page["spec"]))
        except Exception as exc:
            pngs.append(None)  # a placeholder on that page
            failures.append(_failure(f"report.html figure of road {page['road_id']} curve {page['curve_no']}", exc))
        tick(what=f"figure {i + 1} of {len(pages)}")
    road_pngs = {}
    for i, road in enumerate(roads):
        try:
            road_pngs[road["road_id"]] = (road_futures[i].result() if road_futures is not None
                                          else report.road_png(road["spec"]))
        except Exception as exc:
            road_pngs[road["road_id"]] = None  # a placeholder in its section
            failures.append(_failure(f"report.html long profile of road {road['road_id']}", exc))
        tick(what=f"road profile {i + 1} of {len(roads)}")
    try:
        html_text = report.build_report(result, summary, cfg, units, CAUTION_TEXT, method, pages, pngs, map_svg,
                                        road_pngs, roadside)
        (folder / "report.html").write_text(html_text, encoding="utf-8")
    except Exception as exc:
        (folder / "report.html").unlink(missing_ok=True)
        failures.append(_failure("report.html", exc))
    tick(what="report.html")
