"""Evidence before assumption: what the input files say about themselves, checked against the
settings before any road is computed.

A contradiction stops the run (:class:`~pipeline.errors.InputError`, exit code 2, one line
naming what to fix):

- a column named in the settings that the roads file does not have (speed, id, class, AADT,
  name);
- a speed column whose name carries a unit (``speed_kmh``, ``speed_mph``) other than the unit
  the run reads speeds in (``roads.speed_unit``, else that of ``output.units``);
- a DEM whose band (or vertical CRS axis) states an elevation unit other than an explicit
  ``ground.elevation_unit``; without an explicit setting the DEM's own unit is used, with a note;
- ground data that cover less of the road length than ``checks.min_coverage_pct`` (the likely
  cause is named: a CRS not stated or wrong, lon/lat read as metres);
- grades steeper than ``artefacts.max_road_grade_pct`` over more than ``checks.max_steep_pct``
  of the road length: not a road network, usually elevations in feet read as metres.

Each check but the missing column can be overridden by naming it in ``checks.override``; the
run then goes on and says so in ``run.json`` and the report. Substitutions never pass in
silence: a road whose speed is missing or impossible gets a data note naming the value found
and the value used (:func:`speed_notes`), and the count of such roads is in the run summary.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..core.config import Config
from ..core.errors import InputError
from ..core.units import kmh_per_mph, metres_per
from ..ingest.columns import MAX_SPEED_KMH, UNIT_WORDS, overridden, speed_unit
from ..ingest.ground import UNIT_NAMES, dem_elevation_unit
from ..ingest.readers import DemGround, PointGround
from ..profile.sampler import GroundSampler
from ..profile.stations import station_chainages

def screen_speeds(table: pd.DataFrame, cfg: Config) -> np.ndarray:
    """Blank impossible speeds so that they are substituted, and say what was found.

    Parameters
    ----------
    table : pandas.DataFrame
        The road table; its ``speed_raw`` column (the run's speed unit) is replaced by a new
        column with impossible values (not positive, not finite, above 200 km/h) blanked.
    cfg : Config
        The run's settings (the speed unit).

    Returns
    -------
    numpy.ndarray of object
        Per road, what the column held where it was blank or impossible (text), else None.
    """
    raw = table["speed_raw"].to_numpy(dtype=float)
    factor = kmh_per_mph() if speed_unit(cfg) == "mph" else 1.0
    with np.errstate(invalid="ignore"):
        bad = ~(np.isfinite(raw) & (raw > 0) & (raw * factor <= MAX_SPEED_KMH))
    found = np.full(len(raw), None, dtype=object)
    col = cfg["roads.speed_column"]
    for i in np.flatnonzero(bad):
        found[i] = "empty" if np.isnan(raw[i]) else f"{raw[i]:g} {UNIT_WORDS[speed_unit(cfg)]} (impossible)"
        found[i] = f"{col} = {found[i]}"
    table["speed_raw"] = np.where(bad, np.nan, raw)
    return found


def speed_notes(table: pd.DataFrame, found: np.ndarray, cfg: Config) -> pd.DataFrame:
    """One data note per road judged at a substituted speed.

    Parameters
    ----------
    table : pandas.DataFrame
        The road table with ``speed_kmh`` and ``speed_basis`` settled.
    found : numpy.ndarray
        What each road's speed column held, from :func:`screen_speeds`.
    cfg : Config
        The run's settings.

    Returns
    -------
    pandas.DataFrame
        ``road_id, note, from_m, to_m, detail``: the value found and the value used.
    """
    if cfg["speed.source"] == "predicted":
        return pd.DataFrame(columns=["road_id", "note", "from_m", "to_m", "detail"])
    us = cfg["output.units"] == "us"

    def show(kmh):
        return f"{kmh / kmh_per_mph():.1f} mph" if us else f"{kmh:g} km/h"

    rows = []
    for rid, f, basis, v in zip(table["road_id"], found, table["speed_basis"], table["speed_kmh"]):
        if f is None:
            continue
        if not isinstance(basis, str):
            used = "none: road skipped"
        elif basis.startswith("class default"):
            used = f"{show(v)}, the {basis}"
        else:
            used = (f"predicted operating speed (FHWA-RD-99-171) station by station, at most the desired speed "
                    f"{show(cfg['speed.desired_kmh'])} (speed.desired_kmh, an assumption)")
        rows.append({"road_id": rid, "note": "speed substituted", "from_m": np.nan, "to_m": np.nan,
                     "detail": f"found {f}; judged at {used}"})
    return pd.DataFrame(rows, columns=["road_id", "note", "from_m", "to_m", "detail"])


# ------------------------------------------------------------------------ ground
def settle_elevation_unit(ground, cfg: Config, notes: list[str]) -> dict:
    """Use the DEM's own elevation unit; refuse an explicit setting that contradicts it.

    Parameters
    ----------
    ground : DemGround or PointGround
        The ground model (its ``metres_per_unit`` is set from the DEM's unit where the DEM
        states one and no unit was set explicitly).
    cfg : Config
        The run's settings (``ground.elevation_unit``, ``checks.override``).
    notes : list of str
        Where what was assumed or overridden is reported (appended to).

    Returns
    -------
    dict
        ``elevation_unit``, ``elevation_unit_source`` and, for a DEM, what it states.

    Raises
    ------
    InputError
        The DEM states another unit than an explicit ``--elevation-unit``.
    """
    declared = cfg["ground.elevation_unit"]
    info = {"elevation_unit": declared, "elevation_unit_source": "setting" if "ground.elevation_unit"
            in cfg.explicit else "default"}
    if not isinstance(ground, DemGround):
        return info
    found, where = dem_elevation_unit(ground)
    info["dem_states"] = where
    if found is None or found == declared:
        if found:
            info["elevation_unit_source"] = f"DEM ({where})"
        return info
    if "ground.elevation_unit" in cfg.explicit:
        if not overridden(cfg, "elevation_unit"):
            raise InputError(
                f"{ground.path}: the DEM states its elevations in {UNIT_NAMES[found]} ({where}) but "
                f"--elevation-unit says {declared!r}; drop --elevation-unit or correct it (or add 'elevation_unit' "
                f"to checks.override to keep it)")
        notes.append(f"elevations read in {UNIT_NAMES[declared]} as set, against the DEM's {where} "
                     f"(checks.override = elevation_unit)")
        return info
    ground.metres_per_unit = metres_per(found)
    notes.append(f"elevations read in {UNIT_NAMES[found]} as the DEM states ({where}), not the default "
                 f"{declared!r}")
    return info | {"elevation_unit": found, "elevation_unit_source": f"DEM ({where})"}


# station spacing of the probe that measures grades before a run (m)
GRADE_BASE_M = 25.0


def probe_ground(roads, ground, cfg: Config, step_m: float = GRADE_BASE_M, max_roads: int | None = 300) -> dict:
    """Sample the ground along the roads and measure coverage and grades.

    Parameters
    ----------
    roads : Roads
        The roads read.
    ground : DemGround or PointGround
        The ground model.
    cfg : Config
        The run's settings.
    step_m : float
        Sampling step along each road (m).
    max_roads : int or None
        At most this many roads, spread over the file (None = all).

    Returns
    -------
    dict
        ``coverage_pct``, ``roads_without_ground`` (ids), ``grade_pct`` (percentiles 50, 90, 99
        of |grade| over ``step_m``, %), ``steep_pct`` (share of length steeper than
        ``artefacts.max_road_grade_pct``, %), ``spacing_m`` (the ground data's own spacing on
        each road sampled: DEM cell or ground-point spacing, m), ``sampled_km`` and the
        sampler's notes.
    """
    t = roads.table
    ok = t["geometry"].notna() & t["skip_reason"].isna()
    rows = t[ok]
    if max_roads is not None and len(rows) > max_roads:
        rows = rows.iloc[np.linspace(0, len(rows) - 1, max_roads).round().astype(int)]
    sampler = GroundSampler(ground, roads.work_crs, cfg.copy_with({"profile.step_m": step_m}))
    covered = total = 0
    grades, no_ground, spacing = [], [], []
    for _, row in rows.iterrows():
        st = station_chainages(row["length_m"], step_m)
        z, _, _, extra = sampler.sample(row["geometry"], row["work_key"], row["source_id"], st)
        spacing.append(extra["cell_m"] if extra["cell_m"] is not None else extra["spacing_m"])
        have = np.isfinite(z)
        covered += int(have.sum())
        total += len(st)
        if not have.any():
            no_ground.append(row["road_id"])
        if len(st) > 1:
            g = np.diff(z) / np.diff(st)
            grades.append(np.abs(g[np.isfinite(g)]) * 100.0)
    g = np.concatenate(grades) if grades else np.zeros(0)
    steep = float(100.0 * np.mean(g > cfg["artefacts.max_road_grade_pct"])) if len(g) else 0.0
    return {
        "coverage_pct": 100.0 * covered / total if total else 0.0,
        "roads_sampled": int(len(rows)),
        "roads_without_ground": no_ground,
        "sampled_km": total * step_m / 1000.0,
        "grade_pct": {f"p{q}": float(np.percentile(g, q)) for q in (50, 90, 99)} if len(g) else {},
        "steep_pct": steep,
        "spacing_m": [v for v in spacing if v is not None and np.isfinite(v)],
        "sampler_notes": sampler.notes,
    }


def likely_cause(roads, ground) -> str:
    """The likeliest reason ground data miss the roads, for the refusal message.

    Parameters
    ----------
    roads : Roads
        The roads read.
    ground : DemGround or PointGround
        The ground model.

    Returns
    -------
    str
        What to check or set (a CRS not stated, lon/lat read as metres, road ids).
    """
    if isinstance(ground, PointGround) and ground.mode == "xy" and ground.rows:
        x, y = ground.arrays["x"], ground.arrays["y"]
        lonlat = np.nanmax(np.abs(x)) <= 180 and np.nanmax(np.abs(y)) <= 90
        if lonlat and not roads.source_crs.is_geographic and getattr(ground, "crs_assumed", False):
            return ("the ground points' x, y look like longitude/latitude but no CRS was stated, so they were "
                    "taken in the roads' CRS; add --ground-crs EPSG:4326 (or the points' CRS)")
        if getattr(ground, "crs_assumed", False):
            return "no CRS was stated for the ground points; state it with --ground-crs"
        return "check the ground points' CRS (--ground-crs) and road ids"
    if isinstance(ground, PointGround):
        return "check that the ground points' road ids match the roads file"
    return "check the DEM's CRS (--ground-crs) and that it covers the roads"


def examine(roads, ground, cfg: Config, strict: bool = True) -> dict:
    """All the ground checks of a run: elevation unit, coverage, grades. Returns what was found
    (for ``run.json``, with ``notes`` and ``refusals``); with ``strict`` the first refusal raises
    :class:`InputError` unless its check is overridden."""
    notes: list[str] = []
    refusals: list[str] = []
    info = settle_elevation_unit(ground, cfg, notes)
    probe = probe_ground(roads, ground, cfg, max_roads=300 if strict else None)
    info |= {k: v for k, v in probe.items() if k not in ("sampler_notes", "spacing_m")}
    info["ground_spacing_m"] = float(np.median(probe["spacing_m"])) if probe["spacing_m"] else None
    info["roads_without_ground"] = len(probe["roads_without_ground"])
    if not strict:
        info["roads_without_ground_ids"] = probe["roads_without_ground"]
        notes += probe["sampler_notes"]
    if probe["coverage_pct"] < cfg["checks.min_coverage_pct"]:
        msg = (f"{ground.path}: the ground data cover {probe['coverage_pct']:.1f} % of the road length "
               f"(checks.min_coverage_pct = {cfg['checks.min_coverage_pct']:g}); {likely_cause(roads, ground)}")
        if overridden(cfg, "coverage"):
            notes.append(msg + " (run continued: checks.override = coverage)")
        else:
            refusals.append(msg)
    if probe["steep_pct"] > cfg["checks.max_steep_pct"]:
        msg = (f"{ground.path}: {probe['steep_pct']:.1f} % of the road length is steeper than "
               f"{cfg['artefacts.max_road_grade_pct']:g} % (checks.max_steep_pct = {cfg['checks.max_steep_pct']:g}): "
               f"not a road profile; elevations are read in {UNIT_NAMES[info['elevation_unit']]}: check "
               f"--elevation-unit")
        if overridden(cfg, "grades"):
            notes.append(msg + " (run continued: checks.override = grades)")
        else:
            refusals.append(msg)
    info["overridden"] = list(cfg["checks.override"])
    info["notes"] = notes
    info["refusals"] = refusals
    if strict and refusals:
        raise InputError(refusals[0])
    return info
