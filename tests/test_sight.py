"""Sight distance: numerical line of sight and headlight reach against the closed-form AASHTO
expressions, against a brute-force line of sight written plainly, and its bounds."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipeline.alignment.fit import model_grade, model_z
from pipeline.sight.attribution import BEAM, END, LOOKAHEAD, LOS, attribute
from pipeline.sight.closed_form import crest_sight_formula, sag_sight_formula
from pipeline.sight.lines import SightRules, sight_both_ways, sight_from

RULES = SightRules(eye_height_m=1.08, object_height_m=0.60, headlight_height_m=0.60, beam_angle_deg=1.0,
                   lookahead_m=800.0)


def _isolated(g1, g2, L):
    X = np.array([0.0, 1500.0, 3000.0])
    Y = np.array([100.0, 100.0 + g1 * 1500.0, 100.0 + g1 * 1500.0 + g2 * 1500.0])
    Ls = np.array([0.0, L, 0.0])
    return (lambda x: model_z(X, Y, Ls, x)), (lambda x: model_grade(X, Y, Ls, x))


@pytest.mark.parametrize("step", [5.0, 2.0])
@pytest.mark.parametrize("kind, g1, g2, L", [
    ("crest", 0.03, -0.03, 400.0),   # S < L
    ("crest", 0.03, -0.03, 100.0),   # S > L
    ("crest", 0.02, -0.01, 40.0),    # S > L, small A
    ("sag", -0.03, 0.03, 400.0),     # S < L
    ("sag", -0.03, 0.03, 100.0),     # S < L, close to S = L
    ("sag", -0.02, 0.02, 30.0),      # S > L
])
def test_numerical_matches_closed_form_on_isolated_curves(step, kind, g1, g2, L):
    """AASHTO Green Book ch. 3 closed forms (S < L and S > L, case chosen by comparing S with
    L): the curve's smallest sight distance over all eye positions (stations plus the PVC, where
    an S > L sag is shortest) agrees within 1 % (the acceptance bound)."""
    z, g = _isolated(g1, g2, L)
    ch = np.arange(0.0, 3000.0 + 1e-9, step)
    curves = pd.DataFrame({"curve_no": [1], "kind": [kind], "pvc_m": [1500 - L / 2], "pvt_m": [1500 + L / 2]})
    r = sight_both_ways(ch, z, RULES, curves=curves, grade=g)
    key_f = sight_from(np.array([1500 - L / 2]), z, g, RULES, +1)["sight_m"][0]
    key_b = sight_from(np.array([1500 + L / 2]), z, g, RULES, -1)["sight_m"][0]
    num_f = min(np.min(np.where(r["curve_fwd"] == 1, r["sight_fwd_m"], np.inf)), key_f)
    num_b = min(np.min(np.where(r["curve_back"] == 1, r["sight_back_m"], np.inf)), key_b)
    a = abs(g2 - g1) * 100
    ref = crest_sight_formula(a, L) if kind == "crest" else sag_sight_formula(a, L)
    assert num_f == pytest.approx(float(ref), rel=0.01)
    assert num_b == pytest.approx(float(ref), rel=0.01)
    # the limit is the right one: line of sight over a crest, headlight on a sag
    lim = r["limit_fwd"][r["curve_fwd"] == 1]
    assert np.all(lim == (LOS if kind == "crest" else BEAM))


def brute_force_los(z, h, eye_h, obj_h, lookahead):
    """Line-of-sight distance from every sample, written plainly with loops: the distance to the
    first object position whose sight line from the eye passes below the road somewhere in
    between (samples every h metres); the look-ahead or the end where none is hidden."""
    n = len(z)
    out = np.empty(n)
    for i in range(n):
        e = z[i] + eye_h
        found = None
        j = i + 1
        while j < n and (j - i) * h <= lookahead + 1e-9:
            top = z[j] + obj_h
            blocked = False
            for k in range(i + 1, j):
                line = e + (top - e) * (k - i) / (j - i)
                if z[k] > line:
                    blocked = True
                    break
            if blocked:
                found = (j - i) * h
                break
            j += 1
        out[i] = found if found is not None else min(lookahead, (n - 1 - i) * h)
    return out


def test_line_of_sight_matches_brute_force_on_random_profiles():
    """Reference: the brute force above. The production function interpolates between samples,
    so the two agree within one station (the acceptance bound)."""
    rng = np.random.default_rng(2)
    step = 5.0
    for _ in range(4):
        n = 120
        grades = np.cumsum(rng.normal(0, 0.01, n)).clip(-0.08, 0.08)
        z = np.concatenate([[50.0], 50.0 + np.cumsum(grades[:-1] * step)])
        ch = np.arange(n) * step
        rules = SightRules(headlight_height_m=1000.0, lookahead_m=250.0)  # headlight never limits
        r = sight_both_ways(ch, lambda x: np.interp(x, ch, z), rules, fine_step_m=step)
        ref = brute_force_los(z, step, rules.eye_height_m, rules.object_height_m, rules.lookahead_m)
        assert np.all(np.abs(r["sight_fwd_m"] - ref) <= step + 1e-9)
        ref_b = brute_force_los(z[::-1], step, rules.eye_height_m, rules.object_height_m, rules.lookahead_m)[::-1]
        assert np.all(np.abs(r["sight_back_m"] - ref_b) <= step + 1e-9)


def test_bounds_non_negative_and_within_lookahead_and_road():
    rng = np.random.default_rng(9)
    ch = np.arange(0.0, 1200.0 + 1e-9, 5.0)
    z = 100 + np.cumsum(rng.normal(0, 0.3, len(ch)))
    r = sight_both_ways(ch, lambda x: np.interp(x, ch, z), RULES)
    for name, to_end in (("fwd", ch[-1] - ch), ("back", ch)):
        sd = r[f"sight_{name}_m"]
        assert np.all(sd >= 0)
        assert np.all(sd <= RULES.lookahead_m + 1e-9)
        assert np.all(sd <= to_end + 1e-9)


def test_constant_grade_is_never_limited():
    """On one straight grade neither the line of sight nor the headlight beam (rising 1 degree
    above the grade) meets the road: the look-ahead or the road's end governs."""
    ch = np.arange(0.0, 2000.0 + 1e-9, 5.0)
    r = sight_both_ways(ch, lambda x: 10 + 0.05 * x, RULES, grade=lambda x: np.full(np.shape(x), 0.05))
    expect = np.minimum(RULES.lookahead_m, ch[-1] - ch)
    np.testing.assert_allclose(r["sight_fwd_m"], expect)
    assert set(np.unique(r["limit_fwd"])) <= {LOOKAHEAD, END}


def test_attribution_to_the_blocking_crest():
    """Two crests far apart: stations are attributed to the crest that blocks their view."""
    X = np.array([0.0, 800.0, 2000.0, 3000.0])
    Y = np.array([100.0, 124.0, 100.0, 124.0])
    Ls = np.array([0.0, 80.0, 80.0, 0.0])  # crest at 800, sag at 2000
    ch = np.arange(0.0, 3000.0 + 1e-9, 5.0)
    curves = pd.DataFrame({"curve_no": [1, 2], "kind": ["crest", "sag"], "pvc_m": [760.0, 1960.0],
                           "pvt_m": [840.0, 2040.0]})
    r = sight_both_ways(ch, lambda x: model_z(X, Y, Ls, x), RULES, curves=curves,
                        grade=lambda x: model_grade(X, Y, Ls, x))
    near_crest = (ch > 700) & (ch < 780)
    assert np.all(r["curve_fwd"][near_crest] == 1)
    near_sag = (ch > 1900) & (ch < 1960)
    assert np.all(r["curve_fwd"][near_sag] == 2)
    assert np.all(attribute(ch[:3], np.full(3, np.nan), np.full(3, LOS), curves, True) == 0)


def test_rules_refuse_impossible_values():
    with pytest.raises(ValueError, match="eye_height_m"):
        SightRules(eye_height_m=0.0)
    with pytest.raises(ValueError, match="beam_angle_deg"):
        SightRules(beam_angle_deg=45.0)
