"""Runner: the same study gives identical arrays on every executor; cancel keeps finished chunks;
runs that cannot fit are refused before they start."""
from __future__ import annotations

import threading
import time
from pathlib import Path

import numpy as np
import pytest

from workbench.errors import WorkbenchError
from workbench.results import read_results
from workbench.runner import RunError, run_study
from workbench.studies import StudySpec

ROOT = Path(__file__).resolve().parents[1]
S6 = str(ROOT / "arms" / "demo_s6.toml")


def spec(**extra):
    s = {"joints": ["j2", "j3"], "ranges": [[-140, 90], [-120, 160]], "steps": [60, 70], "store_tcp": True}
    s.update(extra)
    return StudySpec("joint_sweep", S6, settings=s, name="executors")


def cloud():
    return StudySpec("joint_sweep", S6, settings={"mode": "samples", "samples": 6000, "seed": 11})


def assert_same(a, b):
    """The same cells, statuses and values. Floating-point values are compared to 1e-12 of the
    field's largest value (and inf/nan in the same places): on the development machine they agree to the last bit, but a
    CI machine of another CPU model gave last-bit differences (at most 2.7e-14 relative) between the
    test process and its worker processes, which the compiled kernels may legitimately round
    differently (fused multiply-add contraction, library code chosen per process)."""
    assert [f.name for f in a.fields] == [f.name for f in b.fields]
    for name in a.arrays:
        x, y = np.asarray(a.arrays[name]), np.asarray(b.arrays[name])
        assert x.dtype == y.dtype and x.shape == y.shape, name
        if np.issubdtype(x.dtype, np.floating):
            if name == "condition":  # s1/sm: compare 1/k, which is as well conditioned as sm itself
                with np.errstate(divide="ignore"):
                    x, y = 1.0 / x, 1.0 / y
            # singular values are accurate to a multiple of eps * s1 (Demmel & Veselic 1992), so
            # near-singular cells are compared on the field's scale, not relative to their own value
            finite = np.abs(x[np.isfinite(x)])
            scale = float(finite.max()) if finite.size else 0.0
            np.testing.assert_allclose(x, y, rtol=1e-12, atol=1e-12 * scale, equal_nan=True, err_msg=name)
        else:
            np.testing.assert_array_equal(x, y, err_msg=name)
    assert not a.incomplete and not b.incomplete


@pytest.fixture(scope="module")
def in_process():
    return run_study(spec(), executor="inprocess"), run_study(cloud(), executor="inprocess", chunk_cells=2048)


def test_local_processes_match_in_process(in_process):
    calls = []
    r = run_study(spec(), executor="processes", workers=2, chunk_cells=1000,
                  progress=lambda d, t, e: calls.append((d, t, e)))
    assert_same(in_process[0], r)
    assert r.finished.size == 5 and r.attrs["executor"] == "processes"
    assert calls[0][0] == 0 and calls[-1][:2] == (4200, 4200) and calls[-1][2] == 0
    assert [c[0] for c in calls] == sorted(c[0] for c in calls)
    assert_same(in_process[1], run_study(cloud(), executor="processes", workers=2, chunk_cells=1500))


def test_dask_local_cluster_matches_in_process(in_process):
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None)
    try:
        with distributed.Client(cluster) as client:
            assert len(client.scheduler_info()["workers"]) == 2
            r = run_study(spec(), executor="dask", pool=client, chunk_cells=1000)
            assert_same(in_process[0], r)
            assert r.attrs["executor"] == "dask"
        # the runner's own client, connecting to the scheduler's address (--scheduler tcp://...)
        assert_same(in_process[1], run_study(cloud(), scheduler=cluster.scheduler_address, chunk_cells=1000))
    finally:
        cluster.close()


def test_cancel_keeps_finished_chunks_and_marks_incomplete(tmp_path, in_process):
    stop = threading.Event()
    out = tmp_path / "cancelled.h5"
    r = run_study(spec(), out=out, chunk_cells=500, cancel=stop, on_chunk=lambda c, a: stop.set())
    assert r.incomplete and r.finished.tolist() == [True] + [False] * 8
    back = read_results(out)
    assert back.incomplete and back.attrs["chunks_done"] == 1
    ref = in_process[0].flat("manipulability")
    np.testing.assert_array_equal(back.flat("manipulability")[:500], ref[:500])
    assert np.isnan(back.flat("manipulability")[500:]).all()
    # a callable works as well, and cancelling before the start computes nothing
    r0 = run_study(spec(), cancel=lambda: True)
    assert r0.incomplete and not r0.finished.any()


def test_cancel_from_another_thread_stops_processes_promptly(tmp_path):
    stop = threading.Event()
    box = {}
    first = threading.Event()

    def work():
        box["r"] = run_study(spec(steps=[400, 500]), out=tmp_path / "c.h5", executor="processes", workers=2,
                             chunk_cells=2000, cancel=stop, progress=lambda d, t, e: d and first.set())

    t = threading.Thread(target=work)
    t.start()
    assert first.wait(120)
    t0 = time.perf_counter()
    stop.set()
    t.join(30)
    waited = time.perf_counter() - t0
    r = box["r"]
    assert r.incomplete and 0 < r.finished.sum() < r.finished.size
    # cooperative cancel: the runner polls every 0.1 s and does not wait for running chunks
    # (generous limit: the machine is shared)
    assert waited < 5.0, waited
    assert read_results(tmp_path / "c.h5").incomplete


def test_runs_that_cannot_fit_are_refused(tmp_path, monkeypatch):
    import collections

    import workbench.runner as runner_mod
    from workbench.limits import MAX_CELLS

    huge = spec(steps=[100000, 90000])  # 9e9 cells: refused by the cell limit before any plan exists
    with pytest.raises(WorkbenchError, match=f"9,000,000,000 cells .*at most {MAX_CELLS:,}"):
        run_study(huge)
    big = spec(steps=[3000, 3000])  # 9e6 cells, a few hundred MB: refused on a small machine
    monkeypatch.setattr(runner_mod, "_available_memory", lambda: 64 << 20)
    with pytest.raises(RunError, match="of memory but only .* is free; stream them to a file with --out"):
        run_study(big)
    usage = collections.namedtuple("usage", "total used free")
    monkeypatch.setattr(runner_mod.shutil, "disk_usage", lambda p: usage(1 << 30, 1 << 30, 32 << 20))
    with pytest.raises(RunError, match="on disk but"):
        run_study(big, out=tmp_path / "big.h5")
    monkeypatch.undo()
    assert list(tmp_path.iterdir()) == []
    with pytest.raises(WorkbenchError, match="executor: expected one of"):
        run_study(spec(), executor="threads")
    with pytest.raises(WorkbenchError, match="--workers: expected a whole number"):
        run_study(spec(), executor="processes", workers=0)
    with pytest.raises(WorkbenchError, match="--scheduler nowhere: expected 'local' or an address"):
        run_study(spec(), scheduler="nowhere")


def test_sweep_bench_reports_in_the_shared_shape():
    from workbench.runner import bench_sweep

    res = bench_sweep(quick=True)
    m = res["metrics"]
    assert res["name"] == "sweep" and m["cells"] == 90000 and m["file_mb"] > 0.1
    assert m["run_s"] > 0 and m["compute_s"] > 0
    value, bar, passed = res["bars"]["runner+writer overhead<20%"]
    assert value == res["ratios"]["overhead_vs_compute"] and bar == 0.2 and passed == (value < 0.2)


class _WholeGridSweep(__import__("workbench.studies.joint_sweep", fromlist=["JointSweep"]).JointSweep):
    """A joint sweep whose plan asks for one chunk (like sequential kinds do)."""

    name = "whole_grid_sweep_test"

    def plan(self, spec, arm, cell=None, chunk_cells=None):
        p = super().plan(spec, arm, cell, chunk_cells)
        return p if chunk_cells else p.with_chunk_cells(p.cells)


class _OwnChunksSweep(__import__("workbench.studies.joint_sweep", fromlist=["JointSweep"]).JointSweep):
    name = "own_chunks_sweep_test"
    calibrated_chunks = False

    def plan(self, spec, arm, cell=None, chunk_cells=None):
        return super().plan(spec, arm, cell, chunk_cells or 1234)


def test_runner_recuts_chunks_unless_the_kind_keeps_them():
    from dataclasses import replace

    from workbench.studies import base

    base.register_kind(_WholeGridSweep.name, _WholeGridSweep)
    base.register_kind(_OwnChunksSweep.name, _OwnChunksSweep)
    try:
        s = spec(steps=[300, 200])
        recut = run_study(s, chunk_seconds=0.01)  # the joint sweep's own 32768 cells -> calibrated
        assert recut.chunk_cells != 32768 and recut.finished.size > 2
        whole = run_study(replace(s, kind=_WholeGridSweep.name), chunk_seconds=0.01)
        assert whole.finished.size == 1 and whole.chunk_cells == 60000
        own = run_study(replace(s, kind=_OwnChunksSweep.name), chunk_seconds=0.01)
        assert own.chunk_cells == 1234 and own.finished.size == 49
        for r in (whole, own):
            np.testing.assert_array_equal(r.arrays["min_sv"], recut.arrays["min_sv"])
    finally:
        for k in (_WholeGridSweep.name, _OwnChunksSweep.name):
            base.KINDS.pop(k, None)
            base._INSTANCES.pop(k, None)


class _CountingSweep(__import__("workbench.studies.joint_sweep", fromlist=["JointSweep"]).JointSweep):
    name = "counting_sweep_test"
    log: list = []

    clock = None  # a _SimClock while calibrating in a test (no real timing decides anything)

    def compute_chunk(self, plan, arm, cell, chunk):
        self.log.append((chunk.start, chunk.stop))
        if _CountingSweep.clock is not None:
            _CountingSweep.clock.t += 1e-4 * chunk.size  # 100 us per cell of simulated time
        return super().compute_chunk(plan, arm, cell, chunk)


class _SimClock:
    """A clock that only moves when the simulated work (or a simulated pause) moves it."""

    def __init__(self):
        self.t = 0.0

    def __call__(self):
        return self.t


def test_in_process_runs_reuse_the_calibration_cells_without_changing_a_value(tmp_path):
    # calibration times compute_chunk on the first cells; the run must take those cells from it
    # (not compute them twice) and give the same arrays as a run that computes every cell
    from dataclasses import replace

    from workbench.runner import prepare
    from workbench.studies import base

    base.register_kind(_CountingSweep.name, _CountingSweep)
    try:
        s = replace(spec(), kind=_CountingSweep.name)
        prep = prepare(s, chunk_cells=300)
        _CountingSweep.clock = _SimClock()
        prep.estimate = base.calibrate(prep.kind, prep.plan, prep.arm, prep.cell, sample_cells=500,
                                       clock=_CountingSweep.clock)
        _CountingSweep.clock = None
        # simulated 100 us per cell: 8 cells (0.8 ms) -> x8 -> 64 (6.4 ms) -> x8, capped -> 500
        # cells (50 ms, over the 30 ms needed), timed three times
        assert prep.estimate.sample[0].stop == 500
        assert prep.estimate.seconds_per_cell == pytest.approx(1e-4)
        _CountingSweep.log.clear()
        reused = run_study(prep, out=tmp_path / "r.h5", chunk_cells=300)
        assert _CountingSweep.log[:2] == [(500, 600), (600, 900)]  # chunk 0 and part of chunk 1 reused
        assert sum(b - a for a, b in _CountingSweep.log) == 4200 - 500
        fresh = prepare(s, chunk_cells=300)
        fresh.estimate = replace(prep.estimate, sample=None)
        _CountingSweep.log.clear()
        full = run_study(fresh, chunk_cells=300)
        assert sum(b - a for a, b in _CountingSweep.log) == 4200
        assert_same(full, reused)
        assert_same(full, read_results(tmp_path / "r.h5"))
    finally:
        _CountingSweep.clock = None
        base.KINDS.pop(_CountingSweep.name, None)
        base._INSTANCES.pop(_CountingSweep.name, None)


class _PausedKind:
    """compute_chunk costs ``per_cell`` simulated seconds per cell; the calls listed in ``pauses``
    (0 = the warm-up call) take ``pause`` seconds more, as when the machine stops the process."""

    name = "paused"

    def __init__(self, clock, per_cell, pauses, pause=0.05):
        self.clock, self.per_cell, self.pauses, self.pause = clock, per_cell, set(pauses), pause
        self.calls = []

    def compute_chunk(self, plan, arm, cell, chunk):
        i = len(self.calls)
        self.calls.append(chunk.size)
        self.clock.t += self.per_cell * chunk.size + (self.pause if i in self.pauses else 0.0)
        return {"x": np.zeros(chunk.size)}


def _fake_plan(cells):
    from types import SimpleNamespace

    return SimpleNamespace(cells=cells, cell_bytes=8, result_bytes=8 * cells, chunk_cells=cells)


@pytest.mark.parametrize("pauses", [(), (1,), (2,), (4,), (5,), (8,), (1, 5), (1, 8)])
def test_calibration_is_not_fooled_by_one_pause(pauses):
    # a 50 ms pause on any one timed call (1 = the first timing, on 8 cells; one pause in each of
    # two stages too) must not change the
    # estimate: 3 us per cell of simulated work, whatever call the pause hits. The old rule (stop at
    # the first call over 20 ms) estimated 6.25 ms per cell from a pause on the 8-cell call, 2000x
    # too slow, and cut the grid into chunks of 40 cells.
    from workbench.studies.base import calibrate

    clock = _SimClock()
    kind = _PausedKind(clock, 3e-6, pauses)
    est = calibrate(kind, _fake_plan(1_000_000), None, None, clock=clock)
    assert est.seconds_per_cell == pytest.approx(3e-6, rel=1e-9)
    assert est.seconds == pytest.approx(3.0, rel=1e-9)
    # and the sample stays a sensible size: one call of at least 30 ms of work (10 000 cells)
    assert est.sample[0].stop >= 10_000


def test_calibration_of_a_slow_kind_stays_short():
    # 2 ms per cell: 8 cells are 16 ms (under 30 ms), so the sample grows by 2 * 30 / 16 = 3.75 to
    # 30 cells (60 ms), timed three times; the whole calibration is a quarter second of (simulated) work
    from workbench.studies.base import calibrate

    clock = _SimClock()
    kind = _PausedKind(clock, 2e-3, ())
    est = calibrate(kind, _fake_plan(100_000), None, None, clock=clock)
    assert est.seconds_per_cell == pytest.approx(2e-3)
    assert kind.calls == [8, 8, 30, 30, 30]
    assert clock.t == pytest.approx(0.016 * 2 + 0.06 * 3)


def test_chunk_sizes_have_a_floor_and_a_ceiling():
    from workbench.runner import (MAX_CHUNK_BYTES, MAX_CHUNK_CELLS, MAX_CHUNKS, MIN_CHUNK_CELLS,
                                  MIN_SLOW_CHUNK_CELLS, chunk_cells_for)

    # about 0.25 s of work per chunk when the estimate is sane
    assert chunk_cells_for(1e-5, 10**7, 40) == pytest.approx(25_000)
    # an estimate fooled 1000x too slow cannot make chunks smaller than one kernel block ...
    assert chunk_cells_for(6e-3, 10**6, 40) == pytest.approx(2.0 / 6e-3)  # floor for a "slow" kind
    assert chunk_cells_for(1e-3, 10**6, 40) == MIN_CHUNK_CELLS  # 250 cells asked, 512 given
    # ... nor cut a grid into more than MAX_CHUNKS chunks (the 12M cells in 35-cell chunks)
    assert chunk_cells_for(6e-3, 12_000_000, 40) == pytest.approx(12_000_000 / MAX_CHUNKS)
    # a really slow kind (1 s per cell) keeps chunks short enough to cancel
    assert chunk_cells_for(1.0, 1000, 40) == MIN_SLOW_CHUNK_CELLS
    # ceilings: cells, and bytes of result arrays held at once; the memory ceiling wins over the floor
    assert chunk_cells_for(1e-9, 10**9, 8) == MAX_CHUNK_CELLS
    assert chunk_cells_for(1e-9, 10**9, 1000) == pytest.approx(MAX_CHUNK_BYTES / 1000)
    assert chunk_cells_for(1e-4, 10**6, MAX_CHUNK_BYTES // 100) == pytest.approx(100)
    assert chunk_cells_for(1e-6, 300, 40) == 300  # never more than the grid
