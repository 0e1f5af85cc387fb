"""The report's overview map (inline SVG, pipeline.outputs.mapview): labels that never collide,
every stretch labelled, roads named, insets for spread-out networks, hover text and links, the
severity colours, scale bars in the run's units. Boxes are checked with shapely (reference
library) and the SVG is read with xml.etree (Python's XML parser)."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

import numpy as np
import pandas as pd
import pytest
import shapely

from pipeline.core.units import OutputUnits
from pipeline.outputs.mapview import (MARKER_R, BoxGrid, map_inputs, map_svg, oriented_overlaps, place_labels,
                                      scale_bar, text_width)

NS = "{http://www.w3.org/2000/svg}"


# ------------------------------------------------------------------ helpers
def _roads(lines: dict, names: dict | None = None) -> pd.DataFrame:
    names = names or {}
    return pd.DataFrame({"road_id": list(lines), "name": [names.get(r) for r in lines],
                         "geometry": [shapely.LineString(xy) for xy in lines.values()],
                         "skip_reason": [None] * len(lines)})


def _inventory(rows: list[tuple]) -> pd.DataFrame:
    """(rank, road_id, from_m, to_m, severity, verdict, curve_no) rows as an inventory."""
    cols = ["rank", "road_id", "from_m", "to_m", "severity", "verdict", "curve_no"]
    inv = pd.DataFrame(rows, columns=cols)
    inv["kind"] = "crest"
    inv["direction"] = np.where(inv["rank"] % 2 == 0, "decreasing", "increasing")
    inv["shortfall_m"] = 30.0 + inv["rank"]
    return inv


def _svg(table, inv, units=None, paged=frozenset()):
    units = units or OutputUnits()
    roads, stretches = map_inputs(table, inv, units, set(paged))
    text = map_svg(roads, stretches, units)
    return text, ET.fromstring(text)


def _panels(root):
    return [g for g in root.iter(f"{NS}g") if g.get("class") == "panel"]


def _label_boxes(panel) -> dict[int, tuple]:
    """rank -> (x0, y0, x1, y1) of each rank label's box in a panel."""
    out = {}
    for g in panel.iter(f"{NS}g"):
        if g.get("class") == "rank-label":
            r = g.find(f"{NS}rect")
            x, y, w, h = (float(r.get(k)) for k in ("x", "y", "width", "height"))
            out[int(g.get("data-rank"))] = (x, y, x + w, y + h)
    return out


def _no_two_overlap(boxes) -> bool:
    """No two boxes share area (shapely's intersection as the reference)."""
    polys = [shapely.box(*b) for b in boxes]
    return all(polys[i].intersection(polys[j]).area == 0 for i in range(len(polys)) for j in range(i))


def _rotated(data_box: str):
    """A road name's rectangle from its ``data-box`` (centre, half sizes, direction)."""
    cx, cy, hw, hh, ux, uy = (float(v) for v in data_box.split())
    c, u, v = np.array([cx, cy]), np.array([ux, uy]), np.array([-uy, ux])
    return shapely.Polygon([c + sx * hw * u + sy * hh * v for sx, sy in ((-1, -1), (1, -1), (1, 1), (-1, 1))])


def _luminance(hex_colour: str) -> float:
    """Relative luminance, W3C WCAG 2.1 definition."""
    rgb = [int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5)]
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def _demo_svg(demo_out) -> str:
    html = (demo_out / "report.html").read_text(encoding="utf-8")
    m = re.search(r"<svg\b.*?</svg>", html, flags=re.S)
    assert m, "the report has no inline SVG map"
    return m.group(0)


# ------------------------------------------------------------------ labels never collide
def test_two_stretches_at_one_place_get_two_separate_labels():
    """#4 and #5 on the same curve, 5 m apart on a 2 km road: two label boxes that do not
    overlap (shapely), two separate texts, and nothing that reads '#54' or '#45'. The issue's
    own example; common practice, no source."""
    table = _roads({"R1": [(0, 0), (2000, 0)]}, {"R1": "Mill Road"})
    inv = _inventory([(4, "R1", 1000.0, 1080.0, "moderate", "deficient", 1),
                      (5, "R1", 1005.0, 1085.0, "moderate", "deficient", 1)])
    text, root = _svg(table, inv)
    boxes = _label_boxes(_panels(root)[0])
    assert set(boxes) == {4, 5}
    assert _no_two_overlap(boxes.values())
    texts = [t.text for t in root.iter(f"{NS}text") if t.text and t.text.startswith("#")]
    assert sorted(t for t in texts if t in ("#4", "#5")) == ["#4", "#5"]
    assert "#54" not in text and "#45" not in text


def test_many_labels_at_one_spot_never_overlap():
    """Thirty stretches on one short stretch of road: every one labelled, no two label boxes
    overlapping and no label over a marker (shapely as reference); common practice, no source."""
    table = _roads({"R1": [(0, 0), (3000, 0)], "R2": [(1500, -1500), (1500, 1500)]}, {"R1": "Long Lane"})
    inv = _inventory([(k, "R1", 1480.0 + k, 1520.0 + k, ("minor", "moderate", "severe")[k % 3], "deficient", 1)
                      for k in range(1, 31)])
    _, root = _svg(table, inv)
    panel = _panels(root)[0]
    boxes = _label_boxes(panel)
    assert set(boxes) == set(range(1, 31))
    assert _no_two_overlap(boxes.values())
    markers = [shapely.Point(float(c.get("cx")), float(c.get("cy"))).buffer(MARKER_R - 0.5)
               for c in panel.iter(f"{NS}circle") if c.get("class") == "marker"]
    for b in boxes.values():
        assert not any(shapely.box(*b).intersects(m) for m in markers)


def test_labels_without_room_are_listed_under_the_drawing():
    """Two hundred stretches on 200 m of one road cannot all be labelled beside their markers:
    those without room are listed under the drawing, each rank exactly once overall, the
    listed entries one per text element and none overlapping another (boxes from their fitted
    text length, shapely as reference); common practice, no source."""
    table = _roads({"R1": [(0, 0), (3000, 0)], "R2": [(1500, -1500), (1500, 1500)]}, {"R1": "Long Lane"})
    inv = _inventory([(k, "R1", 1400.0 + k, 1420.0 + k, "severe", "deficient", 1) for k in range(1, 201)])
    _, root = _svg(table, inv)
    panel = _panels(root)[0]
    boxes = _label_boxes(panel)
    entries = [t for t in panel.iter(f"{NS}text") if t.get("class") == "rank-entry"]
    assert entries and boxes
    listed = [int(t.get("data-rank")) for t in entries]
    assert sorted(list(boxes) + listed) == list(range(1, 201))
    assert all(t.text.startswith(f"#{r} Long Lane ") for t, r in zip(entries, listed))
    rows = [(float(t.get("x")), float(t.get("y")) - 10, float(t.get("x")) + float(t.get("textLength")),
             float(t.get("y"))) for t in entries]
    assert _no_two_overlap(rows)
    frame = next(r for r in panel.iter(f"{NS}rect") if r.get("class") == "frame")
    assert min(y0 for _, y0, _, _ in rows) > float(frame.get("height"))


def test_place_labels_keeps_inside_and_apart():
    """The placer on its own: 25 labels at one point with an obstacle over it; every box lies
    within the bounds, touches no obstacle and no other box (shapely as reference)."""
    anchors = np.tile([[200.0, 150.0]], (25, 1))
    sizes = np.array([[text_width(f"#{k}", 11, True) + 6, 16.0] for k in range(1, 26)])
    obstacle = np.array([[180.0, 100.0, 260.0, 140.0]])
    boxes, _ = place_labels(anchors, sizes, obstacle, (0.0, 0.0, 400.0, 300.0))
    assert not np.isnan(boxes).any()
    assert (boxes[:, 0] >= 0).all() and (boxes[:, 2] <= 400).all() and (boxes[:, 1] >= 0).all()
    assert (boxes[:, 3] <= 300).all()
    assert _no_two_overlap(list(boxes) + list(obstacle))
    assert np.allclose(boxes[:, 2] - boxes[:, 0], sizes[:, 0]) and np.allclose(boxes[:, 3] - boxes[:, 1], 16.0)


def test_box_grid_agrees_with_shapely():
    """The grid of placed boxes answers as the all-pairs test: 300 random boxes (some beyond the
    grid's bounds, some edges on cell lines, some touching a candidate exactly) against 400
    candidates grown by 1 px; a candidate hits when its grown box shares area with a filed box
    (shapely's intersection area as reference)."""
    rng = np.random.default_rng(3)

    def boxes(n):
        xy = rng.uniform(-60, 460, (n, 2))
        wh = rng.uniform(2, 70, (n, 2))
        xy[: n // 5] = np.round(xy[: n // 5] / 32) * 32  # on cell lines
        return np.column_stack([xy, xy + wh])

    filed, cands = boxes(300), boxes(400)
    cands[:20, 2] = filed[:20, 0] - 1.0  # grown by 1 px, these touch a filed box's left edge only
    cands[:20, 0] = cands[:20, 2] - 10.0
    cands[:20, 1], cands[:20, 3] = filed[:20, 1], filed[:20, 3]
    grid = BoxGrid((0.0, 0.0, 400.0, 300.0))
    grid.add(filed[:150])
    grid.add(filed[150:])
    got = grid.hits(cands, pad=1.0)
    polys = [shapely.box(*b) for b in filed]
    want = [any(shapely.box(c[0] - 1, c[1] - 1, c[2] + 1, c[3] + 1).intersection(p).area > 0 for p in polys)
            for c in cands]
    assert got.tolist() == want
    assert 0 < sum(want) < len(want)


def test_crowded_network_labels_or_lists_every_stretch():
    """Sixty roads 6 km long crossing in a 6 km square with 300 stretches, more than the frame
    has room for: each rank is labelled once or listed once under the drawing, no two labels
    overlap, and no label meets a road name's rotated rectangle (shapely as reference); common
    practice, no source."""
    rng = np.random.default_rng(11)
    lines = {}
    for k in range(60):
        start, heading = rng.uniform(0, 6_000, 2), rng.uniform(0, 2 * np.pi)
        turn = heading + np.cumsum(rng.normal(0, 0.05, 120))
        lines[f"C{k:02d}"] = start + np.cumsum(np.column_stack([np.cos(turn), np.sin(turn)]) * 50.0, axis=0)
    table = _roads(lines, {r: f"Lane {r[1:]}" for r in lines})
    road = rng.integers(0, 60, 300)
    start = rng.uniform(0, 5_500, 300)
    inv = _inventory([(k + 1, f"C{road[k]:02d}", start[k], start[k] + 120.0, ("minor", "moderate", "severe")[k % 3],
                       "deficient", 1) for k in range(300)])
    _, root = _svg(table, inv)
    panel = _panels(root)[0]
    boxes = _label_boxes(panel)
    listed = [int(t.get("data-rank")) for t in panel.iter(f"{NS}text") if t.get("class") == "rank-entry"]
    assert boxes and listed
    assert sorted(list(boxes) + listed) == list(range(1, 301))
    polys = [shapely.box(*b) for b in boxes.values()]
    tree = shapely.STRtree(polys)
    i, j = tree.query(polys, predicate="intersects")
    assert all(polys[a].intersection(polys[b]).area == 0 for a, b in zip(i, j) if a != b)
    names = [_rotated(t.get("data-box")) for t in panel.iter(f"{NS}text") if t.get("class") == "road-label"]
    assert names
    assert all(n.intersection(p).area < 1e-9 for n in names for p in tree.geometries.take(tree.query(n)))


def test_rotated_box_overlap_agrees_with_shapely():
    """The separating axis test for road names against shapely's polygon intersection (reference
    library), on 2000 random pairs of rotated rectangles."""
    rng = np.random.default_rng(7)

    def polygon(b):
        c, u = b[:2], b[4:6]
        v = np.array([-u[1], u[0]])
        return shapely.Polygon([c + sx * b[2] * u + sy * b[3] * v for sx, sy in ((-1, -1), (1, -1), (1, 1), (-1, 1))])

    for _ in range(2000):
        pair = []
        for _k in range(2):
            t = rng.uniform(0, np.pi)
            pair.append(np.array([*rng.uniform(0, 30, 2), *rng.uniform(1, 12, 2), np.cos(t), np.sin(t)]))
        expect = polygon(pair[0]).intersection(polygon(pair[1])).area > 1e-9
        assert oriented_overlaps(pair[0], pair[1][None], pad=0.0) == expect


# ------------------------------------------------------------------ the demo's map in the report
def test_demo_map_labels_every_stretch_and_names_the_roads(demo_out):
    """The report's map: every stretch of deficiencies.csv labelled once with its rank, no two
    labels overlapping; every drawn road labelled by its name from roads.csv (or its id where
    the name finds no room) and named in its hover text."""
    root = ET.fromstring(_demo_svg(demo_out))
    d = pd.read_csv(demo_out / "deficiencies.csv")
    roads = pd.read_csv(demo_out / "roads.csv")
    labelled = []
    for panel in _panels(root):
        boxes = _label_boxes(panel)
        assert _no_two_overlap(boxes.values())
        labelled += list(boxes)
        # road names (rotated rectangles) cover no rank label and no other name
        names = [_rotated(t.get("data-box")) for t in panel.iter(f"{NS}text") if t.get("class") == "road-label"]
        ranks = [shapely.box(*b) for b in boxes.values()]
        for i, n in enumerate(names):
            assert not any(n.intersection(o).area > 1e-6 for o in ranks + names[:i])
    assert sorted(labelled) == sorted(d["rank"])
    names = dict(zip(roads["road_id"], roads["name"]))
    shown = {t.get("data-road"): t.text for t in root.iter(f"{NS}text") if t.get("class") == "road-label"}
    assert set(shown) == set(names)
    assert all(text in (names[r], r) for r, text in shown.items())
    assert sum(text == names[r] for r, text in shown.items()) >= len(names) - 2  # crowded roads keep their id
    hover = " ".join(t.text or "" for t in root.iter(f"{NS}title"))
    assert all(f"{n} ({r})" in hover for r, n in names.items())


def test_every_road_named_when_nothing_crowds_it(demo_out):
    """With no stretch to label, every demo road carries its name (roads.csv) along its line."""
    import geopandas as gpd

    roads = gpd.read_file(demo_out / "audit.gpkg", layer="roads")
    table = pd.DataFrame({"road_id": roads["road_id"], "name": roads["name"], "geometry": roads.geometry.values,
                          "skip_reason": None})
    _, root = _svg(table, _inventory([]))
    shown = {t.get("data-road"): t.text for t in root.iter(f"{NS}text") if t.get("class") == "road-label"}
    assert shown == dict(zip(roads["road_id"], roads["name"]))


def test_demo_map_is_self_contained_and_links_resolve(demo_out):
    """The SVG parses (xml.etree), fetches nothing (every href and url() a '#' fragment, no
    src), and every link lands on an element of the report."""
    html = (demo_out / "report.html").read_text(encoding="utf-8")
    svg = _demo_svg(demo_out)
    root = ET.fromstring(svg)
    hrefs = [v for el in root.iter() for k, v in el.attrib.items() if k.endswith("href")]
    assert hrefs and all(h.startswith("#") for h in hrefs)
    assert not any(k.endswith("src") for el in root.iter() for k in el.attrib)
    assert all(u.startswith("#") for u in re.findall(r"url\(([^)]*)\)", svg))
    ids = set(re.findall(r"""id=['"]([^'"]+)['"]""", html))
    assert {h[1:] for h in hrefs} <= ids


def test_hover_text_and_links():
    """Each rank label's hover text gives rank, road name and id, chainage range, kind,
    shortfall and verdict; only curves with a page link, to the report's curve anchor."""
    from pipeline.outputs.report import curve_anchor

    table = _roads({"R1": [(0, 0), (3000, 500)]}, {"R1": "Quarry Road"})
    inv = _inventory([(1, "R1", 800.0, 900.0, "severe", "deficient", 2),
                      (2, "R1", 2000.0, 2050.0, "minor", "undetermined", 3)])
    _, root = _svg(table, inv, paged={("R1", 2)})
    labels = {int(g.get("data-rank")): g for g in root.iter(f"{NS}g") if g.get("class") == "rank-label"}
    hover = labels[1].find(f"{NS}title").text
    for part in ("#1", "Quarry Road (R1)", "800 to 900 m", "crest curve 2", "short of SSD by 31 m",
                 "verdict deficient"):
        assert part in hover, part
    assert "verdict undetermined" in labels[2].find(f"{NS}title").text
    links = [a.get("href") for a in root.iter(f"{NS}a")]
    assert links == [f"#{curve_anchor('R1', 2)}"]


# ------------------------------------------------------------------ spread-out networks
def _cluster(x0: float, y0: float, tag: str) -> dict:
    """Three roads within about 6 km, starting at (x0, y0) (m)."""
    return {f"{tag}1": [(x0, y0), (x0 + 6000, y0 + 800)],
            f"{tag}2": [(x0 + 500, y0 + 3000), (x0 + 3000, y0 + 2500), (x0 + 5500, y0 + 3600)],
            f"{tag}3": [(x0 + 2000, y0 - 1500), (x0 + 2600, y0 + 4500)]}


def test_two_groups_far_apart_get_an_overview_and_insets():
    """Two groups of roads 200 km apart: an overview and one inset per group, each inset's
    roads filling most of its frame, no panel a thin band (height/width within 0.2-1.0) and the
    whole map no taller than 1.6 times its width; every stretch labelled in an inset; a caption
    names each inset's roads. Thresholds are this project's, no source."""
    lines = _cluster(500_000, 4_100_000, "W") | _cluster(700_000, 4_102_000, "E")
    table = _roads(lines, {r: f"{r} Road" for r in lines})
    inv = _inventory([(1, "W1", 1000.0, 1100.0, "severe", "deficient", 1),
                      (2, "E2", 2000.0, 2100.0, "moderate", "deficient", 1),
                      (3, "E3", 3000.0, 3100.0, "minor", "deficient", 1)])
    _, root = _svg(table, inv)
    w, h = (float(v) for v in root.get("viewBox").split()[2:])
    assert 0.4 <= h / w <= 1.6
    panels = _panels(root)
    kinds = [p.get("data-kind") for p in panels]
    assert kinds.count("overview") == 1 and kinds.count("inset") == 2
    for p in panels:
        frame = next(r for r in p.iter(f"{NS}rect") if r.get("class") == "frame")
        fw, fh = float(frame.get("width")), float(frame.get("height"))
        assert 0.2 <= fh / fw <= 1.0
        if p.get("data-kind") == "inset":
            xy = np.array([[float(v) for v in pt.split(",")] for line in p.iter(f"{NS}polyline")
                           if line.get("class") == "road" for pt in line.get("points").split()])
            assert max(np.ptp(xy[:, 0]) / fw, np.ptp(xy[:, 1]) / fh) > 0.6
    ranks = [r for p in panels if p.get("data-kind") == "inset" for r in _label_boxes(p)]
    assert sorted(ranks) == [1, 2, 3]
    captions = [t.text for t in root.iter(f"{NS}text") if t.get("class") == "caption"]
    assert len(captions) == 2
    assert all(f"{r} Road" in " ".join(captions) for r in lines)


def test_one_long_road_is_cut_into_insets():
    """A single road 120 km long and 3 km wide would be a thin band in one panel; it is shown
    as an overview and several insets, none thinner than 0.2 (height/width; this project's
    threshold, no source). Each stretch is labelled in one inset, and drawn in every inset
    whose frame holds its middle (the middle from shapely's interpolate, reference library), so
    no deficient road looks clean where insets overlap."""
    x = np.linspace(0, 120_000, 60)
    table = _roads({"LONG": np.column_stack([x, 1500 * np.sin(x / 9000.0)])}, {"LONG": "Coast Highway"})
    inv = _inventory([(k, "LONG", 3000.0 * k, 3000.0 * k + 100, "severe", "deficient", 1) for k in range(1, 40)])
    _, root = _svg(table, inv)
    panels = _panels(root)
    assert [p.get("data-kind") for p in panels].count("inset") >= 3
    for p in panels:
        frame = next(r for r in p.iter(f"{NS}rect") if r.get("class") == "frame")
        assert float(frame.get("height")) / float(frame.get("width")) >= 0.2
    insets = [p for p in panels if p.get("data-kind") == "inset"]
    assert sorted(r for p in insets for r in _label_boxes(p)) == list(range(1, 40))
    line = table.loc[0, "geometry"]
    for p in insets:
        x0, y0, x1, y1 = (float(v) for v in p.get("data-window").split())
        drawn = {int(s.get("data-rank")) for s in p.iter(f"{NS}polyline") if s.get("class") == "stretch"}
        for k in range(1, 40):
            mid = line.interpolate(3000.0 * k + 50)
            if x0 <= mid.x <= x1 and y0 <= mid.y <= y1:
                assert k in drawn, (p.get("data-letter"), k)


def test_legend_and_title_lie_outside_the_drawing():
    """The title sits above every panel and the legend below every panel (their boxes do not
    meet a panel's frame)."""
    table = _roads({"R1": [(0, 0), (4000, 3000)]}, {"R1": "Mill Road"})
    _, root = _svg(table, _inventory([(1, "R1", 100.0, 200.0, "severe", "deficient", 1)]))
    top = [float(g.get("transform").split()[1].rstrip(")")) for g in root if g.tag == f"{NS}g"
           and g.get("transform", "").startswith("translate") and g.find(f"{NS}g") is not None
           and g.find(f"{NS}g").get("class") == "panel"]
    legend_y = [float(g.get("transform").split()[1].rstrip(")")) for g in root if g.tag == f"{NS}g"
                and g.find(f"{NS}g") is not None and g.find(f"{NS}g").get("class") == "legend"]
    title_y = float(root.find(f"{NS}text").get("y"))
    frame = next(r for r in root.iter(f"{NS}rect") if r.get("class") == "frame")
    assert title_y < top[0]
    assert legend_y[0] > top[0] + float(frame.get("height"))


# ------------------------------------------------------------------ colours and scale
def test_map_colours_darken_with_severity():
    """The stretches drawn in the SVG: the worst severity the darkest (relative luminance, W3C
    WCAG 2.1) and the widest; undetermined stretches dashed and grey."""
    table = _roads({"R1": [(0, 0), (5000, 0)]}, {"R1": "Mill Road"})
    inv = _inventory([(1, "R1", 500.0, 600.0, "minor", "deficient", 1),
                      (2, "R1", 1500.0, 1600.0, "moderate", "deficient", 2),
                      (3, "R1", 2500.0, 2600.0, "severe", "deficient", 3),
                      (4, "R1", 3500.0, 3600.0, "severe", "undetermined", 4)])
    _, root = _svg(table, inv)
    drawn = {(p.get("data-severity"), p.get("data-verdict")): p for p in root.iter(f"{NS}polyline")
             if p.get("class") == "stretch"}
    lum = {s: _luminance(drawn[(s, "deficient")].get("stroke")) for s in ("minor", "moderate", "severe")}
    width = {s: float(drawn[(s, "deficient")].get("stroke-width")) for s in ("minor", "moderate", "severe")}
    assert lum["severe"] < lum["moderate"] < lum["minor"]
    assert width["severe"] > width["moderate"] > width["minor"]
    und = drawn[("severe", "undetermined")]
    r, g, b = (int(und.get("stroke")[i:i + 2], 16) for i in (1, 3, 5))
    assert und.get("stroke-dasharray") and max(r, g, b) - min(r, g, b) <= 8


@pytest.mark.parametrize("system, labels", [("metric", ("m", "km")), ("us", ("ft", "mi"))])
def test_scale_bar_in_the_run_units(system, labels):
    """The scale bar reads in the run's units (m/km or ft/mi), is a round 1, 2 or 5 times a
    power of ten, and its drawn length is that distance at the panel's scale (common practice,
    no source; the foot and mile from PROJ through OutputUnits)."""
    units = OutputUnits(system)
    for width_m in (400.0, 7_000.0, 90_000.0):
        length_m, label = scale_bar(width_m, units)
        value, unit = label.split()
        assert unit in labels
        per = {"m": 1.0, "km": 1000.0, "ft": units.m_per_length, "mi": units.km_per_distance * 1000}[unit]
        v = float(value.replace(",", ""))
        assert v * per == pytest.approx(length_m)
        assert v / 10 ** np.floor(np.log10(v)) in (1.0, 2.0, 5.0)
        assert width_m / 12.5 <= length_m <= width_m / 5 + 1e-9  # 1-2-5 steps: at least 0.4 of the target
    table = _roads({"R1": [(0, 0), (8000, 2000)]}, {"R1": "Mill Road"})
    _, root = _svg(table, _inventory([]), units)
    panel = _panels(root)[0]
    bar = next(g for g in panel.iter(f"{NS}g") if g.get("class") == "scale-bar")
    assert float(bar.get("data-px")) == pytest.approx(float(bar.get("data-length-m")) * float(panel.get("data-scale")),
                                                      rel=1e-3)
    assert any(t.text == "N" for t in panel.iter(f"{NS}text"))


def test_map_failure_gives_a_placeholder_and_is_recorded(tmp_path, samples, run_cli, monkeypatch):
    """A map that cannot be drawn leaves a placeholder in the report and a line in run.json's
    output_failures; the rest of the report is written (exit code 1, as for any lost figure)."""
    import json

    import pipeline.outputs.report as report

    def broken(*a, **k):
        raise ValueError("map broke")

    monkeypatch.setattr(report, "network_map_svg", broken)
    out = tmp_path / "o"
    code, _, err = run_cli("run", "--roads", samples["roads"], "--ground", samples["dem"], "--workers", "1",
                           "--out", out)
    assert code == 1 and "map broke" in err
    html = (out / "report.html").read_text(encoding="utf-8")
    assert "The overview map could not be drawn" in html and "<svg" not in html
    assert "Ranked inventory" in html
    run = json.loads((out / "run.json").read_text())
    assert [f["output"] for f in run["output_failures"]] == ["report.html overview map"]


def test_skipped_roads_are_drawn_apart_and_named_in_the_legend():
    """A road the run skipped is drawn dotted in light grey, not as audited, and the legend
    says so; without one, the legend has no such entry."""
    table = _roads({"R1": [(0, 0), (4000, 0)], "R2": [(0, 1000), (4000, 1500)]}, {"R1": "Mill Road",
                                                                                  "R2": "Ford Lane"})
    table.loc[1, "skip_reason"] = "no ground data under the road"
    _, root = _svg(table, _inventory([]))
    lines = {p.find(f"{NS}title").text: p for p in root.iter(f"{NS}polyline") if p.get("class") == "road"}
    assert lines["Ford Lane (R2), skipped"].get("stroke-dasharray")
    assert not lines["Mill Road (R1)"].get("stroke-dasharray")
    legend = " ".join(t.text or "" for g in root.iter(f"{NS}g") if g.get("class") == "legend"
                      for t in g.iter(f"{NS}text"))
    assert "road skipped" in legend
    table.loc[1, "skip_reason"] = None
    _, root = _svg(table, _inventory([]))
    legend = " ".join(t.text or "" for g in root.iter(f"{NS}g") if g.get("class") == "legend"
                      for t in g.iter(f"{NS}text"))
    assert "road skipped" not in legend
