"""Issue 12 item 5: the window follows the conventions of desktop engineering applications
(common practice of desktop applications unless a source is named)."""
import os

import numpy as np
import pytest
from PySide6 import QtCore, QtGui, QtWidgets

from workbench.gui.formlogic import fmt_number

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
STUDY = os.path.join(ROOT, "arms", "cells", "demo_s6_sweep.toml")


def _keys(action):
    return {k.toString(QtGui.QKeySequence.PortableText) for k in action.shortcuts()}


def test_toolbar_actions_have_icons_and_the_usual_shortcuts(window):
    w = window
    expected = {w.act_open: {"Ctrl+O"}, w.act_run: {"Ctrl+R", "F5"}, w.act_cancel: {"Esc"},
                w.act_report: {"Ctrl+P"}, w.act_quit: {"Ctrl+Q"}, w.act_save_study: {"Ctrl+S"}}
    for a, keys in expected.items():
        assert keys <= _keys(a), (a.text(), _keys(a))
    on_bar = set(w.toolbar.actions())
    for a in (w.act_open, w.act_run, w.act_cancel, w.act_report, w.act_clear_brush):
        assert a in on_bar and not a.icon().isNull(), a.text()
    # every shortcut is given once (an ambiguous shortcut does nothing in Qt)
    seen = {}
    for a in w.findChildren(QtGui.QAction):
        if a.isEnabled():
            for k in a.shortcuts():
                assert k.toString() not in seen, (k.toString(), a.text(), seen.get(k.toString()))
                seen[k.toString()] = a.text()


def test_f5_runs_the_study_and_cancel_follows_the_run(window, qtbot):
    w = window
    w.study_panel.edits["steps"].setText("[9, 7]")
    assert w.study_panel.check()
    assert w.act_run.isEnabled() and not w.act_cancel.isEnabled()
    w.activateWindow()
    qtbot.waitUntil(lambda: QtWidgets.QApplication.activeWindow() is w, timeout=5000)
    qtbot.keyClick(w, QtCore.Qt.Key_F5)
    assert w.running or w.results_file is not None      # started by the key (may already be done)
    qtbot.waitUntil(lambda: not w.running, timeout=60000)
    assert w.result is not None and w.result.size == 63 and w.result.fraction_done == 1.0
    assert not w.act_cancel.isEnabled() and w.act_report.isEnabled()


def test_esc_clears_the_brush_when_no_study_runs(window, qtbot):
    w = window
    assert w.open_file(STUDY)
    w.study_panel.edits["steps"].setText("[9, 7]")
    w.act_run.trigger()
    qtbot.waitUntil(lambda: not w.running, timeout=60000)
    w.map_view.brush_rect(-1e9, 1e9, -1e9, 1e9)
    assert w.selection.active and w.selection.count == 63
    w.activateWindow()
    qtbot.waitUntil(lambda: QtWidgets.QApplication.activeWindow() is w, timeout=5000)
    qtbot.keyClick(w, QtCore.Qt.Key_Escape)
    assert not w.selection.active and w.selection.count == 0


def test_the_title_names_the_study_and_the_file(window, qtbot):
    w = window
    assert w.open_file(STUDY)
    name = w.study_panel.name
    assert name and name in w.windowTitle() and "demo_s6_sweep.toml" in w.windowTitle()
    w.study_panel.edits["steps"].setText("[5, 5]")
    w.act_run.trigger()
    qtbot.waitUntil(lambda: not w.running, timeout=60000)
    assert os.path.basename(w.results_file) in w.windowTitle()
    assert w.windowTitle().endswith("Manipulability Workbench")


def test_the_view_menu_toggles_every_panel(window):
    w = window
    acts = w.panel_actions()
    docks = w.findChildren(QtWidgets.QDockWidget)
    assert len(docks) >= 3
    w._fill_panels_menu()
    in_menu = set(w.panels_menu.actions())
    for dock in docks:
        a = dock.toggleViewAction()
        assert acts[dock.windowTitle()] is a and a in in_menu
        shown = not dock.isHidden()
        a.trigger()
        assert dock.isHidden() == shown
        a.trigger()
        assert dock.isHidden() != shown
    a = acts["Toolbar"]
    a.trigger()
    assert w.toolbar.isHidden()
    a.trigger()
    assert not w.toolbar.isHidden()


def test_legends_are_entries_with_the_drawn_colours(window, qtbot):
    from workbench.gui import scene as sc

    w = window
    entries = w.scene_legend.entries
    texts = [e[2] for e in entries]
    assert len(texts) == len(set(texts)) >= 5
    colour_of = {e[2]: e[0] for e in entries}
    assert colour_of["arm"] == sc.ARM_COLOUR and colour_of["brushed poses"] == sc.GHOST_COLOUR
    assert colour_of["arm near a singularity"] == sc.NEAR_COLOUR
    for t in texts:                      # short names, not one run-on sentence
        assert "·" not in t and ";" not in t and len(t) < 40
    # each entry is shown as a swatch and its own label
    assert len(w.scene_legend.findChildren(QtWidgets.QLabel, "swatch")) == len(entries)
    w.study_panel.edits["steps"].setText("[5, 5]")
    w.act_run.trigger()
    qtbot.waitUntil(lambda: not w.running, timeout=60000)
    mt = w.map_view.legend.texts()
    assert any(t.startswith(f"1/k = {fmt_number(w.state.threshold)}") for t in mt) and "brushed" in mt
    assert "brushed cells" in w.hist_view.legend.texts()


def test_numbers_are_formatted_for_people(window):
    # common practice: no "-0", no rounding noise in exponent form, thousands separated
    assert fmt_number(-0.0) == "0"
    assert fmt_number(5.551e-14, scale=0.8) == "0"
    assert fmt_number(12345.678) == "12,350"
    assert fmt_number(0.0290123) == "0.02901"
    assert fmt_number(2.0) == "2"
    assert fmt_number(float("inf")) == "∞" and fmt_number(float("nan")) == ""
    from workbench.gui.main_window import tables_html
    from workbench.studies.base import Table

    t = Table(columns={"x": np.array([-0.0, 5.551e-14, 0.75]), "n": np.array([12000.0, 3.0, 1.0])},
              units={"x": "m"}, title="t")
    h = tables_html({"t": t})
    assert "-0" not in h and "e-14" not in h and "12,000" in h and "0.75" in h


def test_the_pose_of_the_other_joints_comes_from_the_sliders(window, qtbot):
    w = window
    sp = w.study_panel
    assert sp.kind.name == "joint_sweep" and sp.pose_source is not None
    assert "pose" not in sp.spec().settings            # home pose: the study's own default
    q = np.asarray(w.state.q, float).copy()
    q[0], q[3], q[5] = np.radians(30.0), np.radians(-45.0), np.radians(60.0)
    w.state.set_q(q)
    sp.edits["steps"].setText("[5, 4]")
    assert sp.use_pose("current sliders")
    pose = sp.spec().settings["pose"]
    assert np.allclose(pose, np.degrees(q), atol=1e-6)
    w.act_run.trigger()
    qtbot.waitUntil(lambda: not w.running, timeout=60000)
    d = w.result
    qs = d.poses(np.arange(d.size))
    swept = [w.state.arm.names.index(j) for j in ("j2", "j3")]
    fixed = [k for k in range(len(q)) if k not in swept]
    assert np.allclose(qs[:, fixed], q[fixed], atol=1e-9)
    # the measure at a cell is that of its pose: sqrt(det(J J^T)) with numpy (Yoshikawa 1985)
    arm = w.state.arm
    c = 7
    J = np.asarray(arm.jacobian(qs[c][None, :]))[0]
    L = arm.characteristic_length()       # the sweep's default length
    J = J.copy()
    J[:3] /= L
    assert d.measures["manipulability"][c] == pytest.approx(np.sqrt(np.linalg.det(J @ J.T)), rel=1e-6)


def test_an_explicit_pose_of_the_wrong_length_is_marked_in_place(window):
    sp = window.study_panel
    assert not sp.use_pose("explicit", [0, 10, 20])
    assert "pose" in sp.errors and sp.reasons["pose"].isVisibleTo(sp)
    assert not sp.run_btn.isEnabled()
    assert sp.use_pose("explicit", [0, -90, 90, 0, 45, 10])
    assert sp.spec().settings["pose"] == [0, -90, 90, 0, 45, 10]


def test_first_start_shows_a_hint_instead_of_empty_axes(window, qtbot):
    w = window
    assert w.result is None
    assert w.map_view.hint_shown and w.hist_view.hint_shown
    assert "F5" in w.map_view.hint.text() and "Ctrl+O" in w.map_view.hint.text()
    w.study_panel.edits["steps"].setText("[5, 5]")
    w.act_run.trigger()
    qtbot.waitUntil(lambda: not w.running, timeout=60000)
    assert not w.map_view.hint_shown and not w.hist_view.hint_shown
    assert w.open_file(STUDY)                    # a new study: no result, the hint again
    assert w.map_view.hint_shown


def test_the_layout_works_at_1024_by_700(window, qtbot):
    w = window
    w.resize(1024, 700)
    for _ in range(5):
        QtWidgets.QApplication.processEvents()
    assert (w.width(), w.height()) == (1024, 700)
    clipped = []
    for b in w.findChildren(QtWidgets.QAbstractButton):
        if b.isVisible() and b.sizeHint().width() > b.width():
            clipped.append((b.text(), b.sizeHint().width(), b.width()))
    assert not clipped
