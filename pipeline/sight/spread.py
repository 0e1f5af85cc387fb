"""How uncertain the sight distance over each curve is, given the uncertainty of its A and L.

The sight distance over the curve follows the closed-form AASHTO Green Book (2018) ch. 3
relations (crest: line of sight between the eye and object heights; sag: headlight reach), and
its standard deviation is propagated from Cov(A, L) (:mod:`pipeline.alignment.uncertainty`) by
the delta method with numerical derivatives (e.g. JCGM 100:2008, *Guide to the expression of
uncertainty in measurement*, sec. 5.1). The probability that the curve is deficient is then

    P = Phi((SSD_required - S_available) / sd_S)

computed in SQL (``sql/criteria_macros.sql``, ``normal_cdf``) with the verdict rules.
"""

from __future__ import annotations

import numpy as np

from .closed_form import crest_sight_formula, sag_sight_formula
from .lines import SightRules


def sight_sd(kind, a_pct, length_m, a_sd_pct, length_sd_m, corr_al, rules: SightRules,
             extra_sd_m: float = 0.0) -> np.ndarray:
    """Standard deviation (m) of the closed-form sight distance over each curve.

    Parameters
    ----------
    kind : array of str
        'crest' or 'sag'.
    a_pct, length_m, a_sd_pct, length_sd_m, corr_al : array
        Each curve's A (%), L (m), their standard deviations (%, m) and correlation.
    rules : SightRules
        Eye, object and headlight heights (m), beam angle (degrees) and look-ahead (m).
    extra_sd_m : float
        Added in quadrature: the discretisation of the sight check (m).

    Returns
    -------
    ndarray
        sd of min(S, look-ahead) (m), with S from
        :func:`~pipeline.sight.closed_form.crest_sight_formula` or
        :func:`~pipeline.sight.closed_form.sag_sight_formula`; derivatives by central
        differences.

    Notes
    -----
    Delta method: ``var S = (dS/dA sA)^2 + (dS/dL sL)^2 + 2 dS/dA dS/dL r sA sL + extra^2``;
    an unknown sd counts as 10^6 (no information).

    References
    ----------
    JCGM 100:2008, *Guide to the expression of uncertainty in measurement*, sec. 5.1.
    """
    kind = np.asarray(kind)
    a = np.asarray(a_pct, dtype=float)
    L = np.asarray(length_m, dtype=float)

    def S(av, lv):
        av = np.maximum(av, 1e-6)
        lv = np.maximum(lv, 1e-6)
        crest = crest_sight_formula(av, lv, rules.eye_height_m, rules.object_height_m)
        sag = sag_sight_formula(av, lv, rules.headlight_height_m, rules.beam_angle_deg)
        return np.minimum(np.where(kind == "crest", crest, sag), rules.lookahead_m)

    ha = np.maximum(0.01 * a, 1e-3)
    hl = np.maximum(0.01 * L, 0.1)
    ds_da = (S(a + ha, L) - S(a - ha, L)) / (2 * ha)
    # the closed forms are continuous in L for L > 0 (S(A, 0) = 0 is a limit of the S < L case
    # that no real curve takes), so the lower point stays just above 0
    low = np.maximum(L - hl, 1e-6)
    ds_dl = (S(a, L + hl) - S(a, low)) / (L + hl - low)
    a_sd = np.where(np.isfinite(a_sd_pct), a_sd_pct, 1e6)
    l_sd = np.where(np.isfinite(length_sd_m), length_sd_m, 1e6)
    var = (ds_da * a_sd) ** 2 + (ds_dl * l_sd) ** 2 + 2 * ds_da * ds_dl * corr_al * a_sd * l_sd
    return np.sqrt(np.maximum(var, 0.0) + extra_sd_m**2)
