"""Vertical alignment recovery: exact curves, trade facts of the symmetric parabola, method
pieces against plain reference implementations, and edge cases."""

from __future__ import annotations

import numpy as np
import pytest

from pipeline.alignment.fit import (_jacobian, fit_profile, model_grade, model_z, noise_sigma, segment_lines)


def textbook_profile(x, pvis):
    """Elevation from the textbook form, written out plainly (common practice, no source):
    tangents between PVIs, and on each curve y = y_PVC + g1 u + (g2 - g1) / (2 L) u^2.
    ``pvis``: list of (chainage, elevation, L) including the two ends (L = 0 there)."""
    X = np.array([p[0] for p in pvis], dtype=float)
    Y = np.array([p[1] for p in pvis], dtype=float)
    z = np.interp(x, X, Y)
    for i in range(1, len(pvis) - 1):
        L = pvis[i][2]
        g1 = (Y[i] - Y[i - 1]) / (X[i] - X[i - 1])
        g2 = (Y[i + 1] - Y[i]) / (X[i + 1] - X[i])
        pvc = X[i] - L / 2
        y_pvc = Y[i] - g1 * L / 2
        on = (x >= pvc) & (x <= pvc + L)
        u = x[on] - pvc
        z[on] = y_pvc + g1 * u + (g2 - g1) / (2 * L) * u**2
    return z


# a crest, two consecutive sags on a 150 m tangent, and a sharp crest (A = 9 %, K = 4)
PVIS = [(0.0, 100.0, 0), (400.0, 112.0, 240.0), (900.0, 102.0, 180.0), (1250.0, 99.0, 120.0),
        (1700.0, 117.0, 36.0), (2100.0, 97.0, 0)]


def test_exact_curves_recovered():
    """No noise: every PVI, elevation, grade and length comes back to 1e-6 (relative)."""
    x = np.arange(0.0, 2100.0 + 1e-9, 5.0)
    z = textbook_profile(x, PVIS)
    _, curves, fitted, grade = fit_profile(x, z, 5.0)
    assert len(curves) == len(PVIS) - 2
    for (_, c), p, prev, nxt in zip(curves.iterrows(), PVIS[1:-1], PVIS[:-2], PVIS[2:]):
        g1 = (p[1] - prev[1]) / (p[0] - prev[0]) * 100
        g2 = (nxt[1] - p[1]) / (nxt[0] - p[0]) * 100
        assert c["pvi_m"] == pytest.approx(p[0], rel=1e-6)
        assert c["pvi_elev_m"] == pytest.approx(p[1], rel=1e-6)
        assert c["length_m"] == pytest.approx(p[2], rel=1e-6)
        assert c["g1_pct"] == pytest.approx(g1, rel=1e-6)
        assert c["g2_pct"] == pytest.approx(g2, rel=1e-6)
        assert c["kind"] == ("crest" if g2 < g1 else "sag")
        assert c["k"] == pytest.approx(p[2] / abs(g2 - g1), rel=1e-6)  # K = L / A
        assert c["confidence"] in ("high", "medium")
    np.testing.assert_allclose(fitted, z, atol=1e-6)


def test_fitted_parabola_equals_numpy_polyfit():
    """Reference: numpy.polyfit (degree 2) on the samples of each curve. The fitted curve's
    coefficients (a = (g2 - g1) / 2L, b = g1, c = y_PVC in u = x - PVC) must agree."""
    x = np.arange(0.0, 2100.0 + 1e-9, 2.0)
    z = textbook_profile(x, PVIS)
    _, curves, _, _ = fit_profile(x, z, 2.0)
    for _, c in curves.iterrows():
        on = (x >= c["pvc_m"]) & (x <= c["pvt_m"])
        if on.sum() < 5:
            continue
        u = x[on] - c["pvc_m"]
        a_ref, b_ref, c_ref = np.polyfit(u, z[on], 2)
        g1, g2, L = c["g1_pct"] / 100, c["g2_pct"] / 100, c["length_m"]
        assert (g2 - g1) / (2 * L) == pytest.approx(a_ref, rel=1e-6)
        assert g1 == pytest.approx(b_ref, rel=1e-6, abs=1e-9)
        assert c["pvi_elev_m"] - g1 * L / 2 == pytest.approx(c_ref, rel=1e-9)


def test_symmetric_parabola_trade_facts():
    """Common practice, no source (symmetric parabolic curve): y_PVC = y_PVI - g1 L / 2; the PVI
    lies midway between PVC and PVT; external distance E = A L / 800 (A in %, L in m) equals
    the middle ordinate; the turning point lies at x = -g1 L / (g2 - g1) from the PVC."""
    X = np.array([0.0, 500.0, 1000.0])
    Y = np.array([100.0, 115.0, 105.0])  # g1 = +3 %, g2 = -2 %
    L = np.array([0.0, 300.0, 0.0])
    g1, g2 = 0.03, -0.02
    pvc, pvt = 500.0 - 150.0, 500.0 + 150.0
    assert model_z(X, Y, L, np.array([pvc]))[0] == pytest.approx(115.0 - g1 * 300 / 2)
    assert (pvc + pvt) / 2 == 500.0
    a_pct = abs(g2 - g1) * 100
    E = a_pct * 300 / 800
    z_pvi_curve = model_z(X, Y, L, np.array([500.0]))[0]
    assert 115.0 - z_pvi_curve == pytest.approx(E, rel=1e-12)
    z_pvc, z_pvt = model_z(X, Y, L, np.array([pvc, pvt]))
    middle_ordinate = z_pvi_curve - (z_pvc + z_pvt) / 2
    assert middle_ordinate == pytest.approx(E, rel=1e-12)
    # turning point, against the numerical maximum of the curve (numpy reference)
    u_turn = -g1 * 300 / (g2 - g1)
    dense = np.linspace(pvc, pvt, 300001)
    assert dense[np.argmax(model_z(X, Y, L, dense))] == pytest.approx(pvc + u_turn, abs=1e-2)
    # and the curve table reports the same point
    x = np.arange(0.0, 1000.0 + 1e-9, 5.0)
    _, curves, _, _ = fit_profile(x, model_z(X, Y, L, x), 5.0)
    assert curves.iloc[0]["turn_m"] == pytest.approx(pvc + u_turn, rel=1e-6)
    # grade is the derivative of elevation (numpy.gradient reference on a fine grid)
    fine = np.arange(0.0, 1000.0 + 1e-9, 0.01)
    np.testing.assert_allclose(model_grade(X, Y, L, fine)[1:-1],
                               np.gradient(model_z(X, Y, L, fine), fine)[1:-1], atol=1e-6)


def test_segmentation_is_optimal_partitioning():
    """Reference: the plain O(n^2) dynamic programme of optimal partitioning (Jackson et al.
    2005) written here with numpy.polyfit residuals; the pruned, block-vectorised version must
    give the same breakpoints."""
    rng = np.random.default_rng(4)
    x = np.arange(120, dtype=float) * 5
    z = np.interp(x, [0, 150, 330, 420, 595], [0, 6, 1, 3, -2]) + rng.normal(0, 0.1, len(x))
    beta, m = 2.0 * 0.1**2 * np.log(len(x)), 4

    def rss(a, b):
        c = np.polyfit(x[a:b], z[a:b], 1)
        r = np.polyval(c, x[a:b]) - z[a:b]
        return float(r @ r)

    n = len(x)
    F = np.full(n + 1, np.inf)
    F[0] = -beta
    prev = np.zeros(n + 1, dtype=int)
    for t in range(m, n + 1):
        for tau in [0] + list(range(m, t - m + 1)):
            v = F[tau] + rss(tau, t) + beta
            if v < F[t]:
                F[t], prev[t] = v, tau
    ref, t = [], n
    while t > 0:
        t = prev[t]
        if t > 0:
            ref.append(t)
    assert sorted(ref) == list(segment_lines(x, z, beta, m))
    assert len(ref) == 3


def test_jacobian_matches_finite_differences():
    """Reference: central finite differences of the model (numpy), at a generic point."""
    X = np.array([0.0, 180.0, 420.0, 700.0, 1000.0])
    Y = np.array([50.0, 56.0, 49.0, 55.0, 52.0])
    L = np.array([0.0, 120.0, 90.0, 150.0, 0.0])
    xs = np.arange(0.0, 1000.0, 3.7)
    free = np.arange(1, 4)
    allv = np.arange(5)
    J = _jacobian(X, Y, L, xs, free, allv, free, rho=1.0, dense=True)[: len(xs)]
    p0 = np.concatenate([X[free], Y, L[free]])

    def f(p):
        Xp, Yp, Lp = X.copy(), Y.copy(), L.copy()
        Xp[free], Yp[:], Lp[free] = p[:3], p[3:8], p[8:]
        return model_z(Xp, Yp, Lp, xs)

    h = 1e-6
    num = np.column_stack([(f(p0 + h * e) - f(p0 - h * e)) / (2 * h) for e in np.eye(len(p0))])
    np.testing.assert_allclose(J, num, atol=1e-6)


def test_noise_estimate_on_white_noise():
    """On white noise of 0.1 m around a rolling profile the second-difference estimator gives
    0.1 m within 5 % (numpy's generator as reference; 20,000 stations, so the estimator's own
    scatter, about 1 %, stays well inside the bound)."""
    rng = np.random.default_rng(8)
    x = np.arange(0.0, 100000.0, 5.0)
    z = textbook_profile(x, [(0, 0, 0), (25000, 100, 400), (60000, 30, 600), (100000, 90, 0)])
    assert noise_sigma(z + rng.normal(0, 0.1, len(x))) == pytest.approx(0.1, rel=0.05)


def test_one_straight_grade_has_no_curve():
    x = np.arange(0.0, 3000.0 + 1e-9, 5.0)
    z = 80.0 + 0.035 * x
    _, curves, fitted, grade = fit_profile(x, z, 5.0)
    assert len(curves) == 0
    np.testing.assert_allclose(fitted, z, atol=1e-8)
    np.testing.assert_allclose(grade, 3.5 / 100, atol=1e-10)


def test_road_shorter_than_two_tangents():
    """30 m of road: too short for a PVI with 20 m of tangent either side; a single grade."""
    x = np.arange(0.0, 30.0 + 1e-9, 5.0)
    z = np.array([10.0, 10.2, 10.3, 10.3, 10.2, 10.0, 9.7])
    _, curves, fitted, _ = fit_profile(x, z, 5.0)
    assert len(curves) == 0
    ref = np.polyval(np.polyfit(x, z, 1), x)  # numpy least-squares line
    np.testing.assert_allclose(fitted, ref, atol=1e-9)


def test_curve_cut_by_a_data_gap_is_flagged():
    x = np.arange(0.0, 2100.0 + 1e-9, 5.0)
    z = textbook_profile(x, PVIS)
    z[(x > 360) & (x < 400)] = np.nan  # 35 m of missing ground inside the first crest
    _, curves, fitted, _ = fit_profile(x, z, 5.0)
    first = curves.iloc[(curves["pvi_m"] - 400).abs().argmin()]
    assert "curve cut by a data gap" in first["flags"]
    assert first["confidence"] == "low"
    assert first["pvi_m"] == pytest.approx(400.0, abs=0.5)


def test_flat_road_in_a_noisy_dem_has_no_spurious_curves():
    """A constant grade under 0.25 m of noise, at several steps: no curve with A >= 1 %."""
    rng = np.random.default_rng(21)
    for step in (1.0, 2.0, 5.0, 10.0):
        for _ in range(3):
            x = np.arange(0.0, 4000.0 + 1e-9, step)
            z = 150.0 - 0.012 * x + rng.normal(0, 0.25, len(x))
            _, curves, _, _ = fit_profile(x, z, step)
            assert not (curves["a_pct"] >= 1.0).any(), (step, curves)


def test_no_overlap_and_order_on_noisy_rolling_road():
    from pipeline.demo.synthetic import random_alignment

    rng = np.random.default_rng(13)
    va = random_alignment(rng, 6000.0)
    x = np.arange(0.0, 6000.0 + 1e-9, 5.0)
    _, curves, _, _ = fit_profile(x, va.z(x) + rng.normal(0, 0.1, len(x)), 5.0)
    assert np.all(curves["pvc_m"].to_numpy() <= curves["pvi_m"].to_numpy())
    assert np.all(curves["pvi_m"].to_numpy() <= curves["pvt_m"].to_numpy())
    assert np.all(curves["pvt_m"].to_numpy()[:-1] <= curves["pvc_m"].to_numpy()[1:] + 1e-9)
    assert np.all((curves["pvc_m"] >= 0) & (curves["pvt_m"] <= 6000.0))
