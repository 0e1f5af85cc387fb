"""Evidence before assumption (issue 12): contradictions in the inputs stop the run with exit
code 2 and one line; substitutions are reported; validate is honest."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest


def _error_line(err: str) -> str:
    lines = [l for l in err.strip().splitlines() if l.startswith("sightaudit: error:")]
    assert len(lines) == 1, err
    assert "Traceback" not in err
    return lines[0]


@pytest.fixture(scope="module")
def lonlat_points(tmp_path_factory, samples):
    """The sample's ground points with x, y turned into lon/lat (reference: pyproj)."""
    import pyproj

    p = pd.read_csv(samples["points"])
    tr = pyproj.Transformer.from_crs("EPSG:32633", "EPSG:4326", always_xy=True)
    p["x"], p["y"] = tr.transform(p["x"].to_numpy(), p["y"].to_numpy())
    path = tmp_path_factory.mktemp("ll") / "points_lonlat.csv"
    p.to_csv(path, index=False)
    return path


def test_misspelled_speed_column_is_refused(tmp_path, samples, run_cli):
    code, _, err = run_cli("run", "--roads", samples["roads"], "--ground", samples["dem"], "--speed-column", "nope",
                           "--out", tmp_path / "o", "-q")
    assert code == 2
    line = _error_line(err)
    assert "'nope'" in line and "--speed-column" in line
    assert not (tmp_path / "o").exists()


def test_us_run_on_kmh_speeds_is_refused(tmp_path, samples, run_cli):
    code, _, err = run_cli("run", "--roads", samples["roads"], "--ground", samples["dem"], "--units", "us",
                           "--out", tmp_path / "o", "-q")
    assert code == 2
    line = _error_line(err)
    assert "speed_kmh" in line and "mph" in line
    code, _, err = run_cli("run", "--roads", samples["roads"], "--ground", samples["dem"], "--units", "us",
                           "--speed-column", "speed_kmh", "--out", tmp_path / "o", "-q")
    assert code == 2 and "roads.speed_unit" in _error_line(err)


def test_metric_dem_declared_in_us_survey_feet_is_refused(tmp_path, samples, run_cli):
    """The sample DEM's band states 'metre' (read back with rasterio: the reference)."""
    import rasterio

    with rasterio.open(samples["dem"]) as src:
        assert src.units[0] == "metre"
    code, _, err = run_cli("run", "--roads", samples["roads"], "--ground", samples["dem"], "--elevation-unit",
                           "us_ft", "--out", tmp_path / "o", "-q")
    assert code == 2
    line = _error_line(err)
    assert "metres" in line and "--elevation-unit" in line
    code, out, err = run_cli("validate", "--roads", samples["roads"], "--ground", samples["dem"],
                             "--elevation-unit", "us_ft")
    assert code == 2 and "none found" not in out and "can be audited" not in out


def test_lonlat_points_without_crs_are_refused_with_the_cause(tmp_path, samples, lonlat_points, run_cli):
    code, _, err = run_cli("run", "--roads", samples["roads"], "--ground", lonlat_points, "--out", tmp_path / "o",
                           "-q")
    assert code == 2
    line = _error_line(err)
    assert "0.0 %" in line and "--ground-crs EPSG:4326" in line
    code, out, err = run_cli("validate", "--roads", samples["roads"], "--ground", lonlat_points)
    assert code == 2
    assert "can be audited" not in out and "0.0 %" in out


def test_validate_shows_grades_coverage_and_substituted_speeds(samples, run_cli):
    """The demo's WV-08 has no speed (read with geopandas: the reference), so validate must not
    say the inputs 'can be audited' without a word about it."""
    import geopandas as gpd

    roads = gpd.read_file(samples["roads"])
    missing = roads.loc[~(roads["speed_kmh"] > 0), "road_id"].tolist()
    assert missing == ["WV-08"]
    code, out, _ = run_cli("validate", "--roads", samples["roads"], "--ground", samples["dem"])
    assert code == 0
    assert "can be audited" not in out
    assert "1 road(s) would be judged at substituted speeds" in out
    assert "grades over 25 m: median" in out and "ground data cover" in out
    assert "WV-08" in out


def _steep_inputs(tmp_path, rise):
    (tmp_path / "r.csv").write_text('road_id,wkt,speed_kmh\nA,"LINESTRING (0 0, 1000 0)",60\n')
    (tmp_path / "g.csv").write_text("".join(["road_id,chainage_m,z\n"] +
                                            [f"A,{c},{rise * c / 1000.0:.3f}\n" for c in range(0, 1001, 10)]))
    return tmp_path / "r.csv", tmp_path / "g.csv"


def test_implausible_grades_for_the_elevation_unit_are_refused(tmp_path, run_cli):
    """A 1000 m road rising 300: 30 % if the elevations are metres (grade = rise / run, common
    practice, no source), beyond the 25 % no road has; 9.1 % in feet (0.3048 m, NIST)."""
    roads, ground = _steep_inputs(tmp_path, 300.0)
    code, _, err = run_cli("run", "--roads", roads, "--ground", ground, "--roads-crs", "EPSG:32633",
                           "--out", tmp_path / "o", "-q")
    assert code == 2
    assert "--elevation-unit" in _error_line(err)
    code, _, err = run_cli("run", "--roads", roads, "--ground", ground, "--roads-crs", "EPSG:32633",
                           "--elevation-unit", "ft", "--out", tmp_path / "o", "-q")
    assert code == 0, err
    p = pd.read_parquet(tmp_path / "o" / "profiles.parquet")
    np.testing.assert_allclose(np.gradient(p["ground_z_m"], p["chainage_m"]), 0.3 * 0.3048, rtol=1e-6)


def test_overridden_check_runs_and_says_so(tmp_path, run_cli):
    roads, ground = _steep_inputs(tmp_path, 300.0)
    (tmp_path / "c.toml").write_text('[checks]\noverride = ["grades"]\n')
    code, _, err = run_cli("run", "--roads", roads, "--ground", ground, "--roads-crs", "EPSG:32633",
                           "--config", tmp_path / "c.toml", "--out", tmp_path / "o", "-q")
    assert code == 0, err
    run = json.loads((tmp_path / "o" / "run.json").read_text())
    assert run["evidence"]["overridden"] == ["grades"]
    assert any("checks.override = grades" in n for n in run["notes"])
    assert "overridden by the settings" in (tmp_path / "o" / "report.html").read_text()


def test_explicit_speed_unit_reads_kmh_in_a_us_run(tmp_path, run_cli):
    """roads.speed_unit = 'kmh' overrides the unit of a US run: 96.56064 km/h is 60 mph
    (1 mile = 1.609344 km, NIST SP 811)."""
    (tmp_path / "r.csv").write_text('road_id,wkt,speed_kmh\nA,"LINESTRING (0 0, 1000 0)",96.56064\n')
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,1000,11\n")
    (tmp_path / "c.toml").write_text('[roads]\nspeed_unit = "kmh"\nspeed_column = "speed_kmh"\n')
    code, _, err = run_cli("run", "--roads", tmp_path / "r.csv", "--ground", tmp_path / "g.csv", "--roads-crs",
                           "EPSG:32633", "--units", "us", "--elevation-unit", "m", "--config", tmp_path / "c.toml",
                           "--out", tmp_path / "o", "-q")
    assert code == 0, err
    roads = pd.read_csv(tmp_path / "o" / "roads.csv")
    assert roads["speed_mph"].iloc[0] == pytest.approx(60.0, abs=0.05)


def test_negative_speed_is_substituted_with_a_data_note(tmp_path, samples, run_cli):
    """A road with speed -50 is judged at a substituted speed, named in data_notes.csv and
    counted in run.json (reference: the input file read with geopandas)."""
    import geopandas as gpd

    roads = gpd.read_file(samples["roads"])
    roads.loc[roads["road_id"] == "WV-01", "speed_kmh"] = -50
    path = tmp_path / "roads.gpkg"
    roads.to_file(path, layer="roads", driver="GPKG")
    expected = set(roads.loc[~((roads["speed_kmh"] > 0) & (roads["speed_kmh"] <= 200)), "road_id"])
    assert expected == {"WV-01", "WV-08"}
    out = tmp_path / "o"
    code, stdout, err = run_cli("run", "--roads", path, "--ground", samples["dem"], "--out", out)
    assert code == 0, err
    notes = pd.read_csv(out / "data_notes.csv")
    subst = notes[notes["note"] == "speed substituted"]
    assert set(subst["road_id"]) == expected
    assert "-50" in subst.loc[subst["road_id"] == "WV-01", "detail"].iloc[0]
    run = json.loads((out / "run.json").read_text())
    assert run["roads"]["judged_at_substituted_speeds"] == len(expected)
    assert "Substituted speeds: 2 road(s)" in stdout
    html = (out / "report.html").read_text()
    assert "at substituted speeds" in html
