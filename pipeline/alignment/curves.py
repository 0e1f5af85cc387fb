"""The curve table: one row per fitted vertical curve, with its confidence.

Per curve: kind (crest where G2 < G1), PVC/PVI/PVT, G1, G2, the algebraic difference
A = |G2 - G1| (%), the length L, the rate of vertical curvature K = L / A (m per %; AASHTO
Green Book, ch. 3), the turning point where it falls on the curve (u = -g1 L / (g2 - g1) from
the PVC), the RMSE of the fit over the curve, and a confidence flag with its reasons. One of
the reasons is residuals that keep their sign over long runs (fewer runs than a random
sequence would give, by the Wald-Wolfowitz runs test), the mark of a curve that is not one
symmetric parabola.

References
----------
AASHTO (2018). *A Policy on Geometric Design of Highways and Streets*, 7th ed., ch. 3.
American Association of State Highway and Transportation Officials.

Wald, A. & Wolfowitz, J. (1940). On a test whether two samples are from the same population.
*Annals of Mathematical Statistics* 11(2), 147-162.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .model import Alignment

CURVE_COLUMNS = ["curve_no", "kind", "pvc_m", "pvi_m", "pvt_m", "pvi_elev_m", "g1_pct", "g2_pct", "a_pct",
                 "length_m", "k", "fit_rmse_m", "turn_m", "turn_elev_m", "confidence", "flags", "judged"]


def empty_curves() -> pd.DataFrame:
    """A curve table with no rows but the right column types.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`CURVE_COLUMNS`: ``curve_no`` int64, ``judged`` bool, ``kind``,
        ``confidence`` and ``flags`` text, the rest float (m, %, or m per % for ``k``).
    """
    text = {"kind", "confidence", "flags"}
    types = {"curve_no": "int64", "judged": bool}
    return pd.DataFrame({c: pd.Series(dtype=types.get(c, str if c in text else float)) for c in CURVE_COLUMNS})


def _runs_too_few(resid: np.ndarray) -> bool:
    """True when the signs of the residuals form far fewer runs than chance would (z < -3).

    Notes
    -----
    With n1 positive and n2 negative residuals, runs have mean 2 n1 n2 / (n1 + n2) + 1 and
    variance 2 n1 n2 (2 n1 n2 - n1 - n2) / ((n1 + n2)^2 (n1 + n2 - 1)) (Wald & Wolfowitz 1940).
    """
    s = np.sign(resid)
    s = s[s != 0]
    runs = 1 + int((s[1:] != s[:-1]).sum()) if len(s) else 0
    n1, n2 = (s > 0).sum(), (s < 0).sum()
    if not (n1 and n2):
        return False
    mu = 2 * n1 * n2 / (n1 + n2) + 1
    var = 2 * n1 * n2 * (2 * n1 * n2 - n1 - n2) / ((n1 + n2) ** 2 * (n1 + n2 - 1))
    return bool(var > 0 and (runs - mu) / np.sqrt(var) < -3)


def _turning_point(al: Alignment, i: int, g1: float, g2: float, L: float, pvc: float) -> tuple[float, float]:
    """Chainage and elevation (m) of the curve's high or low point, NaN when off the curve:
    u = -g1 L / (g2 - g1), z = y_PVC + g1 u + (g2 - g1) / (2 L) u^2."""
    if L > 0 and g2 != g1:
        u = -g1 * L / (g2 - g1)
        if 0 <= u <= L:
            return pvc + u, al.y[i] - g1 * L / 2 + g1 * u + (g2 - g1) / (2 * L) * u**2
    return np.nan, np.nan


def _short_tangent_flag(al: Alignment, i: int, j: int, kinds: list, short_tangent_m: float) -> list:
    """A same-kind neighbour across a short tangent: a broken-back or compound curve."""
    for nb in (j - 1, j + 1):
        if 0 <= nb < len(kinds) and kinds[nb] == kinds[j]:
            ii = nb + 1
            gap = (al.x[max(i, ii)] - al.L[max(i, ii)] / 2) - (al.x[min(i, ii)] + al.L[min(i, ii)] / 2)
            if gap < short_tangent_m:
                return ["irregular: two " + kinds[j] + "s on a short tangent (broken-back or compound)"]
    return []


def _data_flags(al, i, L, pvc, pvt, zone, valid, ch, step, opts) -> tuple[list, bool]:
    """Flags on the data under the curve (resolution, samples, gaps, ends) and whether the
    curve can be judged."""
    flags = []
    n_on = int(((ch >= pvc) & (ch <= pvt) & valid).sum())
    res_m = float(opts.get("resolution_m", 0.0))
    if L < max(res_m, step):
        flags.append(f"angle point or very short curve: L under the {max(res_m, step):.0f} m "
                     f"the data resolve")
    elif n_on < 4:
        flags.append("few samples on the curve")
    judged = True
    if (zone & ~valid).any():
        flags.append("curve cut by a data gap")
        if (zone & ~valid).sum() > 0.5 * zone.sum():
            judged = False
            flags.append("curve zone mostly without usable ground data: no verdict")
    if pvc < al.x[0] + step or pvt > al.x[-1] - step:
        flags.append("curve at the end of the data")
    return flags, judged


def _curve_row(al: Alignment, i: int, j: int, kinds: list, ch, z, fitted, step: float, opts: dict) -> dict:
    """The table row of the curve at PVI ``i`` (``j``-th curve of the stretch)."""
    G = al.grades
    valid = np.isfinite(z)
    g1, g2, L = G[i - 1], G[i], float(al.L[i])
    a_pct = abs(g2 - g1) * 100
    pvc, pvt = al.x[i] - L / 2, al.x[i] + L / 2
    zone = (ch >= min(pvc, al.x[i] - step)) & (ch <= max(pvt, al.x[i] + step))
    resid = (z - fitted)[zone & valid]
    rmse = float(np.sqrt(np.mean(resid**2))) if len(resid) else np.nan
    flags, judged = _data_flags(al, i, L, pvc, pvt, zone, valid, ch, step, opts)
    if np.isfinite(rmse) and rmse > max(3 * al.sigma, 0.05):
        flags.append("poor fit")
    flags += _short_tangent_flag(al, i, j, kinds, opts["short_tangent_m"])
    if len(resid) >= 12 and rmse > 1.5 * al.sigma and _runs_too_few(resid):
        flags.append("irregular: residuals systematic (not one symmetric parabola)")
    turn_m, turn_z = _turning_point(al, i, g1, g2, L, pvc)
    low = any(f.startswith(("curve cut", "curve at", "poor")) for f in flags)
    return {
        "kind": "crest" if g2 < g1 else "sag",
        "pvc_m": pvc, "pvi_m": float(al.x[i]), "pvt_m": pvt, "pvi_elev_m": float(al.y[i]),
        "g1_pct": g1 * 100, "g2_pct": g2 * 100, "a_pct": a_pct, "length_m": L,
        "k": L / a_pct if a_pct > 0 else np.nan, "fit_rmse_m": rmse,
        "turn_m": turn_m, "turn_elev_m": turn_z,
        "confidence": "low" if low else ("medium" if flags else "high"),
        "flags": "; ".join(dict.fromkeys(flags)),
        "judged": judged,
    }


def curve_table(stretches: list[Alignment], ch: np.ndarray, z: np.ndarray, fitted: np.ndarray,
                opts: dict) -> pd.DataFrame:
    """One row per vertical curve of a road's fitted stretches.

    Parameters
    ----------
    stretches : list of Alignment
        The road's fitted stretches, in chainage order.
    ch, z : ndarray
        Station chainages and ground elevations (m; NaN = no data).
    fitted : ndarray
        Fitted elevation per station (m; NaN outside the stretches).
    opts : dict
        Fitting settings: ``short_tangent_m`` (m) and optionally ``resolution_m`` (m).

    Returns
    -------
    pandas.DataFrame
        Columns :data:`CURVE_COLUMNS`; grades and A in %, K in m per %, lengths and
        elevations in m.

    Notes
    -----
    K = L / A; crest where G2 < G1. Confidence is low for a curve cut by a data gap, at the
    end of the data or poorly fitted (RMSE over 3 sigma and 5 cm), medium with any other flag.

    References
    ----------
    AASHTO Green Book (2018), ch. 3; Wald & Wolfowitz (1940).
    """
    rows = []
    step = float(np.median(np.diff(ch))) if len(ch) > 1 else 1.0
    for al in stretches:
        G = al.grades
        kinds = ["crest" if G[i] < G[i - 1] else "sag" for i in range(1, len(al.x) - 1)]
        for j, i in enumerate(range(1, len(al.x) - 1)):
            rows.append(_curve_row(al, i, j, kinds, ch, z, fitted, step, opts))
    if not rows:
        return empty_curves()
    frame = pd.DataFrame(rows, columns=CURVE_COLUMNS[1:])
    frame.insert(0, "curve_no", np.arange(1, len(frame) + 1))
    return frame

