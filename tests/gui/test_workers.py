"""The study worker reports finished chunks through the one worker abstraction
(gui/workers.py: Worker.partial), its progress, its errors and a cancel, on a real run in a
QThread."""
from pathlib import Path

import numpy as np
import pytest

from workbench.gui.runs import ChunkResult, StudyWorker
from workbench.gui.workers import start_worker
from workbench.studies.spec import read_study_file

ROOT = Path(__file__).resolve().parents[2]
ARM = (ROOT / "arms" / "demo_planar2r.toml").as_posix()


def _spec(tmp_path, extra=""):
    p = tmp_path / "s.toml"
    p.write_text(f'[study]\nname = "worker"\nkind = "joint_sweep"\narm = "{ARM}"\n[settings]\nmode = "grid"\n'
                 f'joints = ["th1", "th2"]\nranges = [[0, 90], [-170, 170]]\nsteps = [100, 341]\nrows = "vx,vy"\n'
                 f'{extra}')
    return read_study_file(str(p))


def _run(qtbot, worker, parent):
    got = {"parts": [], "progress": []}
    worker.partial.connect(got["parts"].append)
    worker.progress.connect(lambda f, t: got["progress"].append(f))
    with qtbot.waitSignal(worker.finished, timeout=120_000) as blocker:
        thread = start_worker(worker, parent)
    thread.wait(10_000)
    assert thread.isFinished()
    got["status"], got["path"] = blocker.args
    worker.deleteLater()          # as the window does: freed by the event loop, not by the GC
    thread.deleteLater()
    return got


@pytest.fixture
def parent(qtbot):
    from PySide6 import QtWidgets

    w = QtWidgets.QWidget()
    qtbot.addWidget(w)
    return w


def test_chunks_arrive_as_partial_results_that_make_up_the_file(qtbot, parent, tmp_path):
    from workbench.results import read_results

    out = tmp_path / "r.h5"
    # 34 100 cells: more than one default chunk, so the runner cuts the chunks; chunk_seconds tiny:
    # its smallest chunks, so several partials arrive
    worker = StudyWorker(_spec(tmp_path), str(out), chunk_seconds=1e-6)
    got = _run(qtbot, worker, parent)
    assert got["status"] == "done" and got["path"] == str(out)
    parts = got["parts"]
    assert len(parts) >= 2 and all(isinstance(p, ChunkResult) for p in parts)
    # the chunks tile the 100 x 341 cells exactly once
    spans = sorted((p.start, p.stop) for p in parts)
    assert spans[0][0] == 0 and spans[-1][1] == 100 * 341
    assert all(a[1] == b[0] for a, b in zip(spans, spans[1:]))
    w = np.full(100 * 341, np.nan)
    for p in parts:
        w[p.start:p.stop] = p.arrays["manipulability"]
    res = read_results(str(out))
    np.testing.assert_array_equal(w, np.asarray(res.arrays["manipulability"]).reshape(-1))
    # unit links: w = l1 l2 |sin th2| = |sin th2| (Yoshikawa, "Manipulability of robotic mechanisms",
    # IJRR 1985; from memory), th2 is the faster (second) axis
    th2 = np.radians(np.linspace(-170, 170, 341))
    np.testing.assert_allclose(w.reshape(100, 341), np.tile(np.abs(np.sin(th2)), (100, 1)), atol=1e-12)
    assert got["progress"][-1] == pytest.approx(1.0)
    assert all(a <= b for a, b in zip(got["progress"], got["progress"][1:]))


def test_a_run_cancelled_before_it_starts_is_cancelled_and_sends_no_chunk(qtbot, parent, tmp_path):
    worker = StudyWorker(_spec(tmp_path), str(tmp_path / "c.h5"), chunk_seconds=1e-6)
    worker.cancel()
    got = _run(qtbot, worker, parent)
    assert got["status"] == "cancelled" and got["parts"] == []


def test_a_bad_study_fails_with_one_line_and_no_file(qtbot, parent, tmp_path):
    out = tmp_path / "bad.h5"
    spec = _spec(tmp_path).with_settings(steps=[4, 0])
    worker = StudyWorker(spec, str(out))
    got = _run(qtbot, worker, parent)
    assert got["status"].startswith("failed: ") and "steps" in got["status"] and "\n" not in got["status"]
    assert got["parts"] == [] and got["path"] is None and not out.exists()
