"""Output files: tables, workbook, GeoPackage, report and field sheets.

Modules, each named for what it writes:

``tables``       the CSV and Parquet tables, their column contracts and notes
``workbook``     ``deficiencies.xlsx``
``geopackage``   ``audit.gpkg``
``runfiles``     the staging folder and ``run.json``
``method``       the caution, the method lines and the priority formula
``report``       ``report.html`` (its style in ``report_style``)
``figures``      the report's figures (matplotlib)
``mapview``      the report's overview map (inline SVG)
``fieldsheets``  ``profiles.pdf``
``export``       ``write_outputs``, writing them all
"""

from .export import (CAUTION_TEXT, COLUMN_NOTES, column_note, curves_table, deficiencies_table, method_lines,
                     priority_formula, priority_terms, staging_folder, write_gpkg, write_outputs,
                     write_profiles_from_work, write_run_json, write_xlsx)
from .report import (SEVERITY_STYLE, build_report, curve_figure, curve_png, network_map_svg, png_data_uri,
                     report_pages, road_figure, write_profiles_pdf)

__all__ = ["CAUTION_TEXT", "COLUMN_NOTES", "SEVERITY_STYLE", "build_report", "column_note", "curve_figure",
           "curve_png", "curves_table", "deficiencies_table", "method_lines", "network_map_svg", "png_data_uri",
           "priority_formula", "priority_terms", "report_pages", "road_figure", "staging_folder", "write_gpkg",
           "write_outputs", "write_profiles_from_work", "write_profiles_pdf", "write_run_json", "write_xlsx"]
