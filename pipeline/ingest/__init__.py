"""Input readers: road centrelines, ground models (DEM or points), structures and junctions."""
