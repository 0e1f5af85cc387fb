"""Paths that would break SQL text: every file reaches DuckDB as a value, never pasted in."""

from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd


def _line_inputs(folder):
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "r.csv").write_text('road_id,wkt,speed_kmh\nA,"LINESTRING (0 0, 400 0)",60\n')
    (folder / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,200,3\nA,400,5\n")
    return folder / "r.csv", folder / "g.csv"


def test_output_path_with_apostrophe_and_brackets(tmp_path, run_cli):
    """`--out "audits/q'dir"` used to end in a DuckDB ParserException (issue 12)."""
    roads, ground = _line_inputs(tmp_path / "in'puts [1]")
    out = tmp_path / "audits" / "q'dir"
    code, _, err = run_cli("run", "--roads", roads, "--ground", ground, "--roads-crs", "EPSG:32633",
                           "--out", out, "-q")
    assert code == 0, err
    p = pd.read_parquet(out / "profiles.parquet")
    # linear interpolation between the given points (common practice, no source)
    np.testing.assert_allclose(p["ground_z_m"], 1 + p["chainage_m"] / 100.0)
    assert (out / "run.json").is_file() and (out / "deficiencies.xlsx").is_file()


def test_parquet_relation_reads_a_path_with_quote_semicolon_and_glob_characters(tmp_path):
    """The helper reads exactly the listed files (reference: pandas.read_parquet of the same files)."""
    from pipeline.core.sqlrun import parquet_relation, write_parquet_from

    folder = tmp_path / "a'b; DROP [x]*"
    folder.mkdir()
    frames = [pd.DataFrame({"v": [1.0, 2.0]}), pd.DataFrame({"v": [5.0], "w": ["x"]})]
    files = []
    for i, f in enumerate(frames):
        files.append(folder / f"p{i}.parquet")
        f.to_parquet(files[-1])
    with duckdb.connect() as con:
        rel = parquet_relation(con, files)
        got = rel.df()
        write_parquet_from(rel, folder / "o'ut.parquet")
    ref = pd.concat([pd.read_parquet(f) for f in files], ignore_index=True)
    assert got["v"].sum() == ref["v"].sum() == 8.0
    assert list(got.columns) == ["v", "w"]
    back = pd.read_parquet(folder / "o'ut.parquet")
    assert back["v"].tolist() == got["v"].tolist()


def test_no_path_is_formatted_into_sql_text():
    """A source scan: no read_parquet('...') or COPY ... TO '...' built from an f-string
    remains in the package (common practice, no source: parameters instead of pasting)."""
    import re
    from pathlib import Path

    import pipeline

    pkg = Path(pipeline.__file__).parent
    bad = []
    for py in pkg.glob("*.py"):
        text = py.read_text()
        for m in re.finditer(r"f[\"'][^\n]*(read_parquet\('\{|TO '\{|read_csv\('\{)", text):
            bad.append(f"{py.name}: {m.group(0)[:60]}")
    assert not bad, bad
