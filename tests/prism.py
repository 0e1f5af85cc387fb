"""Ground models of a road prism in terrain, for the tests of reading profiles off DEMs.

A straight road at a given heading; its design profile z(s) is a function of chainage. The
surface at chainage s and signed offset d (+ = left) is the crowned carriageway, 4.5 m each
side, falling 2.5 % from the centreline; then a cut batter rising 1 in 2 to the terrain, or a
fill batter falling 1 in 3 to it; then the terrain, which lies ``relief(s)`` above the road's
edge (negative = the road is on fill) with a cross slope. Each DEM cell is the mean of the
surface on a k x k sub-grid (what a DEM made from dense points by block averaging holds).
Road prism proportions are typical of a two-lane rural road (common practice, no source).
"""

from __future__ import annotations

import numpy as np
from rasterio.transform import from_origin

from conftest import write_dem

HALF_WIDTH = 4.5   # carriageway 3.5 m and shoulder 1 m
CROWN = 0.025      # crossfall
CUT, FILL = 2.0, 3.0  # horizontal per 1 vertical


def surface(s, d, profile, relief, cross_slope=0.02, bridge=None):
    """Elevation (m) of the ground model at chainage ``s`` and offset ``d`` (m)."""
    road = profile(s)
    edge = road - CROWN * HALF_WIDTH
    terrain = edge + relief(s) + cross_slope * d
    out = np.abs(d) - HALF_WIDTH
    cut = edge + np.maximum(out, 0) / CUT
    fill = edge - np.maximum(out, 0) / FILL
    beyond = np.where(terrain > edge, np.minimum(terrain, cut), np.maximum(terrain, fill))
    z = np.where(out <= 0, road - CROWN * np.abs(d), beyond)
    if bridge is not None:  # a valley under a bridge: the bare-earth model has no deck
        a, b, depth = bridge
        mid, half = (a + b) / 2, (b - a) / 2
        valley = road - depth * np.clip(1 - (np.abs(s - mid) / half) ** 4, 0, 1)
        z = np.where((s > a) & (s < b), np.minimum(z, valley), z)
    return z


def prism_dem(path, cell_m, length_m, heading_deg, profile, relief=lambda s: 0 * s, noise_m=0.0,
              sub=4, margin_m=40.0, seed=0, bridge=None, origin=(500000.0, 5300000.0)):
    """Write a DEM GeoTIFF (EPSG:32633) of a straight road and return its true centreline's
    end points ``((x0, y0), (x1, y1))``."""
    t = np.radians(heading_deg)
    ux, uy = np.cos(t), np.sin(t)
    x0, y0 = origin
    x1, y1 = x0 + length_m * ux, y0 + length_m * uy
    xmin, xmax = min(x0, x1) - margin_m, max(x0, x1) + margin_m
    ymin, ymax = min(y0, y1) - margin_m, max(y0, y1) + margin_m
    ncol, nrow = int(np.ceil((xmax - xmin) / cell_m)), int(np.ceil((ymax - ymin) / cell_m))
    off = (np.arange(sub) + 0.5) / sub * cell_m
    acc = np.zeros((nrow, ncol))
    cx = xmin + np.arange(ncol) * cell_m
    cy = ymax - np.arange(nrow) * cell_m
    for oy in off:
        for ox in off:
            X = cx[None, :] + ox
            Y = cy[:, None] - oy
            s = (X - x0) * ux + (Y - y0) * uy
            d = -(X - x0) * uy + (Y - y0) * ux
            acc += surface(np.clip(s, -margin_m, length_m + margin_m), d, profile, relief, bridge=bridge)
    dem = acc / sub**2
    if noise_m:
        dem += np.random.default_rng(seed).normal(0, noise_m, dem.shape)
    write_dem(path, dem, from_origin(xmin, ymax, cell_m, cell_m), "EPSG:32633")
    return (x0, y0), (x1, y1)


def parabolic_profile(pvis, elevs, lengths):
    """z(s) of tangents through PVIs ``(pvis, elevs)`` joined by symmetric parabolas of
    ``lengths`` (0 at the ends): y = y_PVC + g1 u + (g2 - g1) u^2 / (2 L) (AASHTO Green Book,
    ch. 3)."""
    pvis, elevs, lengths = (np.asarray(v, dtype=float) for v in (pvis, elevs, lengths))
    g = np.diff(elevs) / np.diff(pvis)

    def z(s):
        s = np.asarray(s, dtype=float)
        k = np.clip(np.searchsorted(pvis, s) - 1, 0, len(g) - 1)
        out = elevs[k] + g[k] * (s - pvis[k])
        for i in range(1, len(pvis) - 1):
            L = lengths[i]
            if L <= 0:
                continue
            u = s - (pvis[i] - L / 2)
            on = (u >= 0) & (u <= L)
            y_pvc = elevs[i] - g[i - 1] * L / 2
            out = np.where(on, y_pvc + g[i - 1] * u + (g[i] - g[i - 1]) * u**2 / (2 * L), out)
        return out

    return z
