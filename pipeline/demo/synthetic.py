"""Synthetic roads with known geometry, for the demo data and the benchmarks.

Nothing here is used by an audit run. The vertical alignment is evaluated
piece by piece with the textbook form of the symmetric parabolic curve
(common practice, no source; AASHTO Green Book ch. 3):

    y(x) = y_PVC + g1 x + (g2 - g1) / (2 L) x^2,   x from the PVC, 0 <= x <= L
    y_PVC = y_PVI - g1 L / 2,   PVI midway between PVC and PVT

deliberately written independently of the fitting code in
:mod:`pipeline.alignment`, so the benchmarks do not share its formulas.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass
class VerticalAlignment:
    """A vertical alignment of symmetric parabolic curves at PVIs, from road start to road end.

    Parameters
    ----------
    pvi_m : ndarray
        PVI chainages (m), increasing, including the start and end points.
    elev_m : ndarray
        PVI elevations (m).
    lengths_m : ndarray
        Length of the curve at each PVI (m); 0 at the start and end points.

    Raises
    ------
    ValueError
        When the PVIs do not increase, an end point carries a curve, or curves overlap.
    """

    pvi_m: np.ndarray
    elev_m: np.ndarray
    lengths_m: np.ndarray

    def __post_init__(self):
        self.pvi_m = np.asarray(self.pvi_m, dtype=float)
        self.elev_m = np.asarray(self.elev_m, dtype=float)
        self.lengths_m = np.asarray(self.lengths_m, dtype=float)
        if np.any(np.diff(self.pvi_m) <= 0):
            raise ValueError("PVI chainages must increase")
        ends = self.lengths_m[[0, -1]]
        if np.any(ends != 0):
            raise ValueError("the road's first and last points carry no curve")
        pvc = self.pvi_m - self.lengths_m / 2
        pvt = self.pvi_m + self.lengths_m / 2
        if np.any(pvc[1:] < pvt[:-1] - 1e-9):
            raise ValueError("vertical curves overlap")

    @property
    def grades(self) -> np.ndarray:
        """Grades of the tangents between PVIs (fraction)."""
        return np.diff(self.elev_m) / np.diff(self.pvi_m)

    def curves(self) -> list[dict]:
        """The interior PVIs with their curves, as plain numbers.

        Returns
        -------
        list of dict
            ``pvi_m, pvi_elev_m`` (m), ``g1, g2`` (fraction), ``length_m`` (m), ``kind``
            ('crest' or 'sag'), ``a_pct`` (A, %) and ``k`` (K = L / A, m per %).
        """
        g = self.grades
        out = []
        for i in range(1, len(self.pvi_m) - 1):
            L = float(self.lengths_m[i])
            a_pct = abs(g[i] - g[i - 1]) * 100
            out.append({
                "pvi_m": float(self.pvi_m[i]), "pvi_elev_m": float(self.elev_m[i]),
                "g1": float(g[i - 1]), "g2": float(g[i]), "length_m": L,
                "kind": "crest" if g[i] < g[i - 1] else "sag",
                "a_pct": a_pct, "k": L / a_pct if a_pct > 0 else np.inf,
            })
        return out

    def z(self, x: np.ndarray) -> np.ndarray:
        """Elevation at chainages: tangents, then each curve overwritten piece by piece.

        Parameters
        ----------
        x : ndarray
            Chainages (m).

        Returns
        -------
        ndarray
            Elevation (m): ``y_PVC + g1 u + (g2 - g1) / (2 L) u^2`` on a curve (u from its PVC).
        """
        x = np.asarray(x, dtype=float)
        g = self.grades
        seg = np.clip(np.searchsorted(self.pvi_m, x, side="right") - 1, 0, len(g) - 1)
        y = self.elev_m[seg] + g[seg] * (x - self.pvi_m[seg])
        for i in range(1, len(self.pvi_m) - 1):
            L = self.lengths_m[i]
            if L <= 0:
                continue
            g1, g2 = g[i - 1], g[i]
            pvc = self.pvi_m[i] - L / 2
            y_pvc = self.elev_m[i] - g1 * L / 2
            on = (x >= pvc) & (x <= pvc + L)
            u = x[on] - pvc
            y[on] = y_pvc + g1 * u + (g2 - g1) / (2 * L) * u**2
        return y

    def grade(self, x: np.ndarray) -> np.ndarray:
        """Grade at chainages.

        Parameters
        ----------
        x : ndarray
            Chainages (m).

        Returns
        -------
        ndarray
            Grade (fraction): ``g1 + (g2 - g1) u / L`` on a curve (u from its PVC).
        """
        x = np.asarray(x, dtype=float)
        g = self.grades
        seg = np.clip(np.searchsorted(self.pvi_m, x, side="right") - 1, 0, len(g) - 1)
        out = g[seg].astype(float)
        for i in range(1, len(self.pvi_m) - 1):
            L = self.lengths_m[i]
            if L <= 0:
                continue
            pvc = self.pvi_m[i] - L / 2
            on = (x >= pvc) & (x <= pvc + L)
            out[on] = g[i - 1] + (g[i] - g[i - 1]) * (x[on] - pvc) / L
        return out


def random_alignment(rng: np.random.Generator, length_m: float, *, max_grade: float = 0.08,
                     a_range_pct=(1.0, 10.0), k_range=(3.0, 150.0), tangent_range_m=(100.0, 800.0),
                     start_elev_m: float = 200.0) -> VerticalAlignment:
    """A random but designable vertical alignment.

    Parameters
    ----------
    rng : numpy.random.Generator
        Random source.
    length_m : float
        Road length (m).
    max_grade : float, default 0.08
        Steepest grade (fraction).
    a_range_pct : (float, float), default (1, 10)
        Range of A (%), drawn uniformly.
    k_range : (float, float), default (3, 150)
        Range of K (m per %), drawn log-uniformly.
    tangent_range_m : (float, float), default (100, 800)
        Range of the tangents between curves (m), drawn uniformly.
    start_elev_m : float, default 200.0
        Elevation at the start (m).

    Returns
    -------
    VerticalAlignment
        Grades within +-max_grade; consecutive crests (or sags) occur whenever the grade keeps
        falling (rising).
    """
    pvi, lengths = [0.0], [0.0]
    g = [rng.uniform(-max_grade, max_grade) * 0.6]
    pos = rng.uniform(*tangent_range_m) * 0.5  # PVC of the first curve
    while True:
        a = rng.uniform(*a_range_pct) / 100.0
        k = float(np.exp(rng.uniform(np.log(k_range[0]), np.log(k_range[1]))))
        # direction: keep the next grade within bounds
        up_ok = g[-1] + a <= max_grade
        down_ok = g[-1] - a >= -max_grade
        if not (up_ok or down_ok):
            a = max_grade - abs(g[-1])
            up_ok = g[-1] < 0
            down_ok = not up_ok
        sign = rng.choice([-1.0, 1.0]) if (up_ok and down_ok) else (1.0 if up_ok else -1.0)
        L = k * a * 100.0
        x_pvi = pos + L / 2
        if x_pvi + L / 2 + tangent_range_m[0] * 0.5 > length_m:
            break
        pvi.append(x_pvi)
        lengths.append(L)
        g.append(g[-1] + sign * a)
        pos = x_pvi + L / 2 + rng.uniform(*tangent_range_m)
    pvi.append(length_m)
    lengths.append(0.0)
    elev = [start_elev_m]
    for i in range(1, len(pvi)):
        elev.append(elev[-1] + g[i - 1] * (pvi[i] - pvi[i - 1]))
    return VerticalAlignment(np.array(pvi), np.array(elev), np.array(lengths))


def plan_polyline(start_xy, heading_deg: float, elements, spacing_m: float = 5.0) -> np.ndarray:
    """Vertices of a centreline built from plan elements.

    Parameters
    ----------
    start_xy : (float, float)
        Start point (m).
    heading_deg : float
        Initial heading, anticlockwise from the x axis (east) (degrees).
    elements : iterable
        ``("straight", length_m)`` or ``("arc", radius_m, deflection_deg)`` with a positive
        deflection turning left.
    spacing_m : float, default 5.0
        Chord length of digitised arcs (m); straights are given by their end points.

    Returns
    -------
    ndarray, shape (n, 2)
        Vertex coordinates (m).

    Raises
    ------
    ValueError
        On an unknown element.
    """
    x, y = float(start_xy[0]), float(start_xy[1])
    th = np.radians(heading_deg)
    pts = [(x, y)]
    for el in elements:
        if el[0] == "straight":
            x += el[1] * np.cos(th)
            y += el[1] * np.sin(th)
            pts.append((x, y))
        elif el[0] == "arc":
            radius, defl = float(el[1]), np.radians(el[2])
            arc_len = radius * abs(defl)
            n = max(2, int(np.ceil(arc_len / spacing_m)))
            s = np.linspace(0, arc_len, n + 1)[1:]
            turn = np.sign(defl)
            # centre of the circle to the left (turn > 0) or right of the heading
            cx = x - turn * radius * np.sin(th)
            cy = y + turn * radius * np.cos(th)
            ang0 = np.arctan2(y - cy, x - cx)
            angs = ang0 + turn * s / radius
            for a in angs:
                pts.append((cx + radius * np.cos(a), cy + radius * np.sin(a)))
            x, y = pts[-1]
            th = th + turn * arc_len / radius
        else:
            raise ValueError(f"unknown plan element {el[0]!r}")
    return np.array(pts)
