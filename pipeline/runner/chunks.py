"""Chunks of roads, and the fixed layouts of the tables each chunk writes.

The network is cut into chunks of consecutive roads, balanced by their estimated cost
(:func:`road_costs`): at least two chunks per worker, so that every core has work to the end
and a small network uses every core too, and never more than ``run.chunk_km`` of road in a
chunk (memory grows with a chunk, not with the network). Every chunk writes the same tables
(:data:`TABLES`), each with the fixed schema of its ``work.*`` table in
:mod:`pipeline.core.tables` even when empty, so that every chunk file reads alike.
"""

from __future__ import annotations

import hashlib
import math

import numpy as np
import pandas as pd

from ..core.tables import empty_frame

TABLES = ("profiles", "curves", "keypoints", "hazards", "hcurves", "notes", "status", "clearances")

CHUNKS_PER_WORKER = 2
POINT_COST_M = 0.1  # road length one ground point costs as much as, in cost per station terms (see road_costs)


def road_costs(table: pd.DataFrame, step_m: float, points: dict | None = None) -> np.ndarray:
    """Estimated cost of each road's per-road stages, in stations.

    A road costs its stations (``length_m / step_m``: the profile, alignment and sight stages
    are all linear in them) plus a tenth of a station per ground point it brings (reading and
    sampling the points is cheaper than fitting a station). The weights were measured on the
    benchmark networks (common practice, no source); they only balance the chunks and never
    change a result.

    Parameters
    ----------
    table : pandas.DataFrame
        The roads table, with ``length_m`` (NaN lengths count as zero) and, when ``points`` is
        given, ``source_id``.
    step_m : float
        The station step (m).
    points : dict, optional
        Ground points per road id as read (``source_id``): ``(start, stop)`` spans of
        :attr:`pipeline.ingest.ground.PointGround.groups`.

    Returns
    -------
    numpy.ndarray
        One cost per road (stations), >= 0.
    """
    length = np.nan_to_num(table["length_m"].to_numpy(dtype=float), nan=0.0).clip(min=0.0)
    cost = length / float(step_m)
    if points:
        n = np.array([(lambda s: s[1] - s[0] if s else 0)(points.get(r)) for r in table["source_id"]], dtype=float)
        cost = cost + POINT_COST_M * n
    return cost


def chunk_rows(table: pd.DataFrame, chunk_km: float, workers: int = 1, cost: np.ndarray | None = None
               ) -> list[np.ndarray]:
    """Row positions of the roads in each chunk.

    Chunks hold consecutive roads (a road is never split). Their number is the larger of the
    network's length over ``chunk_km`` and two per worker (when there are several workers), at
    most one per road; the cuts fall where the running cost is nearest to equal shares, so the
    chunks cost about the same.

    Parameters
    ----------
    table : pandas.DataFrame
        The roads table, with ``length_m`` (NaN lengths count as zero).
    chunk_km : float
        Road length per chunk at most, in km: a chunk balanced by cost that comes out more than
        half as long again is cut by length (a single road longer than this is a chunk of its own).
    workers : int, default 1
        Workers the chunks are shared among.
    cost : numpy.ndarray, optional
        Each road's estimated cost (:func:`road_costs`); its length by default.

    Returns
    -------
    list of numpy.ndarray
        For each chunk, the row positions of its roads in ``table``, in order.
    """
    length = np.nan_to_num(table["length_m"].to_numpy(dtype=float), nan=0.0).clip(min=0.0)
    n_roads = len(length)
    if n_roads == 0:
        return []
    cost = length if cost is None else np.asarray(cost, dtype=float)
    per_worker = CHUNKS_PER_WORKER * workers if workers > 1 else 1
    want = max(math.ceil(length.sum() / (chunk_km * 1000.0) - 1e-9), per_worker, 1)
    cuts = _balanced_cuts(cost, min(want, n_roads))
    chunks = [np.arange(a, b) for a, b in zip([0] + cuts, cuts + [n_roads])]
    out = []
    for c in chunks:  # the length cap: a chunk over chunk_km is cut again by length
        if length[c].sum() > chunk_km * 1000.0 * 1.5 and len(c) > 1:
            out += [c[s] for s in _split_by_length(length[c], chunk_km * 1000.0)]
        else:
            out.append(c)
    return out


def _balanced_cuts(cost: np.ndarray, n: int) -> list[int]:
    """Where to cut a sequence of costs into ``n`` consecutive runs of about equal cost: the
    road boundaries nearest to each equal share (strictly increasing, no empty run)."""
    n_roads = len(cost)
    if n <= 1:
        return []
    if not cost.sum() > 0:  # nothing measurable: equal numbers of roads
        cost = np.ones(n_roads)
    total = float(cost.sum())
    cum = np.concatenate([[0.0], np.cumsum(cost)])  # cum[i]: cost of the first i roads
    cuts, last = [], 0
    for j in range(1, n):
        target = total * j / n
        i = int(np.searchsorted(cum, target))
        if i > 0 and (i > n_roads or abs(cum[i - 1] - target) <= abs(cum[i] - target)):
            i -= 1
        i = min(max(i, last + 1), n_roads - (n - j))  # leave room for the runs still to come
        cuts.append(i)
        last = i
    return cuts


def _split_by_length(length: np.ndarray, cap_m: float) -> list[np.ndarray]:
    """Consecutive runs of about ``cap_m`` of road each (positions into ``length``)."""
    runs, cur, acc = [], [], 0.0
    for i, L in enumerate(length):
        cur.append(i)
        acc += L
        if acc >= cap_m:
            runs.append(np.array(cur))
            cur, acc = [], 0.0
    if cur:
        runs.append(np.array(cur))
    return runs


def chunk_layout_key(table: pd.DataFrame, chunks: list[np.ndarray]) -> str:
    """A digest of which roads each chunk holds (so a resumed run reuses only chunks cut alike).

    Parameters
    ----------
    table : pandas.DataFrame
        The roads table (``road_id``).
    chunks : list of numpy.ndarray
        Row positions of each chunk's roads.

    Returns
    -------
    str
        A SHA-256 hex digest.
    """
    ids = table["road_id"].astype(str).to_numpy()
    h = hashlib.sha256()
    for c in chunks:
        h.update(("\x1f".join(ids[c]) + "\x1e").encode())
    return h.hexdigest()


def typed_table(name: str, frame: pd.DataFrame | None) -> pd.DataFrame:
    """A chunk table with a fixed schema even when empty (so every chunk file reads alike).

    Parameters
    ----------
    name : str
        Which table, one of :data:`TABLES`.
    frame : pandas.DataFrame or None
        The table as computed (``None`` or empty when there is nothing).

    Returns
    -------
    pandas.DataFrame
        ``frame`` itself when it has rows, else an empty table with the table's columns and types.

    Raises
    ------
    KeyError
        When ``name`` is not one of :data:`TABLES`.
    """
    if frame is not None and len(frame):
        return frame
    return empty_frame("work." + name)


