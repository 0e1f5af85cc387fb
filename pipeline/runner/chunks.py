"""Chunks of roads, and the fixed layouts of the tables each chunk writes.

The network is cut into chunks of consecutive roads (``run.chunk_km`` of road each). Every
chunk writes the same tables (:data:`TABLES`), each with the fixed schema of its ``work.*``
table in :mod:`pipeline.core.tables` even when empty, so that every chunk file reads alike.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..core.tables import empty_frame

TABLES = ("profiles", "curves", "keypoints", "hazards", "hcurves", "notes", "status", "clearances")


def chunk_rows(table: pd.DataFrame, chunk_km: float) -> list[np.ndarray]:
    """Row positions of the roads in each chunk.

    Chunks hold consecutive roads, about ``chunk_km`` of road a chunk (a road is never split).

    Parameters
    ----------
    table : pandas.DataFrame
        The roads table, with ``length_m`` (NaN lengths count as zero).
    chunk_km : float
        Road length per chunk, in km.

    Returns
    -------
    list of numpy.ndarray
        For each chunk, the row positions of its roads in ``table``.
    """
    length = np.nan_to_num(table["length_m"].to_numpy(dtype=float), nan=0.0)
    chunks, cur, acc = [], [], 0.0
    for i, L in enumerate(length):
        cur.append(i)
        acc += L
        if acc >= chunk_km * 1000.0:
            chunks.append(np.array(cur))
            cur, acc = [], 0.0
    if cur:
        chunks.append(np.array(cur))
    return chunks


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


