"""The profile stage for one road: stations along the centreline, ground elevation at each
(from a DEM or ground points), artefacts masked (spikes, pits, bridge or culvert dips, humps,
known structures), and what the ground data resolve."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..alignment.fit import noise_sigma
from ..core.config import Config
from ..profile.artefacts import detect, implausible_grades
from ..profile.corridor import dem_vertical_error_m, resolution_length_m
from ..profile.sampler import GroundSampler
from ..profile.stations import FILLED, FLAG_NAMES, MASKED, MISSING, Polyline, run_lengths, station_chainages

Note = tuple[str, float | None, float | None, str]  # (note, from_m, to_m, detail)


@dataclass
class ProfileStage:
    """What the profile stage found for one road.

    ``skip`` is the reason the road is not evaluated (``None`` where it is); ``notes`` are
    kept either way. ``profile`` (one row per station) and ``data`` (what the ground data
    resolve: ``cell_m``, ``spacing_m``, ``vertical_error_m``, ``resolution_m``) are set only
    for a road that is evaluated.
    """

    notes: list[Note] = field(default_factory=list)
    polyline: Polyline | None = None
    profile: pd.DataFrame | None = None
    data: dict = field(default_factory=dict)
    skip: str | None = None


def artefact_options(cfg: Config) -> dict:
    """The artefact detector's options from the settings.

    Parameters
    ----------
    cfg : Config
        The run's settings (``artefacts.*``: ``spike_m`` and ``max_width_m`` in m,
        ``max_grade_pct`` in %, ``min_k`` in m per % of grade change).

    Returns
    -------
    dict
        ``spike_m, max_grade_pct, min_k, max_width_m``.
    """
    return {k: cfg[f"artefacts.{k}"] for k in ("spike_m", "max_grade_pct", "min_k", "max_width_m")}


def road_profile(row: pd.Series, sampler: GroundSampler, cfg: Config, to_source) -> ProfileStage:
    """Stations and ground elevation for one road (the profile stage).

    Parameters
    ----------
    row : pandas.Series
        The road's row of the roads table (``road_id``, ``geometry`` in the working CRS (m),
        ``length_m``, ``work_key``, ``source_id``, ``skip_reason``).
    sampler : GroundSampler
        Reads ground elevation along the road, and the known structures on it.
    cfg : Config
        The run's settings (``profile.step_m``, station spacing in m; ``artefacts.*``;
        ``ground.vertical_error_m``).
    to_source : pyproj.Transformer or None
        Working CRS to the roads' own CRS, for the stations' ``x, y``; ``None`` where they
        are the same.

    Returns
    -------
    ProfileStage
        The profile (``road_id, chainage_m, x, y, ground_z_m`` (m), ``ground_flag``,
        ``ground_offset_m``, ``filter_m``), the notes, and the ground data's resolution; or
        the reason the road is skipped, with the notes made so far.
    """
    stage = ProfileStage()
    if isinstance(row["skip_reason"], str):
        stage.skip = row["skip_reason"]
        return stage
    line = row["geometry"]
    poly = stage.polyline = Polyline(line)
    step = cfg["profile.step_m"]
    stations = station_chainages(row["length_m"], step)
    z, flag, notes, extra = sampler.sample(line, row["work_key"], row["source_id"], stations, poly)
    stage.notes.extend(notes)
    have = np.isfinite(z)
    stage.skip = _coverage_skip(have)
    if stage.skip:
        return stage
    if not have.all():
        stage.notes.append(("road partly without ground data", None, None,
                            f"ground data cover {100 * have.mean():.0f} % of the road; evaluated over that part only"))
    mask, art_notes = detect(stations, z, step, noise_sigma(z), artefact_options(cfg),
                             sampler.structure_ranges(row, line))
    stage.notes.extend(art_notes)
    flag = np.where(mask & (flag != MISSING), MASKED, flag).astype(np.int8)
    stage.skip = implausible_grades(stations, np.where(mask, np.nan, z), cfg["artefacts.max_road_grade_pct"]) or None
    if stage.skip:
        return stage
    stage.notes.extend(_gap_notes(stations, ~have, flag, step))
    stage.profile = _profile_frame(row["road_id"], stations, poly, to_source, z, flag, extra)
    stage.data = _data_resolution(extra, cfg)
    return stage


def _coverage_skip(have: np.ndarray) -> str | None:
    """Why a road with ground data at only the stations ``have`` cannot be evaluated, if so."""
    if not have.any():
        return "no ground data along the road (off the DEM, all nodata, or no ground points)"
    if have.sum() < 3:
        return "fewer than 3 stations with ground data"
    return None


def _gap_notes(stations: np.ndarray, missing: np.ndarray, flag: np.ndarray, step: float) -> list[Note]:
    """A note for every run of stations without ground data, then for every short gap filled."""
    notes = []
    if missing.any():
        for a, b in run_lengths(missing):
            notes.append(("ground data missing", float(stations[a]), float(stations[b - 1]),
                          f"{b - a} station(s), {(b - a) * step:g} m, without ground data; "
                          f"not evaluated there"))
    if (flag == FILLED).any():
        for a, b in run_lengths(flag == FILLED):
            notes.append(("short ground gap interpolated", float(stations[a]), float(stations[b - 1]),
                          "elevations filled linearly across the gap and marked 'filled'"))
    return notes


def _profile_frame(road_id: str, stations: np.ndarray, poly: Polyline, to_source, z: np.ndarray,
                   flag: np.ndarray, extra: dict) -> pd.DataFrame:
    """One row per station: position (in the roads' own CRS), ground elevation and its flag,
    the offset the ground was read at and the length it was filtered over."""
    x, y = poly.at(stations)
    if to_source is not None:
        x, y = to_source.transform(x, y)
    return pd.DataFrame({
        "road_id": road_id,
        "chainage_m": stations,
        "x": np.asarray(x, dtype=float),
        "y": np.asarray(y, dtype=float),
        "ground_z_m": z,
        "ground_flag": FLAG_NAMES[flag],
        "ground_offset_m": extra["offset_m"],
        "filter_m": extra["filter_m"],
    })


def _data_resolution(extra: dict, cfg: Config) -> dict:
    """What the ground data resolve: DEM cell or point spacing (m), vertical error (m, stated
    or assumed from the cell size) and the resolution length (m)."""
    stated = float(cfg["ground.vertical_error_m"])
    return {"cell_m": extra["cell_m"], "spacing_m": extra["spacing_m"],
            "vertical_error_m": stated if stated > 0 else dem_vertical_error_m(extra["cell_m"]),
            "resolution_m": resolution_length_m(extra["cell_m"], extra["spacing_m"], cfg["profile.step_m"],
                                                float(np.median(extra["filter_m"])))}
