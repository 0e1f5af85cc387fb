"""CSV centrelines: the geometry column may be called wkt, WKT, geometry or geom (issue 12)."""

from __future__ import annotations

import json

import pytest
import shapely

WKT = "LINESTRING (0 0, 300 0, 300 400)"


@pytest.mark.parametrize("column", ["wkt", "WKT", "geometry", "geom"])
def test_geometry_column_names_accepted_and_reported(tmp_path, run_cli, column):
    """The length of the line is measured as shapely measures the WKT (reference: shapely.length
    of the same WKT: 300 + 400 = 700 m); the run names the column it read."""
    (tmp_path / "r.csv").write_text(f'road_id,{column},speed_kmh\nA,"{WKT}",60\n')
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,700,8\n")
    out = tmp_path / "o"
    code, _, err = run_cli("run", "--roads", tmp_path / "r.csv", "--ground", tmp_path / "g.csv",
                           "--roads-crs", "EPSG:32633", "--out", out, "-q")
    assert code == 0, err
    import pandas as pd

    roads = pd.read_csv(out / "roads.csv")
    assert roads["length_m"].iloc[0] == pytest.approx(shapely.length(shapely.from_wkt(WKT)))
    run = json.loads((out / "run.json").read_text())
    assert any(f"column {column!r}" in n for n in run["notes"]), run["notes"]


def test_two_geometry_columns_need_a_choice(tmp_path, run_cli):
    (tmp_path / "r.csv").write_text(f'road_id,geometry,geom\nA,"{WKT}","{WKT}"\n')
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,700,8\n")
    code, _, err = run_cli("run", "--roads", tmp_path / "r.csv", "--ground", tmp_path / "g.csv",
                           "--roads-crs", "EPSG:32633", "--out", tmp_path / "o", "-q")
    assert code == 2
    assert "roads.wkt_column" in err and "Traceback" not in err
    assert len(err.strip().splitlines()) == 1


def test_explicit_wkt_column_that_does_not_exist_is_refused(tmp_path, run_cli):
    (tmp_path / "r.csv").write_text(f'road_id,wkt\nA,"{WKT}"\n')
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,700,8\n")
    (tmp_path / "c.toml").write_text('[roads]\nwkt_column = "shape"\n')
    code, _, err = run_cli("run", "--roads", tmp_path / "r.csv", "--ground", tmp_path / "g.csv",
                           "--roads-crs", "EPSG:32633", "--config", tmp_path / "c.toml", "--out", tmp_path / "o", "-q")
    assert code == 2
    assert "'shape'" in err and len(err.strip().splitlines()) == 1
