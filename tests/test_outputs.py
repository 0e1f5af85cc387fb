"""The output contract (CURVE_CONTRACT and DEFICIENCY_CONTRACT in pipeline.outputs.export): every file, its columns, and that GIS and spreadsheet
readers take them (geopandas/pyogrio, openpyxl, pyarrow as references)."""

from __future__ import annotations

import json

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pyproj
import shapely

CURVE_CONTRACT = ["road_id", "curve_no", "kind", "pvc_m", "pvi_m", "pvt_m", "pvi_elev_m", "g1_pct", "g2_pct",
                  "a_pct", "length_m", "k", "fit_rmse_m", "sight_available_m", "ssd_required_m", "speed_kmh",
                  "deficient"]
DEFICIENCY_CONTRACT = ["rank", "road_id", "curve_no", "kind", "direction", "from_m", "to_m", "speed_kmh",
                       "supported_speed_kmh", "ssd_required_m", "sight_available_m", "shortfall_m", "k",
                       "k_required", "aadt", "priority_score"]


def test_every_output_is_written(demo_out):
    for name in ("curves.csv", "deficiencies.csv", "deficiencies.xlsx", "audit.gpkg", "profiles.parquet",
                 "run.json", "horizontal_curves.csv"):
        assert (demo_out / name).is_file() and (demo_out / name).stat().st_size > 0, name


def test_csv_columns_follow_the_contract(demo_out):
    c = pd.read_csv(demo_out / "curves.csv")
    assert list(c.columns[: len(CURVE_CONTRACT)]) == CURVE_CONTRACT
    assert set(c["deficient"].astype(str).str.lower()) <= {"true", "false"}
    d = pd.read_csv(demo_out / "deficiencies.csv")
    assert list(d.columns[: len(DEFICIENCY_CONTRACT)]) == DEFICIENCY_CONTRACT
    assert list(d["rank"]) == list(range(1, len(d) + 1))
    # deficient stretches first, then those of undetermined curves; each group by score
    assert set(d["verdict"]) <= {"deficient", "undetermined"}
    assert not (d["verdict"].eq("deficient").astype(int).diff().fillna(0) > 0).any()
    for _, grp in d.groupby("verdict"):
        assert np.all(np.diff(grp["priority_score"]) <= 1e-9)  # rank 1 = highest score
    assert (d["shortfall_m"] > 0).all()
    np.testing.assert_allclose(d["shortfall_m"], d["ssd_required_m"] - d["sight_available_m"], atol=2e-3)
    assert (d["from_m"] <= d["to_m"]).all()
    assert set(d["direction"]) <= {"increasing", "decreasing"}
    # every deficiency belongs to a curve judged deficient
    bad = c[c["deficient"].astype(str).str.lower() == "true"][["road_id", "curve_no"]]
    keys = set(map(tuple, bad.to_numpy()))
    sure = d[d["verdict"] == "deficient"]
    assert all((r, n) in keys for r, n in sure[["road_id", "curve_no"]].dropna().to_numpy())
    # and 'deficient' is true exactly where the verdict says so
    assert (c["deficient"].astype(str).str.lower().eq("true") == c["verdict"].eq("deficient")).all()


def test_profiles_parquet_has_sight_both_ways(demo_out):
    import pyarrow.parquet as pq

    cols = pq.read_schema(demo_out / "profiles.parquet").names
    for col in ("road_id", "chainage_m", "x", "y", "ground_z_m", "fitted_z_m", "grade_pct", "sight_fwd_m",
                "sight_back_m"):
        assert col in cols


def test_geopackage_reads_back(demo_out, samples):
    """pyogrio lists the three layers; geopandas reads them with the roads' CRS and one feature
    per CSV row."""
    layers = {name for name, _ in pyogrio.list_layers(demo_out / "audit.gpkg")}
    assert {"roads", "curves", "deficiencies", "horizontal_curves"} <= layers
    hc = gpd.read_file(demo_out / "audit.gpkg", layer="horizontal_curves")
    assert len(hc) == len(pd.read_csv(demo_out / "horizontal_curves.csv"))
    src_crs = pyproj.CRS(gpd.read_file(samples["roads"], layer="roads").crs)
    roads = gpd.read_file(demo_out / "audit.gpkg", layer="roads")
    curves = gpd.read_file(demo_out / "audit.gpkg", layer="curves")
    defs = gpd.read_file(demo_out / "audit.gpkg", layer="deficiencies")
    assert len(roads) == len(gpd.read_file(samples["roads"], layer="roads"))
    assert len(curves) == len(pd.read_csv(demo_out / "curves.csv"))
    assert len(defs) == len(pd.read_csv(demo_out / "deficiencies.csv"))
    for layer in (roads, curves, defs):
        assert pyproj.CRS(layer.crs).equals(src_crs)


def test_each_deficient_stretch_lies_on_its_road(demo_out):
    """shapely reference: every stretch line is within 1 mm of its road's centreline, and its
    length matches the chainage range (plus half a station each end, as drawn)."""
    roads = gpd.read_file(demo_out / "audit.gpkg", layer="roads").set_index("road_id")
    defs = gpd.read_file(demo_out / "audit.gpkg", layer="deficiencies")
    run = json.loads((demo_out / "run.json").read_text())
    step = run["config"]["profile"]["step_m"]
    assert len(defs) > 0
    for r in defs.itertuples():
        road = roads.loc[r.road_id, "geometry"]
        vertices = shapely.points(shapely.get_coordinates(r.geometry))
        assert shapely.distance(vertices, road).max() < 1e-3
        assert road.buffer(1e-3).covers(r.geometry)
        expect = min(r.to_m + step / 2, road.length) - max(r.from_m - step / 2, 0.0)
        assert abs(r.geometry.length - expect) < 0.05


def test_workbook_reads_back(demo_out):
    """openpyxl reference: the sheets exist, headers equal the CSV columns, the header row is
    frozen."""
    import openpyxl

    wb = openpyxl.load_workbook(demo_out / "deficiencies.xlsx")
    assert {"Summary", "Deficiencies", "Curves", "Horizontal curves", "Roads", "Method"} <= set(wb.sheetnames)
    ws = wb["Deficiencies"]
    header = [c.value for c in ws[1]]
    assert header == list(pd.read_csv(demo_out / "deficiencies.csv").columns)
    assert ws.freeze_panes == "A2"
    assert ws.max_row == len(pd.read_csv(demo_out / "deficiencies.csv")) + 1
    header = [c.value for c in wb["Curves"][1]]
    assert header == list(pd.read_csv(demo_out / "curves.csv").columns)
    method = " ".join(str(c.value) for row in wb["Method"].iter_rows() for c in row if c.value)
    assert "licensed engineer" in method and "AASHTO" in method
    summary = " ".join(str(c.value) for row in wb["Summary"].iter_rows() for c in row if c.value)
    assert "licensed engineer" in summary


def test_readme_column_lists_come_from_the_registry(demo_out):
    """The README's column lists are those of pipeline/core/tables.py, and every output file has
    exactly the registry's columns in its order (the registry is the one place they are set)."""
    from pathlib import Path

    from pipeline.core import tables

    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    section = readme.split("<!-- output columns -->")[1]
    assert section.strip() == tables.readme_columns().strip()
    for name, file in tables.OUTPUT_FILES.items():
        path = demo_out / file
        cols = list(pd.read_parquet(path).columns) if file.endswith(".parquet") else list(pd.read_csv(path).columns)
        assert cols == tables.column_names(name), file


def test_geopackage_is_version_1_2(demo_out):
    """audit.gpkg is a GeoPackage 1.2 file: application_id 'GPKG' (0x47504B47) and user_version
    10200, as the OGC GeoPackage standard (12-128r15) sets them; Python's sqlite3 as the reader.
    GDAL 3.6 warns on 1.4 files that they may only be partially supported."""
    import sqlite3

    with sqlite3.connect(demo_out / "audit.gpkg") as con:
        assert con.execute("PRAGMA application_id").fetchone()[0] == 0x47504B47
        assert con.execute("PRAGMA user_version").fetchone()[0] == 10200


def test_severity_colours_darken_with_severity():
    """Severity colours run light to dark with severity, so the worst is the strongest: relative
    luminance (W3C WCAG 2.1 definition) severe < moderate < minor, and the map and the report's
    style sheet use the same ones."""
    from pipeline.outputs.figures import SEVERITY_STYLE
    from pipeline.outputs.report_style import CSS, SEVERITY_COLOURS

    def luminance(hex_colour):
        rgb = [int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5)]
        lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
        return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]

    lum = {k: luminance(v) for k, v in SEVERITY_COLOURS.items()}
    assert lum["severe"] < lum["moderate"] < lum["minor"]
    for sev, colour in SEVERITY_COLOURS.items():
        assert SEVERITY_STYLE[sev]["color"] == colour and colour in CSS


def test_geopackage_point_layers_lie_on_their_roads(demo_out):
    """audit.gpkg has a point per PVI and per hidden hazard, each on its road's centreline
    (shapely's distance as the reference, within 1 cm)."""
    import geopandas as gpd

    gpkg = demo_out / "audit.gpkg"
    roads = gpd.read_file(gpkg, layer="roads").set_index("road_id")
    pvis = gpd.read_file(gpkg, layer="pvis")
    hazards = gpd.read_file(gpkg, layer="hidden_hazards")
    curves = pd.read_csv(demo_out / "curves.csv")
    defs = pd.read_csv(demo_out / "deficiencies.csv")
    assert len(pvis) == len(curves)
    assert len(hazards) == int(((defs["hidden_hazard"] != "none") & defs["hazard_chainage_m"].notna()).sum())
    for layer in (pvis, hazards):
        assert (layer.geom_type == "Point").all() and layer.geometry.is_valid.all()
        dist = [roads.loc[r, "geometry"].distance(p) for r, p in zip(layer["road_id"], layer.geometry)]
        assert max(dist) < 0.01


def test_geopackage_layers_carry_default_styles(demo_out):
    """Every spatial layer of audit.gpkg has a default style in the layer_styles table, an SLD
    document that parses (xml.etree as the reader), and the deficiencies are styled by severity
    with the report's colours."""
    import sqlite3
    import xml.etree.ElementTree as ET

    from pipeline.outputs.report_style import SEVERITY_COLOURS

    with sqlite3.connect(demo_out / "audit.gpkg") as con:
        spatial = {r[0] for r in con.execute("SELECT table_name FROM gpkg_geometry_columns")}
        styles = dict(con.execute("SELECT f_table_name, styleSLD FROM layer_styles WHERE useAsDefault"))
    assert spatial and spatial <= set(styles)
    for sld in styles.values():
        ET.fromstring(sld.encode("utf-8"))
    for colour in SEVERITY_COLOURS.values():
        assert colour in styles["deficiencies"] and colour in styles["hidden_hazards"]


def test_gpkg_sight_limiting_points_sit_on_the_crests(demo_out):
    """Layer sight_limiting_points: one point per crest row of deficiencies.csv, at its curve's
    high point (turn_m in curves.csv) on the road's centreline (distance to the line checked with
    shapely, a reference library; a point on a line is within rounding of it)."""
    import geopandas as gpd
    import pandas as pd
    from shapely.ops import substring

    pts = gpd.read_file(demo_out / "audit.gpkg", layer="sight_limiting_points")
    defs = pd.read_csv(demo_out / "deficiencies.csv")
    crest = defs[defs["kind"] == "crest"]
    assert len(crest) > 0 and len(pts) == len(crest)
    assert sorted(pts["rank"]) == sorted(crest["rank"])
    curves = pd.read_csv(demo_out / "curves.csv").set_index(["road_id", "curve_no"])
    roads = gpd.read_file(demo_out / "audit.gpkg", layer="roads").set_index("road_id")
    for p in pts.itertuples():
        turn = curves.loc[(p.road_id, int(p.curve_no)), "turn_m"]
        assert abs(p.at_m - turn) < 0.05
        line = roads.at[p.road_id, "geometry"]
        assert p.geometry.distance(line) < 0.05, (p.road_id, p.curve_no)
        # and at that chainage along the line (the sample is in a metric projected CRS)
        if line.geom_type == "LineString":
            assert p.geometry.distance(substring(line, turn, turn).centroid) < 1.0
