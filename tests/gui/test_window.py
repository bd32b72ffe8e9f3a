"""The main window, driven with pytest-qt offscreen (the 2D scene stands in for the 3D one)."""
import glob
import os

import numpy as np
import pytest
from PySide6 import QtCore

from workbench.arm import read_arm_model
from workbench.gui.study_panel import BAD_STYLE
from workbench.results import read_results
from workbench.studies import read_study_file
from workbench.studies.cell import read_cell_file


ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
ARMS = sorted(glob.glob(os.path.join(ROOT, "arms", "*.toml")) + glob.glob(os.path.join(ROOT, "arms", "*.urdf")))
CELL = os.path.join(ROOT, "arms", "cells", "tray_cell.toml")
STUDY = os.path.join(ROOT, "arms", "cells", "demo_s6_sweep.toml")
AUDIT = os.path.join(ROOT, "arms", "cells", "tray_path_audit.toml")


def wait_run(qtbot, w, timeout=30000):
    qtbot.waitUntil(lambda: not w.running, timeout=timeout)


def _set(w, **texts):
    for k, v in texts.items():
        w.study_panel.edits[k].setText(v)
    return w.study_panel.check()


def _run(qtbot, w, timeout=60000):
    qtbot.mouseClick(w.study_panel.run_btn, QtCore.Qt.LeftButton)
    assert w.running
    wait_run(qtbot, w, timeout)


def test_starts_on_the_demo_arm_and_cell(window):
    assert window.state.arm.model.name.startswith("S6 demo arm")
    assert len(window.arm_panel.rows) == 6
    assert window.cell_path == CELL
    # the arm stands where the cell's [placement] puts it
    assert np.allclose(window.state.arm.model.mount, read_cell_file(CELL).placement)
    # the 2D scene shows the arm: its top-view polyline is the arm's link points
    info = window.state.info()
    assert np.allclose(window.scene.arm_xy(), info.points[:, :2])
    assert "3D view off" in window.gl_note


@pytest.mark.parametrize("path", ARMS, ids=os.path.basename)
def test_open_each_demo_arm(window, path):
    assert window.open_file(path), window.last_error
    model = read_arm_model(path)
    assert window.state.arm.n == model.n == len(window.arm_panel.rows)
    assert window.arm_panel.summary.text().count(model.name) == 1
    assert np.allclose(window.state.q, window.state.arm.home_q)


def test_open_cell_study_and_results_files(window, tmp_path, qtbot):
    assert window.open_file(CELL), window.last_error
    cell = read_cell_file(CELL)
    x, y = window.scene._items[0]["points"].getData()
    assert len(x) == len(cell.points)
    assert window.open_file(STUDY), window.last_error
    spec = read_study_file(STUDY)
    assert window.study_panel.kind.name == spec.kind
    assert window.study_panel.edits["steps"].text() == "[231, 281]"
    assert not window.study_panel.errors and window.study_panel.run_btn.isEnabled()
    # a results file made by the runner opens into the map
    from workbench.runner import run_study

    out = str(tmp_path / "r.h5")
    run_study(spec.with_settings(steps=[21, 17]), out=out)
    assert window.open_file(out), window.last_error
    d = window.result
    assert d.shape == (21, 17) and d.fraction_done == 1.0
    img = window.map_view.image.image
    assert img.shape == (21, 17) and np.isfinite(img).all()
    res = read_results(out)
    assert np.allclose(d.measures["inverse_condition"], res.flat("inverse_condition"))
    assert window.recent_files()[0] == os.path.abspath(out)


def test_bad_files_show_an_error_and_keep_the_state(window, tmp_path):
    arm_before = window.state.arm
    window.state.set_joint(0, 0.3)
    bad_arm = tmp_path / "bad_arm.toml"
    text = open(os.path.join(ROOT, "arms", "demo_s6.toml")).read().replace("limits = [-170, 170]", "limits = [170, -170]")
    bad_arm.write_text(text)
    (tmp_path / "broken.toml").write_text("[arm\nname = 1")
    (tmp_path / "notes.txt").write_text("hello")
    (tmp_path / "fake.h5").write_text("not hdf5")
    (tmp_path / "plain.toml").write_text("x = 1\n")
    for name in ("bad_arm.toml", "broken.toml", "notes.txt", "fake.h5", "plain.toml", "missing.toml"):
        p = str(tmp_path / name)
        assert not window.open_file(p)
        assert name in window.last_error
        assert "\n" not in window.last_error
        assert window.error_box is not None and window.error_box.isVisible()
        assert window.error_box.text() == window.last_error
        assert window.status.currentMessage().startswith("error: ")
        assert window.state.arm is arm_before and window.state.q[0] == pytest.approx(0.3)
    assert "limits" in _msg(window, bad_arm)


def _msg(window, path):
    window.open_file(str(path))
    return window.last_error


def test_form_flags_each_bad_value_and_run_stays_disabled(window):
    sp = window.study_panel
    assert sp.kind.name == "joint_sweep" and sp.run_btn.isEnabled()
    assert not _set(window, steps="[0, 5]", frame="nowhere", ranges="[[1, 2")
    for key, words in (("steps", "at least 1"), ("frame", "nowhere"), ("ranges", "not a value")):
        assert sp.edits[key].styleSheet() == BAD_STYLE
        assert words in sp.reasons[key].text() and not sp.reasons[key].isHidden()
        assert sp.edits[key].toolTip() == sp.reasons[key].text()
    assert sp.edits["joints"].styleSheet() == ""
    assert not sp.run_btn.isEnabled()
    sp.run_btn.click()
    assert not window.running
    assert _set(window, steps="[11, 11]", frame="tcp", ranges="[[-140, 90], [-120, 160]]")
    assert sp.run_btn.isEnabled() and "121 cells" in sp.estimate_label.text()
    assert "Not used" not in sp.summary.text()
    # switching the mode leaves settings the new mode does not read: valid, and the panel says so
    assert _set(window, mode="samples")
    assert "Not used, ignored: joints, ranges, steps (mode is &#x27;samples&#x27;)" in sp.summary.text()


def test_run_brush_and_pick(window, qtbot):
    assert _set(window, steps="[41, 31]")
    _run(qtbot, window)
    d = window.result
    assert d.fraction_done == 1.0 and window.study_panel.progress.value() == 100
    img = window.map_view.image.image
    assert img.shape == (41, 31) and np.isfinite(img).all()
    assert np.array_equal(img, d.grid("inverse_condition"))
    # map axes: x = j3 over [-120, 160] deg, y = j2 over [-140, 90] deg
    assert d.x[0] == pytest.approx(-120) and d.x[-1] == pytest.approx(160)
    assert d.y[0] == pytest.approx(-140) and d.y[-1] == pytest.approx(90)
    # brush a rectangle; the expected cells worked out one by one
    x0, x1, y0, y1 = -50.0, 25.0, -100.0, -40.0
    expect = {j * 31 + i for j in range(41) for i in range(31)
              if x0 <= d.x[i] <= x1 and y0 <= d.y[j] <= y1}
    # by hand: x steps of 280/30 = 9.333 deg give -45.33 .. 20.0 (8 columns); y steps of 230/40 = 5.75
    # deg give -99.75 .. -42.25 (11 rows)
    assert len(expect) == 8 * 11
    window.map_view.brush_rect(x0, x1, y0, y1)
    assert set(window.selection.indices().tolist()) == expect
    assert window.hist_view.sel_counts.sum() == len(expect)
    vals = d.measures["inverse_condition"][sorted(expect)]
    counts, _ = np.histogram(vals, bins=window.hist_view.edges)
    assert np.array_equal(window.hist_view.sel_counts, counts)
    m = window.pose_list.model
    assert m.rowCount() == len(expect)
    assert {m.cell_of_row(r) for r in range(m.rowCount())} == expect
    assert window.scene.ghost_count() == 12
    assert window.map_view.overlay.image.sum() == len(expect)
    # pick the first listed pose: sliders, measures and scene follow
    c = m.cell_of_row(0)
    assert window.pick_cell(c)
    j, i = divmod(c, 31)
    q = window.state.q
    assert np.degrees(q[1]) == pytest.approx(d.y[j]) and np.degrees(q[2]) == pytest.approx(d.x[i])
    assert np.allclose(window.arm_panel.slider_values(), q, atol=np.radians(0.051))
    tcp = window.state.arm.fk(q, world=True)[:3, 3]
    assert np.allclose(window.scene.arm_xy()[-1], tcp[:2])
    shown = float(window.arm_panel.m_labels["inverse_condition"].text())
    assert shown == pytest.approx(d.measures["inverse_condition"][c], abs=1e-4)
    # the lasso: its corners in axis units, and the cells inside it
    poly = np.array([[-80.0, -40.0], [0.0, -110.0], [60.0, -40.0], [0.0, 30.0]])
    window.map_view.brush_polygon(poly)
    from matplotlib.path import Path

    X, Y = np.meshgrid(d.x, d.y)
    inside = Path(poly).contains_points(np.column_stack([X.ravel(), Y.ravel()]))
    assert inside.any() and np.array_equal(window.selection.mask, inside)
    assert window.pose_list.model.rowCount() == inside.sum()
    # a value range on the histogram selects exactly the cells with values in it
    v = d.measures["inverse_condition"]
    lo, hi = np.quantile(v, [0.2, 0.4])
    window.hist_view.brush_range(lo, hi)
    want = np.flatnonzero((v >= lo) & (v <= hi))
    assert np.array_equal(window.selection.indices(), want)
    assert m.rowCount() == want.size
    # sorting the list by a measure column orders the rows by it
    col = next(k for k, cdef in enumerate(m.columns) if cdef[1] == ("m", "inverse_condition"))
    m.sort(col, QtCore.Qt.DescendingOrder)
    got = v[m.order]
    assert np.all(np.diff(got) <= 0) and set(m.order.tolist()) == set(want.tolist())
    # exports: pose list CSV (brushed rows) and the map image
    import tempfile

    folder = tempfile.mkdtemp()
    window.export_csv(os.path.join(folder, "poses.csv"))
    rows = np.loadtxt(os.path.join(folder, "poses.csv"), delimiter=",", skiprows=1, ndmin=2)
    assert rows.shape[0] == want.size and np.array_equal(rows[:, 0].astype(int), m.order)
    window.export_map(os.path.join(folder, "map.png"))
    assert open(os.path.join(folder, "map.png"), "rb").read(8) == b"\x89PNG\r\n\x1a\n"
    window.export_map(os.path.join(folder, "map.svg"))
    svg = open(os.path.join(folder, "map.svg"), encoding="utf-8").read()
    assert "<svg" in svg and "joint j3 (deg)" in svg
    window.export_results(os.path.join(folder, "copy.h5"))
    assert read_results(os.path.join(folder, "copy.h5")).cells == 41 * 31
    # the layout report of the results behind the views (the cautions are in it)
    window.export_report(os.path.join(folder, "report.html"))
    html = open(os.path.join(folder, "report.html"), encoding="utf-8").read()
    assert "ISO 10218" in html
    # a bad export target: one line, nothing written
    assert not window._guard(window.export_map, os.path.join(folder, "map.jpg"))
    assert "expected a .png or .svg" in window.last_error
    assert not os.path.exists(os.path.join(folder, "map.jpg"))


def _start_long_run(w):
    # a reduce sweep: 256 poses per cell, long enough to cancel midway
    w.executor = "inprocess"
    assert _set(w, mode="reduce", steps="[120, 120]")
    assert w.study_panel.kind.name == "joint_sweep"
    w.study_panel.edits  # noqa: B018
    w.study_panel.run_btn.click()
    assert w.running


def test_cancel_keeps_the_finished_chunks(window, qtbot):
    sp = window.study_panel
    # the reduce mode needs coarse steps: rebuild the form with them
    sp._build_form({**sp.defaults, "mode": "reduce", "coarse_steps": 4})
    _start_long_run(window)
    qtbot.waitUntil(lambda: window.result.done.any(), timeout=30000)
    assert sp.cancel_btn.isEnabled() and not sp.run_btn.isEnabled()
    qtbot.mouseClick(sp.cancel_btn, QtCore.Qt.LeftButton)
    wait_run(qtbot, window, 30000)
    d = window.result
    assert 0 < d.fraction_done < 1
    assert "cancelled" in sp.time_left.text()
    img = window.map_view.image.image
    assert np.count_nonzero(np.isfinite(img)) == np.count_nonzero(d.done)
    res = read_results(window.results_file)
    assert res.incomplete
    assert np.array_equal(res.done_mask().reshape(-1), d.done)


def test_closing_during_a_run_stops_the_worker_cleanly(qtbot, qsettings):
    from workbench.gui.main_window import MainWindow

    w = MainWindow(settings=qsettings)
    w.show()
    sp = w.study_panel
    sp._build_form({**sp.defaults, "mode": "reduce", "coarse_steps": 4})
    _start_long_run(w)
    qtbot.waitUntil(lambda: w.result.done.any(), timeout=30000)
    ended = []
    w.thread.finished.connect(lambda: ended.append("thread"))
    out = w.worker.out_path
    run_dir = os.path.dirname(out)
    assert w.stop_run()
    assert ended == ["thread"] and w.thread is None and w.worker is None and not w.running
    # the runner closed its file under the final name, marked incomplete; no temporary file left
    assert os.listdir(run_dir) == [os.path.basename(out)]
    assert read_results(out).incomplete
    # closing the window mid-run asks first; "no" keeps it running
    _start_long_run(w)
    qtbot.waitUntil(lambda: w.result.done.any(), timeout=30000)
    asked = []
    w.confirm_quit = lambda: asked.append(1) or False
    w.close()
    assert asked == [1] and w.running and w.isVisible()
    # "yes": the run stops the same way, and its results file stays (nothing is deleted)
    ended = []
    w.thread.finished.connect(lambda: ended.append("thread"))
    out2 = w.worker.out_path
    w.confirm_quit = lambda: True
    w.close()
    assert ended == ["thread"] and w.thread is None
    assert os.path.exists(out) and os.path.exists(out2) and read_results(out2).incomplete
    assert sorted(os.listdir(run_dir)) == sorted([os.path.basename(out), os.path.basename(out2)])
    w.deleteLater()


def test_path_audit_series_brush_and_pick(window, qtbot):
    assert window.open_file(AUDIT), window.last_error
    _run(qtbot, window)
    d = window.result
    assert not d.is_map and d.fraction_done == 1.0
    assert np.all(np.diff(d.x) >= 0)          # distance along the paths
    # brushing a distance range selects those samples and shows their poses as ghosts
    window.map_view.brush_series(0.2, 0.6)
    want = np.flatnonzero((d.x >= 0.2) & (d.x <= 0.6))
    assert np.array_equal(window.selection.indices(), want)
    assert window.pose_list.model.rowCount() == want.size and window.scene.ghost_count() > 0
    c = int(want[0])
    assert window.pick_cell(c)
    assert np.allclose(window.state.q, d.q[c])


def test_pose_list_sorts_cells_without_a_value_last(qapp):
    from workbench.gui.result_views import PoseTableModel
    from workbench.gui.resultdata import ResultData

    d = ResultData.empty("joint sweep", (4,), np.arange(4.0), None, "x", "", ["inverse_condition"])
    d.fill(slice(0, 4), {"inverse_condition": [0.3, np.nan, 0.1, 0.2]})
    m = PoseTableModel()
    m.set_result(d)
    col = next(k for k, c in enumerate(m.columns) if c[1] == ("m", "inverse_condition"))
    m.sort(col, QtCore.Qt.AscendingOrder)
    assert m.order.tolist() == [2, 3, 0, 1]
    m.sort(col, QtCore.Qt.DescendingOrder)
    assert m.order.tolist() == [0, 3, 2, 1]
    assert m.data(m.index(3, col)) == ""        # the cell without a value shows blank


def test_layout_and_recent_files_are_remembered(qtbot, qsettings):
    from workbench.gui.main_window import MainWindow

    w = MainWindow(settings=qsettings)
    w.show()
    w.central.setSizes([300, 500])
    sizes = w.central.sizes()
    assert w.open_file(ARMS[0])
    w.close()
    assert qsettings.value("geometry") is not None and qsettings.value("window_state") is not None
    w2 = MainWindow(settings=qsettings)
    w2.show()
    a, b = w2.central.sizes()       # the window may come back at another size: same proportions
    assert a / (a + b) == pytest.approx(sizes[0] / sum(sizes), abs=0.02)
    assert abs(sizes[0] / sum(sizes) - 0.5) > 0.05      # and not the default half-and-half
    assert w2.recent_files()[0] == os.path.abspath(ARMS[0])
    w2.close()
    # the cautions are asked once: after the flag is set, no dialog stands in the way
    qsettings.setValue("cautions_shown", True)
    assert w2.confirm_cautions()
    for x in (w, w2):
        x.deleteLater()


STUDIES = sorted(p for p in glob.glob(os.path.join(ROOT, "arms", "cells", "*.toml"))
                 if "[study]" in open(p, encoding="utf-8").read())


@pytest.mark.parametrize("path", STUDIES, ids=os.path.basename)
def test_open_each_demo_study_file(window, path):
    spec = read_study_file(path)
    assert window.open_file(path), window.last_error
    sp = window.study_panel
    assert sp.kind.name == spec.kind
    for key, value in spec.settings.items():
        from workbench.gui.formlogic import parse_value

        assert parse_value(sp.edits[key].text()) == value
    assert not sp.errors and sp.run_btn.isEnabled()
    if spec.cell is not None:
        assert window.cell_path == spec.cell_path


def test_save_study_writes_what_the_form_shows(window, tmp_path):
    assert _set(window, steps="[12, 34]")
    out = tmp_path / "mine.toml"
    window.save_study(str(out))
    spec = read_study_file(str(out))
    assert spec.kind == "joint_sweep" and spec.settings["steps"] == [12, 34]
    assert os.path.abspath(spec.arm_path) == os.path.abspath(window.arm_path)
    assert window.open_file(str(out)) and window.study_panel.edits["steps"].text() == "[12, 34]"


def test_summary_tables_show_after_a_run(window, qtbot):
    assert _set(window, steps="[21, 21]")
    _run(qtbot, window)
    res = read_results(window.results_file)
    assert res.tables, "the joint sweep writes its near-singular and best pose tables"
    text = window.summary_view.toPlainText()
    for t in res.tables.values():
        assert t.title in text
    best = res.tables["best"]
    first = best.columns["cell"][0]
    assert str(first) in text
