"""The audit report ``report.html``.

``report.html`` is one self-contained file: figures are PNG images inlined as
data URIs and the style sheet is inline, so it opens without a network and
prints to A4 or Letter (each deficient curve starts a new page). Sections:
summary, overview map, ranked inventory (top 50, the rest in the workbook), one
page per deficient curve with its long profile, method and criteria set, data
notes and skipped roads, and the cautions.

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
from .sight_figure import roadside_section
from .figures import SEVERITY_STYLE, curve_figure, curve_png, network_map, png_data_uri, road_figure
from .report_style import CSS, FIGURE_MISSING, LOADED_JS

__all__ = ["SEVERITY_STYLE", "build_report", "curve_figure", "curve_png", "data_quality_html", "network_map",
           "png_data_uri", "report_pages", "road_figure", "write_profiles_pdf"]


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


def curve_anchor(road_id, curve_no) -> str:
    """The id of a curve's page in the report (letters, digits and hyphens only)."""
    slug = "".join(ch if ch.isalnum() else "-" for ch in str(road_id))
    return f"curve-{slug}-{int(curve_no)}"


TOC = (("summary", "Network summary"), ("data-quality", "What this ground data can support"),
       ("map", "Network overview"), ("inventory", "Ranked inventory"), ("curves", "Deficient curves"),
       ("roadside", "Roadside sight (3D)"), ("method", "Method and criteria"), ("notes", "Data notes and skipped roads"), ("cautions", "Cautions"))


def _toc() -> str:
    """The table of contents: a link to every section."""
    items = "".join(f"<li><a href='#{a}'>{_e(t)}</a></li>" for a, t in TOC)
    return f"<nav id='contents'><h2>Contents</h2><ol>{items}</ol></nav>"


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
                 pages: list[dict] | None = None, pngs: list[str] | None = None, map_png: str | None = None) -> str:
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
    map_png : str, optional
        The overview map as a data URI, empty for a placeholder; drawn here when
        not given.

    Returns
    -------
    str
        The HTML document, written at the current UTC time.
    """
    if pages is None:
        pages = report_pages(result, cfg, units)
    if pngs is None:
        pngs = [curve_png(p["spec"]) for p in pages]
    parts = _head(result, summary, units, caution) + [_toc()]
    parts += _summary_section(result, summary, units)
    parts += _map_section(result, units, map_png)
    paged = {(p["road_id"], int(p["curve_no"])) for p in pages}
    parts += _inventory_section(result.evaluation.inventory, units, paged)
    parts += _curve_section(pages, pngs, units)
    parts += roadside_section(result, units, cfg)
    parts += _method_section(method)
    parts += _notes_section(result, summary, units)
    parts += _cautions_section(caution)
    return "".join(parts)


def _head(result, summary: dict, units, caution: str) -> list[str]:
    """The document head, the title, the run line and the caution."""
    name = _e(result.criteria.params["name"])
    return [f"<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
            f"<title>Sight distance audit: {name}</title>"
            f"<style>{CSS}</style><script>{LOADED_JS}</script></head><body>",
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
    parts.append(data_quality_html(summary.get("data_quality"), units))
    return parts


def _map_section(result, units, map_png: str | None) -> list[str]:
    """The overview map, drawn here unless given; a placeholder where it could not be drawn."""
    map_png = png_data_uri(network_map(result, result.evaluation.inventory, units)) if map_png is None else map_png
    return ["<h2 id='map'>Network overview</h2>",
            f"<img alt='Map of the audited roads with deficient stretches coloured by severity' "
            f"src='{map_png}'>" if map_png else FIGURE_MISSING.format(what="The overview map")]


def _inventory_section(inv: pd.DataFrame, units, paged: set | None = None) -> list[str]:
    """The ranked inventory's first 50 stretches, in the run's units; the curve number links to
    the curve's page where it has one (``paged``: (road_id, curve_no) pairs)."""
    L, E, V, S = units.length, units.length_label, units.speed, units.speed_label
    n_und = int((inv["verdict"] == "undetermined").sum()) if len(inv) else 0
    parts = ["<h2 id='inventory'>Ranked inventory (top 50)</h2>",
             f"<p>{len(inv) - n_und} deficient stretches, then {n_und} stretch(es) of curves the ground data "
             f"cannot decide (verdict undetermined); the full list with every column is in "
             f"<a href='deficiencies.xlsx'>deficiencies.xlsx</a> (and deficiencies.csv). Rank 1 is first to "
             f"fix. Stretches whose crest hides a hazard come first.</p>"]
    if len(inv):
        top = inv.head(50)
        paged = paged or set()
        curve = [(f"<a href='#{curve_anchor(r, c)}'>{int(c)}</a>" if pd.notna(c) and (r, int(c)) in paged
                  else ("" if pd.isna(c) else str(int(c)))) for r, c in zip(top["road_id"], top["curve_no"])]
        shown = pd.DataFrame({
            "rank": top["rank"], "road": top["road_id"] + " " + top["road_name"].fillna(""),
            "curve": curve, "kind": top["kind"], "direction": top["direction"],
            f"from ({E})": L(top["from_m"]), f"to ({E})": L(top["to_m"]),
            f"speed ({S})": V(top["speed_kmh"]), f"supports ({S})": V(top["supported_speed_kmh"]),
            f"SSD needed ({E})": L(top["ssd_required_m"]), f"sight ({E})": L(top["sight_available_m"]),
            f"short by ({E})": L(top["shortfall_m"]), "severity": top["severity"],
            "hidden hazard": top["hidden_hazard"], "score": top["priority_score"],
            "verdict": top["verdict"], "P(deficient)": top["p_deficient"], "data confidence": top["confidence"],
            "treatment hint": top["treatment_hint"],
        })
        nd = {c: 0 for c in shown.columns if "(" in c} | {"score": 1, "rank": 0, "P(deficient)": 2}
        parts.append(_table(shown, nd, raw=("curve",)))
    return parts


def _curve_section(pages: list[dict], pngs: list, units) -> list[str]:
    """One page per deficient curve: its long profile (or a placeholder) and its facts."""
    parts = ["<h2 id='curves'>Deficient curves</h2>"]
    if pages:
        parts.append(f"<p>{len(pages)} curve(s), in rank order; each long profile shows the driver position with "
                     f"the least sight distance and the sight line it has against the one it needs.</p>")
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
    facts = [
        ("kind, A, L, K", f"{c['kind']}, A = {c['a_pct']:.2f} %, L = {L(c['length_m']):.0f} {E}, "
                          f"K = {L(c['k']):.1f} (table {L(c['k_required']):.0f}) {E}/%"),
        ("PVC / PVI / PVT", f"{L(c['pvc_m']):,.0f} / {L(c['pvi_m']):,.0f} / {L(c['pvt_m']):,.0f} {E}"),
        ("grades", f"{c['g1_pct']:+.2f} % to {c['g2_pct']:+.2f} %"),
        ("speed judged at", f"{V(worst['speed_kmh']):.0f} {S}, {_e(worst['speed_basis'])}"),
        ("SSD needed / available", f"{L(worst['ssd_required_m']):.0f} / {L(worst['sight_available_m']):.0f} {E} "
                                   f"({worst['direction']} chainage)"),
        ("speed the curve supports", f"{V(worst['supported_speed_kmh']):.0f} {S} "
                                     f"({worst['severity']}, {V(worst['speed_gap_kmh']):.0f} {S} short)"),
        ("verdict", f"{_e(c['verdict'])}: probability of a shortfall {c['p_deficient']:.2f}, confidence "
                    f"{_e(c['confidence'])}" + (f"; to settle it: {_e(c['to_settle'])}"
                                                 if isinstance(c.get("to_settle"), str) else "")),
        ("uncertainty (1 sd)", f"K {L(c['k']):.1f} &plusmn; {L(c['k_sd']):.1f} {E}/%, sight distance "
                               f"&plusmn; {L(c['sight_sd_m']):.0f} {E}, A &plusmn; {c['a_sd_pct']:.2f} %, "
                               f"L &plusmn; {L(c['length_sd_m']):.0f} {E}"),
    ]
    if c["kind"] == "crest":
        detail = worst.get("hazard_detail")
        shown = worst["hidden_hazard"] != "none" and isinstance(detail, str) and detail.strip()
        facts.append(("hidden beyond the crest", f"{worst['hidden_hazard']}" + (f": {_e(detail)}" if shown else "")))
    return facts + [
        ("stretches", "; ".join(f"{d} {L(a):,.0f}-{L(b):,.0f} {E}" for d, a, b in
                                 zip(rows["direction"], rows["from_m"], rows["to_m"]))),
        ("fit", f"RMSE {L(c['fit_rmse_m']):.3f} {E}, confidence of the fit {c['fit_confidence']}"
                + (f" ({_e(c['flags'])})" if isinstance(c.get("flags"), str) and c["flags"] else "")),
        ("first thought on treatment", _e(worst["treatment_hint"])),
    ]


def _method_section(method: list[tuple[str, str]]) -> list[str]:
    return ["<h2 id='method' class='curve'>Method and criteria</h2>",
            f"<table class='facts'>{_facts(method)}</table>",
            "<p class='small'>Every input and its SHA-256, the settings used and the time per stage are in "
            "run.json.</p>"]


def _notes_section(result, summary: dict, units) -> list[str]:
    """The skipped roads, the data notes and the run's notes."""
    parts = ["<h2 id='notes'>Data notes and skipped roads</h2>"]
    skipped = [x for x in summary["roads"]["skipped_roads"]]
    if skipped:
        parts.append(_table(pd.DataFrame(skipped).rename(columns={"road_id": "road", "reason": "why skipped"}), {}))
    else:
        parts.append("<p>No road was skipped.</p>")
    notes = result.data_notes()
    if len(notes):
        nt = units.table(notes)
        parts.append(_table(nt, {c: 0 for c in nt.columns if c.endswith(("_m", "_ft"))}))
    parts += [f"<p class='small'>{_e(n)}</p>" for n in summary.get("notes", [])]
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
