"""Nothing computed is lost (issue 12): a failure in the report, a figure or the PDF leaves the
data outputs complete, is recorded in run.json and on one line, and the exit code is 1."""

from __future__ import annotations

import json

import pandas as pd


def _run_demo(run_cli, samples, out, *extra):
    return run_cli("run", "--roads", samples["roads"], "--ground", samples["dem"], "--structures",
                   samples["structures"], "--junctions", samples["junctions"], "--workers", "1", "--out", out, *extra)


def _data_outputs_complete(out):
    """The data files open with their reference readers (pandas, openpyxl via pandas, pyogrio)."""
    import pyogrio

    assert len(pd.read_csv(out / "deficiencies.csv")) > 0
    assert len(pd.read_csv(out / "curves.csv")) > 0
    assert len(pd.read_parquet(out / "profiles.parquet")) > 0
    sheets = pd.read_excel(out / "deficiencies.xlsx", sheet_name=None)
    assert {"Summary", "Deficiencies", "Curves", "Roads", "Method"} <= set(sheets)
    assert len(sheets["Deficiencies"]) == len(pd.read_csv(out / "deficiencies.csv"))
    layers = {row[0] for row in pyogrio.list_layers(out / "audit.gpkg")}
    assert {"roads", "curves", "deficiencies"} <= layers


def test_report_failure_keeps_the_data_outputs(tmp_path, samples, run_cli, monkeypatch):
    import pipeline.outputs.report as report

    def broken(*a, **k):
        raise KeyError(0)

    monkeypatch.setattr(report, "build_report", broken)
    out = tmp_path / "o"
    code, _, err = _run_demo(run_cli, samples, out, "--profiles-pdf")
    assert code == 1
    lines = [l for l in err.strip().splitlines() if l.startswith("sightaudit: error:")]
    assert len(lines) == 1 and "report.html" in lines[0] and "KeyError" in lines[0], err
    assert "Traceback" not in err
    _data_outputs_complete(out)
    assert not (out / "report.html").exists()  # nothing missing looks complete
    assert (out / "profiles.pdf").is_file()
    run = json.loads((out / "run.json").read_text())
    assert [f["output"] for f in run["output_failures"]] == ["report.html"]
    assert "KeyError" in run["output_failures"][0]["error"]


def test_one_figure_failing_gives_a_placeholder(tmp_path, samples, run_cli, monkeypatch):
    import pipeline.outputs.report as report

    real = report.curve_png
    calls = []

    def first_fails(spec):
        calls.append(spec["title"])
        if len(calls) == 1:
            raise ValueError("figure broke")
        return real(spec)

    monkeypatch.setattr(report, "curve_png", first_fails)
    out = tmp_path / "o"
    code, _, err = _run_demo(run_cli, samples, out)
    assert code == 1
    assert "figure broke" in err and "Traceback" not in err
    html = (out / "report.html").read_text()
    assert html.count("figure-missing") == 1
    assert html.count("class='curve sev-") == len(calls) > 1
    run = json.loads((out / "run.json").read_text())
    assert len(run["output_failures"]) == 1 and "curve" in run["output_failures"][0]["output"]
    _data_outputs_complete(out)


def test_pdf_failure_leaves_no_partial_pdf(tmp_path, samples, run_cli, monkeypatch):
    import pipeline.outputs.report as report

    def half_written(path, *a, **k):
        path.write_bytes(b"%PDF-1.4 partial")
        raise RuntimeError("disk full")

    monkeypatch.setattr(report, "write_profiles_pdf", half_written)
    out = tmp_path / "o"
    code, _, err = _run_demo(run_cli, samples, out, "--profiles-pdf")
    assert code == 1 and "profiles.pdf" in err
    assert not (out / "profiles.pdf").exists()
    assert (out / "report.html").is_file()
    _data_outputs_complete(out)
