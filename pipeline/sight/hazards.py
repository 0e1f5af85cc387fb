"""What a crest hides: the stretch beyond it out of a driver's sight, and the hazards in it.

Crashes at crest curves with short sight distance rise mainly where something is
hidden beyond the crest -- a horizontal curve, an intersection or a driveway
(Harwood & Bauer 2015, *TRR* 2486: 452 crest curves in Washington State). For each
crest and direction of travel the **hidden zone** is the stretch of road surface
beyond the crest that a driver cannot see from the required stopping sight
distance back: a point q is hidden when the line of sight from the eye at
q - SSD (direction of travel) to the road surface at q passes below the road
somewhere in between. A **hazard** is hidden when a horizontal curve begins (in
the direction of travel) or a junction or access lies within the zone.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import shapely

from ..profile.stations import run_lengths


def hidden_zone(profile, crest_pvi_m: float, crest_pvt_m: float, sight_m: float, direction: int,
                eye_height_m: float, object_height_m: float = 0.0, step_m: float = 1.0,
                road_length_m: float | None = None) -> tuple[float, float] | None:
    """Chainage range of road surface hidden beyond a crest from drivers ``sight_m`` back.

    Parameters
    ----------
    profile : callable
        ``profile(x)``: road elevation (m) at chainages ``x`` (m).
    crest_pvi_m, crest_pvt_m : float
        The crest's PVI and its end in the direction of travel (m); the curve is taken as
        symmetric about the PVI.
    sight_m : float
        Distance S back from which the driver looks (m), the required SSD.
    direction : int
        +1 travelling with the chainage, -1 against it.
    eye_height_m, object_height_m : float
        Eye height and object height (m); default object 0 (the road surface).
    step_m : float, default 1.0
        Spacing of the scanned points and of the checks along each sight line (m).
    road_length_m : float, optional
        Road length (m); points beyond it are not scanned.

    Returns
    -------
    (float, float) or None
        ``(from_m, to_m)`` with from <= to (m); ``None`` when nothing is hidden.

    Notes
    -----
    A point q is hidden when the line from the eye at q - S to the object at q passes below
    the road between. Points are scanned from the start of the curve (a point on the straight
    approach grade cannot be hidden from a driver on the same grade) to S plus a curve length
    beyond its end, so the zone begins where the surface is first hidden -- where the sight
    line grazes the crest, before the PVI when S is long -- and ends where it reappears. Of
    several hidden runs, the one nearest the PVI is this crest's.

    References
    ----------
    AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
    ch. 3 (eye height, object on the road). Harwood & Bauer 2015, *TRR* 2486 (what a crest
    hides).
    """
    S = float(sight_m)
    if not S > 0:
        return None
    half = abs(crest_pvt_m - crest_pvi_m)
    q = crest_pvi_m + direction * np.arange(-half, S + 2 * half + step_m, step_m)
    p = q - direction * S
    keep = (p >= 0) & (q >= 0)
    if road_length_m is not None:
        keep &= (p <= road_length_m) & (q <= road_length_m)
    q, p = q[keep], p[keep]
    if not len(q):
        return None
    hidden = _hidden(profile, q, p, S, direction, step_m, eye_height_m, object_height_m)
    if not hidden.any():
        return None
    return _nearest_run(q, hidden, crest_pvi_m)


def _hidden(profile, q, p, S: float, direction: int, step_m: float, eye_height_m: float,
            object_height_m: float) -> np.ndarray:
    """Whether the road at each ``q`` is hidden from the eye at ``p`` (``S`` back): the road
    rises above the straight sight line somewhere between (checked every ``step_m`` or so)."""
    W = max(int(np.ceil(S / step_m)), 2)
    frac = np.arange(1, W) / W
    between = p[:, None] + direction * S * frac[None, :]
    zq = np.asarray(profile(q), dtype=float)
    zp = np.asarray(profile(p), dtype=float) + eye_height_m
    zb = np.asarray(profile(between.ravel()), dtype=float).reshape(between.shape)
    sight_line = zp[:, None] + (zq + object_height_m - zp)[:, None] * frac[None, :]
    with np.errstate(invalid="ignore"):
        hidden = np.any(zb > sight_line + 1e-9, axis=1)
    hidden &= np.isfinite(zq) & np.isfinite(zp)
    return hidden


def _nearest_run(q: np.ndarray, hidden: np.ndarray, crest_pvi_m: float) -> tuple[float, float]:
    """The chainage range (from <= to) of the hidden run nearest the PVI (0 if it holds it)."""
    runs = run_lengths(hidden)
    dist = [0.0 if min(q[a], q[b - 1]) <= crest_pvi_m <= max(q[a], q[b - 1])
            else min(abs(q[a] - crest_pvi_m), abs(q[b - 1] - crest_pvi_m)) for a, b in runs]
    a, b = runs[int(np.argmin(dist))]
    lo, hi = sorted((float(q[a]), float(q[b - 1])))
    return lo, hi


def network_junctions(lines: dict[str, object], snap_m: float) -> dict[str, list[tuple[float, str]]]:
    """Junctions found in the road network itself, where one road's end lies on another road.

    Parameters
    ----------
    lines : dict of str to LineString
        Road id -> centreline, all in one metric CRS (m).
    snap_m : float
        How close a road's end must come to another road (m).

    Returns
    -------
    dict of str to list of (float, str)
        Road id -> ``(chainage_m, label)`` of its junctions; both roads get one.
    """
    ids = list(lines)
    geoms = np.array([lines[i] for i in ids], dtype=object)
    tree = shapely.STRtree(geoms)
    out: dict[str, list[tuple[float, str]]] = {i: [] for i in ids}
    for k, rid in enumerate(ids):
        line = geoms[k]
        for end, at in ((shapely.get_point(line, 0), 0.0), (shapely.get_point(line, -1), float(line.length))):
            for j in tree.query(end, predicate="dwithin", distance=snap_m):
                if j == k:
                    continue
                other = ids[j]
                c = float(shapely.line_locate_point(geoms[j], end))
                out[other].append((c, f"junction with {rid}"))
                out[rid].append((at, f"junction with {other}"))
    return out


def hazards_in_zone(zone: tuple[float, float] | None, direction: int, hcurves: pd.DataFrame,
                    junctions: list[tuple[float, str]]) -> dict:
    """The hazards hidden in a zone beyond a crest.

    Parameters
    ----------
    zone : (float, float) or None
        Hidden chainage range (m), from :func:`hidden_zone`.
    direction : int
        +1 travelling with the chainage, -1 against it.
    hcurves : DataFrame
        Horizontal curves with ``start_m``, ``end_m``, ``radius_m`` (m).
    junctions : list of (float, str)
        ``(chainage_m, label)`` of junctions and accesses.

    Returns
    -------
    dict
        ``hidden_from_m, hidden_to_m`` (m), ``hidden_hazard`` ('none', 'horizontal curve',
        'junction' or 'both'), ``hazard_chainage_m`` (m, the first met) and ``hazard_detail``.
        A horizontal curve counts where it begins, in the direction of travel, in the zone.
    """
    out = {"hidden_from_m": np.nan, "hidden_to_m": np.nan, "hidden_hazard": "none",
           "hazard_chainage_m": np.nan, "hazard_detail": ""}
    if zone is None:
        return out
    lo, hi = zone
    out["hidden_from_m"], out["hidden_to_m"] = lo, hi
    found = []
    if len(hcurves):
        begins = hcurves["start_m"] if direction > 0 else hcurves["end_m"]
        for b, r in zip(begins, hcurves["radius_m"]):
            if lo <= b <= hi:
                found.append(("horizontal curve", float(b), f"horizontal curve of radius {r:.0f} m begins"))
    for c, label in junctions:
        if lo <= c <= hi:
            found.append(("junction", float(c), label))
    if not found:
        return out
    kinds = {f[0] for f in found}
    out["hidden_hazard"] = "both" if len(kinds) == 2 else kinds.pop()
    # the first hazard a driver meets
    first = min(found, key=lambda f: direction * f[1])
    out["hazard_chainage_m"] = first[1]
    out["hazard_detail"] = "; ".join(f"{f[2]} at {f[1]:.0f} m" for f in sorted(found, key=lambda f: direction * f[1]))
    return out
