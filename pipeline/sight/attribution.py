"""Which vertical curve limits each station's sight, and the codes of what limits it.

The limit codes are those of :mod:`pipeline.sight.lines` (``profiles.parquet`` carries them as
text, :data:`LIMIT_NAMES`).
"""

from __future__ import annotations

import numpy as np

# limit codes (profiles.parquet carries them as text)
LOS, BEAM, LOOKAHEAD, END = 0, 1, 2, 3
LIMIT_NAMES = np.array(["line of sight", "headlight", "look-ahead", "end of profile"], dtype=object)


def attribute(eye_ch: np.ndarray, at_ch: np.ndarray, limit: np.ndarray, curves, forward: bool,
              tol_m: float = 1.0) -> np.ndarray:
    """Number of the curve limiting each station's sight (0 = none).

    Parameters
    ----------
    eye_ch : ndarray
        Station chainages (m).
    at_ch : ndarray
        Chainage of each station's blocking or hit point (m), NaN if none.
    limit : ndarray
        Limit codes (``LOS``, ``BEAM`` ...).
    curves : DataFrame or None
        ``curve_no, kind, pvc_m, pvt_m`` (m).
    forward : bool
        True travelling with the chainage.
    tol_m : float, default 1.0
        Tolerance (m), at least the sight check's step: an angle point's curve is shorter than
        the step and its blocking point falls a step to either side.

    Returns
    -------
    ndarray of int64
        Curve number per station.

    Notes
    -----
    Line of sight: the crest whose PVC-PVT span holds the blocking point. Headlight: the sag
    nearest behind the hit point, in the direction of travel, that is not wholly behind the
    eye (the beam of an S > L sag meets the road on the tangent beyond the PVT).
    """
    res = np.zeros(len(eye_ch), dtype=np.int64)
    if curves is None or len(curves) == 0:
        return res
    tol = tol_m
    for kind, code in (("crest", LOS), ("sag", BEAM)):
        c = curves[curves["kind"] == kind].sort_values("pvc_m")
        if not len(c):
            continue
        pvc, pvt, no = c["pvc_m"].to_numpy(), c["pvt_m"].to_numpy(), c["curve_no"].to_numpy()
        sel = (limit == code) & np.isfinite(at_ch)
        p, e = at_ch[sel], eye_ch[sel]
        if kind == "crest":
            i = np.clip(np.searchsorted(pvc - tol, p, side="right") - 1, 0, len(c) - 1)
            ok = (p >= pvc[i] - tol) & (p <= pvt[i] + tol)
        elif forward:
            i = np.clip(np.searchsorted(pvc, p + tol, side="right") - 1, 0, len(c) - 1)
            ok = (pvc[i] <= p + tol) & (pvt[i] >= e - tol)
        else:
            i = np.clip(np.searchsorted(pvt, p - tol, side="left"), 0, len(c) - 1)
            ok = (pvt[i] >= p - tol) & (pvc[i] <= e + tol)
        res[np.flatnonzero(sel)[ok]] = no[i[ok]]
    return res
