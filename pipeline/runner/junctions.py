"""Junctions found from the road network itself (one road's end meeting another road)."""

from __future__ import annotations

from ..core.config import Config
from ..ingest.readers import Roads
from ..sight.hazards import network_junctions


def network_junction_points(roads: Roads, cfg: Config) -> dict[str, list]:
    """Junctions where one road's end meets another road, found per working CRS.

    Parameters
    ----------
    roads : Roads
        The roads as read, with their working CRS (``work_key``) and geometry.
    cfg : Config
        The run's settings (``junctions.from_network``, ``junctions.snap_m``).

    Returns
    -------
    dict of str to list
        The junction points on each road, by road id (empty when
        ``junctions.from_network`` is off).
    """
    if not cfg["junctions.from_network"]:
        return {}
    t = roads.table
    out: dict[str, list] = {}
    for key in roads.work_crs:
        sel = t[(t["work_key"] == key) & t["geometry"].notna()]
        if len(sel) > 1:
            out |= network_junctions(dict(zip(sel["road_id"], sel["geometry"])), cfg["junctions.snap_m"])
    return out
