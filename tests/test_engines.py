"""The work split and the engines: chunks balanced by cost cover every road once, and one
process, a process pool and a Dask cluster give the same curves and deficiencies; progress
counts the per-road stages in km of road and the outputs step by step."""

from __future__ import annotations

import contextlib

import numpy as np
import pandas as pd
import pytest

from pipeline.core.config import load_config
from pipeline.runner.chunks import chunk_rows, road_costs
from pipeline.runner.progress import Progress


def _roads(n: int, seed: int = 7) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    length = rng.uniform(300.0, 15000.0, n)
    length[rng.integers(0, n, max(1, n // 10))] = np.nan  # unknown lengths count as zero
    return pd.DataFrame({"road_id": [f"R{i}" for i in range(n)], "source_id": [f"R{i}" for i in range(n)],
                         "length_m": length})


@pytest.mark.parametrize("workers", [1, 2, 3, 4, 8])
@pytest.mark.parametrize("n_roads", [1, 3, 25, 200])
def test_two_chunks_per_worker_cover_every_road_once(workers, n_roads):
    """Every road in exactly one chunk, chunks of consecutive roads, at least two chunks per
    worker when there are roads enough (the rule of the split; common practice, no source)."""
    t = _roads(n_roads)
    chunks = chunk_rows(t, 200.0, workers)
    flat = np.concatenate(chunks)
    assert sorted(flat.tolist()) == list(range(n_roads))  # each road once
    assert all(len(c) and np.all(np.diff(c) == 1) for c in chunks)
    want = 2 * workers if workers > 1 else 1
    assert len(chunks) >= min(want, n_roads)


def test_chunks_balance_cost_and_respect_the_length_cap():
    """Two hundred roads on two workers: four chunks whose costs are within one road's cost of
    an equal share; a smaller chunk_km gives more chunks, none much over the cap."""
    t = _roads(200)
    cost = road_costs(t, 5.0)
    chunks = chunk_rows(t, 10_000.0, 2, cost)
    assert len(chunks) == 4
    share = cost.sum() / 4
    for c in chunks:
        assert abs(cost[c].sum() - share) <= cost.max()
    small = chunk_rows(t, 50.0, 2, cost)
    km = np.nan_to_num(t["length_m"].to_numpy()) / 1000
    assert len(small) >= km.sum() / 50.0
    assert all(km[c].sum() <= 75.0 or len(c) == 1 for c in small)


def test_ground_points_add_to_a_roads_cost():
    """A road with many ground points costs more than one of the same length without."""
    t = pd.DataFrame({"road_id": ["a", "b"], "source_id": ["a", "b"], "length_m": [1000.0, 1000.0]})
    cost = road_costs(t, 5.0, {"a": (0, 5000)})
    assert cost[0] > cost[1] == pytest.approx(200.0)  # 1000 m / 5 m stations


class Recording(Progress):
    """Remembers every stage and every tick."""

    def __init__(self):
        self.stages = []

    @contextlib.contextmanager
    def stage(self, name, total=None, unit=""):
        rec = {"name": name, "total": total, "unit": unit, "ticks": [], "what": []}
        self.stages.append(rec)

        def tick(n=1, what=None):
            rec["ticks"].append(n)
            rec["what"].append(what)

        yield tick


def _frames(result):
    curves = result.curves.sort_values(["road_id", "curve_no"]).reset_index(drop=True)
    defs = result.deficiencies.sort_values(["rank"]).reset_index(drop=True)
    return curves, defs


@pytest.fixture(scope="module")
def serial(samples):
    """The sample network (ground points) in this process, one chunk."""
    from pipeline.api import audit

    progress = Recording()
    cfg = load_config(None, {"run.workers": 1})
    result = audit(samples["roads"], samples["points"], cfg, progress=progress)
    return result, progress


def test_progress_counts_the_network_in_km(serial, samples):
    """The per-road stage's ticks add up to the network's length in km (road by road, so
    never more than a road at once), and writing the outputs has a step per output."""
    result, progress = serial
    stage = next(s for s in progress.stages if s["name"].startswith("profiles"))
    km = result.roads["length_m"].sum() / 1000.0
    assert stage["unit"] == "km"
    assert stage["total"] == pytest.approx(km, abs=0.01)
    assert sum(stage["ticks"]) == pytest.approx(km, abs=0.01)
    assert len(stage["ticks"]) == len(result.roads)  # one tick per road, not one per chunk
    import tempfile

    rec = Recording()
    with tempfile.TemporaryDirectory() as tmp:
        result.write(tmp + "/out", progress=rec)
    out = next(s for s in rec.stages if s["name"] == "writing outputs")
    assert out["total"] > 1 and sum(out["ticks"]) == out["total"]
    assert {"tables", "workbook", "GeoPackage", "report.html"} <= set(out["what"])
    assert any(str(w).startswith("figure ") for w in out["what"])


def test_process_pool_equals_one_process(serial, samples):
    """Two workers (two chunks each, points handed out per chunk, figures drawn in the pool)
    give the same curves and deficiencies as one process."""
    from pipeline.api import audit

    cfg = load_config(None, {"run.workers": 2})
    progress = Recording()
    pooled = audit(samples["roads"], samples["points"], cfg, progress=progress)
    assert pooled.summary["chunks"]["total"] >= 4 and pooled.summary["chunks"]["workers"] == 2
    stage = next(s for s in progress.stages if s["name"].startswith("profiles"))
    assert sum(stage["ticks"]) == pytest.approx(stage["total"], abs=0.01)
    for a, b in zip(_frames(serial[0]), _frames(pooled)):
        pd.testing.assert_frame_equal(a, b, check_exact=False, rtol=1e-9, atol=1e-9)


def test_dask_local_cluster_equals_one_process(serial, samples):
    """A dask.distributed LocalCluster (two worker processes) gives the same curves and
    deficiencies as one process."""
    distributed = pytest.importorskip("dask.distributed", reason="dask.distributed not installed")
    from pipeline.api import audit

    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                                  silence_logs=40) as cluster:
        cfg = load_config(None, {"run.engine": "dask", "run.scheduler": cluster.scheduler_address,
                                 "run.workers": 2})
        on_dask = audit(samples["roads"], samples["points"], cfg)
    assert on_dask.summary["chunks"]["engine"] == "dask" and on_dask.summary["chunks"]["total"] >= 4
    for a, b in zip(_frames(serial[0]), _frames(on_dask)):
        pd.testing.assert_frame_equal(a, b, check_exact=False, rtol=1e-9, atol=1e-9)


def test_terminal_progress_shows_time_left_from_the_first_km():
    """On a terminal the time left is elapsed x (total - done) / done, shown from the first
    tick on (no '-:--:--' once some road is done), with the km done and the step at hand."""
    pytest.importorskip("rich", reason="rich not installed")
    import io
    import time

    from rich.console import Console

    from pipeline.cli import _RichProgress

    buf = io.StringIO()
    progress = _RichProgress(Console(file=buf, force_terminal=True, width=160))
    with progress.stage("profiles, curves, sight", total=200.0, unit="km") as tick:
        time.sleep(0.2)
        tick(50.0)
        time.sleep(0.3)  # the display refreshes ten times a second
        progress_line = buf.getvalue().rsplit("\r", 1)[-1]
    assert "50.0/200.0 km" in progress_line
    assert "eta 0:00:0" in progress_line and "-:--:--" not in progress_line
    buf = io.StringIO()
    progress = _RichProgress(Console(file=buf, force_terminal=True, width=160))
    with progress.stage("writing outputs", total=5) as tick:
        tick(what="workbook")
        time.sleep(0.3)
        assert "1/5" in buf.getvalue() and "workbook" in buf.getvalue()
