"""Evidence in the roads file's own columns, checked against the settings before anything is
read: a column named in the settings must exist, and a speed column whose name carries a unit
(``speed_kmh``, ``speed_mph``) must agree with the unit the run reads speeds in. A
contradiction raises :class:`~pipeline.core.errors.InputError` (exit code 2, one line)."""

from __future__ import annotations

from ..core.config import Config
from ..core.errors import InputError

# a speed above this is not a road speed (a typing slip, or a unit mix-up): common practice, no source
MAX_SPEED_KMH = 200.0

_SPEED_SUFFIX = {"kmh": "kmh", "kph": "kmh", "km_h": "kmh", "mph": "mph"}
UNIT_WORDS = {"kmh": "km/h", "mph": "mph"}


def overridden(cfg: Config, check: str) -> bool:
    """True where the user named ``check`` in ``checks.override``.

    Parameters
    ----------
    cfg : Config
        The run's settings.
    check : str
        A check's name (see :mod:`pipeline.core.config`).

    Returns
    -------
    bool
        True where the check is overridden (it then notes instead of stopping the run).
    """
    return check in cfg["checks.override"]


def speed_unit(cfg: Config) -> str:
    """Unit the speed column is read in: ``roads.speed_unit``, else that of ``output.units``.

    Parameters
    ----------
    cfg : Config
        The run's settings.

    Returns
    -------
    str
        ``"kmh"`` or ``"mph"``.
    """
    return cfg["roads.speed_unit"] or ("mph" if cfg["output.units"] == "us" else "kmh")


def _suffix_unit(column: str) -> str | None:
    """The speed unit a column's name carries (``speed_kmh``, ``mph`` ...), else ``None``."""
    low = column.lower()
    for suffix, unit in _SPEED_SUFFIX.items():
        if low.endswith("_" + suffix) or low == suffix:
            return unit
    return None


def check_road_columns(columns, cfg: Config, path) -> list[str]:
    """Refuse named columns the roads file lacks and speed columns whose name contradicts the
    speed unit; note what was assumed (a default column that is absent).

    Parameters
    ----------
    columns : iterable
        The roads file's column names (geometry excluded).
    cfg : Config
        The run's settings (``roads.*_column``, ``roads.speed_unit``, ``output.units``).
    path : Path
        The roads file, for messages.

    Returns
    -------
    list of str
        Notes for the run; a contradiction raises :class:`InputError`.
    """
    columns = [str(c) for c in columns]
    notes: list[str] = []
    listing = ", ".join(columns[:15])
    for key, what, flag in (("roads.speed_column", "speed", "--speed-column"),
                            ("roads.aadt_column", "AADT", "roads.aadt_column"),
                            ("roads.class_column", "road class", "roads.class_column"),
                            ("roads.name_column", "road name", "roads.name_column")):
        col = cfg[key]
        if col and col not in columns and key in cfg.explicit:
            raise InputError(f"{path}: no column {col!r} for the {what} (columns: {listing}); fix {flag} ({key})")
    if cfg["roads.aadt_column"] not in columns:
        notes.append(f"no AADT column {cfg['roads.aadt_column']!r} in the roads file: exposure factor 0 for every road")
    unit = speed_unit(cfg)
    col = cfg["roads.speed_column"]
    unit_set = "roads.speed_unit" in cfg.explicit
    if col in columns:
        named = _suffix_unit(col)
        if named and named != unit and not unit_set:
            if overridden(cfg, "speed_unit"):
                notes.append(f"speed column {col!r} is named in {UNIT_WORDS[named]} but read in "
                             f"{UNIT_WORDS[unit]} (checks.override = speed_unit)")
            else:
                raise InputError(
                    f"{path}: speed column {col!r} is named in {UNIT_WORDS[named]} but this run reads speeds in "
                    f"{UNIT_WORDS[unit]} (output.units = {cfg['output.units']!r}); set roads.speed_unit = "
                    f"{named!r} or choose the {UNIT_WORDS[unit]} column with --speed-column")
        elif unit_set:
            notes.append(f"speeds in column {col!r} read in {UNIT_WORDS[unit]} (roads.speed_unit)")
        return notes
    # the default speed column is absent: a column in the other unit means the units are mixed up
    others = [c for c in columns if c.lower().startswith("speed") and _suffix_unit(c) not in (None, unit)]
    if others and not overridden(cfg, "speed_unit"):
        other_unit = _suffix_unit(others[0])
        raise InputError(
            f"{path}: no speed column {col!r}, but {others[0]!r} holds speeds in {UNIT_WORDS[other_unit]} while "
            f"this run reads {UNIT_WORDS[unit]} (output.units = {cfg['output.units']!r}); give --speed-column "
            f"{others[0]} with roads.speed_unit = {other_unit!r}, or use the matching --units")
    notes.append(f"no speed column {col!r} in the roads file: every road is judged at a substituted speed "
                 f"(class default or predicted operating speed; see data notes)")
    return notes
