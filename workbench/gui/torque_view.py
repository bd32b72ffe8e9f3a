"""Holding torques at the current pose as a bar chart per joint: the arm's own weight (links and
tool), the payload, the tool force (J^T of the asked wrench) and their total, each as a percentage
of the joint's torque (force) limit, with the limit drawn at +-100 %.

The loads come from the cell's ``[requirements]`` (cell-wide, or those of one work point or path
chosen in the combo box; :meth:`workbench.studies.cell.Cell.requirements_for`) and the torques
from :func:`workbench.measures.holding_parts` (one pose per call: cheap enough for every slider
step). Joints without a limit are drawn in N m / N instead, and the chart says so.
"""
from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtWidgets

from ..errors import WorkbenchError

__all__ = ["TorqueChart", "PARTS", "torque_parts"]

#: (key of holding_parts, legend label, colour)
PARTS = (("links", "arm weight", (110, 130, 160)), ("payload", "payload", (230, 140, 40)),
         ("wrench", "tool force", (60, 160, 90)), ("total", "total", (40, 40, 40)))
LIMIT_COLOUR = (200, 30, 30)
_OFFSETS = np.array([-0.3, -0.1, 0.1, 0.3])
_WIDTH = 0.18


def torque_parts(arm, q, reqs=None) -> dict:
    """Holding-torque parts at one pose ``q`` (n,) of ``arm`` under the requirements ``reqs``
    (a :class:`workbench.studies.requirements.Requirements`, or None: the arm's own weight only):
    {"links", "payload", "wrench", "total"} -> (n,) N m / N (what the joints must supply)."""
    from ..measures import holding_parts

    force = moment = payload = None
    frame = "tool"
    if reqs is not None:
        force, moment, payload = reqs.force, reqs.moment, reqs.payload
        frame = reqs.frame
    parts = holding_parts(arm, np.asarray(q, float), force=force, moment=moment, payload=payload, frame=frame,
                          links=bool(arm.model.has_masses), world=True)
    return {k: np.asarray(v, float).reshape(arm.n) for k, v in parts.items()}


def _nice_ceiling(v: float) -> float:
    """The next value of 1, 1.5, 2, 3, 5 x 10^k at or above ``v`` (> 0): the y range moves in
    steps, not on every slider step."""
    v = max(float(v), 1e-9)
    e = 10.0 ** np.floor(np.log10(v))
    for m in (1.0, 1.5, 2.0, 3.0, 5.0, 10.0):
        if m * e >= v * (1 - 1e-12):
            return m * e
    return 10.0 * e


class TorqueChart(QtWidgets.QWidget):
    """The chart, the requirement chooser and a one-line verdict."""

    def __init__(self, parent=None):
        super().__init__(parent)
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        row = QtWidgets.QHBoxLayout()
        row.addWidget(QtWidgets.QLabel("Loads of"))
        self.which = QtWidgets.QComboBox()
        self.which.setToolTip("Whose requirements load the tool: the cell-wide ones, or a work point's or "
                              "path's own ([requirements] in the cell file)")
        self.which.activated.connect(lambda _i: self._redraw())
        row.addWidget(self.which, 1)
        lay.addLayout(row)
        self.loads_label = QtWidgets.QLabel("")
        self.loads_label.setWordWrap(True)
        self.loads_label.setStyleSheet("color: #444")
        lay.addWidget(self.loads_label)
        self.plot = pg.PlotWidget()
        self.plot.setBackground("w")
        self.plot.setMinimumHeight(170)
        self.plot.setMouseEnabled(x=False, y=False)
        self.plot.hideButtons()
        self.plot.showGrid(y=True, alpha=0.25)
        self.plot.addLegend(offset=(4, 4), labelTextSize="8pt", colCount=4)
        self.bars = {}
        for key, label, col in PARTS:
            b = pg.BarGraphItem(x=[], height=[], width=_WIDTH, brush=col, pen=pg.mkPen(col), name=label)
            self.plot.addItem(b)
            self.bars[key] = b
        self.limit_lines = pg.PlotDataItem(pen=pg.mkPen(LIMIT_COLOUR, width=2, style=QtCore.Qt.DashLine),
                                           connect="pairs", name="limit")
        self.plot.addItem(self.limit_lines)
        lay.addWidget(self.plot, 1)
        self.verdict = QtWidgets.QLabel("")
        self.verdict.setWordWrap(True)
        self.verdict.setTextInteractionFlags(QtCore.Qt.TextSelectableByMouse)
        lay.addWidget(self.verdict)
        self.arm = None
        self.q = None
        self.cell = None
        self.parts = None          # {"links", "payload", "wrench", "total"}: (n,) N m / N as computed
        self.limit = None          # (n,) joint limits (NaN where the arm file gives none)
        self.scaled = False        # True: the bars are % of the limit
        self.heights = {}          # key -> (n,) bar heights as drawn
        self.error = ""
        self._frame = None

    # ---- input ---------------------------------------------------------------------------
    def set_cell(self, cell):
        """Fill the chooser from a cell (None: the arm's own weight only)."""
        if cell is self.cell and self.which.count():
            return
        self.cell = cell
        cur = self.which.currentData()
        self.which.clear()
        self.which.addItem("cell-wide requirements" if cell is not None else "no cell: arm weight only", "cell:")
        if cell is not None:
            for p in getattr(cell, "points", ()):
                if p.name in getattr(cell, "point_requirements", {}):
                    self.which.addItem(f"point '{p.name}'", f"point:{p.name}")
            for p in getattr(cell, "paths", ()):
                if p.name in getattr(cell, "path_requirements", {}):
                    self.which.addItem(f"path '{p.name}'", f"path:{p.name}")
        i = self.which.findData(cur) if cur is not None else -1
        self.which.setCurrentIndex(max(i, 0))

    def choose(self, kind, name=None) -> bool:
        """Pick the loads of ("cell", None), ("point", name) or ("path", name)."""
        i = self.which.findData(f"{kind}:{name or ''}")
        if i < 0:
            return False
        self.which.setCurrentIndex(i)
        self._redraw()
        return True

    def requirements(self):
        """The :class:`Requirements` chosen (None without a cell)."""
        if self.cell is None or not hasattr(self.cell, "requirements_for"):
            return None
        kind, _, name = (self.which.currentData() or "cell:").partition(":")
        if kind == "point":
            return self.cell.requirements_for(point=name)
        if kind == "path":
            return self.cell.requirements_for(path=name)
        return self.cell.requirements_for()

    def set_pose(self, arm, q):
        self.arm, self.q = arm, np.asarray(q, float).copy()
        self._redraw()

    # ---- drawing -------------------------------------------------------------------------
    def _redraw(self):
        if self.arm is None:
            return
        arm = self.arm
        reqs = self.requirements()
        self.loads_label.setText("Loads: " + (reqs.describe() if reqs is not None and reqs.loads else "none asked")
                                 + ("" if arm.model.has_masses else "; the arm file gives no link masses"))
        try:
            self.parts = torque_parts(arm, self.q, reqs)
            self.error = ""
        except WorkbenchError as exc:
            self.parts, self.error = None, str(exc)
            for b in self.bars.values():
                b.setOpts(x=[], height=[])
            self.limit_lines.setData([], [])
            self.verdict.setText(f"holding torques not computed: {exc}")
            return
        n = arm.n
        lim = np.asarray(arm.model.max_effort, float)
        self.limit = lim
        self.scaled = bool(np.all(np.isfinite(lim) & (lim > 0)))
        scale = 100.0 / lim if self.scaled else np.ones(n)
        x = np.arange(1, n + 1, dtype=float)
        for (key, _label, _col), off in zip(PARTS, _OFFSETS):
            h = self.parts[key] * scale
            self.heights[key] = h
            self.bars[key].setOpts(x=x + off, height=h, width=_WIDTH)
        if self.scaled:
            xs = np.repeat(np.column_stack([x - 0.45, x + 0.45]), 2, axis=0).reshape(-1)
            ys = np.tile([100.0, 100.0, -100.0, -100.0], n)
            self.limit_lines.setData(xs, ys, connect="pairs")
            top = max(110.0, float(np.nanmax(np.abs(self.heights["total"]))) * 1.1)
        else:
            ok = np.isfinite(lim) & (lim > 0)
            xs = np.repeat(np.column_stack([x[ok] - 0.45, x[ok] + 0.45]), 2, axis=0).reshape(-1)
            ys = np.repeat(np.column_stack([lim[ok], -lim[ok]]), 2, axis=1).reshape(-1)
            self.limit_lines.setData(xs, ys, connect="pairs")
            top = max([float(np.nanmax(np.abs(h))) for h in self.heights.values()] + list(lim[ok]) + [1e-6]) * 1.1
        # axes change only when the arm or the scale changes: a slider step redraws bars, not axes
        top = _nice_ceiling(top)
        frame = (tuple(arm.names), self.scaled, top)
        if frame != self._frame:
            self._frame = frame
            self.plot.setYRange(-top, top, padding=0)
            self.plot.setXRange(0.4, n + 0.6, padding=0)
            self.plot.getAxis("bottom").setTicks([[(k + 1, nm) for k, nm in enumerate(arm.names)]])
            self.plot.setLabel("left", "% of the joint's limit" if self.scaled else "N m (rotary) / N (sliding)")
        tot = self.parts["total"]
        if self.scaled:
            use = np.abs(tot) / lim
            k = int(np.argmax(use))
            over = [arm.names[i] for i in np.flatnonzero(use > 1)]
            unit = "N m" if arm.model.joints[k].revolute else "N"
            words = (f"{arm.names[k]} carries the most: {abs(tot[k]):.1f} of {lim[k]:g} {unit} "
                     f"({100 * use[k]:.0f} % of its limit)")
            self.verdict.setText(("FAIL: over the limit at " + ", ".join(over) + "; " if over else "pass: ") + words)
            self.verdict.setStyleSheet("color: #b01010; font-weight: bold" if over else "color: #206020")
        else:
            self.verdict.setText("not checked: the arm file gives no torque limit for every joint")
            self.verdict.setStyleSheet("color: #666")
