"""Checks on setting values: their type against the default's, their structure and range,
and the nearest valid key for a misspelt one (used by :class:`pipeline.core.config.Config`)."""

from __future__ import annotations

import difflib
from typing import Any

from .errors import InputError
from .spec import CHECKS, SPEC


def nearest_key(name: str, section: str | None = None) -> str:
    """The valid section or ``section.key`` closest to a misspelt one, for the error message.

    Parameters
    ----------
    name : str
        The unknown section, or the unknown key within ``section``.
    section : str, optional
        The (valid) section the key was given in; ``None`` when ``name`` is a section.

    Returns
    -------
    str
        The closest name within the section, else anywhere in :data:`SPEC`; ``"?"`` if none.

    Notes
    -----
    Closeness is :func:`difflib.get_close_matches` (Ratcliff-Obershelp similarity, as
    documented by the Python standard library).
    """
    if section is None:
        choices = list(SPEC)
    else:
        choices = [f"{section}.{k}" for k in SPEC[section]]
        name = f"{section}.{name}"
    everything = [f"{s}.{k}" for s in SPEC for k in SPEC[s]] + list(SPEC)
    best = difflib.get_close_matches(name, choices, n=1, cutoff=0.0) or difflib.get_close_matches(
        name, everything, n=1, cutoff=0.0
    )
    return best[0] if best else "?"


def coerce_value(key: str, value: Any, default: Any, source: str) -> Any:
    """Check a value against the type of its default, converting an integer to a float.

    Parameters
    ----------
    key : str
        ``"section.key"`` of the setting (for the message).
    value : object
        The value given in a file, a flag or code.
    default : object
        The setting's default, whose type the value must have (bool, float, int, str, list
        or dict; an int is accepted for a float).
    source : str
        Where the value came from (file name or ``"command line"``), for the message.

    Returns
    -------
    object
        The value, as a float for float settings and as a copy for lists and tables.

    Raises
    ------
    InputError
        When the value's type does not match the default's.
    """
    if isinstance(default, bool):
        if isinstance(value, bool):
            return value
    elif isinstance(default, float):
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            return float(value)
    elif isinstance(default, int):
        if isinstance(value, int) and not isinstance(value, bool):
            return value
    elif isinstance(default, str):
        if isinstance(value, str):
            return value
    elif isinstance(default, list):
        if isinstance(value, list):
            return list(value)
    elif isinstance(default, dict):
        if isinstance(value, dict):
            return dict(value)
    raise InputError(
        f"{source}: {key} = {value!r} should be {type(default).__name__} "
        f"(like {default!r}); fix the value"
    )


def check_value(key: str, value: Any, source: str) -> None:
    """Checks beyond the type, for settings with structure or a limited range.

    Parameters
    ----------
    key : str
        ``"section.key"`` of the setting.
    value : object
        The value, already of the default's type (:func:`coerce_value`).
    source : str
        Where the value came from, for the message.

    Raises
    ------
    InputError
        Naming the source, the key and what the value must be.
    """
    problem = _structure_problem(key, value) or _range_problem(key, value)
    if problem:
        raise InputError(f"{source}: {key} {problem}")


def _structure_problem(key: str, value: Any) -> str | None:
    """What is wrong with a list or table setting (``None`` if nothing)."""
    if key == "inventory.severity_bands_kmh":
        if len(value) != 2 or not all(isinstance(v, (int, float)) for v in value) or not 0 <= value[0] <= value[1]:
            return "must be two speeds in km/h, smaller first, e.g. [10, 20]"
    elif key == "inventory.priority_weights":
        extra = set(value) - {"shortfall", "speed", "exposure"}
        if extra:
            return f"has unknown weight(s) {', '.join(sorted(extra))}; use shortfall, speed, exposure"
        if not all(isinstance(v, (int, float)) and v >= 0 for v in value.values()) or sum(value.values()) <= 0:
            return "weights must be numbers >= 0, not all zero"
    elif key == "speed.default_by_class":
        if not all(isinstance(v, (int, float)) and v > 0 for v in value.values()):
            return "speeds must be positive numbers, e.g. { local = 60, collector = 80 }"
    elif key == "criteria.files":
        if not all(isinstance(v, str) for v in value):
            return "must be a list of file paths"
    return None


def _range_problem(key: str, value: Any) -> str | None:
    """What is wrong with a value outside its range or set of choices (``None`` if nothing)."""
    if key in ("profile.step_m", "sight.fine_step_m", "ground.max_offset_m", "profile.max_gap_m",
               "inventory.aadt_ref", "speed.desired_kmh", "plan.smooth_m", "plan.max_radius_m") and not value > 0:
        return "must be positive"
    elif key == "run.engine" and value not in ("local", "dask"):
        return "must be 'local' or 'dask'"
    elif key == "run.workers" and value < 0:
        return "must be 0 (every core) or more"
    elif key == "run.chunk_km" and not value > 0:
        return "must be positive"
    elif key == "output.units" and value not in ("metric", "us"):
        return "must be 'metric' or 'us'"
    elif key == "output.us_foot" and value not in ("ft", "us_ft"):
        return "must be 'ft' (international foot) or 'us_ft' (US survey foot)"
    elif key == "output.sheet_paper" and value not in ("auto", "A3", "A4", "tabloid", "letter"):
        return "must be 'auto', 'A3', 'A4', 'tabloid' or 'letter'"
    elif key in ("output.report_curves", "output.report_road_profiles") and value < 0:
        return "must not be negative"
    elif key == "ground.elevation_unit" and value not in ("m", "ft", "us_ft"):
        return "must be 'm', 'ft' (international foot) or 'us_ft' (US survey foot)"
    elif key == "roads.speed_unit" and value not in ("", "kmh", "mph"):
        return "must be 'kmh' or 'mph' (or empty: that of output.units)"
    elif key == "checks.override":
        unknown = [v for v in value if v not in CHECKS]
        if unknown:
            return f"has unknown check(s) {', '.join(map(str, unknown))}; use {', '.join(CHECKS)}"
    elif key in ("checks.min_coverage_pct", "checks.max_steep_pct") and not 0 <= value <= 100:
        return "must be between 0 and 100 (%)"
    elif key == "speed.source" and value not in ("attribute", "predicted"):
        return "must be 'attribute' or 'predicted'"
    elif key == "plan.e_max_pct" and not 0 <= value <= 20:
        return "must be between 0 and 20 (%)"
    return None
