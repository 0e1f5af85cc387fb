"""The report's overview map, written as inline SVG.

The map is text in the report itself: nothing is fetched and no plotting library is needed.
Roads are drawn from their working-CRS centrelines (a projected, metric CRS; north up, so y
is flipped for the screen), deficient stretches over them in
:data:`pipeline.outputs.report_style.SEVERITY_COLOURS` (one hue, light to dark, the worst the
darkest) and wider the worse they are; stretches the data cannot decide are grey and dashed.

Every deficient stretch gets a marker and a label with its rank. Labels are placed greedily,
in rank order, at the first free spot of a list of candidate positions around the marker
(next to it, then on rings further out with a leader line); a spot is free when its box
overlaps no box placed before (markers, labels, road names) and lies in the drawing. A label
that finds no spot goes to a row under the drawing, joined to its marker by a leader line. So
no two labels ever print over each other. Roads are named along their line where the name
fits straight and free.

The boxes placed are kept in a uniform grid (:class:`BoxGrid`), so each test looks only at the
boxes near a spot, and all spots of a label or a road name are tested in one numpy pass: the
cost grows with the number of stretches and roads, not its square. Road lines are simplified
to half a pixel before they are drawn and named.

A network whose roads lie in groups far apart (its bounding box mostly empty, or very long and
thin) gets an overview and one inset per group, a group too long for its panel being cut into
pieces; the groups are the connected sets of road bounding boxes closer than a gap. Each inset
is drawn at its own scale with its own scale bar and is outlined and lettered on the overview.

Hover shows a stretch's rank, road, chainage range, kind, shortfall and verdict (SVG
``<title>``); a label links to its curve's page where the report has one.
"""

from __future__ import annotations

import functools
import html
import math
from dataclasses import dataclass, field

import numpy as np
import shapely

from ..profile.stations import Polyline
from .anchors import curve_anchor
from .report_style import ROAD_GREY, SEVERITY_COLOURS

FONT = "DejaVu Sans, Arial, sans-serif"
WIDTH = 960.0  # the drawing's width in SVG user units (px)
MARGIN = 10.0  # around everything
GAP = 14.0  # between panels
UNDETERMINED_GREY = "#5E5E5E"
SKIPPED_GREY = "#C4C4C4"
INK = "#1A1A1A"
INSET_INK = "#3B1F5C"
STRETCH_WIDTH = {"minor": 3.0, "moderate": 4.5, "severe": 6.0}  # px, so the order survives grey printing
RANK_FONT = 11.0
ROAD_FONT = 10.0
MARKER_R = 4.0
MAX_INSETS = 6

# glyph advance widths as a fraction of the font size, DejaVu Sans (the report's first font,
# among the wider common sans faces); the text is then fitted to that width (textLength)
_ADVANCE = {False: {"#": 0.84, "digit": 0.64, "upper": 0.72, "lower": 0.60, " ": 0.32, "other": 0.50},
            True: {"#": 0.84, "digit": 0.70, "upper": 0.78, "lower": 0.66, " ": 0.35, "other": 0.56}}


# ------------------------------------------------------------------ inputs
@dataclass(frozen=True)
class MapRoad:
    """A road as drawn: id, name (or id), centreline vertices (m) and whether it was skipped."""

    road_id: str
    name: str
    xy: np.ndarray
    skipped: bool = False


@dataclass(frozen=True)
class MapStretch:
    """A deficient or undetermined stretch as drawn.

    ``xy``: the stretch's vertices (m); ``anchor``: its middle (m); ``title``: the hover text;
    ``href``: the curve page's fragment (``#...``) or empty; ``where``: road and chainage range
    in a few words, for a label that finds no room on the drawing.
    """

    rank: int
    road_id: str
    severity: str
    verdict: str
    xy: np.ndarray
    anchor: tuple[float, float]
    title: str
    href: str = ""
    where: str = ""


def network_map_svg(result, inventory, units, paged: set | None = None) -> str:
    """The report's overview map of a run as an SVG document (a string).

    Parameters
    ----------
    result : NetworkResult
        The run's result (the roads' working-CRS centrelines and names).
    inventory : pandas.DataFrame
        The ranked stretches (internal units: m).
    units : OutputUnits
        The run's output units (scale bars, hover text).
    paged : set of (str, int), optional
        The (road_id, curve_no) given a page in the report; their labels link there.

    Returns
    -------
    str
        ``<svg>...</svg>``, self-contained (only ``#`` links).
    """
    roads, stretches = map_inputs(result.roads.table, inventory, units, paged or set())
    return map_svg(roads, stretches, units)


def map_inputs(table, inventory, units, paged: set) -> tuple[list[MapRoad], list[MapStretch]]:
    """The roads and stretches to draw, from the road table and the ranked inventory.

    Parameters
    ----------
    table : pandas.DataFrame
        The road table (``road_id``, ``name``, ``geometry`` in the working CRS, ``skip_reason``).
    inventory : pandas.DataFrame
        The ranked stretches (``rank``, ``road_id``, ``from_m``, ``to_m``, ``severity``,
        ``verdict``, ``kind``, ``direction``, ``curve_no``, ``shortfall_m``), m.
    units : OutputUnits
        The run's output units, for the hover text.
    paged : set of (str, int)
        The curves with a page in the report.

    Returns
    -------
    (list of MapRoad, list of MapStretch)
        Stretches on a road without a centreline are left out (there is nowhere to draw them).
    """
    roads, lines = [], {}
    names = table["name"] if "name" in table else table["road_id"]
    skips = table["skip_reason"] if "skip_reason" in table else [None] * len(table)
    for rid, name, geom, skip in zip(table["road_id"], names, table["geometry"], skips):
        if geom is None or shapely.is_empty(geom):
            continue
        label = name.strip() if isinstance(name, str) and name.strip() else str(rid)
        for part in shapely.get_parts(geom):
            roads.append(MapRoad(str(rid), label, shapely.get_coordinates(part), isinstance(skip, str)))
        lines[rid] = (geom, label)
    stretches, polys = [], {}
    for d in inventory.itertuples(index=False):
        if d.road_id not in lines:
            continue
        if d.road_id not in polys:
            polys[d.road_id] = Polyline(lines[d.road_id][0])
        poly = polys[d.road_id]
        ax, ay = poly.at((d.from_m + d.to_m) / 2.0)
        cno = curve_number(d.curve_no)
        href = f"#{curve_anchor(d.road_id, cno)}" if cno is not None and (d.road_id, cno) in paged else ""
        stretches.append(MapStretch(int(d.rank), str(d.road_id), str(d.severity), str(d.verdict),
                                    poly.cut(d.from_m, d.to_m), (float(ax), float(ay)),
                                    hover_text(d, lines[d.road_id][1], units, bool(href)), href,
                                    f"{lines[d.road_id][1]} {units.length(d.from_m):,.0f}-"
                                    f"{units.length(d.to_m):,.0f} {units.length_label}"))
    return roads, stretches


def curve_number(value) -> int | None:
    """A curve number as an int, None when missing."""
    try:
        f = float(value)
    except (TypeError, ValueError):
        return None
    return int(f) if math.isfinite(f) else None


def hover_text(d, name: str, units, linked: bool) -> str:
    """A stretch's hover text: rank, road, chainage range, kind, shortfall, severity and verdict."""
    L, E = units.length, units.length_label
    cno = curve_number(d.curve_no)
    curve = f"{d.kind} curve {cno}" if cno else f"{d.kind}, no fitted curve limits the sight"
    text = (f"#{int(d.rank)} {name} ({d.road_id}): chainage {L(d.from_m):,.0f} to {L(d.to_m):,.0f} {E}, "
            f"{d.direction} chainage; {curve}; short of SSD by {L(d.shortfall_m):,.0f} {E}; "
            f"severity {d.severity}; verdict {d.verdict}")
    return text + ("; click to open the curve's page" if linked else "")


# ------------------------------------------------------------------ text and boxes
@functools.lru_cache(maxsize=4096)
def text_width(text: str, size: float, bold: bool = False) -> float:
    """Width of a line of text (px), from DejaVu Sans advance widths rounded up."""
    adv = _ADVANCE[bold]

    def one(ch):
        if ch in adv:
            return adv[ch]
        if ch.isdigit():
            return adv["digit"]
        if ch.isupper():
            return adv["upper"]
        return adv["lower"] if ch.isalpha() else adv["other"]

    return size * sum(one(ch) for ch in text)


def overlaps(cands: np.ndarray, boxes: np.ndarray, pad: float = 1.0) -> np.ndarray:
    """Whether each candidate box (k, 4: x0, y0, x1, y1) overlaps any of ``boxes`` (m, 4), the
    candidates grown by ``pad`` px; touching is not overlapping."""
    if not len(boxes):
        return np.zeros(len(cands), dtype=bool)
    c = cands[:, None, :]
    b = boxes[None, :, :]
    hit = ((c[..., 0] - pad < b[..., 2]) & (b[..., 0] < c[..., 2] + pad)
           & (c[..., 1] - pad < b[..., 3]) & (b[..., 1] < c[..., 3] + pad))
    return hit.any(axis=1)


def inside(cands: np.ndarray, bounds) -> np.ndarray:
    """Whether each candidate box lies wholly within ``bounds`` (x0, y0, x1, y1)."""
    return ((cands[:, 0] >= bounds[0]) & (cands[:, 1] >= bounds[1])
            & (cands[:, 2] <= bounds[2]) & (cands[:, 3] <= bounds[3]))


LEADER_MAX = 240.0  # px; a label that would sit further from its marker goes under the drawing


def _rings(reach: float):
    """Candidate radii (px) beyond the first ring, growing by about a third each step."""
    r = 20.0
    while r <= reach:
        yield r
        r = r * 1.3 + 4.0


def label_candidates(anchor, size, radius: float | None) -> np.ndarray:
    """Candidate boxes for a label of ``size`` (w, h) around ``anchor`` (px), best first.

    ``radius`` None gives the eight spots touching the marker (the corners first, upper
    right, lower right, upper left, lower left, so that a label leaves the road under it
    free, then east, west, north and south); a radius gives spots evenly round a ring.
    """
    w, h = size
    x, y = anchor
    if radius is None:
        d = MARKER_R + 2.0
        e, n = MARKER_R - 1.0 + w / 2, MARKER_R + 3.0 + h / 2  # clear of the marker's box
        centres = [(e, -n), (e, n), (-e, -n), (-e, n), (d + w / 2, 0), (-(d + w / 2), 0), (0, -(d + h / 2)),
                   (0, d + h / 2)]
        c = np.asarray(centres, dtype=float)
    else:
        n = int(np.clip(2 * math.pi * radius / 16.0, 12, 96))
        t = np.arange(n) * 2 * math.pi / n
        c = np.column_stack([radius * np.cos(t) + np.sign(np.cos(t)) * w / 2, -radius * np.sin(t)])
    c = c + np.asarray([x, y])
    return np.column_stack([c[:, 0] - w / 2, c[:, 1] - h / 2, c[:, 0] + w / 2, c[:, 1] + h / 2])


_FAR = 1e9  # px; an empty slot of the grid holds a box this far off, which meets nothing


class BoxGrid:
    """Axis-aligned boxes (px) in a uniform grid hash, for overlap tests that stay local.

    Each box is filed under every cell of ``cell`` px it meets (cells outside the grid's
    ``bounds`` are clamped to its edge, which keeps the test exact, only less sharp there),
    together with its oriented rectangle (:func:`as_oriented`; a road name's own). A query
    gathers the boxes filed under the cells a candidate meets and tests those alone, so its
    cost does not grow with the number of boxes placed. Common practice in spatial indexing,
    no single source.

    Parameters
    ----------
    bounds : tuple of float
        The area queried (x0, y0, x1, y1; px).
    cell : float
        The cell's side (px); about a rank label's size.
    """

    def __init__(self, bounds, cell: float = 32.0):
        self.x0, self.y0 = float(bounds[0]), float(bounds[1])
        self.cell = float(cell)
        self.nx = max(int(math.ceil((bounds[2] - bounds[0]) / cell)), 1)
        self.ny = max(int(math.ceil((bounds[3] - bounds[1]) / cell)), 1)
        self.n = 0
        # per cell (the last one always empty), slots of box (4) and oriented rectangle (6)
        self.slots = self._empty(self.nx * self.ny + 1, 4)
        self.count = np.zeros(self.nx * self.ny + 1, dtype=np.int64)

    @staticmethod
    def _empty(cells: int, depth: int) -> np.ndarray:
        out = np.zeros((cells, depth, 10))
        out[..., :2] = out[..., 6:8] = _FAR  # a point box far off
        out[..., 8] = 1.0
        return out

    def _cells(self, boxes: np.ndarray, pad: float = 0.0) -> tuple:
        """Each box's cell range (ix0, iy0, ix1, iy1; inclusive, clamped to the grid)."""
        b = np.asarray(boxes, dtype=float).reshape(-1, 4)
        # truncation is the floor here: what lies left of or above the grid is clamped to 0
        i = ((b + [-pad, -pad, pad, pad] - [self.x0, self.y0, self.x0, self.y0]) / self.cell).astype(np.int64)
        i = np.minimum(np.maximum(i, 0), [self.nx - 1, self.ny - 1, self.nx - 1, self.ny - 1])
        return i[:, 0], i[:, 1], i[:, 2], i[:, 3]

    def add(self, boxes: np.ndarray, solid: np.ndarray | None = None) -> None:
        """File boxes (m, 4); ``solid`` their oriented rectangles (m, 6), by default the boxes."""
        boxes = np.asarray(boxes, dtype=float).reshape(-1, 4)
        solid = as_oriented(boxes) if solid is None else np.asarray(solid, dtype=float).reshape(-1, 6)
        ix0, iy0, ix1, iy1 = self._cells(boxes)
        for k in range(len(boxes)):
            r, c = np.mgrid[iy0[k]:iy1[k] + 1, ix0[k]:ix1[k] + 1]
            cells = (r * self.nx + c).ravel()
            at = self.count[cells]
            if at.max() >= self.slots.shape[1]:
                self.slots = np.concatenate([self.slots, self._empty(len(self.slots), self.slots.shape[1])], axis=1)
            self.slots[cells, at, :4] = boxes[k]
            self.slots[cells, at, 4:] = solid[k]
            self.count[cells] = at + 1
        self.n += len(boxes)

    def near(self, cands: np.ndarray, pad: float = 1.0, cols=slice(0, 4)) -> tuple[np.ndarray, np.ndarray]:
        """The boxes filed under the cells each candidate box (k, 4) meets, grown by ``pad``:
        (t, 4) boxes (``cols`` slice(0, 10) adds their oriented rectangles) and, for each, the
        candidate it is near (t,); a box may appear twice."""
        ix0, iy0, ix1, iy1 = self._cells(cands, pad)
        sx, sy = int((ix1 - ix0).max()) + 1, int((iy1 - iy0).max()) + 1
        cx = ix0[:, None, None] + np.arange(sx)[None, None, :]
        cy = iy0[:, None, None] + np.arange(sy)[None, :, None]
        cells = np.where((cx <= ix1[:, None, None]) & (cy <= iy1[:, None, None]), cy * self.nx + cx,
                         len(self.count) - 1).ravel()
        cnt = self.count[cells]
        total = int(cnt.sum())
        pair = np.repeat(np.arange(len(cells)), cnt)  # each (candidate, cell) once per box filed there
        slot = np.arange(total) - np.repeat(np.cumsum(cnt) - cnt, cnt)
        rows = cells[pair] * self.slots.shape[1] + slot
        return np.take(self.slots.reshape(-1, 10), rows, axis=0)[:, cols], pair // (sx * sy)

    def hits(self, cands: np.ndarray, pad: float = 1.0) -> np.ndarray:
        """Whether each candidate box (k, 4), grown by ``pad`` px, overlaps a filed box;
        touching is not overlapping (as :func:`overlaps`)."""
        cands = np.asarray(cands, dtype=float).reshape(-1, 4)
        if not self.n or not len(cands):
            return np.zeros(len(cands), dtype=bool)
        b, owner = self.near(cands, pad)
        c = cands[owner]
        hit = ((c[:, 0] - pad < b[:, 2]) & (b[:, 0] < c[:, 2] + pad)
               & (c[:, 1] - pad < b[:, 3]) & (b[:, 1] < c[:, 3] + pad))
        return np.bincount(owner[hit], minlength=len(cands)) > 0


def _ring_table(reach: float) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """The rings out to ``reach`` (:func:`label_candidates`) as (radius, cos, sin) arrays, in
    stages of growing size (the nearest four rings, then the rest), so that a label finds
    its first free spot in one or two passes."""
    rings = []
    for r in _rings(reach):
        n = int(np.clip(2 * math.pi * r / 16.0, 12, 96))
        t = np.arange(n) * 2 * math.pi / n
        rings.append((np.full(n, r), np.cos(t), np.sin(t)))
    stages = [rings[:4], rings[4:]]
    return [tuple(np.concatenate(part) for part in zip(*st)) for st in stages if st]


def ring_candidates(anchor, size, stage) -> np.ndarray:
    """The candidate boxes of one stage of rings (:func:`_ring_table`) around ``anchor``
    (px), in the order :func:`label_candidates` gives them ring by ring."""
    w, h = size
    r, cos, sin = stage
    cx = anchor[0] + r * cos + np.sign(cos) * w / 2
    cy = anchor[1] - r * sin
    return np.column_stack([cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2])


def place_labels(anchors: np.ndarray, sizes: np.ndarray, obstacles, bounds) -> tuple:
    """Greedy label placement with box overlap tests.

    Each label, in the order given, takes the first candidate position
    (:func:`label_candidates`: next to its anchor, then rings further out) whose box lies in
    ``bounds`` and overlaps neither an obstacle nor a label placed before. Common practice in
    map labelling, no single source. The boxes are tested through a :class:`BoxGrid`, so each
    label costs about the same however many were placed before; a label tries at most its
    eight spots and the rings out to :data:`LEADER_MAX` (at most 96 spots a ring). Where a
    label found no spot at all, the space around its grid cell is taken as full: a later
    label (as wide or wider, in rank order) anchored in the same cell tries only its eight
    spots, which keeps a crowded map's cost linear in its labels.

    Parameters
    ----------
    anchors : ndarray, shape (n, 2)
        The points labelled (px).
    sizes : ndarray, shape (n, 2)
        Each label's width and height (px).
    obstacles : ndarray, shape (m, 4), or BoxGrid
        Boxes no label may cover (x0, y0, x1, y1; px); a grid gets the placed labels added.
    bounds : tuple of float
        The box every label must lie in.

    Returns
    -------
    boxes : ndarray, shape (n, 4)
        Each label's box; NaN where no position was free.
    leader : ndarray of bool, shape (n,)
        Whether the label sits away from its anchor (draw a leader line).
    """
    if isinstance(obstacles, BoxGrid):
        grid = obstacles
    else:
        grid = BoxGrid(bounds)
        grid.add(np.asarray(obstacles, dtype=float).reshape(-1, 4))
    boxes = np.full((len(anchors), 4), np.nan)
    leader = np.zeros(len(anchors), dtype=bool)
    stages = _ring_table(min(math.hypot(bounds[2] - bounds[0], bounds[3] - bounds[1]), LEADER_MAX))
    full = set()  # grid cells where an anchor found no spot at all
    for i, (anchor, size) in enumerate(zip(anchors, sizes)):
        cell = (int(anchor[0] // grid.cell), int(anchor[1] // grid.cell))
        beside = label_candidates(anchor, size, None)
        if cell in full:
            tries = [beside]
        else:  # the eight spots and the nearest rings in one pass, then the far rings
            tries = [np.vstack([beside, ring_candidates(anchor, size, stages[0])]) if stages else beside,
                     *(ring_candidates(anchor, size, st) for st in stages[1:])]
        for k, cands in enumerate(tries):
            ok = inside(cands, bounds)
            if ok.any():
                ok[ok] = ~grid.hits(cands[ok])
            if ok.any():
                first = int(np.argmax(ok))
                boxes[i] = cands[first]
                leader[i] = k > 0 or first >= len(beside)
                grid.add(boxes[i])
                break
        else:
            full.add(cell)
    return boxes, leader


# ------------------------------------------------------------------ grouping and panels
def cluster_boxes(boxes: np.ndarray, gap: float) -> np.ndarray:
    """Group bounding boxes (n, 4) that come within ``gap`` of each other, transitively.

    Returns the group number of each box (0 .. groups - 1), in order of first appearance;
    shapely's STRtree finds the pairs and scipy the connected sets.
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    grown = shapely.box(boxes[:, 0] - gap / 2, boxes[:, 1] - gap / 2, boxes[:, 2] + gap / 2, boxes[:, 3] + gap / 2)
    i, j = shapely.STRtree(grown).query(grown, predicate="intersects")
    graph = coo_matrix((np.ones(len(i)), (i, j)), shape=(len(boxes), len(boxes)))
    _, labels = connected_components(graph, directed=False)
    _, first = np.unique(labels, return_index=True)
    order = np.argsort(np.argsort(first))
    return order[labels]


def _union(boxes: np.ndarray) -> np.ndarray:
    return np.array([boxes[:, 0].min(), boxes[:, 1].min(), boxes[:, 2].max(), boxes[:, 3].max()])


def _pad(box, frac: float = 0.06, least: float = 150.0) -> np.ndarray:
    """A box grown on every side by ``frac`` of its longer side, at least ``least`` m."""
    p = max(frac * max(box[2] - box[0], box[3] - box[1]), least)
    return np.asarray(box, dtype=float) + np.array([-p, -p, p, p])


def _aspect(box) -> float:
    """Height over width of a box."""
    return (box[3] - box[1]) / max(box[2] - box[0], 1e-9)


COARSE_M_PER_PX = 12.0  # one panel coarser than this (a 100 m stretch under 9 px) may call for insets
INSET_GAIN = 2.0  # insets are drawn when they show the roads at least this many times larger


def plan_windows(boxes: np.ndarray, lines, width: float, max_insets: int = MAX_INSETS) -> list[np.ndarray]:
    """The inset windows (world boxes, m) for a network, or none when one panel shows it well.

    One panel ``width`` px wide does when it draws the network finer than
    :data:`COARSE_M_PER_PX`. Otherwise roads group by their bounding boxes within a gap of
    8 % of the network's longer side (the gap widened until the groups number at most
    ``max_insets``); insets are drawn when the groups' insets (half the width each) would
    show them at least :data:`INSET_GAIN` times larger than the one panel, or when the
    network's box is more than four times longer than wide. A window more than 2.6 times
    longer than wide is then halved along its length while the insets number fewer than
    ``max_insets``; windows holding no road are dropped. Thresholds are this project's
    choice, no source.

    Parameters
    ----------
    boxes : ndarray, shape (n, 4)
        Each road's bounding box (m).
    lines : sequence of shapely geometry
        The roads, to drop windows that hold none.
    width : float
        The drawing's width (px).
    max_insets : int
        The most insets drawn.

    Returns
    -------
    list of ndarray
        The windows, west to east (or north to south for a tall network); empty for one panel.
    """
    ext = _union(boxes)
    span = max(ext[2] - ext[0], ext[3] - ext[1], 1.0)
    single = span / (width - 60.0)
    if single <= COARSE_M_PER_PX:
        return []
    gap = 0.08 * span
    groups = cluster_boxes(boxes, gap)
    while groups.max() + 1 > max_insets:
        gap *= 1.6
        groups = cluster_boxes(boxes, gap)
    windows = [_pad(_union(boxes[groups == g])) for g in range(groups.max() + 1)]
    thin = min(_aspect(ext), 1 / max(_aspect(ext), 1e-9))
    inset = (width - GAP) / 2 - 52.0
    gain = single / float(np.median([max(w[2] - w[0], w[3] - w[1]) / inset for w in windows]))
    if not ((len(windows) >= 2 and gain >= INSET_GAIN) or thin < 1 / 4):
        return []
    windows = _split_long(windows, max_insets)
    tree = shapely.STRtree(list(lines))
    windows = [w for w in windows if len(tree.query(shapely.box(*w), predicate="intersects"))]
    wide = ext[2] - ext[0] >= ext[3] - ext[1]
    return sorted(windows, key=lambda w: (w[0] + w[2]) if wide else -(w[1] + w[3]))


def _split_long(windows: list, most: int) -> list:
    """Halve the longest-for-its-width window along its length (2 % overlap) while any is more
    than 2.6 times longer than wide and the windows number fewer than ``most``."""
    windows = [np.asarray(w, dtype=float) for w in windows]
    while len(windows) < most:
        ratios = [max(_aspect(w), 1 / max(_aspect(w), 1e-9)) for w in windows]
        k = int(np.argmax(ratios))
        if ratios[k] <= 2.6:
            break
        w = windows.pop(k)
        axis = 0 if w[2] - w[0] >= w[3] - w[1] else 1
        lo, hi = w[axis], w[axis + 2]
        mid, over = (lo + hi) / 2, 0.02 * (hi - lo)
        a, b = w.copy(), w.copy()
        a[axis + 2], b[axis] = mid + over, mid - over
        windows[k:k] = [a, b]
    return windows


@dataclass
class View:
    """A world window drawn in a frame of ``w`` x ``h`` px, north up, equal scale both ways."""

    window: np.ndarray
    w: float
    h: float
    margin: float
    s: float = field(init=False)
    cx: float = field(init=False)
    cy: float = field(init=False)

    def __post_init__(self):
        ww = max(self.window[2] - self.window[0], 1e-6)
        wh = max(self.window[3] - self.window[1], 1e-6)
        self.s = min((self.w - 2 * self.margin) / ww, (self.h - 2 * self.margin) / wh)
        self.cx = (self.window[0] + self.window[2]) / 2
        self.cy = (self.window[1] + self.window[3]) / 2

    def px(self, xy: np.ndarray) -> np.ndarray:
        """World points (n, 2; m) to frame pixels (y down)."""
        xy = np.asarray(xy, dtype=float).reshape(-1, 2)
        return np.column_stack([self.w / 2 + (xy[:, 0] - self.cx) * self.s, self.h / 2 - (xy[:, 1] - self.cy) * self.s])

    def seen(self) -> np.ndarray:
        """The world box the whole frame shows (m)."""
        hw, hh = self.w / 2 / self.s, self.h / 2 / self.s
        return np.array([self.cx - hw, self.cy - hh, self.cx + hw, self.cy + hh])


def frame_height(width: float, aspect: float, lo: float, hi: float) -> float:
    """A frame's height for a window of ``aspect`` (height/width), kept within ``lo``..``hi``
    times the width so that no panel becomes a thin band."""
    return float(width * np.clip(aspect, lo, hi))


# ------------------------------------------------------------------ SVG pieces
def _a(v) -> str:
    """An attribute value or text, escaped for XML."""
    return html.escape(str(v), quote=True)


def _pts(xy: np.ndarray) -> str:
    """Pixel points as an SVG ``points`` list, to 0.1 px (one format call for the whole line)."""
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    return " ".join(["%.1f,%.1f"] * len(xy)) % tuple(xy.ravel().tolist())


def _road_paths(roads: list[MapRoad], view: View) -> tuple[list[str], dict]:
    """The roads seen in the frame, simplified to half a pixel; returns the SVG and each road's
    pixel lines (by road id, for the name labels)."""
    seen = shapely.box(*view.seen())
    out, px = [], {}
    for r in roads:
        line = shapely.LineString(r.xy) if len(r.xy) > 1 else None
        if line is None or not line.intersects(seen):
            continue
        xy = view.px(shapely.get_coordinates(shapely.simplify(line, 0.5 / view.s, preserve_topology=False)))
        style = (f"stroke='{SKIPPED_GREY}' stroke-width='1.4' stroke-dasharray='2 3'" if r.skipped
                 else f"stroke='{ROAD_GREY}' stroke-width='1.8'")
        out.append(f"<polyline class='road' points='{_pts(xy)}' fill='none' {style} stroke-linejoin='round'>"
                   f"<title>{_a(r.name)} ({_a(r.road_id)}){', skipped' if r.skipped else ''}</title></polyline>")
        px.setdefault(r.road_id, (r.name, []))[1].append(xy)
    return out, px


def stretch_style(st: MapStretch) -> str:
    """A stretch's stroke: severity colour and width, or grey dashes when undetermined."""
    if st.verdict == "undetermined":
        return f"stroke='{UNDETERMINED_GREY}' stroke-width='3' stroke-dasharray='5 3'"
    return f"stroke='{SEVERITY_COLOURS.get(st.severity, INK)}' stroke-width='{STRETCH_WIDTH.get(st.severity, 3.0)}'"


def _stretch_paths(stretches: list[MapStretch], view: View) -> list[str]:
    """The stretches, undetermined first, then by severity so the worst lie on top."""
    order = sorted(stretches, key=lambda s: (s.verdict != "undetermined", list(STRETCH_WIDTH).index(s.severity)
                                             if s.severity in STRETCH_WIDTH else 0, -s.rank))
    return [f"<polyline class='stretch' data-rank='{s.rank}' data-severity='{_a(s.severity)}' "
            f"data-verdict='{_a(s.verdict)}' points='{_pts(view.px(s.xy))}' fill='none' {stretch_style(s)} "
            f"stroke-linecap='butt'><title>{_a(s.title)}</title></polyline>" for s in order]


def _marker(st: MapStretch, xy) -> str:
    x, y = xy
    if st.verdict == "undetermined":
        look = f"fill='white' stroke='{UNDETERMINED_GREY}' stroke-width='1.4' stroke-dasharray='2 1.5'"
    else:
        look = f"fill='{SEVERITY_COLOURS.get(st.severity, INK)}' stroke='{INK}' stroke-width='1'"
    return f"<circle class='marker' cx='{x:.1f}' cy='{y:.1f}' r='{MARKER_R}' {look}><title>{_a(st.title)}</title></circle>"


def _leader(anchor, box) -> str:
    """A thin line from the anchor to the nearest point of the box."""
    x = float(np.clip(anchor[0], box[0], box[2]))
    y = float(np.clip(anchor[1], box[1], box[3]))
    return (f"<line class='leader' x1='{anchor[0]:.1f}' y1='{anchor[1]:.1f}' x2='{x:.1f}' y2='{y:.1f}' "
            f"stroke='{INK}' stroke-width='0.8'/>")


def _rank_label(st: MapStretch, box) -> str:
    """A rank label: a white box edged in the stretch's colour, ``#rank`` fitted inside, a link
    to the curve page where there is one."""
    x0, y0, x1, y1 = box
    edge = UNDETERMINED_GREY if st.verdict == "undetermined" else SEVERITY_COLOURS.get(st.severity, INK)
    dash = " stroke-dasharray='3 2'" if st.verdict == "undetermined" else ""
    text = f"#{st.rank}"
    body = (f"<g class='rank-label' data-rank='{st.rank}'><title>{_a(st.title)}</title>"
            f"<rect class='label-box' x='{x0:.1f}' y='{y0:.1f}' width='{x1 - x0:.1f}' height='{y1 - y0:.1f}' "
            f"rx='2' fill='white' fill-opacity='0.94' stroke='{edge}' stroke-width='1.4'{dash}/>"
            f"<text x='{(x0 + x1) / 2:.1f}' y='{(y0 + y1) / 2:.1f}' text-anchor='middle' dominant-baseline='central' "
            f"font-size='{RANK_FONT}' font-weight='bold' fill='{INK}' textLength='{x1 - x0 - 6:.1f}' "
            f"lengthAdjust='spacingAndGlyphs'>{_a(text)}</text></g>")
    return f"<a href='{_a(st.href)}'>{body}</a>" if st.href else body


def rank_label_size(rank: int) -> tuple[float, float]:
    """A rank label's box (w, h; px)."""
    return text_width(f"#{rank}", RANK_FONT, bold=True) + 6.0, RANK_FONT + 5.0


def _marker_boxes(points: np.ndarray) -> np.ndarray:
    r = MARKER_R + 1.0
    return np.column_stack([points[:, 0] - r, points[:, 1] - r, points[:, 0] + r, points[:, 1] + r])


# ------------------------------------------------------------------ road names
# spots along a road tried for its name, the middle first, then outwards both ways
FRACTIONS = tuple(sorted(np.round(np.arange(0.04, 0.97, 0.04), 2), key=lambda f: (abs(f - 0.5), f)))


def road_label_candidates(xy: np.ndarray, text: str) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Spots along a pixel line for a name, best first: centres (k, 2), angles in degrees (k,),
    boxes (k, 4) and oriented boxes (k, 6).

    The name runs along the chord of the line under it, upright, beside the line (just
    above, just below, then a little further off either side), at :data:`FRACTIONS` of the
    line's length; a spot is kept only where the line under the name is nearly straight
    (chord at least 85 % of the name's length). ``box`` is the rotated name's axis-aligned
    bounding box, ``oriented box`` the name's own rectangle (:func:`oriented_overlaps`). All
    spots are computed at once (numpy).
    """
    none = (np.zeros((0, 2)), np.zeros(0), np.zeros((0, 4)), np.zeros((0, 6)))
    tw, half_h = text_width(text, ROAD_FONT), ROAD_FONT * 0.65
    seg = np.hypot(*np.diff(xy, axis=0).T)
    cum = np.concatenate([[0.0], np.cumsum(seg)])
    if cum[-1] < tw * 1.1:
        return none

    def at(s):
        return np.column_stack([np.interp(s, cum, xy[:, 0]), np.interp(s, cum, xy[:, 1])])

    c = np.asarray(FRACTIONS) * cum[-1]
    c = c[(c - tw / 2 >= 0) & (c + tw / 2 <= cum[-1])]
    chord = at(c + tw / 2) - at(c - tw / 2)
    keep = np.hypot(chord[:, 0], chord[:, 1]) >= 0.85 * tw
    c, chord = c[keep], chord[keep]
    if not len(c):
        return none
    ang = np.degrees(np.arctan2(chord[:, 1], chord[:, 0]))
    ang = np.where(ang > 90, ang - 180, np.where(ang < -90, ang + 180, ang))
    t = np.radians(ang)
    cos, sin = np.cos(t), np.sin(t)
    normal = np.column_stack([sin, -cos])  # screen "up" for upright text
    hx = np.abs(cos) * tw / 2 + np.abs(sin) * half_h
    hy = np.abs(sin) * tw / 2 + np.abs(cos) * half_h
    side = np.array([1.0, -1.0, 2.6, -2.6])
    centre = (at(c)[:, None, :] + side[None, :, None] * normal[:, None, :] * (half_h + 3.5)).reshape(-1, 2)
    rep = np.repeat  # four sides per fraction, in fraction order
    hx, hy, cos, sin, ang = rep(hx, 4), rep(hy, 4), rep(cos, 4), rep(sin, 4), rep(ang, 4)
    x, y = centre[:, 0], centre[:, 1]
    box = np.column_stack([x - hx, y - hy, x + hx, y + hy])
    obb = np.column_stack([x, y, np.full(len(x), tw / 2), np.full(len(x), half_h), cos, sin])
    return centre, ang, box, obb


def as_oriented(boxes: np.ndarray) -> np.ndarray:
    """Axis-aligned boxes (m, 4) as oriented boxes (m, 6: centre x, y, half width, half height,
    direction of the width x, y)."""
    b = np.asarray(boxes, dtype=float).reshape(-1, 4)
    return np.column_stack([(b[:, 0] + b[:, 2]) / 2, (b[:, 1] + b[:, 3]) / 2, (b[:, 2] - b[:, 0]) / 2,
                            (b[:, 3] - b[:, 1]) / 2, np.ones(len(b)), np.zeros(len(b))])


def oriented_overlaps(box: np.ndarray, others: np.ndarray, pad: float = 1.0) -> bool:
    """Whether an oriented box (6,) overlaps any of ``others`` (m, 6), grown by ``pad`` px.

    The separating axis test for rectangles: two rectangles are apart exactly when their
    projections on one of the four edge directions do not meet (Gottschalk, Lin and Manocha
    1996, OBBTree, SIGGRAPH).
    """
    if not len(others):
        return False
    return bool(_oriented_hits(np.asarray(box, dtype=float)[None, None, :],
                               np.asarray(others, dtype=float)[None], pad).any())


def _oriented_hits(box: np.ndarray, others: np.ndarray, pad: float = 1.0) -> np.ndarray:
    """Element-wise separating axis test (:func:`oriented_overlaps`) of oriented boxes
    (..., 6), the first grown by ``pad``; broadcasts."""
    hwa, hha, ux, uy = box[..., 2] + pad, box[..., 3] + pad, box[..., 4], box[..., 5]
    dx, dy = others[..., 0] - box[..., 0], others[..., 1] - box[..., 1]
    hwb, hhb, ox, oy = others[..., 2], others[..., 3], others[..., 4], others[..., 5]
    c, sn = np.abs(ux * ox + uy * oy), np.abs(uy * ox - ux * oy)  # |cos|, |sin| of the angle between them
    apart = ((np.abs(dx * ux + dy * uy) >= hwa + hwb * c + hhb * sn)
             | (np.abs(dy * ux - dx * uy) >= hha + hwb * sn + hhb * c)
             | (np.abs(dx * ox + dy * oy) >= hwb + hwa * c + hha * sn)
             | (np.abs(dy * ox - dx * oy) >= hhb + hwa * sn + hha * c))
    return ~apart


def place_road_names(lines: dict, grid: "BoxGrid", bounds) -> tuple[list[str], list[str]]:
    """Each road's name at its first free spot along its longest visible piece (its id where
    the name fits nowhere); returns the SVG and the roads left unnamed, and files each name in
    ``grid`` (by its axis-aligned bounding box, and its rectangle for later names). Names are
    tested as the rotated rectangles they are against what is taken, among the boxes their
    bounding box meets (all spots of a road, for its name and its id, in one pass)."""
    out, missed = [], []
    for rid in sorted(lines, key=lambda r: -max(_length(p) for p in lines[r][1])):
        name, parts = lines[rid]
        xy = max(parts, key=_length)
        texts = list(dict.fromkeys([name, rid]))
        spots = [road_label_candidates(xy, t) for t in texts]  # the name's spots, then the id's
        which = np.concatenate([np.full(len(sp[1]), k) for k, sp in enumerate(spots)])
        centre, ang, box, obb = (np.concatenate(parts) for parts in zip(*spots))
        ok = np.flatnonzero(inside(box, bounds))
        if len(ok) and grid.n:
            near, owner = grid.near(box[ok], cols=slice(0, 10))
            b, o = box[ok][owner], obb[ok][owner]
            meet = ((b[:, 0] - 1.0 < near[:, 2]) & (near[:, 0] < b[:, 2] + 1.0)
                    & (b[:, 1] - 1.0 < near[:, 3]) & (near[:, 1] < b[:, 3] + 1.0))
            meet[meet] = _oriented_hits(o[meet], near[meet, 4:])
            ok = ok[np.bincount(owner[meet], minlength=len(ok)) == 0]
        spot = None
        if len(ok):
            k = ok[0]
            spot = (texts[which[k]], float(centre[k, 0]), float(centre[k, 1]), float(ang[k]), box[k], obb[k])
        if spot is None:
            missed.append(rid)
            continue
        text, x, y, ang, box, obb = spot
        grid.add(box, obb)
        out.append(f"<text class='road-label' data-road='{_a(rid)}' data-box='{' '.join(f'{v:.3f}' for v in obb)}' "
                   f"x='{x:.1f}' y='{y:.1f}' transform='rotate({ang:.1f} {x:.1f} {y:.1f})' text-anchor='middle' "
                   f"dominant-baseline='central' font-size='{ROAD_FONT}' fill='#333333' stroke='white' "
                   f"stroke-width='3' paint-order='stroke' textLength='{text_width(text, ROAD_FONT):.1f}' "
                   f"lengthAdjust='spacingAndGlyphs'>{_a(text)}<title>{_a(name)} ({_a(rid)})</title></text>")
    return out, missed


def _length(xy: np.ndarray) -> float:
    return float(np.hypot(*np.diff(xy, axis=0).T).sum()) if len(xy) > 1 else 0.0


# ------------------------------------------------------------------ scale bar and north arrow
def _nice_below(x: float) -> float:
    """The largest 1, 2 or 5 times a power of ten not above ``x``."""
    e = 10 ** math.floor(math.log10(x))
    return max(m * e for m in (1, 2, 5) if m * e <= x * (1 + 1e-9))


def scale_bar(width_m: float, units) -> tuple[float, str]:
    """A round scale-bar length near a fifth of ``width_m`` and its label, in the run's units
    (m or km; ft or mi).

    Returns
    -------
    (float, str)
        The bar's length (m) and its label.
    """
    target = max(width_m, 1e-3) / 5.0
    if units.us:
        mile_m = units.km_per_distance * 1000.0
        if target >= 0.2 * mile_m:
            v = _nice_below(target / mile_m)
            return v * mile_m, f"{v:g} {units.distance_label}"
        v = _nice_below(units.length(target))
        return v * units.m_per_length, f"{v:,.0f} {units.length_label}" if v >= 1 else f"{v:g} {units.length_label}"
    if target >= 1000.0:
        v = _nice_below(target / 1000.0)
        return v * 1000.0, f"{v:g} km"
    v = _nice_below(target)
    return v, f"{v:,.0f} m" if v >= 1 else f"{v:g} m"


def _footer(view: View, units, y: float) -> str:
    """The scale bar at the left and the north arrow at the right, under the frame."""
    length_m, label = scale_bar(view.w / view.s, units)
    bar = length_m * view.s
    x0 = 6.0
    ticks = "".join(f"<line x1='{x0 + f * bar:.1f}' y1='{y + 3:.1f}' x2='{x0 + f * bar:.1f}' y2='{y + 11:.1f}' "
                    f"stroke='{INK}' stroke-width='1.2'/>" for f in (0, 0.5, 1))
    nx = view.w - 14.0
    return (f"<g class='scale-bar' data-length-m='{length_m:.3f}' data-px='{bar:.2f}'>"
            f"<rect x='{x0:.1f}' y='{y + 5:.1f}' width='{bar / 2:.1f}' height='4' fill='{INK}'/>"
            f"<rect x='{x0 + bar / 2:.1f}' y='{y + 5:.1f}' width='{bar / 2:.1f}' height='4' fill='white' "
            f"stroke='{INK}' stroke-width='0.8'/>{ticks}"
            f"<text x='{x0 + bar + 6:.1f}' y='{y + 11:.1f}' font-size='10' fill='{INK}'>{_a(label)}</text></g>"
            f"<g class='north-arrow'><title>north: grid north of the working (projected) CRS</title><path d='M {nx:.1f} {y + 1:.1f} L {nx + 5:.1f} {y + 13:.1f} L {nx:.1f} "
            f"{y + 10:.1f} L {nx - 5:.1f} {y + 13:.1f} Z' fill='{INK}'/>"
            f"<text x='{nx - 9:.1f}' y='{y + 12:.1f}' font-size='10' font-weight='bold' text-anchor='end' "
            f"fill='{INK}'>N</text></g>")


# ------------------------------------------------------------------ panels
@dataclass
class Panel:
    """One drawing: ``kind`` 'single', 'overview' or 'inset', its letter and heading."""

    kind: str
    view: View
    heading: str = ""
    letter: str = ""
    key: str = "map"


HEADER = 18.0
FOOTER = 20.0


def render_panel(panel: Panel, roads: list[MapRoad], stretches: list[MapStretch], units,
                 insets: list[Panel] = (), others: list[MapStretch] = ()) -> tuple[str, float]:
    """A panel as an SVG group in its own coordinates (heading, frame, footer); returns the
    SVG and its height (px).

    The overview draws markers only and outlines the insets; the other panels label every
    stretch given to them and name the roads. ``others`` are stretches labelled in another
    inset: drawn here too, with their markers, where they fall in this frame, so that no
    deficient road looks clean.
    """
    v = panel.view
    top = HEADER if panel.heading else 0.0
    frame = (0.0, 0.0, v.w, v.h)
    road_svg, lines = _road_paths(roads, v)
    pts = v.px(np.array([s.anchor for s in stretches])) if stretches else np.zeros((0, 2))
    seen = v.seen()
    extra = [s for s in others if seen[0] <= s.anchor[0] <= seen[2] and seen[1] <= s.anchor[1] <= seen[3]]
    extra_pts = v.px(np.array([s.anchor for s in extra])) if extra else np.zeros((0, 2))
    taken = BoxGrid(frame)
    taken.add(_marker_boxes(np.vstack([pts, extra_pts])))
    body = road_svg + _stretch_paths(list(stretches) + extra, v)
    over, labels = [], []
    if panel.kind == "overview":
        outlines, labels = _inset_outlines(insets, v, taken)
        body += outlines + [_marker(s, p) for s, p in zip(stretches, pts)]
    else:
        leaders, marks, labels, over = _rank_labels(stretches, pts, taken, frame)
        body += leaders + [_marker(s, p) for s, p in zip(extra, extra_pts)] + marks
        names, _ = place_road_names(lines, taken, frame)
        labels = names + labels
    clip = f"map-clip-{panel.key}"
    parts = [f"<g class='panel' data-kind='{panel.kind}' data-letter='{_a(panel.letter)}' "
             f"data-window='{' '.join(f'{x:.1f}' for x in v.seen())}' data-scale='{v.s:.6g}'>"]
    if panel.heading:
        parts.append(f"<text class='panel-heading' x='0' y='13' font-size='11.5' font-weight='bold' "
                     f"fill='{INK}'>{_a(panel.heading)}</text>")
    parts.append(f"<g transform='translate(0 {top:.1f})'><clipPath id='{clip}'><rect width='{v.w:.1f}' "
                 f"height='{v.h:.1f}'/></clipPath><rect class='frame' width='{v.w:.1f}' height='{v.h:.1f}' "
                 f"fill='#FBFBF8' stroke='#8A8A8A' stroke-width='1'/><g clip-path='url(#{clip})'>"
                 + "".join(body) + "</g>" + "".join(labels))
    y = v.h + 4.0
    if over:
        svg, y = _overflow_row(over, v.w, y)
        parts.append(svg)
    parts.append(_footer(v, units, y) + "</g></g>")
    return "".join(parts), top + y + FOOTER


def _rank_labels(stretches, pts, taken, frame):
    """Rank labels placed in rank order (each filed in the grid ``taken``); returns leaders,
    markers, labels and the stretches left for the row under the frame."""
    order = np.argsort([s.rank for s in stretches], kind="stable")
    sizes = np.array([rank_label_size(stretches[i].rank) for i in order]).reshape(-1, 2)
    boxes, leader = place_labels(pts[order], sizes, taken, frame)
    leaders, labels, over = [], [], []
    for k, i in enumerate(order):
        if np.isnan(boxes[k, 0]):
            over.append((stretches[i], pts[i]))
            continue
        leaders.append(_leader(pts[i], boxes[k]))  # a tick even for a label next to its marker, so pairs read right
        labels.append(_rank_label(stretches[i], boxes[k]))
    marks = [_marker(s, p) for s, p in zip(stretches, pts)]
    return leaders, marks, labels, over


OVERFLOW_LEADERS = 12  # up to this many labels without room get boxes and leader lines; more are listed


def _overflow_row(over: list, width: float, y: float) -> tuple[str, float]:
    """Labels with no free spot on the drawing, under it; returns the SVG and the height used.

    A few get their label box in a row, each with a leader line to its marker; more would
    draw a thicket of lines, so they are listed instead by rank, road and chainage range,
    each entry with its hover text and link.
    """
    x, parts = 4.0, []
    if len(over) <= OVERFLOW_LEADERS:
        for st, p in over:
            w, h = rank_label_size(st.rank)
            if x + w > width - 4:
                x, y = 4.0, y + h + 4
            box = (x, y, x + w, y + h)
            parts += [_leader(p, box), _rank_label(st, box)]
            x += w + 4
        return "".join(parts), y + RANK_FONT + 9.0
    y += 12.0
    parts.append(f"<text x='4' y='{y:.1f}' font-size='10' font-style='italic' fill='{INK}'>{len(over)} stretches "
                 f"without room for a label on the drawing (their markers are there; hover for details):</text>")
    y += 14.0
    for st, _ in over:
        text = f"#{st.rank} {st.where};"
        w = text_width(text, 10) + 8
        if x + w > width - 4:
            x, y = 4.0, y + 14
        entry = (f"<text class='rank-entry' data-rank='{st.rank}' x='{x:.1f}' y='{y:.1f}' font-size='10' "
                 f"fill='{INK}' textLength='{w - 8:.1f}' lengthAdjust='spacingAndGlyphs'>{_a(text)}"
                 f"<title>{_a(st.title)}</title></text>")
        parts.append(f"<a href='{_a(st.href)}'>{entry}</a>" if st.href else entry)
        x += w
    return "".join(parts), y + 8.0


def _inset_outlines(insets: list[Panel], view: View, taken: BoxGrid) -> tuple[list[str], list[str]]:
    """Each inset's window outlined on the overview and lettered at a free spot by its upper
    left corner (filed in the grid ``taken``); returns the outlines and the letters."""
    outlines, letters = [], []
    for p in insets:
        a, b = view.px(p.view.window[[0, 3]])[0], view.px(p.view.window[[2, 1]])[0]
        w, h = max(b[0] - a[0], 4.0), max(b[1] - a[1], 4.0)
        outlines.append(f"<rect class='inset-outline' data-letter='{_a(p.letter)}' x='{a[0]:.1f}' y='{a[1]:.1f}' "
                        f"width='{w:.1f}' height='{h:.1f}' fill='none' stroke='{INSET_INK}' stroke-width='1.3' "
                        f"stroke-dasharray='5 3'/>")
        size = np.array([[text_width(p.letter, 12, True) + 8, 17.0]])
        boxes, _ = place_labels(a[None], size, taken, (0, 0, view.w, view.h))
        if np.isnan(boxes[0, 0]):
            continue
        x0, y0, x1, y1 = boxes[0]
        letters.append(f"<g class='inset-letter'><rect x='{x0:.1f}' y='{y0:.1f}' width='{x1 - x0:.1f}' "
                       f"height='{y1 - y0:.1f}' fill='{INSET_INK}'/><text x='{(x0 + x1) / 2:.1f}' "
                       f"y='{(y0 + y1) / 2:.1f}' text-anchor='middle' dominant-baseline='central' font-size='12' "
                       f"font-weight='bold' fill='white'>{_a(p.letter)}</text></g>")
    return outlines, letters


# ------------------------------------------------------------------ the whole map
TITLE = "Audited roads and deficient stretches by severity"
SUBTITLE = ("Labels give the rank (1 = first to fix); hover over a stretch, marker or label for its details; "
            "a label opens its curve's page.")


def map_svg(roads: list[MapRoad], stretches: list[MapStretch], units, width: float = WIDTH) -> str:
    """The overview map as an SVG document.

    Parameters
    ----------
    roads : list of MapRoad
        The centrelines (working CRS, m).
    stretches : list of MapStretch
        The stretches to draw and label.
    units : OutputUnits
        The run's output units, for the scale bars and the inset captions.
    width : float
        The drawing's width (px).

    Returns
    -------
    str
        ``<svg>...</svg>``: title, the panel(s), the captions of the insets and the legend.
    """
    inner = width - 2 * MARGIN
    head = [f"<text x='{MARGIN}' y='20' font-size='15' font-weight='bold' fill='{INK}'>{_a(TITLE)}</text>",
            f"<text x='{MARGIN}' y='37' font-size='10.5' fill='#444444'>{_a(SUBTITLE)}</text>"]
    y = 48.0
    if not roads:
        body = [f"<text x='{MARGIN}' y='{y + 16}' font-size='12' fill='{INK}'>No road has a centreline to draw.</text>"]
        return _document(width, y + 30, head + body)
    panels, captions = layout_panels(roads, stretches, units, inner)
    body = []
    for row in panels:
        heights = []
        for x, panel, members in row:
            member = {id(s) for s in members}
            svg, h = render_panel(panel, roads, members, units, [p for r in panels for _, p, _ in r
                                                                 if p.kind == "inset"],
                                  [s for s in stretches if id(s) not in member] if panel.kind == "inset" else [])
            body.append(f"<g transform='translate({MARGIN + x:.1f} {y:.1f})'>{svg}</g>")
            heights.append(h)
        y += max(heights) + GAP
    for line in captions:
        body.append(f"<text class='caption' x='{MARGIN}' y='{y + 10:.1f}' font-size='10.5' fill='{INK}'>"
                    f"{_a(line)}</text>")
        y += 15.0
    legend, h = _legend(inner, any(r.skipped for r in roads), any(s.verdict == "undetermined" for s in stretches))
    body.append(f"<g transform='translate({MARGIN} {y + 4:.1f})'>{legend}</g>")
    return _document(width, y + 4 + h + MARGIN, head + body)


# printed, a tall map is kept within one A4 or Letter page (it scales down whole, never cut)
PRINT_STYLE = "@media print { svg.network-map { max-height: 235mm; } }"


def _document(width: float, height: float, parts: list[str]) -> str:
    """The SVG element: scales down to its container's width, and to a page's height in print."""
    return (f"<svg xmlns='http://www.w3.org/2000/svg' class='network-map' viewBox='0 0 {width:.0f} {height:.0f}' "
            f"width='{width:.0f}' height='{height:.0f}' style='max-width:100%;height:auto' role='img' "
            f"font-family='{FONT}' aria-label='{_a(TITLE)}'><title>{_a(TITLE)}</title><style>{PRINT_STYLE}</style>"
            + "".join(parts) + "</svg>")


def layout_panels(roads: list[MapRoad], stretches: list[MapStretch], units, inner: float):
    """The panels in rows, each as (x offset, panel, its stretches), and the inset captions.

    One panel when the network reads well in one; otherwise an overview (markers only, the
    insets outlined) over a grid of insets, each stretch labelled in the first inset holding
    its middle (or the nearest one).
    """
    boxes = np.array([[r.xy[:, 0].min(), r.xy[:, 1].min(), r.xy[:, 0].max(), r.xy[:, 1].max()] for r in roads])
    lines = [shapely.LineString(r.xy) if len(r.xy) > 1 else shapely.Point(r.xy[0]) for r in roads]
    ext = _pad(_union(boxes), 0.03, 50.0)
    windows = plan_windows(boxes, lines, inner)
    if not windows:
        view = View(ext, inner, frame_height(inner, _aspect(ext), 0.45, 0.95), 30.0)
        return [[(0.0, Panel("single", view), stretches)]], []
    overview = Panel("overview", View(ext, inner, frame_height(inner, _aspect(ext), 0.22, 0.4), 10.0),
                     heading="Overview of the whole network; the lettered boxes are drawn larger below",
                     key="overview")
    tall = float(np.median([_aspect(w) for w in windows])) > 1.2  # tall insets go side by side, narrower
    cols = min(len(windows), 4) if tall else 2 if len(windows) <= 4 else 3
    col_w = (inner - (cols - 1) * GAP) / cols
    insets = []
    for k, w in enumerate(windows):
        letter = chr(ord("A") + k)
        hi = 1.8 if tall else 0.95
        insets.append(Panel("inset", View(w, col_w, frame_height(col_w, _aspect(w), 0.55, hi), 26.0),
                            heading=f"Inset {letter}", letter=letter, key=f"inset-{letter}"))
    members = _assign(stretches, insets)
    rows = [[(0.0, overview, stretches)]]
    for i in range(0, len(insets), cols):
        rows.append([(j * (col_w + GAP), p, members[i + j]) for j, p in enumerate(insets[i:i + cols])])
    captions = [inset_caption(p, roads, members[k], units) for k, p in enumerate(insets)]
    return rows, captions


def _assign(stretches: list[MapStretch], insets: list[Panel]) -> list[list[MapStretch]]:
    """Each stretch to the first inset whose window holds its middle, else the nearest."""
    out = [[] for _ in insets]
    for s in stretches:
        x, y = s.anchor
        dist = []
        for p in insets:
            w = p.view.window
            dist.append(math.hypot(max(w[0] - x, 0, x - w[2]), max(w[1] - y, 0, y - w[3])))
        out[int(np.argmin(dist))].append(s)
    return out


def inset_caption(panel: Panel, roads: list[MapRoad], members: list[MapStretch], units) -> str:
    """What an inset covers: each road in its window with the chainage range it shows (the
    four longest; the others counted), and the ranks labelled in it."""
    window = panel.view.window
    per = units.km_per_distance * 1000.0
    spans: dict[str, list] = {}
    for r in roads:
        if len(r.xy) < 2:
            continue
        line = shapely.LineString(r.xy)
        inside = shapely.get_coordinates(shapely.clip_by_rect(line, *window))
        if len(inside):
            ch = shapely.line_locate_point(line, shapely.points(inside))
            lo, hi, seen = spans.get(r.road_id, (np.inf, -np.inf, r.name))
            spans[r.road_id] = [min(lo, ch.min()), max(hi, ch.max()), seen]
    order = sorted(spans, key=lambda k: spans[k][0] - spans[k][1])
    shown = [f"{spans[k][2]} from {spans[k][0] / per:,.1f} to {spans[k][1] / per:,.1f} {units.distance_label}"
             for k in order[:4]]
    more = f", and {len(order) - 4} more road(s)" if len(order) > 4 else ""
    ranks = sorted(s.rank for s in members)
    what = f"ranks {ranks[0]} to {ranks[-1]} labelled ({len(ranks)} stretches)" if ranks else "no stretch labelled"
    return f"Inset {panel.letter}: {', '.join(shown)}{more}; {what}."


def _legend(width: float, skipped: bool, undetermined: bool) -> tuple[str, float]:
    """The legend under the drawing, items left to right, wrapping; returns SVG and height."""
    items = [("line", f"stroke='{ROAD_GREY}' stroke-width='1.8'", "road audited")]
    if skipped:
        items.append(("line", f"stroke='{SKIPPED_GREY}' stroke-width='1.4' stroke-dasharray='2 3'",
                      "road skipped (see the data notes)"))
    items += [("line", f"stroke='{SEVERITY_COLOURS[k]}' stroke-width='{w}'", f"{k} deficiency")
              for k, w in STRETCH_WIDTH.items()]
    if undetermined:
        items.append(("line", f"stroke='{UNDETERMINED_GREY}' stroke-width='3' stroke-dasharray='5 3'",
                      "undetermined: the data cannot decide"))
    items.append(("label", "", "rank label (a link where the curve has a page)"))
    x, y, parts = 0.0, 0.0, []
    for kind, style, text in items:
        w = 34 + text_width(text, 10.5) + 16
        if x + w > width:
            x, y = 0.0, y + 20
        if kind == "line":
            parts.append(f"<line class='legend-swatch' x1='{x:.1f}' y1='{y + 9:.1f}' x2='{x + 28:.1f}' y2='{y + 9:.1f}' "
                         f"{style}/>")
        else:
            parts.append(f"<rect x='{x:.1f}' y='{y + 1:.1f}' width='28' height='16' rx='2' fill='white' "
                         f"stroke='{INK}' stroke-width='1.2'/><text x='{x + 14:.1f}' y='{y + 9:.1f}' "
                         f"text-anchor='middle' dominant-baseline='central' font-size='10' font-weight='bold' "
                         f"fill='{INK}'>#n</text>")
        parts.append(f"<text x='{x + 34:.1f}' y='{y + 13:.1f}' font-size='10.5' fill='{INK}'>{_a(text)}</text>")
        x += w
    return f"<g class='legend'>{''.join(parts)}</g>", y + 22.0
