"""Criteria sets: the published values a curve is judged against, kept as data.

A set has one row in ``sql/criteria/sets.csv`` (name, source, edition, units,
heights, beam angle, reaction time, deceleration, formula constants, rounding
step, look-ahead) and one row per tabulated speed in ``sql/criteria/speeds.csv``
(design SSD, crest K, sag K). A user adds a set without touching code: a CSV
with the set's columns and the speed columns on every row (see
``sightaudit criteria --template``), named in the config (``criteria.files``).

Lengths, heights and speeds are in the set's own units (``metric``: m and km/h;
``us``: ft and mph); :meth:`CriteriaSet.sight_rules` converts what the sight
computation needs to metres with PROJ's unit definitions.

Formulas (AASHTO Green Book, ch. 3; constants per set):

    SSD = speed_coef V t + braking_coef V^2 / a                      (level)
    SSD = speed_coef V t + V^2 / (grade_coef (a / gravity + G))      (on grade G)
    design SSD = calculated SSD rounded up to ``rounding_step``
    crest K = S^2 / crest_k_const;  sag K = S^2 / (sag_k_const + sag_k_per_s S)
    design K = calculated K (to 0.1) rounded up to a whole number

At a tabulated speed the table governs; between rows the formulas and the
rounding rule give the value (the same rule reproduces every shipped row).
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from ..core.errors import InputError
from ..core.resources import sql_dir
from ..core.units import kmh_per_mph, metres_per
from ..sight.lines import SightRules
from .formulas import k_round, round_up, speed_for_sight, ssd_level, ssd_on_grade

SET_COLUMNS = ["name", "title", "source", "edition", "units", "eye_height", "object_height", "headlight_height",
               "beam_angle_deg", "reaction_time_s", "deceleration", "gravity", "speed_coef", "braking_coef",
               "grade_coef", "rounding_step", "crest_k_const", "sag_k_const", "sag_k_per_s", "lookahead",
               "source_marks"]
SPEED_COLUMNS = ["set_name", "speed", "ssd_design", "crest_k", "sag_k", "marks"]
_NUMERIC_SET = SET_COLUMNS[5:-1]


@dataclass(frozen=True)
class CriteriaSet:
    """One criteria set: its parameters, speed table and side friction factors.

    Parameters
    ----------
    params : dict
        One row of ``sets.csv``: heights and look-ahead (m or ft), beam angle (degrees),
        reaction time (s), deceleration (m/s^2 or ft/s^2), formula constants, rounding step.
    table : DataFrame
        Tabulated speeds (km/h or mph) with design SSD (m or ft), crest and sag K (m or ft
        per %).
    friction : DataFrame, optional
        ``speed, f_max`` (fraction) for the minimum-radius check.
    """

    params: dict
    table: pd.DataFrame
    friction: pd.DataFrame = None

    @property
    def name(self) -> str:
        """The set's name, e.g. ``aashto-2018-metric``."""
        return self.params["name"]

    @property
    def metric(self) -> bool:
        """True for a set in metres and km/h, False for feet and mph."""
        return self.params["units"] == "metric"

    @property
    def length_to_m(self) -> float:
        """Metres per length unit of the set (1, or the international foot)."""
        return 1.0 if self.metric else metres_per("ft")

    @property
    def speed_to_kmh(self) -> float:
        """km/h per speed unit of the set (1, or km/h per mph)."""
        return 1.0 if self.metric else kmh_per_mph()

    def sight_rules(self):
        """The set's heights, beam angle and look-ahead for the sight computation, in metres.

        Returns
        -------
        SightRules
            Eye, object and headlight heights and look-ahead converted to m; beam angle in
            degrees.
        """
        f = self.length_to_m
        p = self.params
        return SightRules(eye_height_m=p["eye_height"] * f, object_height_m=p["object_height"] * f,
                          headlight_height_m=p["headlight_height"] * f, beam_angle_deg=p["beam_angle_deg"],
                          lookahead_m=p["lookahead"] * f)

    # --- the set's formulas, in its own units (pipeline.evaluate.formulas, shared with the SQL)
    def ssd_calculated(self, speed, grade=None):
        """Calculated (unrounded) stopping sight distance, level or on a grade.

        Parameters
        ----------
        speed : array_like
            Speed (set units: km/h or mph).
        grade : array_like, optional
            Grade in the direction of travel (fraction, negative downhill); ``None`` = level.

        Returns
        -------
        ndarray
            SSD (m or ft), :func:`~pipeline.evaluate.formulas.ssd_level` or
            :func:`~pipeline.evaluate.formulas.ssd_on_grade` with the set's constants.

        References
        ----------
        AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
        ch. 3.
        """
        p = self.params
        if grade is None:
            return ssd_level(speed, p["reaction_time_s"], p["deceleration"], p["speed_coef"], p["braking_coef"])
        return ssd_on_grade(speed, p["reaction_time_s"], p["deceleration"], grade, p["gravity"], p["speed_coef"],
                            p["grade_coef"])

    def _tabulated(self, v: np.ndarray, out: np.ndarray, column: str) -> np.ndarray:
        """``out`` with the table's ``column`` wherever ``v`` is a tabulated speed."""
        tab = self.table.set_index("speed")[column]
        speeds = tab.index.to_numpy(dtype=float)
        for i, vi in enumerate(v):
            hit = np.isclose(speeds, vi, atol=1e-6)
            if hit.any():
                out[i] = float(tab.to_numpy()[hit][0])
        return out

    def ssd_design(self, speed, grade=None):
        """Design stopping sight distance.

        Parameters
        ----------
        speed : float or array_like
            Speed (set units: km/h or mph).
        grade : array_like, optional
            Grade in the direction of travel (fraction); ``None`` = level.

        Returns
        -------
        float or ndarray
            Design SSD (m or ft). On the level, the table at a tabulated speed, else the
            calculated value rounded up to the set's step; on a grade, the calculated value on
            that grade rounded up (the tables are for level roads).

        References
        ----------
        AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
        ch. 3.
        """
        v = np.atleast_1d(np.asarray(speed, dtype=float))
        out = np.atleast_1d(round_up(self.ssd_calculated(v, grade), self.params["rounding_step"])).astype(float)
        if grade is None:
            out = self._tabulated(v, out, "ssd_design")
        return out if np.ndim(speed) or np.ndim(grade) else float(out[0])

    def k_design(self, speed, kind: str):
        """Design rate of vertical curvature K for a crest or sag.

        Parameters
        ----------
        speed : float or array_like
            Speed (set units: km/h or mph).
        kind : str
            ``'crest'`` or ``'sag'``.

        Returns
        -------
        float or ndarray
            Design K (m or ft per %): the table at a tabulated speed, else
            ``S^2 / crest_k_const`` (crest) or ``S^2 / (sag_k_const + sag_k_per_s S)`` (sag) on the
            design SSD S, rounded by :func:`~pipeline.evaluate.formulas.k_round`.

        References
        ----------
        AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
        ch. 3.
        """
        v = np.atleast_1d(np.asarray(speed, dtype=float))
        s = np.atleast_1d(self.ssd_design(v))
        p = self.params
        if kind == "crest":
            k = s**2 / p["crest_k_const"]
        else:
            k = s**2 / (p["sag_k_const"] + p["sag_k_per_s"] * s)
        out = self._tabulated(v, k_round(k), "crest_k" if kind == "crest" else "sag_k")
        return out if np.ndim(speed) else float(out[0])

    def supported_speed(self, sight, grade=None):
        """Highest speed whose calculated SSD a sight distance meets.

        Parameters
        ----------
        sight : array_like
            Available sight distance (m or ft, set units).
        grade : array_like, optional
            Grade in the direction of travel (fraction); ``None`` = level.

        Returns
        -------
        ndarray
            Speed (km/h or mph): the positive root of the SSD formula solved for V
            (:func:`~pipeline.evaluate.formulas.speed_for_sight`).
        """
        p = self.params
        b = p["speed_coef"] * p["reaction_time_s"]
        if grade is None:
            a = p["braking_coef"] / p["deceleration"]
        else:
            a = 1.0 / (p["grade_coef"] * (p["deceleration"] / p["gravity"] + np.asarray(grade, dtype=float)))
        return speed_for_sight(sight, b, a)


def _read_csv(path: Path, what: str) -> pd.DataFrame:
    try:
        return pd.read_csv(path, dtype=str, keep_default_na=False)
    except FileNotFoundError:
        raise InputError(f"{path}: criteria file not found; check criteria.files") from None
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: not a readable {what} CSV ({' '.join(str(exc).split())[:120]})") from None


def _check(frame: pd.DataFrame, columns: list[str], numeric: list[str], path: Path) -> pd.DataFrame:
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise InputError(f"{path}: criteria file lacks column(s) {', '.join(missing)}; see sightaudit criteria --template")
    out = frame[columns].copy()
    for col in numeric:
        vals = pd.to_numeric(out[col].str.strip(), errors="coerce")
        bad = np.flatnonzero(vals.isna().to_numpy())
        if len(bad):
            raise InputError(f"{path}: row {bad[0] + 2}, column {col}: {out[col].iloc[bad[0]]!r} is not a number")
        out[col] = vals.astype(float)
    return out


def load_sets(extra_files: list[str] | None = None) -> tuple[pd.DataFrame, pd.DataFrame]:
    """All criteria sets: the shipped ones and those in ``extra_files``.

    Parameters
    ----------
    extra_files : list of str, optional
        The user's criteria CSVs (``criteria.files``), one set each.

    Returns
    -------
    (DataFrame, DataFrame)
        The sets table (columns :data:`SET_COLUMNS`) and the speeds table
        (:data:`SPEED_COLUMNS`).

    Raises
    ------
    InputError
        On an unreadable file, a missing column, a non-numeric value, a duplicate name or
        unknown units.
    """
    base = sql_dir() / "criteria"
    sets = _check(_read_csv(base / "sets.csv", "sets"), SET_COLUMNS, _NUMERIC_SET, base / "sets.csv")
    speeds = _check(_read_csv(base / "speeds.csv", "speeds"), SPEED_COLUMNS, ["speed", "ssd_design", "crest_k", "sag_k"],
                    base / "speeds.csv")
    for f in extra_files or []:
        path = Path(f)
        raw = _read_csv(path, "criteria")
        if "set_name" not in raw.columns and "name" in raw.columns:
            raw["set_name"] = raw["name"]
        s = _check(raw, SET_COLUMNS, _NUMERIC_SET, path).drop_duplicates("name")
        if len(s) != 1:
            raise InputError(f"{path}: a criteria file holds one set; found {len(s)} names")
        sp = _check(raw, SPEED_COLUMNS, ["speed", "ssd_design", "crest_k", "sag_k"], path)
        if s["name"].iloc[0] in set(sets["name"]):
            raise InputError(f"{path}: a set named {s['name'].iloc[0]!r} exists already; give yours another name")
        sets = pd.concat([sets, s], ignore_index=True)
        speeds = pd.concat([speeds, sp], ignore_index=True)
    bad_units = sets.loc[~sets["units"].isin(["metric", "us"]), "name"].tolist()
    if bad_units:
        raise InputError(f"criteria set {bad_units[0]!r}: units must be 'metric' or 'us'")
    return sets, speeds


def get_set(name: str, extra_files: list[str] | None = None) -> CriteriaSet:
    """The named criteria set.

    Parameters
    ----------
    name : str
        Set name, e.g. ``aashto-2018-metric``.
    extra_files : list of str, optional
        The user's criteria CSVs.

    Returns
    -------
    CriteriaSet
        The set, with AASHTO's side friction factors in its units when it has none of its own.

    Raises
    ------
    InputError
        On an unknown name, naming the nearest and the known ones.
    """
    sets, speeds = load_sets(extra_files)
    if name not in set(sets["name"]):
        near = difflib.get_close_matches(name, sets["name"].tolist(), n=1, cutoff=0.0)
        raise InputError(f"unknown criteria set {name!r}; did you mean {near[0]!r}? "
                         f"(known: {', '.join(sets['name'])}; see sightaudit criteria)")
    row = sets[sets["name"] == name].iloc[0].to_dict()
    table = speeds[speeds["set_name"] == name].sort_values("speed").reset_index(drop=True)
    fr = _read_friction(name)
    if not len(fr):  # a user's set without its own friction table: AASHTO's in its units
        base = "aashto-2018-metric" if row["units"] == "metric" else "aashto-2018-us"
        fr = _read_friction(base)
    return CriteriaSet(params=row, table=table, friction=fr)


def _read_friction(name: str) -> pd.DataFrame:
    path = sql_dir() / "criteria" / "side_friction.csv"
    fr = _check(_read_csv(path, "side friction"), ["set_name", "speed", "f_max", "marks"], ["speed", "f_max"], path)
    return fr[fr["set_name"] == name].sort_values("speed").reset_index(drop=True)


def template() -> str:
    """A CSV a user can fill in to add a set (one row per tabulated speed).

    Returns
    -------
    str
        Header and two example rows, from ``aashto-2018-metric`` renamed.
    """
    cols = SET_COLUMNS + [c for c in SPEED_COLUMNS if c != "set_name"]
    ex = get_set("aashto-2018-metric")
    rows = [",".join(cols)]
    for _, r in ex.table.head(2).iterrows():
        vals = [("my-agency-metric" if c == "name" else str(ex.params[c])) for c in SET_COLUMNS]
        vals += [str(r[c]) for c in SPEED_COLUMNS if c != "set_name"]
        rows.append(",".join(f'"{v}"' if "," in v else v for v in vals))
    return "\n".join(rows) + "\n"
