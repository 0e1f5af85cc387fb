"""The stopping-sight-distance formulas of a criteria set, written once.

Python callers (:class:`pipeline.evaluate.criteria.CriteriaSet`) use these functions directly;
the SQL rules (``sql/evaluate.sql``) call the same functions, registered in DuckDB by
:func:`register_formulas`. All values are in the set's own units (metric: m, km/h, m/s^2;
US customary: ft, mph, ft/s^2); grades are fractions, negative downhill.

References
----------
AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
ch. 3: stopping sight distance on the level and on grades, design values rounded up, and the
rates of vertical curvature K.
"""

from __future__ import annotations

import functools

import duckdb
import numpy as np
import pyarrow as pa


def ssd_level(v, t, a, speed_coef, braking_coef):
    """Calculated stopping sight distance on the level.

    Parameters
    ----------
    v : array_like
        Speed (km/h or mph).
    t : array_like
        Brake reaction time (s).
    a : array_like
        Deceleration rate (m/s^2 or ft/s^2).
    speed_coef, braking_coef : array_like
        The set's unit constants (0.278 and 0.039 metric; 1.47 and 1.075 US).

    Returns
    -------
    ndarray
        ``SSD = speed_coef V t + braking_coef V^2 / a`` (m or ft), e.g.
        ``SSD = 0.278 V t + 0.039 V^2 / a`` in metric units.

    References
    ----------
    AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
    ch. 3.
    """
    v = np.asarray(v, dtype=float)
    return speed_coef * v * t + braking_coef * v * v / a


def ssd_on_grade(v, t, a, g, gravity, speed_coef, grade_coef):
    """Calculated stopping sight distance on a grade.

    Parameters
    ----------
    v : array_like
        Speed (km/h or mph).
    t : array_like
        Brake reaction time (s).
    a : array_like
        Deceleration rate (m/s^2 or ft/s^2).
    g : array_like
        Grade (fraction, negative downhill).
    gravity : array_like
        Acceleration of gravity (9.81 m/s^2 or 32.2 ft/s^2).
    speed_coef, grade_coef : array_like
        The set's unit constants (0.278 and 254 metric; 1.47 and 30 US).

    Returns
    -------
    ndarray
        ``SSD = speed_coef V t + V^2 / (grade_coef (a / gravity + g))`` (m or ft).

    References
    ----------
    AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
    ch. 3.
    """
    v = np.asarray(v, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return speed_coef * v * t + v * v / (grade_coef * (a / gravity + np.asarray(g, dtype=float)))


def round_up(x, step):
    """A design value: a calculated value rounded up to a multiple of a step.

    Parameters
    ----------
    x : array_like
        Calculated value (m or ft).
    step : float
        Rounding step (m or ft).

    Returns
    -------
    ndarray
        ``ceil(x / step - 1e-9) step``: a hair of tolerance so an exact multiple stays put.
    """
    return np.ceil(np.asarray(x, dtype=float) / step - 1e-9) * step


def k_round(k):
    """A design K: the calculated K to 0.1, rounded up to a whole number.

    Parameters
    ----------
    k : array_like
        Calculated rate of vertical curvature (m or ft per %).

    Returns
    -------
    ndarray
        ``ceil(round(k, 1))`` (m or ft per %).
    """
    return np.ceil(np.round(np.asarray(k, dtype=float), 1) - 1e-9)


def speed_for_sight(s, lin, quad):
    """The highest speed whose calculated SSD a sight distance meets.

    Parameters
    ----------
    s : array_like
        Sight distance (m or ft).
    lin : array_like
        Coefficient of V in the SSD formula (``speed_coef t``).
    quad : array_like
        Coefficient of V^2 (``braking_coef / a``, or ``1 / (grade_coef (a / gravity + g))``).

    Returns
    -------
    ndarray
        ``V = (-lin + sqrt(lin^2 + 4 quad s)) / (2 quad)`` (km/h or mph), the positive root of
        ``quad V^2 + lin V - s = 0``.
    """
    s = np.asarray(s, dtype=float)
    with np.errstate(invalid="ignore"):
        return (-lin + np.sqrt(lin * lin + 4 * quad * s)) / (2 * quad)


# the SQL type of every argument and result (duckdb.sqltypes from DuckDB 1.4, duckdb.typing before)
DOUBLE = (getattr(duckdb, "sqltypes", None) or duckdb.typing).DOUBLE

FORMULAS = {"ssd_level": (ssd_level, 5), "ssd_on_grade": (ssd_on_grade, 7), "round_up": (round_up, 2),
            "k_round": (k_round, 1), "speed_for_sight": (speed_for_sight, 3)}


def _arrow(fn):
    @functools.wraps(fn)  # DuckDB reads the argument count from the signature
    def call(*columns):
        args = [np.asarray(c.to_numpy(zero_copy_only=False), dtype=float) for c in columns]
        return pa.array(np.broadcast_to(fn(*args), (len(columns[0]),)).astype(float))
    return call


def register_formulas(con: duckdb.DuckDBPyConnection) -> None:
    """Make the formulas callable from SQL on a DuckDB connection.

    Parameters
    ----------
    con : duckdb.DuckDBPyConnection
        The connection; each function of :data:`FORMULAS` is registered under its name,
        vectorised (one call per batch of rows, DOUBLE arguments and result).
    """
    for name, (fn, nargs) in FORMULAS.items():
        con.create_function(name, _arrow(fn), [DOUBLE] * nargs, DOUBLE, type="arrow")
