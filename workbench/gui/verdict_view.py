"""Requirement verdicts of a mount search, path audit or load map in the window: one row per
requirement (threshold, worst value, where, pass / fail / not checked) and the recommendation,
read from the results file through :func:`workbench.decision.decision_for` (the same decision
the report's first page shows).

The view emits ``recommendation_changed(xyz or None, label)`` so the scene can mark the
recommended mount.
"""
from __future__ import annotations

import html
import os

import numpy as np
from PySide6 import QtCore, QtGui, QtWidgets

from ..errors import WorkbenchError

__all__ = ["VerdictView", "VERDICT_KINDS", "STATUS_COLOURS", "recommended_mount"]

#: study kinds whose results carry requirement verdicts worth showing beside the views
VERDICT_KINDS = ("mount_search", "path_audit", "load_map")
#: background of the verdict cell: pass green, fail red, not checked grey (light, text stays black)
STATUS_COLOURS = {"pass": (200, 235, 200), "fail": (245, 190, 190), "not checked": (225, 225, 225)}
COLUMNS = ("Requirement", "Asked", "Worst", "Where", "Verdict")


def recommended_mount(decision):
    """(xyz (3,) in the cell frame (m), label) of a mount search's recommendation, else (None, "")."""
    rec = getattr(decision, "recommendation", None)
    if rec is None or rec.kind != "mount":
        return None, ""
    xyz = np.array([rec.x, rec.y, rec.height], float)
    if not np.all(np.isfinite(xyz)):
        return None, ""
    vals = ", ".join(f"{k} {v}" for k, v in rec.values())
    return xyz, f"recommended mount: {vals} ({rec.source})"


class VerdictView(QtWidgets.QWidget):
    """The verdicts of one results file (or nothing)."""

    recommendation_changed = QtCore.Signal(object, str)

    def __init__(self, parent=None):
        super().__init__(parent)
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        self.headline = QtWidgets.QLabel("Run or open a mount search, path audit or load map to see whether "
                                         "its requirements hold.")
        self.headline.setWordWrap(True)
        self.headline.setTextInteractionFlags(QtCore.Qt.TextSelectableByMouse)
        lay.addWidget(self.headline)
        self.table = QtWidgets.QTableWidget(0, len(COLUMNS))
        self.table.setHorizontalHeaderLabels(list(COLUMNS))
        self.table.verticalHeader().setVisible(False)
        self.table.setEditTriggers(QtWidgets.QAbstractItemView.NoEditTriggers)
        self.table.setWordWrap(True)
        hh = self.table.horizontalHeader()
        hh.setSectionResizeMode(0, QtWidgets.QHeaderView.Stretch)
        for c in range(1, len(COLUMNS)):
            hh.setSectionResizeMode(c, QtWidgets.QHeaderView.ResizeToContents)
        lay.addWidget(self.table, 1)
        self.notes = QtWidgets.QLabel("")
        self.notes.setWordWrap(True)
        self.notes.setStyleSheet("color: #444")
        lay.addWidget(self.notes)
        self.decision = None
        self.path = None
        self._pending = None
        self._timer = QtCore.QTimer(self)      # a child: it dies with the view, so no late call
        self._timer.setSingleShot(True)
        self._timer.setInterval(0)
        self._timer.timeout.connect(self._load_pending)

    # ---- input ---------------------------------------------------------------------------
    def show_file(self, path):
        """Show the verdicts of the results file ``path`` (None clears). The decision is worked
        out after the current event is handled, so a finishing run's handler returns first."""
        self._pending = path
        self._timer.start()

    def _load_pending(self):
        path, self._pending = self._pending, None
        self.load(path)

    def load(self, path):
        """Read ``path`` and show its decision now (None or a kind without verdicts: clear)."""
        self.path = path
        if not path or not os.path.exists(path):
            self.show_decision(None)
            return
        from ..decision import decision_for
        from ..results import read_results

        try:
            res = read_results(path, load=False)
            if res.kind not in VERDICT_KINDS:
                self.show_decision(None, f"No requirement verdicts for a {res.kind.replace('_', ' ')}.")
                return
            dec = decision_for(read_results(path))
        except WorkbenchError as exc:
            self.show_decision(None, f"Verdicts not available: {exc}")
            return
        self.show_decision(dec)

    def show_decision(self, dec, message=""):
        """Fill the table from a :class:`workbench.decision.Decision` (None clears)."""
        self.decision = dec
        self.table.setRowCount(0)
        if dec is None:
            self.headline.setText(message or "Run or open a mount search, path audit or load map to see "
                                             "whether its requirements hold.")
            self.notes.setText("")
            self.recommendation_changed.emit(None, "")
            return
        rec = dec.recommendation
        fails = [v for v in dec.verdicts if v.status == "fail"]
        tally = (f"{len(fails)} of {len(dec.verdicts)} requirements fail" if fails else
                 f"no requirement fails ({sum(v.status == 'pass' for v in dec.verdicts)} pass)")
        self.headline.setText(f"<b>{html.escape(dec.question)}</b><br>{html.escape(rec.answer)}<br>"
                              f"<span style='color:{'#b01010' if fails else '#206020'}'>{tally}</span>")
        self.table.setRowCount(len(dec.verdicts))
        for r, v in enumerate(dec.verdicts):
            cells = (v.requirement, v.threshold, v.worst, v.where, v.status)
            for c, text in enumerate(cells):
                it = QtWidgets.QTableWidgetItem(str(text))
                if v.note:
                    it.setToolTip(v.note)
                if c == 4:
                    col = STATUS_COLOURS.get(v.status)
                    if col:
                        it.setBackground(QtGui.QColor(*col))
                    f = it.font()
                    f.setBold(v.status == "fail")
                    it.setFont(f)
                self.table.setItem(r, c, it)
        self.table.resizeRowsToContents()
        notes = [f"{v.requirement}: {v.note}" for v in dec.verdicts if v.note and v.status != "pass"]
        notes += list(dec.notes)
        if dec.collisions:
            notes.append(dec.collisions)
        self.notes.setText("<br>".join(html.escape(n) for n in notes))
        xyz, label = recommended_mount(dec)
        self.recommendation_changed.emit(xyz, label)

    # ---- for tests -----------------------------------------------------------------------
    def rows(self) -> list:
        """[(requirement, asked, worst, where, verdict)] as shown."""
        return [tuple(self.table.item(r, c).text() for c in range(len(COLUMNS)))
                for r in range(self.table.rowCount())]
