"""The main window: arm panel, study panel, scene and linked result views, wired to one pose
state and one shared selection. Opening files, running studies, exporting."""
from __future__ import annotations

import os
import shutil
import tempfile
import time

import numpy as np
from PySide6 import QtCore, QtGui, QtWidgets

from .. import __version__, quantities
from ..document import Document, with_mount
from ..errors import WorkbenchError
from .arm_panel import ArmPanel
from .cellview import CellContent, cell_content
from .formlogic import fmt_number
from .files import DEMO_ARM, FILE_FILTER, classify, find_demo_cell
from .posestate import PoseState
from .result_views import LIVE_MAX_CELLS, HistogramView, MapView, PoseListView
from .resultdata import ResultData
from .project import Project, folder_beside_study
from .runs import StudySession, StudyWorker, session_from_results, session_from_spec
from .scene import make_scene
from .selection import Selection
from .study_panel import StudyPanel
from .workers import FunctionWorker, start_worker

__all__ = ["MainWindow", "ORG_NAME", "APP_NAME", "CAUTIONS", "tables_html"]

ORG_NAME = "ManipulabilityWorkbench"
APP_NAME = "Workbench"
MAX_RECENT = 8
MAX_GHOSTS = 12
#: during a run the map follows new chunks at most this often (chunks arriving in between are
#: drawn together), the histogram and the pose list every SLOW_REDRAW_S, the progress bar every
#: PROGRESS_S: the event loop stays free and the worker is not slowed by redraws
REDRAW_MS = 500
SLOW_REDRAW_S = 3.0
PROGRESS_S = 0.25
CAUTIONS = ("The maps are kinematic and static: they do not replace a risk assessment for a robot cell, "
            "the arm maker's data, a check on the real controller, or local codes and licensed practice "
            "(robot cell safety is governed by standards such as ISO 10218-1/-2).")


def tables_html(tables, max_rows=15) -> str:
    """HTML of a study's summary tables ``{name: Table}`` (first ``max_rows`` rows of each)."""
    import html

    if not tables:
        return "<p style='color:#555'>The study's summary tables (ranked mounts, near-singular poses …) " \
               "appear here when a run finishes or a results file is opened.</p>"
    parts = []
    for name, t in tables.items():
        cols = list(t.columns)
        # a column that is a registered quantity gets its label (workbench/quantities.py)
        head = "".join(f"<th>{html.escape(quantities.axis_label(c, unit=t.units.get(c) or '', log=False))}</th>"
                       if c in quantities.QUANTITIES else
                       f"<th>{html.escape(c)}{' (' + t.units[c] + ')' if t.units.get(c) else ''}</th>" for c in cols)
        rows = []
        scale = {}
        for c in cols:
            col = t.columns[c]
            if len(col) and isinstance(col[0], (float, np.floating)):
                f = np.abs(np.asarray(col, float))
                f = f[np.isfinite(f)]
                scale[c] = float(f.max()) if f.size else None
        for r in range(min(t.rows, max_rows)):
            cells = []
            for c in cols:
                v = t.columns[c][r]
                if isinstance(v, (float, np.floating)):
                    v = fmt_number(v, scale=scale.get(c))
                cells.append(f"<td>{html.escape(str(v))}</td>")
            rows.append("<tr>" + "".join(cells) + "</tr>")
        more = f"<p style='color:#555'>{t.rows - max_rows:,} more rows in the results file.</p>" if t.rows > max_rows else ""
        desc = f"<p style='color:#555'>{html.escape(t.description)}</p>" if t.description else ""
        parts.append(f"<h3>{html.escape(t.title or name)}</h3>{desc}<table border='1' cellspacing='0' "
                     f"cellpadding='3'><tr>{head}</tr>{''.join(rows)}</table>{more}")
    return "".join(parts)


def scene_legend_entries():
    """What the scene draws, one legend entry each (colours from the scene module)."""
    from . import scene as sc

    arm = getattr(sc, "ARM_COLOUR", (60, 110, 200))
    near = getattr(sc, "NEAR_COLOUR", (210, 40, 40))
    ghost = getattr(sc, "GHOST_COLOUR", (230, 120, 30))
    return [(arm, "line", "arm"), (near, "line", "arm near a singularity"),
            ((153, 64, 178, 110), "fill", "velocity ellipsoid"), (ghost, "line", "brushed poses"),
            ((40, 150, 60), "dot", "work points and paths"), ((80, 80, 80, 60), "fill", "equipment"),
            ([(68, 1, 84), (33, 145, 140), (253, 231, 37)], "ramp", "mount candidates (colour: score)")] + \
        list(getattr(sc, "LEGEND_EXTRA", ()))     # shapes, keep-out, recommended mount (gui/scene.py)


def _load_arm(path):
    from ..arm import read_arm_model
    from ..kinematics import Arm

    return Arm(read_arm_model(path))


def _atomic_target(path):
    """A temporary name beside ``path`` with the same extension (write there, then :func:`_commit`)."""
    folder = os.path.dirname(os.path.abspath(path)) or "."
    fd, tmp = tempfile.mkstemp(prefix=".~wb-", suffix=os.path.splitext(path)[1], dir=folder)
    os.close(fd)
    return tmp


def usual_mode() -> int:
    """The mode a plain ``open`` gives a new file: 0666 less the umask (``tempfile`` makes 0600)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def _commit(tmp, path):
    """Give the finished temporary file the usual mode and move it to ``path``."""
    os.chmod(tmp, usual_mode())
    os.replace(tmp, path)


class MainWindow(QtWidgets.QMainWindow):
    """The workbench window.

    Parameters
    ----------
    settings : QSettings, optional
        Where recent files, the window layout and the cautions flag live (tests pass their own).
    """

    def __init__(self, settings: QtCore.QSettings | None = None, load_demo=True, reopen=True):
        super().__init__()
        #: arm, cell, study, results and selection (Qt-free, workbench/document.py); the window
        #: changes it through its methods and redraws from its events (see _doc_changed)
        self.doc = Document()
        self.settings = settings if settings is not None else QtCore.QSettings(ORG_NAME, APP_NAME)
        self.setWindowTitle("Manipulability Workbench")
        self.result: ResultData | None = None
        self.thread = None
        self.worker = None
        self.last_error = ""
        self.error_box = None
        self._closing = False
        self.project = None         # the results folder of the last run (workbench.gui.project)
        self.report_thread = None
        self.report_worker = None
        #: asked before the window closes while a study runs (tests put their own answer here)
        self.confirm_quit = self._ask_quit_during_run
        # in-process, in the worker thread: the compiled kernels release the interpreter lock, so the
        # window stays live, and no worker processes have to start (seconds on a busy machine)
        self.executor = "inprocess"

        # one pose at a time on this (the GUI) thread: the compiled kernels' thread pool costs far
        # more than it gains for a batch of one, and a busy machine makes the hand-off slower still.
        # numba's thread count is per calling thread, so study workers keep all their threads.
        from ..kinematics import kernels

        kernels.set_threads(1)
        arm = _load_arm(DEMO_ARM)
        self.doc.arm, self.doc.arm_path = arm, DEMO_ARM
        self.state = PoseState(arm)
        self.selection = Selection(0)

        # ---- widgets ---------------------------------------------------------------------
        from .style import apply_plot_style

        apply_plot_style()
        self.scene, gl_note = make_scene(self)
        # aspect-locked 2D views with self-sizing axes can resize each other without end at some
        # window sizes (tick labels change the axis width, which changes the range...): fixed widths
        for pw in getattr(self.scene, "plots", ()):
            pw.getAxis("left").setWidth(40)
        self.map_view = MapView(self.selection)
        self.hist_view = HistogramView(self.selection)
        self.pose_list = PoseListView(self.selection)
        self.result_tabs = QtWidgets.QTabWidget()
        maps = QtWidgets.QSplitter(QtCore.Qt.Horizontal)
        maps.addWidget(self.map_view)
        maps.addWidget(self.hist_view)
        maps.setSizes([620, 380])
        maps.setStretchFactor(0, 2)         # the map gets the room a narrow window has
        maps.setStretchFactor(1, 1)
        self.result_tabs.addTab(maps, "Map and histogram")
        self.result_tabs.addTab(self.pose_list, "Pose list")
        self.summary_view = QtWidgets.QTextBrowser()
        self.summary_view.setHtml(tables_html({}))
        self.result_tabs.addTab(self.summary_view, "Summary")
        from .verdict_view import VerdictView      # requirement verdicts (gui/verdict_view.py)

        self.verdict_view = VerdictView()
        self.result_tabs.addTab(self.verdict_view, "Verdicts")
        self.verdict_view.recommendation_changed.connect(lambda xyz, label: self.scene.set_recommended(xyz, label))
        scene_box = QtWidgets.QWidget()
        sl = QtWidgets.QVBoxLayout(scene_box)
        sl.setContentsMargins(0, 0, 0, 0)
        from .style import FlowLayout

        vb = FlowLayout(spacing=4)
        vb.addWidget(QtWidgets.QLabel("View:"))
        for name in ("iso", "top", "front", "side"):
            b = QtWidgets.QPushButton(name)
            b.clicked.connect(lambda _=False, n=name: self.scene.set_view(n))
            vb.addWidget(b)
        sl.addLayout(vb)
        from .style import Legend

        self.scene_legend = Legend(scene_legend_entries())
        self.scene_legend.setObjectName("scene_legend")
        sl.addWidget(self.scene_legend)
        sl.addWidget(self.scene, 1)
        self.central = QtWidgets.QSplitter(QtCore.Qt.Vertical)
        self.central.setObjectName("central_splitter")
        self.central.addWidget(scene_box)
        self.central.addWidget(self.result_tabs)
        self.central.setSizes([450, 450])
        self.setCentralWidget(self.central)

        self.arm_panel = ArmPanel(self.state)
        self.arm_panel.error_reporter = self.show_error
        self.arm_panel.cell_source = lambda: self.cell          # clearance of the pose (gui/cellview.py)
        self.arm_panel.pose_checked.connect(self.scene.set_bodies)
        self.study_panel = StudyPanel()
        self.study_panel.pose_provider = lambda: self.state.q       # "current sliders"
        self.study_panel.set_estimator(self._estimate_text)
        for title, w, area, name in (("Arm", self.arm_panel, QtCore.Qt.LeftDockWidgetArea, "arm_dock"),
                                     ("Study", self.study_panel, QtCore.Qt.RightDockWidgetArea, "study_dock")):
            dock = QtWidgets.QDockWidget(title, self)
            dock.setObjectName(name)
            scroll = QtWidgets.QScrollArea()
            scroll.setWidgetResizable(True)
            scroll.setWidget(w)
            dock.setWidget(scroll)
            dock.setMinimumWidth(250)
            self.addDockWidget(area, dock)
            setattr(self, name, dock)
        self.resizeDocks([self.arm_dock, self.study_dock], [330, 350], QtCore.Qt.Horizontal)
        self.runs_list = QtWidgets.QListWidget()
        self.runs_list.setObjectName("runs_list")
        self.runs_list.itemActivated.connect(lambda it: self.open_file(it.data(QtCore.Qt.UserRole)))
        self.runs_label = QtWidgets.QLabel("")
        self.runs_label.setWordWrap(True)
        self.runs_label.setStyleSheet("color: #444")
        runs_box = QtWidgets.QWidget()
        rl = QtWidgets.QVBoxLayout(runs_box)
        rl.setContentsMargins(4, 4, 4, 4)
        rl.addWidget(self.runs_label)
        rl.addWidget(self.runs_list, 1)
        self.runs_dock = QtWidgets.QDockWidget("Runs", self)
        self.runs_dock.setObjectName("runs_dock")
        self.runs_dock.setWidget(runs_box)
        self.addDockWidget(QtCore.Qt.RightDockWidgetArea, self.runs_dock)
        self.tabifyDockWidget(self.study_dock, self.runs_dock)
        self.study_dock.raise_()

        self._build_menus()
        self.status = self.statusBar()

        # ---- wiring ----------------------------------------------------------------------
        self.doc.subscribe(self._doc_changed)
        self.state.subscribe(self._state_changed)
        self.selection.subscribe(self._selection_changed)
        self.map_view.cell_picked.connect(self.pick_cell)
        self.map_view.measure_changed.connect(lambda m: self.hist_view.set_measure(m, self.state.threshold))
        self.pose_list.cell_picked.connect(self.pick_cell)
        self.study_panel.run_requested.connect(self.start_run)
        self.study_panel.cancel_requested.connect(self.cancel_run)
        self.study_panel.save_requested.connect(self.save_study_dialog)
        self.study_panel.load_requested.connect(lambda: self.open_dialog("Load a study file"))
        self.study_panel.spec_changed.connect(self._sync_actions)
        self._refresh_timer = QtCore.QTimer(self)
        self._refresh_timer.setSingleShot(True)
        self._refresh_timer.setInterval(REDRAW_MS)
        self._slow_refresh_t = 0.0
        self._refresh_timer.timeout.connect(self._refresh_results)

        from .qtfix import guard

        guard()
        self._guard_timer = QtCore.QTimer(self)      # see qtfix: keeps the headroom topped up
        self._guard_timer.timeout.connect(guard)
        self._guard_timer.start(5000)

        if load_demo:
            demo_cell = find_demo_cell()
            if demo_cell:
                try:
                    self.doc.load_cell(demo_cell, place_arm=False)
                    if self.cell.placement is not None:   # the arm stands where the cell places it
                        self.state.set_arm(self._with_mount(self.state.arm, self.cell.placement), notify=False)
                        self.doc.arm = self.state.arm
                except WorkbenchError as exc:
                    self.status.showMessage(f"demo cell not loaded: {exc}", 10000)
        self._arm_changed()
        self.restore_layout()
        self.refresh_runs()
        if load_demo and reopen:
            self.reopen_last()
        if gl_note:
            self.status.showMessage(gl_note, 15000)
        self.gl_note = gl_note
        if self.result is None:             # first start: say what to do, not empty axes
            self.map_view.show_hint(True)
            self.hist_view.show_hint(True)
        self._sync_actions()

    # ---- menus ---------------------------------------------------------------------------
    def _icon(self, theme, standard):
        """A theme icon where the desktop has one, else the style's standard pixmap."""
        return QtGui.QIcon.fromTheme(theme, self.style().standardIcon(standard))

    def _build_menus(self):
        """Menus, the toolbar and the shortcuts (Open Ctrl+O, Run Ctrl+R / F5, Cancel Esc, Report
        Ctrl+P, Save study Ctrl+S, Quit Ctrl+Q)."""
        SP = QtWidgets.QStyle
        K = QtGui.QKeySequence

        def act(text, slot, theme=None, std=None, keys=(), tip=""):
            a = QtGui.QAction(text, self)
            if theme or std is not None:
                a.setIcon(self._icon(theme or "", std))
            if keys:
                a.setShortcuts([K(k) for k in keys])
            shown = " / ".join(K(k).toString(K.NativeText) for k in keys)
            a.setToolTip(f"{tip or text.replace('&', '').rstrip('…')}" + (f" ({shown})" if shown else ""))
            a.setStatusTip(tip)
            a.triggered.connect(lambda _=False: slot())
            a.setShortcutContext(QtCore.Qt.WindowShortcut)
            self.addAction(a)
            return a

        self.act_open = act("&Open…", self.open_dialog, "document-open", SP.SP_DialogOpenButton, ("Ctrl+O",),
                            "Open an arm, URDF, cell, study or results file")
        self.act_save_study = act("&Save study…", self.save_study_dialog, "document-save",
                                  SP.SP_DialogSaveButton, ("Ctrl+S",), "Save the study settings to a file")
        self.act_run = act("&Run", self._run_action, "media-playback-start", SP.SP_MediaPlay, ("Ctrl+R", "F5"),
                           "Run the study of the Study panel")
        self.act_cancel = act("&Cancel run", self.cancel_run, "process-stop", SP.SP_MediaStop, ("Esc",),
                              "Stop the run; the finished chunks are kept")
        self.act_clear_brush = act("Clear &brush", self.clear_brush, "edit-clear", SP.SP_DialogResetButton, (),
                                   "Clear the brush in every view (Esc when no study runs)")
        self.act_report = act("Layout &report…", self.export_report_dialog, "document-print",
                              SP.SP_FileDialogDetailedView, ("Ctrl+P",), "Write the layout report (PDF or HTML)")
        self.act_export_map = act("Export &map…", self.export_map_dialog, "image-x-generic",
                                  SP.SP_DesktopIcon, ("Ctrl+E",), "Export the map as PNG or SVG")
        self.act_quit = act("&Quit", self.close, "application-exit", SP.SP_DialogCloseButton, ("Ctrl+Q",),
                            "Quit (asks first while a study runs)")
        self.act_cancel.setEnabled(False)

        mb = self.menuBar()
        f = mb.addMenu("&File")
        f.addAction(self.act_open)
        self.recent_menu = f.addMenu("Open &recent")
        self.recent_menu.aboutToShow.connect(self._fill_recent)
        f.addAction("Open the &demo arm", lambda: self.open_file(DEMO_ARM))
        f.addSeparator()
        f.addAction(self.act_save_study)
        f.addAction("Results &folder…", self.choose_project_dialog)
        f.addSeparator()
        e = f.addMenu("&Export")
        e.addAction(self.act_export_map)
        e.addAction("Pose list (CSV)…", self.export_csv_dialog)
        e.addAction("Results file (HDF5)…", self.export_results_dialog)
        e.addAction(self.act_report)
        f.addSeparator()
        f.addAction(self.act_quit)
        s = mb.addMenu("&Study")
        s.addAction(self.act_run)
        s.addAction(self.act_cancel)
        self.view_menu = v = mb.addMenu("&View")
        self.panels_menu = v.addMenu("&Panels")
        self.panels_menu.aboutToShow.connect(self._fill_panels_menu)
        v.addSeparator()
        for name in ("iso", "top", "front", "side"):
            v.addAction(f"{name.capitalize()} view", lambda n=name: self.scene.set_view(n))
        v.addSeparator()
        v.addAction(self.act_clear_brush)
        h = mb.addMenu("&Help")
        h.addAction("&About and cautions", self.show_about)

        tb = self.toolbar = QtWidgets.QToolBar("Main toolbar", self)
        tb.setObjectName("main_toolbar")
        tb.setIconSize(QtCore.QSize(20, 20))
        tb.setToolButtonStyle(QtCore.Qt.ToolButtonTextBesideIcon)
        for a in (self.act_open, self.act_save_study, None, self.act_run, self.act_cancel, None,
                  self.act_clear_brush, None, self.act_export_map, self.act_report):
            tb.addSeparator() if a is None else tb.addAction(a)
        self.addToolBar(QtCore.Qt.TopToolBarArea, tb)
        self._fill_panels_menu()

    def panel_actions(self) -> dict:
        """Title -> the action that shows or hides it, for every dock panel and the toolbar (docks
        other parts of the window add later are found here too)."""
        out = {}
        for dock in self.findChildren(QtWidgets.QDockWidget):
            out[dock.windowTitle()] = dock.toggleViewAction()
        out["Toolbar"] = self.toolbar.toggleViewAction()
        return out

    def _fill_panels_menu(self):
        for a in self.panels_menu.actions():       # removed, not cleared: the docks own them
            self.panels_menu.removeAction(a)
        for title, a in self.panel_actions().items():
            a.setText(title)
            self.panels_menu.addAction(a)

    def _run_action(self):
        if self.running:
            self.status.showMessage("a study is already running", 4000)
            return
        self.study_panel._run_clicked()

    def clear_brush(self):
        """No brush in any view (Esc when no study runs)."""
        clear = getattr(self.map_view, "clear_brushes", None)
        if clear is not None:
            clear()
        self.selection.clear(source="menu")

    def _sync_actions(self):
        """Toolbar and menu actions follow the run state; Esc cancels a run, else clears the brush."""
        running = self.running
        self.act_run.setEnabled(not running and self.study_panel.run_btn.isEnabled())
        self.act_cancel.setEnabled(running)
        self.act_clear_brush.setShortcuts([] if running else [QtGui.QKeySequence("Esc")])
        has = self.result is not None
        self.act_export_map.setEnabled(has)
        self.act_report.setEnabled(bool(self.results_file))
        self.update_title()

    def update_title(self):
        """Window title: the study and the file behind the views (results file, else the study
        file), then the application's name."""
        parts = []
        name = ""
        if self.session is not None:
            name = self.session.spec.name
        elif self.study_panel.kind is not None:
            name = self.study_panel.name or self.study_panel.kind.title or self.study_panel.kind.name
        if name:
            parts.append(name)
        path = self.results_file or self.study_file
        if path:
            parts.append(os.path.basename(path) + f" ({os.path.dirname(os.path.abspath(path))})")
        elif self.session is not None and self.running:
            parts.append("running…")
        parts.append("Manipulability Workbench")
        self.setWindowTitle(" — ".join(parts))

    # ---- errors and messages -------------------------------------------------------------
    def show_error(self, message: str):
        """One-line message in the status bar and a (non-blocking) dialog; state stays as it was."""
        self.last_error = message
        self.status.showMessage(f"error: {message}", 15000)
        if self.error_box is not None:
            self.error_box.close()
        box = QtWidgets.QMessageBox(QtWidgets.QMessageBox.Warning, "Workbench", message,
                                    QtWidgets.QMessageBox.Ok, self)
        box.setModal(False)
        box.show()
        self.error_box = box

    # ---- files ---------------------------------------------------------------------------
    def open_dialog(self, title="Open a file"):
        start = self.settings.value("last_dir", os.getcwd())
        path, _ = QtWidgets.QFileDialog.getOpenFileName(self, title, str(start), FILE_FILTER)
        if path:
            self.open_file(path)

    def open_file(self, path) -> bool:
        """Open an arm, URDF, cell, study or results file. A bad file: message, nothing changes."""
        path = os.fspath(path)
        try:
            kind = classify(path)
            if self.running and kind in ("arm", "urdf", "cell", "study", "results"):
                raise WorkbenchError("a study is running: cancel it before opening another file")
            if kind in ("arm", "urdf"):
                self._apply_arm(path)
            elif kind == "cell":
                self.doc.load_cell(path)     # the arm stands at the cell's placement (or the origin)
            elif kind == "study":
                self._apply_study(path)
            else:
                self._apply_results(path)
        except WorkbenchError as exc:
            self.show_error(str(exc))
            return False
        except OSError as exc:
            self.show_error(f"{path}: {exc.strerror or exc}")
            return False
        except Exception as exc:    # a bug behind the file: say so in one line, keep the window going
            self.show_error(f"{path}: could not be opened ({exc.__class__.__name__}: {exc})")
            return False
        self._add_recent(path)
        self._sync_actions()
        self.settings.setValue("last_dir", os.path.dirname(os.path.abspath(path)))
        self.status.showMessage(f"opened {kind} file {path}", 8000)
        return True

    def _apply_arm(self, path):
        arm = _load_arm(path)            # raises before anything changes
        self.doc.set_arm(arm, path)

    def _set_arm(self, arm):
        """Use ``arm`` (at the cell's placement, if the cell places it)."""
        self.doc.set_arm(arm)

    @staticmethod
    def _with_mount(arm, mount):
        return with_mount(arm, mount)

    def _place_arm(self, mount):
        """Move the arm's base to ``mount`` (4, 4) for display (a mount search cell, a path audit)."""
        if mount is None or np.allclose(self.state.arm.model.mount, mount):
            return
        self.doc.move_arm(mount)

    def _apply_cell(self, path):
        self.doc.load_cell(path, place_arm=False)

    def _apply_study(self, path):
        self.doc.load_study(path, cls=StudySession)   # cell, arm, study, results (cleared)
        self.refresh_runs()

    def _apply_results(self, path):
        session = self.doc.open_results(path, build=session_from_results)   # cell, arm, results
        from .selection import brush_file, load_brushes

        saved = load_brushes(brush_file(self.results_file))
        if saved:                   # the brushes kept with this file, evaluated on it again
            self.selection.set_brushes(saved, source="reopen")
        self.settings.setValue("last_results", self.results_file)
        self.status.showMessage(f"results of {session.spec.name}: {100 * session.data.fraction_done:.0f}% of "
                                f"the cells computed" + (" (incomplete run)" if session.incomplete else ""), 10000)

    # ---- the document: state lives there, the window redraws from its events ---------------
    arm_path = property(lambda self: self.doc.arm_path, lambda self, v: setattr(self.doc, "arm_path", v))
    cell = property(lambda self: self.doc.cell, lambda self, v: setattr(self.doc, "cell", v))
    cell_path = property(lambda self: self.doc.cell_path, lambda self, v: setattr(self.doc, "cell_path", v))
    session = property(lambda self: self.doc.session, lambda self, v: setattr(self.doc, "session", v))
    results_file = property(lambda self: self.doc.results_file,
                            lambda self, v: setattr(self.doc, "results_file", v))
    study_file = property(lambda self: self.doc.study_file, lambda self, v: setattr(self.doc, "study_file", v))

    def _doc_changed(self, event, p):
        """Redraw what a document event changed (the events are listed in workbench/document.py)."""
        if event == "cell":
            if p["cell"] is not None:
                self.cell_content = cell_content(p["cell"])
                self.scene.set_cell(self.cell_content)
            self.arm_panel.refresh()
        elif event == "arm":
            self.state.set_arm(p["arm"])
            if p["path"] is not None:     # None: the same arm moved to a mount (a picked cell)
                self.study_panel.set_context(self.state.arm, self.arm_path, self.cell, self.cell_path)
        elif event == "study":
            self.study_panel.load_spec(p["spec"])
        elif event == "results":
            session = p["session"]
            if session is None:
                self._clear_views()
                return
            if p["path"] is not None:     # a results file: its tables and the study behind it
                self._show_tables(session.tables)
                try:
                    self.study_panel.load_spec(session.spec)
                except WorkbenchError as exc:
                    self.status.showMessage(f"the study of this file is not offered here: {exc}", 8000)
            self.show_result(session.data)
        elif event == "chunk":
            if not self._refresh_timer.isActive():
                self._refresh_timer.start()
        elif event == "picked":
            if p["cell"] is not None:
                self.map_view.mark_cell(p["cell"])

    # ---- the project folder: results of runs are kept ---------------------------------------
    def project_folder(self) -> str:
        """Where the next run's results go: the folder the user chose, else ``<study>_runs``
        beside the study file the form came from, else the application's data folder."""
        chosen = self.settings.value("project_dir", "")
        if chosen:
            return str(chosen)
        if self.study_file:
            return folder_beside_study(self.study_file)
        base = QtCore.QStandardPaths.writableLocation(QtCore.QStandardPaths.AppDataLocation)
        return os.path.join(base or os.path.expanduser("~"), "runs")

    def current_project(self) -> Project:
        """The :class:`Project` of :meth:`project_folder` (made if needed). A folder beside a study
        file that takes no files falls back to the application's data folder."""
        folder = self.project_folder()
        try:
            return Project(folder)
        except WorkbenchError:
            if self.settings.value("project_dir", "") or not self.study_file:
                raise
            keep, self.study_file = self.study_file, None
            try:
                p = Project(self.project_folder())
            finally:
                self.study_file = keep
            self.status.showMessage(f"{folder} takes no files: results go to {p.folder}", 10000)
            return p

    def choose_project_dialog(self):
        start = self.project_folder()
        d = QtWidgets.QFileDialog.getExistingDirectory(self, "Folder for the results of runs", start)
        if d:
            self._guard_msg(lambda: self.set_project_folder(d))

    def _guard_msg(self, fn):
        try:
            fn()
        except WorkbenchError as exc:
            self.show_error(str(exc))

    def set_project_folder(self, folder):
        """Keep the results of later runs in ``folder`` (remembered); lists its runs."""
        p = Project(folder)             # raises before anything changes
        self.settings.setValue("project_dir", p.folder)
        self.project = p
        self.refresh_runs()
        self.status.showMessage(f"results of runs go to {p.folder}", 8000)

    def refresh_runs(self):
        """The runs list: every results file of the project folder, newest first."""
        self.runs_list.clear()
        folder = self.project_folder()
        if not os.path.isdir(folder):
            self.runs_label.setText(f"Runs are kept in {folder} (made at the first run).")
            return
        try:
            entries = Project(folder).runs()
        except WorkbenchError as exc:
            self.runs_label.setText(str(exc))
            return
        self.runs_label.setText(f"{len(entries)} results file{'s' if len(entries) != 1 else ''} in {folder}; "
                                f"double-click one to open it.")
        for e in entries:
            it = QtWidgets.QListWidgetItem(e.label)
            it.setData(QtCore.Qt.UserRole, e.path)
            it.setToolTip(e.path)
            self.runs_list.addItem(it)

    def reopen_last(self) -> bool:
        """Open the results file that was open (or made) when the window last closed."""
        last = self.settings.value("last_results", "")
        if last and os.path.exists(str(last)):
            return self.open_file(str(last))
        return False

    def _add_recent(self, path):
        path = os.path.abspath(path)
        rec = [p for p in (self.settings.value("recent", []) or []) if p != path]
        if isinstance(rec, str):
            rec = [rec]
        self.settings.setValue("recent", ([path] + rec)[:MAX_RECENT])

    def recent_files(self) -> list:
        rec = self.settings.value("recent", []) or []
        return [rec] if isinstance(rec, str) else list(rec)

    def _fill_recent(self):
        self.recent_menu.clear()
        for p in self.recent_files():
            self.recent_menu.addAction(p, lambda p=p: self.open_file(p))
        if not self.recent_files():
            self.recent_menu.addAction("(none yet)").setEnabled(False)

    # ---- arm state -----------------------------------------------------------------------
    def _fit_scene(self, extra=None):
        """Scene bounds: the arm's reach around its base, the cell's content and ``extra`` (k, 3)
        points (ghost arms). With ``extra`` the bounds only grow, and only when it is outside."""
        arm = self.state.arm
        base = arm.model.mount[:3, 3]
        r = arm.nominal_reach()
        lo, hi = base - r, base + r
        lo[2] = min(0.0, lo[2])
        c = getattr(self, "cell_content", None)
        if c is not None and self.cell is not None:
            pts = [c.points] + list(c.paths) + list(c.boxes) + [c.candidates]
            pts = np.vstack([p for p in pts if len(p)]) if any(len(p) for p in pts) else np.zeros((0, 3))
            if len(pts):
                lo, hi = np.minimum(lo, pts.min(0)), np.maximum(hi, pts.max(0))
        if extra is not None:
            e = np.asarray(extra, float).reshape(-1, 3)
            e = e[np.all(np.isfinite(e), axis=1)]
            blo, bhi = getattr(self.scene, "_bounds", (lo, hi))
            lo, hi = np.minimum(lo, blo), np.maximum(hi, bhi)
            if not len(e) or (np.all(e >= lo) and np.all(e <= hi)):
                return
            lo, hi = np.minimum(lo, e.min(0)), np.maximum(hi, e.max(0))
        self.scene.fit(lo, hi)

    def _arm_changed(self, keep_arm=False):
        self._fit_scene()
        self.arm_panel.rebuild()
        if not keep_arm:
            self.study_panel.set_context(self.state.arm, self.arm_path, self.cell, self.cell_path)
        self.scene.set_pose(self.state.info())
        self.scene.set_ghosts(None)

    def _state_changed(self, what):
        if what == "arm":
            self._arm_changed(keep_arm=True)
            return
        info = self.state.info()
        self.arm_panel.refresh()
        self.scene.set_pose(info)
        if what == "settings":
            self.map_view.set_threshold(self.state.threshold)
            self.hist_view.set_threshold(self.state.threshold)
            self.pose_list.model.threshold = self.state.threshold

    # ---- runs ----------------------------------------------------------------------------
    @property
    def running(self) -> bool:
        return self.thread is not None

    def _estimate_text(self, spec):
        sess = session_from_spec(spec)
        est = sess.estimate()
        return f"Estimate: {est.describe()}."

    def start_run(self, spec):
        """Plan ``spec`` on the current arm and cell and start computing it in the worker thread."""
        if self.running:
            self.show_error("a study is already running")
            return False
        try:
            session = session_from_spec(spec)
        except WorkbenchError as exc:
            self.show_error(str(exc))
            return False
        try:
            project = self.current_project()
        except WorkbenchError as exc:
            self.show_error(str(exc))
            return False
        self.project = project
        self.doc.start_results(session)
        if session.data.size > LIVE_MAX_CELLS:
            self.hist_view.info.setText(f"{session.data.size:,} cells: the histogram and the pose list "
                                        f"follow when the run ends; the map shows every chunk")
        out = project.new_run_path(spec.name)
        self.worker = StudyWorker(spec, out, executor=self.executor)
        self.worker.partial.connect(self._on_chunk)
        self.worker.cells.connect(self._on_cells)
        self._progress_t = 0.0
        self._slow_refresh_t = time.perf_counter()
        self.worker.finished.connect(self._on_finished)
        self.study_panel.set_running(True)
        self._run_t0 = time.perf_counter()
        self.thread = start_worker(self.worker, self)
        self._sync_actions()
        self.status.showMessage(f"running {spec.name}: {session.plan.cells:,} cells", 5000)
        return True

    def cancel_run(self):
        if self.worker is not None:
            self.worker.cancel()
            self.status.showMessage("cancelling: the finished chunks are kept", 5000)

    def _on_chunk(self, part):
        """A :class:`~workbench.gui.runs.ChunkResult` of the running study (the worker's partial)."""
        if self.session is None or self.worker is None:
            return
        self.doc.store_chunk(part.start, part.stop, part.arrays)     # "chunk": the redraw timer starts

    def _on_cells(self, done, total, left):
        """Progress of the run: the bar and the time left, at most every PROGRESS_S (the last always)."""
        now = time.perf_counter()
        if done < total and now - self._progress_t < PROGRESS_S:
            return
        self._progress_t = now
        self.study_panel.show_progress(done, total, left)

    def _refresh_results(self):
        """Show finished chunks (all that arrived since the last redraw, together). While a run
        goes on the map (or series) follows every REDRAW_MS; the histogram and the pose list catch
        up every SLOW_REDRAW_S and at the end."""
        if self.result is None:
            return
        if self.session is not None:
            self.session.refresh_derived()
        running = self.running
        d = self.result
        self.selection.reevaluate()         # brushes are shapes and ranges: new cells may fall in them
        if not running or d.tcp is not None or d.mount_fn is not None:
            self._show_candidates()          # only these change with new chunks
        self.map_view.refresh(final=not running)
        now = time.perf_counter()
        big = d.size > LIVE_MAX_CELLS      # a large map: histogram and list wait for the end
        if not running or (not big and now - self._slow_refresh_t > SLOW_REDRAW_S):
            self._slow_refresh_t = now
            self.hist_view.set_measure(self.map_view.measure or self.result.threshold_measure, self.state.threshold)
            self.pose_list.refresh()
        self._show_series()

    def _on_finished(self, status, path=None):
        thread, worker = self.thread, self.worker
        if thread is not None:
            thread.quit()
            thread.wait(10000)
        self.thread = None
        self.worker = None
        if worker is not None:
            worker.deleteLater()
        self._refresh_timer.stop()
        self._refresh_results()
        self.study_panel.show_finished(status)
        if path:
            self.doc.set_results_file(path)
            self.settings.setValue("last_results", path)
            self._save_brushes()          # brushes drawn during the run stay with its file
        self.refresh_runs()
        self._sync_actions()
        if status.startswith("failed"):
            self.show_error(status)
        elif not self._closing:
            took = time.perf_counter() - self._run_t0
            done = self.result.fraction_done if self.result is not None else 0
            self.status.showMessage(f"study {status} in {took:.1f} s; {100 * done:.0f}% of the cells computed", 10000)
            self._show_tables()
        if thread is not None:
            thread.deleteLater()

    def stop_run(self, timeout_ms=10000) -> bool:
        """Cancel a run and wait for its thread to end (closing the window does this)."""
        if self.thread is None:
            return True
        self.worker.cancel()
        thread = self.thread
        thread.quit()          # the worker's loop ends at the next chunk; then the thread's loop ends
        ok = thread.wait(timeout_ms)
        # deliver the queued finished/chunk signals now so nothing arrives after the window is gone
        QtCore.QCoreApplication.sendPostedEvents(None, 0)
        QtWidgets.QApplication.processEvents()
        if self.thread is not None:   # finished signal not delivered yet
            self.thread = None
            self.worker = None
        return ok

    # ---- results -------------------------------------------------------------------------
    def clear_result(self):
        """No result behind the views (a new study was loaded): empty map, list and summary."""
        self.doc.clear_results()

    def _clear_views(self):
        self.result = None
        self.selection.resize(0)
        empty = ResultData(kind="", shape=(1, 1), x=np.zeros(1), y=np.zeros(1), x_label="", y_label="",
                           measures={"inverse_condition": np.full(1, np.nan)})
        self.map_view.set_result(empty)
        self.map_view.data = None
        self.hist_view.set_result(empty, "inverse_condition")
        self.hist_view.data = None
        self.pose_list.set_result(empty)
        self.pose_list.model.data_ = None
        self.summary_view.setHtml(tables_html({}))
        self.verdict_view.show_file(None)
        self.scene.set_ghosts(None)
        self._show_candidates()
        self.map_view.show_hint(True)
        self.hist_view.show_hint(True)
        self._sync_actions()

    def show_result(self, data: ResultData):
        self.result = data
        self.selection.resize(data.size)
        self.pose_list.model.threshold = self.state.threshold
        if data.is_map:
            self.map_view.set_result(data)
            self.map_view.set_threshold(self.state.threshold)
        else:
            self.map_view.set_result_series(data)
        self.hist_view.set_result(data, data.threshold_measure)
        self.pose_list.set_result(data)
        if data.mount_fn is not None and "mount_full_index" in data.extras:
            col = next(i for i, c in enumerate(self.pose_list.model.columns) if c[1] == ("m", data.threshold_measure))
            self.pose_list.table.sortByColumn(col, QtCore.Qt.DescendingOrder)
        self._show_candidates()
        self._show_series()
        self.scene.set_ghosts(None)

    def _show_candidates(self):
        """Mount search: the floor cells drawn in the scene, coloured by their best rank value. Random
        samples: the cloud of TCP points (at most 20 000 drawn), coloured by the inverse condition."""
        d = self.result
        if d is not None and d.tcp is not None:
            ok = np.flatnonzero(d.done & np.all(np.isfinite(d.tcp), axis=1))
            if ok.size > 20000:
                ok = ok[np.linspace(0, ok.size - 1, 20000).astype(np.int64)]
            M = self.state.arm.model.mount
            pts = d.tcp[ok] @ M[:3, :3].T + M[:3, 3]
            v = d.measures.get(d.threshold_measure)
            sc = None
            if v is not None and ok.size:
                f = v[ok]
                top = float(np.nanmax(f)) if np.isfinite(f).any() else 1.0
                sc = f / (top if top > 0 else 1.0)
            self.scene.set_candidates(pts, sc)
            return
        if d is None or d.mount_fn is None or "mount_full_index" not in d.extras:
            c = getattr(self, "cell_content", None)       # back to the cell's own candidate region
            self.scene.set_candidates(c.candidates if c is not None and self.cell is not None else None)
            return
        X, Y = np.meshgrid(d.x, d.y)
        pts = np.column_stack([X.ravel(), Y.ravel(), np.zeros(X.size)])
        key = d.threshold_measure if d.threshold_measure in d.measures else "score"
        sc = d.measures[key]
        f = sc[np.isfinite(sc)]
        if key == "rank_value" and f.size:  # colours over the cells serving the most points, fewer grey
            k = np.floor(f.max())
            span = f.max() - k
            with np.errstate(invalid="ignore"):
                col = np.where(np.isfinite(sc) & (sc >= k), (sc - k) / (span if span > 0 else 1.0), np.nan)
            self.scene.set_candidates(pts, col)
            return
        top = float(f.max()) if f.size and f.max() > 0 else 1.0
        self.scene.set_candidates(pts, np.where(np.isfinite(sc), sc / top, np.nan))

    def _show_series(self):
        """Series results (no 2D grid): the map area shows the measure along the series axis."""
        d = self.result
        if d is None or d.is_map:
            return
        from .series import show_series

        show_series(self.map_view, d, self.state.threshold)

    def _show_tables(self, tables=None):
        """The study's summary tables (ranking, refined mounts, near-singular poses ...) in the
        Summary tab, from the results file behind the views."""
        if tables is None:
            tables = {}
            if self.results_file and os.path.exists(self.results_file):
                try:
                    from ..results import read_results

                    tables = read_results(self.results_file, load=False).tables
                except WorkbenchError as exc:
                    self.status.showMessage(f"summary tables not read: {exc}", 8000)
        self.summary_view.setHtml(tables_html(tables))
        self.verdict_view.show_file(self.results_file)

    def _save_brushes(self):
        """Keep the brushes beside the results file (in the project folder), for its reopening."""
        from .selection import brush_file, save_brushes

        if not self.results_file or self.running:
            return
        path = brush_file(self.results_file)
        try:
            if self.selection.brushes:
                save_brushes(path, self.selection.brushes)
            elif os.path.exists(path):
                os.unlink(path)
        except OSError as exc:
            self.status.showMessage(f"brushes not kept: {exc.strerror or exc}", 6000)

    def _selection_changed(self, sel, source, final):
        if not final or self.result is None or sel.size != self.result.size:
            return
        self.doc.select(sel.mask if sel.active else None, source)
        if source not in (None, "reopen"):     # None: a new result starting empty
            self._save_brushes()
        if not self.result.is_map:
            self._show_series()
        if not sel.active or sel.count == 0 or not self.result.has_poses:
            self.scene.set_ghosts(None)
            if sel.active:
                self.status.showMessage(f"{sel.count} cells brushed", 5000)
            return
        idx = sel.indices()
        idx = idx[self.result.done[idx]]
        if idx.size > MAX_GHOSTS:
            idx = idx[np.linspace(0, idx.size - 1, MAX_GHOSTS).round().astype(np.int64)]
        q = self.result.poses(idx)
        mounts = None
        if q is not None and self.result.mount_fn is not None:
            mounts = np.array([self.result.mount_fn(c) for c in idx])
        if q is not None:
            ok = np.all(np.isfinite(q), axis=1)
            q = q[ok]
            mounts = mounts[ok] if mounts is not None else None
        ghosts = self.state.link_points(q, mounts) if q is not None and len(q) else None
        if ghosts is not None:
            self._fit_scene(extra=ghosts.reshape(-1, 3))     # ghost arms stay inside the views
        self.scene.set_ghosts(ghosts)
        self.status.showMessage(f"{sel.count} cells brushed; {0 if q is None else len(q)} shown as ghost arms", 5000)

    def pick_cell(self, c):
        """Pose the arm at result cell ``c``: sliders, measures, scene and ellipsoid follow."""
        d = self.result
        if d is None or not d.has_poses or not d.done[c]:
            self.status.showMessage("no pose behind this cell yet", 4000)
            return False
        q = d.poses([c])[0]
        if not np.all(np.isfinite(q)):
            self.status.showMessage("no pose behind this cell (not reached)", 4000)
            return False
        if d.mount_fn is not None:
            self._place_arm(d.mount_fn(c))
        self.state.set_q(q)
        self.doc.pick(c)
        x, y = d.cell_xy(c)
        self.status.showMessage(f"cell {c:,} ({d.x_label} {fmt_number(x)}"
                                + (f", {d.y_label} {fmt_number(y)}" if y is not None else "") + ")", 6000)
        return True

    # ---- export --------------------------------------------------------------------------
    def _ask_save(self, title, filt, default):
        start = os.path.join(str(self.settings.value("last_dir", os.getcwd())), default)
        path, _ = QtWidgets.QFileDialog.getSaveFileName(self, title, start, filt)
        return path

    def export_map_dialog(self):
        p = self._ask_save("Export the map", "PNG image (*.png);;SVG drawing (*.svg)", "map.png")
        if p:
            self._guard(self.export_map, p)

    def export_csv_dialog(self):
        p = self._ask_save("Export the pose list", "CSV (*.csv)", "poses.csv")
        if p:
            self._guard(self.export_csv, p)

    def export_results_dialog(self):
        p = self._ask_save("Save the results file", "HDF5 results (*.h5)", "results.h5")
        if p:
            self._guard(self.export_results, p)

    def export_report_dialog(self):
        if not self.confirm_cautions():
            return
        p = self._ask_save("Export the layout report", "PDF (*.pdf);;HTML (*.html)", "report.pdf")
        if p:
            try:
                self.start_report(p)
            except WorkbenchError as exc:
                self.show_error(str(exc))

    def start_report(self, path):
        """Write the layout report of the results file behind the views in a worker thread; the
        status bar shows its progress and the window stays live."""
        from .resultfile import write_report

        if self.report_thread is not None:
            raise WorkbenchError("a report is being written: wait for it to finish")
        if not self.results_file or not os.path.exists(self.results_file):
            raise WorkbenchError("no results for a report: run a study or open a results file first")
        src = self.results_file
        self.report_worker = FunctionWorker(lambda progress: write_report(src, path, progress=progress))
        self.report_progress = QtWidgets.QProgressBar()
        self.report_progress.setRange(0, 100)
        self.report_progress.setMaximumWidth(220)
        self.report_progress.setFormat("report %p%")
        self.status.addPermanentWidget(self.report_progress)
        self.report_worker.progress.connect(self._report_progress)
        self._report_path = path
        self.report_worker.finished.connect(self._report_finished)   # a method: delivered on this thread
        self.report_thread = start_worker(self.report_worker, self)
        self.status.showMessage(f"writing the report {path} from {src}", 5000)

    def _report_progress(self, f, text):
        if np.isfinite(f):
            self.report_progress.setValue(int(round(100 * f)))
        if text:
            self.status.showMessage(f"report: {text}", 3000)

    def _report_finished(self, status, _result=None):
        path = self._report_path
        thread = self.report_thread
        if thread is not None:
            thread.quit()
            thread.wait(10000)
            thread.deleteLater()
        self.report_thread = None
        if self.report_worker is not None:
            self.report_worker.deleteLater()
        self.report_worker = None
        self.status.removeWidget(self.report_progress)
        self.report_progress.deleteLater()
        if status.startswith("failed"):
            self.show_error(status[len("failed: "):])
        elif not self._closing:
            self.status.showMessage(f"wrote {path}", 8000)

    def _wait_report(self, timeout_ms=60000):
        """Let a report being written finish (closing the window waits for it)."""
        if self.report_thread is None:
            return True
        ok = self.report_thread.wait(timeout_ms)
        QtCore.QCoreApplication.sendPostedEvents(None, 0)
        QtWidgets.QApplication.processEvents()
        return ok

    def _guard(self, fn, *a):
        try:
            fn(*a)
            self.status.showMessage(f"wrote {a[0]}", 8000)
            return True
        except WorkbenchError as exc:
            self.show_error(str(exc))
        except OSError as exc:
            self.show_error(f"{a[0]}: {exc.strerror or exc}")
        return False

    def export_map(self, path):
        """The map (with colour bar and axes) as PNG or SVG."""
        import pyqtgraph.exporters as ex

        if self.result is None:
            raise WorkbenchError("no result to export: run a study or open a results file first")
        ext = os.path.splitext(path)[1].lower()
        if ext not in (".png", ".svg"):
            raise WorkbenchError(f"{path}: expected a .png or .svg file name")
        item = self.map_view.plot.getPlotItem().scene()
        tmp = _atomic_target(path)
        try:
            if ext == ".png":
                exp = ex.ImageExporter(item)
                exp.parameters()["width"] = max(1200, int(self.map_view.plot.width()))
                exp.export(tmp)
            else:
                # Qt's own SVG writer: pyqtgraph's SVG exporter fails on some of the map's items
                from PySide6 import QtSvg

                w = self.map_view.plot
                gen = QtSvg.QSvgGenerator()
                gen.setFileName(tmp)
                gen.setSize(w.size())
                gen.setViewBox(QtCore.QRect(0, 0, w.width(), w.height()))
                # the axes and colour bar paint recorded pictures, which Qt scales by the ratio of
                # the devices' resolutions: at the generator's default 72 dpi they came out at 0.75
                gen.setResolution(w.logicalDpiX())
                gen.setTitle(f"Manipulability Workbench map: {self.result.title}")
                painter = QtGui.QPainter(gen)
                w.render(painter)
                painter.end()
            _commit(tmp, path)
        finally:
            if os.path.exists(tmp):
                os.unlink(tmp)

    def export_csv(self, path):
        """The pose list as shown (brushed rows, or all finished cells), in screen units."""
        from .result_views import PoseTableModel

        m: PoseTableModel = self.pose_list.model
        if m.data_ is None:
            raise WorkbenchError("no pose list to export: run a study or open a results file first")
        tmp = _atomic_target(path)
        try:
            cols = m.columns
            order = m.order
            arrays = []
            for c in range(len(cols)):
                key = cols[c][1]
                if key == "note":
                    continue
                v = m.column_values(c)[order]
                if isinstance(key, tuple) and key[0] == "q":
                    v = np.degrees(v) if key[2] == "revolute" else v * 1000.0
                arrays.append(v.astype(float))
            head = [cols[c][0] for c in range(len(cols)) if cols[c][1] != "note"]
            table = np.column_stack(arrays) if arrays else np.zeros((0, 0))
            with open(tmp, "w", encoding="utf-8") as fh:
                fh.write(",".join(f'"{h}"' for h in head) + "\n")
                np.savetxt(fh, table, delimiter=",", fmt="%.10g")
            _commit(tmp, path)
        finally:
            if os.path.exists(tmp):
                os.unlink(tmp)

    def export_results(self, path):
        """A copy of the results file behind the views (the run's file, or the one opened)."""
        if not self.results_file or not os.path.exists(self.results_file):
            raise WorkbenchError("no results file yet: run a study (and let it finish or cancel it) "
                                 "or open a results file")
        if os.path.isdir(path):
            raise WorkbenchError(f"{path} is a folder; expected a results file name (.h5)")
        tmp = _atomic_target(path)
        try:
            shutil.copyfile(self.results_file, tmp)
            _commit(tmp, path)
        finally:
            if os.path.exists(tmp):
                os.unlink(tmp)

    def export_report(self, path):
        """The layout report (PDF or HTML) of the results file behind the views."""
        from .resultfile import write_report

        if not self.results_file or not os.path.exists(self.results_file):
            raise WorkbenchError("no results for a report: run a study or open a results file first")
        write_report(self.results_file, path)

    # ---- cautions ------------------------------------------------------------------------
    def confirm_cautions(self) -> bool:
        """Show the cautions once (remembered) before the first report export."""
        if self.settings.value("cautions_shown", False, type=bool):
            return True
        box = QtWidgets.QMessageBox(QtWidgets.QMessageBox.Information, "Before you export a report",
                                    CAUTIONS, QtWidgets.QMessageBox.Ok | QtWidgets.QMessageBox.Cancel, self)
        if box.exec() != QtWidgets.QMessageBox.Ok:
            return False
        self.settings.setValue("cautions_shown", True)
        return True

    def show_about(self):
        QtWidgets.QMessageBox.about(
            self, "About the Manipulability Workbench",
            f"<b>Manipulability Workbench {__version__}</b><p>Maps Jacobian measures of robot arms over "
            f"joint space, cell slices, mount spots and paths.</p><p><b>Cautions.</b> {CAUTIONS}</p>")

    # ---- study files ---------------------------------------------------------------------
    def save_study_dialog(self):
        p = self._ask_save("Save the study", "Study file (*.toml)", "study.toml")
        if p:
            self._guard(self.save_study, p)

    def save_study(self, path):
        from ..studies import write_study_file

        if not self.study_panel.check():
            raise WorkbenchError("the study settings are not valid: fix the marked fields first")
        write_study_file(self.study_panel.spec(), path)

    # ---- layout --------------------------------------------------------------------------
    def restore_layout(self):
        geo = self.settings.value("geometry")
        if geo is not None:
            self.restoreGeometry(geo)
        else:
            self.resize(1500, 950)
        st = self.settings.value("window_state")
        if st is not None:
            self.restoreState(st)
        else:   # first start: give both side panels room once the window has its size
            QtCore.QTimer.singleShot(0, lambda: self.resizeDocks([self.arm_dock, self.study_dock], [340, 340],
                                                                 QtCore.Qt.Horizontal))
        sp = self.settings.value("central_splitter")
        if sp is not None:
            self.central.restoreState(sp)

    def save_layout(self):
        self.settings.setValue("geometry", self.saveGeometry())
        self.settings.setValue("window_state", self.saveState())
        self.settings.setValue("central_splitter", self.central.saveState())
        self.settings.sync()

    def _ask_quit_during_run(self) -> bool:
        box = QtWidgets.QMessageBox(QtWidgets.QMessageBox.Question, "A study is running",
                                    "A study is running. Stop it and quit? The chunks computed so far "
                                    "stay in its results file.",
                                    QtWidgets.QMessageBox.Yes | QtWidgets.QMessageBox.No, self)
        box.setDefaultButton(QtWidgets.QMessageBox.No)
        return box.exec() == QtWidgets.QMessageBox.Yes

    #: below this window width the Arm panel is tabbed with the Study panel (the maps need the room)
    COMPACT_WIDTH = 1200

    def resizeEvent(self, ev):
        super().resizeEvent(ev)
        compact = self.width() < self.COMPACT_WIDTH
        if compact == getattr(self, "_compact", False) or not hasattr(self, "arm_dock"):
            return
        self._compact = compact
        if self.arm_dock.isFloating():
            return
        if compact:
            self.tabifyDockWidget(self.study_dock, self.arm_dock)
            self.arm_dock.raise_()
        else:
            self.addDockWidget(QtCore.Qt.LeftDockWidgetArea, self.arm_dock)
            self.resizeDocks([self.arm_dock, self.study_dock], [330, 350], QtCore.Qt.Horizontal)
            self.study_dock.raise_()

    def closeEvent(self, ev):
        """Quit: asks first while a study runs; never deletes a results file."""
        if self.running and not self._closing and not self.confirm_quit():
            ev.ignore()
            return
        self._closing = True
        self.stop_run()
        self._wait_report()
        self.save_layout()
        super().closeEvent(ev)
