"""Length and speed units.

The audit computes in metres and km/h. Unit factors come from the EPSG unit
definitions shipped with PROJ (through pyproj), so the international foot
(0.3048 m, EPSG:9002) and the US survey foot (1200/3937 m, EPSG:9003) are never
confused and never typed in by hand.
"""

from __future__ import annotations

import re

import pyproj

from .errors import InputError

# user-facing unit names -> EPSG unit names in PROJ's database
_LENGTH_UNITS = {
    "m": "metre",
    "ft": "foot",
    "us_ft": "US survey foot",
}


def metres_per(unit: str) -> float:
    """Metres in one length unit, from PROJ's unit table.

    Parameters
    ----------
    unit : str
        ``'m'``, ``'ft'`` (international foot, EPSG:9002) or ``'us_ft'`` (US survey foot,
        EPSG:9003).

    Returns
    -------
    float
        Metres per unit (1, 0.3048, 1200/3937).

    Raises
    ------
    InputError
        For any other unit name.
    """
    try:
        epsg_name = _LENGTH_UNITS[unit]
    except KeyError:
        raise InputError(
            f"unknown length unit {unit!r}; use 'm', 'ft' (international foot) or 'us_ft' (US survey foot)"
        ) from None
    return float(pyproj.get_units_map(category="linear")[epsg_name].conv_factor)


def kmh_per_mph() -> float:
    """Kilometres per hour in one mile per hour.

    Returns
    -------
    float
        The statute mile (1609.344 m, from PROJ's unit table) per hour, in km/h.
    """
    return float(pyproj.get_units_map(category="linear")["Statute mile"].conv_factor) / 1000.0



# "<number> m" and "<number> km/h" in text written by the stages (a number, a space, the unit)
_METRES = re.compile(r"(?<![\w.])(\d[\d,]*(?:\.\d+)?) m\b")
_KMH = re.compile(r"(?<![\w.])(\d[\d,]*(?:\.\d+)?) km/h\b")

class OutputUnits:
    """How results are written: metric (m, km/h, km) or US customary (ft, mph, mi).

    Column names carry the unit: in US customary output ``*_m`` becomes ``*_ft``,
    ``*_kmh`` becomes ``*_mph`` and ``*km*`` becomes ``*mi*``, with the values converted;
    K (``k``, ``k_required``) becomes feet per percent. The foot is the international foot
    unless ``us_ft`` (US survey foot) is asked for.

    Parameters
    ----------
    system : str, default "metric"
        ``'metric'`` or ``'us'``.
    foot : str, default "ft"
        Foot of US customary output: ``'ft'`` (international) or ``'us_ft'`` (US survey).
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
        """A length in the output unit.

        Parameters
        ----------
        metres : float or array_like
            Length (m).

        Returns
        -------
        float or ndarray
            The length in m or ft (international or US survey foot).
        """
        return metres / self.m_per_length

    def speed(self, kmh):
        """A speed in the output unit.

        Parameters
        ----------
        kmh : float or array_like
            Speed (km/h).

        Returns
        -------
        float or ndarray
            The speed in km/h or mph.
        """
        return kmh / self.kmh_per_speed

    def column(self, name: str) -> str:
        """The output name of an internal (metric) column.

        Parameters
        ----------
        name : str
            Internal column name, its unit as suffix (``_m``, ``_kmh``) or ``km`` in it.

        Returns
        -------
        str
            The name with the unit of these output units (unchanged for metric).
        """
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
        """What a value of an internal (metric) column is divided by in these units.

        Parameters
        ----------
        name : str
            Internal column name; ``k`` and ``k_required`` (m per %) convert as lengths.

        Returns
        -------
        float
            Metres per output length unit, km/h per mph, or km per mile; 1.0 where unchanged.
        """
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
        """A copy of a table with its columns renamed and converted to these units.

        Parameters
        ----------
        frame : DataFrame
            Table with internal (metric) column names and values.

        Returns
        -------
        DataFrame
            The converted copy; only numeric columns are divided (:meth:`divisor`).
        """
        if not self.us:
            return frame.copy()
        out = frame.copy()
        for col in frame.columns:
            d = self.divisor(col)
            if d != 1.0 and frame[col].dtype.kind in "fiu":
                out[col] = frame[col] / d
            elif frame[col].dtype.kind not in "fiubmMc":  # text (object or string dtype)
                out[col] = frame[col].map(lambda v: self.text(v) if isinstance(v, str) else v)
        return out.rename(columns={c: self.column(c) for c in frame.columns})

    def text(self, words: str) -> str:
        """Words written by the stages in metric units, with their lengths and speeds in these.

        Parameters
        ----------
        words : str
            Text such as "junction with WV-05 at 2350 m" or "judged at 80 km/h".

        Returns
        -------
        str
            The same text with every "<number> m" and "<number> km/h" converted (to the
            precision written) where the units are US customary; unchanged otherwise.
        """
        if not self.us:
            return words

        def convert(match, per, label):
            number = match.group(1)
            decimals = len(number.split(".")[1]) if "." in number else 0
            return f"{float(number.replace(',', '')) / per:,.{decimals}f} {label}"

        words = _KMH.sub(lambda m: convert(m, kmh_per_mph(), "mph"), words)
        return _METRES.sub(lambda m: convert(m, self.m_per_length, self.length_label), words)
