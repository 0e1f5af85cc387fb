"""Chunks of roads, and the fixed layouts of the tables each chunk writes.

The network is cut into chunks of consecutive roads (``run.chunk_km`` of road each). Every
chunk writes the same tables (:data:`TABLES`), each with a fixed schema even when empty, so
that every chunk file reads alike.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..alignment.fit import empty_curves
from ..plan.horizontal import HCURVE_COLUMNS
from .roadwork import HAZARD_COLUMNS, HCURVE_CHECK_COLUMNS, UNCERTAINTY_COLUMNS

TABLES = ("profiles", "curves", "keypoints", "hazards", "hcurves", "notes", "status")


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
    return _EMPTY[name]()


def empty_profiles() -> pd.DataFrame:
    """An empty station table (``profiles``) with its columns and types.

    Returns
    -------
    pandas.DataFrame
        No rows; one column per station attribute.
    """
    return pd.DataFrame({
        "road_id": pd.Series(dtype=str), "chainage_m": pd.Series(dtype=float), "x": pd.Series(dtype=float),
        "y": pd.Series(dtype=float), "ground_z_m": pd.Series(dtype=float), "ground_flag": pd.Series(dtype=str),
        "ground_offset_m": pd.Series(dtype=float), "filter_m": pd.Series(dtype=float),
        "fitted_z_m": pd.Series(dtype=float), "grade_pct": pd.Series(dtype=float),
        "sight_fwd_m": pd.Series(dtype=float), "sight_back_m": pd.Series(dtype=float),
        "limit_fwd": pd.Series(dtype=str), "limit_back": pd.Series(dtype=str),
        "curve_fwd": pd.Series(dtype="int64"), "curve_back": pd.Series(dtype="int64"),
        "speed_fwd_kmh": pd.Series(dtype=float), "speed_back_kmh": pd.Series(dtype=float),
    })


def _empty_curves() -> pd.DataFrame:
    e = empty_curves()
    e.insert(0, "road_id", pd.Series(dtype=str))
    for col in UNCERTAINTY_COLUMNS + ["sight_sd_m", "sight_formula_m"]:
        e[col] = pd.Series(dtype=float)
    return e


def _empty_keypoints() -> pd.DataFrame:
    return pd.DataFrame({"road_id": pd.Series(dtype=str), "chainage_m": pd.Series(dtype=float),
                         "direction": pd.Series(dtype=str), "sight_m": pd.Series(dtype=float),
                         "limit_kind": pd.Series(dtype=str), "curve_no": pd.Series(dtype="int64"),
                         "grade": pd.Series(dtype=float), "speed_kmh": pd.Series(dtype=float)})


def _empty_hazards() -> pd.DataFrame:
    return pd.DataFrame({c: pd.Series(dtype="int64" if c == "curve_no" else
                                      (float if c.endswith("_m") else str)) for c in HAZARD_COLUMNS})


def _empty_hcurves() -> pd.DataFrame:
    cols = ["road_id"] + HCURVE_COLUMNS + HCURVE_CHECK_COLUMNS
    kinds = {"road_id": str, "direction": str, "hcurve_no": "int64", "below_min_radius": bool,
             "hso_valid": bool}
    return pd.DataFrame({c: pd.Series(dtype=kinds.get(c, float)) for c in cols})


def _empty_notes() -> pd.DataFrame:
    return pd.DataFrame({"road_id": pd.Series(dtype=str), "note": pd.Series(dtype=str),
                         "from_m": pd.Series(dtype=float), "to_m": pd.Series(dtype=float),
                         "detail": pd.Series(dtype=str)})


def _empty_status() -> pd.DataFrame:
    return pd.DataFrame({"road_id": pd.Series(dtype=str), "status": pd.Series(dtype=str),
                         "reason": pd.Series(dtype=str), "ground_spacing_m": pd.Series(dtype=float),
                         "resolution_m": pd.Series(dtype=float)})


_EMPTY = {"profiles": empty_profiles, "curves": _empty_curves, "keypoints": _empty_keypoints,
          "hazards": _empty_hazards, "hcurves": _empty_hcurves, "notes": _empty_notes, "status": _empty_status}
