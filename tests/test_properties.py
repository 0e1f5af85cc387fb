"""Property-based tests (hypothesis): arbitrary finite profiles never make the profile, artefact,
alignment or sight functions raise, and their invariants hold."""

from __future__ import annotations

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from pipeline.alignment.fit import fit_profile
from pipeline.profile.artefacts import detect
from pipeline.profile.stations import FLAG_NAMES, regularise, station_chainages
from pipeline.sight.lines import SightRules, sight_both_ways

FAST = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
elev = st.floats(min_value=-500.0, max_value=3000.0, allow_nan=False, allow_infinity=False)
steps = st.sampled_from([1.0, 2.0, 5.0, 10.0])


@st.composite
def profiles(draw, max_n=160):
    """Any finite profile: pure noise, a random walk of grades, or steps and spikes, with gaps."""
    n = draw(st.integers(min_value=2, max_value=max_n))
    step = draw(steps)
    kind = draw(st.sampled_from(["noise", "walk", "blocks"]))
    base = draw(elev)
    if kind == "noise":
        z = base + draw(arrays(np.float64, n, elements=st.floats(-50, 50)))
    elif kind == "walk":
        g = draw(arrays(np.float64, n, elements=st.floats(-0.3, 0.3)))
        z = base + np.cumsum(g) * step
    else:
        z = base + np.repeat(draw(arrays(np.float64, (n + 9) // 10, elements=st.floats(-20, 20))), 10)[:n]
    if draw(st.booleans()) and n > 4:
        a = draw(st.integers(0, n - 2))
        b = draw(st.integers(a + 1, n))
        z = z.copy()
        z[a:b] = np.nan
    return np.arange(n) * step, z, step


@FAST
@given(profiles())
def test_alignment_never_raises_and_keeps_its_invariants(p):
    ch, z, step = p
    stretches, curves, fitted, grade = fit_profile(ch, z, step)
    assert len(fitted) == len(ch) == len(grade)
    if len(curves):
        pvc, pvi, pvt = (curves[c].to_numpy() for c in ("pvc_m", "pvi_m", "pvt_m"))
        assert np.all(pvc <= pvi + 1e-9) and np.all(pvi <= pvt + 1e-9)
        assert np.all(pvt[:-1] <= pvc[1:] + 1e-6)  # curves do not overlap
        assert np.all(pvc >= ch[0] - 1e-6) and np.all(pvt <= ch[-1] + 1e-6)
        assert np.all(curves["length_m"] >= 0) and set(curves["kind"]) <= {"crest", "sag"}
    for a in stretches:
        assert np.all(np.diff(a.x) > 0)  # PVI chainages increase
    ok = np.isfinite(z)
    if ok.sum() >= 3:
        assert np.isfinite(fitted[ok]).any()


@FAST
@given(profiles(max_n=120), st.floats(min_value=50.0, max_value=600.0))
def test_sight_is_non_negative_and_bounded(p, lookahead):
    ch, z, step = p
    if len(ch) < 2:
        return
    rules = SightRules(lookahead_m=lookahead)
    r = sight_both_ways(ch, lambda x: np.interp(x, ch, z, left=np.nan, right=np.nan), rules, fine_step_m=step)
    for name, to_end in (("fwd", ch[-1] - ch), ("back", ch - ch[0])):
        sd = r[f"sight_{name}_m"]
        ok = np.isfinite(sd)
        assert np.all(sd[ok] >= 0)
        assert np.all(sd[ok] <= lookahead + 1e-9)
        assert np.all(sd[ok] <= to_end[ok] + 1e-9)
        assert np.all(np.isnan(sd[np.isnan(z)]))


@FAST
@given(profiles())
def test_artefact_detection_never_raises(p):
    ch, z, step = p
    mask, notes = detect(ch, z, step, 0.05)
    assert mask.shape == z.shape
    for kind, a, b, detail in notes:
        assert a <= b and isinstance(kind, str)


@FAST
@given(st.lists(st.tuples(st.floats(-100, 1100), elev), min_size=0, max_size=200), steps,
       st.floats(min_value=1.0, max_value=100.0))
def test_regularise_never_raises(points, step, max_gap):
    st_ = station_chainages(1000.0, step)
    c = np.array([p[0] for p in points], dtype=float)
    z = np.array([p[1] for p in points], dtype=float)
    zs, flag = regularise(c, z, st_, step, max_gap)
    assert len(zs) == len(st_) == len(flag)
    assert set(np.unique(flag)) <= set(range(len(FLAG_NAMES)))
    assert np.all(np.isnan(zs[flag == 2]))
    assert np.all(np.isfinite(zs[flag != 2]))
