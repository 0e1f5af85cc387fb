"""Input readers: road centrelines, ground models (DEM or points), structures and junctions.

Modules: :mod:`~pipeline.ingest.files` (file checks and table reading),
:mod:`~pipeline.ingest.crs` (CRSs and the metric working CRS), :mod:`~pipeline.ingest.roads`,
:mod:`~pipeline.ingest.ground`, :mod:`~pipeline.ingest.features`, and
:mod:`~pipeline.ingest.columns` (the roads file's column evidence).
:mod:`~pipeline.ingest.readers` gathers the readers under their former import path.
"""

from .columns import check_road_columns
from .crs import is_ballpark, parse_crs, transformer, working_crs, working_crs_key
from .features import Features, feature_chainages, read_features, structure_ranges
from .files import csv_encoding, file_sha256, read_table
from .ground import DemGround, PointGround, dem_cell_m, map_to_pixel, open_ground, read_dem_window
from .roads import Roads, merge_parts, read_roads

__all__ = [
    "DemGround", "Features", "PointGround", "Roads",
    "check_road_columns", "csv_encoding", "dem_cell_m", "feature_chainages", "file_sha256", "is_ballpark",
    "map_to_pixel", "merge_parts", "open_ground", "parse_crs", "read_dem_window", "read_features", "read_roads",
    "read_table", "structure_ranges", "transformer", "working_crs", "working_crs_key",
]
