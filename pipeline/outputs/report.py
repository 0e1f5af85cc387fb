"""The audit report ``report.html``.

``report.html`` is one self-contained file: figures are PNG images inlined as
data URIs and the style sheet is inline, so it opens without a network and
prints to A4 or Letter (each section and each deficient curve starts a new page;
:mod:`pipeline.outputs.report_style`). Sections: contents, a written brief of the
worst sites with what the audit and the data can and cannot say, summary,
overview map, ranked inventory (top 50, the rest in the workbook), one page per
deficient curve with its long profile, a road-by-road index (each road's long
profile, curves, deficient stretches and data notes), method and criteria set,
data notes and skipped roads, and the cautions. Curve pages are reached by
:func:`curve_anchor`, road sections by :func:`road_anchor`.

The figures are drawn in :mod:`pipeline.outputs.figures` and the field sheets
written in :mod:`pipeline.outputs.fieldsheets`; their functions are importable
from here too.
"""

from __future__ import annotations

import html
from datetime import datetime, timezone

import numpy as np
import pandas as pd

from .fieldsheets import write_profiles_pdf
from .method import data_quality_facts
from .figures import SEVERITY_STYLE, curve_figure, curve_png, png_data_uri, road_figure
from .figures import kept_figure as _kept_figure
from .anchors import curve_anchor, road_anchor
from .mapview import network_map_svg
from .report_style import CSS, FIGURE_MISSING, LOADED_JS, page_css
from .sight_figure import roadside_pngs, roadside_section  # noqa: F401  (export draws them through this module)
from .sites import site_text, worst_sites
from .tables import curves_table, deficiencies_table
from .workbook import brief_lines

__all__ = ["SEVERITY_STYLE", "build_report", "curve_anchor", "curve_figure", "curve_png", "data_quality_html",
           "network_map_svg", "png_data_uri", "report_pages", "road_anchor", "road_figure", "road_pages", "road_png",
           "write_profiles_pdf"]


def _e(v) -> str:
    if v is None or (isinstance(v, float) and not np.isfinite(v)):
        return ""
    return html.escape(str(v))


def _num(v, nd=0) -> str:
    try:
        f = float(v)
    except (TypeError, ValueError):
        return _e(v)
    return "" if not np.isfinite(f) else f"{f:,.{nd}f}"




def _road_anchors(road_ids) -> dict:
    """Every road's anchor, unique over the network: :func:`road_anchor`, with ``-2``, ``-3`` ...
    after a slug already taken."""
    out, seen = {}, {}
    for rid in road_ids:
        a = road_anchor(rid)
        seen[a] = seen.get(a, 0) + 1
        out[rid] = a if seen[a] == 1 else f"{a}-{seen[a]}"
    return out


TOC = (("brief", "In brief: the worst sites"), ("data-quality", "What this ground data can support"),
       ("summary", "Network summary"), ("map", "Network overview"), ("inventory", "Ranked inventory"),
       ("curves", "Deficient curves"), ("roadside", "Roadside sight (3D)"), ("roads", "Road by road"),
       ("method", "Method and criteria"),
       ("notes", "Data notes and skipped roads"), ("cautions", "Cautions"))


def _toc(roads: list[tuple[str, str, str]] = ()) -> str:
    """The table of contents: a link to every section, and under "Road by road" one to each road
    (``roads``: anchor, id, name)."""
    items = []
    for a, t in TOC:
        sub = ""
        if a == "roads" and roads:
            sub = "<p class='small toc-roads'>" + " &middot; ".join(
                f"<a href='#{ra}'>{_e(rid)}{(' ' + _e(name)) if name else ''}</a>" for ra, rid, name in roads) + "</p>"
        items.append(f"<li><a href='#{a}'>{_e(t)}</a>{sub}</li>")
    return f"<nav id='contents'><h2>Contents</h2><ol>{''.join(items)}</ol></nav>"


def _table(frame: pd.DataFrame, numeric_nd: dict[str, int], raw: tuple[str, ...] = ()) -> str:
    """A table as HTML; the columns in ``numeric_nd`` right-aligned with that many decimals,
    those in ``raw`` written as given (HTML made here, e.g. links)."""
    head = "".join(f"<th>{_e(str(c).replace('_', ' '))}</th>" for c in frame.columns)
    body = []
    for _, r in frame.iterrows():
        cells = []
        for c in frame.columns:
            if c in raw:
                cells.append(f"<td>{r[c]}</td>")
            elif c in numeric_nd:
                cells.append(f'<td class="n">{_num(r[c], numeric_nd[c])}</td>')
            else:
                cells.append(f"<td>{_e(r[c])}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _words(v, units) -> str:
    """Words written by the stages (in metric units) as HTML in the run's units
    (:meth:`pipeline.core.units.OutputUnits.text`); empty for a missing value."""
    return _e(units.text(v)) if isinstance(v, str) else _e(v)


def _facts(lines, escape: bool = True) -> str:
    """(heading, text) lines as a two-column facts table."""
    return "".join(f"<tr><td>{_e(k)}</td><td>{_e(v) if escape else v}</td></tr>" for k, v in lines)


def report_pages(result, cfg, units) -> list[dict]:
    """The deficient curves given a page, in rank order, each with what its figure needs.

    Parameters
    ----------
    result : NetworkResult
        The run's result (inventory, curves, horizontal curves, profiles, criteria).
    cfg : Config
        The run's settings (``output.report_curves``, the most curves given a page).
    units : OutputUnits
        The run's output units.

    Returns
    -------
    list of dict
        ``road_id``, ``curve_no``, ``curve``, ``rows`` (its stretches), ``title`` and
        ``spec``, the keyword arguments of :func:`curve_figure` (only the stretch of
        profile the figure shows, small enough to send to another process).
    """
    inv, curves = result.evaluation.inventory, result.evaluation.curves
    if not len(inv):
        return []
    rules = result.criteria.sight_rules()
    hcurves_all = result.hcurves
    order = inv.dropna(subset=["curve_no"]).groupby(["road_id", "curve_no"], sort=False)["rank"].min()
    cidx = curves.set_index(["road_id", "curve_no"])
    # a stretch whose sight no fitted curve limits (curve_no 0) has no curve page
    order = order[[key in cidx.index for key in order.index]]
    order = order.sort_values().head(int(cfg["output.report_curves"]))
    profiles = result.road_profiles({rid for rid, _ in order.index})
    pages = []
    for (rid, cno), rank in order.items():
        c = cidx.loc[(rid, cno)]
        c = c if isinstance(c, pd.Series) else c.iloc[0]
        c = c.copy()
        c["curve_no"] = cno
        rows = inv[(inv["road_id"] == rid) & (inv["curve_no"] == cno)]
        hc = hcurves_all[hcurves_all["road_id"] == rid] if len(hcurves_all) else hcurves_all
        name = rows["road_name"].iloc[0] if isinstance(rows["road_name"].iloc[0], str) else ""
        title = f"{rid} {name}: curve {cno} ({c['kind']}), rank {int(rank)}"
        # only the stretch the figure shows travels to a drawing process
        span = max(float(rows["ssd_required_m"].max()), 150.0) * 1.1 + 50.0
        lo, hi = min(c["pvc_m"], rows["from_m"].min()) - span, max(c["pvt_m"], rows["to_m"].max()) + span
        rp = profiles[rid]
        rp = rp[(rp["chainage_m"] >= lo) & (rp["chainage_m"] <= hi)]
        pages.append({"road_id": rid, "curve_no": cno, "curve": c, "rows": rows, "title": title,
                      "spec": dict(prof=rp, curve=c, rows=rows, hcurves=hc, rules=rules, units=units, title=title)})
    return pages


def road_pages(result, cfg, units) -> list[dict]:
    """The roads whose long profile the road-by-road index shows, each with what its figure needs.

    Roads with a deficient or undetermined stretch come first (by their best rank), then the
    other evaluated roads in road order; at most ``output.report_road_profiles`` of them (the
    index says which roads go without one).

    Parameters
    ----------
    result : NetworkResult
        The run's result (road table, profiles, curves and inventory).
    cfg : Config
        The run's settings (``output.report_road_profiles``).
    units : OutputUnits
        The run's output units.

    Returns
    -------
    list of dict
        ``road_id`` and ``spec``, the keyword arguments of :func:`road_figure` (the whole
        road in one compact figure).
    """
    roads = result.road_table()
    ev = result.evaluation
    evaluated = roads[roads["status"] == "evaluated"]
    best = ev.inventory.groupby("road_id")["rank"].min() if len(ev.inventory) else pd.Series(dtype=float)
    order = sorted(range(len(evaluated)), key=lambda i: (best.get(evaluated["road_id"].iloc[i], np.inf), i))
    chosen = [evaluated.iloc[i] for i in order][: int(cfg["output.report_road_profiles"])]
    profiles = result.road_profiles([r["road_id"] for r in chosen])
    pages = []
    for r in chosen:
        rid = r["road_id"]
        rp = profiles.get(rid)
        if rp is None or not len(rp):
            continue
        name = r["name"] if isinstance(r["name"], str) else ""
        rp = rp[["chainage_m", "ground_z_m", "fitted_z_m"]]
        pages.append({"road_id": rid, "spec": dict(
            prof=rp, curves=ev.curves[ev.curves["road_id"] == rid], rows=ev.inventory[ev.inventory["road_id"] == rid],
            units=units, title=f"{rid} {name}: long profile".replace("  ", " "), lo=float(rp["chainage_m"].min()),
            hi=float(rp["chainage_m"].max()), size=(10.5, 3.2))})
    return pages


def road_png(spec: dict) -> str:
    """One road's long profile for the road-by-road index as an inline PNG.

    A top-level function, so that a pool of processes can draw the roads side by side. Each
    process (each thread) draws its roads one after another into one kept figure, at
    :data:`ROAD_PNG_DPI`, and writes them as 256-colour PNGs (:func:`_palette_png_uri`): about a
    fifth less drawing time per road than a new figure and a full-colour PNG each, a quarter of
    the bytes, and the same picture.

    Parameters
    ----------
    spec : dict
        The keyword arguments of :func:`road_figure` (a page's ``spec`` from :func:`road_pages`).

    Returns
    -------
    str
        A ``data:image/png;base64,...`` URI.
    """
    fig = road_figure(**spec, fig=_kept_figure(tuple(spec.get("size", (11.0, 4.6))), dpi=ROAD_PNG_DPI))
    return _palette_png_uri(fig)


ROAD_PNG_DPI = 90  # the road profiles' resolution: 945 by 288 pixels at their 10.5 by 3.2 inches
def _palette_png_uri(fig) -> str:
    """A figure as an inline PNG of at most 256 colours (a line drawing has few), which is about
    a quarter the size of the full-colour PNG and looks the same (no channel off by more than a
    few levels in 255).

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        A figure on the Agg canvas, drawn at its own dpi; not closed.

    Returns
    -------
    str
        A ``data:image/png;base64,...`` URI.
    """
    import base64
    import io

    from PIL import Image

    fig.canvas.draw()
    w, h = fig.canvas.get_width_height()
    rgb = Image.frombuffer("RGBA", (w, h), fig.canvas.buffer_rgba(), "raw", "RGBA", 0, 1).convert("RGB")
    buf = io.BytesIO()
    rgb.quantize(colors=256, method=Image.Quantize.FASTOCTREE).save(buf, format="png")
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def data_quality_html(dq: dict | None, units) -> str:
    """The report's statement of what the ground data can support.

    Parameters
    ----------
    dq : dict or None
        The run's data-quality statement (:func:`pipeline.evaluate.quality.data_quality`).
    units : OutputUnits
        The run's output units.

    Returns
    -------
    str
        A heading, a facts table and the list of what the data cannot judge; empty
        without a statement.
    """
    if not dq:
        return ""
    facts = data_quality_facts(dq, units)
    words = "".join(f"<li>{_e(units.text(t))}</li>" for t in dq["cannot_judge"])
    return (f"<h3 id='data-quality'>What this ground data can support</h3><table class='facts'>{_facts(facts)}"
            f"</table><ul>{words}</ul>")


def build_report(result, summary: dict, cfg, units, caution: str, method: list[tuple[str, str]],
                 pages: list[dict] | None = None, pngs: list[str] | None = None, map_svg: str | None = None,
                 road_pngs: dict | None = None, roadside_pngs: dict | None = None) -> str:
    """The whole report as one HTML string.

    Parameters
    ----------
    result : NetworkResult
        The run's result.
    summary : dict
        The run summary (``roads``, ``version``, ``started_utc``, ``evidence``,
        ``data_quality``, ``notes``).
    cfg : Config
        The run's settings.
    units : OutputUnits
        The run's output units.
    caution : str
        The caution, shown at the top and at the end.
    method : list of (str, str)
        The method and criteria (:func:`pipeline.outputs.method.method_lines`).
    pages : list of dict, optional
        The curve pages (:func:`report_pages`); made here when not given.
    pngs : list of str, optional
        Each page's figure as a data URI, ``None`` or empty for a placeholder;
        drawn here when not given.
    map_svg : str, optional
        The overview map as inline SVG (:func:`network_map_svg`), empty for a
        placeholder; drawn here (without links to the curve pages) when not given.
    road_pngs : dict, optional
        Each road's long profile (:func:`road_pages`) as a data URI by road id, ``None`` or
        empty for a placeholder; a road not in it has no profile in the report. Drawn here
        when not given.
    roadside_pngs : dict, optional
        The roadside rows' plan views by rank
        (:func:`pipeline.outputs.sight_figure.roadside_pngs`); drawn here when not given.

    Returns
    -------
    str
        The HTML document, written at the current UTC time.
    """
    if pages is None:
        pages = report_pages(result, cfg, units)
    if pngs is None:
        pngs = [curve_png(p["spec"]) for p in pages]
    if road_pngs is None:
        road_pngs = {p["road_id"]: road_png(p["spec"]) for p in road_pages(result, cfg, units)}
    roads = result.road_table()
    anchors = _road_anchors(roads["road_id"])
    paged = {(p["road_id"], int(p["curve_no"])) for p in pages}
    parts = _head(result, summary, units, caution)
    parts.append(_toc([(anchors[r], r, n if isinstance(n, str) else "") for r, n in zip(roads["road_id"], roads["name"])]))
    parts += _brief_section(result, summary, units, paged, anchors)
    parts += _summary_section(result, summary, units)
    parts += _map_section(result, units, map_svg)
    parts += ["<div class='wide'>", *_inventory_section(result.evaluation.inventory, units, paged, anchors), "</div>"]
    parts += _curve_section(pages, pngs, units)
    parts += roadside_section(result, units, cfg, roadside_pngs)
    parts += _roads_section(result, cfg, units, roads, paged, anchors, road_pngs)
    parts += _method_section(method)
    parts += _notes_section(result, summary, units)
    parts += _cautions_section(caution)
    return "".join(parts)


def _head(result, summary: dict, units, caution: str) -> list[str]:
    """The document head, the title, the run line and the caution."""
    name = _e(result.criteria.params["name"])
    return [f"<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
            f"<title>Sight distance audit: {name}</title>"
            f"<style>{CSS}{page_css(units.us)}</style><script>{LOADED_JS}</script></head><body>",
            "<h1>Stopping-sight-distance screening audit</h1>",
            f"<p class='small'>sightaudit {summary['version']}, run {summary['started_utc']}; criteria "
            f"{name} ({_e(result.criteria.params['title'])}); units: "
            f"{_e(units.length_label)}, {_e(units.speed_label)}.</p>",
            f"<p class='caution'>{_e(caution)}</p>"]


def _summary_cards(ev, r: dict, units) -> list[tuple[str, str]]:
    """The summary's headline figures: (name, value)."""
    inv, curves = ev.inventory, ev.curves
    net = ev.summary[ev.summary["road_class"] == "network"].iloc[0] if len(ev.summary) else None
    dist = (float(net["km_audited"]) if net is not None else 0.0) / units.km_per_distance
    return [("length audited", f"{dist:,.1f} {units.distance_label}"),
            ("roads evaluated", f"{r['evaluated']} of {r['in']}"),
            ("roads skipped", f"{r['skipped']}"),
            ("at substituted speeds", f"{r.get('judged_at_substituted_speeds', 0)}"),
            ("vertical curves", f"{len(curves)}"),
            ("deficient curves", f"{int(curves['deficient'].sum()) if len(curves) else 0}"),
            ("undetermined curves", f"{int((curves['verdict'] == 'undetermined').sum()) if len(curves) else 0}"),
            ("deficient stretches", f"{int((inv['verdict'] == 'deficient').sum()) if len(inv) else 0}"),
            ("severe stretches", f"{int((inv['severity'] == 'severe').sum()) if len(inv) else 0}"),
            ("hiding a hazard", f"{int((inv['hidden_hazard'] != 'none').sum()) if len(inv) else 0}")]


def _summary_section(result, summary: dict, units) -> list[str]:
    """Network summary: headline cards, overridden checks, deficient length, by road class, data quality."""
    ev = result.evaluation
    net = ev.summary[ev.summary["road_class"] == "network"].iloc[0] if len(ev.summary) else None
    sev_km = {s: float(net[f"deficient_km_{s}"]) / units.km_per_distance if net is not None else 0.0
              for s in ("minor", "moderate", "severe")}
    parts = ["<h2 id='summary'>Network summary</h2><div class='cards'>"]
    parts += [f"<div class='card'><b class='figure' data-name='{_e(k)}'>{_e(v)}</b>{_e(k)}</div>"
              for k, v in _summary_cards(ev, summary["roads"], units)]
    parts.append("</div>")
    overridden = summary.get("evidence", {}).get("overridden", [])
    if overridden:
        parts.append(f"<p class='caution'>Checks on the inputs overridden by the settings (checks.override): "
                     f"{_e(', '.join(overridden))}; see the data notes.</p>")
    parts.append(f"<p>Deficient length (each direction counted): minor {sev_km['minor']:.2f}, moderate "
                 f"{sev_km['moderate']:.2f}, severe {sev_km['severe']:.2f} {units.distance_label}.</p>")
    by_class = units.table(ev.summary)
    nd = {c: (2 if {"km", "mi"} & set(c.split("_")) else 0) for c in by_class.columns if c != "road_class"}
    parts.append("<h3>By road class</h3>" + _table(by_class, nd))
    return parts


def _brief_section(result, summary: dict, units, paged: set, anchors: dict) -> list[str]:
    """The worst sites in plain sentences, and what this audit can and cannot say.

    The counts and the site sentences are the workbook's (:func:`pipeline.outputs.workbook.brief_lines`,
    :func:`pipeline.outputs.sites.worst_sites`), with where each site is, the speed its sight
    supports and how sure the verdict is added; what the data can and cannot support is
    :func:`data_quality_html`.
    """
    ev = result.evaluation
    defs = units.table(deficiencies_table(ev.inventory))
    sheets = {"_summary": units.table(ev.summary), "Deficiencies": defs,
              "Curves": units.table(curves_table(ev.curves)), "Roads": units.table(result.road_table())}
    counts = dict(brief_lines(sheets)).get("In brief", "")
    parts = ["<h2 id='brief'>In brief: the worst sites</h2>", f"<p>{_e(counts)}</p>"]
    sites = worst_sites(defs)
    if len(sites):
        items = []
        for _, r in sites.iterrows():
            rid, cno = r["road_id"], (int(r["curve_no"]) if pd.notna(r["curve_no"]) else None)
            if cno is None:  # a roadside row of the 3D sight lines: its entry in the roadside section
                rank = f"<a href='#roadside-{int(r['rank'])}'>Rank {int(r['rank'])}</a>"
            else:
                rank = (f"<a href='#{curve_anchor(rid, cno)}'>Rank {int(r['rank'])}</a>" if (rid, cno) in paged
                        else f"Rank {int(r['rank'])}")
            road = f" <a class='small' href='#{anchors[rid]}'>(road {_e(rid)})</a>" if rid in anchors else ""
            items.append(f"<li><b>{rank}</b>: {_e(site_text(r))} {_e(_where_text(r, units))}{road}</li>")
        parts.append(f"<ol class='sites'>{''.join(items)}</ol>")
    else:
        parts.append("<p>No curve on the audited roads is deficient at these criteria.</p>")
    crit = result.criteria.params
    parts.append(
        "<h3>What this audit can and cannot say</h3>"
        f"<p>It can say where, on the vertical alignment recovered from this ground data, the sight distance a "
        f"driver has (over crests by day, within the headlight beam on sags at night) falls short of the stopping "
        f"sight distance {_e(crit['name'])} requires for the speed judged at, in which direction, by how much, "
        f"how sure that verdict is at this data quality, and which sites to look at first. It cannot say what "
        f"the ground data cannot resolve (below), nor anything of horizontal sight lines past cuttings, "
        f"buildings or vegetation; the caution at the top applies to every finding.</p>")
    parts.append(data_quality_html(summary.get("data_quality"), units))
    return parts


def _where_text(r: pd.Series, units) -> str:
    """Where a worst site is and what its sight supports, in words (a row of the deficiency table
    in the run's units)."""
    E, S = units.length_label, units.speed_label
    lo, hi = sorted((float(r[units.column("from_m")]), float(r[units.column("to_m")])))
    see = "headlights light the road far enough" if r["kind"] == "sag" else "drivers see far enough"
    text = (f"Over {lo:,.0f}-{hi:,.0f} {E} ({r['direction']} chainage) {see} to stop from "
            f"{float(r[units.column('supported_speed_kmh')]):.0f} {S}, not the "
            f"{float(r[units.column('speed_kmh')]):.0f} {S} judged at")
    if pd.notna(r.get("p_deficient")):
        text += f"; probability of a shortfall {float(r['p_deficient']):.2f}, {r['confidence']} confidence"
    return text + "."


def _map_section(result, units, map_svg: str | None) -> list[str]:
    """The overview map, an inline SVG (:mod:`pipeline.outputs.mapview`), drawn here unless
    given (then without links to the curve pages); a placeholder where it could not be drawn."""
    if map_svg is None:
        map_svg = network_map_svg(result, result.evaluation.inventory, units)
    return ["<h2 id='map' style='break-after: avoid'>Network overview</h2>",
            f"<figure class='map' style='margin: 0; break-inside: avoid'>{map_svg}</figure>" if map_svg
            else FIGURE_MISSING.format(what="The overview map")]


def _inventory_section(inv: pd.DataFrame, units, paged: set | None = None, anchors: dict | None = None) -> list[str]:
    """The ranked inventory's first 50 stretches, in the run's units; the curve number links to
    the curve's page where it has one (``paged``: (road_id, curve_no) pairs), the road to its
    section of the road-by-road index (``anchors``: anchor by road id)."""
    L, E, V, S = units.length, units.length_label, units.speed, units.speed_label
    n_und = int((inv["verdict"] == "undetermined").sum()) if len(inv) else 0
    parts = ["<h2 id='inventory'>Ranked inventory (top 50)</h2>",
             f"<p>{len(inv) - n_und} deficient stretches, then {n_und} stretch(es) of curves the ground data "
             f"cannot decide (verdict undetermined); the full list with every column is in "
             f"<a href='deficiencies.xlsx'>deficiencies.xlsx</a> (and deficiencies.csv). Rank 1 is first to "
             f"fix. Stretches whose crest hides a hazard come first.</p>"]
    if len(inv):
        top = inv.head(50)
        paged, anchors = paged or set(), anchors or {}
        curve = [(f"<a href='#{curve_anchor(r, c)}'>{int(c)}</a>" if pd.notna(c) and (r, int(c)) in paged
                  else ("" if pd.isna(c) else str(int(c)))) for r, c in zip(top["road_id"], top["curve_no"])]
        shown = pd.DataFrame({
            "rank": top["rank"], "road": [_road_link(r, n, anchors) for r, n in zip(top["road_id"], top["road_name"])],
            "curve": curve, "kind": top["kind"], "direction": top["direction"],
            f"from ({E})": L(top["from_m"]), f"to ({E})": L(top["to_m"]),
            f"speed ({S})": V(top["speed_kmh"]), f"supports ({S})": V(top["supported_speed_kmh"]),
            f"SSD needed ({E})": L(top["ssd_required_m"]), f"sight ({E})": L(top["sight_available_m"]),
            f"short by ({E})": L(top["shortfall_m"]), "severity": top["severity"],
            "hidden hazard": top["hidden_hazard"], "score": top["priority_score"],
            "verdict": top["verdict"], "P(deficient)": top["p_deficient"], "data confidence": top["confidence"],
            "treatment hint": top["treatment_hint"].map(lambda v: units.text(v) if isinstance(v, str) else v),
        })
        nd = {c: 0 for c in shown.columns if "(" in c} | {"score": 1, "rank": 0, "P(deficient)": 2}
        parts.append(_table(shown, nd, raw=("curve", "road")))
    return parts


def _road_link(rid, name, anchors: dict) -> str:
    """A road's id and name (HTML), linking to its section where it has one."""
    text = _e(rid) + (f" {_e(name)}" if isinstance(name, str) and name else "")
    return f"<a href='#{anchors[rid]}'>{text}</a>" if rid in anchors else text


def _curve_section(pages: list[dict], pngs: list, units) -> list[str]:
    """One page per deficient curve: its long profile (or a placeholder) and its facts."""
    parts = ["<h2 id='curves'>Deficient curves</h2>"]
    if pages:
        parts.append(f"<p>{len(pages)} curve(s), in rank order. Each long profile shows the driver position with "
                     f"the least sight distance and the sight line (crest) or headlight beam (sag) it has, with its "
                     f"spread of one standard deviation, against the one it needs; the driver positions lacking "
                     f"SSD are shaded for both directions, hatched one way for increasing chainage and the other "
                     f"for decreasing.</p>")
        links = ", ".join(f"<a href='#{curve_anchor(p['road_id'], p['curve_no'])}'>{_e(p['road_id'])} curve "
                          f"{int(p['curve_no'])}</a>" for p in pages)
        parts.append(f"<p class='small'>Pages: {links}.</p>")
    for page, png in zip(pages, pngs):
        rows = page["rows"]
        worst = rows.loc[rows["rank"].idxmin()]
        parts.append(f"<section id='{curve_anchor(page['road_id'], page['curve_no'])}' "
                     f"class='curve sev-{_e(worst['severity'])}'><h3>{_e(page['title'])}</h3>"
                     + (f"<img alt='Long profile of {_e(page['road_id'])} curve {page['curve_no']}' src='{png}'>"
                        if png else FIGURE_MISSING.format(what="This curve's long profile")) +
                     f"<table class='facts'>{_facts(_curve_facts(page['curve'], rows, worst, units), False)}"
                     f"</table></section>")
    return parts


def _curve_facts(c: pd.Series, rows: pd.DataFrame, worst: pd.Series, units) -> list[tuple[str, str]]:
    """A curve page's facts (values already HTML): geometry, speeds, verdict, uncertainty, hazard, fit."""
    L, E, V, S = units.length, units.length_label, units.speed, units.speed_label
    sag = c["kind"] == "sag"
    facts = [
        ("kind, A, L, K", f"{c['kind']}, A = {c['a_pct']:.2f} %, L = {L(c['length_m']):.0f} {E}, "
                          f"K = {L(c['k']):.1f} &plusmn; {L(c['k_sd']):.1f} (table {L(c['k_required']):.0f}) "
                          f"{E}/%"),
        ("PVC / PVI / PVT", f"{L(c['pvc_m']):,.0f} / {L(c['pvi_m']):,.0f} / {L(c['pvt_m']):,.0f} {E}"),
        ("grades", f"{c['g1_pct']:+.2f} % to {c['g2_pct']:+.2f} %"),
        ("speed judged at", f"{V(worst['speed_kmh']):.0f} {S}, {_words(worst['speed_basis'], units)}"),
        ("SSD needed / headlight sight distance" if sag else "SSD needed / sight distance available",
         f"{L(worst['ssd_required_m']):.0f} / {L(worst['sight_available_m']):.0f} &plusmn; "
         f"{L(c['sight_sd_m']):.0f} {E} ({worst['direction']} chainage"
         + (", at night, within the headlight beam)" if sag else ", eye to object over the crest)")),
        ("speed the headlight sight supports" if sag else "speed the sight supports",
         f"{V(worst['supported_speed_kmh']):.0f} {S} ({worst['severity']}, {V(worst['speed_gap_kmh']):.0f} {S} short)"),
        ("verdict", f"{_e(c['verdict'])}: probability of a shortfall {c['p_deficient']:.2f}, confidence "
                    f"{_e(c['confidence'])}" + (f"; to settle it: {_words(c['to_settle'], units)}"
                                                 if isinstance(c.get("to_settle"), str) else "")),
        ("uncertainty (1 sd)", f"K {L(c['k']):.1f} &plusmn; {L(c['k_sd']):.1f} {E}/%, sight distance "
                               f"&plusmn; {L(c['sight_sd_m']):.0f} {E}, A &plusmn; {c['a_sd_pct']:.2f} %, "
                               f"L &plusmn; {L(c['length_sd_m']):.0f} {E}"),
    ]
    if c["kind"] == "crest":
        detail = worst.get("hazard_detail")
        shown = worst["hidden_hazard"] != "none" and isinstance(detail, str) and detail.strip()
        facts.append(("hidden beyond the crest",
                      f"{worst['hidden_hazard']}" + (f": {_words(detail, units)}" if shown else "")))
    return facts + [
        ("stretches", "; ".join(f"{d} {L(a):,.0f}-{L(b):,.0f} {E}" for d, a, b in
                                 zip(rows["direction"], rows["from_m"], rows["to_m"]))),
        ("fit", f"RMSE {L(c['fit_rmse_m']):.3f} {E}, confidence of the fit {c['fit_confidence']}"
                + (f" ({_words(c['flags'], units)})" if isinstance(c.get("flags"), str) and c["flags"] else "")),
        ("first thought on treatment", _words(worst["treatment_hint"], units)),
    ]


def _roads_section(result, cfg, units, roads: pd.DataFrame, paged: set, anchors: dict,
                   road_pngs: dict) -> list[str]:
    """The road-by-road index: for each road its particulars, long profile, vertical curves,
    deficient stretches (linking to the curve pages) and data notes."""
    ev = result.evaluation
    notes = result.data_notes()
    n_drawn = len(road_pngs)
    parts = ["<h2 id='roads'>Road by road</h2>",
             "<p>Each road with its long profile (deficient stretches shaded by severity, hatched one way for "
             "increasing chainage and the other for decreasing), its vertical curves, its deficient stretches and "
             "the notes on its data. A curve number links to the curve's page where it has one.</p>"]
    n_eval = int((roads["status"] == "evaluated").sum())
    if n_drawn < n_eval:
        parts.append(f"<p class='caution'>{n_eval - n_drawn} evaluated road(s) are shown without a long profile: "
                     f"the report draws at most {int(cfg['output.report_road_profiles'])} "
                     f"(output.report_road_profiles), roads with deficient stretches first; profiles.pdf "
                     f"(--profiles-pdf) has every road.</p>")
    for _, road in roads.iterrows():
        rid = road["road_id"]
        parts.append(_road_block(road, anchors[rid], ev.curves[ev.curves["road_id"] == rid],
                                 ev.inventory[ev.inventory["road_id"] == rid], notes[notes["road_id"] == rid],
                                 units, paged, road_pngs))
    return parts


def _road_block(road: pd.Series, anchor: str, cv: pd.DataFrame, rows: pd.DataFrame, notes: pd.DataFrame, units,
                paged: set, road_pngs: dict) -> str:
    """One road's section of the road-by-road index (HTML)."""
    L, E, V, S = units.length, units.length_label, units.speed, units.speed_label
    rid = road["road_id"]
    name = road["name"] if isinstance(road["name"], str) else ""
    head = f"<h3>{_e(rid)}{(' ' + _e(name)) if name else ''}</h3>"
    if road["status"] != "evaluated":
        return (f"<section id='{anchor}' class='road'>{head}<p>Not evaluated: {_e(units.text(str(road['reason'])))}."
                f"</p></section>")
    particulars = [str(road["road_class"]) if isinstance(road["road_class"], str) else "class not given",
                   f"{L(road['length_m']):,.0f} {E} long",
                   f"judged at {V(road['speed_kmh']):.0f} {S}, {units.text(str(road['speed_basis']))}"
                   if pd.notna(road["speed_kmh"]) else "no speed",
                   f"AADT {float(road['aadt']):,.0f}" if pd.notna(road["aadt"]) else "AADT not given",
                   f"{len(cv)} vertical curve(s), {int((cv['verdict'] == 'deficient').sum())} deficient, "
                   f"{int((cv['verdict'] == 'undetermined').sum())} undetermined"]
    figure = ""
    if rid in road_pngs:
        png = road_pngs[rid]
        figure = (f"<img class='road-profile' alt='Long profile of {_e(rid)}' src='{png}'>" if png
                  else FIGURE_MISSING.format(what="This road's long profile"))
    parts = [f"<section id='{anchor}' class='road'><div class='keep'>{head}"
             f"<p class='small'>{_e('; '.join(particulars))}.</p>{figure}</div>"]

    def curve_cell(c):
        c = int(c)
        return f"<a href='#{curve_anchor(rid, c)}'>{c}</a>" if (rid, c) in paged else str(c)

    if len(cv):
        shown = pd.DataFrame({
            "curve": [curve_cell(c) for c in cv["curve_no"]], "kind": cv["kind"],
            f"PVC ({E})": L(cv["pvc_m"]), f"PVI ({E})": L(cv["pvi_m"]), f"PVT ({E})": L(cv["pvt_m"]),
            "A (%)": cv["a_pct"],
            f"K ± 1 sd ({E}/%)": [f"{L(k):.1f} &plusmn; {L(sd):.1f}" if np.isfinite(sd) else f"{L(k):.1f}"
                                      for k, sd in zip(cv["k"], cv["k_sd"].astype(float))],
            f"K table ({E}/%)": L(cv["k_required"]),
            f"sight ({E})": L(cv["sight_available_m"]), f"SSD needed ({E})": L(cv["ssd_required_m"]),
            "verdict": cv["verdict"], "P(deficient)": cv["p_deficient"], "confidence": cv["confidence"],
        })
        nd = {c: 0 for c in shown.columns if "(" in c and not c.startswith("K ")} | {
            "A (%)": 2, "P(deficient)": 2, f"K table ({E}/%)": 0}
        parts.append("<h4>Vertical curves</h4>" + _table(shown, nd, raw=("curve", f"K ± 1 sd ({E}/%)")))
    else:
        parts.append("<p>No vertical curve was found on this road.</p>")
    if len(rows):
        shown = pd.DataFrame({
            "rank": rows["rank"], "curve": [curve_cell(c) if pd.notna(c) else "" for c in rows["curve_no"]],
            "kind": rows["kind"], "direction": rows["direction"], f"from ({E})": L(rows["from_m"]),
            f"to ({E})": L(rows["to_m"]), "severity": rows["severity"], "verdict": rows["verdict"],
            f"short by ({E})": L(rows["shortfall_m"]), f"supports ({S})": V(rows["supported_speed_kmh"]),
            "hidden hazard": rows["hidden_hazard"],
        })
        parts.append("<h4>Deficient stretches</h4>" + _table(
            shown, {c: 0 for c in shown.columns if "(" in c} | {"rank": 0}, raw=("curve",)))
    else:
        parts.append("<p>No deficient stretch.</p>")
    if len(notes):
        items = []
        for _, n in notes.iterrows():
            where = (f" ({L(n['from_m']):,.0f}-{L(n['to_m']):,.0f} {E})"
                     if pd.notna(n["from_m"]) and pd.notna(n["to_m"]) else "")
            detail = f": {units.text(n['detail'])}" if isinstance(n["detail"], str) and n["detail"] else ""
            items.append(f"<li>{_e(units.text(n['note']))}{_e(where)}{_e(detail)}</li>")
        parts.append(f"<h4>Data notes</h4><ul class='small'>{''.join(items)}</ul>")
    return "".join(parts) + "</section>"


def _method_section(method: list[tuple[str, str]]) -> list[str]:
    return ["<h2 id='method'>Method and criteria</h2>",
            f"<table class='facts'>{_facts(method)}</table>",
            "<p class='small'>Every input and its SHA-256, the settings used and the time per stage are in "
            "run.json.</p>"]


def _notes_section(result, summary: dict, units) -> list[str]:
    """The skipped roads, the data notes and the run's notes."""
    parts = ["<h2 id='notes'>Data notes and skipped roads</h2>"]
    skipped = [x for x in summary["roads"]["skipped_roads"]]
    if skipped:
        parts.append(_table(units.table(pd.DataFrame(skipped)).rename(
            columns={"road_id": "road", "reason": "why skipped"}), {}))
    else:
        parts.append("<p>No road was skipped.</p>")
    notes = result.data_notes()
    if len(notes):
        nt = units.table(notes)
        parts.append(_table(nt, {c: 0 for c in nt.columns if c.endswith(("_m", "_ft"))}))
    parts += [f"<p class='small'>{_words(n, units)}</p>" for n in summary.get("notes", [])]
    return parts


def _cautions_section(caution: str) -> list[str]:
    return ["<h2 id='cautions'>Cautions</h2>",
            f"<p class='caution'>{_e(caution)}</p>",
            "<p>Profiles rebuilt from a DEM or ground points carry the errors of that data (bridges, walls, "
            "vegetation, interpolation, the DEM's resolution); the recovered alignment is an estimate, and "
            "the available sight distance here ignores horizontal obstructions, vegetation and parked "
            "vehicles. Findings point to where to look, in what order; the site decides.</p>",
            f"<p class='small'>Written {datetime.now(timezone.utc).isoformat(timespec='seconds')}.</p>",
            "</body></html>"]
