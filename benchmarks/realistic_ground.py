"""Synthetic but realistic ground models with known road designs, and their truth.

Used by ``benchmarks/realistic.py``; nothing here imports the ``pipeline``
package, so the ground, the design and the sight-distance truth are written
independently of the code under test.

Road design
-----------
Horizontal alignment: tangents (100-900 m) joined by circular arcs (radius
150-1500 m, log-uniform), no spirals. About 40 % of the tangents run within
15 degrees of the raster's x axis (some within 2 degrees), the others at any
heading up to 80 degrees either side, and the arcs sweep every angle in
between, so the road crosses the grid at all angles, shallow ones included,
for long stretches. Each road runs roughly west to east in its own band of
the raster (bands 1.2 km apart, so corridors never touch).

Vertical alignment: constant-grade tangents (-7 to +7 %) joined by symmetric
parabolic curves, PVIs 250-700 m apart, A uniform in 1-9 %, K log-uniform in
5-120 (crests) or 8-100 (sags), clipped so that L = K A >= 30 m and at least
30 m of tangent separates a PVT from the next PVC. The textbook parabola
``z = z_PVC + g1 x + (g2 - g1) x^2 / (2 L)`` is evaluated exactly.

Ground surface
--------------
Natural terrain along the road is the design profile smoothed over about
300 m plus beta (1.3-2.5) times the design's departure from that smoothing,
so the terrain is higher than the road over crests (cuts) and lower under
sags (fills), plus a 2-D Gaussian random field (standard deviation 1-3 m, i.e.
peaks of 2-6 m, correlation length 150-400 m) that puts the road in cut or
fill elsewhere and gives the terrain a cross slope.

Road prism at signed offset d from the true centreline and chainage s:
carriageway 3.5 m + shoulder 1 m each side, crowned, falling at 2.5 % from
the centreline; beyond the shoulder a cut batter rising 1 in 2 up to the
terrain, or a fill batter falling 1 in 3 down to it; terrain beyond.
(s, d) of a point comes from the nearest vertex of the true centreline
densified at 0.5 m (``scipy.spatial.cKDTree``), refined by projecting on the
local tangent.

Bridges (configuration ``dem2-offroad``): 2-3 per road, spans 30-80 m on
tangents; the bare-earth model shows a valley 5-15 m below the deck across
the span (sides 1 in 1.5 at the abutments, the approaches on fill). The deck
is absent from the model. Bridges are not declared to the tool.

Vegetation (``dsm2-trees``): a surface model; patches 20-150 m long, 10-40 m
deep, 8-20 m tall with a textured canopy, one every 150-500 m on either side,
about 40 % of them with the canopy reaching from 1.5 m outside to 1 m inside
the carriageway edge line (3.5 m from the centreline).

Each DEM cell is the mean of the surface sampled on a sub-grid (4 x 4 for
cells of 1-2 m, 1 m spacing for coarser cells), then vertical error is
added: white noise, and for coarse models a correlated Gaussian field.
Cells further than 80 m from every road are nodata.

Digitised centreline: the true line moved sideways by a smooth random offset
(sum of three sinusoids, wavelengths 200-600 m, scaled to the configuration's
error), plus vertex jitter; vertices every 10-20 m.

Sight-distance truth
--------------------
By brute force over the true design profile, stations every 2 m, both
directions, looking up to 400 m (profile sampled every 1 m; beyond the road's
ends the design is continued on its end tangents):

- crest, line of sight: eye 1.08 m, object 0.60 m above the road (AASHTO,
  *A Policy on Geometric Design of Highways and Streets*, 7th ed. 2018,
  "Green Book", section 3.2.6, from memory). The available sight is the
  largest d such that the object is visible at every distance up to d, where
  visible means the straight line from eye to object passes above the road
  at every 1 m sample between them. The shortfall is attributed to the crest
  curve containing the grazing point (the road sample that first blocks the
  line), or the nearest crest curve.
- sag, headlight sight distance: headlight 0.60 m high, upper edge of the
  beam 1 degree above the vehicle's grade (Green Book 2018, section 3.4.6.4,
  from memory); the distance to the first road sample above the beam. It is
  attributed to the sag curve containing the hit point, or the nearest sag.

A curve is deficient if any station attributed to it sees less than the
design stopping sight distance of Green Book 2018 Table 3-1 (metric), see
``SSD_M``.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

# Design stopping sight distance, AASHTO Green Book 2018 Table 3-1 (metric),
# rounded design values, from memory: speed km/h -> metres.
SSD_M = {70: 105.0, 80: 130.0, 90: 160.0, 100: 185.0}
EYE_M = 1.08        # Green Book 2018 §3.2.6 (from memory)
OBJECT_M = 0.60     # Green Book 2018 §3.2.6 (from memory)
HEADLIGHT_M = 0.60  # Green Book 2018 §3.4.6.4 (from memory)
BEAM_DEG = 1.0      # Green Book 2018 §3.4.6.4 (from memory)
LOOK_M = 400

HALF_CARRIAGEWAY = 3.5
HALF_FORMATION = 4.5   # carriageway + 1 m shoulder
CROSSFALL = 0.025
CUT_SLOPE = 0.5        # 1 in 2
FILL_SLOPE = 1.0 / 3   # 1 in 3
CORRIDOR_M = 80.0
BAND_M = 1200.0
ORIGIN = (500000.0, 5300000.0)
CRS = "EPSG:32633"
NODATA = -9999.0
VERSION = 2  # bump when the generated data change, to invalidate caches


@dataclass
class Config:
    name: str
    cell: float
    offset_lo: float          # max lateral error of the digitised line, drawn per road in [lo, hi]
    offset_hi: float
    jitter: float             # vertex jitter sd (clipped at 2 sd)
    white: float              # white vertical noise sd per cell
    corr_sd: float = 0.0      # correlated vertical error
    corr_len: float = 200.0
    bridges: bool = False
    trees: bool = False
    note: str = ""


CONFIGS = [
    Config("lidar1", 1.0, 0.7, 0.85, 0.05, 0.05, note="1 m DTM, line within 1 m"),
    Config("lidar2-3m", 2.0, 2.0, 2.8, 0.08, 0.08, note="2 m DTM, line within 3 m"),
    Config("dem2-offroad", 2.0, 6.0, 8.5, 0.2, 0.08, bridges=True,
           note="2 m DTM, line up to 9 m off, undeclared bridges"),
    Config("dem5", 5.0, 3.5, 4.6, 0.15, 0.3, corr_sd=0.3, corr_len=150.0, note="5 m DEM, line within 5 m"),
    Config("dem10", 10.0, 4.5, 4.8, 0.15, 0.4, corr_sd=0.5, corr_len=200.0, note="10 m DEM, line 5 m off"),
    Config("dem30", 30.0, 5.0, 9.5, 0.2, 0.5, corr_sd=1.75, corr_len=200.0,
           note="30 m DEM, correlated error 1.75 m / 200 m, line 5-10 m off"),
    Config("dsm2-trees", 2.0, 2.0, 2.8, 0.08, 0.08, trees=True, note="2 m DSM with trees, line within 3 m"),
]
CONFIG_BY_NAME = {c.name: c for c in CONFIGS}


# ----------------------------------------------------------------------------- vertical design
@dataclass
class Vertical:
    length: float
    z0: float
    pvi: np.ndarray      # chainage of each PVI
    grades: np.ndarray   # len(pvi) + 1 tangent grades, fractions
    L: np.ndarray        # curve length at each PVI

    def zpvi(self) -> np.ndarray:
        pts = np.concatenate([[0.0], self.pvi])
        z = [self.z0]
        for i in range(1, len(pts)):
            z.append(z[-1] + self.grades[i - 1] * (pts[i] - pts[i - 1]))
        return np.array(z[1:])

    def z(self, s) -> np.ndarray:
        """Design elevation; beyond the ends the end tangents continue."""
        s = np.asarray(s, dtype=float)
        zp = self.zpvi()
        xs = np.concatenate([[-1e6, 0.0], self.pvi, [self.length, self.length + 1e6]])
        zend = zp[-1] + self.grades[-1] * (self.length - self.pvi[-1]) if len(zp) else self.z0 + self.grades[0] * self.length
        zs = np.concatenate([[self.z0 - self.grades[0] * 1e6, self.z0], zp,
                             [zend, zend + self.grades[-1] * 1e6]])
        out = np.interp(s, xs, zs)
        for i, (p, L) in enumerate(zip(self.pvi, self.L)):
            g1, g2 = self.grades[i], self.grades[i + 1]
            x = s - (p - L / 2)
            m = (x >= 0) & (x <= L)
            if m.any():
                out[m] = zp[i] - g1 * L / 2 + g1 * x[m] + (g2 - g1) * x[m] ** 2 / (2 * L)
        return out

    def grade(self, s) -> np.ndarray:
        s = np.asarray(s, dtype=float)
        idx = np.searchsorted(self.pvi, s)
        out = self.grades[idx].astype(float)
        for i, (p, L) in enumerate(zip(self.pvi, self.L)):
            g1, g2 = self.grades[i], self.grades[i + 1]
            x = s - (p - L / 2)
            m = (x >= 0) & (x <= L)
            out[m] = g1 + (g2 - g1) * x[m] / L
        return out

    def curves(self) -> list[dict]:
        out = []
        for i, (p, L) in enumerate(zip(self.pvi, self.L)):
            g1, g2 = self.grades[i], self.grades[i + 1]
            a = abs(g2 - g1) * 100
            out.append({"curve": i, "kind": "crest" if g2 < g1 else "sag", "pvi_m": float(p),
                        "pvc_m": float(p - L / 2), "pvt_m": float(p + L / 2), "length_m": float(L),
                        "g1_pct": float(g1 * 100), "g2_pct": float(g2 * 100), "a_pct": float(a),
                        "k": float(L / a)})
        return out


def random_vertical(rng: np.random.Generator, length: float) -> Vertical:
    pvi = [rng.uniform(250, 450)]
    while True:
        nxt = pvi[-1] + rng.uniform(250, 700)
        if nxt > length - 250:
            break
        pvi.append(nxt)
    pvi = np.array(pvi)
    n = len(pvi)
    grades = [rng.uniform(-4, 4) / 100]
    kinds = []
    for _ in range(n):
        g = grades[-1] * 100
        kind = "crest" if rng.random() < 0.5 else "sag"
        a = rng.uniform(1, 9)
        g2 = g - a if kind == "crest" else g + a
        if not -7 <= g2 <= 7:
            kind = "sag" if kind == "crest" else "crest"
            g2 = g - a if kind == "crest" else g + a
            if not -7 <= g2 <= 7:
                g2 = float(np.clip(g2, -7, 7))
                if abs(g2 - g) < 1:
                    g2 = g - 1 if kind == "crest" else g + 1
        grades.append(g2 / 100)
        kinds.append(kind)
    grades = np.array(grades)
    edges = np.concatenate([[0.0], pvi, [length]])
    L = np.zeros(n)
    for i in range(n):
        left = (edges[i + 1] - edges[i] - 30) / 2 if i > 0 else edges[1] - 60
        right = (edges[i + 2] - edges[i + 1] - 30) / 2 if i < n - 1 else edges[-1] - edges[-2] - 60
        lmax = 2 * min(left, right)
        a = abs(grades[i + 1] - grades[i]) * 100
        kmin, kmax = (5.0, 120.0) if kinds[i] == "crest" else (8.0, 100.0)
        lo, hi = max(kmin, 30 / a), min(kmax, lmax / a)
        k = hi if lo >= hi else float(np.exp(rng.uniform(np.log(lo), np.log(hi))))
        L[i] = k * a
    return Vertical(length, float(rng.uniform(150, 450)), pvi, grades, L)


# ----------------------------------------------------------------------------- horizontal design
def random_horizontal(rng: np.random.Generator, length: float, y_band: float, x_start: float,
                      step: float = 0.5) -> np.ndarray:
    """Densified true centreline (N x 3: x, y, heading) at ``step`` m, exactly ``length`` long."""
    n_keep = int(round(length / step)) + 1
    for _attempt in range(500):
        x, y, th = x_start, y_band, np.radians(rng.uniform(-10, 10))
        pts = []
        tangent = True
        while len(pts) < n_keep:
            dev = y - y_band
            if tangent:
                seg = rng.uniform(100, 900)
                sin = abs(np.sin(th))
                if sin > 1e-3 and np.sign(np.sin(th)) == np.sign(dev or 1):
                    seg = min(seg, max(100.0, (420 - abs(dev)) / sin))
                dth = np.zeros(int(round(seg / step)))
            else:
                if rng.random() < 0.4:
                    target = rng.uniform(-15, 15) if rng.random() < 0.7 else rng.uniform(-2, 2)
                else:
                    target = rng.uniform(-80, 80)
                if abs(dev) > 200:
                    target = -np.sign(dev) * abs(target)
                target = np.radians(target)
                rad = float(np.exp(rng.uniform(np.log(150), np.log(1500))))
                delta = target - th
                n = max(1, int(round(rad * abs(delta) / step)))
                dth = np.full(n, np.sign(delta) * step / rad)
                dth[-1] = delta - dth[:-1].sum()
            for k in range(len(dth)):
                mid = th + dth[k] / 2
                pts.append((x, y, th))
                x += step * np.cos(mid)
                y += step * np.sin(mid)
                th += dth[k]
            tangent = not tangent
        arr = np.array(pts[:n_keep])
        if np.abs(arr[:, 1] - y_band).max() > 500 or np.abs(arr[:, 2]).max() > np.radians(85):
            continue
        # at least one long shallow stretch: 500 m within 15 degrees of the x axis in all
        if np.sum(np.abs(np.degrees(arr[:, 2])) < 15) * step < 500:
            continue
        return arr
    raise RuntimeError("could not lay out a road in its band")


# ----------------------------------------------------------------------------- random fields
def gaussian_field(rng, shape, sigma_cells, sd):
    from scipy.ndimage import gaussian_filter
    f = gaussian_filter(rng.standard_normal(shape), sigma_cells, mode="reflect")
    f -= f.mean()
    f *= sd / f.std()
    return f


@dataclass
class Field2D:
    x0: float
    y0: float
    res: float
    data: np.ndarray  # rows along y (increasing), cols along x

    @classmethod
    def random(cls, rng, bounds, res, corr_len, sd):
        x0, y0, x1, y1 = bounds
        nx = int(np.ceil((x1 - x0) / res)) + 1
        ny = int(np.ceil((y1 - y0) / res)) + 1
        # a Gaussian kernel of sd sigma gives a correlation exp(-r^2 / (4 sigma^2)); use the
        # distance where it drops to 1/e as the correlation length: sigma = L / 2
        return cls(x0, y0, res, gaussian_field(rng, (ny, nx), corr_len / 2 / res, sd))

    def __call__(self, x, y):
        from scipy.ndimage import map_coordinates
        return map_coordinates(self.data, [(y - self.y0) / self.res, (x - self.x0) / self.res],
                               order=1, mode="nearest")


# ----------------------------------------------------------------------------- one road
@dataclass
class Road:
    road_id: str
    speed: int
    line: np.ndarray          # densified true centreline, x, y, heading at 0.5 m
    vert: Vertical
    beta: float
    terrain: Field2D
    s_table: np.ndarray = field(default=None)
    tprof: np.ndarray = field(default=None)
    bridges: list = field(default_factory=list)   # (s_centre, span, depth)
    trees: list = field(default_factory=list)     # dicts

    @property
    def length(self):
        return (len(self.line) - 1) * 0.5

    def prepare(self):
        from scipy.ndimage import gaussian_filter1d
        self.s_table = np.arange(-200.0, self.length + 200.0 + 1e-9, 0.5)
        z = self.vert.z(self.s_table)
        zs = gaussian_filter1d(z, 300 / 0.5 / 3.0, mode="nearest")   # smoothing over ~300 m
        self.z_table = z
        self.tprof = zs + self.beta * (z - zs)
        self.valley = np.full_like(z, np.inf)
        self.on_span = np.zeros(len(z), bool)
        for sc, span, depth in self.bridges:
            u = np.abs(self.s_table - sc)
            run = min(1.5 * depth, span / 2 - 5)
            v = z - depth + depth * np.clip((u - (span / 2 - run)) / run, 0, None)
            self.valley = np.minimum(self.valley, v)
            self.on_span |= u <= span / 2
        from scipy.spatial import cKDTree
        self.tree = cKDTree(self.line[:, :2])

    def station(self, x, y):
        _, k = self.tree.query(np.column_stack([x, y]), workers=2)
        px, py, th = self.line[k, 0], self.line[k, 1], self.line[k, 2]
        dx, dy = x - px, y - py
        c, s_ = np.cos(th), np.sin(th)
        s = k * 0.5 + dx * c + dy * s_
        d = -dx * s_ + dy * c
        return s, d

    def surface(self, x, y, trees: bool):
        s, d = self.station(x, y)
        tab = lambda arr: np.interp(s, self.s_table, arr)  # noqa: E731
        zd = tab(self.z_table)
        t = tab(self.tprof) + self.terrain(x, y)
        if self.bridges:
            t = np.minimum(t, tab(self.valley))
            span = tab(self.on_span.astype(float)) > 0.5
        ad = np.abs(d)
        ze = zd - CROSSFALL * HALF_FORMATION
        out = np.where(ad <= HALF_FORMATION, zd - CROSSFALL * ad,
                       np.clip(t, ze - (ad - HALF_FORMATION) * FILL_SLOPE, ze + (ad - HALF_FORMATION) * CUT_SLOPE))
        if self.bridges:
            out = np.where(span, t, out)
        if trees:
            for p in self.trees:
                sd = d * p["side"]
                m = (s > p["s0"]) & (s < p["s1"]) & (sd > p["d0"]) & (sd < p["d1"])
                if not m.any():
                    continue
                # crown rounded over 3 m inside the patch's outline, textured
                e = np.minimum.reduce([s[m] - p["s0"], p["s1"] - s[m], sd[m] - p["d0"], p["d1"] - sd[m]])
                edge = np.clip(e / 3, 0, 1)
                tex = 0.8 + 0.2 * np.sin(x[m] / 3.1 + p["ph1"]) * np.sin(y[m] / 2.7 + p["ph2"])
                out[m] += p["h"] * tex * np.sqrt(edge)
        return out


def make_roads(seed: int, n_roads: int, km: float) -> list[Road]:
    """The true roads; the same for every configuration with the same seed and size."""
    rng = np.random.default_rng(seed)
    roads = []
    for i in range(n_roads):
        length = km * 1000.0
        y_band = ORIGIN[1] + 600 + i * BAND_M
        line = random_horizontal(rng, length, y_band, ORIGIN[0] + 200)
        vert = random_vertical(rng, length)
        speed = int(rng.choice([70, 80, 90, 100]))
        xmin, ymin = line[:, :2].min(0) - 150
        xmax, ymax = line[:, :2].max(0) + 150
        terrain = Field2D.random(rng, (xmin, ymin, xmax, ymax), 10.0, rng.uniform(150, 400),
                                 rng.uniform(2, 6) / 2)
        roads.append(Road(f"R{i + 1:02d}", speed, line, vert, float(rng.uniform(1.3, 2.5)), terrain))
    return roads


def add_bridges(rng, road: Road):
    curves = road.vert.curves()
    busy = [(c["pvc_m"] - 10, c["pvt_m"] + 10) for c in curves] + [(-1e9, 150), (road.length - 150, 1e9)]
    n = int(rng.integers(2, 4))
    for _ in range(200):
        if len(road.bridges) >= n:
            break
        span = rng.uniform(30, 80)
        sc = rng.uniform(150, road.length - 150)
        lo, hi = sc - span / 2, sc + span / 2
        if any(lo < b and hi > a for a, b in busy):
            continue
        if any(abs(sc - b[0]) < 400 for b in road.bridges):
            continue
        road.bridges.append((float(sc), float(span), float(rng.uniform(5, 15))))
    road.bridges.sort()


def add_trees(rng, road: Road):
    s = rng.uniform(50, 300)
    while s < road.length - 50:
        ln = rng.uniform(20, 150)
        near = rng.random() < 0.4
        d0 = HALF_CARRIAGEWAY + rng.uniform(-1.0, 1.5) if near else rng.uniform(6, 15)
        road.trees.append({"s0": float(s), "s1": float(min(s + ln, road.length)), "side": int(rng.choice([-1, 1])),
                           "d0": float(d0), "d1": float(d0 + rng.uniform(10, 40)), "h": float(rng.uniform(8, 20)),
                           "near": bool(near), "ph1": float(rng.uniform(0, 6.3)), "ph2": float(rng.uniform(0, 6.3))})
        s += ln + rng.uniform(150, 500)


def digitise(rng, road: Road, cfg: Config) -> np.ndarray:
    """Vertices of the digitised centreline (M x 2)."""
    L = road.length
    amp = rng.uniform(cfg.offset_lo, cfg.offset_hi)
    ss = [0.0]
    while ss[-1] < L:
        ss.append(ss[-1] + rng.uniform(10, 20))
    ss = np.array(ss)
    ss[-1] = L
    s_fine = np.arange(0, L + 1, 1.0)
    o = np.zeros_like(s_fine)
    for _ in range(3):
        wl = rng.uniform(200, 600)
        o += rng.uniform(0.5, 1) * np.sin(2 * np.pi * s_fine / wl + rng.uniform(0, 2 * np.pi))
    o *= amp / np.abs(o).max()
    off = np.interp(ss, s_fine, o) + np.clip(rng.normal(0, cfg.jitter, len(ss)), -2 * cfg.jitter, 2 * cfg.jitter)
    along = np.clip(rng.normal(0, cfg.jitter, len(ss)), -2 * cfg.jitter, 2 * cfg.jitter)
    along[[0, -1]] = 0
    k = np.clip(np.round(ss / 0.5).astype(int), 0, len(road.line) - 1)
    th = road.line[k, 2]
    x = road.line[k, 0] + along * np.cos(th) - off * np.sin(th)
    y = road.line[k, 1] + along * np.sin(th) + off * np.cos(th)
    return np.column_stack([x, y])


# ----------------------------------------------------------------------------- raster
def build_raster(roads: list[Road], cfg: Config, rng, log=print):
    import rasterio.features
    from rasterio.transform import from_origin
    from shapely.geometry import LineString

    c = cfg.cell
    xmin = min(r.line[:, 0].min() for r in roads) - CORRIDOR_M - 2 * c
    xmax = max(r.line[:, 0].max() for r in roads) + CORRIDOR_M + 2 * c
    ymin = min(r.line[:, 1].min() for r in roads) - CORRIDOR_M - 2 * c
    ymax = max(r.line[:, 1].max() for r in roads) + CORRIDOR_M + 2 * c
    xmin, ymin = np.floor(xmin / c) * c, np.floor(ymin / c) * c
    xmax, ymax = np.ceil(xmax / c) * c, np.ceil(ymax / c) * c
    ncol, nrow = int(round((xmax - xmin) / c)), int(round((ymax - ymin) / c))
    transform = from_origin(xmin, ymax, c, c)
    label = rasterio.features.rasterize(
        [(LineString(r.line[::20, :2]).buffer(CORRIDOR_M), i + 1) for i, r in enumerate(roads)],
        out_shape=(nrow, ncol), transform=transform, fill=0, all_touched=True, dtype="uint8")
    dem = np.full((nrow, ncol), NODATA, dtype=np.float32)
    m = 4 if c <= 2 else int(round(c))
    sub = ((np.arange(m) + 0.5) / m - 0.5) * c
    sx, sy = [a.ravel() for a in np.meshgrid(sub, sub)]
    chunk = max(1, 4_000_000 // (m * m))
    for i, road in enumerate(roads):
        rows, cols = np.nonzero(label == i + 1)
        for a in range(0, len(rows), chunk):
            r_, c_ = rows[a:a + chunk], cols[a:a + chunk]
            cx = xmin + (c_ + 0.5) * c
            cy = ymax - (r_ + 0.5) * c
            x = (cx[:, None] + sx[None, :]).ravel()
            y = (cy[:, None] + sy[None, :]).ravel()
            z = road.surface(x, y, cfg.trees).reshape(len(r_), m * m).mean(axis=1)
            dem[r_, c_] = z
    valid = label > 0
    err = rng.normal(0, cfg.white, valid.sum())
    if cfg.corr_sd > 0:
        res = max(c, 10.0)
        f = Field2D.random(rng, (xmin, ymin, xmax, ymax), res, cfg.corr_len, cfg.corr_sd)
        rows, cols = np.nonzero(valid)
        err += f(xmin + (cols + 0.5) * c, ymax - (rows + 0.5) * c)
    dem[valid] = (dem[valid] + err).astype(np.float32)
    return dem, transform


def write_dem(path: Path, dem: np.ndarray, transform):
    import rasterio
    prof = dict(driver="GTiff", height=dem.shape[0], width=dem.shape[1], count=1, dtype="float32",
                crs=CRS, transform=transform, nodata=NODATA, compress="deflate", predictor=3,
                tiled=True, blockxsize=256, blockysize=256)
    with rasterio.open(path, "w", **prof) as dst:
        dst.write(dem, 1)


def write_roads(path: Path, roads: list[Road], lines: list[np.ndarray]):
    import geopandas as gpd
    from shapely.geometry import LineString
    gdf = gpd.GeoDataFrame({"road_id": [r.road_id for r in roads],
                            "name": [f"Synthetic road {r.road_id}" for r in roads],
                            "speed_kmh": [r.speed for r in roads]},
                           geometry=[LineString(v) for v in lines], crs=CRS)
    gdf.to_file(path, driver="GPKG", layer="roads")


# ----------------------------------------------------------------------------- truth
def _sight(road: Road, direction: int, step: float = 2.0):
    """Per station: (s0, line-of-sight distance, grazing chainage, headlight reach, hit chainage)."""
    v = road.vert
    s0 = np.arange(0.0, road.length + 1e-9, step)
    d = np.arange(1.0, LOOK_M + 1e-9, 1.0)
    los = np.full(len(s0), float(LOOK_M))
    graze = np.full(len(s0), np.nan)
    beam = np.full(len(s0), float(LOOK_M))
    hit = np.full(len(s0), np.nan)
    z0all = v.z(s0)
    g0all = direction * v.grade(s0)
    for a in range(0, len(s0), 500):
        sl = slice(a, a + 500)
        z0, g0 = z0all[sl], g0all[sl]
        xs = s0[sl, None] + direction * d[None, :]
        zr = v.z(xs.ravel()).reshape(xs.shape)
        eye = z0 + EYE_M
        slope_road = (zr - eye[:, None]) / d[None, :]
        run = np.maximum.accumulate(slope_road, axis=1)
        prev = np.concatenate([np.full((len(z0), 1), -np.inf), run[:, :-1]], axis=1)
        obj = (zr + OBJECT_M - eye[:, None]) / d[None, :]
        blocked = obj < prev
        anyb = blocked.any(axis=1)
        first = np.argmax(blocked, axis=1)
        idx = np.nonzero(anyb)[0]
        los_c = los[sl]
        graze_c = graze[sl]
        los_c[idx] = d[first[idx] - 1] if len(idx) else los_c[idx]
        if len(idx):
            cols = np.arange(len(d))[None, :]
            k = np.argmax(np.where(cols < first[idx, None], slope_road[idx], -np.inf), axis=1)
            graze_c[idx] = s0[sl][idx] + direction * d[k]
        # headlight: upper edge of the beam rising 1 degree above the vehicle's grade
        slope_b = np.tan(np.arctan(g0) + np.radians(BEAM_DEG))
        zb = (z0 + HEADLIGHT_M)[:, None] + d[None, :] * slope_b[:, None]
        over = zr > zb
        anyh = over.any(axis=1)
        fh = np.argmax(over, axis=1)
        beam_c = beam[sl]
        hit_c = hit[sl]
        beam_c[anyh] = d[fh[anyh]]
        hit_c[anyh] = s0[sl][anyh] + direction * d[fh[anyh]]
    return s0, los, graze, beam, hit


def _attribute(point, curves, kind):
    best, bd = None, np.inf
    for c in curves:
        if c["kind"] != kind:
            continue
        dist = 0.0 if c["pvc_m"] <= point <= c["pvt_m"] else min(abs(point - c["pvc_m"]), abs(point - c["pvt_m"]))
        if dist < bd:
            best, bd = c, dist
    return best


def truth_curves(road: Road) -> list[dict]:
    curves = road.vert.curves()
    ssd = SSD_M[road.speed]
    for c in curves:
        c["min_sight_m"] = float(LOOK_M)
        c["on_bridge"] = any(c["pvc_m"] < sc + sp / 2 and c["pvt_m"] > sc - sp / 2 for sc, sp, _ in road.bridges)
    for direction in (1, -1):
        s0, los, graze, beam, hit = _sight(road, direction)
        # every station whose sight is limited within the look-ahead is attributed, so
        # min_sight_m is the curve's true minimum; only those below the SSD decide the verdict
        for i in np.nonzero(los < LOOK_M)[0]:
            c = _attribute(graze[i], curves, "crest")
            if c is not None:
                c["min_sight_m"] = min(c["min_sight_m"], float(los[i]))
        for i in np.nonzero(beam < LOOK_M)[0]:
            c = _attribute(hit[i], curves, "sag")
            if c is not None:
                c["min_sight_m"] = min(c["min_sight_m"], float(beam[i]))
    for c in curves:
        c["ssd_m"] = ssd
        c["verdict"] = "deficient" if c["min_sight_m"] < ssd else "adequate"
    return curves


# ----------------------------------------------------------------------------- one configuration
def generate(cfg: Config, seed: int, n_roads: int, km: float, folder: Path, log=print) -> dict:
    """Write dem.tif, roads.gpkg and truth.json into ``folder`` (reused if present)."""
    folder.mkdir(parents=True, exist_ok=True)
    meta_path = folder / "truth.json"
    if meta_path.is_file() and (folder / "dem.tif").is_file() and (folder / "roads.gpkg").is_file():
        return json.loads(meta_path.read_text())
    roads = make_roads(seed, n_roads, km)
    rng = np.random.default_rng([seed, 1 + [c.name for c in CONFIGS].index(cfg.name)])
    for road in roads:
        if cfg.bridges:
            add_bridges(rng, road)
        if cfg.trees:
            add_trees(rng, road)
        road.prepare()
    lines = [digitise(rng, r, cfg) for r in roads]
    dem, transform = build_raster(roads, cfg, rng, log)
    write_dem(folder / "dem.tif", dem, transform)
    write_roads(folder / "roads.gpkg", roads, lines)
    meta = {"config": cfg.name, "seed": seed, "roads": []}
    for road, dig in zip(roads, lines):
        meta["roads"].append({
            "road_id": road.road_id, "speed_kmh": road.speed, "length_m": road.length,
            "true_line": road.line[::10, :2].round(3).tolist() + [road.line[-1, :2].round(3).tolist()],
            "digitised_line": dig.round(3).tolist(),
            "bridges": [{"s_m": sc, "span_m": sp, "depth_m": dp} for sc, sp, dp in road.bridges],
            "trees": road.trees,
            "curves": truth_curves(road),
        })
    tmp = meta_path.with_suffix(".tmp")
    tmp.write_text(json.dumps(meta))
    tmp.rename(meta_path)
    return meta
