"""The hidden zone begins where the road surface is first hidden (issue 12), checked against a
brute-force line of sight on analytic parabolic crests (AASHTO Green Book ch. 3 geometry:
symmetric parabola between two grades; eye 1.08 m, object on the road surface)."""

from __future__ import annotations

import numpy as np
import pytest

from pipeline.sight.hazards import hidden_zone

EYE = 1.08


def crest(pvi, g1, g2, L):
    """Elevation (m) of a road with a symmetric parabolic crest: grades g1, g2 (fractions)."""
    a = (g2 - g1) / (2 * L)
    pvc = pvi - L / 2

    def z(x):
        x = np.asarray(x, dtype=float)
        d = x - pvc
        return np.where(x < pvc, g1 * d, np.where(x > pvc + L, g1 * L / 2 + g2 * (x - pvi), g1 * d + a * d * d))
    return z


def brute_force_zone(z, pvi, S, direction, lo, hi, dq=0.1, n=2001):
    """Every road point q in [lo, hi] (0.1 m apart), sight line from the eye S back sampled at
    2001 points: hidden where the road rises above it. Returns the first and last hidden q."""
    q = np.arange(lo, hi, dq)
    hidden = np.zeros(len(q), dtype=bool)
    t = np.linspace(0.0, 1.0, n)[1:-1]
    for k in range(0, len(q), 400):
        qi = q[k:k + 400, None]
        p = qi - direction * S
        xs = p + (qi - p) * t[None, :]
        line = (z(p) + EYE) + (z(qi) - z(p) - EYE) * t[None, :]
        hidden[k:k + 400] = np.any(z(xs) > line + 1e-9, axis=1)
    idx = np.flatnonzero(hidden)
    assert len(idx)
    return float(q[idx[0]]), float(q[idx[-1]])


@pytest.mark.parametrize("L, S, g1, g2", [
    (300.0, 120.0, 0.04, -0.04),   # S < L
    (200.0, 180.0, 0.03, -0.05),   # S < L, long sight: the zone begins well before the PVI
    (60.0, 250.0, 0.05, -0.03),    # S > L
])
@pytest.mark.parametrize("direction", [1, -1])
def test_hidden_zone_matches_brute_force(L, S, g1, g2, direction):
    pvi = 2000.0
    z = crest(pvi, g1, g2, L)
    end = pvi + direction * L / 2
    got = hidden_zone(z, pvi, end, S, direction, EYE, 0.0, step_m=0.25, road_length_m=5000.0)
    lo, hi = pvi - L / 2 - S - 50, pvi + L / 2 + S + 50
    ref = brute_force_zone(z, pvi, S, direction, lo, hi)
    assert got is not None
    assert got[0] == pytest.approx(ref[0], abs=0.5)
    assert got[1] == pytest.approx(ref[1], abs=0.5)


def test_zone_begins_before_the_pvi_when_sight_is_long():
    """Travelling up to the crest, road just short of the PVI is already hidden from a driver
    180 m back on a long curve (S < L), so hidden_from must lie before the PVI."""
    pvi, L, S = 2000.0, 200.0, 180.0
    z = crest(pvi, 0.03, -0.05, L)
    lo, hi = hidden_zone(z, pvi, pvi + L / 2, S, 1, EYE, 0.0, step_m=0.25, road_length_m=5000.0)
    assert lo < pvi - 5.0 < hi
