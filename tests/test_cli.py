"""The command line: the demo, run.json accounting, and clear errors (exit code 2, one line)."""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
import shapely

from conftest import write_roads_gpkg


def test_demo_accounts_for_every_road(demo_out, samples):
    import geopandas as gpd

    run = json.loads((demo_out / "run.json").read_text())
    n_in = len(gpd.read_file(samples["roads"], layer="roads"))
    r = run["roads"]
    assert r["in"] == n_in
    assert r["in"] == r["evaluated"] + r["skipped"]
    assert sum(r["skipped_by_reason"].values()) == r["skipped"]
    assert len(r["skipped_roads"]) == r["skipped"]
    # input hashes are SHA-256 of the files (reference: hashlib)
    import hashlib

    assert run["inputs"]["roads"]["sha256"] == hashlib.sha256(samples["roads"].read_bytes()).hexdigest()
    assert set(run["stage_seconds"]) >= {"ingest", "profile"}
    assert "licensed engineer" in run["caution"]


def test_network_summary_matches_pandas(demo_out):
    """The SQL summary's km by class equals a plain pandas groupby of roads.csv (reference)."""
    run = json.loads((demo_out / "run.json").read_text())
    roads = pd.read_csv(demo_out / "roads.csv")
    ref = roads.groupby("road_class")["length_m"].sum() / 1000.0
    got = {r["road_class"]: r["km_in"] for r in run["network_by_class"]}
    for cls, km in ref.items():
        assert got[cls] == pytest.approx(km, abs=2e-3)


def test_demo_profiles(demo_out):
    p = pd.read_parquet(demo_out / "profiles.parquet")
    assert list(p.columns[:6]) == ["road_id", "chainage_m", "x", "y", "ground_z_m", "ground_flag"]
    for _, g in p.groupby("road_id"):
        assert np.all(np.diff(g["chainage_m"]) > 0)
        assert g["chainage_m"].iloc[0] == 0.0


def test_demo_curves_and_fitted_profile(demo_out):
    """curves.csv carries the alignment columns of the output contract (CURVE_CONTRACT in pipeline.outputs.export), in order;
    profiles.parquet gains the fitted elevation and grade."""
    c = pd.read_csv(demo_out / "curves.csv")
    contract = ["road_id", "curve_no", "kind", "pvc_m", "pvi_m", "pvt_m", "pvi_elev_m", "g1_pct", "g2_pct",
                "a_pct", "length_m", "k", "fit_rmse_m"]
    assert list(c.columns[: len(contract)]) == contract
    assert set(c["kind"]) <= {"crest", "sag"}
    assert (c["pvc_m"] <= c["pvi_m"]).all() and (c["pvi_m"] <= c["pvt_m"]).all()
    # K = L / A (common practice, no source)
    ok = c["a_pct"] > 0
    np.testing.assert_allclose(c.loc[ok, "k"], c.loc[ok, "length_m"] / c.loc[ok, "a_pct"], rtol=1e-3, atol=0.01)
    p = pd.read_parquet(demo_out / "profiles.parquet")
    assert {"fitted_z_m", "grade_pct"} <= set(p.columns)


def test_console_script_prints_output_folder(tmp_path):
    out = tmp_path / "o"
    proc = subprocess.run([sys.executable, "-m", "pipeline.cli", "demo", "--out", str(out)],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert str(out.resolve()) in proc.stdout
    assert "evaluated" in proc.stdout


def test_ground_points_and_dem_give_the_same_profile(tmp_path, samples, run_cli):
    """The sample's ground points were sampled from its DEM (2 m apart, up to 2 m off the
    centreline): both routes must give the same profile within a few centimetres."""
    code, _, err = run_cli("run", "--roads", samples["roads"], "--ground", samples["points"],
                           "--out", tmp_path / "pts", "-q")
    assert code == 0, err
    code, _, err = run_cli("run", "--roads", samples["roads"], "--ground", samples["dem"],
                           "--out", tmp_path / "dem", "-q")
    assert code == 0, err
    a = pd.read_parquet(tmp_path / "pts" / "profiles.parquet")
    b = pd.read_parquet(tmp_path / "dem" / "profiles.parquet")
    m = a.merge(b, on=["road_id", "chainage_m"], suffixes=("_p", "_d")).dropna(subset=["ground_z_m_p", "ground_z_m_d"])
    diff = (m["ground_z_m_p"] - m["ground_z_m_d"]).abs()
    assert len(m) > 0.95 * len(b)
    assert diff.median() < 0.03


# ---------------------------------------------------------------- bad input
def _one_line(err: str) -> str:
    """The error is one line starting 'sightaudit: error:' (progress lines may precede it)."""
    lines = [l for l in err.strip().splitlines() if "error" in l.lower()]
    assert len(lines) == 1, err
    assert lines[0].startswith("sightaudit: error: ")
    assert "Traceback" not in err
    return lines[0]


def _tiny_roads(tmp_path):
    line = shapely.linestrings([(500000, 5300000), (500500, 5300000)])
    return write_roads_gpkg(tmp_path / "roads.gpkg", ["A"], [line], "EPSG:32633", speed_kmh=[80])


def test_missing_file(tmp_path, run_cli):
    code, _, err = run_cli("run", "--roads", tmp_path / "nope.gpkg", "--ground", tmp_path / "g.csv",
                           "--out", tmp_path / "o")
    assert code == 2
    line = _one_line(err)
    assert "nope.gpkg" in line and "not found" in line


def test_empty_file(tmp_path, run_cli):
    roads = _tiny_roads(tmp_path)
    (tmp_path / "g.csv").write_text("")
    code, _, err = run_cli("run", "--roads", roads, "--ground", tmp_path / "g.csv", "--out", tmp_path / "o")
    assert code == 2
    assert "g.csv" in _one_line(err) and "empty" in err


def test_missing_column(tmp_path, run_cli):
    roads = _tiny_roads(tmp_path)
    (tmp_path / "g.csv").write_text("road_id,x,y,height\nA,500000,5300000,10\n")
    code, _, err = run_cli("run", "--roads", roads, "--ground", tmp_path / "g.csv", "--out", tmp_path / "o")
    assert code == 2
    line = _one_line(err)
    assert "g.csv" in line and "'z'" in line


def test_non_numeric_elevation_names_the_row(tmp_path, run_cli):
    roads = _tiny_roads(tmp_path)
    (tmp_path / "g.csv").write_text("road_id,x,y,z\nA,500000,5300000,10\nA,500010,5300000,abc\n")
    code, _, err = run_cli("run", "--roads", roads, "--ground", tmp_path / "g.csv", "--out", tmp_path / "o")
    assert code == 2
    line = _one_line(err)
    assert "row 3" in line and "'abc'" in line and "column z" in line


def test_unknown_crs(tmp_path, run_cli):
    (tmp_path / "r.csv").write_text('road_id,wkt\nA,"LINESTRING (0 0, 100 0)"\n')
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,100,2\n")
    code, _, err = run_cli("run", "--roads", tmp_path / "r.csv", "--ground", tmp_path / "g.csv",
                           "--roads-crs", "EPSG:999999", "--out", tmp_path / "o")
    assert code == 2
    assert "unknown CRS" in _one_line(err) and "EPSG:999999" in err


def test_csv_without_crs(tmp_path, run_cli):
    (tmp_path / "r.csv").write_text('road_id,wkt\nA,"LINESTRING (0 0, 100 0)"\n')
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,100,2\n")
    code, _, err = run_cli("run", "--roads", tmp_path / "r.csv", "--ground", tmp_path / "g.csv",
                           "--out", tmp_path / "o")
    assert code == 2
    assert "no CRS" in _one_line(err) and "--roads-crs" in err


def test_csv_roads_with_crs_and_chainage_points(tmp_path, run_cli):
    (tmp_path / "r.csv").write_text('road_id,wkt,speed_kmh\n12,"LINESTRING (0 0, 100 0)",60\n')
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\n12,0,1\n12,50,2\n12,100,3\n")
    code, _, err = run_cli("run", "--roads", tmp_path / "r.csv", "--ground", tmp_path / "g.csv",
                           "--roads-crs", "EPSG:32633", "--out", tmp_path / "o", "-q")
    assert code == 0, err
    p = pd.read_parquet(tmp_path / "o" / "profiles.parquet")
    # linear interpolation between the given points (common practice, no source)
    np.testing.assert_allclose(p["ground_z_m"], 1 + p["chainage_m"] / 50.0)
    assert p["road_id"].iloc[0] == "12"


def test_unknown_config_key_suggests_nearest(tmp_path, run_cli):
    roads = _tiny_roads(tmp_path)
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,500,2\n")
    (tmp_path / "c.toml").write_text("[profile]\nstep = 2.0\n")
    code, _, err = run_cli("run", "--roads", roads, "--ground", tmp_path / "g.csv", "--config",
                           tmp_path / "c.toml", "--out", tmp_path / "o")
    assert code == 2
    assert "profile.step_m" in _one_line(err)


def test_failed_run_leaves_previous_output(tmp_path, run_cli):
    roads = _tiny_roads(tmp_path)
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,500,2\n")
    out = tmp_path / "o"
    code, _, err = run_cli("run", "--roads", roads, "--ground", tmp_path / "g.csv", "--out", out, "-q")
    assert code == 0, err
    before = (out / "run.json").read_text()
    (tmp_path / "bad.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,500,oops\n")
    code, _, err = run_cli("run", "--roads", roads, "--ground", tmp_path / "bad.csv", "--out", out, "-q")
    assert code == 2
    assert (out / "run.json").read_text() == before
    assert not [p for p in tmp_path.iterdir() if ".partial-" in p.name]


def test_refuses_to_replace_an_unrelated_folder(tmp_path, run_cli):
    roads = _tiny_roads(tmp_path)
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,500,2\n")
    keep = tmp_path / "mine"
    keep.mkdir()
    (keep / "thesis.docx").write_text("precious")
    code, _, err = run_cli("run", "--roads", roads, "--ground", tmp_path / "g.csv", "--out", keep)
    assert code == 2
    assert (keep / "thesis.docx").read_text() == "precious"
