"""sightaudit: screening audit of rural road networks for stopping-sight-distance shortfalls on
crest and sag vertical curves, from open centreline and elevation data.

The public interface (:mod:`pipeline.api`)::

    import pipeline
    result = pipeline.audit("roads.gpkg", "dem.tif")      # or a GeoDataFrame, a points DataFrame
    result.deficiencies                                     # the ranked inventory, a DataFrame
    result.write("audit_out")                               # every output file

- :func:`audit` runs the whole audit and returns an :class:`AuditResult`;
- :func:`validate` checks the inputs without running;
- :class:`Settings` holds every setting, typed, with its default.

The stages, in the order the data flow (each a subpackage): ``ingest`` (roads, ground,
features), ``profile`` (stations, ground read on the road, artefacts), ``alignment`` (tangents
and parabolic curves, their uncertainty), ``sight`` (line of sight, headlight reach, hidden
zones), ``plan`` (horizontal curves, operating speed), ``evaluate`` (criteria and the SQL
rules, inventory), ``outputs`` (tables, workbook, GeoPackage, report), and ``runner`` (the
network: chunks, engines, work folder); ``core`` holds settings, units and errors.
"""

from .core.version import __version__

__all__ = ["audit", "validate", "AuditResult", "Settings", "__version__"]


def __getattr__(name: str):
    """The public interface, imported on first use: ``import pipeline`` (and the command's
    ``--help``) stays quick, and the stages' libraries load when an audit is asked for."""
    if name in ("audit", "validate", "AuditResult"):
        from . import api

        return getattr(api, name)
    if name == "Settings":
        from .core.config import Settings

        return Settings
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
