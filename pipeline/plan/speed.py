"""Operating speed of cars on rural two-lane highways (85th percentile, km/h).

Speed-prediction equations of Fitzpatrick et al. (2000), *Speed Prediction for
Two-Lane Rural Highways*, FHWA-RD-99-171 (equations recalled from the report;
to be confirmed against it before relying on a value). R is the horizontal
curve radius (m), K the crest's rate of vertical curvature (m per %):

==========================================================  ========================
situation                                                   V85 (km/h)
==========================================================  ========================
horizontal curve on a grade of -9 to -4 %                   102.10 - 3077.13 / R
horizontal curve on a grade of -4 to 0 %                    105.98 - 3709.90 / R
horizontal curve on a grade of 0 to 4 %                     104.82 - 3574.51 / R
horizontal curve on a grade of 4 to 9 %                     96.61 - 2752.19 / R
horizontal curve combined with a sag curve                  105.32 - 3438.19 / R
horizontal curve combined with a limited-sight crest        103.24 - 3576.51 / R
(K <= 43 m/%)
limited-sight crest (K <= 43 m/%) on a tangent              105.08 - 149.69 / K
tangent, no limiting curve                                  desired speed (setting,
                                                            about 98 km/h, assumed)
==========================================================  ========================

Grades are in the direction of travel (the equations were fitted to both
directions); grades steeper than 9 % use the nearest band. No prediction exceeds
the desired speed.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

LIMITED_SIGHT_K = 43.0


def v85_horizontal_on_grade(radius_m, grade_pct):
    """85th-percentile car speed on a horizontal curve, by grade band.

    Parameters
    ----------
    radius_m : array_like
        Curve radius R (m).
    grade_pct : array_like
        Grade in the direction of travel (%); beyond -9 or 9 the nearest band.

    Returns
    -------
    ndarray
        V85 (km/h): ``102.10 - 3077.13 / R`` (-9 to -4 %), ``105.98 - 3709.90 / R`` (-4 to
        0 %), ``104.82 - 3574.51 / R`` (0 to 4 %), ``96.61 - 2752.19 / R`` (4 to 9 %).

    References
    ----------
    Fitzpatrick, K. et al. (2000). *Speed Prediction for Two-Lane Rural Highways*,
    FHWA-RD-99-171 (equations recalled from the report; from memory, to be confirmed).
    """
    R = np.asarray(radius_m, dtype=float)
    g = np.asarray(grade_pct, dtype=float)
    return np.select([g < -4, g < 0, g < 4],
                     [102.10 - 3077.13 / R, 105.98 - 3709.90 / R, 104.82 - 3574.51 / R],
                     96.61 - 2752.19 / R)


def v85_horizontal_with_sag(radius_m):
    """85th-percentile car speed on a horizontal curve combined with a sag curve.

    Parameters
    ----------
    radius_m : array_like
        Curve radius R (m).

    Returns
    -------
    ndarray
        V85 = ``105.32 - 3438.19 / R`` (km/h).

    References
    ----------
    Fitzpatrick, K. et al. (2000). *Speed Prediction for Two-Lane Rural Highways*,
    FHWA-RD-99-171 (equations recalled from the report; from memory, to be confirmed).
    """
    return 105.32 - 3438.19 / np.asarray(radius_m, dtype=float)


def v85_horizontal_with_crest(radius_m):
    """85th-percentile car speed on a horizontal curve combined with a limited-sight crest.

    Parameters
    ----------
    radius_m : array_like
        Curve radius R (m).

    Returns
    -------
    ndarray
        V85 = ``103.24 - 3576.51 / R`` (km/h).

    References
    ----------
    Fitzpatrick, K. et al. (2000). *Speed Prediction for Two-Lane Rural Highways*,
    FHWA-RD-99-171 (equations recalled from the report; from memory, to be confirmed).
    """
    return 103.24 - 3576.51 / np.asarray(radius_m, dtype=float)


def v85_crest_on_tangent(k):
    """85th-percentile car speed on a limited-sight crest (K <= 43 m/%) on a tangent.

    Parameters
    ----------
    k : array_like
        Rate of vertical curvature K of the crest (m per %).

    Returns
    -------
    ndarray
        V85 = ``105.08 - 149.69 / K`` (km/h).

    References
    ----------
    Fitzpatrick, K. et al. (2000). *Speed Prediction for Two-Lane Rural Highways*,
    FHWA-RD-99-171 (equations recalled from the report; from memory, to be confirmed).
    """
    return 105.08 - 149.69 / np.asarray(k, dtype=float)


def predict_v85(chainage_m: np.ndarray, grade_pct: np.ndarray, vcurves: pd.DataFrame, hcurves: pd.DataFrame,
                desired_kmh: float, direction: int = 1) -> np.ndarray:
    """Predicted 85th-percentile car speed (km/h) at each station, in one direction of travel.

    Parameters
    ----------
    chainage_m : ndarray
        Station chainages (m), increasing.
    grade_pct : ndarray
        Grade per station along the chainage (%).
    vcurves : DataFrame
        Vertical curves: ``kind``, ``k`` (m per %), ``pvc_m``, ``pvt_m`` (m).
    hcurves : DataFrame
        Horizontal curves: ``start_m``, ``end_m``, ``radius_m`` (m).
    desired_kmh : float
        Drivers' desired speed on tangents, the ceiling (km/h).
    direction : int, default 1
        +1 travelling with the chainage, -1 against it (the sign of the grades).

    Returns
    -------
    ndarray
        V85 per station (km/h). A horizontal curve takes the equation for its vertical
        situation (limited-sight crest, else sag, overlapping it; else the grade band of its
        mean grade); a limited-sight crest on a tangent the crest equation; elsewhere the
        desired speed.

    References
    ----------
    Fitzpatrick, K. et al. (2000). *Speed Prediction for Two-Lane Rural Highways*,
    FHWA-RD-99-171 (equations recalled from the report; from memory, to be confirmed).
    """
    ch = np.asarray(chainage_m, dtype=float)
    g = direction * np.asarray(grade_pct, dtype=float)
    v = np.full(len(ch), float(desired_kmh))
    pvc, pvt, k, crest, sag = _vertical_situations(vcurves)
    on_h = _limit_on_horizontal_curves(ch, g, v, hcurves, pvc, pvt, crest, sag)
    for c0, c1, kk in zip(pvc[crest], pvt[crest], k[crest]):
        a, b = np.searchsorted(ch, [c0, c1 + 1e-9])
        seg = slice(a, b)
        if b > a and kk > 0:
            v[seg] = np.where(on_h[seg], v[seg], np.minimum(v[seg], v85_crest_on_tangent(kk)))
    return np.clip(v, 0.0, desired_kmh)


def _vertical_situations(vcurves: pd.DataFrame):
    """``(pvc, pvt, k, crest, sag)`` of the vertical curves: ends (m), K (m per %), and which
    are limited-sight crests (K <= 43 m/%) and which sags."""
    if len(vcurves):
        kind = vcurves["kind"].to_numpy()
        k = vcurves["k"].to_numpy(dtype=float)
        pvc, pvt = vcurves["pvc_m"].to_numpy(dtype=float), vcurves["pvt_m"].to_numpy(dtype=float)
        crest = (kind == "crest") & (k <= LIMITED_SIGHT_K)
        sag = kind == "sag"
    else:
        crest = sag = np.zeros(0, dtype=bool)
        pvc = pvt = k = np.zeros(0)
    return pvc, pvt, k, crest, sag


def _limit_on_horizontal_curves(ch, g, v, hcurves: pd.DataFrame, pvc, pvt, crest, sag) -> np.ndarray:
    """Lower ``v`` (km/h, in place) on each horizontal curve to its equation's speed; returns
    which stations lie on a horizontal curve."""
    on_h = np.zeros(len(ch), dtype=bool)
    if not len(hcurves):
        return on_h
    for s0, s1, R in zip(hcurves["start_m"].to_numpy(float), hcurves["end_m"].to_numpy(float),
                         hcurves["radius_m"].to_numpy(float)):
        a, b = np.searchsorted(ch, [s0, s1 + 1e-9])
        if b <= a:
            continue
        on_h[a:b] = True
        over = (pvc <= s1) & (pvt >= s0)
        if (over & crest).any():
            vh = v85_horizontal_with_crest(R)
        elif (over & sag).any():
            vh = v85_horizontal_with_sag(R)
        else:
            gm = g[a:b]
            vh = v85_horizontal_on_grade(R, np.nanmean(gm) if np.isfinite(gm).any() else 0.0)
        v[a:b] = np.minimum(v[a:b], vh)
    return on_h
