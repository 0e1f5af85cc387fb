"""The audit report (``report.html``) and the per-road profile sheets (``profiles.pdf``).

``report.html`` is one self-contained file: figures are PNG images inlined as
data URIs and the style sheet is inline, so it opens without a network and
prints to A4 or Letter (each deficient curve starts a new page). Sections:
summary, overview map, ranked inventory (top 50, the rest in the workbook), one
page per deficient curve with its long profile, method and criteria set, data
notes and skipped roads, and the cautions.

Colours (our own scheme, chosen to stay apart for the common colour-vision
deficiencies, and backed by line width so it survives grey printing): minor
#F4A259 (light orange), moderate #C2452D (brick red), severe #3B1F5C (deep
purple); roads grey.
"""

from __future__ import annotations

import base64
import html
import io
from datetime import datetime, timezone

import numpy as np
import pandas as pd

SEVERITY_STYLE = {
    "minor": {"color": "#F4A259", "lw": 3.0},
    "moderate": {"color": "#C2452D", "lw": 4.5},
    "severe": {"color": "#3B1F5C", "lw": 6.0},
}


def _mpl():
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    plt.rcParams.update({"font.size": 10, "axes.titlesize": 11, "axes.labelsize": 10, "legend.fontsize": 8.5,
                         "xtick.labelsize": 9, "ytick.labelsize": 9})
    return plt


def png_data_uri(fig, dpi: int = 100) -> str:
    """The figure as an inline PNG. Figures are laid out when made, so one rendering pass does."""
    plt = _mpl()
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    plt.close(fig)
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


# ------------------------------------------------------------------- figures
def _nice_length(span: float) -> float:
    """A round scale-bar length near a fifth of ``span``."""
    target = span / 5.0
    exp = 10 ** np.floor(np.log10(target))
    for m in (1, 2, 5, 10):
        if m * exp >= target:
            return m * exp
    return 10 * exp


def network_map(result, inventory: pd.DataFrame, units):
    """Roads in grey, deficient stretches coloured by severity, top ranks labelled, with a
    legend, a scale bar and a north arrow; drawn in the working (metric, north-up) CRS."""
    import shapely
    from matplotlib.collections import LineCollection

    from ..profile.stations import Polyline

    plt = _mpl()
    fig, ax = plt.subplots(figsize=(9.0, 7.0))
    fig.subplots_adjust(left=0.12, right=0.97, bottom=0.14, top=0.94)
    t = result.roads.table
    lines = t[t["geometry"].notna()]
    coords = [shapely.get_coordinates(g) for g in lines["geometry"]]
    ax.add_collection(LineCollection(coords, colors="#9A9A9A", linewidths=1.6, zorder=1))
    if len(lines) <= 60:
        for rid, xy in zip(lines["road_id"], coords):
            mid = xy[len(xy) // 2]
            ax.annotate(str(rid), mid, fontsize=8, color="#404040", xytext=(4, 4), textcoords="offset points")
    geo = t.set_index("road_id")["geometry"]
    polys: dict = {}
    for sev, st in SEVERITY_STYLE.items():
        rows = inventory[inventory["severity"] == sev]
        segs = []
        for rid, a, b in zip(rows["road_id"], rows["from_m"], rows["to_m"]):
            if rid not in polys and geo.get(rid) is not None:
                polys[rid] = Polyline(geo[rid])
            if rid in polys:
                segs.append(polys[rid].cut(a - 5, b + 5))
        if segs:
            ax.add_collection(LineCollection(segs, colors=st["color"], linewidths=st["lw"],
                                             zorder=2 + list(SEVERITY_STYLE).index(sev)))
    for _, d in inventory[inventory["rank"] <= 10].iterrows():
        if d["road_id"] in polys:
            xy = polys[d["road_id"]].cut(d["from_m"], d["to_m"])
            ax.annotate(f"#{int(d['rank'])}", xy[len(xy) // 2], fontsize=8.5, fontweight="bold", color="black",
                        xytext=(-6, -12), textcoords="offset points", zorder=6)
    ax.autoscale_view()
    ax.set_aspect("equal")
    ax.set_xlabel("easting in the working CRS (m)")
    ax.set_ylabel("northing in the working CRS (m)")
    ax.set_title("Road network and deficient stretches by severity (labels: rank)")
    handles = [plt.Line2D([], [], color="#9A9A9A", lw=1.6, label="road audited")]
    handles += [plt.Line2D([], [], color=v["color"], lw=v["lw"], label=f"{k} deficiency")
                for k, v in SEVERITY_STYLE.items()]
    ax.legend(handles=handles, loc="lower right", framealpha=0.9)
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    bar = _nice_length(x1 - x0)
    bx, by = x0 + 0.04 * (x1 - x0), y0 + 0.05 * (y1 - y0)
    ax.plot([bx, bx + bar], [by, by], color="black", lw=3, solid_capstyle="butt")
    label = (f"{units.length(bar):,.0f} {units.length_label}" if bar < 1000 or units.us
             else f"{bar / 1000:g} km")
    ax.text(bx + bar / 2, by + 0.015 * (y1 - y0), label, ha="center", va="bottom", fontsize=9)
    ax.annotate("N", xy=(x1 - 0.05 * (x1 - x0), y1 - 0.05 * (y1 - y0)),
                xytext=(x1 - 0.05 * (x1 - x0), y1 - 0.15 * (y1 - y0)), ha="center", fontsize=11, fontweight="bold",
                arrowprops={"arrowstyle": "-|>", "color": "black", "lw": 1.5})
    ax.ticklabel_format(useOffset=False, style="plain")
    ax.tick_params(axis="x", labelrotation=30)
    return fig


def curve_figure(prof: pd.DataFrame, curve: pd.Series, rows: pd.DataFrame, hcurves: pd.DataFrame, rules, units,
                 title: str):
    """Long profile around a deficient curve: ground samples, fitted alignment, PVC/PVI/PVT, the
    driver's sight line at the worst station for the available and the required distance, the
    hidden stretch and the hidden hazard."""
    plt = _mpl()
    worst = rows.loc[rows["rank"].idxmin()]  # the row that ranks first: the direction that matters most
    sign = 1 if worst["direction"] == "increasing" else -1
    ssd = float(worst["ssd_required_m"])
    span = max(ssd, 150.0) * 1.1
    lo = max(min(curve["pvc_m"], worst["from_m"]) - span, prof["chainage_m"].min())
    hi = min(max(curve["pvt_m"], worst["to_m"]) + span, prof["chainage_m"].max())
    p = prof[(prof["chainage_m"] >= lo) & (prof["chainage_m"] <= hi)]
    L, E = units.length, units.length_label
    fig, ax = plt.subplots(figsize=(10.5, 3.9))
    fig.subplots_adjust(left=0.07, right=0.70, bottom=0.14, top=0.91)
    masked = p["ground_flag"] == "masked"
    ax.plot(L(p.loc[~masked, "chainage_m"]), L(p.loc[~masked, "ground_z_m"]), ".", ms=2.5, color="#7A7A7A",
            label="ground samples")
    if masked.any():
        ax.plot(L(p.loc[masked, "chainage_m"]), L(p.loc[masked, "ground_z_m"]), "x", ms=3.5, color="#7A7A7A",
                label="ground masked (artefact)")
    ax.plot(L(p["chainage_m"]), L(p["fitted_z_m"]), "-", color="black", lw=1.4, label="recovered alignment")
    zfit = lambda x: float(np.interp(x, p["chainage_m"], p["fitted_z_m"]))  # noqa: E731
    ytop = np.nanmax(p["fitted_z_m"])
    for name, x in (("PVC", curve["pvc_m"]), ("PVI", curve["pvi_m"]), ("PVT", curve["pvt_m"])):
        ax.axvline(L(x), color="#4A6FA5", ls=":", lw=1)
        ax.text(L(x), L(ytop), name, color="#4A6FA5", fontsize=8, ha="center", va="bottom")
    # the worst driver position in the worst direction
    col = "sight_fwd_m" if sign > 0 else "sight_back_m"
    stretch = p[(p["chainage_m"] >= worst["from_m"] - 1e-6) & (p["chainage_m"] <= worst["to_m"] + 1e-6)]
    eye_x = float(stretch.loc[stretch[col].idxmin(), "chainage_m"]) if len(stretch) else float(worst["from_m"])
    avail = float(worst["sight_available_m"])
    if curve["kind"] == "crest":
        ez = zfit(eye_x) + rules.eye_height_m
        for dist, style, label in ((avail, "-", f"sight line, available {L(avail):.0f} {E}"),
                                   (ssd, "--", f"sight line needed, SSD {L(ssd):.0f} {E}")):
            ox = eye_x + sign * dist
            ax.plot([L(eye_x), L(ox)], [L(ez), L(zfit(ox) + rules.object_height_m)], style,
                    color="#C2452D", lw=1.5, label=label)
        ax.plot([L(eye_x)], [L(ez)], "o", color="#C2452D", ms=5, label="driver's eye")
    else:
        g0 = float(np.interp(eye_x, p["chainage_m"], p["grade_pct"])) / 100.0 * sign
        hz = zfit(eye_x) + rules.headlight_height_m
        tb = np.tan(np.radians(rules.beam_angle_deg))
        for dist, style, label in ((avail, "-", f"headlight beam edge, reach {L(avail):.0f} {E}"),
                                   (ssd, "--", f"reach needed, SSD {L(ssd):.0f} {E}")):
            ox = eye_x + sign * dist
            ax.plot([L(eye_x), L(ox)], [L(hz), L(hz + dist * (g0 + tb))], style, color="#C2452D", lw=1.5,
                    label=label)
        ax.plot([L(eye_x)], [L(hz)], "o", color="#C2452D", ms=5, label="headlight")
    ax.axvspan(L(min(worst["from_m"], worst["to_m"])), L(max(worst["from_m"], worst["to_m"])) + 1e-9,
               color="#F4A259", alpha=0.25, lw=0, label="driver positions lacking SSD")
    if np.isfinite(worst.get("hidden_from_m", np.nan)):
        ax.axvspan(L(worst["hidden_from_m"]), L(worst["hidden_to_m"]), color="#3B1F5C", alpha=0.15, lw=0,
                   label="road hidden at the required SSD")
    if isinstance(worst.get("hidden_hazard"), str) and worst["hidden_hazard"] != "none" \
            and np.isfinite(worst.get("hazard_chainage_m", np.nan)):
        hx = worst["hazard_chainage_m"]
        ax.plot([L(hx)], [L(zfit(hx))], marker="v", ms=9, color="#3B1F5C", ls="none",
                label=f"hidden hazard: {worst['hidden_hazard']}")
    for h in hcurves.itertuples():
        if h.end_m >= lo and h.start_m <= hi:
            ax.axvspan(L(max(h.start_m, lo)), L(min(h.end_m, hi)), ymin=0, ymax=0.04, color="#4A6FA5", lw=0)
    ax.set_xlim(L(lo), L(hi))
    ax.set_xlabel(f"chainage ({E}); blue bars along the bottom: horizontal curves")
    ax.set_ylabel(f"elevation ({E})")
    ax.set_title(title)
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), framealpha=0.95)
    return fig


def road_figure(prof: pd.DataFrame, curves: pd.DataFrame, rows: pd.DataFrame, units, title: str, lo: float,
                hi: float):
    """A road's long profile between chainages ``lo`` and ``hi``: ground, recovered alignment,
    curves (K and verdict) and deficient stretches."""
    plt = _mpl()
    L, E = units.length, units.length_label
    p = prof[(prof["chainage_m"] >= lo) & (prof["chainage_m"] <= hi)]
    fig, ax = plt.subplots(figsize=(11.0, 4.6))
    fig.subplots_adjust(left=0.07, right=0.98, bottom=0.12, top=0.92)
    ax.plot(L(p["chainage_m"]), L(p["ground_z_m"]), ".", ms=2, color="#7A7A7A", label="ground samples")
    ax.plot(L(p["chainage_m"]), L(p["fitted_z_m"]), "-", color="black", lw=1.3, label="recovered alignment")
    shown = set()
    for _, d in rows.iterrows():
        if d["to_m"] < lo or d["from_m"] > hi:
            continue
        st = SEVERITY_STYLE[d["severity"]]
        ax.axvspan(L(d["from_m"]), L(d["to_m"]) + 1e-9, color=st["color"], alpha=0.3, lw=0,
                   label=f"{d['severity']} deficiency" if d["severity"] not in shown else None)
        shown.add(d["severity"])
    for _, c in curves.iterrows():
        if c["pvt_m"] < lo or c["pvc_m"] > hi:
            continue
        y = float(np.interp(c["pvi_m"], p["chainage_m"], p["fitted_z_m"])) if len(p) else 0.0
        mark = "deficient" if bool(c.get("deficient", False)) else ""
        ax.annotate(f"{c['kind']} {int(c['curve_no'])}\nK {L(c['k']) if units.us else c['k']:.0f} {mark}",
                    (L(c["pvi_m"]), L(y)), xytext=(0, 14 if c["kind"] == "crest" else -26),
                    textcoords="offset points", ha="center", fontsize=7.5)
    ax.set_xlim(L(lo), L(hi))
    ax.set_xlabel(f"chainage ({E})")
    ax.set_ylabel(f"elevation ({E})")
    ax.set_title(title)
    ax.grid(alpha=0.3)
    ax.legend(loc="best", fontsize=8)
    return fig


def curve_png(spec: dict) -> str:
    """One curve page's figure as an inline PNG (a top-level function, so that a pool of
    processes can draw the pages side by side)."""
    return png_data_uri(curve_figure(**spec))


# ------------------------------------------------------------------- HTML
CSS = """
@page { size: A4; margin: 14mm; }
body { font-family: "DejaVu Sans", Arial, sans-serif; font-size: 10.5pt; color: #1a1a1a; margin: 1.5em auto;
       max-width: 1100px; line-height: 1.35; }
h1 { font-size: 19pt; margin-bottom: 0.2em; } h2 { font-size: 14pt; border-bottom: 2px solid #3B1F5C;
     padding-bottom: 2px; margin-top: 1.6em; } h3 { font-size: 12pt; margin: 0.4em 0; }
.caution { border: 2px solid #C2452D; background: #FCEFEA; padding: 0.6em 0.9em; font-weight: bold; }
.cards { display: flex; flex-wrap: wrap; gap: 0.6em; } .card { border: 1px solid #bbb; border-radius: 4px;
        padding: 0.4em 0.8em; min-width: 8em; } .card b { display: block; font-size: 15pt; }
table { border-collapse: collapse; width: 100%; font-size: 8.8pt; margin: 0.4em 0; }
th, td { border: 1px solid #c8c8c8; padding: 2px 4px; text-align: left; vertical-align: top; }
th { background: #DDE4EE; } td.n { text-align: right; font-variant-numeric: tabular-nums; }
img { max-width: 100%; } .curve { page-break-before: always; break-before: page; }
.facts td:first-child { width: 16em; color: #444; } .small { font-size: 8.5pt; color: #444; }
.sev-minor { border-left: 6px solid #F4A259; } .sev-moderate { border-left: 6px solid #C2452D; }
.sev-severe { border-left: 6px solid #3B1F5C; }
@media print { body { max-width: none; margin: 0; } a { color: black; } }
"""

LOADED_JS = """window.addEventListener('load', function () {
  var imgs = Array.prototype.slice.call(document.images);
  var ok = imgs.filter(function (i) { return i.complete && i.naturalWidth > 0; }).length;
  document.body.setAttribute('data-images-loaded', ok + '/' + imgs.length);
});"""


FIGURE_MISSING = ("<p class='caution figure-missing'>{what} could not be drawn; the failure is recorded in "
                  "run.json (output_failures). The data files (CSV, workbook, GeoPackage) are complete.</p>")


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


def _table(frame: pd.DataFrame, numeric_nd: dict[str, int]) -> str:
    head = "".join(f"<th>{_e(str(c).replace('_', ' '))}</th>" for c in frame.columns)
    body = []
    for _, r in frame.iterrows():
        cells = []
        for c in frame.columns:
            if c in numeric_nd:
                cells.append(f'<td class="n">{_num(r[c], numeric_nd[c])}</td>')
            else:
                cells.append(f"<td>{_e(r[c])}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def report_pages(result, cfg, units) -> list[dict]:
    """The deficient curves given a page, in rank order, each with what its figure needs
    (``spec``, for :func:`curve_png`, small enough to send to another process)."""
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
    """The report's statement of what the ground data can support (:mod:`pipeline.quality`)."""
    if not dq:
        return ""
    L, E = units.length, units.length_label
    kind = "DEM cell" if dq["ground_kind"] == "dem" else "ground-point spacing"
    facts = [
        (kind, "unknown" if dq["spacing_m"] is None else f"{L(dq['spacing_m']):.1f} {E}"),
        ("shortest feature resolved", "unknown" if dq["resolution_m"] is None else f"{L(dq['resolution_m']):.0f} {E}"),
        ("vertical error of the ground data", "not stated" if dq.get("vertical_error_m") is None else
         f"{L(dq['vertical_error_m']):.2f} {E}, {dq['vertical_error_basis']}"),
        ("estimated ground error about the fit", "no curves" if dq["noise_sd_m"] is None else
         f"{L(dq['noise_sd_m']):.2f} {E} (correlation from station to station {dq['noise_rho']:.2f})"),
        ("curves judged with high confidence", "no curves" if dq["curves_high_pct"] is None else
         f"{dq['curves_high_pct']:.0f} % of {dq['curves']}; undetermined {dq['curves_undetermined_pct']:.0f} %"),
        ("road length all of whose curves are judged with high confidence",
         "none evaluated" if dq["km_high_pct"] is None else f"{dq['km_high_pct']:.0f} %"),
    ]
    rows = "".join(f"<tr><td>{_e(k)}</td><td>{_e(v)}</td></tr>" for k, v in facts)
    words = "".join(f"<li>{_e(t)}</li>" for t in dq["cannot_judge"])
    return (f"<h3 id='data-quality'>What this ground data can support</h3><table class='facts'>{rows}</table>"
            f"<ul>{words}</ul>")


def build_report(result, summary: dict, cfg, units, caution: str, method: list[tuple[str, str]],
                 pages: list[dict] | None = None, pngs: list[str] | None = None, map_png: str | None = None) -> str:
    """The whole report as one HTML string. ``pages`` (from :func:`report_pages`) and their
    figures ``pngs`` may be made beforehand, elsewhere; otherwise they are made here."""
    ev = result.evaluation
    inv = ev.inventory
    curves = ev.curves
    if pages is None:
        pages = report_pages(result, cfg, units)
    if pngs is None:
        pngs = [curve_png(p["spec"]) for p in pages]
    L, E, V, S = units.length, units.length_label, units.speed, units.speed_label
    r = summary["roads"]
    net = ev.summary[ev.summary["road_class"] == "network"].iloc[0] if len(ev.summary) else None
    km = float(net["km_audited"]) if net is not None else 0.0
    dist = km / units.km_per_distance
    sev_km = {s: float(net[f"deficient_km_{s}"]) / units.km_per_distance if net is not None else 0.0
              for s in ("minor", "moderate", "severe")}
    deficient_curves = int(curves["deficient"].sum()) if len(curves) else 0
    parts = [f"<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
             f"<title>Sight distance audit: {_e(result.criteria.params['name'])}</title>"
             f"<style>{CSS}</style><script>{LOADED_JS}</script></head><body>"]
    parts.append("<h1>Stopping-sight-distance screening audit</h1>")
    parts.append(f"<p class='small'>sightaudit {summary['version']}, run {summary['started_utc']}; criteria "
                 f"{_e(result.criteria.params['name'])} ({_e(result.criteria.params['title'])}); units: "
                 f"{_e(E)}, {_e(S)}.</p>")
    parts.append(f"<p class='caution'>{_e(caution)}</p>")

    # --- summary
    parts.append("<h2 id='summary'>Network summary</h2><div class='cards'>")
    cards = [("length audited", f"{dist:,.1f} {units.distance_label}"),
             ("roads evaluated", f"{r['evaluated']} of {r['in']}"),
             ("roads skipped", f"{r['skipped']}"),
             ("at substituted speeds", f"{r.get('judged_at_substituted_speeds', 0)}"),
             ("vertical curves", f"{len(curves)}"),
             ("deficient curves", f"{deficient_curves}"),
             ("undetermined curves", f"{int((curves['verdict'] == 'undetermined').sum()) if len(curves) else 0}"),
             ("deficient stretches", f"{int((inv['verdict'] == 'deficient').sum()) if len(inv) else 0}"),
             ("severe stretches", f"{int((inv['severity'] == 'severe').sum()) if len(inv) else 0}"),
             ("hiding a hazard", f"{int((inv['hidden_hazard'] != 'none').sum()) if len(inv) else 0}")]
    parts += [f"<div class='card'><b class='figure' data-name='{_e(k)}'>{_e(v)}</b>{_e(k)}</div>" for k, v in cards]
    parts.append("</div>")
    overridden = summary.get("evidence", {}).get("overridden", [])
    if overridden:
        parts.append(f"<p class='caution'>Checks on the inputs overridden by the settings (checks.override): "
                     f"{_e(', '.join(overridden))}; see the data notes.</p>")
    parts.append(f"<p>Deficient length (each direction counted): minor {sev_km['minor']:.2f}, moderate "
                 f"{sev_km['moderate']:.2f}, severe {sev_km['severe']:.2f} {units.distance_label}.</p>")
    by_class = units.table(ev.summary)
    nd = {c: (2 if ("km" in c or "mi" in c) else 0) for c in by_class.columns if c != "road_class"}
    parts.append("<h3>By road class</h3>" + _table(by_class, nd))
    parts.append(data_quality_html(summary.get("data_quality"), units))

    # --- map
    parts.append("<h2 id='map'>Network overview</h2>")
    map_png = png_data_uri(network_map(result, inv, units)) if map_png is None else map_png
    parts.append(f"<img alt='Map of the audited roads with deficient stretches coloured by severity' "
                 f"src='{map_png}'>" if map_png else FIGURE_MISSING.format(what="The overview map"))

    # --- inventory
    parts.append("<h2 id='inventory'>Ranked inventory (top 50)</h2>")
    n_und = int((inv["verdict"] == "undetermined").sum()) if len(inv) else 0
    parts.append(f"<p>{len(inv) - n_und} deficient stretches, then {n_und} stretch(es) of curves the ground data "
                 f"cannot decide (verdict undetermined); the full list with every column is in "
                 f"<a href='deficiencies.xlsx'>deficiencies.xlsx</a> (and deficiencies.csv). Rank 1 is first to "
                 f"fix. Stretches whose crest hides a hazard come first.</p>")
    if len(inv):
        top = inv.head(50)
        shown = pd.DataFrame({
            "rank": top["rank"], "road": top["road_id"] + " " + top["road_name"].fillna(""),
            "curve": top["curve_no"], "kind": top["kind"], "direction": top["direction"],
            f"from ({E})": L(top["from_m"]), f"to ({E})": L(top["to_m"]),
            f"speed ({S})": V(top["speed_kmh"]), f"supports ({S})": V(top["supported_speed_kmh"]),
            f"SSD needed ({E})": L(top["ssd_required_m"]), f"sight ({E})": L(top["sight_available_m"]),
            f"short by ({E})": L(top["shortfall_m"]), "severity": top["severity"],
            "hidden hazard": top["hidden_hazard"], "score": top["priority_score"],
            "verdict": top["verdict"], "P(deficient)": top["p_deficient"], "confidence": top["confidence"],
        })
        nd = {c: 0 for c in shown.columns if "(" in c} | {"score": 1, "rank": 0, "curve": 0, "P(deficient)": 2}
        parts.append(_table(shown, nd))

    # --- one page per deficient curve
    parts.append("<h2 id='curves'>Deficient curves</h2>")
    if pages:
        parts.append(f"<p>{len(pages)} curve(s), in rank order; each long profile shows the driver position with "
                     f"the least sight distance and the sight line it has against the one it needs.</p>")
    for page, png in zip(pages, pngs):
        rid, cno, c, rows, title = page["road_id"], page["curve_no"], page["curve"], page["rows"], page["title"]
        worst = rows.loc[rows["rank"].idxmin()]
        facts = [
            ("kind, A, L, K", f"{c['kind']}, A = {c['a_pct']:.2f} %, L = {L(c['length_m']):.0f} {E}, "
                              f"K = {L(c['k']):.1f} (table {L(c['k_required']):.0f}) {E}/%"),
            ("PVC / PVI / PVT", f"{L(c['pvc_m']):,.0f} / {L(c['pvi_m']):,.0f} / {L(c['pvt_m']):,.0f} {E}"),
            ("grades", f"{c['g1_pct']:+.2f} % to {c['g2_pct']:+.2f} %"),
            ("speed judged at", f"{V(worst['speed_kmh']):.0f} {S} ({_e(worst['speed_basis'])})"),
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
            facts.append(("hidden beyond the crest", f"{worst['hidden_hazard']}" + (f": {worst['hazard_detail']}"
                          if isinstance(worst.get("hazard_detail"), str) else "")))
        facts += [
            ("stretches", "; ".join(f"{d} {L(a):,.0f}-{L(b):,.0f} {E}" for d, a, b in
                                     zip(rows["direction"], rows["from_m"], rows["to_m"]))),
            ("fit", f"RMSE {L(c['fit_rmse_m']):.3f} {E}, confidence of the fit {c['fit_confidence']}"
                    + (f" ({_e(c['flags'])})" if isinstance(c.get("flags"), str) and c["flags"] else "")),
            ("first thought on treatment", _e(worst["treatment_hint"])),
        ]
        ft = "".join(f"<tr><td>{_e(k)}</td><td>{v}</td></tr>" for k, v in facts)
        parts.append(f"<section class='curve sev-{_e(worst['severity'])}'><h3>{_e(title)}</h3>"
                     + (f"<img alt='Long profile of {_e(rid)} curve {cno}' src='{png}'>" if png
                        else FIGURE_MISSING.format(what="This curve's long profile")) +
                     f"<table class='facts'>{ft}</table></section>")

    # --- method
    parts.append("<h2 id='method' class='curve'>Method and criteria</h2>")
    parts.append("<table class='facts'>" + "".join(f"<tr><td>{_e(k)}</td><td>{_e(v)}</td></tr>" for k, v in method)
                 + "</table>")
    parts.append("<p class='small'>Every input and its SHA-256, the settings used and the time per stage are in "
                 "run.json.</p>")

    # --- data notes and skipped roads
    parts.append("<h2 id='notes'>Data notes and skipped roads</h2>")
    skipped = [x for x in r["skipped_roads"]]
    if skipped:
        parts.append(_table(pd.DataFrame(skipped).rename(columns={"road_id": "road", "reason": "why skipped"}), {}))
    else:
        parts.append("<p>No road was skipped.</p>")
    notes = result.data_notes()
    if len(notes):
        nt = units.table(notes)
        parts.append(_table(nt, {c: 0 for c in nt.columns if c.endswith(("_m", "_ft"))}))
    for n in summary.get("notes", []):
        parts.append(f"<p class='small'>{_e(n)}</p>")

    parts.append("<h2 id='cautions'>Cautions</h2>")
    parts.append(f"<p class='caution'>{_e(caution)}</p>")
    parts.append("<p>Profiles rebuilt from a DEM or ground points carry the errors of that data (bridges, walls, "
                 "vegetation, interpolation, the DEM's resolution); the recovered alignment is an estimate, and "
                 "the available sight distance here ignores horizontal obstructions, vegetation and parked "
                 "vehicles. Findings point to where to look, in what order; the site decides.</p>")
    parts.append(f"<p class='small'>Written {datetime.now(timezone.utc).isoformat(timespec='seconds')}.</p>")
    parts.append("</body></html>")
    return "".join(parts)


def write_profiles_pdf(path, result, units, page_m: float = 3000.0) -> int:
    """One long profile per evaluated road (split into pages of ``page_m`` metres); returns
    the number of pages."""
    from matplotlib.backends.backend_pdf import PdfPages

    ev = result.evaluation
    pages = 0
    roads = result.road_table()
    with PdfPages(path) as pdf:
        for rid, name in zip(roads.loc[roads["status"] == "evaluated", "road_id"],
                             roads.loc[roads["status"] == "evaluated", "name"]):
            rp = result.road_profile(rid)
            if not len(rp):
                continue
            cv = ev.curves[ev.curves["road_id"] == rid]
            rows = ev.inventory[ev.inventory["road_id"] == rid]
            end = float(rp["chainage_m"].max())
            n = max(int(np.ceil(end / page_m)), 1)
            for k in range(n):
                lo, hi = k * end / n, (k + 1) * end / n
                title = f"{rid} {name or ''}: long profile" + (f", sheet {k + 1} of {n}" if n > 1 else "")
                fig = road_figure(rp, cv, rows, units, title, lo, hi)
                pdf.savefig(fig)
                _mpl().close(fig)
                pages += 1
    return pages
