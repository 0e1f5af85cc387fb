"""The field sheets ``profiles.pdf``: every evaluated road's long profile, sheet by sheet.

Written only when asked for (``output.profiles_pdf``); matplotlib is imported only then.

Each sheet is a standard paper size in landscape (``output.sheet_paper``; A3 for metric
runs and Tabloid for US runs unless chosen) drawn at a fixed horizontal scale, so that every
sheet covers the same stated length of road, with a vertical exaggeration stated on the
sheet (10x where the road's relief fits, else the next of 5x, 2x, 1x, the same on all of a
road's sheets). A sheet holds:

- the ground profile and the fitted alignment, the tangents extended to each PVI;
- PVC, PVI and PVT marked with their station and elevation, the grade of every tangent
  (%, signed, two decimals) and the length L and rate of curvature K of every curve;
- the deficient stretches of both directions (shaded by severity, hatched by direction),
  the stretches the data cannot decide and the zones hidden at the required SSD;
- a chainage and elevation band under the profile: station, ground elevation and fitted
  elevation at regular ticks and at every PVC, PVI and PVT;
- a title block: road, sheet n of m, the scales and the vertical exaggeration, the paper,
  the date and the caution.

Stations are written ``12+345.6`` (km + m) in metric runs and ``123+45.6`` (100 ft stations)
in US runs (common practice, no source). Every label is placed inside its box on the sheet
and moved aside when it would overlap another (checked with matplotlib's text extents).
"""

from __future__ import annotations

import math
import textwrap
from datetime import datetime, timezone

import numpy as np
import pandas as pd

from ..core.version import __version__
from .figures import pyplot
from .method import CAUTION_TEXT
from .report_style import SEVERITY_COLOURS

MM = 1.0 / 25.4  # inches per millimetre

# landscape paper, width x height (mm): ISO 216 A3 and A4, ANSI B (Tabloid, 17 x 11 in) and
# ANSI A (Letter, 11 x 8.5 in)
PAPERS = {"A3": (420.0, 297.0), "A4": (297.0, 210.0), "tabloid": (431.8, 279.4), "letter": (279.4, 215.9)}
PAPER_NAMES = {"A3": "A3", "A4": "A4", "tabloid": "Tabloid (11 x 17 in)", "letter": "Letter (8.5 x 11 in)"}
LARGE = ("A3", "tabloid")

# horizontal scale, as the ratio paper : ground (common practice, no source): 1:2500 and 1:5000
# metric; 1 in = 200 ft (1:2400) and 1 in = 400 ft (1:4800) US
SCALES = {("metric", True): 2500, ("metric", False): 5000, ("us", True): 2400, ("us", False): 4800}
EXAGGERATIONS = (10, 5, 2, 1)  # vertical exaggeration, the first whose relief fits the sheet

GROUND_GREY = "#8C8C8C"
MARK_BLUE = "#2F5D8A"
HIDDEN_PURPLE = "#3B1F5C"
UNDETERMINED_GREY = "#9A9A9A"
HATCH = {"increasing": "////", "decreasing": "\\\\\\\\"}
# no ligatures, so that a reader searching the PDF finds "profile" and "fitted" (HarfBuzz feature tags)
NO_LIGATURES = ("-liga", "-clig")


# ------------------------------------------------------------------- stations
def station_label(value: float, per_station: float, decimals: int = 1) -> str:
    """A chainage written as a station, ``12+345.6`` or ``123+45.6``.

    Parameters
    ----------
    value : float
        Chainage in the output length unit (m or ft), not negative.
    per_station : float
        Length of one station in that unit: 1000 (km + m, metric) or 100 (100 ft stations, US).
    decimals : int, default 1
        Decimals of the part after the plus.

    Returns
    -------
    str
        ``whole + rest`` with the rest zero-padded to the digits of ``per_station``
        (common practice, no source): 12345.6 m at 1000 m gives ``12+345.6``; 12345.6 ft at
        100 ft gives ``123+45.6``.
    """
    v = round(float(value), decimals)
    whole = int(v // per_station)
    rest = v - whole * per_station
    if rest >= per_station:  # a hair of float error at a station boundary
        whole, rest = whole + 1, rest - per_station
    digits = len(str(int(per_station))) - 1
    width = digits + (decimals + 1 if decimals else 0)
    return f"{whole}+{max(rest, 0.0):0{width}.{decimals}f}"


def station(chainage_m: float, units, decimals: int = 1) -> str:
    """A chainage (m) as a station in the run's output units (:func:`station_label`).

    Parameters
    ----------
    chainage_m : float
        Chainage (m).
    units : OutputUnits
        The run's output units: km + m stations (metric) or 100 ft stations (US).
    decimals : int, default 1
        Decimals after the plus.

    Returns
    -------
    str
        The station, e.g. ``2+264.8`` or ``74+30.5``.
    """
    return station_label(units.length(chainage_m), 100.0 if units.us else 1000.0, decimals)


# ------------------------------------------------------------------- the sheet set
def sheet_setup(units, paper: str = "auto") -> dict:
    """The paper, scale and sheet length of a run's field sheets.

    Parameters
    ----------
    units : OutputUnits
        The run's output units.
    paper : str, default "auto"
        ``'auto'`` (A3 for metric runs, Tabloid for US runs), ``'A3'``, ``'A4'``,
        ``'tabloid'`` or ``'letter'``; always landscape.

    Returns
    -------
    dict
        ``paper`` (key of :data:`PAPERS`), ``paper_choice`` (how it was chosen),
        ``size_mm``, ``ratio`` (horizontal scale 1:ratio), ``scale_text``,
        ``sheet_length`` (ground length one sheet covers, output unit), ``sheet_length_m``,
        ``tick`` (spacing of the band's regular ticks, output unit) and ``layout`` (mm).
    """
    if paper == "auto":
        key = "tabloid" if units.us else "A3"
        choice = f"auto: {PAPER_NAMES[key]} for a {'US customary' if units.us else 'metric'} run"
    else:
        key = paper
        choice = f"{PAPER_NAMES[key]} as set (output.sheet_paper)"
    w, h = PAPERS[key]
    large = key in LARGE
    ratio = SCALES[(units.system, large)]
    lay = _layout(w, h, large)
    avail_mm = w - lay["right"] - lay["axes_left"]
    unit_m = units.m_per_length
    step = 100.0  # sheets are whole hundreds of m or ft
    length = math.floor(avail_mm / 1000.0 * ratio / unit_m / step) * step
    tick = 100.0 if ratio <= 2500 else 200.0
    if units.us:
        scale_text = f'1" = {ratio / 12:.0f} ft (1:{ratio})'
    else:
        scale_text = f"1:{ratio}"
    return {"paper": key, "paper_choice": choice, "size_mm": (w, h), "ratio": ratio, "scale_text": scale_text,
            "sheet_length": length, "sheet_length_m": length * unit_m, "tick": tick, "layout": lay}


def _layout(w: float, h: float, large: bool) -> dict:
    """Where the parts of a sheet go (mm from the lower left corner of the paper)."""
    margin = 10.0 if large else 8.0
    title_h = 36.0 if large else 31.0
    row_h = 15.0 if large else 12.5
    gap = 6.0 if large else 4.0
    header = 12.0 if large else 10.0
    band_bottom = margin + title_h + gap
    band_top = band_bottom + 3 * row_h
    return {"margin": margin, "title_h": title_h, "row_h": row_h, "band_bottom": band_bottom,
            "band_top": band_top, "axes_top": h - margin - header, "axes_left": margin + (32.0 if large else 30.0),
            "right": margin, "font": 7.0 if large else 6.0, "head_font": 11.0 if large else 9.5,
            "headroom": 42.0 if large else 36.0, "floor": 9.0 if large else 7.0}


def write_profiles_pdf(path, result, units, paper: str = "auto") -> dict:
    """Write the field sheets: every evaluated road's long profile, sheet by sheet.

    Parameters
    ----------
    path : str or pathlib.Path
        The PDF file to write.
    result : NetworkResult
        The run's result (road table, profiles, curves and inventory).
    units : OutputUnits
        The run's output units.
    paper : str, default "auto"
        Paper (``output.sheet_paper``): ``'auto'``, ``'A3'``, ``'A4'``, ``'tabloid'`` or
        ``'letter'``, landscape.

    Returns
    -------
    dict
        What was written, for ``run.json``: ``pages``, ``paper``, ``paper_choice``,
        ``size_mm``, ``horizontal_scale``, ``sheet_length`` with its ``unit``, and the
        vertical exaggeration of each road (``vertical_exaggeration``), with the roads
        drawn at less than 10x because their relief does not fit (``reduced_exaggeration``,
        and in words in ``notes``).
    """
    from matplotlib.backends.backend_pdf import PdfPages

    setup = sheet_setup(units, paper)
    roads = result.road_table()
    evaluated = roads[roads["status"] == "evaluated"]
    ev = result.evaluation
    profiles = result.road_profiles(evaluated["road_id"])
    date = datetime.now(timezone.utc).strftime("%Y-%m-%d")
    pages, ves = 0, {}
    with PdfPages(path) as pdf:
        for rid, name in zip(evaluated["road_id"], evaluated["name"]):
            rp = profiles.get(rid)
            if rp is None or not len(rp):
                continue
            cv = ev.curves[ev.curves["road_id"] == rid].sort_values("pvc_m")
            rows = ev.inventory[ev.inventory["road_id"] == rid]
            n, ve = _road_sheets(pdf, rp, cv, rows, rid, name, units, setup, date)
            pages += n
            ves[str(rid)] = ve
        meta = pdf.infodict()
        meta["Title"] = "Field sheets: long profiles (screening results)"
        meta["Creator"] = f"sightaudit {__version__}"
    return {"pages": pages, "paper": PAPER_NAMES[setup["paper"]] + " landscape", "paper_choice": setup["paper_choice"],
            "size_mm": list(setup["size_mm"]), "horizontal_scale": setup["scale_text"],
            "sheet_length": setup["sheet_length"], "unit": units.length_label, "vertical_exaggeration": ves,
            "reduced_exaggeration": {r: v for r, v in ves.items() if v < EXAGGERATIONS[0]},
            "notes": [f"{r} drawn at vertical exaggeration {v:g}x: its relief does not fit at {EXAGGERATIONS[0]}x"
                      for r, v in ves.items() if v < EXAGGERATIONS[0]]}


def _exaggeration(rp: pd.DataFrame, setup: dict, n: int) -> float:
    """The largest of :data:`EXAGGERATIONS` at which every sheet's relief fits below the labels."""
    lay = setup["layout"]
    room_mm = lay["axes_top"] - lay["band_top"] - lay["headroom"] - lay["floor"]
    z = np.where(np.isfinite(rp["ground_z_m"]), rp["ground_z_m"], rp["fitted_z_m"])
    x = rp["chainage_m"].to_numpy()
    span = 0.0
    for k in range(n):
        sel = (x >= k * setup["sheet_length_m"]) & (x <= (k + 1) * setup["sheet_length_m"])
        zz = np.concatenate([z[sel], rp["fitted_z_m"].to_numpy()[sel]])
        zz = zz[np.isfinite(zz)]
        if len(zz):
            span = max(span, float(zz.max() - zz.min()))
    for ve in EXAGGERATIONS:
        if span * 1000.0 * ve / setup["ratio"] <= room_mm:
            return float(ve)
    return round(room_mm * setup["ratio"] / 1000.0 / span, 2)  # steeper than any road: what fits, stated


def _road_sheets(pdf, rp, cv, rows, rid, name, units, setup, date) -> tuple[int, float]:
    """One road's sheets into ``pdf``; returns how many and the vertical exaggeration."""
    end = float(rp["chainage_m"].max())
    n = max(int(math.ceil(end / setup["sheet_length_m"] - 1e-9)), 1)
    ve = _exaggeration(rp, setup, n)
    for k in range(n):
        fig = _sheet(rp, cv, rows, rid, name, units, setup, date, k, n, ve)
        pdf.savefig(fig)
        pyplot().close(fig)
    return n, ve


# ------------------------------------------------------------------- one sheet
class _Placer:
    """Places text so that it stays inside a box and clear of the text already placed.

    Extents come from matplotlib (``Text.get_window_extent``) in display units; a label is
    moved through its candidate offsets until one fits, and is otherwise pushed back inside
    its box at the least overlap.
    """

    def __init__(self, fig):
        self.fig = fig
        self.renderer = fig.canvas.get_renderer()
        self.taken: list = []
        self.moved = False  # whether a label has been moved from its first place

    def extent(self, text):
        _no_ligatures(text)
        return text.get_window_extent(self.renderer)

    def _overlap(self, bb) -> float:
        total = 0.0
        for o in self.taken:
            w = min(bb.x1, o.x1) - max(bb.x0, o.x0)
            h = min(bb.y1, o.y1) - max(bb.y0, o.y0)
            if w > 0 and h > 0:
                total += w * h
        return total

    @staticmethod
    def _inside(bb, box) -> tuple[float, float]:
        """The shift (display units) that brings ``bb`` inside ``box``."""
        dx = max(box.x0 - bb.x0, 0.0) + min(box.x1 - bb.x1, 0.0)
        dy = max(box.y0 - bb.y0, 0.0) + min(box.y1 - bb.y1, 0.0)
        return dx, dy

    def place(self, text, box, offsets, required: bool = True) -> bool:
        """Try ``offsets`` (points, for an annotation) in turn; keep the first that fits.

        Parameters
        ----------
        text : matplotlib.text.Annotation
            The label, its offset in points (``xyann``).
        box : matplotlib.transforms.Bbox
            Where it must stay (display units).
        offsets : list of tuple
            Candidate offsets (points).
        required : bool, default True
            Whether the label must be shown: if not, one that fits nowhere is removed.

        Returns
        -------
        bool
            Whether the label is shown.
        """
        px = self.fig.dpi / 72.0
        best = None
        for dx, dy in offsets:
            text.xyann = (dx, dy)
            bb = self.extent(text)
            sx, sy = self._inside(bb, box)
            if sx or sy:  # pushed back inside its box
                dx, dy = dx + sx / px, dy + sy / px
                text.xyann = (dx, dy)
                bb = self.extent(text)
            cost = self._overlap(bb.expanded(1.05, 1.1))
            if cost == 0:
                self.taken.append(bb)
                self.moved |= (dx, dy) != tuple(offsets[0])
                return True
            if best is None or cost < best[0]:
                best = (cost, dx, dy)
        if not required:
            text.remove()
            return False
        text.xyann = best[1:]
        self.taken.append(self.extent(text))
        self.moved = True
        return True


def _sheet(rp, cv, rows, rid, name, units, setup, date, k, n, ve):
    """One sheet: the profile, the band and the title block."""
    plt = pyplot()
    L = units.length
    lay = setup["layout"]
    w, h = setup["size_mm"]
    fs = lay["font"]
    lo_m = k * setup["sheet_length_m"]
    hi_m = lo_m + setup["sheet_length_m"]
    end_m = float(rp["chainage_m"].max())
    fig = plt.figure(figsize=(w * MM, h * MM))
    ax_w = setup["sheet_length_m"] * 1000.0 / setup["ratio"]
    fx = lambda mm: mm / w  # noqa: E731
    fy = lambda mm: mm / h  # noqa: E731
    ax = fig.add_axes((fx(lay["axes_left"]), fy(lay["band_top"]), fx(ax_w), fy(lay["axes_top"] - lay["band_top"])))
    band = fig.add_axes((fx(lay["axes_left"]), fy(lay["band_bottom"]), fx(ax_w), fy(3 * lay["row_h"])), sharex=ax)
    placer = _Placer(fig)

    pad = 0.4 * setup["sheet_length_m"] / ax_w * 10  # 4 mm of ground, for the data's reach beyond the sheet
    p = rp[(rp["chainage_m"] >= lo_m - pad) & (rp["chainage_m"] <= hi_m + pad)]
    x = p["chainage_m"].to_numpy()
    vis = p[(p["chainage_m"] >= lo_m) & (p["chainage_m"] <= hi_m)]
    ylo, yhi = _elevation_range(vis, setup, ve, units)
    ax.set_xlim(L(lo_m), L(hi_m))
    ax.set_ylim(ylo, yhi)
    handles = _draw_profile(ax, p, x, units)
    handles += _draw_stretches(ax, rows, lo_m, hi_m, units)
    _gridlines(ax, band, setup, units, lo_m, hi_m, ylo, yhi, ve, fs)
    ax_box = ax.get_window_extent(placer.renderer)
    shown = cv[(cv["pvt_m"] >= lo_m) & (cv["pvc_m"] <= hi_m)]
    pv_points = _draw_curves(ax, placer, ax_box, p, shown, units, fs, lo_m, hi_m)
    _grade_labels(ax, placer, ax_box, rp, cv, units, fs, lo_m, min(hi_m, end_m))
    _band(band, placer, rp, units, setup, lo_m, min(hi_m, end_m), pv_points, fs)
    title = f"{rid} {name}" if isinstance(name, str) and name else str(rid)
    span_text = f"{station(lo_m, units, 0)} to {station(min(hi_m, end_m), units, 0)}"
    _header(fig, placer, lay, w, h, title, span_text, k, n)
    _title_block(fig, placer, lay, w, h, setup, units, title, span_text, k, n, ve, date, handles)
    from matplotlib.text import Text

    for t in fig.findobj(Text):
        _no_ligatures(t)
    return fig


def _elevation_range(vis: pd.DataFrame, setup: dict, ve: float, units) -> tuple[float, float]:
    """The sheet's elevation range (output unit): fixed by the vertical scale, its datum a round
    number below the lowest point, leaving the floor strip clear for the hidden zones."""
    lay = setup["layout"]
    height_mm = lay["axes_top"] - lay["band_top"]
    span = height_mm / 1000.0 * setup["ratio"] / ve / units.m_per_length
    z = np.concatenate([vis["ground_z_m"].to_numpy(), vis["fitted_z_m"].to_numpy()])
    z = z[np.isfinite(z)]
    zmin = units.length(float(z.min())) if len(z) else 0.0
    floor = lay["floor"] / 1000.0 * setup["ratio"] / ve / units.m_per_length
    step = _nice_step(span / 20.0)
    lo = math.floor((zmin - floor) / step) * step
    return lo, lo + span


def _nice_step(target: float) -> float:
    """A round step (1, 2 or 5 times a power of ten) at or above ``target``."""
    exp = 10.0 ** math.floor(math.log10(max(target, 1e-9)))
    for m in (1.0, 2.0, 5.0, 10.0):
        if m * exp >= target:
            return m * exp
    return 10.0 * exp


def _draw_profile(ax, p: pd.DataFrame, x: np.ndarray, units) -> list:
    """Ground samples (masked ones apart) and the fitted alignment; returns legend handles."""
    L = units.length
    masked = (p["ground_flag"] == "masked").to_numpy()
    gz = np.where(masked, np.nan, p["ground_z_m"].to_numpy())
    h = [ax.plot(L(x), L(gz), "-", lw=0.7, color=GROUND_GREY, label="ground profile (from the ground data)")[0]]
    if masked.any():
        h.append(ax.plot(L(x[masked]), L(p["ground_z_m"].to_numpy()[masked]), "x", ms=2.5, mew=0.6,
                         color=GROUND_GREY, label="ground masked (bridge, culvert or artefact)")[0])
    h.append(ax.plot(L(x), L(p["fitted_z_m"]), "-", lw=1.3, color="black", label="fitted alignment")[0])
    return h


def _draw_stretches(ax, rows: pd.DataFrame, lo: float, hi: float, units) -> list:
    """Deficient stretches by severity and direction, undecided stretches and hidden zones."""
    from matplotlib.patches import Patch

    L = units.length
    handles, seen = [], set()
    for d in rows.itertuples():
        a, b = min(d.from_m, d.to_m), max(d.from_m, d.to_m)
        if b < lo or a > hi:
            continue
        direction = "increasing" if d.direction == "increasing" else "decreasing"
        arrow = f"{direction} chainage"
        if d.verdict == "deficient":
            colour, key = SEVERITY_COLOURS.get(d.severity, SEVERITY_COLOURS["severe"]), (d.severity, direction)
            label = f"{d.severity} deficiency, {arrow}"
        else:
            colour, key = UNDETERMINED_GREY, ("undetermined", direction)
            label = f"undetermined (data cannot decide), {arrow}"
        ax.axvspan(L(a), L(b) + 1e-9, facecolor=_faded(colour, 0.35), hatch=HATCH[direction], lw=0, zorder=0.5,
                   **_hatch_colour(colour))
        if key not in seen:
            seen.add(key)
            handles.append(Patch(facecolor=_faded(colour, 0.35), hatch=HATCH[direction], lw=0, label=label,
                                 **_hatch_colour(colour)))
    hidden = rows[np.isfinite(rows["hidden_from_m"].astype(float)) & np.isfinite(rows["hidden_to_m"].astype(float))]
    for d in hidden.itertuples():
        if d.hidden_to_m < lo or d.hidden_from_m > hi:
            continue
        ax.axvspan(L(d.hidden_from_m), L(d.hidden_to_m), ymin=0.0, ymax=0.035, facecolor=HIDDEN_PURPLE, alpha=0.6,
                   lw=0, zorder=0.6)
        if "hidden" not in seen:
            seen.add("hidden")
            handles.append(Patch(facecolor=HIDDEN_PURPLE, alpha=0.6, label="road hidden at the required SSD (foot)"))
    haz = rows[rows["hidden_hazard"].fillna("none").astype(str) != "none"]
    for d in haz.itertuples():
        hx = float(d.hazard_chainage_m)
        if np.isfinite(hx) and lo <= hx <= hi:
            ax.plot([L(hx)], [0.045], transform=ax.get_xaxis_transform(), marker="v", ms=5, color=HIDDEN_PURPLE,
                    ls="none", zorder=3)
            if "hazard" not in seen:
                seen.add("hazard")
                handles.append(ax.plot([], [], marker="v", ms=5, color=HIDDEN_PURPLE, ls="none",
                                       label="hidden hazard (junction or access)")[0])
    return handles


def _hatch_colour(colour: str) -> dict:
    """The keyword that colours a patch's hatching: ``hatchcolor`` where matplotlib has it (3.10
    on), else the edge colour, which older versions hatch in."""
    from matplotlib.patches import Patch

    return {"hatchcolor": colour} if hasattr(Patch, "set_hatchcolor") else {"edgecolor": colour}


def _no_ligatures(text) -> None:
    """Ligatures off where matplotlib shapes text with font features (3.11 on)."""
    if hasattr(text, "set_fontfeatures"):
        text.set_fontfeatures(NO_LIGATURES)


def _faded(colour: str, alpha: float) -> tuple:
    """``colour`` laid over white at ``alpha`` (opaque, so hatching over it stays crisp)."""
    from matplotlib.colors import to_rgb

    return tuple(1.0 - alpha * (1.0 - c) for c in to_rgb(colour))


def _gridlines(ax, band, setup, units, lo, hi, ylo, yhi, ve, fs) -> None:
    """The profile's elevation grid and the vertical lines at the band's regular ticks."""
    from matplotlib.ticker import MultipleLocator

    E = units.length_label
    tick = setup["tick"]
    ax.xaxis.set_major_locator(MultipleLocator(tick))
    ystep = _nice_step((yhi - ylo) / 12.0)
    ax.yaxis.set_major_locator(MultipleLocator(ystep))
    ax.grid(True, which="major", color="#D0D0D0", lw=0.4)
    ax.tick_params(axis="x", labelbottom=False, length=0)
    ax.tick_params(axis="y", labelsize=fs, length=2)
    ax.set_ylabel(f"elevation ({E})", fontsize=fs + 0.5, labelpad=2)
    band.set_ylim(0, 3)
    band.set_yticks([])
    band.tick_params(axis="x", labelbottom=False, length=0)
    band.grid(True, axis="x", color="#D0D0D0", lw=0.4)
    for yy in (1, 2):
        band.axhline(yy, color="black", lw=0.5)
    names = ["station", f"ground\nelevation ({E})", f"fitted\nelevation ({E})"]
    for i, nm in enumerate(names):
        band.text(-0.006, 2.5 - i, nm, transform=band.get_yaxis_transform(), ha="right", va="center", fontsize=fs,
                  linespacing=1.1)


def _z_at(p: pd.DataFrame, col: str, x: float) -> float:
    """Elevation of ``col`` at chainage ``x`` (m) by interpolation; NaN without data there."""
    z = p[col].to_numpy(dtype=float)
    c = p["chainage_m"].to_numpy(dtype=float)
    ok = np.isfinite(z)
    if col == "ground_z_m" and "ground_flag" in p:
        ok &= (p["ground_flag"] != "masked").to_numpy()
    if ok.sum() < 2 or x < c[ok][0] - 1e-6 or x > c[ok][-1] + 1e-6:
        return float("nan")
    i = np.searchsorted(c, x)
    near = c[max(i - 1, 0):i + 1]
    if len(near) and not ok[max(i - 1, 0):i + 1].all() and np.abs(near - x).min() > 1e-6:
        return float("nan")  # in a gap of the ground data
    return float(np.interp(x, c[ok], z[ok]))


def _pv_points(c) -> list[tuple[str, float, float]]:
    """PVC, PVI and PVT of a curve: name, chainage (m) and elevation on the tangents (m)."""
    z_pvc = c.pvi_elev_m - c.g1_pct / 100.0 * (c.pvi_m - c.pvc_m)
    z_pvt = c.pvi_elev_m + c.g2_pct / 100.0 * (c.pvt_m - c.pvi_m)
    return [("PVC", c.pvc_m, z_pvc), ("PVI", c.pvi_m, c.pvi_elev_m), ("PVT", c.pvt_m, z_pvt)]


def _draw_curves(ax, placer, box, p, curves, units, fs, lo, hi) -> list:
    """Tangents to each PVI, the PV marks with station and elevation, and each curve's L and K.

    Returns the PV points on the sheet, for the band."""
    L, E = units.length, units.length_label
    pts = []
    labels = []
    for c in curves.itertuples():
        pv = _pv_points(c)
        ax.plot([L(v[1]) for v in pv], [L(v[2]) for v in pv], "--", lw=0.6, color=MARK_BLUE, zorder=2)
        ax.plot([L(c.pvi_m)], [L(c.pvi_elev_m)], marker="^", ms=3.5, color=MARK_BLUE, ls="none", zorder=3)
        seg = p[(p["chainage_m"] >= c.pvc_m - 1) & (p["chainage_m"] <= c.pvt_m + 1)]
        z_top = np.nanmax(np.concatenate([seg["fitted_z_m"].to_numpy(), seg["ground_z_m"].to_numpy(),
                                          [v[2] for v in pv]]))
        for nm, xm, zm in pv:
            if not lo - 1e-6 <= xm <= hi + 1e-6:
                continue
            pts.append((nm, xm, zm))
            ax.plot([L(xm), L(xm)], [L(zm), L(z_top)], "-", lw=0.5, color=MARK_BLUE, zorder=2)
            t = ax.annotate(f"{nm} {station(xm, units)}  EL {L(zm):.2f}", (L(xm), L(z_top)), xytext=(0, 3),
                            textcoords="offset points", rotation=90, ha="center", va="bottom", fontsize=fs - 0.5,
                            color=MARK_BLUE, annotation_clip=False, zorder=4,
                            arrowprops={"arrowstyle": "-", "lw": 0.4, "color": MARK_BLUE, "shrinkA": 0, "shrinkB": 0})
            labels.append(t)
        k_txt = f"{L(c.k):.1f}" if np.isfinite(c.k) else "n/a"
        need = f", K needed {L(c.k_required):.0f}" if np.isfinite(getattr(c, "k_required", np.nan)) else ""
        verdict = f" ({c.verdict})" if isinstance(c.verdict, str) and c.verdict else ""
        text = f"{c.kind} {int(c.curve_no)}{verdict}: L {L(c.length_m):.1f} {E}, K {k_txt} {E}/%{need}"
        if hi < c.pvi_m or c.pvi_m < lo:
            anchor = L(min(max(c.pvi_m, lo), hi))
        else:
            anchor = L(c.pvi_m)
        labels.append(("curve", text, anchor, L(z_top)))
    # PV labels first (fixed places, moved sideways when they meet), then the curve labels above them
    curve_labels = [v for v in labels if isinstance(v, tuple)]
    pv_labels = [v for v in labels if not isinstance(v, tuple)]
    for t in pv_labels:
        w = placer.extent(t).width * 72.0 / placer.fig.dpi
        placer.place(t, box, [(0, 3)] + [(s * j * (w + 1), 3) for j in (1, 2, 3) for s in (1, -1)])
    for _, text, xa, za in curve_labels:
        t = ax.annotate(text, (xa, za), xytext=(0, 0), textcoords="offset points", ha="center", va="bottom",
                        fontsize=fs, fontweight="bold", color="black", annotation_clip=False, zorder=4,
                        bbox={"boxstyle": "square,pad=0.15", "fc": "white", "ec": "none", "alpha": 0.85})
        base = _label_top(placer, pv_labels, xa, ax) + 2
        hh = placer.extent(t).height * 72.0 / placer.fig.dpi
        placer.place(t, box, [(0, base + j * (hh + 1)) for j in range(8)] + [(0, base - j * (hh + 1))
                                                                            for j in range(1, 8)])
    return pts


def _label_top(placer, pv_labels, xa, ax) -> float:
    """Height (points above the anchor) of the tallest PV label within 40 points of ``xa``."""
    px = placer.fig.dpi / 72.0
    x_disp = ax.transData.transform((xa, ax.get_ylim()[0]))[0]
    top = 0.0
    for t in pv_labels:
        bb = placer.extent(t)
        if abs((bb.x0 + bb.x1) / 2 - x_disp) < 40 * px:
            anchor_y = ax.transData.transform(t.xy)[1]
            top = max(top, (bb.y1 - anchor_y) / px)
    return top


def _tangents(rp: pd.DataFrame, cv: pd.DataFrame) -> list[tuple[float, float, float]]:
    """The tangents of a road: start, end (m) and grade (%), between its curves."""
    end = float(rp["chainage_m"].max())
    start = float(rp["chainage_m"].min())
    if not len(cv):
        ok = np.isfinite(rp["fitted_z_m"])
        if ok.sum() < 2:
            return []
        g = np.polyfit(rp.loc[ok, "chainage_m"], rp.loc[ok, "fitted_z_m"], 1)[0] * 100.0
        return [(start, end, float(g))]
    out = [(start, float(cv["pvc_m"].iloc[0]), float(cv["g1_pct"].iloc[0]))]
    for i in range(len(cv)):
        a = float(cv["pvt_m"].iloc[i])
        b = float(cv["pvc_m"].iloc[i + 1]) if i + 1 < len(cv) else end
        out.append((a, b, float(cv["g2_pct"].iloc[i])))
    return [t for t in out if t[1] > t[0]]


def _grade_labels(ax, placer, box, rp, cv, units, fs, lo, hi) -> None:
    """The grade of each tangent on the sheet (%, signed, two decimals), under its middle."""
    L = units.length
    mm_per_m = box.width / (L(hi if hi > lo else lo + 1) - L(lo)) if hi > lo else 0
    for a, b, g in _tangents(rp, cv):
        a, b = max(a, lo), min(b, hi)
        if b <= a or (L(b) - L(a)) * mm_per_m < 30:  # too short on paper to label
            continue
        xm = (a + b) / 2
        zm = _z_at(rp, "fitted_z_m", xm)
        if not np.isfinite(zm):
            continue
        t = ax.annotate(f"{g:+.2f} %", (L(xm), L(zm)), xytext=(0, -9), textcoords="offset points", ha="center",
                        va="top", fontsize=fs, color="black", annotation_clip=False, zorder=4,
                        bbox={"boxstyle": "square,pad=0.1", "fc": "white", "ec": "none", "alpha": 0.8})
        placer.place(t, box, [(0, -9), (0, -20), (25, -9), (-25, -9), (0, 10), (0, -32), (50, -9), (-50, -9)])


def _band(band, placer, rp, units, setup, lo, hi, pv_points, fs) -> None:
    """The chainage and elevation band: station, ground and fitted elevation at the regular
    ticks and at every PVC, PVI and PVT (these in blue, placed first)."""
    L = units.length
    box = band.get_window_extent(placer.renderer)
    rows_px = box.height / 3.0
    tick_m = setup["tick"] * units.m_per_length
    ticks = np.arange(math.ceil(lo / tick_m - 1e-9) * tick_m, hi + 1e-6, tick_m)
    # (chainage, station, ground, fitted, colour, bold, must show): PV points, then the road's end on its
    # last sheet, then the regular ticks (left out where they would meet one of the others)
    items = [(x, station(x, units), _z_at(rp, "ground_z_m", x), zt, MARK_BLUE, True, True) for _, x, zt in pv_points]
    if hi - lo > 0.05 * tick_m and not np.any(np.abs(ticks - hi) < 1e-6):
        items.append((hi, station(hi, units), _z_at(rp, "ground_z_m", hi), _z_at(rp, "fitted_z_m", hi), "black",
                      False, True))
    items += [(x, station(x, units, 0), _z_at(rp, "ground_z_m", x), _z_at(rp, "fitted_z_m", x), "black", False,
               False) for x in ticks]
    from matplotlib.transforms import Bbox

    mm_per_m = (box.width / placer.fig.dpi * 25.4) / setup["sheet_length_m"]
    xs = np.array([v[0] for v in items])
    near = [np.delete(np.abs(xs - x), j).min(initial=np.inf) * mm_per_m for j, x in enumerate(xs)]
    clear = [bool(near[j] > 8.0 and (x - lo) * mm_per_m > 4.0 and (lo + setup["sheet_length_m"] - x) * mm_per_m > 4.0)
             for j, x in enumerate(xs)]
    placer.moved = False
    for i in range(3):
        row = Bbox.from_extents(box.x0 + 1, box.y1 - (i + 1) * rows_px + 1, box.x1 - 1, box.y1 - i * rows_px - 1)
        for j, (x, st, zg, zf, colour, bold, key) in enumerate(items):
            val = (st, f"{L(zg):.2f}" if np.isfinite(zg) else "no data", f"{L(zf):.2f}" if np.isfinite(zf) else "-")[i]
            t = band.annotate(val, (L(x), 2.5 - i), xytext=(0, 0), textcoords="offset points", rotation=90,
                              ha="center", va="center", fontsize=fs - 0.5, color=colour, annotation_clip=False,
                              fontweight="bold" if bold else "normal",
                              bbox={"boxstyle": "square,pad=0.1", "fc": "white", "ec": "none"} if key else None)
            if clear[j] and j > 0 and not placer.moved:
                continue  # far from every other value and the edges, none moved: nothing to meet (the first checked)
            wpt = placer.extent(t).width * 72.0 / placer.fig.dpi if key else 0.0
            offs = [(0, 0)] + ([(s * k * (wpt + 0.5), 0) for k in (1, 2, 3) for s in (1, -1)] if key else [])
            placer.place(t, row, offs, required=key)
    for nm, x, _ in pv_points:
        band.axvline(L(x), color=MARK_BLUE, lw=0.4, ls=":")


def _header(fig, placer, lay, w, h, title, span_text, k, n) -> None:
    """The sheet's heading above the profile, smaller type for a long road name."""
    y = (h - lay["margin"] - 2.0) / h
    right = fig.text(1 - lay["right"] / w, y, f"sheet {k + 1} of {n}", ha="right", va="top",
                     fontsize=lay["head_font"], fontweight="bold")
    limit = placer.extent(right).x0 - 12.0 * fig.dpi / 72.0
    words = f"{title}: long profile, {span_text}"
    for size in np.arange(lay["head_font"], 5.9, -0.5):
        t = fig.text(lay["margin"] / w, y, words, ha="left", va="top", fontsize=size, fontweight="bold")
        if placer.extent(t).x1 <= limit:
            return
        t.remove()
    while len(title) > 4:  # still too long at 6 pt: the name shortened (it is whole in the title block)
        title = title[:-2]
        t = fig.text(lay["margin"] / w, y, f"{title}…: long profile, {span_text}", ha="left", va="top",
                     fontsize=6.0, fontweight="bold")
        if placer.extent(t).x1 <= limit:
            return
        t.remove()


def _title_block(fig, placer, lay, w, h, setup, units, title, span_text, k, n, ve, date, handles) -> None:
    """The title block along the foot: legend, road, scales and exaggeration, sheet, caution."""
    from matplotlib.patches import Rectangle
    from matplotlib.transforms import Bbox

    m, th = lay["margin"], lay["title_h"]
    inner = w - 2 * m
    widths = [0.36, 0.17, 0.17, 0.11, 0.19]
    fs = lay["font"] + 1.0
    x = m
    cells = []
    for frac in widths:
        cw = frac * inner
        fig.add_artist(Rectangle((x / w, m / h), cw / w, th / h, transform=fig.transFigure, fill=False, lw=0.7))
        cells.append((x, cw))
        x += cw
    fig.add_artist(Rectangle((m / w, m / h), inner / w, th / h, transform=fig.transFigure, fill=False, lw=1.2))
    to_disp = lambda xm, ym: fig.transFigure.transform((xm / w, ym / h))  # noqa: E731

    def cell_box(i):
        x0, cw = cells[i]
        (a, b), (c, d) = to_disp(x0 + 1.2, m + 1.0), to_disp(x0 + cw - 1.2, m + th - 1.0)
        return Bbox.from_extents(a, b, c, d)

    # legend, fitted into its cell (fewer columns, then smaller type)
    x0, cw = cells[0]
    tries = [(2, fs - 1.0), (2, fs - 1.5), (2, fs - 2.0), (1, fs - 2.0), (2, fs - 2.5), (3, fs - 3.0)]
    for ncol, size in tries:
        leg = fig.legend(handles=handles, loc="upper left", bbox_to_anchor=((x0 + 1) / w, (m + th - 1) / h),
                         ncol=ncol, fontsize=size, frameon=False, handlelength=2.0, columnspacing=1.0,
                         borderaxespad=0.2, labelspacing=0.35, title="legend", title_fontsize=size + 0.5,
                         alignment="left")
        bb = leg.get_window_extent(placer.renderer)
        if (bb.x1 <= cell_box(0).x1 and bb.y0 >= cell_box(0).y0) or (ncol, size) == tries[-1]:
            break
        leg.remove()
    scale_v = setup["ratio"] / ve
    if units.us:
        v_text = f'vertical 1" = {scale_v / 12:.0f} ft (1:{scale_v:.0f})'
    else:
        v_text = f"vertical 1:{scale_v:.0f}"
    ve_text = f"vertical exaggeration {ve:g}x"
    ve_why = [(f"(this road's relief does not fit at {EXAGGERATIONS[0]}x)", fs - 0.5, "normal")] \
        if ve < EXAGGERATIONS[0] else []
    per = "1000 m" if not units.us else "100 ft"
    blocks = [
        [(title, fs + 2.0, "bold"), ("long profile: ground and fitted alignment", fs, "normal"),
         (span_text, fs, "normal"), (f"stations of {per}; elevations in {units.length_label}", fs, "normal")],
        [(f"horizontal {setup['scale_text']}", fs, "bold"), (v_text, fs, "bold"), (ve_text, fs, "bold")] + ve_why +
        [(f"one sheet = {setup['sheet_length']:,.0f} {units.length_label} of road", fs, "normal"),
         (f"{PAPER_NAMES[setup['paper']]} landscape, printed at 100 %", fs, "normal")],
        [(f"sheet {k + 1} of {n}", fs + 2.0, "bold"), (f"date {date}", fs, "normal"),
         (f"sightaudit {__version__}", fs, "normal")],
    ]
    for i, lines in enumerate(blocks, start=1):
        _text_in_cell(fig, placer, cell_box(i), lines)
    _caution(fig, placer, cell_box(4), fs + 0.5)


def _caution(fig, placer, box, fs: float) -> None:
    """The caution, wrapped to its cell by measure, smaller type when it would not fit."""
    words = "CAUTION: " + CAUTION_TEXT
    for size in (fs, fs - 0.5, fs - 1.0, fs - 1.5, fs - 2.0):
        for width in range(80, 15, -4):
            t = fig.text(*_fig_xy(fig, box.x0, box.y1), textwrap.fill(words, width=width), fontsize=size,
                         fontweight="bold", color="#8B1E0F", ha="left", va="top", linespacing=1.15)
            bb = placer.extent(t)
            if bb.x1 <= box.x1:
                break
            t.remove()
        if bb.x1 <= box.x1 and bb.y0 >= box.y0:
            return
        t.remove()
    raise RuntimeError("the caution does not fit its cell of the title block")


def _text_in_cell(fig, placer, box, lines) -> None:
    """Lines of text from the top of a cell down, smaller (and at last wrapped) when they would
    leave it."""
    for shrink in (0.0, 0.5, 1.0, 1.5, 2.0, 2.5):
        made, y, fits = [], box.y1, True
        for text, size, weight in lines:
            t = fig.text(*_fig_xy(fig, box.x0, y), text, fontsize=size - shrink, fontweight=weight, ha="left",
                         va="top")
            bb = placer.extent(t)
            if bb.x1 > box.x1 and shrink == 2.5:  # the smallest type still too wide: wrapped by measure
                chars = max(int(len(text) * box.width / bb.width) - 1, 8)
                t.set_text(textwrap.fill(text, width=chars))
                bb = placer.extent(t)
            made.append(t)
            y = min(y - 1.45 * (size - shrink) * fig.dpi / 72.0, bb.y0 - 0.3 * (size - shrink) * fig.dpi / 72.0)
            fits &= bb.x1 <= box.x1 and bb.y0 >= box.y0
        if fits or shrink == 2.5:
            return
        for t in made:
            t.remove()


def _fig_xy(fig, x_disp: float, y_disp: float) -> tuple[float, float]:
    """A point in display units as a fraction of the figure (which survives a change of dpi)."""
    fx, fy = fig.transFigure.inverted().transform((x_disp, y_disp))
    return float(fx), float(fy)
