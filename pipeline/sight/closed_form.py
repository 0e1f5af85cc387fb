"""Closed-form sight distance over crest and sag vertical curves, and the curve length a sight
distance needs: the AASHTO relations for a symmetric parabolic curve, both cases (S < L and
S > L).

References
----------
AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
ch. 3 (crest vertical curves: line of sight from eye height h1 to object height h2; sag
vertical curves: headlight sight distance with headlight height h and upward beam angle b).
"""

from __future__ import annotations

import numpy as np


def crest_sight_formula(a_pct, length_m, eye_height_m=1.08, object_height_m=0.60):
    """Sight distance over a crest vertical curve, from its A and L.

    Parameters
    ----------
    a_pct : array_like
        Algebraic difference of grades A (%).
    length_m : array_like
        Curve length L (m).
    eye_height_m : float, default 1.08
        Driver's eye height h1 (m).
    object_height_m : float, default 0.60
        Object height h2 (m).

    Returns
    -------
    ndarray
        Sight distance S (m).

    Notes
    -----
    S < L: ``L = A S^2 / (200 (sqrt h1 + sqrt h2)^2)``; S > L:
    ``L = 2 S - 200 (sqrt h1 + sqrt h2)^2 / A``, each solved for S; the case is chosen by
    comparing the S < L result with L.

    References
    ----------
    AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
    ch. 3.
    """
    a = np.asarray(a_pct, dtype=float)
    L = np.asarray(length_m, dtype=float)
    C = 200.0 * (np.sqrt(eye_height_m) + np.sqrt(object_height_m)) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        s_short = np.sqrt(C * L / a)
        s_long = (L + C / a) / 2.0
    return np.where(s_short <= L, s_short, s_long)


def sag_sight_formula(a_pct, length_m, headlight_height_m=0.60, beam_angle_deg=1.0):
    """Headlight sight distance on a sag vertical curve, from its A and L.

    Parameters
    ----------
    a_pct : array_like
        Algebraic difference of grades A (%).
    length_m : array_like
        Curve length L (m).
    headlight_height_m : float, default 0.60
        Headlight height h (m).
    beam_angle_deg : float, default 1.0
        Upward divergence b of the beam's upper edge (degrees).

    Returns
    -------
    ndarray
        Sight distance S (m); infinite where the beam never meets the road (S > L with
        ``2 A <= 200 tan b``).

    Notes
    -----
    S < L: ``L = A S^2 / (200 (h + S tan b))``; S > L: ``L = 2 S - 200 (h + S tan b) / A``,
    each solved for S (the first a quadratic, its positive root); the case is chosen by
    comparing the S < L result with L.

    References
    ----------
    AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
    ch. 3.
    """
    a = np.asarray(a_pct, dtype=float)
    L = np.asarray(length_m, dtype=float)
    h = headlight_height_m
    tb = np.tan(np.radians(beam_angle_deg))
    with np.errstate(divide="ignore", invalid="ignore"):
        p = 200.0 * tb * L
        s_short = (p + np.sqrt(p * p + 800.0 * a * h * L)) / (2.0 * a)
        denom = 2.0 * a - 200.0 * tb
        s_long = np.where(denom > 0, (L * a + 200.0 * h) / denom, np.inf)
    return np.where(s_short <= L, s_short, s_long)


def crest_length_formula(a_pct, sight_m, eye_height_m=1.08, object_height_m=0.60):
    """Crest vertical curve length giving a sight distance.

    Parameters
    ----------
    a_pct : array_like
        Algebraic difference of grades A (%).
    sight_m : array_like
        Sight distance S (m).
    eye_height_m, object_height_m : float
        Eye height h1 and object height h2 (m); defaults 1.08 and 0.60.

    Returns
    -------
    ndarray
        Curve length L (m), never negative.

    Notes
    -----
    ``L = A S^2 / (200 (sqrt h1 + sqrt h2)^2)`` where that is at least S, else
    ``L = 2 S - 200 (sqrt h1 + sqrt h2)^2 / A``.

    References
    ----------
    AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
    ch. 3.
    """
    a = np.asarray(a_pct, dtype=float)
    S = np.asarray(sight_m, dtype=float)
    C = 200.0 * (np.sqrt(eye_height_m) + np.sqrt(object_height_m)) ** 2
    L_short = a * S**2 / C
    with np.errstate(divide="ignore"):
        L_long = np.maximum(2 * S - C / a, 0.0)
    return np.where(L_short >= S, L_short, L_long)


def sag_length_formula(a_pct, sight_m, headlight_height_m=0.60, beam_angle_deg=1.0):
    """Sag vertical curve length giving a headlight sight distance.

    Parameters
    ----------
    a_pct : array_like
        Algebraic difference of grades A (%).
    sight_m : array_like
        Sight distance S (m).
    headlight_height_m : float, default 0.60
        Headlight height h (m).
    beam_angle_deg : float, default 1.0
        Upward divergence b of the beam (degrees).

    Returns
    -------
    ndarray
        Curve length L (m), never negative.

    Notes
    -----
    ``L = A S^2 / (200 (h + S tan b))`` where that is at least S, else
    ``L = 2 S - 200 (h + S tan b) / A``.

    References
    ----------
    AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
    ch. 3.
    """
    a = np.asarray(a_pct, dtype=float)
    S = np.asarray(sight_m, dtype=float)
    q = 200.0 * (headlight_height_m + S * np.tan(np.radians(beam_angle_deg)))
    L_short = a * S**2 / q
    with np.errstate(divide="ignore"):
        L_long = np.maximum(2 * S - q / a, 0.0)
    return np.where(L_short >= S, L_short, L_long)
