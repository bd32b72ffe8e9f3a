"""The arm panel: summary, one slider + spin box per joint (degrees, mm for prismatic joints), the
measures at the current pose, the plain-words note near a singularity, the TCP pose, the clearance
check of the pose (the nearest pair named, "link 3 within 4 mm of box 'conveyor'"), the holding
torques per joint (:mod:`workbench.gui.torque_view`), and the
settings that choose what is measured (task rows, frame, characteristic length, threshold,
clearance)."""
from __future__ import annotations

import numpy as np
from PySide6 import QtCore, QtWidgets

from ..arm.transforms import matrix_to_rpy
from ..errors import WorkbenchError
from .cellview import DEFAULT_CLEARANCE, PoseClearance, pose_clearance
from .posestate import ROW_CHOICES, PoseState
from .torque_view import TorqueChart

__all__ = ["ArmPanel", "to_display", "from_display"]

SLIDER_STEPS_PER_UNIT = 10        # 0.1 degree / 0.1 mm per slider step
UNLIMITED_DEG = 180.0
UNLIMITED_MM = 1000.0


def to_display(value, revolute: bool) -> float:
    """Joint value in SI (rad / m) -> screen units (degrees / mm)."""
    return float(np.degrees(value)) if revolute else float(value) * 1000.0


def from_display(value, revolute: bool) -> float:
    """Screen units (degrees / mm) -> SI (rad / m)."""
    return float(np.radians(value)) if revolute else float(value) / 1000.0


class _JointRow:
    def __init__(self, panel, k, joint):
        self.k = k
        self.revolute = joint.revolute
        unit = "°" if self.revolute else " mm"
        lo = to_display(joint.lower, self.revolute) if np.isfinite(joint.lower) else \
            -(UNLIMITED_DEG if self.revolute else UNLIMITED_MM)
        hi = to_display(joint.upper, self.revolute) if np.isfinite(joint.upper) else \
            (UNLIMITED_DEG if self.revolute else UNLIMITED_MM)
        self.lo, self.hi = lo, hi
        self.label = QtWidgets.QLabel(joint.name)
        self.label.setToolTip(f"{joint.name}: {joint.kind}, limits {lo:.1f} .. {hi:.1f}{unit}")
        self.slider = QtWidgets.QSlider(QtCore.Qt.Horizontal)
        self.slider.setRange(int(round(lo * SLIDER_STEPS_PER_UNIT)), int(round(hi * SLIDER_STEPS_PER_UNIT)))
        self.slider.setMinimumWidth(110)
        self.slider.setToolTip(self.label.toolTip())
        self.spin = QtWidgets.QDoubleSpinBox()
        self.spin.setDecimals(1)
        self.spin.setRange(lo, hi)
        self.spin.setSuffix(unit)
        self.spin.setSingleStep(1.0)
        self.spin.setKeyboardTracking(False)
        self.spin.setMinimumWidth(90)
        self.slider.valueChanged.connect(lambda v: panel._joint_moved(self.k, v / SLIDER_STEPS_PER_UNIT, "slider"))
        self.slider.sliderReleased.connect(panel._flush_torques)
        self.spin.valueChanged.connect(lambda v: panel._joint_moved(self.k, v, "spin"))

    def show(self, disp):
        for w, v in ((self.slider, int(round(disp * SLIDER_STEPS_PER_UNIT))), (self.spin, disp)):
            w.blockSignals(True)
            w.setValue(v)
            w.blockSignals(False)


#: while a joint slider is dragged, the torque chart is redrawn at most this often (ms)
TORQUE_DRAG_MS = 100


def _one_decimal(v) -> str:
    """``v`` with one decimal, never "-0.0"."""
    t = f"{float(v):.1f}"
    return "0.0" if t == "-0.0" else t


class ArmPanel(QtWidgets.QWidget):
    """Panel over a :class:`PoseState`; it writes changes into the state and redraws from it.

    ``cell_source`` (set by the window) returns the current cell (or None: the floor only) for the
    clearance check; ``pose_checked(arm, q, PoseClearance)`` is emitted after every refresh so the
    scene can colour the bodies that are too close.
    """

    pose_checked = QtCore.Signal(object, object, object)

    def __init__(self, state: PoseState, parent=None):
        super().__init__(parent)
        self.state = state
        outer = QtWidgets.QVBoxLayout(self)
        outer.setContentsMargins(4, 4, 4, 4)
        self.summary = QtWidgets.QLabel()
        self.summary.setWordWrap(True)
        self.summary.setTextInteractionFlags(QtCore.Qt.TextSelectableByMouse)
        outer.addWidget(self.summary)

        self.joint_box = QtWidgets.QGroupBox("Joints (degrees; mm for sliding joints)")
        self.joint_grid = QtWidgets.QGridLayout(self.joint_box)
        self.joint_grid.setColumnStretch(1, 1)
        outer.addWidget(self.joint_box)
        hb = QtWidgets.QHBoxLayout()
        self.home_btn = QtWidgets.QPushButton("Home pose")
        self.home_btn.clicked.connect(lambda: self.state.set_q(self.state.arm.home_q))
        self.zero_btn = QtWidgets.QPushButton("All zero")
        self.zero_btn.clicked.connect(lambda: self.state.set_q(self.state.arm.clip_to_limits(np.zeros(self.state.arm.n))))
        hb.addWidget(self.home_btn)
        hb.addWidget(self.zero_btn)
        hb.addStretch(1)
        outer.addLayout(hb)

        sbox = QtWidgets.QGroupBox("What is measured")
        form = QtWidgets.QFormLayout(sbox)
        self.rows_combo = QtWidgets.QComboBox()
        self.rows_combo.setEditable(True)
        self.rows_combo.addItems(list(ROW_CHOICES))
        self.rows_combo.setToolTip("Task rows: full, translation, rotation, planar, or a list such as vx,vy,wz")
        self.rows_combo.lineEdit().editingFinished.connect(self._rows_edited)
        self.rows_combo.activated.connect(lambda _i: self._rows_edited())
        form.addRow("Task rows", self.rows_combo)
        self.frame_combo = QtWidgets.QComboBox()
        self.frame_combo.activated.connect(self._frame_edited)
        form.addRow("Frame", self.frame_combo)
        self.length_spin = QtWidgets.QDoubleSpinBox()
        self.length_spin.setRange(1.0, 100000.0)
        self.length_spin.setDecimals(0)
        self.length_spin.setSuffix(" mm")
        self.length_spin.setToolTip("Characteristic length dividing the translation rows when rows "
                                    "mix translation and rotation (default: the arm's characteristic length)")
        self.length_spin.setKeyboardTracking(False)
        self.length_spin.valueChanged.connect(lambda v: self._apply(lambda: self.state.set_length(v / 1000.0)))
        form.addRow("Characteristic length", self.length_spin)
        self.thr_spin = QtWidgets.QDoubleSpinBox()
        self.thr_spin.setRange(0.001, 0.9)
        self.thr_spin.setDecimals(3)
        self.thr_spin.setSingleStep(0.01)
        self.thr_spin.setToolTip("Near singular when the inverse condition 1/k is below this")
        self.thr_spin.setKeyboardTracking(False)
        self.thr_spin.valueChanged.connect(lambda v: self._apply(lambda: self.state.set_threshold(v)))
        form.addRow("Near-singular below 1/k", self.thr_spin)
        self.clear_spin = QtWidgets.QDoubleSpinBox()
        self.clear_spin.setRange(0.0, 1000.0)
        self.clear_spin.setDecimals(1)
        self.clear_spin.setSuffix(" mm")
        self.clear_spin.setValue(DEFAULT_CLEARANCE * 1000.0)
        self.clear_spin.setKeyboardTracking(False)
        self.clear_spin.setToolTip("A link closer than this to an obstacle or another link is drawn red")
        self.clear_spin.valueChanged.connect(lambda _v: self.refresh())
        form.addRow("Clearance", self.clear_spin)
        outer.addWidget(sbox)

        mbox = QtWidgets.QGroupBox("At this pose")
        mform = QtWidgets.QFormLayout(mbox)
        self.m_labels = {}
        for key, text in (("manipulability", "Manipulability w"), ("condition", "Condition number k"),
                          ("inverse_condition", "Inverse condition 1/k"), ("min_sv", "Min. singular value"),
                          ("limit_margin", "Joint-limit margin"), ("tcp", "TCP position (mm)"),
                          ("rpy", "TCP roll, pitch, yaw (°)")):
            lab = QtWidgets.QLabel("-")
            lab.setTextInteractionFlags(QtCore.Qt.TextSelectableByMouse)
            self.m_labels[key] = lab
            mform.addRow(text, lab)
        self.clear_label = QtWidgets.QLabel("-")
        self.clear_label.setWordWrap(True)
        self.clear_label.setTextInteractionFlags(QtCore.Qt.TextSelectableByMouse)
        mform.addRow("Clearance", self.clear_label)
        self.note = QtWidgets.QLabel("")
        self.note.setWordWrap(True)
        self.note.setStyleSheet("color: #b01010; font-weight: bold")
        mform.addRow(self.note)
        outer.addWidget(mbox)
        tbox = QtWidgets.QGroupBox("Holding torques at this pose")
        tl = QtWidgets.QVBoxLayout(tbox)
        tl.setContentsMargins(4, 4, 4, 4)
        self.torques = TorqueChart()
        tl.addWidget(self.torques)
        # while a slider is dragged the torque chart follows at most every TORQUE_DRAG_MS (the latest
        # pose wins; the scene, the measures and the clearance follow every step); on release at once
        self._torque_pending = None
        self._torque_timer = QtCore.QTimer(self)
        self._torque_timer.setSingleShot(True)
        self._torque_timer.timeout.connect(self._flush_torques)
        outer.addWidget(tbox)
        outer.addStretch(1)
        self.error_reporter = None   # set by the main window: fn(message)
        self.cell_source = lambda: None
        self.clearance = PoseClearance()
        self.rows = []
        self.rebuild()

    # ---- building ------------------------------------------------------------------------
    def rebuild(self):
        """(Re)build joint rows and selectors for the state's arm."""
        arm = self.state.arm
        while self.joint_grid.count():
            w = self.joint_grid.takeAt(0).widget()
            if w is not None:   # hide and detach now: deferred deletes wait for the event loop
                w.hide()
                w.setParent(None)
                w.deleteLater()
        self.rows = []
        for k, j in enumerate(arm.model.joints):
            r = _JointRow(self, k, j)
            self.joint_grid.addWidget(r.label, k, 0)
            self.joint_grid.addWidget(r.slider, k, 1)
            self.joint_grid.addWidget(r.spin, k, 2)
            self.rows.append(r)
        self.frame_combo.blockSignals(True)
        self.frame_combo.clear()
        self.frame_combo.addItems(["tcp", "flange"] + list(arm.names))
        self.frame_combo.setCurrentText(self.state.frame)
        self.frame_combo.blockSignals(False)
        self.rows_combo.setCurrentText(str(self.state.rows))
        for w, v in ((self.length_spin, self.state.char_length * 1000.0), (self.thr_spin, self.state.threshold)):
            w.blockSignals(True)
            w.setValue(v)
            w.blockSignals(False)
        m = arm.model
        kinds = sorted({j.kind for j in m.joints})
        lim = ", ".join(f"{j.name} {to_display(j.lower, j.revolute):.0f}..{to_display(j.upper, j.revolute):.0f}"
                        for j in m.joints)
        src = f"<br><span style='color:#666'>{m.path}</span>" if m.path else ""
        length = arm.characteristic_length() if hasattr(arm, "characteristic_length") else arm.nominal_reach()
        self.summary.setText(f"<b>{m.name}</b><br>{m.n} joints ({', '.join(kinds)}), characteristic length "
                             f"{length:.3f} m<br><span style='color:#444'>limits: {lim}</span>{src}")
        self.refresh()

    # ---- events --------------------------------------------------------------------------
    def _joint_moved(self, k, disp, _src):
        self.state.set_joint(k, from_display(disp, self.rows[k].revolute))

    def _apply(self, fn):
        try:
            fn()
        except WorkbenchError as exc:
            if self.error_reporter:
                self.error_reporter(str(exc))

    def _rows_edited(self):
        text = self.rows_combo.currentText().strip()
        if text != str(self.state.rows):
            self._apply(lambda: self.state.set_rows(text))
            self.rows_combo.setCurrentText(str(self.state.rows))

    def _frame_edited(self, _i=None):
        self._apply(lambda: self.state.set_frame(self.frame_combo.currentText()))

    # ---- display -------------------------------------------------------------------------
    def refresh(self):
        """Show the state's pose and measures."""
        info = self.state.info()
        for r, v in zip(self.rows, info.q):
            r.show(to_display(v, r.revolute))
        m = info.measures
        self.m_labels["manipulability"].setText(f"{m['manipulability']:.4g}")
        self.m_labels["condition"].setText("inf" if not np.isfinite(m["condition"]) else f"{m['condition']:.4g}")
        self.m_labels["inverse_condition"].setText(f"{m['inverse_condition']:.4f}")
        self.m_labels["min_sv"].setText(f"{m['min_sv']:.4g}")
        self.m_labels["limit_margin"].setText(f"{info.limit_margin:.2f}" + ("" if info.in_limits else "  (outside limits)"))
        p = info.tcp[:3, 3] * 1000
        self.m_labels["tcp"].setText(", ".join(_one_decimal(v) for v in p))
        rpy = np.degrees(matrix_to_rpy(info.tcp[:3, :3]))
        self.m_labels["rpy"].setText(", ".join(_one_decimal(v) for v in rpy))
        self.note.setText(info.note)
        self.m_labels["inverse_condition"].setStyleSheet("color: #b01010" if info.near_singular else "")
        self._check_clearance(info.q)
        self.torques.set_cell(self.cell_source())
        self._torque_pending = (self.state.arm, np.asarray(info.q, float).copy())
        if any(r.slider.isSliderDown() for r in self.rows):
            if not self._torque_timer.isActive():
                self._torque_timer.start(TORQUE_DRAG_MS)
        else:
            self._flush_torques()

    def _flush_torques(self):
        """Draw the torque chart at the latest pose (after a drag's throttle or on release)."""
        self._torque_timer.stop()
        if self._torque_pending is not None:
            arm, q = self._torque_pending
            self._torque_pending = None
            self.torques.set_pose(arm, q)

    @property
    def clearance_setting(self) -> float:
        """The clearance setting (m)."""
        return self.clear_spin.value() / 1000.0

    def _check_clearance(self, q):
        arm = self.state.arm
        try:
            self.clearance = pose_clearance(arm, q, self.cell_source(), self.clearance_setting)
        except WorkbenchError as exc:          # a cell or arm the kernel refuses: say so, keep going
            self.clearance = PoseClearance(setting=self.clearance_setting)
            self.clear_label.setText(f"not checked: {exc}")
        else:
            self.clear_label.setText(self.clearance.text())
        self.clear_label.setStyleSheet("color: #b01010; font-weight: bold" if self.clearance.too_close else "")
        self.pose_checked.emit(arm, np.asarray(q, float).copy(), self.clearance)

    def slider_values(self) -> np.ndarray:
        """(n,) joint values shown by the spin boxes, SI units (for tests)."""
        return np.array([from_display(r.spin.value(), r.revolute) for r in self.rows])
