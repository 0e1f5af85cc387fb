"""The public Python interface: the README's example runs as written, the API gives the same
results as the command, and inputs in memory give the same results as the same data in files
(pandas.testing as the reference for equality)."""

from __future__ import annotations

import re
from pathlib import Path

import geopandas as gpd
import pandas as pd

import pipeline
from pipeline.core.resources import sample_paths

README = Path(__file__).resolve().parents[1] / "README.md"


def test_readme_python_example_runs(tmp_path, monkeypatch, capsys):
    text = README.read_text(encoding="utf-8")
    block = re.search(r"<!-- api example -->\s*```python\n(.*?)```", text, re.S)
    assert block, "the README's Python example is marked with <!-- api example -->"
    monkeypatch.chdir(tmp_path)
    exec(compile(block.group(1), "README example", "exec"), {})
    assert (tmp_path / "out" / "python-example" / "deficiencies.csv").exists()
    assert "verdict" in capsys.readouterr().out


def test_api_equals_the_command(demo_out):
    """pipeline.audit on the sample equals `sightaudit demo` (the same rules, the same rounding
    once written)."""
    p = sample_paths()
    result = pipeline.audit(p["roads"], p["dem"], pipeline.Settings.load(
        None, structures__file=str(p["structures"]), junctions__file=str(p["junctions"]), run__workers=1))
    written = pd.read_csv(demo_out / "curves.csv")
    assert len(result.curves) == len(written)
    assert list(result.curves["verdict"]) == list(written["verdict"])
    assert list(result.curves["road_id"]) == list(written["road_id"])
    assert len(result.deficiencies) == len(pd.read_csv(demo_out / "deficiencies.csv"))
    assert set(result.profiles["road_id"]) == set(result.roads.query("status == 'evaluated'")["road_id"])
    assert result.summary["roads"]["in"] == len(result.roads)


def test_inputs_in_memory_equal_the_same_files(tmp_path):
    """A GeoDataFrame of roads and a DataFrame of ground points give the results the files give."""
    p = sample_paths()
    settings = pipeline.Settings().replace(run__workers=1)
    from_files = pipeline.audit(p["roads"], p["points"], settings)
    roads = gpd.read_file(p["roads"])
    points = pd.read_csv(p["points"])
    in_memory = pipeline.audit(roads, points, settings)
    pd.testing.assert_frame_equal(from_files.curves, in_memory.curves)
    pd.testing.assert_frame_equal(from_files.deficiencies, in_memory.deficiencies)
    assert in_memory.summary["inputs"]["roads"]["path"] == "given in memory"
    report = pipeline.validate(roads, points, settings)
    assert report["roads"] == len(roads)


def test_grade_adjusted_ssd_reaches_horizontal_curves_and_hidden_zones():
    """With criteria.grade_adjusted the horizontal-curve checks use the SSD on the curve's
    downhill grade: SSD = 0.278 V t + V^2 / (254 (a / 9.81 + G)), t = 2.5 s, a = 3.4 m/s^2
    (AASHTO Green Book 2018, ch. 3, metric), rounded up to 5 m as the design values are."""
    import numpy as np

    p = sample_paths()
    level = pipeline.audit(p["roads"], p["points"], pipeline.Settings().replace(run__workers=1))
    graded = pipeline.audit(p["roads"], p["points"], pipeline.Settings().replace(run__workers=1,
                                                                              criteria__grade_adjusted=True))
    hc, prof = graded.horizontal_curves, graded.profiles
    assert len(hc)
    for c in hc.itertuples():
        on = prof[prof["road_id"] == c.road_id]
        g = abs(np.interp(0.5 * (c.start_m + c.end_m), on["chainage_m"], on["grade_pct"])) / 100.0
        v = c.speed_kmh
        ssd = 0.278 * v * 2.5 + v * v / (254 * (3.4 / 9.81 - g))
        assert c.ssd_required_m == np.ceil(ssd / 5 - 1e-9) * 5
    # the setting changes the requirement (the sample's roads are not level)
    assert (hc["ssd_required_m"].to_numpy() != level.horizontal_curves["ssd_required_m"].to_numpy()).any()


def test_us_run_writes_k_exactly_as_tabulated(tmp_path):
    """In a US-customary run the required K is a whole number of feet per percent, as the
    Green Book's design K values are (AASHTO 2018, ch. 3: rounded up to whole numbers); it used
    to come out as 83.99 for 84 after a round trip through metres."""
    import numpy as np

    p = sample_paths()
    settings = pipeline.Settings().replace(run__workers=1, output__units="us", roads__speed_unit="kmh",
                                           ground__elevation_unit="m")
    pipeline.audit(p["roads"], p["dem"], settings).write(tmp_path / "us")
    for name in ("curves.csv", "deficiencies.csv"):
        k = pd.read_csv(tmp_path / "us" / name)["k_required"].dropna().to_numpy()
        assert len(k) and np.array_equal(k, np.round(k)), name


def test_us_run_text_is_in_feet(tmp_path):
    """In a US-customary run the words are in US units too: hazard details, data notes and the
    report's statement of what the data cannot judge carry no '<number> m' or '<number> km/h'
    (the foot as 0.3048 m; common practice, no source)."""
    import re

    p = sample_paths()
    settings = pipeline.Settings().replace(run__workers=1, output__units="us", roads__speed_unit="kmh",
                                           ground__elevation_unit="m", structures__file=str(p["structures"]),
                                           junctions__file=str(p["junctions"]))
    pipeline.audit(p["roads"], p["dem"], settings).write(tmp_path / "us")
    metric = re.compile(r"\d m\b|\d km/h")
    defs = pd.read_csv(tmp_path / "us" / "deficiencies.csv")
    notes = pd.read_csv(tmp_path / "us" / "data_notes.csv")
    texts = list(defs["hazard_detail"].dropna()) + list(notes["detail"].dropna())
    assert texts and not [t for t in texts if metric.search(t)]
    assert any(" ft" in t for t in texts)
    html = (tmp_path / "us" / "report.html").read_text(encoding="utf-8")
    words = html.split("What this ground data can support")[1].split("</ul>")[0]
    assert not metric.search(words)
