"""Available sight distance along a road, in both directions of travel.

Geometry follows AASHTO's derivations (Green Book, ch. 3): heights are vertical,
distances horizontal along the chainage, and the road's profile is the fitted
vertical alignment (or, as a diagnostic, the ground profile).

- **Line of sight** (crests): from the driver's eye, ``eye_height_m`` above the
  road at the station, to an object ``object_height_m`` high on the road ahead.
  The available sight distance is the distance to the nearest object position
  hidden by the road surface in between (first loss of sight), interpolated
  between look-ahead samples.
- **Headlight reach** (sags): the upper edge of the beam leaves the headlight,
  ``headlight_height_m`` above the road, rising at ``beam_angle_deg`` above the
  vehicle's own grade; the reach is the distance at which the road surface
  meets it.

Both are computed for every station at once as a (stations x look-ahead) array
(numpy), in chunks of stations to bound memory; the look-ahead profile is
sampled every ``fine_step_m`` (about 1 m), so the numerical values agree with
the closed-form AASHTO expressions within a fraction of a percent on isolated
curves (see :func:`crest_sight_formula`, :func:`sag_sight_formula`).

The sight distance a driver has is the smaller of the two; where neither limits
it within the look-ahead, it is the look-ahead, or the distance to the end of
the road (or of the fitted profile), whichever comes first. Each station's
limit is attributed to the crest that blocks the line of sight (the curve
holding the blocking point) or the sag whose rising side stops the beam.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

# limit codes (profiles.parquet carries them as text)
LOS, BEAM, LOOKAHEAD, END = 0, 1, 2, 3
LIMIT_NAMES = np.array(["line of sight", "headlight", "look-ahead", "end of profile"], dtype=object)


@dataclass(frozen=True)
class SightRules:
    """Heights (m), beam angle (degrees) and look-ahead (m) for sight distance."""

    eye_height_m: float = 1.08
    object_height_m: float = 0.60
    headlight_height_m: float = 0.60
    beam_angle_deg: float = 1.0
    lookahead_m: float = 400.0

    def __post_init__(self):
        for name in ("eye_height_m", "headlight_height_m", "lookahead_m"):
            if not getattr(self, name) > 0:
                raise ValueError(f"{name} must be positive, got {getattr(self, name)!r}")
        if not self.object_height_m >= 0:
            raise ValueError(f"object_height_m must not be negative, got {self.object_height_m!r}")
        if not 0 <= self.beam_angle_deg < 10:
            raise ValueError(f"beam_angle_deg must be between 0 and 10, got {self.beam_angle_deg!r}")


def _ahead(Z: np.ndarray, z0: np.ndarray, g0: np.ndarray, h: float, rules: SightRules,
           want_los: np.ndarray | None = None, want_beam: np.ndarray | None = None):
    """Sight from eyes at elevations ``z0`` (grades ``g0``) over the road ahead sampled at
    ``Z[:, j]`` = elevation at distance (j + 1) h (NaN = no profile).

    Returns per eye: line-of-sight distance and headlight reach (inf where not limited within
    the profile available), the offset index of the blocking / hit point (-1 if none), and
    the distance of profile available ahead. ``want_los`` / ``want_beam`` (boolean per eye)
    restrict each computation to the eyes where it can matter.
    """
    E, W = Z.shape
    d = np.arange(1, W + 1, dtype=np.float64) * h
    los = np.full(E, np.inf)
    beam = np.full(E, np.inf)
    los_k = np.full(E, -1, dtype=np.int64)
    beam_k = np.full(E, -1, dtype=np.int64)
    gap = np.isnan(Z)
    first_gap = np.where(gap.any(axis=1), gap.argmax(axis=1), W)
    avail = np.where(first_gap > 0, d[np.maximum(first_gap - 1, 0)], 0.0)

    rows = np.flatnonzero(want_los) if want_los is not None else np.arange(E)
    if len(rows):
        # line of sight: the object stays in view while its slope from the eye is not below the
        # steepest slope from the eye to the road surface before it
        Zr = Z[rows]
        valid = np.arange(W)[None, :] < first_gap[rows, None]
        eye = (z0[rows] + rules.eye_height_m)[:, None]
        with np.errstate(invalid="ignore"):
            s_road = np.where(valid, (Zr - eye) / d[None, :], -np.inf)
        run = np.maximum.accumulate(s_road, axis=1)
        with np.errstate(invalid="ignore"):
            f = s_road[:, 1:] + rules.object_height_m / d[None, 1:] - run[:, :-1]  # >= 0 while in view
        hidden = (f < 0) & valid[:, 1:]
        has = hidden.any(axis=1)
        r = np.flatnonzero(has)
        k = hidden.argmax(axis=1)[has] + 1  # first hidden sample (the first is always in view)
        f1 = f[r, k - 1]
        f0 = np.where(k >= 2, f[r, np.maximum(k - 2, 0)], np.inf)
        with np.errstate(invalid="ignore", divide="ignore"):
            frac = np.where(np.isfinite(f0), f0 / (f0 - f1), 1.0)
        los[rows[r]] = d[k - 1] + np.nan_to_num(np.clip(frac, 0.0, 1.0), nan=1.0) * h
        masked = np.where(np.arange(W)[None, :] < k[:, None], s_road[r], -np.inf)
        los_k[rows[r]] = masked.argmax(axis=1)  # the blocking point: steepest road point before

    rows = np.flatnonzero(want_beam) if want_beam is not None else np.arange(E)
    if len(rows):
        # headlight: clearance of the beam's upper edge above the road
        tb = np.tan(np.radians(rules.beam_angle_deg))
        Zr = Z[rows]
        valid = np.arange(W)[None, :] < first_gap[rows, None]
        clear = (z0[rows] + rules.headlight_height_m)[:, None] + d[None, :] * (g0[rows] + tb)[:, None] - Zr
        hit = (clear <= 0) & valid
        hasb = hit.any(axis=1)
        rb = np.flatnonzero(hasb)
        kb = hit.argmax(axis=1)[hasb]
        c1 = clear[rb, kb]
        cprev = np.where(kb > 0, clear[rb, np.maximum(kb - 1, 0)], rules.headlight_height_m)
        dprev = np.where(kb > 0, d[np.maximum(kb - 1, 0)], 0.0)
        beam[rows[rb]] = dprev + np.clip(cprev / (cprev - c1), 0.0, 1.0) * h
        beam_k[rows[rb]] = kb
    return los, beam, los_k, beam_k, avail


def _curves_ahead(ch: np.ndarray, curves, kind: str, lookahead: float, sign: int) -> np.ndarray | None:
    """Stations with a curve of ``kind`` within the look-ahead in the direction of travel (the
    only ones whose line of sight, for crests, or headlight reach, for sags, a curve can limit);
    ``None`` (all stations) when no curve table is given."""
    if curves is None:
        return None
    c = curves[curves["kind"] == kind]
    out = np.zeros(len(ch), dtype=bool)
    for lo, hi in zip(c["pvc_m"].to_numpy(float), c["pvt_m"].to_numpy(float)):
        if sign > 0:  # the curve overlaps (s - 1, s + lookahead]
            out |= (ch < hi + 1.0) & (ch + lookahead > lo - 1.0)
        else:
            out |= (ch > lo - 1.0) & (ch - lookahead < hi + 1.0)
    return out


def _govern(los, beam, los_k, beam_k, avail, lookahead):
    """Governing distance, limit code and offset index of the limiting point. A limit found
    beyond the look-ahead (the last sample may lie past it) does not count."""
    los = np.where(los > lookahead, np.inf, los)
    beam = np.where(beam > lookahead, np.inf, beam)
    lim = np.where(los <= beam, LOS, BEAM)
    sd = np.minimum(los, beam)
    free = ~np.isfinite(sd)
    lim = np.where(free, np.where(avail < lookahead - 1e-9, END, LOOKAHEAD), lim)
    sd = np.where(free, np.minimum(avail, lookahead), sd)
    at_k = np.where(lim == LOS, los_k, np.where(lim == BEAM, beam_k, -1))
    return sd, lim, at_k


def sight_from(eyes_m: np.ndarray, profile, grade, rules: SightRules, direction: int,
               fine_step_m: float = 1.0) -> dict[str, np.ndarray]:
    """Sight distance from eyes at arbitrary chainages ``eyes_m`` in one direction (+1 with
    the chainage, -1 against it), the road ahead sampled every ``fine_step_m`` metres."""
    eyes = np.asarray(eyes_m, dtype=float)
    W = max(int(np.ceil(rules.lookahead_m / fine_step_m)), 1)
    d = np.arange(1, W + 1) * fine_step_m
    xs = eyes[:, None] + direction * d[None, :]
    Z = np.asarray(profile(xs.ravel()), dtype=float).reshape(xs.shape)
    z0 = np.asarray(profile(eyes), dtype=float)
    g0 = direction * np.asarray(grade(eyes), dtype=float)
    los, beam, los_k, beam_k, avail = _ahead(Z, z0, g0, fine_step_m, rules)
    sd, lim, at_k = _govern(los, beam, los_k, beam_k, avail, rules.lookahead_m)
    at = np.where(at_k >= 0, eyes + direction * (at_k + 1) * fine_step_m, np.nan)
    bad = np.isnan(z0)
    return {"sight_m": np.where(bad, np.nan, sd), "limit": np.where(bad, END, lim).astype(np.int8),
            "limit_at_m": at}


def sight_both_ways(chainage_m: np.ndarray, profile, rules: SightRules, fine_step_m: float = 1.0,
                    curves=None, grade=None, chunk: int = 2048, headlight: bool = True) -> dict[str, np.ndarray]:
    """Available sight distance at every station, both directions.

    ``profile(x)`` gives the road elevation (m) at chainages ``x`` (NaN where there is
    none) and ``grade(x)`` its grade (fraction; numerical derivative if not given, which is
    slightly off right at a PVC or PVT); ``curves`` (optional) is a table with
    ``curve_no, kind, pvc_m, pvt_m`` used to attribute each station's limit to a curve. Given
    the curves of the profile, the line of sight is checked only where a crest lies within
    the look-ahead and the headlight only where a sag does: on a fitted alignment nothing else
    can limit them; ``headlight=False`` checks the line of sight only. Stations must be evenly
    spaced.

    Returns arrays per station: ``sight_fwd_m, sight_back_m`` (the governing distance),
    ``los_fwd_m, los_back_m, beam_fwd_m, beam_back_m`` (inf where not limiting),
    ``limit_fwd, limit_back`` (codes, see ``LIMIT_NAMES``), ``curve_fwd, curve_back``
    (curve number or 0) and ``limit_at_fwd_m, limit_at_back_m`` (chainage of the
    blocking or hit point, NaN if none).
    """
    ch = np.asarray(chainage_m, dtype=float)
    if len(ch) < 2:
        raise ValueError("sight distance needs at least two stations")
    step = ch[1] - ch[0]
    if not np.allclose(np.diff(ch), step):
        raise ValueError("stations must be evenly spaced")
    m = max(int(round(step / fine_step_m)), 1)
    h = step / m
    fine = np.arange((len(ch) - 1) * m + 1) * h + ch[0]
    z = np.asarray(profile(fine), dtype=float)
    eye = np.arange(len(ch)) * m
    g = np.asarray(grade(ch), dtype=float) if grade is not None else np.gradient(z, h)[eye]
    W = max(int(np.ceil(rules.lookahead_m / h)), 1)
    j = np.arange(1, W + 1)
    out: dict[str, np.ndarray] = {}
    for name, sign in (("fwd", 1), ("back", -1)):
        zz = z if sign > 0 else z[::-1]
        e = eye if sign > 0 else (len(fine) - 1 - eye)
        los, beam, avail = np.empty(len(ch)), np.empty(len(ch)), np.empty(len(ch))
        los_k = np.empty(len(ch), dtype=np.int64)
        beam_k = np.empty(len(ch), dtype=np.int64)
        want_los = _curves_ahead(ch, curves, "crest", rules.lookahead_m, sign)
        want_beam = (_curves_ahead(ch, curves, "sag", rules.lookahead_m, sign) if headlight
                     else np.zeros(len(ch), dtype=bool))
        for c0 in range(0, len(ch), chunk):
            ei = e[c0:c0 + chunk]
            idx = ei[:, None] + j[None, :]
            Z = np.where(idx < len(zz), zz[np.minimum(idx, len(zz) - 1)], np.nan)
            sl = slice(c0, c0 + chunk)
            los[sl], beam[sl], los_k[sl], beam_k[sl], avail[sl] = _ahead(
                Z, zz[ei], sign * g[sl], h, rules, None if want_los is None else want_los[sl],
                None if want_beam is None else want_beam[sl])
        sd, lim, at_k = _govern(los, beam, los_k, beam_k, avail, rules.lookahead_m)
        at_ch = np.where(at_k >= 0, ch + sign * (at_k + 1) * h, np.nan)
        nan_eye = np.isnan(z[eye])
        out[f"sight_{name}_m"] = np.where(nan_eye, np.nan, sd)
        out[f"los_{name}_m"] = np.where(nan_eye, np.nan, los)
        out[f"beam_{name}_m"] = np.where(nan_eye, np.nan, beam)
        out[f"limit_{name}"] = np.where(nan_eye, END, lim).astype(np.int8)
        out[f"limit_at_{name}_m"] = at_ch
        out[f"curve_{name}"] = attribute(ch, at_ch, lim, curves, forward=(sign > 0), tol_m=max(1.0, 2 * h))
    return out


def attribute(eye_ch: np.ndarray, at_ch: np.ndarray, limit: np.ndarray, curves, forward: bool,
              tol_m: float = 1.0) -> np.ndarray:
    """Curve number limiting each station's sight (0 = none).

    Line of sight: the crest whose PVC-PVT span holds the blocking point (within
    ``tol_m``, at least the sight check's step: an angle point's curve is shorter than the
    step and its blocking point falls a step to either side). Headlight: the sag nearest behind the hit point, in the direction of
    travel, that is not wholly behind the eye (the beam of an S > L sag meets
    the road on the tangent beyond the PVT).
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


# ------------------------------------------------------------- closed forms
def crest_sight_formula(a_pct, length_m, eye_height_m=1.08, object_height_m=0.60):
    """Sight distance (m) over a crest curve of length L (m) and A (%), AASHTO Green Book
    ch. 3: S < L: L = A S^2 / (200 (sqrt h1 + sqrt h2)^2); S > L: L = 2 S - 200 (sqrt h1 +
    sqrt h2)^2 / A. The case is chosen by comparing the result with L."""
    a = np.asarray(a_pct, dtype=float)
    L = np.asarray(length_m, dtype=float)
    C = 200.0 * (np.sqrt(eye_height_m) + np.sqrt(object_height_m)) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        s_short = np.sqrt(C * L / a)
        s_long = (L + C / a) / 2.0
    return np.where(s_short <= L, s_short, s_long)


def sag_sight_formula(a_pct, length_m, headlight_height_m=0.60, beam_angle_deg=1.0):
    """Headlight sight distance (m) on a sag curve, AASHTO Green Book ch. 3:
    S < L: L = A S^2 / (200 (h + S tan b)); S > L: L = 2 S - 200 (h + S tan b) / A.
    Infinite where the beam never meets the road (S > L with 2 A <= 200 tan b)."""
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
    """Crest curve length (m) giving sight distance S, AASHTO Green Book ch. 3 (both cases,
    chosen by comparing the S < L result with S; never negative)."""
    a = np.asarray(a_pct, dtype=float)
    S = np.asarray(sight_m, dtype=float)
    C = 200.0 * (np.sqrt(eye_height_m) + np.sqrt(object_height_m)) ** 2
    L_short = a * S**2 / C
    with np.errstate(divide="ignore"):
        L_long = np.maximum(2 * S - C / a, 0.0)
    return np.where(L_short >= S, L_short, L_long)


def sag_length_formula(a_pct, sight_m, headlight_height_m=0.60, beam_angle_deg=1.0):
    """Sag curve length (m) giving headlight sight distance S, AASHTO Green Book ch. 3
    (both cases, chosen by comparing the S < L result with S; never negative)."""
    a = np.asarray(a_pct, dtype=float)
    S = np.asarray(sight_m, dtype=float)
    q = 200.0 * (headlight_height_m + S * np.tan(np.radians(beam_angle_deg)))
    L_short = a * S**2 / q
    with np.errstate(divide="ignore"):
        L_long = np.maximum(2 * S - q / a, 0.0)
    return np.where(L_short >= S, L_short, L_long)
