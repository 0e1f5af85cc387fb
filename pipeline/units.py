"""Length and speed units.

The audit computes in metres and km/h. Unit factors come from the EPSG unit
definitions shipped with PROJ (through pyproj), so the international foot
(0.3048 m, EPSG:9002) and the US survey foot (1200/3937 m, EPSG:9003) are never
confused and never typed in by hand.
"""

from __future__ import annotations

import pyproj

from .errors import InputError

# user-facing unit names -> EPSG unit names in PROJ's database
_LENGTH_UNITS = {
    "m": "metre",
    "ft": "foot",
    "us_ft": "US survey foot",
}


def metres_per(unit: str) -> float:
    """Metres in one ``unit`` ('m', 'ft' or 'us_ft'), from PROJ's unit table."""
    try:
        epsg_name = _LENGTH_UNITS[unit]
    except KeyError:
        raise InputError(
            f"unknown length unit {unit!r}; use 'm', 'ft' (international foot) or 'us_ft' (US survey foot)"
        ) from None
    return float(pyproj.get_units_map(category="linear")[epsg_name].conv_factor)


def kmh_per_mph() -> float:
    """km/h in one mph: the statute mile (1609.344 m, from PROJ's unit table) per hour."""
    return float(pyproj.get_units_map(category="linear")["Statute mile"].conv_factor) / 1000.0
