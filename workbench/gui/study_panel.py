"""The study panel: study kind, its settings form (units shown, bad values marked in place with the
reason, Run disabled until valid), an estimate before running, Run / Cancel, progress with the
time left, and save / load of study files."""
from __future__ import annotations

import html
import math

from PySide6 import QtCore, QtWidgets

from ..errors import WorkbenchError
from ..studies import StudySpec, get_kind, kind_names
from ..studies.base import unused_note
from .formlogic import POSE_SOURCES, check_fields, choices, format_value, pose_to_file, takes_pose, unit_hint

__all__ = ["StudyPanel"]

BAD_STYLE = "QLineEdit, QComboBox { border: 2px solid #c02020; background: #fff0f0; }"
READ_ONLY_STYLE = "QLineEdit { color: #555; background: #f2f2f2; }"      # shown, not typed in


class ChoiceEdit(QtWidgets.QComboBox):
    """A drop-down for a choice setting with the text interface of a line edit (``text``,
    ``setText``, ``textChanged``), so the form treats every field alike. Editable lists also take
    text typed in (task rows "0,1,2", frame "joint:3")."""

    textChanged = QtCore.Signal(str)

    def __init__(self, values, editable=False, parent=None):
        super().__init__(parent)
        self.setEditable(editable)
        self.addItems(list(values))
        self.currentTextChanged.connect(self.textChanged.emit)

    def text(self) -> str:
        return self.currentText()

    def setText(self, t: str):
        i = self.findText(t)
        if i < 0:
            if not self.isEditable():
                self.addItem(t)        # a value from a file the list does not name: shown, checked
                i = self.count() - 1
            else:
                self.setEditText(t)
                return
        self.setCurrentIndex(i)


def _fmt_time(s):
    if not math.isfinite(s):
        return "estimating…"
    if s < 60:
        return f"{s:.0f} s left"
    return f"{s / 60:.1f} min left"


class StudyPanel(QtWidgets.QWidget):
    """Form and run controls. The window owns the run; the panel asks for it with signals.

    Signals
    -------
    run_requested(object)
        A valid :class:`~workbench.studies.StudySpec` to run.
    cancel_requested()
    save_requested(), load_requested()
    """

    run_requested = QtCore.Signal(object)
    cancel_requested = QtCore.Signal()
    save_requested = QtCore.Signal()
    load_requested = QtCore.Signal()
    spec_changed = QtCore.Signal()

    def __init__(self, parent=None):
        super().__init__(parent)
        self.arm = None
        self.arm_path = None
        self.cell = None
        self.cell_path = None
        self.kind = None
        self.defaults = {}
        self.edits = {}
        self.reasons = {}
        self.errors = {}
        self.values = {}
        self.running = False
        self.name = ""
        outer = QtWidgets.QVBoxLayout(self)
        outer.setContentsMargins(4, 4, 4, 4)
        top = QtWidgets.QFormLayout()
        self.kind_combo = QtWidgets.QComboBox()
        self.kind_combo.currentIndexChanged.connect(self._kind_chosen)
        top.addRow("Study kind", self.kind_combo)
        self.context = QtWidgets.QLabel("")
        self.context.setWordWrap(True)
        self.context.setStyleSheet("color: #555")
        top.addRow(self.context)
        outer.addLayout(top)
        self.form_box = QtWidgets.QGroupBox("Settings")
        self.form = QtWidgets.QGridLayout(self.form_box)
        self.form.setColumnStretch(1, 1)
        outer.addWidget(self.form_box)
        self.summary = QtWidgets.QLabel("")
        self.summary.setWordWrap(True)
        outer.addWidget(self.summary)
        self.estimate_label = QtWidgets.QLabel("")
        self.estimate_label.setWordWrap(True)
        outer.addWidget(self.estimate_label)
        row = QtWidgets.QHBoxLayout()
        self.run_btn = QtWidgets.QPushButton("Run")
        self.run_btn.clicked.connect(self._run_clicked)
        self.cancel_btn = QtWidgets.QPushButton("Cancel")
        self.cancel_btn.setEnabled(False)
        self.cancel_btn.clicked.connect(self.cancel_requested.emit)
        row.addWidget(self.run_btn)
        row.addWidget(self.cancel_btn)
        row.addStretch(1)
        outer.addLayout(row)
        row2 = QtWidgets.QHBoxLayout()
        self.save_btn = QtWidgets.QPushButton("Save study…")
        self.save_btn.clicked.connect(self.save_requested.emit)
        self.load_btn = QtWidgets.QPushButton("Load study…")
        self.load_btn.clicked.connect(self.load_requested.emit)
        row2.addWidget(self.save_btn)
        row2.addWidget(self.load_btn)
        row2.addStretch(1)
        outer.addLayout(row2)
        self.progress = QtWidgets.QProgressBar()
        self.progress.setRange(0, 100)
        self.progress.setValue(0)
        outer.addWidget(self.progress)
        self.time_left = QtWidgets.QLabel("")
        outer.addWidget(self.time_left)
        outer.addStretch(1)
        self._check_timer = QtCore.QTimer(self)
        self._check_timer.setSingleShot(True)
        self._check_timer.setInterval(200)
        self._check_timer.timeout.connect(self.check)
        self._estimate_fn = None
        #: () -> (n,) joint values (rad / m) of the arm panel's sliders (the window sets it)
        self.pose_provider = None
        self.pose_source = None

    # ---- context -------------------------------------------------------------------------
    def set_context(self, arm, arm_path, cell=None, cell_path=None):
        """The arm (and cell) the next study runs on; refills the kind list and the form."""
        self.arm, self.arm_path, self.cell, self.cell_path = arm, arm_path, cell, cell_path
        current = self.kind.name if self.kind is not None else None
        self.kind_combo.blockSignals(True)
        self.kind_combo.clear()
        for name in kind_names():
            k = get_kind(name)
            if k.needs_cell and cell is None:
                continue
            self.kind_combo.addItem(k.title or name, name)
        self.kind_combo.blockSignals(False)
        i = self.kind_combo.findData(current) if current else 0
        self.kind_combo.setCurrentIndex(max(i, 0))
        self._kind_chosen()
        self.context.setText(f"arm: {arm_path or arm.model.name}" + (f"<br>cell: {cell_path}" if cell_path else ""))

    def set_estimator(self, fn):
        """``fn(spec) -> text`` used to show the estimate of a valid study."""
        self._estimate_fn = fn

    def _kind_chosen(self, _i=None):
        name = self.kind_combo.currentData()
        if not name or self.arm is None:
            return
        self.kind = get_kind(name)
        try:
            self.defaults = dict(self.kind.default_settings(self.arm))
        except WorkbenchError:
            self.defaults = {}
        self.name = ""
        self._build_form(self.defaults)

    def load_spec(self, spec: StudySpec):
        """Show a study spec in the form (kind and settings)."""
        i = self.kind_combo.findData(spec.kind)
        if i < 0:
            raise WorkbenchError(f"study kind {spec.kind!r} is not offered for this arm/cell")
        self.kind_combo.blockSignals(True)
        self.kind_combo.setCurrentIndex(i)
        self.kind_combo.blockSignals(False)
        self.kind = get_kind(spec.kind)
        self.defaults = dict(self.kind.default_settings(self.arm))
        merged = dict(self.defaults)
        merged.update(spec.settings)
        self.name = spec.name
        self._build_form(merged)

    def _build_form(self, settings):
        while self.form.count():
            w = self.form.takeAt(0).widget()
            if w is not None:   # hide and detach now: deferred deletes wait for the event loop
                w.hide()
                w.setParent(None)
                w.deleteLater()
        self.edits, self.reasons = {}, {}
        self.pose_source = None
        settings = dict(settings)
        pose = settings.pop("pose", None) if takes_pose(self.kind.name) else None
        r = -1
        for r, (key, value) in enumerate(settings.items()):
            lab = QtWidgets.QLabel(key.replace("_", " "))
            offered = choices(self.kind.name, key, self.arm, value)
            if offered is not None:
                edit = ChoiceEdit(offered[0], offered[1])
                edit.setText(format_value(value) if not isinstance(value, str) else value)
            else:
                edit = QtWidgets.QLineEdit(format_value(value))
                edit.setCursorPosition(0)        # long lists show their start
            edit.setObjectName(f"setting_{key}")
            edit.setMinimumWidth(110)
            edit.textChanged.connect(lambda _t: self._check_timer.start())
            unit = QtWidgets.QLabel(unit_hint(key))
            unit.setStyleSheet("color: #555")
            reason = QtWidgets.QLabel("")
            reason.setWordWrap(True)
            reason.setStyleSheet("color: #b01010")
            reason.hide()
            self.form.addWidget(lab, 2 * r, 0)
            self.form.addWidget(edit, 2 * r, 1)
            self.form.addWidget(unit, 2 * r, 2)
            self.form.addWidget(reason, 2 * r + 1, 1, 1, 2)
            self.edits[key] = edit
            self.reasons[key] = reason
        if takes_pose(self.kind.name):
            self._add_pose_row(2 * (r + 1), pose)
        self.check()

    def _add_pose_row(self, row, pose):
        """The pose of the joints the study does not sweep: the arm's home pose, the sliders'
        pose (read when the study is checked and run) or values typed in (degrees / mm as m)."""
        lab = QtWidgets.QLabel("other joints")
        lab.setToolTip("The pose of the joints the study does not sweep")
        src = ChoiceEdit(POSE_SOURCES)
        src.setObjectName("pose_source")
        src.setToolTip("home pose: the arm file's home; current sliders: the arm panel's pose; "
                       "explicit: the values typed below")
        src.setText("home pose" if pose is None else "explicit")
        edit = QtWidgets.QLineEdit(format_value(pose) if pose is not None else "")
        edit.setObjectName("setting_pose")
        edit.setMinimumWidth(110)
        edit.textChanged.connect(lambda _t: self._check_timer.start())
        src.textChanged.connect(self._pose_source_chosen)
        unit = QtWidgets.QLabel(unit_hint("pose"))
        unit.setStyleSheet("color: #555")
        reason = QtWidgets.QLabel("")
        reason.setWordWrap(True)
        reason.setStyleSheet("color: #b01010")
        reason.hide()
        self.form.addWidget(lab, row, 0)
        self.form.addWidget(src, row, 1, 1, 2)
        self.form.addWidget(edit, row + 1, 1)
        self.form.addWidget(unit, row + 1, 2)
        self.form.addWidget(reason, row + 2, 1, 1, 2)
        self.pose_source = src
        self.edits["pose"] = edit
        self.reasons["pose"] = reason
        self._pose_source_chosen()

    def _pose_source_chosen(self, _t=None):
        src = self.pose_source.text()
        edit = self.edits["pose"]
        edit.setReadOnly(src != "explicit")
        edit.setStyleSheet("" if src == "explicit" else READ_ONLY_STYLE)
        if src == "explicit" and not edit.text().strip() and self.arm is not None:
            edit.setText(format_value(pose_to_file(self.arm, self.arm.home_q)))
        self._sync_pose()
        self._check_timer.start()

    def _sync_pose(self):
        """Show the pose the study will use (home or sliders) in the read-only pose field."""
        if self.pose_source is None or self.arm is None:
            return
        src = self.pose_source.text()
        edit = self.edits["pose"]
        q = None
        if src == "home pose":
            q = self.arm.home_q
        elif src == "current sliders":
            q = self.pose_provider() if self.pose_provider is not None else self.arm.home_q
        if q is not None:
            edit.blockSignals(True)
            edit.setText(format_value(pose_to_file(self.arm, q)))
            edit.setCursorPosition(0)
            edit.blockSignals(False)

    def use_pose(self, source: str, values=None):
        """Choose the pose of the other joints: "home pose", "current sliders" or "explicit"
        (``values`` in degrees / metres)."""
        if self.pose_source is None:
            raise WorkbenchError(f"the {self.kind.name} study has no pose of other joints")
        if values is not None:
            self.edits["pose"].setText(format_value(list(values)))
        self.pose_source.setText(source)
        return self.check()

    # ---- validation ----------------------------------------------------------------------
    def texts(self) -> dict:
        """Setting name -> field text (no ``pose`` when the home pose is chosen: the study's own
        default)."""
        home = self.pose_source is not None and self.pose_source.text() == "home pose"
        return {k: e.text() for k, e in self.edits.items() if not (home and k == "pose")}

    def check(self) -> bool:
        """Check every field now; mark bad ones with their reason; enable Run when all are good."""
        self._check_timer.stop()
        if self.kind is None:
            self.run_btn.setEnabled(False)
            return False
        self._sync_pose()
        values, errors, summary = check_fields(self.kind, self.texts(), self.defaults, self.arm, self.cell)
        self.values, self.errors = values, errors
        for k, e in self.edits.items():
            bad = k in errors
            ro = isinstance(e, QtWidgets.QLineEdit) and e.isReadOnly()
            e.setStyleSheet(BAD_STYLE if bad else (READ_ONLY_STYLE if ro else ""))
            e.setToolTip(errors.get(k, ""))
            self.reasons[k].setText(errors.get(k, ""))
            self.reasons[k].setVisible(bad)
        other = errors.get("", "")
        unused = "" if errors else unused_note(self.kind, values)
        self.summary.setText(f"<span style='color:#b01010'>{other}</span>" if other else
                             ("<span style='color:#b01010'>Fix the marked settings to run.</span>" if errors
                              else "<span style='color:#206020'>Settings are valid.</span>"
                              + (f"<br><span style='color:#8a5a00'>Not used, ignored: {html.escape(unused)}</span>"
                                 if unused else "")))
        ok = not errors
        self.run_btn.setEnabled(ok and not self.running)
        if ok and self._estimate_fn is not None:
            try:
                self.estimate_label.setText(self._estimate_fn(self.spec()))
            except WorkbenchError as exc:
                self.estimate_label.setText(f"<span style='color:#b01010'>{exc}</span>")
                self.run_btn.setEnabled(False)
                return False
            except Exception as exc:  # a failure inside a study kind: say so, keep the window going
                self.estimate_label.setText(f"<span style='color:#b01010'>no estimate: the study failed on a "
                                            f"few test cells ({exc.__class__.__name__}: {exc})</span>")
        elif not ok:
            self.estimate_label.setText("")
        self.spec_changed.emit()
        return ok

    def spec(self) -> StudySpec:
        """The study as the form describes it (settings in file units)."""
        import os

        return StudySpec(kind=self.kind.name, arm=os.path.abspath(self.arm_path) if self.arm_path else "",
                         cell=os.path.abspath(self.cell_path) if self.cell_path else None,
                         settings=dict(self.values), name=self.name or (self.kind.title or self.kind.name),
                         base_dir=os.getcwd())

    # ---- run state -----------------------------------------------------------------------
    def _run_clicked(self):
        if self.check():
            self.run_requested.emit(self.spec())

    def set_running(self, running: bool):
        self.running = running
        self.cancel_btn.setEnabled(running)
        self.kind_combo.setEnabled(not running)
        self.form_box.setEnabled(not running)
        self.load_btn.setEnabled(not running)
        self.run_btn.setEnabled(not running and not self.errors)
        if running:
            self.progress.setValue(0)
            self.time_left.setText("starting…")

    def show_progress(self, done, total, left):
        self.progress.setValue(int(round(100 * done / max(total, 1))))
        self.time_left.setText(f"{done:,} of {total:,} cells, {_fmt_time(left)}")

    def show_finished(self, status: str):
        self.set_running(False)
        self.time_left.setText({"done": "finished", "cancelled": "cancelled: finished chunks kept"}.get(status, status))
