"""The network runner: per-road stages, chunks, engines, the work folder and input checks."""
