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

from .attribution import BEAM, END, LOOKAHEAD, LOS, attribute


@dataclass(frozen=True)
class SightRules:
    """Heights, beam angle and look-ahead for sight distance.

    Parameters
    ----------
    eye_height_m : float, default 1.08
        Driver's eye height above the road (m), positive.
    object_height_m : float, default 0.60
        Object height (m), not negative.
    headlight_height_m : float, default 0.60
        Headlight height (m), positive.
    beam_angle_deg : float, default 1.0
        Upward divergence of the headlight beam (degrees), from 0 up to 10.
    lookahead_m : float, default 400.0
        Farthest distance checked (m), positive.

    References
    ----------
    Defaults: AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th
    ed., 2018, ch. 3.
    """

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


def _line_of_sight(Z: np.ndarray, d: np.ndarray, first_gap: np.ndarray, z0: np.ndarray, h: float,
                   rules: SightRules, rows: np.ndarray, los: np.ndarray, los_k: np.ndarray) -> None:
    """Line-of-sight distance and blocking point for the eyes ``rows``, written into ``los`` and
    ``los_k`` (see :func:`_ahead`).

    The object stays in view while its slope from the eye is not below the steepest slope from
    the eye to the road surface before it; the first hidden object position is interpolated
    linearly between look-ahead samples.
    """
    W = Z.shape[1]
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


def _headlight(Z: np.ndarray, d: np.ndarray, first_gap: np.ndarray, z0: np.ndarray, g0: np.ndarray,
               h: float, rules: SightRules, rows: np.ndarray, beam: np.ndarray, beam_k: np.ndarray) -> None:
    """Headlight reach and hit point for the eyes ``rows``, written into ``beam`` and ``beam_k``
    (see :func:`_ahead`): where the clearance of the beam's upper edge above the road first
    falls to zero, interpolated linearly between look-ahead samples."""
    W = Z.shape[1]
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
        _line_of_sight(Z, d, first_gap, z0, h, rules, rows, los, los_k)
    rows = np.flatnonzero(want_beam) if want_beam is not None else np.arange(E)
    if len(rows):
        _headlight(Z, d, first_gap, z0, g0, h, rules, rows, beam, beam_k)
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
    """Sight distance from eyes at arbitrary chainages, in one direction.

    Parameters
    ----------
    eyes_m : array_like
        Chainages of the eyes (m).
    profile : callable
        ``profile(x)``: road elevation (m) at chainages ``x`` (m), NaN where none.
    grade : callable
        ``grade(x)``: road grade (fraction) at chainages ``x``.
    rules : SightRules
        Heights (m), beam angle (degrees) and look-ahead (m).
    direction : int
        +1 with the chainage, -1 against it.
    fine_step_m : float, default 1.0
        Spacing of the road samples ahead (m).

    Returns
    -------
    dict of ndarray
        ``sight_m`` (m, NaN where the eye has no profile), ``limit`` (codes, see
        ``LIMIT_NAMES``) and ``limit_at_m`` (chainage of the blocking or hit point, m).

    Notes
    -----
    As :func:`sight_both_ways`, for one direction and any eye positions.
    """
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


def _fine_profile(ch: np.ndarray, profile, grade, fine_step_m: float):
    """The profile sampled every ``h`` (a whole fraction of the station step, about
    ``fine_step_m``): returns ``(z, h, eye, g)`` with ``z`` the fine samples (m), ``eye`` the
    fine index of each station and ``g`` each station's grade (fraction)."""
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
    return z, h, eye, g


def _one_direction(ch, z, h, eye, g, rules: SightRules, curves, sign: int, chunk: int, headlight: bool):
    """:func:`_ahead` over every station in one direction (``sign`` +1 with the chainage, -1
    against it), in chunks of ``chunk`` stations; returns ``(los, beam, los_k, beam_k, avail)``."""
    n = len(ch)
    j = np.arange(1, max(int(np.ceil(rules.lookahead_m / h)), 1) + 1)
    zz = z if sign > 0 else z[::-1]
    e = eye if sign > 0 else (len(z) - 1 - eye)
    los, beam, avail = np.empty(n), np.empty(n), np.empty(n)
    los_k = np.empty(n, dtype=np.int64)
    beam_k = np.empty(n, dtype=np.int64)
    want_los = _curves_ahead(ch, curves, "crest", rules.lookahead_m, sign)
    want_beam = (_curves_ahead(ch, curves, "sag", rules.lookahead_m, sign) if headlight
                 else np.zeros(n, dtype=bool))
    for c0 in range(0, n, chunk):
        ei = e[c0:c0 + chunk]
        idx = ei[:, None] + j[None, :]
        Z = np.where(idx < len(zz), zz[np.minimum(idx, len(zz) - 1)], np.nan)
        sl = slice(c0, c0 + chunk)
        los[sl], beam[sl], los_k[sl], beam_k[sl], avail[sl] = _ahead(
            Z, zz[ei], sign * g[sl], h, rules, None if want_los is None else want_los[sl],
            None if want_beam is None else want_beam[sl])
    return los, beam, los_k, beam_k, avail


def sight_both_ways(chainage_m: np.ndarray, profile, rules: SightRules, fine_step_m: float = 1.0,
                    curves=None, grade=None, chunk: int = 2048, headlight: bool = True) -> dict[str, np.ndarray]:
    """Available sight distance at every station, both directions of travel.

    Parameters
    ----------
    chainage_m : ndarray
        Evenly spaced station chainages (m).
    profile : callable
        ``profile(x)`` gives the road elevation (m) at chainages ``x`` (m); NaN where there is
        none.
    rules : SightRules
        Eye, object and headlight heights (m), beam angle (degrees) and look-ahead (m).
    fine_step_m : float, default 1.0
        Spacing of the road samples the sight lines are checked against (m); rounded so that
        a whole number of them fits in a station step.
    curves : DataFrame, optional
        ``curve_no, kind, pvc_m, pvt_m`` (m) of the profile's vertical curves. Given, the line
        of sight is checked only where a crest lies within the look-ahead and the headlight
        only where a sag does (on a fitted alignment nothing else can limit them), and each
        station's limit is attributed to a curve (:func:`attribute`).
    grade : callable, optional
        ``grade(x)``, the road's grade (fraction) at chainages ``x`` (m); if not given, the
        numerical derivative of the fine profile, slightly off right at a PVC or PVT.
    chunk : int, default 2048
        Stations computed at once (bounds the memory of the stations x look-ahead arrays).
    headlight : bool, default True
        ``False`` checks the line of sight only.

    Returns
    -------
    dict of ndarray
        Per station, for ``dir`` in ``fwd`` and ``back``: ``sight_{dir}_m`` (the governing
        distance, m), ``los_{dir}_m`` and ``beam_{dir}_m`` (m, inf where not limiting),
        ``limit_{dir}`` (codes, see ``LIMIT_NAMES``), ``curve_{dir}`` (curve number or 0) and
        ``limit_at_{dir}_m`` (chainage of the blocking or hit point, m; NaN if none). NaN
        distances where the profile is missing at the station.

    Notes
    -----
    Line of sight: the object (height h2) at distance d is in view while
    ``(z(d) + h2 - z0 - h1) / d >= max over d' < d of (z(d') - z0 - h1) / d'`` (eye height h1).
    Headlight: the reach is where the road meets the beam's upper edge, rising from
    ``headlight_height_m`` at the vehicle's grade plus the beam angle. The governing distance is
    the smaller, else the look-ahead or the end of the profile.

    References
    ----------
    AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
    ch. 3.
    """
    ch = np.asarray(chainage_m, dtype=float)
    z, h, eye, g = _fine_profile(ch, profile, grade, fine_step_m)
    out: dict[str, np.ndarray] = {}
    for name, sign in (("fwd", 1), ("back", -1)):
        found = _one_direction(ch, z, h, eye, g, rules, curves, sign, chunk, headlight)
        out |= _direction_columns(name, sign, ch, h, np.isnan(z[eye]), found, rules, curves)
    return out


def _direction_columns(name: str, sign: int, ch, h: float, nan_eye, found, rules: SightRules, curves) -> dict:
    """The result columns of one direction (see :func:`sight_both_ways`) from what
    :func:`_one_direction` ``found``."""
    los, beam, los_k, beam_k, avail = found
    sd, lim, at_k = _govern(los, beam, los_k, beam_k, avail, rules.lookahead_m)
    at_ch = np.where(at_k >= 0, ch + sign * (at_k + 1) * h, np.nan)
    return {f"sight_{name}_m": np.where(nan_eye, np.nan, sd),
            f"los_{name}_m": np.where(nan_eye, np.nan, los),
            f"beam_{name}_m": np.where(nan_eye, np.nan, beam),
            f"limit_{name}": np.where(nan_eye, END, lim).astype(np.int8),
            f"limit_at_{name}_m": at_ch,
            f"curve_{name}": attribute(ch, at_ch, lim, curves, forward=(sign > 0), tol_m=max(1.0, 2 * h))}
