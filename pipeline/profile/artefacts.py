"""Find ground-data artefacts in a profile before the alignment is fitted.

A bare-earth DEM removes bridge decks and shows the valley floor beneath, so a
profile dips sharply at a bridge; hydrologically conditioned DEMs notch
embankments at culverts; where a centreline brushes a wall, cliff or building a
single sample can be metres off.
None of these is road geometry, and each would otherwise become a false curve or
a false deficiency. Detected artefacts are masked (the fit bridges over them,
as the road does) and reported with their chainage range.

Rules (thresholds in ``[artefacts]``, defaults in brackets):

- **spike / pit**: a sample further than ``spike_m`` [0.5 m] (and 6 noise
  standard deviations) from the median of the three symmetric neighbour-pair
  means around it, i.e. from what its neighbours imply on a straight grade;
  found twice over so that a two-sample spike goes too.
- **dip / hump** (bridge or culvert, wall or embankment): a run of stations,
  no wider than ``max_width_m`` [150 m], where the grade between stations is
  steeper than ``max_grade_pct`` [20 %] or the curvature is sharper than a
  vertical curve of K = ``min_k`` [1 m per %] (both beyond what a road has,
  AASHTO's smallest tabulated K being 1 at 20 km/h), with its depth or height
  measured from the chord between the undisturbed stations either side; the
  masked span runs between those stations.
- **known structure**: chainage ranges given by a structures layer are masked
  whatever the profile shows there.

Steep or sharp stretches wider than ``max_width_m`` are not masked: they are
either real terrain or a wrong elevation unit, and the road-level check in
:func:`implausible_grades` decides.
"""

from __future__ import annotations

import numpy as np

from ..core.spec import section_defaults
from ..core.estimators import second_difference_sd
from .stations import run_lengths

DEFAULTS = section_defaults("artefacts")


def _neighbour_prediction(z: np.ndarray, k_max: int = 3) -> np.ndarray:
    """What a sample's neighbours imply for it on a straight grade.

    The median over k = 1..k_max of the pair means ``(z[i-k] + z[i+k]) / 2``: exact on a
    straight grade, blind to ``z[i]`` itself, and robust to one disturbed pair (a sample median,
    our own rule). NaN where fewer than two pairs exist.
    """
    n = len(z)
    preds = np.full((k_max, n), np.nan)
    for k in range(1, k_max + 1):
        if n > 2 * k:
            preds[k - 1, k:n - k] = 0.5 * (z[:n - 2 * k] + z[2 * k:])
    with np.errstate(all="ignore"):
        enough = np.sum(np.isfinite(preds), axis=0) >= 2
        out = np.full(n, np.nan)
        if enough.any():
            out[enough] = np.nanmedian(preds[:, enough], axis=0)
    return out


def find_spikes(z: np.ndarray, sigma: float, spike_m: float) -> np.ndarray:
    """Stations whose elevation stands out from their neighbours (spikes up, pits down).

    Parameters
    ----------
    z : ndarray
        Ground elevation per station (m); NaN where missing or already masked.
    sigma : float
        Standard deviation of the ground data's noise (m).
    spike_m : float
        Smallest departure counted as a spike or pit (m).

    Returns
    -------
    ndarray of bool
        True at spike and pit stations.

    Notes
    -----
    A station is hit when ``|z - prediction| > max(spike_m, 6 sigma)``, the prediction being
    :func:`_neighbour_prediction`; found twice over (hits removed between) so that a
    two-sample spike goes too.
    """
    z = np.asarray(z, dtype=float).copy()
    mask = np.zeros(len(z), dtype=bool)
    thr = max(spike_m, 6.0 * sigma)
    for _ in range(2):
        pred = _neighbour_prediction(z)
        r = z - pred
        hit = np.isfinite(r) & (np.abs(r) > thr)
        if not hit.any():
            break
        mask |= hit
        z[hit] = np.nan
    return mask


def find_dips(chainage: np.ndarray, z: np.ndarray, step: float, sigma: float, opts: dict) -> list[tuple[int, int]]:
    """Index ranges of short stretches with grades or curvature no road has.

    Parameters
    ----------
    chainage : ndarray
        Chainages of the valid samples only (m).
    z : ndarray
        Their elevations (m).
    step : float
        Station step (m).
    sigma : float
        Standard deviation of the ground data's noise (m).
    opts : dict
        ``max_grade_pct`` (%), ``min_k`` (m per %) and ``max_width_m`` (m).

    Returns
    -------
    list of (int, int)
        ``(first, last)`` indices (inclusive) of bridge or culvert dips and humps, each no wider
        than ``max_width_m``.

    Notes
    -----
    A sample is suspect where the grade to a neighbour exceeds ``max_grade_pct``, or where the
    second difference ``z[i-1] - 2 z[i] + z[i+1]`` (evenly spaced neighbours only, never
    across a gap) exceeds ``step^2 / (100 min_k)`` -- that of a vertical curve of K = min_k,
    whose curvature is 1 / (100 K) per metre -- plus five times its noise sd ``sqrt(6) sigma``
    (:func:`~pipeline.core.estimators.second_difference_sd`). Suspect samples closer than
    ``max_width_m / 2`` are grouped.
    """
    n = len(z)
    if n < 3:
        return []
    dx = np.diff(chainage)
    g = np.diff(z) / dx  # grade between samples i and i+1
    steep_iv = np.abs(g) > opts["max_grade_pct"] / 100.0
    even = np.zeros(n, dtype=bool)
    even[1:-1] = (np.abs(dx[1:] - step) < 1e-6 * step) & (np.abs(dx[:-1] - step) < 1e-6 * step)
    d2 = np.zeros(n)
    d2[1:-1] = z[2:] - 2 * z[1:-1] + z[:-2]
    curv_limit = step**2 / (100.0 * opts["min_k"]) + second_difference_sd(sigma, times=5.0)
    bad = even & (np.abs(d2) > curv_limit)
    bad[:-1] |= steep_iv
    bad[1:] |= steep_iv
    idx = np.flatnonzero(bad)
    if not len(idx):
        return []
    groups, start, prev = [], idx[0], idx[0]
    for i in idx[1:]:
        if chainage[i] - chainage[prev] > opts["max_width_m"] / 2:
            groups.append((start, prev))
            start = i
        prev = i
    groups.append((start, prev))
    return [(a, b) for a, b in groups if chainage[b] - chainage[a] <= opts["max_width_m"]]


def _mask_known(ch: np.ndarray, known, mask: np.ndarray, notes: list) -> None:
    """Mask the stations within each known structure's chainage range, with a note each."""
    for lo, hi, label in known or []:
        on = (ch >= lo) & (ch <= hi)
        if on.any():
            mask |= on
            notes.append(("known structure masked", float(ch[on][0]), float(ch[on][-1]),
                          f"{label}: ground within its span not used"))


def _dip_note(ch: np.ndarray, dev: np.ndarray, hit: np.ndarray, first: int, last: int, step_m: float) -> tuple:
    """The note for a masked dip, hump, pit or spike: its kind, range and size."""
    extreme = dev[hit][np.nanargmax(np.abs(dev[hit]))]
    down = extreme < 0
    if last - first + 1 <= 2:
        kind = "pit in ground data" if down else "spike in ground data"
    else:
        kind = ("dip in ground data (bridge or culvert?)" if down
                else "hump in ground data (wall, embankment or vegetation?)")
    return (kind, float(ch[first]), float(ch[last]),
            f"{abs(extreme):.1f} m {'below' if down else 'above'} the grade line either side, "
            f"over {ch[last] - ch[first] + step_m:.0f} m; masked")


def _mask_dips(ch, z, mask, notes, step_m: float, sigma: float, thr: float, opts: dict) -> np.ndarray:
    """Mask dips and humps: the stations departing by more than ``thr`` (or half the largest
    departure) from the chord between the undisturbed neighbours of each :func:`find_dips`
    range. Returns the profile with every masked station NaN."""
    work = np.where(mask, np.nan, z)
    valid = np.flatnonzero(np.isfinite(work))
    if len(valid) < 3:
        return work
    vch, vz = ch[valid], work[valid]
    for a, b in find_dips(vch, vz, step_m, sigma, opts):
        lo, hi = max(a - 1, 0), min(b + 1, len(valid) - 1)
        x0, x1, z0, z1 = vch[lo], vch[hi], vz[lo], vz[hi]
        span = (ch > x0) & (ch < x1) & np.isfinite(work)
        if x1 <= x0 or not span.any():
            continue
        dev = np.full(len(ch), np.nan)
        dev[span] = work[span] - (z0 + (z1 - z0) * (ch[span] - x0) / (x1 - x0))
        off = span & (np.abs(dev) > min(thr, 0.5 * np.nanmax(np.abs(dev[span]))))
        if not off.any():
            continue
        first, last = np.flatnonzero(off)[[0, -1]]
        hit = np.zeros(len(ch), dtype=bool)
        hit[first:last + 1] = np.isfinite(work[first:last + 1])
        mask |= hit
        notes.append(_dip_note(ch, dev, hit, first, last, step_m))
        work = np.where(mask, np.nan, z)
    return work


def _mask_spikes(ch, work, mask, notes, sigma: float, spike_m: float) -> None:
    """Mask the spikes and pits too small for the curvature test (:func:`find_spikes`), with a
    note for each run of them."""
    spikes = find_spikes(work, sigma, spike_m)
    pred = _neighbour_prediction(work)
    for a, b in run_lengths(spikes):
        r = (work - pred)[a:b]
        extreme = r[np.nanargmax(np.abs(r))] if np.isfinite(r).any() else np.nan
        up = not (np.isfinite(extreme) and extreme < 0)
        size = f"{abs(extreme):.2f} m " if np.isfinite(extreme) else ""
        notes.append(("spike in ground data" if up else "pit in ground data", float(ch[a]), float(ch[b - 1]),
                      f"{b - a} sample(s) {size}{'above' if up else 'below'} their neighbours; masked"))
    mask |= spikes


def detect(chainage_m: np.ndarray, z_m: np.ndarray, step_m: float, sigma: float, opts: dict | None = None,
           known: list[tuple[float, float, str]] | None = None) -> tuple[np.ndarray, list[tuple]]:
    """Mask of the artefact stations of a ground profile, and a note on each artefact.

    Parameters
    ----------
    chainage_m : ndarray
        Station chainages (m).
    z_m : ndarray
        Ground elevation at the stations (m); NaN where missing.
    step_m : float
        Station step (m).
    sigma : float
        Standard deviation of the ground data's noise (m).
    opts : dict, optional
        ``[artefacts]`` settings overriding the defaults: ``spike_m`` (m), ``max_grade_pct``
        (%), ``min_k`` (m per %), ``max_width_m`` (m).
    known : list of (float, float, str), optional
        Chainage ranges (m) of known structures, masked whatever the profile shows, each with
        a label.

    Returns
    -------
    mask : ndarray of bool
        True at masked stations.
    notes : list of tuple
        ``(kind, from_m, to_m, detail)`` per artefact, in chainage order.

    Notes
    -----
    Known structures first, then dips and humps (:func:`find_dips`, measured from the chord
    between undisturbed stations), then spikes and pits (:func:`find_spikes`); the threshold
    is ``max(spike_m, 6 sigma)``. The rules are described in the module notes.
    """
    opts = DEFAULTS | (opts or {})
    ch = np.asarray(chainage_m, dtype=float)
    z = np.asarray(z_m, dtype=float)
    mask = np.zeros(len(z), dtype=bool)
    notes: list[tuple] = []
    _mask_known(ch, known, mask, notes)
    thr = max(opts["spike_m"], 6.0 * sigma)
    work = _mask_dips(ch, z, mask, notes, step_m, sigma, thr, opts)
    _mask_spikes(ch, work, mask, notes, sigma, opts["spike_m"])
    notes.sort(key=lambda n: n[1])
    return mask, notes


def implausible_grades(chainage_m: np.ndarray, z_m: np.ndarray, max_grade_pct: float) -> str | None:
    """A reason to skip the road when its grades are not those of a road.

    Parameters
    ----------
    chainage_m : ndarray
        Station chainages (m).
    z_m : ndarray
        Ground elevation per station (m); NaN where missing.
    max_grade_pct : float
        Steepest grade a road plausibly has (%).

    Returns
    -------
    str or None
        The reason, when more than 5 % of the length has grades steeper than
        ``max_grade_pct`` (a wrong elevation unit or ground model); else ``None``.
    """
    ch = np.asarray(chainage_m, dtype=float)
    z = np.asarray(z_m, dtype=float)
    ok = np.isfinite(z)
    if ok.sum() < 3:
        return None
    g = np.abs(np.diff(z[ok]) / np.diff(ch[ok])) * 100.0
    w = np.diff(ch[ok])
    steep = w[g > max_grade_pct].sum()
    if steep > 0.05 * w.sum():
        return (f"grades steeper than {max_grade_pct:g} % over {steep:.0f} m "
                f"({100 * steep / w.sum():.0f} % of the road, up to {g.max():.0f} %): not a road profile; "
                f"check the elevation unit (--elevation-unit) and the ground model")
    return None
