"""Dirty ground data and bad input: artefacts are masked and reported, per-road faults skip the
road (not the batch), file-level faults stop with exit code 2, and nothing is half-written."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from conftest import write_dem
from pipeline.profile.artefacts import detect, implausible_grades
from pipeline.runner.network import run_network
from pipeline.core.config import load_config

X0, Y0 = 500000.0, 5300000.0


def textbook(x, pvis):
    """Tangents and symmetric parabolic curves, written plainly (common practice, no source)."""
    X = np.array([p[0] for p in pvis], float)
    Y = np.array([p[1] for p in pvis], float)
    z = np.interp(x, X, Y)
    for i in range(1, len(pvis) - 1):
        L = pvis[i][2]
        g1 = (Y[i] - Y[i - 1]) / (X[i] - X[i - 1])
        g2 = (Y[i + 1] - Y[i]) / (X[i + 1] - X[i])
        on = (x >= X[i] - L / 2) & (x <= X[i] + L / 2)
        u = x[on] - (X[i] - L / 2)
        z[on] = Y[i] - g1 * L / 2 + g1 * u + (g2 - g1) / (2 * L) * u**2
    return z


def straight_roads_csv(path, roads):
    """roads: list of (road_id, length_m, speed, y offset); straight east-west lines."""
    rows = ["road_id,speed_kmh,aadt,wkt"]
    for rid, length, speed, dy in roads:
        wkt = "POINT EMPTY" if length is None else f"LINESTRING ({X0} {Y0 + dy}, {X0 + length} {Y0 + dy})"
        rows.append(f'{rid},{"" if speed is None else speed},1000,"{wkt}"')
    path.write_text("\n".join(rows) + "\n")
    return path


def chainage_points_csv(path, profiles):
    """profiles: dict road_id -> (chainage array, z array)."""
    rows = ["road_id,chainage_m,z"]
    for rid, (c, z) in profiles.items():
        rows += [f"{rid},{ci:.3f},{zi:.4f}" for ci, zi in zip(c, z)]
    path.write_text("\n".join(rows) + "\n")
    return path


def run(tmp_path, roads, points, **overrides):
    cfg = load_config(None, {"roads.crs": "EPSG:32633"} | overrides)
    return run_network(roads, points, cfg)


# ------------------------------------------------------------------ artefacts
def test_bridge_dip_makes_no_curve_no_deficiency_and_one_note(tmp_path):
    """A bare-earth DEM shows the valley floor under a bridge: a 6 m dip over 40 m in an otherwise
    smooth profile (a gentle crest elsewhere) must give no sag curve, no deficiency and exactly
    one data note (the acceptance case)."""
    c = np.arange(0.0, 2000.0 + 1e-9, 2.0)
    z = textbook(c, [(0, 100, 0), (1500, 115, 300), (2000, 112, 0)])
    smooth = z.copy()
    depth = 6.0 * np.clip((20.0 - np.abs(c - 700.0)) / 5.0, 0.0, 1.0)  # 40 m wide, steep banks
    z = z - depth
    roads = straight_roads_csv(tmp_path / "r.csv", [("B", 2000.0, 80, 0)])
    pts = chainage_points_csv(tmp_path / "g.csv", {"B": (c, z + np.random.default_rng(1).normal(0, 0.02, len(c)))})
    res = run(tmp_path, roads, pts)
    curves = res.evaluation.curves
    near = curves[(curves["pvt_m"] > 640) & (curves["pvc_m"] < 760)]
    assert len(near) == 0, near
    assert (curves["kind"] == "sag").sum() == 0
    inv = res.evaluation.inventory
    assert not ((inv["to_m"] > 640) & (inv["from_m"] < 760)).any()
    notes = res.data_notes()
    assert len(notes) == 1 and "dip" in notes["note"].iloc[0]
    assert 670 <= notes["from_m"].iloc[0] and notes["to_m"].iloc[0] <= 730
    # the masked stations are reported as such and the fitted profile follows the smooth one
    prof = res.profiles
    masked = prof["ground_flag"] == "masked"
    assert masked.sum() > 0
    fit = prof.loc[masked, "fitted_z_m"].to_numpy()
    ref = np.interp(prof.loc[masked, "chainage_m"], c, smooth)
    assert np.max(np.abs(fit - ref)) < 0.1


@pytest.mark.parametrize("height", [8.0, -5.0])
def test_single_sample_spike_or_pit_is_masked(height):
    """A centreline brushing a wall (+8 m) or a hole (-5 m) at one sample."""
    c = np.arange(0.0, 1000.0 + 1e-9, 5.0)
    z = 50 + 0.02 * c
    z[90] += height
    mask, notes = detect(c, z, 5.0, 0.01)
    assert mask[90] and mask.sum() <= 3
    assert len(notes) == 1
    assert ("spike" in notes[0][0]) == (height > 0)


def test_clean_profile_masks_nothing():
    c = np.arange(0.0, 3000.0 + 1e-9, 5.0)
    z = textbook(c, [(0, 100, 0), (800, 120, 60), (1700, 95, 300), (3000, 130, 0)])  # K = 1.3 crest: sharp but real
    z = z + np.random.default_rng(4).normal(0, 0.05, len(c))
    mask, notes = detect(c, z, 5.0, 0.05)
    assert not mask.any() and notes == []


def test_known_structure_masks_a_gentle_culvert_dip(tmp_path):
    """A hydrologically conditioned DEM notches the embankment at a culvert: a smooth 1.2 m notch
    over 80 m is too gentle for the automatic test (grades under 5 %, curvature like K = 8), so it
    shows as curves; a structures layer with the culvert as a point masks it explicitly."""
    c = np.arange(0.0, 1500.0 + 1e-9, 2.0)
    u = np.clip(np.abs(c - 800.0) / 40.0, 0.0, 1.0)
    notch = 0.6 * (1 + np.cos(np.pi * u))
    z = 80 + 0.01 * c - notch
    roads = straight_roads_csv(tmp_path / "r.csv", [("C", 1500.0, 80, 0)])
    pts = chainage_points_csv(tmp_path / "g.csv", {"C": (c, z)})
    plain = run(tmp_path, roads, pts)
    assert len(plain.evaluation.curves) >= 2  # the notch made curves
    (tmp_path / "s.csv").write_text(f"name,x,y,length_m\nculvert C-7,{X0 + 800.0},{Y0 + 3.0},80\n")
    masked = run(tmp_path, roads, pts, **{"structures.file": str(tmp_path / "s.csv")})
    assert len(masked.evaluation.curves) == 0
    notes = masked.data_notes()
    assert list(notes["note"]) == ["known structure masked"]
    # 80 m given for the structure plus 10 m each side
    assert notes["from_m"].iloc[0] == pytest.approx(750.0, abs=5.0)
    assert notes["to_m"].iloc[0] == pytest.approx(850.0, abs=5.0)


def test_dem_void_is_missing_not_filled(tmp_path):
    """A nodata patch across the road: stations there stay missing (ground_flag) and a note
    gives the chainage range."""
    from rasterio.transform import from_origin

    arr = np.tile(100 + 0.02 * np.arange(300) * 5.0, (20, 1))  # 1500 m x 100 m, 5 m cells, 2 % grade
    arr[:, 120:130] = -9999.0
    write_dem(tmp_path / "d.tif", arr, from_origin(X0, Y0 + 50, 5, 5), "EPSG:32633")
    roads = straight_roads_csv(tmp_path / "r.csv", [("V", 1400.0, 80, 0)])
    res = run(tmp_path, roads, tmp_path / "d.tif")
    prof = res.profiles
    gap = (prof["chainage_m"] > 610) & (prof["chainage_m"] < 640)
    assert (prof.loc[gap, "ground_flag"] == "missing").all()
    assert prof.loc[gap, "ground_z_m"].isna().all()
    notes = res.data_notes()
    assert "ground data missing" in set(notes["note"])


# ------------------------------------------------------------- per-road faults
def test_mixed_batch_skips_bad_roads_and_evaluates_good_ones_as_alone(tmp_path):
    """Good roads among roads with each per-road fault: the batch completes, the good roads come out
    exactly as when run alone, and every bad road is accounted for with its reason."""
    c = np.arange(0.0, 3000.0 + 1e-9, 2.0)
    good1 = textbook(c, [(0, 100, 0), (900, 130, 70), (1900, 105, 200), (3000, 120, 0)])
    good2 = textbook(c, [(0, 60, 0), (1200, 36, 80), (2300, 70, 120), (3000, 60, 0)])
    rng = np.random.default_rng(0)
    good = {"G1": (c, good1 + rng.normal(0, 0.03, len(c))), "G2": (c, good2 + rng.normal(0, 0.03, len(c)))}
    roads_good = straight_roads_csv(tmp_path / "good.csv", [("G1", 3000.0, 80, 0), ("G2", 3000.0, 90, 500)])
    pts_good = chainage_points_csv(tmp_path / "good_pts.csv", good)
    alone = run(tmp_path, roads_good, pts_good)

    bad_roads = [
        ("G1", 3000.0, 80, 0), ("G2", 3000.0, 90, 500),
        ("EMPTY", None, 80, 1000),              # no geometry
        ("ZERO", 0.0, 80, 1500),                # zero-length line
        ("NOGROUND", 2000.0, 80, 2000),         # no ground points at all
        ("HALF", 3000.0, 80, 2500),             # ground on the first half only: evaluated, with a note
        ("NOSPEED", 3000.0, None, 3000),        # missing speed
        ("NEGSPEED", 3000.0, -50, 3500),        # non-positive speed
        ("DUP", 3000.0, 80, 4000),              # the same id twice: both kept apart
        ("DUP", 3000.0, 80, 4500),
        ("STEEP", 3000.0, 80, 5000),            # grades no road has (feet taken for metres, say)
    ]
    roads = straight_roads_csv(tmp_path / "mixed.csv", bad_roads)
    profiles = dict(good)
    profiles["HALF"] = (c[c <= 1500], good1[c <= 1500])
    profiles["NOSPEED"] = (c, good1)
    profiles["NEGSPEED"] = (c, good1)
    profiles["DUP"] = (c, good2)
    profiles["STEEP"] = (c, 100 + 0.35 * c)
    pts = chainage_points_csv(tmp_path / "mixed_pts.csv", profiles)
    mixed = run(tmp_path, roads, pts, **{"speed.predict_missing": False})

    table = mixed.road_table().set_index("road_id")
    assert len(table) == len(bad_roads)
    status = table["status"].to_dict()
    assert status["G1"] == status["G2"] == status["HALF"] == status["DUP"] == status["DUP~2"] == "evaluated"
    for rid in ("EMPTY", "ZERO", "NOGROUND", "NOSPEED", "NEGSPEED", "STEEP"):
        assert status[rid] == "skipped", rid
        assert isinstance(table.loc[rid, "reason"], str) and table.loc[rid, "reason"]
    assert "speed" in table.loc["NOSPEED", "reason"] and "speed" in table.loc["NEGSPEED", "reason"]
    assert "grades steeper" in table.loc["STEEP", "reason"]
    assert "no ground data" in table.loc["NOGROUND", "reason"]
    assert any("more than once" in n for n in mixed.notes)
    assert "road partly without ground data" in set(mixed.data_notes().query("road_id == 'HALF'")["note"])

    from pipeline.runner.network import accounting

    acc = accounting(mixed)
    assert acc["in"] == acc["evaluated"] + acc["skipped"] == len(bad_roads)

    def per_road(ev, rid):
        cv = ev.curves[ev.curves["road_id"] == rid].drop(columns=[]).reset_index(drop=True)
        inv = ev.inventory[ev.inventory["road_id"] == rid].drop(columns=["rank"]).reset_index(drop=True)
        return cv, inv

    for rid in ("G1", "G2"):
        ca, ia = per_road(alone.evaluation, rid)
        cm, im = per_road(mixed.evaluation, rid)
        pd.testing.assert_frame_equal(ca, cm)
        pd.testing.assert_frame_equal(ia, im)


def test_implausible_grades_reason():
    c = np.arange(0.0, 1000.0, 5.0)
    assert implausible_grades(c, 0.3 * c, 25.0) is not None
    assert implausible_grades(c, 0.08 * c, 25.0) is None


# ------------------------------------------------------------- file-level faults
def _err_line(err):
    lines = [l for l in err.strip().splitlines() if "error" in l.lower()]
    assert len(lines) == 1 and lines[0].startswith("sightaudit: error: "), err
    assert "Traceback" not in err
    return lines[0]


def test_unreadable_format(tmp_path, run_cli):
    (tmp_path / "r.gpkg").write_text("this is not a GeoPackage")
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\n")
    code, _, err = run_cli("run", "--roads", tmp_path / "r.gpkg", "--ground", tmp_path / "g.csv",
                           "--out", tmp_path / "o")
    assert code == 2 and "r.gpkg" in _err_line(err)


def test_unreadable_dem(tmp_path, run_cli):
    roads = straight_roads_csv(tmp_path / "r.csv", [("A", 500.0, 80, 0)])
    (tmp_path / "d.tif").write_bytes(b"II*\x00 broken tiff")
    code, _, err = run_cli("run", "--roads", roads, "--roads-crs", "EPSG:32633", "--ground", tmp_path / "d.tif",
                           "--out", tmp_path / "o")
    assert code == 2 and "d.tif" in _err_line(err)


def test_roads_without_id_column(tmp_path, run_cli):
    (tmp_path / "r.csv").write_text('name,wkt\nA,"LINESTRING (0 0, 100 0)"\n')
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\n")
    code, _, err = run_cli("run", "--roads", tmp_path / "r.csv", "--roads-crs", "EPSG:32633", "--ground",
                           tmp_path / "g.csv", "--out", tmp_path / "o")
    assert code == 2 and "'road_id'" in _err_line(err) and "--id-column" in err


def test_non_numeric_speed_names_the_row(tmp_path, run_cli):
    (tmp_path / "r.csv").write_text('road_id,speed_kmh,wkt\nA,80,"LINESTRING (0 0, 100 0)"\n'
                                    'B,fast,"LINESTRING (0 50, 100 50)"\n')
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\n")
    code, _, err = run_cli("run", "--roads", tmp_path / "r.csv", "--roads-crs", "EPSG:32633", "--ground",
                           tmp_path / "g.csv", "--out", tmp_path / "o")
    line = _err_line(err)
    assert code == 2 and "row 3" in line and "speed_kmh" in line and "'fast'" in line


def test_unknown_criteria_set(tmp_path, run_cli):
    roads = straight_roads_csv(tmp_path / "r.csv", [("A", 500.0, 80, 0)])
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,500,2\n")
    code, _, err = run_cli("run", "--roads", roads, "--roads-crs", "EPSG:32633", "--ground", tmp_path / "g.csv",
                           "--criteria", "aashto-2018-metrik", "--out", tmp_path / "o")
    assert code == 2 and "did you mean 'aashto-2018-metric'" in _err_line(err)


def test_bad_config_value(tmp_path, run_cli):
    roads = straight_roads_csv(tmp_path / "r.csv", [("A", 500.0, 80, 0)])
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,500,2\n")
    (tmp_path / "c.toml").write_text('[inventory]\nseverity_bands_kmh = [20, 10]\n')
    code, _, err = run_cli("run", "--roads", roads, "--roads-crs", "EPSG:32633", "--ground", tmp_path / "g.csv",
                           "--config", tmp_path / "c.toml", "--out", tmp_path / "o")
    assert code == 2 and "severity_bands_kmh" in _err_line(err)


def test_failure_while_writing_leaves_nothing_half_written(tmp_path, run_cli, monkeypatch):
    """An error after some files are written: the previous output stays as it was and no folder
    that looks complete (or any staging folder) is left behind."""
    import pipeline.outputs.export as export

    roads = straight_roads_csv(tmp_path / "r.csv", [("A", 500.0, 80, 0)])
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,500,2\n")
    out = tmp_path / "o"
    args = ("run", "--roads", roads, "--roads-crs", "EPSG:32633", "--ground", tmp_path / "g.csv", "--out", out, "-q")
    assert run_cli(*args)[0] == 0
    before = {p.name: p.read_bytes() for p in out.iterdir()}

    def broken(folder, *a, **k):
        (folder / "curves.csv").write_text("partial")
        raise OSError("disk full")

    monkeypatch.setattr(export, "write_gpkg", broken)
    code, _, err = run_cli(*args)
    assert code != 0
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    assert not [p for p in tmp_path.iterdir() if ".partial-" in p.name or ".old-" in p.name]


def test_run_json_accounts_for_skipped_roads(tmp_path, run_cli):
    roads = straight_roads_csv(tmp_path / "r.csv", [("A", 500.0, 80, 0), ("B", 500.0, None, 100)])
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nA,0,1\nA,500,2\nB,0,1\nB,500,2\n")
    (tmp_path / "c.toml").write_text("[speed]\npredict_missing = false\n")
    out = tmp_path / "o"
    code, _, err = run_cli("run", "--roads", roads, "--roads-crs", "EPSG:32633", "--ground", tmp_path / "g.csv",
                           "--config", tmp_path / "c.toml", "--out", out, "-q")
    assert code == 0, err
    r = json.loads((out / "run.json").read_text())["roads"]
    assert (r["in"], r["evaluated"], r["skipped"]) == (2, 1, 1)
    assert r["skipped_roads"][0]["road_id"] == "B"
    import openpyxl

    ws = openpyxl.load_workbook(out / "deficiencies.xlsx")["Roads"]
    rows = {row[0]: row for row in ws.iter_rows(min_row=2, values_only=True)}
    header = [c.value for c in ws[1]]
    assert rows["B"][header.index("status")] == "skipped"
    assert "speed" in rows["B"][header.index("reason")]


# ------------------------------------------------------------- no traceback, ever
GARBAGE = {
    "binary.csv": b"\x00\x01\x02\xff\xfe garbage \x00",
    "header_only.csv": b"road_id,wkt\n",
    "polygons.csv": b'road_id,speed_kmh,wkt\nP,80,"POLYGON ((0 0, 10 0, 10 10, 0 0))"\n',
    "bad_wkt.csv": b'road_id,speed_kmh,wkt\nP,80,"LINESTRING (0 0, 10"\n',
    "semicolons.csv": b"road_id;speed_kmh;wkt\nP;80;LINESTRING (0 0, 10 0)\n",
    "points.csv": b'road_id,speed_kmh,wkt\nP,80,"POINT (0 0)"\n',
    "empty_geom.csv": b'road_id,speed_kmh,wkt\nP,80,\n',
}


@pytest.mark.parametrize("name", sorted(GARBAGE))
def test_garbage_roads_never_give_a_traceback(tmp_path, run_cli, name):
    (tmp_path / name).write_bytes(GARBAGE[name])
    (tmp_path / "g.csv").write_text("road_id,chainage_m,z\nP,0,1\nP,10,2\n")
    code, out, err = run_cli("run", "--roads", tmp_path / name, "--roads-crs", "EPSG:32633", "--ground",
                             tmp_path / "g.csv", "--out", tmp_path / "o", "-q")
    assert code in (0, 2), err
    assert "Traceback" not in err and "internal error" not in err
    if code == 0:  # every road accounted for
        r = json.loads((tmp_path / "o" / "run.json").read_text())["roads"]
        assert r["in"] == r["evaluated"] + r["skipped"]
    else:
        _err_line(err)
