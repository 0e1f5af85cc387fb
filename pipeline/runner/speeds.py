"""Speed policy: the speed each road is judged at, and on what basis."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..core.config import Config
from ..core.units import kmh_per_mph
from ..ingest.columns import speed_unit
from .roadwork import PREDICTED


def resolve_speeds(table: pd.DataFrame, cfg: Config) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Speed each road is judged at (km/h), its basis, and a skip reason where there is none.

    With ``speed.source = "attribute"`` (default): the speed column's value plus
    ``speed.margin_kmh``; where it is empty or not positive, the default for the road's class
    (``speed.default_by_class``); else, with ``speed.predict_missing``, the predicted operating
    speed (station by station; the road's figure is then the desired speed, the ceiling);
    otherwise the road is skipped. With ``speed.source = "predicted"`` every road is judged at
    predicted speeds.

    Parameters
    ----------
    table : pandas.DataFrame
        The roads table, with ``speed_raw`` (in the speed column's unit) and ``road_class``.
    cfg : Config
        The run's settings (``speed.*`` and ``roads.speed_column``).

    Returns
    -------
    speed : numpy.ndarray
        Speed per road in km/h (NaN where the road has none).
    basis : numpy.ndarray
        Where each speed came from (object array; ``None`` where the road has none).
    reason : numpy.ndarray
        Why a road without a speed is skipped (object array; ``None`` elsewhere).
    """
    raw = table["speed_raw"].to_numpy(dtype=float)
    if speed_unit(cfg) == "mph":  # the speed column is in mph
        raw = raw * kmh_per_mph()
    margin = cfg["speed.margin_kmh"]
    defaults = cfg["speed.default_by_class"]
    speed = np.full(len(table), np.nan)
    basis = np.full(len(table), None, dtype=object)
    reason = np.full(len(table), None, dtype=object)
    for i, (v, cls) in enumerate(zip(raw, table["road_class"])):
        if cfg["speed.source"] == "predicted":
            speed[i], basis[i] = cfg["speed.desired_kmh"], PREDICTED
        elif np.isfinite(v) and v > 0:
            speed[i] = v + margin
            basis[i] = "attribute" if margin == 0 else f"attribute + {margin:g} km/h"
        elif cls is not None and cls in defaults:
            speed[i] = float(defaults[cls]) + margin
            basis[i] = f"class default ({cls})"
        elif cfg["speed.predict_missing"]:
            speed[i], basis[i] = cfg["speed.desired_kmh"], PREDICTED
        else:
            reason[i] = (f"no usable speed (column {cfg['roads.speed_column']!r} empty or not positive); "
                         f"fill it in, set speed.default_by_class, or allow speed.predict_missing")
    return speed, basis, reason
