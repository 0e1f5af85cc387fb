"""Known geometry for the bundled demo data and the benchmarks (not used by an audit)."""
