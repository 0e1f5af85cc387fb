"""Check the inputs of an audit without running it (``sightaudit validate``).

Reads the roads and the ground model as a run would, and reports what it found:
roads, CRS, lengths, speed coverage, how much of the road length the ground data
cover, and the problems a run would meet (roads it would skip, and why).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import rasterio

from ..core.config import Config
from ..evaluate.quality import cannot_judge
from ..ingest.readers import DemGround, open_ground, read_roads
from ..profile.corridor import MAX_FILTER_CELLS, resolution_length_m
from .evidence import examine, screen_speeds
from .speeds import resolve_speeds


def check_inputs(roads_path, ground_path, cfg: Config) -> dict:
    """What a run would find in the inputs. File-level faults raise ``InputError`` as in a run.

    Parameters
    ----------
    roads_path, ground_path : str or pathlib.Path
        The roads file and the ground model (DEM or ground points).
    cfg : Config
        The run's settings.

    Returns
    -------
    dict
        The roads file, CRS, road count and lengths, speed bases, the ground model and its
        coverage, grades, elevation unit, the problems a run would meet, what the ground data
        support, refusals, and how many roads would be judged at substituted speeds or skipped.
    """
    roads = read_roads(roads_path, cfg)
    ground = open_ground(ground_path, cfg, roads)
    t = roads.table
    evidence = examine(roads, ground, cfg, strict=False)
    found = screen_speeds(t, cfg)
    _, basis, reason = resolve_speeds(t, cfg)
    ok = t["skip_reason"].isna() | ~t["skip_reason"].map(lambda v: isinstance(v, str))
    problems = _skip_problems(t, reason) + roads.notes + evidence["notes"]
    substituted = _substituted(t, found, basis, cfg)
    problems += substituted
    no_ground = [r for r in evidence.pop("roads_without_ground_ids", [])]
    problems += [f"road {rid}: no ground data along it (would be skipped)" for rid in no_ground]
    info = {
        "roads_file": str(roads.path),
        "roads_crs": roads.source_crs.name,
        "working_crs": sorted({c.name for c in roads.work_crs.values()}),
        "roads": int(len(t)),
        "roads_usable_geometry": int(ok.sum()),
        **_lengths(t.loc[ok, "length_m"].to_numpy(dtype=float)),
        "speed": _speed_kinds(basis, reason),
        "ground_file": str(ground.path),
        "ground": ground.describe(),
        "ground_coverage_pct": evidence["coverage_pct"],
        "grade_pct": evidence["grade_pct"],
        "steep_pct": evidence["steep_pct"],
        "elevation_unit": f"{evidence['elevation_unit']} ({evidence['elevation_unit_source']})",
        "problems": problems,
        "data_quality": _data_support(ground, [evidence["ground_spacing_m"]], cfg),
        "refusals": evidence["refusals"],
        "substituted_speeds": len(substituted),
        "would_skip": len({r for r, a, b in zip(t["road_id"], t["skip_reason"], reason)
                           if isinstance(a, str) or isinstance(b, str)} | set(no_ground)),
    }
    if isinstance(ground, DemGround):
        info["ground"] |= _dem_grid(ground)
    return info


def _skip_problems(t: pd.DataFrame, reason) -> list[str]:
    """Roads a run would skip: first for their geometry, then for want of a speed."""
    problems = [f"road {rid}: {why} (would be skipped)"
                for rid, why in zip(t["road_id"], t["skip_reason"]) if isinstance(why, str)]
    return problems + [f"road {rid}: {why} (would be skipped)"
                       for rid, why in zip(t["road_id"], reason) if isinstance(why, str)]


def _substituted(t: pd.DataFrame, found, basis, cfg: Config) -> list[str]:
    """One problem per road whose speed column was unusable and would be judged at a substituted
    speed (only when speeds come from the attribute)."""
    return [f"road {rid}: found {f}; would be judged at a substituted speed ({b})"
            for rid, f, b in zip(t["road_id"], found, basis)
            if f is not None and isinstance(b, str) and cfg["speed.source"] == "attribute"]


def _lengths(lengths: np.ndarray) -> dict:
    """Total, shortest, median and longest length of the usable roads."""
    return {
        "length_km": float(lengths.sum() / 1000.0) if len(lengths) else 0.0,
        "length_min_m": float(lengths.min()) if len(lengths) else 0.0,
        "length_median_m": float(np.median(lengths)) if len(lengths) else 0.0,
        "length_max_m": float(lengths.max()) if len(lengths) else 0.0,
    }


def _speed_kinds(basis, reason) -> dict[str, int]:
    """How many roads would be judged on each speed basis (class defaults counted together)."""
    kinds: dict[str, int] = {}
    for b in basis:
        if isinstance(b, str):
            key = "class default" if b.startswith("class default") else b
            kinds[key] = kinds.get(key, 0) + 1
    kinds["none (road skipped)"] = int(sum(isinstance(r, str) for r in reason))
    return {k: v for k, v in kinds.items() if v}


def _dem_grid(ground: DemGround) -> dict:
    """The DEM's cell size and size in cells."""
    with rasterio.open(ground.path) as src:
        return {"cell_size": [abs(src.res[0]), abs(src.res[1])], "size": [src.width, src.height]}


def _data_support(ground, spacing: list, cfg: Config) -> dict:
    """What the ground data can support, before a run (:mod:`pipeline.evaluate.quality`): their own
    spacing (DEM cell, or ground points' median spacing), the shortest feature a profile at the
    run's station step resolves, and what they cannot judge."""
    kind = "dem" if getattr(ground, "kind", "") == "dem" else "points"
    v = np.array([x for x in spacing if x is not None and np.isfinite(x)], dtype=float)
    own = float(np.median(v)) if len(v) else None
    # a coarse DEM's profile is also filtered over up to MAX_FILTER_CELLS cells along each grid
    # axis (pipeline.profile.corridor); the run measures the filter road by road, here the worst case
    filt = np.hypot(MAX_FILTER_CELLS, 1.0) * own if (kind == "dem" and own is not None and own > cfg["profile.corridor_max_cell_m"]) else 0.0
    res = resolution_length_m(own if kind == "dem" else None, own if kind == "points" else None,
                              cfg["profile.step_m"], filt) if own is not None else None
    return {"ground_kind": kind, "spacing_m": own, "resolution_m": res,
            "cannot_judge": cannot_judge(kind, own, res, cfg["confidence.max_cell_for_verdict_m"])}
