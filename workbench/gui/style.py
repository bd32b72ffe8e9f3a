"""How plots look: dark text on white (readable in the window and in exported images)."""
from __future__ import annotations

from PySide6 import QtCore, QtGui, QtWidgets

__all__ = ["PLOT_TEXT", "apply_plot_style", "contrast_ratio", "Legend", "FlowLayout", "swatch_pixmap"]

#: axis lines, tick labels, axis titles and plot titles (near black; pyqtgraph's default is a pale grey)
PLOT_TEXT = (25, 25, 25)


def apply_plot_style():
    """pyqtgraph options for every plot made after this call."""
    import pyqtgraph as pg

    pg.setConfigOptions(imageAxisOrder="row-major", antialias=True, foreground=PLOT_TEXT, background="w")


def _luminance(rgb):
    c = [v / 255.0 for v in rgb[:3]]
    c = [v / 12.92 if v <= 0.04045 else ((v + 0.055) / 1.055) ** 2.4 for v in c]
    return 0.2126 * c[0] + 0.7152 * c[1] + 0.0722 * c[2]


def contrast_ratio(fg, bg=(255, 255, 255)) -> float:
    """Contrast ratio (L1 + 0.05) / (L2 + 0.05) of two sRGB colours (W3C, Web Content Accessibility
    Guidelines 2.1, 2018, definitions of relative luminance and contrast ratio)."""
    a, b = _luminance(fg), _luminance(bg)
    return (max(a, b) + 0.05) / (min(a, b) + 0.05)


# ---- legends: one entry per drawn thing (a swatch and a short name), laid out in rows ---------
def swatch_pixmap(colour, shape="line", size=14, outline=None):
    """A small picture of how a thing is drawn: ``shape`` is "line", "dash", "fill", "dot",
    "ring" or "ramp" (a colour ramp: ``colour`` is a list of RGB stops); ``outline`` an RGB
    drawn under a line or around a fill."""
    pm = QtGui.QPixmap(size * 2, size)
    pm.fill(QtCore.Qt.transparent)
    p = QtGui.QPainter(pm)
    p.setRenderHint(QtGui.QPainter.Antialiasing)
    w, h = pm.width(), pm.height()
    if shape == "ramp":
        g = QtGui.QLinearGradient(0, 0, w, 0)
        for i, c in enumerate(colour):
            g.setColorAt(i / max(len(colour) - 1, 1), QtGui.QColor(*c))
        p.fillRect(1, 2, w - 2, h - 4, QtGui.QBrush(g))
    elif shape in ("line", "dash"):
        if outline is not None:
            p.setPen(QtGui.QPen(QtGui.QColor(*outline), 5))
            p.drawLine(1, h // 2, w - 1, h // 2)
        pen = QtGui.QPen(QtGui.QColor(*colour), 3 if shape == "line" else 2)
        if shape == "dash":
            pen.setStyle(QtCore.Qt.DashLine)
        p.setPen(pen)
        p.drawLine(1, h // 2, w - 1, h // 2)
    elif shape == "fill":
        p.setPen(QtGui.QPen(QtGui.QColor(*(outline or colour[:3])), 1))
        p.setBrush(QtGui.QColor(*colour))
        p.drawRect(2, 2, w - 5, h - 5)
    else:   # "dot", "ring"
        d = h - 4
        if shape == "dot":
            p.setPen(QtCore.Qt.NoPen)
            p.setBrush(QtGui.QColor(*colour))
        else:
            p.setPen(QtGui.QPen(QtGui.QColor(*colour), 2))
            p.setBrush(QtCore.Qt.NoBrush)
        p.drawEllipse((w - d) // 2, 2, d, d)
    p.end()
    return pm


class FlowLayout(QtWidgets.QLayout):
    """Places its items left to right and wraps them into more rows when narrow."""

    def __init__(self, spacing=12):
        super().__init__()
        self._items = []
        self._gap = spacing
        self.setContentsMargins(0, 0, 0, 0)

    def addItem(self, item):
        self._items.append(item)

    def count(self):
        return len(self._items)

    def itemAt(self, i):
        return self._items[i] if 0 <= i < len(self._items) else None

    def takeAt(self, i):
        return self._items.pop(i) if 0 <= i < len(self._items) else None

    def expandingDirections(self):
        return QtCore.Qt.Orientations(0)

    def hasHeightForWidth(self):
        return True

    def heightForWidth(self, width):
        return self._place(QtCore.QRect(0, 0, width, 0), move=False)

    def setGeometry(self, rect):
        super().setGeometry(rect)
        self._place(rect, move=True)

    def sizeHint(self):
        return self.minimumSize()

    def minimumSize(self):
        s = QtCore.QSize(0, 0)
        for it in self._items:
            s = s.expandedTo(it.minimumSize())
        return s

    def _place(self, rect, move):
        x, y, row_h = rect.x(), rect.y(), 0
        for it in self._items:
            hint = it.sizeHint()
            if x + hint.width() > rect.right() + 1 and row_h > 0:
                x, y, row_h = rect.x(), y + row_h + 2, 0
            if move:
                it.setGeometry(QtCore.QRect(QtCore.QPoint(x, y), hint))
            x += hint.width() + self._gap
            row_h = max(row_h, hint.height())
        return y + row_h - rect.y()


class Legend(QtWidgets.QWidget):
    """A legend: one entry per drawn thing, a swatch and a short name, wrapping into rows.

    ``entries`` is a list of ``(colour, shape, text)`` or ``(colour, shape, text, outline)``
    (see :func:`swatch_pixmap`)."""

    def __init__(self, entries=(), parent=None):
        super().__init__(parent)
        self.flow = FlowLayout()
        self.setLayout(self.flow)
        self.entries = []
        self.set_entries(entries)

    def set_entries(self, entries):
        while self.flow.count():
            w = self.flow.takeAt(0).widget()
            if w is not None:
                w.hide()
                w.setParent(None)
                w.deleteLater()
        self.entries = [tuple(e) for e in entries]
        for e in self.entries:
            colour, shape, text = e[:3]
            box = QtWidgets.QWidget()
            lay = QtWidgets.QHBoxLayout(box)
            lay.setContentsMargins(0, 0, 0, 0)
            lay.setSpacing(4)
            sw = QtWidgets.QLabel()
            sw.setObjectName("swatch")
            sw.setPixmap(swatch_pixmap(colour, shape, outline=e[3] if len(e) > 3 else None))
            lab = QtWidgets.QLabel(text)
            lab.setStyleSheet("color: rgb(%d, %d, %d)" % PLOT_TEXT)
            lay.addWidget(sw)
            lay.addWidget(lab)
            self.flow.addWidget(box)
        self.updateGeometry()

    def texts(self) -> list:
        return [e[2] for e in self.entries]
