"""Speed bars of the desktop workbench (DESIGN §8, issue 5), measured on this machine.

``bench_gui(quick=False)`` returns ``{"name": "gui", "metrics": {...}, "bars": {name: [value,
threshold, passed]}}``:

* ``stall_ms``: the longest gap between ticks of a 10 ms timer while a real study runs in the
  window's worker (bar <= 100 ms);
* ``window_vs_cli``: the wall time of that run in the window over ``workbench run`` of the same
  study file (in-process executor for both, kernels already compiled) (bar <= 1.3);
* ``brush_ms``: brushing a rectangle on a 1000 x 1000 map until every linked view (map overlay,
  histogram, pose list, ghost arms) has updated and repainted (bar < 100 ms, worst of several);
* ``slider_ms``: moving a joint slider until the scene and the measures are redrawn (bar < 30 ms,
  worst of several after the first);
* ``cold_start_s``: a new Python process from start to a shown, usable window (bar < 3 s).
"""
from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import time

import numpy as np

__all__ = ["bench_gui"]

_COLD = r"""
import time, os
t0 = time.perf_counter()
from workbench.gui.app import make_app
app = make_app()
from workbench.gui.main_window import MainWindow
from PySide6 import QtCore
s = QtCore.QSettings(os.path.join(os.environ["WB_TMP"], "s.ini"), QtCore.QSettings.IniFormat)
w = MainWindow(settings=s)
w.show()
app.processEvents()
print(time.perf_counter() - t0)
os._exit(0)
"""


def _pump(app, seconds=0.0):
    t_end = time.perf_counter() + seconds
    app.processEvents()
    while time.perf_counter() < t_end:
        app.processEvents()
        time.sleep(0.001)


def bench_gui(quick: bool = False) -> dict:
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6 import QtCore

    from ..runner import run_study
    from ..studies import StudySpec
    from .app import make_app
    from .main_window import MainWindow
    from .runs import StudySession

    app = make_app()
    tmp = tempfile.mkdtemp(prefix="wb-gui-bench-")
    settings = QtCore.QSettings(os.path.join(tmp, "s.ini"), QtCore.QSettings.IniFormat)
    settings.setValue("project_dir", os.path.join(tmp, "runs"))
    win = MainWindow(settings=settings)
    win.resize(1500, 950)
    win.show()
    _pump(app, 0.2)
    metrics = {}

    # 1. event-loop stall while a real study runs in the worker
    steps = 300 if quick else 700
    sp = win.study_panel
    sp.edits["steps"].setText(f"[{steps}, {steps}]")
    sp.check()
    gaps = []
    last = [time.perf_counter()]

    def tick():
        now = time.perf_counter()
        gaps.append(now - last[0])
        last[0] = now

    probe = QtCore.QTimer()
    probe.setInterval(10)
    probe.timeout.connect(tick)
    win.executor = os.environ.get("WB_GUI_BENCH_EXECUTOR", "inprocess")  # in-process: the compute shares this process
    win.start_run(sp.spec())
    t_done = []
    win.worker.finished.connect(lambda *_: t_done.append((time.perf_counter(), len(gaps))))
    last[0] = time.perf_counter()
    probe.start()
    t0 = time.perf_counter()
    while win.running:
        app.processEvents(QtCore.QEventLoop.AllEvents, 5)
        time.sleep(0.001)
    run_s = time.perf_counter() - t0
    _pump(app, 0.05)
    probe.stop()
    # gaps that ended before the run's last chunk was handed over: the event loop while it runs;
    # the rest: the one-off redraw when it finishes (final contour, histogram, list)
    k = t_done[0][1] if t_done else len(gaps)
    metrics["stall_ms"] = 1000 * max(gaps[1:k] or [0.0])
    metrics["finish_redraw_ms"] = 1000 * max(gaps[k:] or [0.0])
    metrics["stall_run_cells"] = steps * steps
    metrics["stall_run_s"] = run_s

    # 1b. the same study with `workbench run` (same executor: in-process), called in this process
    # after the window's run, so both find the kernels compiled; the bar: window <= 1.3 x command line
    from ..cli import main as cli_main
    from ..studies import write_study_file

    study = os.path.join(tmp, "same_study.toml")
    write_study_file(sp.spec(), study)
    t = time.perf_counter()
    rc = cli_main(["run", study, "--out", os.path.join(tmp, "cli_run.h5"), "--in-process", "--quiet"])
    cli_s = time.perf_counter() - t
    from ..kinematics import kernels as _k

    _k.set_threads(1)                          # the command ran on this (the GUI) thread
    if rc != 0:
        raise RuntimeError(f"workbench run of the same study failed (exit {rc})")
    metrics["cli_run_s"] = cli_s
    metrics["window_vs_cli"] = run_s / cli_s

    # 2. brushing a 1000 x 1000 map: every linked view updates and repaints
    n = 1000
    spec = StudySpec(kind="joint_sweep", arm=os.path.abspath(win.arm_path), settings={
        "joints": ["j2", "j3"], "ranges": [[-140, 90], [-120, 160]], "steps": [n, n], "frame": "tcp", "rows": "full"})
    res = run_study(spec, summary=False)       # in this thread: it sets the kernels' threads here
    from ..kinematics import kernels

    kernels.set_threads(1)                     # ... so give this (the GUI) thread back its setting
    from ..studies import get_kind

    kind = get_kind("joint_sweep")
    sess = StudySession(kind, res.plan, win.state.arm, None,
                        arrays={f.name: res.flat(f.name) for f in res.fields},
                        done=res.done_mask().reshape(-1))
    win.session = sess
    win.show_result(sess.data)
    _pump(app, 0.3)
    d = sess.data
    rng = np.random.default_rng(1)
    times = []
    for k in range(3 if quick else 6):
        x0, y0 = rng.uniform(d.x[0], d.x[-1] - 80), rng.uniform(d.y[0], d.y[-1] - 80)
        t = time.perf_counter()
        win.map_view.brush_rect(x0, x0 + 80, y0, y0 + 60)      # the release of a drag: final update
        win.map_view.plot.repaint()
        win.hist_view.plot.repaint()
        win.pose_list.table.viewport().repaint()
        win.scene.repaint()
        app.processEvents()
        times.append(time.perf_counter() - t)
    metrics["brush_ms"] = 1000 * max(times)
    metrics["brush_cells"] = n * n
    metrics["brush_selected"] = int(win.selection.count)

    # 3. a joint slider: state -> measures panel -> scene, repainted
    row = win.arm_panel.rows[1]
    st = []
    base = row.slider.value()
    row.slider.setSliderDown(True)             # a drag, as the user moves it
    for k in range(10 if quick else 30):
        t = time.perf_counter()
        row.slider.setValue(base + (k % 7 + 1) * 20)
        win.scene.repaint()
        win.arm_panel.repaint()
        app.processEvents()
        st.append(time.perf_counter() - t)
    row.slider.setSliderDown(False)            # released: the torque chart catches up at once
    metrics["slider_ms"] = 1000 * max(st[1:])
    metrics["slider_median_ms"] = 1000 * float(np.median(st[1:]))
    metrics["scene"] = "3D" if win.scene.is_3d else "2D"
    win.close()

    # 4. cold start in a new process (compile caches of the kernels included as they are on disk)
    env = dict(os.environ, WB_TMP=tmp)
    env.setdefault("QT_QPA_PLATFORM", "offscreen")
    colds = []
    for _ in range(1 if quick else 2):
        t = time.perf_counter()
        out = subprocess.run([sys.executable, "-c", _COLD], capture_output=True, text=True, env=env, timeout=120)
        colds.append(time.perf_counter() - t)
        if out.returncode != 0:
            raise RuntimeError(f"cold start failed: {out.stderr.strip()[-300:]}")
    metrics["cold_start_s"] = min(colds)

    bars = {
        "stall_ms": [metrics["stall_ms"], 100.0, metrics["stall_ms"] <= 100.0],
        "window_vs_cli": [metrics["window_vs_cli"], 1.3, metrics["window_vs_cli"] <= 1.3],
        "brush_ms": [metrics["brush_ms"], 100.0, metrics["brush_ms"] < 100.0],
        "slider_ms": [metrics["slider_ms"], 30.0, metrics["slider_ms"] < 30.0],
        "cold_start_s": [metrics["cold_start_s"], 3.0, metrics["cold_start_s"] < 3.0],
    }
    return {"name": "gui", "metrics": metrics, "bars": bars}


if __name__ == "__main__":  # pragma: no cover
    import json

    result = bench_gui(quick="--quick" in sys.argv)
    print(json.dumps(result, indent=1, default=float))
    failed = [k for k, (_v, _bar, ok) in result["bars"].items() if not ok]
    if failed:
        print(f"FAIL: {', '.join(failed)}", file=sys.stderr)
        sys.exit(1)
