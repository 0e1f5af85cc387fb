"""Output files: tables, workbook, GeoPackage, report and field sheets."""
