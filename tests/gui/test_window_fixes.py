"""Regression tests of the window's bugs listed in issue 12 (each failed before its fix)."""
import os
import stat
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from PySide6 import QtCore, QtWidgets

from workbench.results import read_results
from workbench.runner import run_study
from workbench.studies import read_study_file

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
STUDY = os.path.join(ROOT, "arms", "cells", "demo_s6_sweep.toml")


@pytest.fixture(scope="module")
def sweep_file(tmp_path_factory):
    """A 21 x 17 joint sweep (the demo study, fewer steps) written by the runner."""
    out = str(tmp_path_factory.mktemp("sweep") / "sweep.h5")
    run_study(read_study_file(STUDY).with_settings(steps=[21, 17]), out=out)
    return out


def _usual():
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def test_a_mount_search_results_file_opens(window, small_cell_results):
    folder, res = small_cell_results
    path = res["ms"].path
    assert window.open_file(path), window.last_error
    d = window.result
    ms = read_results(path)
    S, H, Y, ny, nx = ms.shape
    assert d.shape == (ny, nx) and d.fraction_done == 1.0
    # each floor cell shows its best candidate over styles, heights and yaws (a max over the file)
    # by the ranking's own value, the rank value
    best = np.nanmax(ms.flat("rank_value").reshape(S * H * Y, ny * nx), axis=0)
    assert np.allclose(d.measures["rank_value"], best)
    assert d.threshold_measure == "rank_value"
    # the study panel shows the file's study, not the defaults of another kind
    assert window.study_panel.kind.name == "mount_search"
    assert window.study_panel.edits["seeds"].text() == "4"


def test_a_run_of_the_window_reopens_from_its_file(window, qtbot):
    window.study_panel.edits["steps"].setText("[15, 11]")
    assert window.study_panel.check()
    window.study_panel.run_btn.click()
    qtbot.waitUntil(lambda: not window.running, timeout=60000)
    path = window.results_file
    before = window.result.measures["inverse_condition"].copy()
    window.study_panel.edits["steps"].setText("[5, 5]")
    assert window.open_file(path), window.last_error
    assert np.array_equal(window.result.measures["inverse_condition"], before, equal_nan=True)
    assert window.study_panel.edits["steps"].text() == "[15, 11]"


def test_an_unexpected_failure_while_opening_is_reported(window, tmp_path, monkeypatch):
    from workbench.gui import main_window

    def broken(res):
        raise ValueError("could not broadcast")

    monkeypatch.setattr(main_window, "session_from_results", broken)
    p = tmp_path / "r.h5"
    run_study(read_study_file(STUDY).with_settings(steps=[3, 3]), out=str(p))
    assert not window.open_file(str(p))
    assert "r.h5" in window.last_error and "could not broadcast" in window.last_error
    assert "\n" not in window.last_error


def test_exports_get_the_usual_file_mode(window, sweep_file, tmp_path):
    assert window.open_file(sweep_file), window.last_error
    outs = {"map.png": window.export_map, "map.svg": window.export_map, "poses.csv": window.export_csv,
            "copy.h5": window.export_results}
    for name, fn in outs.items():
        fn(str(tmp_path / name))
        # a file written with plain open() gets 0666 less the umask (common practice, POSIX open(2))
        assert stat.S_IMODE(os.stat(tmp_path / name).st_mode) == _usual(), name


def _svg_texts(path):
    """(text, x, y) of every text element with its group's matrix applied (Qt's SVG writer puts a
    matrix on each <g>)."""
    ns = "{http://www.w3.org/2000/svg}"
    out = []
    for g in ET.parse(path).getroot().iter(f"{ns}g"):
        tr = g.get("transform", "matrix(1,0,0,1,0,0)")
        a, b, c, d, e, f = (float(v) for v in tr[tr.index("(") + 1:-1].split(","))
        for t in g.findall(f"{ns}text"):
            x, y = float(t.get("x", 0)), float(t.get("y", 0))
            out.append(((t.text or "").strip(), a * x + c * y + e, b * x + d * y + f, a))
    return out


def test_svg_export_puts_the_ticks_where_the_values_are(window, sweep_file, tmp_path):
    assert window.open_file(sweep_file), window.last_error
    QtWidgets.QApplication.processEvents()
    out = str(tmp_path / "map.svg")
    window.export_map(out)
    texts = _svg_texts(out)
    pw = window.map_view.plot
    vb = pw.getPlotItem().vb
    bottom = pw.getAxis("bottom")
    y_axis = pw.mapFromScene(bottom.mapToScene(bottom.boundingRect().topLeft())).y()
    checked = 0
    for label, x, y, scale in texts:
        try:
            v = float(label)
        except ValueError:
            continue
        if not (y_axis - 2 < y < y_axis + 40):
            continue            # not a tick label of the bottom axis
        want = pw.mapFromScene(vb.mapViewToScene(QtCore.QPointF(v, 0))).x()
        # the label starts about half its width left of its tick (one char is under 8 px wide)
        assert abs(x - want) < 4 * len(label) + 4, (label, x, want, scale)
        assert scale == pytest.approx(1.0)
        checked += 1
    assert checked >= 3


def test_load_study_drops_the_previous_summary_and_result(window, small_cell_results):
    folder, res = small_cell_results
    assert window.open_file(res["ms"].path), window.last_error
    title = next(iter(read_results(res["ms"].path).tables.values())).title
    assert title in window.summary_view.toPlainText()
    assert window.open_file(STUDY), window.last_error
    assert title not in window.summary_view.toPlainText()
    assert window.result is None and window.results_file is None


def test_opening_a_results_file_shows_its_study_in_the_panel(window, sweep_file):
    assert window.open_file(sweep_file), window.last_error
    sp = window.study_panel
    assert sp.kind.name == "joint_sweep"
    assert sp.edits["steps"].text() == "[21, 17]"
    assert sp.name == read_results(sweep_file).spec().name


def test_the_picked_cell_is_marked_on_the_map(window, sweep_file):
    assert window.open_file(sweep_file), window.last_error
    d = window.result
    c = 5 * 17 + 3
    assert window.pick_cell(c)
    x, y = window.map_view.pick_marker.getData()
    assert (x[0], y[0]) == pytest.approx(d.cell_xy(c))
    assert window.map_view.pick_marker.isVisible()


def test_ghost_arms_stay_inside_the_scene(window, small_cell_results):
    folder, res = small_cell_results
    assert window.open_file(res["ms"].path), window.last_error
    d = window.result
    window.selection.set_mask(d.done.copy(), source="test", final=True)
    assert window.scene.ghost_count() > 0
    g = window.scene._ghosts.reshape(-1, 3)
    for pw, (a, b) in zip(window.scene.plots, window.scene.planes):
        (x0, x1), (y0, y1) = pw.getPlotItem().vb.viewRange()
        assert g[:, a].min() >= x0 and g[:, a].max() <= x1
        assert g[:, b].min() >= y0 and g[:, b].max() <= y1


def _project(p, centre, distance, elev, azim, fov, w, h):
    """Pixel-free perspective projection: normalised screen coordinates of world points ``p`` for
    a camera on a sphere around ``centre`` (elevation/azimuth in degrees), horizontal fov."""
    el, az = np.radians(elev), np.radians(azim)
    eye = centre + distance * np.array([np.cos(el) * np.cos(az), np.cos(el) * np.sin(az), np.sin(el)])
    f = centre - eye
    f /= np.linalg.norm(f)
    r = np.cross(f, [0, 0, 1.0])
    if np.linalg.norm(r) < 1e-9:
        r = np.array([1.0, 0, 0])
    r /= np.linalg.norm(r)
    u = np.cross(r, f)
    rel = p - eye
    z = rel @ f
    th = np.tan(np.radians(fov) / 2)
    return (rel @ r) / z / th, (rel @ u) / z / (th * h / w)


@pytest.mark.parametrize("view", [(25, 45), (0, -90), (0, 0), (90, -90)])
def test_default_camera_sees_every_corner_of_a_tall_cell(view):
    from workbench.gui.scene import camera_distance

    lo, hi = np.array([-1.2, -1.0, 0.0]), np.array([1.6, 1.0, 2.6])   # tall equipment boxes
    w, h = 1000, 450                                                   # a wide scene panel
    d = camera_distance(lo, hi, 60, w, h)
    corners = np.array([[x, y, z] for x in (lo[0], hi[0]) for y in (lo[1], hi[1]) for z in (lo[2], hi[2])])
    sx, sy = _project(corners, (lo + hi) / 2, d, view[0], view[1], 60, w, h)
    assert np.all(np.abs(sx) <= 1) and np.all(np.abs(sy) <= 1)
    # and the camera is not absurdly far: the box's sphere fills most of the height
    assert d < 1.2 * 0.5 * np.linalg.norm(hi - lo) / np.sin(np.arctan(np.tan(np.radians(30)) * h / w))


def test_the_histogram_shows_one_y_label(window, sweep_file):
    assert window.open_file(sweep_file), window.last_error
    assert window.hist_view.plot.getAxis("left").labelText == "cells"
    # the map's colour bar stands right beside the histogram: no rotated label of its own there
    assert not window.map_view.cbar.axis.label.isVisible()
    assert "inverse condition" in window.map_view.plot.getPlotItem().titleLabel.text


def test_plot_text_is_readable(window, sweep_file):
    from workbench.gui.style import contrast_ratio

    assert window.open_file(sweep_file), window.last_error
    for pw in (window.map_view.plot, window.hist_view.plot):
        for name in ("bottom", "left"):
            ax = pw.getAxis(name)
            # 4.5:1 for normal text (W3C, Web Content Accessibility Guidelines 2.1, 2018, SC 1.4.3)
            assert contrast_ratio(ax.textPen().color().getRgb()) >= 4.5


def test_a_range_beyond_the_joint_limits_is_marked(window):
    sp = window.study_panel
    sp.edits["ranges"].setText("[[-200, 90], [-120, 160]]")
    assert not sp.check()
    # the demo arm's j2 limits are -140..90 deg (arms/demo_s6.toml)
    assert "limits" in sp.reasons["ranges"].text() and "-140" in sp.reasons["ranges"].text()
    assert not sp.run_btn.isEnabled()
    sp.edits["ranges"].setText("[[-140, 90], [-120, 160]]")
    assert sp.check()


def test_choice_settings_are_drop_downs(window):
    sp = window.study_panel
    for key in ("mode", "frame", "rows"):
        assert isinstance(sp.edits[key], QtWidgets.QComboBox), key
    mode = sp.edits["mode"]
    assert [mode.itemText(i) for i in range(mode.count())] == ["grid", "reduce", "samples"]
    assert not mode.isEditable()
    frames = [sp.edits["frame"].itemText(i) for i in range(sp.edits["frame"].count())]
    assert {"tcp", "flange", "j1", "j6"} <= set(frames)
    # a drop-down value reaches the study like typed text did
    sp.edits["rows"].setText("translation")
    assert sp.check() and sp.spec().settings["rows"] == "translation"
    # the mount search's measure
    i = sp.kind_combo.findData("mount_search")
    sp.kind_combo.setCurrentIndex(i)
    m = sp.edits["measure"]
    assert isinstance(m, QtWidgets.QComboBox) and not m.isEditable()
    assert m.findText("min_sv") >= 0


def test_csv_names_each_joint_once(window, sweep_file, tmp_path):
    assert window.open_file(sweep_file), window.last_error
    out = tmp_path / "poses.csv"
    window.export_csv(str(out))
    head = out.read_text(encoding="utf-8").splitlines()[0].replace('"', "").split(",")
    assert len(head) == len(set(head))
    for j in ("j2", "j3"):
        assert sum(1 for h in head if h.split(" (")[0].split()[-1] == j) == 1, head
    rows = np.loadtxt(out, delimiter=",", skiprows=1, ndmin=2)
    d = window.result
    k2 = head.index("j2 (°)")
    c = rows[:, 0].astype(int)
    j, i = np.divmod(c, d.shape[1])
    assert np.allclose(rows[:, k2], d.y[j])          # the j2 column holds the grid's j2 values


# ---- results are kept: the project folder ---------------------------------------------------
def _run_small(window, qtbot, steps="[9, 7]"):
    window.study_panel.edits["steps"].setText(steps)
    assert window.study_panel.check()
    window.study_panel.run_btn.click()
    qtbot.waitUntil(lambda: not window.running, timeout=60000)
    return window.results_file


def test_runs_are_kept_in_the_project_folder_and_listed(window, qtbot, qsettings):
    folder = qsettings.value("project_dir")
    a = _run_small(window, qtbot, "[9, 7]")
    b = _run_small(window, qtbot, "[5, 5]")
    assert a != b and os.path.dirname(a) == folder and os.path.dirname(b) == folder
    listed = [window.runs_list.item(i).data(QtCore.Qt.UserRole) for i in range(window.runs_list.count())]
    assert sorted(listed) == sorted([a, b])
    # double-clicking (activating) an entry opens that run
    item = window.runs_list.item(listed.index(a))
    window.runs_list.itemActivated.emit(item)
    assert window.results_file == a and window.result.shape == (9, 7)
    window.close()
    assert os.path.exists(a) and os.path.exists(b)      # Quit deletes nothing


def test_the_last_results_reopen_on_start(qtbot, qsettings, window):
    from workbench.gui.main_window import MainWindow

    path = _run_small(window, qtbot)
    window.close()
    w2 = MainWindow(settings=qsettings)
    w2.show()
    try:
        assert w2.results_file == path and w2.result is not None and w2.result.shape == (9, 7)
        assert w2.runs_list.count() == 1
    finally:
        from conftest import dispose

        dispose(w2)


def test_runs_go_beside_the_study_file_when_no_folder_was_chosen(window, qtbot, qsettings, tmp_path):
    qsettings.remove("project_dir")
    study = tmp_path / "cellwork" / "my_sweep.toml"
    study.parent.mkdir()
    text = open(STUDY, encoding="utf-8").read().replace("../demo_s6.toml", os.path.join(ROOT, "arms", "demo_s6.toml"))
    text = text.replace('"tray_cell.toml"', repr(os.path.join(ROOT, "arms", "cells", "tray_cell.toml")).replace("'", '"'))
    study.write_text(text)
    assert window.open_file(str(study)), window.last_error
    path = _run_small(window, qtbot)
    assert os.path.dirname(path) == str(tmp_path / "cellwork" / "my_sweep_runs")


def test_a_report_is_written_in_the_background(window, qtbot, sweep_file, tmp_path):
    assert window.open_file(sweep_file), window.last_error
    seen = []
    out = str(tmp_path / "report.html")
    window.start_report(out)
    window.report_worker.progress.connect(lambda f, t: seen.append(f))
    assert window.report_thread is not None          # the call returned while the report is written
    qtbot.waitUntil(lambda: window.report_thread is None, timeout=120000)
    assert os.path.exists(out) and not window.last_error
    html = open(out, encoding="utf-8").read()
    assert os.path.basename(sweep_file) in html          # it names a results file that exists
    assert os.path.exists(sweep_file)
