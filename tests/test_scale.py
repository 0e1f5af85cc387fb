"""Whole networks: chunked runs, a process pool, a Dask cluster and resumed runs must all give
the same results as one plain run."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from pipeline.runner.network import chunk_rows

COMPARED = ("curves.csv", "deficiencies.csv", "horizontal_curves.csv", "roads.csv", "data_notes.csv")


def assert_same_outputs(a, b):
    """Two output folders hold the same results (tables equal to 1e-9; profiles too)."""
    for name in COMPARED:
        fa, fb = pd.read_csv(a / name), pd.read_csv(b / name)
        pd.testing.assert_frame_equal(fa, fb, check_exact=False, rtol=1e-9, atol=1e-9)
    pa, pb = pd.read_parquet(a / "profiles.parquet"), pd.read_parquet(b / "profiles.parquet")
    pd.testing.assert_frame_equal(pa, pb, check_exact=False, rtol=1e-9, atol=1e-9)


def _demo_args(samples, out, *extra):
    return ["run", "--roads", str(samples["roads"]), "--ground", str(samples["dem"]), "--structures",
            str(samples["structures"]), "--junctions", str(samples["junctions"]), "--out", str(out), "-q", *extra]


@pytest.fixture(scope="module")
def serial_out(tmp_path_factory, samples):
    """The demo network in one process, in chunks of about 6 km (so there are several)."""
    from pipeline.cli import main

    out = tmp_path_factory.mktemp("serial") / "out"
    (out.parent / "c.toml").write_text("[run]\nworkers = 1\nchunk_km = 6.0\n")
    assert main(_demo_args(samples, out, "--config", str(out.parent / "c.toml"))) == 0
    return out


def test_chunks_cover_every_road_once():
    t = pd.DataFrame({"length_m": [5000.0, 12000.0, 800.0, 3000.0, np.nan, 9000.0]})
    chunks = chunk_rows(t, 10.0)
    flat = np.concatenate(chunks)
    assert sorted(flat.tolist()) == list(range(len(t)))
    assert all(np.all(np.diff(c) == 1) for c in chunks)  # consecutive roads


def test_serial_run_is_the_plain_run(serial_out, demo_out):
    """Chunking changes nothing: the chunked serial run equals the demo run (one chunk)."""
    run = json.loads((serial_out / "run.json").read_text())
    assert run["chunks"]["total"] >= 5 and run["chunks"]["workers"] == 1
    assert_same_outputs(serial_out, demo_out)


def test_process_pool_equals_serial(tmp_path, samples, serial_out, run_cli):
    out = tmp_path / "par"
    (tmp_path / "c.toml").write_text("[run]\nworkers = 2\nchunk_km = 6.0\n")
    code, _, err = run_cli(*_demo_args(samples, out, "--config", tmp_path / "c.toml"))
    assert code == 0, err
    run = json.loads((out / "run.json").read_text())
    assert run["chunks"]["workers"] == 2 and run["chunks"]["computed"] == run["chunks"]["total"]
    assert_same_outputs(out, serial_out)


def test_dask_cluster_equals_local(tmp_path, samples, serial_out, run_cli):
    """A dask.distributed LocalCluster (two worker processes) stands in for a real cluster."""
    distributed = pytest.importorskip("dask.distributed", reason="dask.distributed not installed")
    (tmp_path / "c.toml").write_text("[run]\nchunk_km = 6.0\n")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                                  silence_logs=40) as cluster:
        out = tmp_path / "dask"
        code, _, err = run_cli(*_demo_args(samples, out, "--config", tmp_path / "c.toml", "--engine", "dask",
                                           "--scheduler", cluster.scheduler_address))
    assert code == 0, err
    assert json.loads((out / "run.json").read_text())["chunks"]["engine"] == "dask"
    assert_same_outputs(out, serial_out)


def test_dask_without_scheduler_is_a_clear_error(tmp_path, samples, run_cli):
    code, _, err = run_cli(*_demo_args(samples, tmp_path / "o", "--engine", "dask"))
    assert code == 2 and "--scheduler" in err


def test_interrupted_run_resumes_where_it_stopped(tmp_path, samples, serial_out, monkeypatch, run_cli):
    """A run that dies part-way (the third chunk fails, as a killed worker would leave it) keeps
    its finished chunks; the same command with --resume computes only the rest, and the outputs
    equal an uninterrupted run's. The failure is injected, so the check runs the same on any
    machine."""
    import pipeline.runner.engines as engines

    out = tmp_path / "out"
    (tmp_path / "c.toml").write_text("[run]\nworkers = 1\nchunk_km = 6.0\n")
    args = _demo_args(samples, out, "--config", str(tmp_path / "c.toml"))
    work = tmp_path / ".out.work"
    real, calls = engines.process_chunk, []

    def dies_on_the_third(*a, **k):
        calls.append(1)
        if len(calls) == 3:
            raise RuntimeError("worker killed")
        return real(*a, **k)

    monkeypatch.setattr(engines, "process_chunk", dies_on_the_third)
    code, _, _ = run_cli(*args)
    assert code != 0 and not (out / "run.json").exists()
    finished = len(list(work.glob("chunk_*/done.json")))
    assert finished == 2
    monkeypatch.setattr(engines, "process_chunk", real)
    code, _, err = run_cli(*args, "--resume")
    assert code == 0, err
    chunks = json.loads((out / "run.json").read_text())["chunks"]
    assert chunks["reused"] == finished
    assert chunks["computed"] == chunks["total"] - finished
    assert_same_outputs(out, serial_out)
    assert not work.exists()  # the work folder goes once the outputs are in place
