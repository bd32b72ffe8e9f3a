"""Screenshots of the real workbench for the README.

Run under a virtual X display (not offscreen, so the 3D scene is the real OpenGL one)::

    xvfb-run -a -s "-screen 0 1600x1000x24" python -m workbench.gui.screenshots [OUT_DIR]

It starts the main window on the demo arm and cell, runs a joint sweep, brushes a region of the
map, picks a pose, runs the demo mount search and path audit, and saves PNGs to ``screenshots/``.
"""
from __future__ import annotations

import os
import sys
import tempfile
import time

import numpy as np

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
CELLS = os.path.join(ROOT, "arms", "cells")
SIZE = (1600, 1000)


def _wait(app, cond, timeout=300.0):
    t0 = time.time()
    while not cond():
        app.processEvents()
        time.sleep(0.01)
        if time.time() - t0 > timeout:
            raise RuntimeError("timed out waiting for the window")
    for _ in range(20):
        app.processEvents()
        time.sleep(0.01)


def _shot(app, win, out, name):
    _wait(app, lambda: True)
    path = os.path.join(out, name)
    win.grab().save(path)
    print(f"wrote {path}")
    return path


def main(argv=None):
    argv = list(sys.argv[1:] if argv is None else argv)
    out = argv[0] if argv else os.path.join(ROOT, "screenshots")
    os.makedirs(out, exist_ok=True)
    from PySide6 import QtCore

    from .app import make_app
    from .main_window import MainWindow

    app = make_app()
    tmp = tempfile.mkdtemp()
    settings = QtCore.QSettings(os.path.join(tmp, "s.ini"), QtCore.QSettings.IniFormat)
    settings.setValue("project_dir", os.path.join(tmp, "runs"))
    win = MainWindow(settings=settings)
    win.resize(*SIZE)
    win.move(0, 0)
    win.show()
    _wait(app, lambda: True)
    win.state.set_q(np.radians([20, -60, 40, 30, 50, 0]))
    win.scene.set_view("iso")
    shots = [_shot(app, win, out, "01_arm_and_cell.png")]

    # a joint sweep of j2 x j3 from the demo study file (one point per degree)
    win.open_file(os.path.join(CELLS, "demo_s6_sweep.toml"))
    win.study_panel.run_btn.click()
    _wait(app, lambda: not win.running)
    shots.append(_shot(app, win, out, "02_joint_sweep_map.png"))

    # brush a rectangle across the wrist-over-base band; ghosts show the poses; pick one
    mv = win.map_view
    mv.set_mode("rect")
    mv.brush_rect(-20, 20, -60, -25)
    mv.brush_rect(40, 70, -95, -75, op="add")        # Shift + drag: a second rectangle
    _wait(app, lambda: True)
    m = win.pose_list.model
    col = next(k for k, c in enumerate(m.columns) if c[1] == ("m", "inverse_condition"))
    win.pose_list.table.sortByColumn(col, QtCore.Qt.AscendingOrder)
    win.pick_cell(m.cell_of_row(0))
    shots.append(_shot(app, win, out, "03_brushed_region.png"))
    win.result_tabs.setCurrentIndex(1)
    shots.append(_shot(app, win, out, "04_pose_list.png"))
    win.result_tabs.setCurrentIndex(0)
    win.resize(1024, 700)                       # the smallest layout the window is made for
    shots.append(_shot(app, win, out, "10_small_window.png"))
    win.resize(*SIZE)
    mv.set_mode("pan")
    win.selection.clear()

    # a reach slice of the demo arm: reachable points of a plane and their best measures
    if win.open_file(os.path.join(CELLS, "reach_slice_s6.toml")):
        win.study_panel.run_btn.click()
        _wait(app, lambda: not win.running, timeout=900)
        m = win.pose_list.model
        col = next(k for k, c in enumerate(m.columns) if c[1] == ("m", "inverse_condition"))
        win.pose_list.table.sortByColumn(col, QtCore.Qt.DescendingOrder)
        win.pick_cell(m.cell_of_row(0))
        shots.append(_shot(app, win, out, "08_reach_slice.png"))

    # the demo mount search: floor map of the best score, ranked list, candidates in the scene
    if win.open_file(os.path.join(CELLS, "tray_mount_search.toml")):
        win.study_panel.run_btn.click()
        _wait(app, lambda: not win.running, timeout=900)
        win.scene.set_view("top")
        win.pick_cell(win.pose_list.model.cell_of_row(0))
        shots.append(_shot(app, win, out, "05_mount_search.png"))
        win.result_tabs.setCurrentIndex(1)
        shots.append(_shot(app, win, out, "06_mount_ranking.png"))
        win.result_tabs.setCurrentIndex(2)
        shots.append(_shot(app, win, out, "09_mount_summary.png"))
        win.result_tabs.setCurrentIndex(0)

    # the demo path audit: measures along the path with the near-singular spans shaded
    if win.open_file(os.path.join(CELLS, "tray_path_audit.toml")):
        win.study_panel.run_btn.click()
        _wait(app, lambda: not win.running, timeout=900)
        d = win.result
        worst = int(np.nanargmin(np.where(d.done, d.measures["inverse_condition"], np.nan)))
        lo, hi = d.x[worst] - 0.08, d.x[worst] + 0.08
        mv.brush_series(lo, hi)
        win.pick_cell(worst)
        win.scene.set_view("iso")
        shots.append(_shot(app, win, out, "07_path_audit.png"))
    win.close()
    return shots


if __name__ == "__main__":
    main()
