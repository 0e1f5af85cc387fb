"""Read road centrelines and ground data, and put every road in a metric CRS.

The readers live in modules named for what they read; this module gathers their public
names so that ``pipeline.ingest.readers`` keeps working as an import path:

- :mod:`~pipeline.ingest.files`: file checks, checksums, encodings, reading CSV, vector and
  Parquet files into DataFrames;
- :mod:`~pipeline.ingest.crs`: parsing CRSs, the metric working CRS, transforms;
- :mod:`~pipeline.ingest.roads`: road centrelines (:func:`read_roads`, :func:`merge_parts`);
- :mod:`~pipeline.ingest.ground`: DEM rasters and ground points;
- :mod:`~pipeline.ingest.features`: known structures, junctions and accesses.
"""

from __future__ import annotations

from .crs import is_ballpark, parse_crs, transform_geometries, transformer, working_crs, working_crs_key
from .features import Features, feature_chainages, read_features, structure_ranges
from .files import (GEOMETRY_TEXT_COLUMNS, VECTOR_SUFFIXES, check_file, csv_encoding, file_sha256,
                    geometry_text_column, id_strings, numeric_column, read_table)
from .ground import (DEM_SUFFIXES, DemGround, PointGround, dem_block_size, dem_cell_m, dem_window, map_to_pixel,
                     open_ground, read_dem_cells, read_dem_window)
from .roads import Roads, merge_parts, read_roads, unique_ids

__all__ = [
    "DEM_SUFFIXES", "GEOMETRY_TEXT_COLUMNS", "VECTOR_SUFFIXES",
    "DemGround", "Features", "PointGround", "Roads",
    "check_file", "csv_encoding", "dem_block_size", "dem_cell_m", "dem_window", "feature_chainages", "file_sha256",
    "geometry_text_column",
    "id_strings", "is_ballpark", "map_to_pixel", "merge_parts", "numeric_column", "open_ground", "parse_crs",
    "read_dem_cells", "read_dem_window", "read_features", "read_roads", "read_table", "structure_ranges",
    "transform_geometries",
    "transformer", "unique_ids", "working_crs", "working_crs_key",
]
