"""sightaudit: screening audit of rural road networks for stopping-sight-distance
shortfalls on crest and sag vertical curves, from open centreline and elevation data.

Each stage of the audit is a module with plain functions:

- :mod:`pipeline.ingest`    read roads and ground data, choose a metric working CRS
- :mod:`pipeline.profile`   chainage, stations and ground elevation along each road
- :mod:`pipeline.batch`     run the stages over a network and account for every road
- :mod:`pipeline.export`    write the output files
- :mod:`pipeline.cli`       the ``sightaudit`` command (a thin layer over the above)
"""

__version__ = "0.1.0"
