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


class OutputUnits:
    """How results are written: metric (m, km/h, km) or US customary (ft, mph, mi).

    Column names carry the unit: in US customary output ``*_m`` becomes ``*_ft``,
    ``*_kmh`` becomes ``*_mph`` and ``*km*`` becomes ``*mi*``, with the values converted;
    K (``k``, ``k_required``) becomes feet per percent. The foot is the international foot
    unless ``us_ft`` (US survey foot) is asked for.
    """

    def __init__(self, system: str = "metric", foot: str = "ft"):
        if system not in ("metric", "us"):
            raise InputError(f"unknown units {system!r}; use 'metric' or 'us'")
        self.system = system
        self.us = system == "us"
        self.length_name = foot if self.us else "m"
        self.m_per_length = metres_per(foot) if self.us else 1.0
        self.kmh_per_speed = kmh_per_mph() if self.us else 1.0
        self.km_per_distance = (metres_per("ft") * 5280 / 1000.0) if self.us else 1.0  # statute mile
        self.length_suffix = "_ft" if self.us else "_m"
        self.speed_suffix = "_mph" if self.us else "_kmh"
        self.length_label = "ft" if self.us else "m"
        self.speed_label = "mph" if self.us else "km/h"
        self.distance_label = "mi" if self.us else "km"

    def length(self, metres):
        return metres / self.m_per_length

    def speed(self, kmh):
        return kmh / self.kmh_per_speed

    def column(self, name: str) -> str:
        """The output name of an internal (metric) column."""
        if not self.us:
            return name
        if name.endswith("_m"):
            return name[:-2] + "_ft"
        if name.endswith("_kmh"):
            return name[:-4] + "_mph"
        if name.startswith("km_") or "_km_" in name or name.endswith("_km"):
            return name.replace("km", "mi")
        return name

    def divisor(self, name: str) -> float:
        """What a value of the internal (metric) column ``name`` is divided by in these units
        (1.0 where it is unchanged)."""
        if not self.us:
            return 1.0
        if name.endswith("_m") or name in ("k", "k_required"):
            return self.m_per_length
        if name.endswith("_kmh"):
            return self.kmh_per_speed
        if self.column(name) != name:  # km columns
            return self.km_per_distance
        return 1.0

    def table(self, frame):
        """A copy of ``frame`` with its columns renamed and converted to these units."""
        if not self.us:
            return frame.copy()
        out = frame.copy()
        for col in frame.columns:
            d = self.divisor(col)
            if d != 1.0 and frame[col].dtype.kind in "fiu":
                out[col] = frame[col] / d
        return out.rename(columns={c: self.column(c) for c in frame.columns})
