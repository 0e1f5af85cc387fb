"""The ids of the report's curve pages and road sections, which the report and its map link to."""

from __future__ import annotations


def _slug(road_id) -> str:
    """A road id as letters, digits and hyphens (other characters become hyphens)."""
    return "".join(ch if ch.isascii() and ch.isalnum() else "-" for ch in str(road_id))


def curve_anchor(road_id, curve_no) -> str:
    """The id of a curve's page in the report (letters, digits and hyphens only)."""
    return f"curve-{_slug(road_id)}-{int(curve_no)}"


def road_anchor(road_id) -> str:
    """The id of a road's section of the report's road-by-road index (letters, digits and hyphens
    only).

    Two ids that differ only in characters other than ASCII letters and digits would share a
    slug; :func:`pipeline.outputs.report._road_anchors` tells them apart by a number.
    """
    return f"road-{_slug(road_id)}"
