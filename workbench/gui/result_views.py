"""Linked result views: the map (heat map, colour bar, near-singular contour, rectangle brush),
the histogram of the selected measure (range brush) and the pose list (lazy sortable table).

All three read one :class:`~workbench.gui.resultdata.ResultData` and one
:class:`~workbench.gui.selection.Selection`; a brush in any of them sets the selection and all of
them redraw from it.
"""
from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtGui, QtWidgets

from ..measures import NEAR_SINGULAR

from .formlogic import fmt_number
from .. import quantities
from .resultdata import ResultData
from .style import FlowLayout, Legend
from .selection import Brush, Selection, rows_mask

__all__ = ["MapView", "HistogramView", "PoseTableModel", "PoseListView", "display_values", "measure_label"]

HIST_BINS = 60
SEL_RGBA = (255, 140, 0, 150)
BRUSHED_ENTRY = (SEL_RGBA, "fill", "brushed")
PICKED_ENTRY = ((220, 0, 0), "ring", "picked cell")
CONTOUR_MAX_CELLS = 160          # the contour is traced on a grid of at most this many cells a side
#: while a run goes on, a map with more cells than this is drawn from every k-th row and column
#: (at most LIVE_SIDE a side); the final redraw shows every cell
LIVE_MAX_CELLS = 250_000
LIVE_SIDE = 500


FIRST_HINT = ("No results yet: press Run (F5) for the study of the Study panel, or open a results "
              "file (Ctrl+O). Earlier runs: Runs panel.")
THRESHOLD_PEN = ((255, 255, 255), (0, 0, 0))      # the 1/k contour: white over a black shadow


def _hint_stack(plot, text):
    """A stack showing ``text`` in place of an empty ``plot`` (first start, no result)."""
    stack = QtWidgets.QStackedWidget()
    hint = QtWidgets.QLabel(text)
    hint.setObjectName("empty_hint")
    hint.setWordWrap(True)
    hint.setAlignment(QtCore.Qt.AlignCenter)
    hint.setMargin(12)
    hint.setStyleSheet("color: #333; background: white; font-size: 11pt")
    stack.addWidget(hint)
    stack.addWidget(plot)
    stack.setCurrentWidget(hint)
    return stack, hint


def measure_label(name, data: ResultData | None = None, log=None) -> str:
    """The axis / colour-bar / combo label of measure ``name``: the registry's label
    (workbench/quantities.py), the unit it was stored with, "log10" when shown on a log scale."""
    unit = data.units.get(name) if data is not None else None
    return quantities.axis_label(name, unit=unit, log=log)


def display_values(data: ResultData, name) -> np.ndarray:
    """(N,) values as shown: log10 where the registry says so (the condition number); inf -> NaN."""
    v = data.measures[name]
    if quantities.is_log(name):
        with np.errstate(divide="ignore", invalid="ignore"):
            v = np.log10(v)
    return np.where(np.isfinite(v), v, np.nan)


def _finite_range(v):
    f = v[np.isfinite(v)]
    if f.size == 0:
        return 0.0, 1.0
    lo, hi = float(f.min()), float(f.max())
    if hi <= lo:
        hi = lo + (abs(lo) * 1e-3 or 1.0)
    return lo, hi


class MapView(QtWidgets.QWidget):
    """Heat map of one measure over a 2D result grid with a rectangle brush.

    Signals
    -------
    cell_picked(int)
        A click on the map picked this flat cell.
    """

    cell_picked = QtCore.Signal(int)
    measure_changed = QtCore.Signal(str)

    def __init__(self, selection: Selection, parent=None):
        super().__init__(parent)
        self.selection = selection
        self.data: ResultData | None = None
        self.threshold = NEAR_SINGULAR
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        bar = FlowLayout(spacing=6)       # wraps into rows in a narrow window: no clipped buttons
        bar.addWidget(QtWidgets.QLabel("Measure"))
        self.measure_combo = QtWidgets.QComboBox()
        self.measure_combo.setSizeAdjustPolicy(QtWidgets.QComboBox.AdjustToContents)
        self.measure_combo.currentIndexChanged.connect(self._measure_chosen)
        bar.addWidget(self.measure_combo)
        # brushing like a data tool: a mode switch; in Rectangle and Lasso a drag draws (Shift adds,
        # Alt or Ctrl removes, Esc clears), in Pan a drag moves the view
        self.mode_group = QtWidgets.QButtonGroup(self)
        self.mode_group.setExclusive(True)
        self.mode_buttons = {}
        for name, text, tip in (("pan", "Pan", "Drag moves the view, the wheel zooms"),
                                ("rect", "Rectangle", "Drag draws a rectangle brush; Shift adds, Alt/Ctrl removes"),
                                ("lasso", "Lasso", "Drag draws a free-hand brush; Shift adds, Alt/Ctrl removes")):
            b = QtWidgets.QToolButton()
            b.setText(text)
            b.setCheckable(True)
            b.setToolTip(tip)
            b.setObjectName(f"mode_{name}")
            b.clicked.connect(lambda _=False, n=name: self.set_mode(n))
            self.mode_group.addButton(b)
            self.mode_buttons[name] = b
            bar.addWidget(b)
        self.lasso_btn = self.mode_buttons["lasso"]
        self.mode = "pan"
        self.clear_btn = QtWidgets.QPushButton("Clear brush")
        self.clear_btn.clicked.connect(lambda: self.selection.clear(source="map"))
        bar.addWidget(self.clear_btn)
        lay.addLayout(bar)
        self.legend = Legend()
        self.legend.setObjectName("map_legend")
        lay.addWidget(self.legend)

        self.plot = pg.PlotWidget()
        self.plot.setBackground("w")
        self.stack, self.hint = _hint_stack(self.plot, FIRST_HINT)
        lay.addWidget(self.stack, 1)
        self.image = pg.ImageItem(axisOrder="row-major")
        self.plot.addItem(self.image)
        self.overlay = pg.ImageItem(axisOrder="row-major")
        self.overlay.setZValue(5)
        self.overlay.setParentItem(self.image)
        self._lut = np.array([[0, 0, 0, 0], list(SEL_RGBA)], dtype=np.ubyte)
        self.contour = pg.IsocurveItem(pen=pg.mkPen((255, 255, 255), width=2), axisOrder="row-major")
        self.contour.setParentItem(self.image)
        self.contour.setZValue(10)
        self.contour_shadow = pg.IsocurveItem(pen=pg.mkPen((0, 0, 0), width=4), axisOrder="row-major")
        self.contour_shadow.setParentItem(self.image)
        self.contour_shadow.setZValue(9)
        self.cbar = pg.ColorBarItem(colorMap=pg.colormap.get("viridis"), interactive=False, width=18)
        self.cbar.axis.setWidth(50)
        self.cbar.setImageItem(self.image, insert_in=self.plot.getPlotItem())
        for ax in (self.plot.getAxis("bottom"), self.plot.getAxis("left"), self.cbar.axis):
            ax.enableAutoSIPrefix(False)
        self._contour_stride = 1
        self._drag = None                # points of the gesture being drawn (axis units)
        self._drag_px = None
        self.preview = pg.PlotCurveItem(pen=pg.mkPen((255, 140, 0), width=2, style=QtCore.Qt.DashLine))
        self.preview.setZValue(40)
        self.plot.addItem(self.preview)
        self.shape_items = []            # outlines of the kept brushes
        self.plot.viewport().installEventFilter(self)
        # the picked cell: a ring that stays over the cell while other views change
        self.pick_marker = pg.ScatterPlotItem(size=16, symbol="o", pen=pg.mkPen((220, 0, 0), width=3),
                                              brush=None)
        self.pick_marker.setZValue(30)
        self.plot.addItem(self.pick_marker)
        self.picked = None
        self.plot.scene().sigMouseClicked.connect(self._clicked)
        selection.subscribe(self._on_selection)

    # ---- data ----------------------------------------------------------------------------
    @property
    def measure(self) -> str:
        return self.measure_combo.currentData() or ""

    @property
    def hint_shown(self) -> bool:
        return self.stack.currentWidget() is self.hint

    def show_hint(self, on=True):
        """The first-start hint in place of the empty plot (``on``), or the plot."""
        self.stack.setCurrentWidget(self.hint if on else self.plot)
        self.measure_combo.setEnabled(not on)
        for b in self.mode_buttons.values():
            b.setEnabled(not on)

    def _title(self):
        """The plot title: the study and the measure; the measure alone when the map is narrow."""
        d = self.data
        head = (d.title or d.kind) if d is not None else ""
        if head and self.width() >= 480:
            return f"{head}: {measure_label(self.measure, d)}"
        return measure_label(self.measure, d)

    def resizeEvent(self, ev):
        super().resizeEvent(ev)
        if self.data is not None and self.data.is_map:
            self.plot.setTitle(self._title())

    def set_result(self, data: ResultData):
        self.data = data
        self.show_hint(False)
        for it in getattr(self, "_series_items", []):
            self.plot.removeItem(it)
        self._series_items = []
        self.image.show()
        self.cbar.show()
        self.measure_combo.blockSignals(True)
        self.measure_combo.clear()
        for m in data.measure_names:
            self.measure_combo.addItem(measure_label(m, data), m)
        pref = data.threshold_measure if data.threshold_measure in data.measures else data.measure_names[0]
        self.measure_combo.setCurrentIndex(data.measure_names.index(pref))
        self.measure_combo.blockSignals(False)
        ny, nx = data.shape
        dx = (data.x[-1] - data.x[0]) / max(nx - 1, 1) if nx > 1 else 1.0
        dy = (data.y[-1] - data.y[0]) / max(ny - 1, 1) if ny > 1 else 1.0
        self._rect = QtCore.QRectF(data.x[0] - dx / 2, data.y[0] - dy / 2, dx * nx, dy * ny)
        self.plot.setLabel("bottom", data.x_label)
        self.plot.setLabel("left", data.y_label)
        self.plot.setTitle(data.title or data.kind)
        self.selection.bind(data, lambda m, d=data: display_values(d, m))
        self._draw_shapes()
        self.set_mode(self.mode)
        self.overlay.clear()
        self.mark_cell(None)
        self.refresh(final=True)
        self.image.setRect(self._rect)
        self.plot.getPlotItem().vb.autoRange(padding=0.02)

    def set_result_series(self, data: ResultData):
        """A series result: the series module draws it into this plot."""
        self.data = data
        self.selection.bind(data, lambda m, d=data: display_values(d, m))
        self._draw_shapes()
        self.show_hint(False)
        self.measure_combo.blockSignals(True)
        self.measure_combo.clear()
        for m in data.measure_names:
            self.measure_combo.addItem(measure_label(m, data), m)
        if data.threshold_measure in data.measures:
            self.measure_combo.setCurrentIndex(data.measure_names.index(data.threshold_measure))
        self.measure_combo.blockSignals(False)
        self.image.clear()
        self.overlay.clear()
        self.mark_cell(None)
        self.contour.setData(None)
        self.contour_shadow.setData(None)

    def set_threshold(self, t):
        self.threshold = float(t)
        self._update_contour()

    def mark_cell(self, c):
        """Ring the flat cell ``c`` (None: no mark) at its axis coordinates."""
        self.picked = None if c is None else int(c)
        d = self.data
        if c is None or d is None:
            self.pick_marker.setData([], [])
            return
        x, y = d.cell_xy(c)
        if y is None:     # a series: the sample on its curve
            v = display_values(d, self.measure)[int(c)] if self.measure in d.measures else np.nan
            y = float(v) if np.isfinite(v) else 0.0
        self.pick_marker.setData([x], [y])

    def refresh(self, final=True):
        """Redraw the image (new chunks or another measure); the contour when ``final``."""
        d = self.data
        if d is None or not d.is_map:
            return
        if not final and d.size > LIVE_MAX_CELLS:
            k = int(np.ceil(max(d.shape) / LIVE_SIDE))
            raw = d.measures[self.measure].reshape(d.shape)[::k, ::k]
            v = display_values(ResultData(kind="", shape=raw.shape, x=d.x, y=d.y, x_label="",
                                          measures={self.measure: raw.reshape(-1)}), self.measure).reshape(raw.shape)
        else:
            v = display_values(d, self.measure).reshape(d.shape)
        lo, hi = _finite_range(v)
        self.image.setImage(v, autoLevels=False, levels=(lo, hi))
        self.image.setRect(self._rect)
        self.cbar.setLevels((lo, hi))
        # the measure is named in the title: a colour-bar label stood beside the histogram's own
        # y label and read as a second one
        self.cbar.axis.showLabel(False)
        self.plot.setTitle(self._title())
        if final:
            self._update_contour()

    def _update_contour(self):
        d = self.data
        if d is not None and not d.is_map:
            return
        if d is None or "inverse_condition" not in d.measures:
            self.contour.setData(None)
            self.contour_shadow.setData(None)
            entries = [BRUSHED_ENTRY, PICKED_ENTRY]
            if d is not None and d.mount_fn is not None:
                entries.insert(0, ([(68, 1, 84), (33, 145, 140), (253, 231, 37)], "ramp",
                                   "best candidate of each floor cell (click: place the arm)"))
            self.legend.set_entries(entries)
            return
        g = d.grid("inverse_condition")
        s = max(1, int(np.ceil(max(g.shape) / CONTOUR_MAX_CELLS)))
        sub = np.nan_to_num(g[::s, ::s], nan=1.0)
        tr = QtGui.QTransform()
        tr.translate(0.5 * (s - 1) + 0.5, 0.5 * (s - 1) + 0.5)
        tr.scale(s, s)
        tr.translate(-0.5, -0.5)
        for item in (self.contour, self.contour_shadow):
            item.setData(sub, level=self.threshold)
            item.setTransform(tr)
        self.legend.set_entries([(THRESHOLD_PEN[0], "line", f"1/k = {fmt_number(self.threshold)} "
                                  f"(near singular below)", THRESHOLD_PEN[1]), BRUSHED_ENTRY, PICKED_ENTRY])

    def _measure_chosen(self, _i):
        if self.data is not None and not self.data.is_map:
            from .series import show_series

            show_series(self, self.data, self.threshold)
        else:
            self.refresh(final=False)
        self.measure_changed.emit(self.measure)

    # ---- brushing ------------------------------------------------------------------------
    def set_mode(self, mode):
        """"pan" (a drag moves the view), "rect" or "lasso" (a drag draws a brush)."""
        if mode not in self.mode_buttons:
            raise ValueError(f"brush mode: expected pan, rect or lasso, got {mode!r}")
        self.mode = mode
        self.mode_buttons[mode].setChecked(True)
        pan = mode == "pan"
        self.plot.getPlotItem().vb.setMouseEnabled(x=pan, y=pan)
        self.plot.viewport().setCursor(QtCore.Qt.OpenHandCursor if pan else QtCore.Qt.CrossCursor)

    @staticmethod
    def op_of(modifiers) -> str:
        """Shift adds, Alt or Ctrl removes, else the brush replaces the earlier ones."""
        if modifiers & (QtCore.Qt.AltModifier | QtCore.Qt.ControlModifier):
            return "remove"
        if modifiers & QtCore.Qt.ShiftModifier:
            return "add"
        return "replace"

    def _to_axes(self, pos):
        p = self.plot.getPlotItem().vb.mapSceneToView(self.plot.mapToScene(pos.toPoint()))
        return float(p.x()), float(p.y())

    def eventFilter(self, obj, ev):
        if obj is not self.plot.viewport() or self.mode == "pan" or self.data is None:
            return False
        t = ev.type()
        if t == QtCore.QEvent.MouseButtonPress and ev.button() == QtCore.Qt.LeftButton:
            self._drag = [self._to_axes(ev.position())]
            self._drag_px = ev.position()
            self._drag_op = self.op_of(ev.modifiers())
            return True
        if t == QtCore.QEvent.MouseMove and self._drag is not None:
            p = self._to_axes(ev.position())
            if self.mode == "lasso":
                self._drag.append(p)
            else:
                self._drag = [self._drag[0], p]
            self._show_preview()
            return True
        if t == QtCore.QEvent.MouseButtonRelease and ev.button() == QtCore.Qt.LeftButton and self._drag is not None:
            pts, self._drag = self._drag + [self._to_axes(ev.position())], None
            self.preview.setData([], [])
            moved = (ev.position() - self._drag_px).manhattanLength() > 3
            if not moved:        # a click: pick the cell, as in Pan
                self._pick_at(*pts[0])
            else:
                self._finish(pts, self._drag_op)
            return True
        return False

    def _show_preview(self):
        pts = np.asarray(self._drag, float)
        if self.mode == "rect" or not self.data.is_map:
            (x0, y0), (x1, y1) = pts[0], pts[-1]
            pts = np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]])
        else:
            pts = np.vstack([pts, pts[:1]])
        self.preview.setData(pts[:, 0], pts[:, 1])

    def _finish(self, pts, op):
        pts = np.asarray(pts, float)
        d = self.data
        if not d.is_map:          # a series: the drag's span along the axis
            self.brush_series(float(pts[0, 0]), float(pts[-1, 0]), op=op)
        elif self.mode == "rect":
            self.brush_rect(pts[0, 0], pts[-1, 0], pts[0, 1], pts[-1, 1], op=op)
        elif len(pts) >= 3:
            self.brush_polygon(pts, op=op)

    def brush_polygon(self, polygon, final=True, op="replace"):
        """Brush the cells whose centres lie inside ``polygon`` (k, 2) (axis units)."""
        self.selection.brush(Brush("polygon", polygon, op), source="map", final=final)

    def brush_rect(self, x0, x1, y0, y1, final=True, op="replace"):
        """Brush the cells whose centres lie in [x0, x1] x [y0, y1] (axis units)."""
        self.selection.brush(Brush("rect", (x0, x1, y0, y1), op), source="map", final=final)

    def brush_series(self, lo, hi, final=True, op="replace"):
        """A series: brush the samples whose axis value lies in [lo, hi]."""
        self.selection.brush(Brush("xrange", (lo, hi), op), source="series", final=final)

    def clear_brushes(self):
        self.selection.clear(source="map")

    def _draw_shapes(self):
        """Outlines of the kept rectangle and lasso brushes (dashed red: removing ones)."""
        for it in self.shape_items:
            self.plot.removeItem(it)
        self.shape_items = []
        d = self.data
        if d is None or not d.is_map or self.selection.size != d.size:
            return
        for b in self.selection.brushes:
            if b.kind == "rect":
                x0, x1, y0, y1 = b.shape
                pts = np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]])
            elif b.kind == "polygon":
                pts = np.vstack([b.shape, b.shape[:1]])
            else:
                continue
            pen = (pg.mkPen((170, 0, 0), width=2, style=QtCore.Qt.DashLine) if b.op == "remove"
                   else pg.mkPen((255, 140, 0), width=2))
            it = pg.PlotCurveItem(pts[:, 0], pts[:, 1], pen=pen)
            it.setZValue(35)
            self.plot.addItem(it)
            self.shape_items.append(it)

    def _on_selection(self, sel, source, final):
        if self.data is None or not self.data.is_map or sel.size != self.data.size:
            return
        if final:
            self._draw_shapes()
        if not sel.active:
            self.overlay.clear()
            return
        m = sel.mask.reshape(self.data.shape).view(np.uint8)
        self.overlay.setImage(m, levels=(0, 1), lut=self._lut, autoLevels=False)
        self.overlay.setRect(QtCore.QRectF(0, 0, self.data.shape[1], self.data.shape[0]))

    def _clicked(self, ev):
        if self.data is None or ev.button() != QtCore.Qt.LeftButton:
            return
        p = self.plot.getPlotItem().vb.mapSceneToView(ev.scenePos())
        self._pick_at(p.x(), p.y())

    def _pick_at(self, x, y):
        """Pick the cell (or series sample) at axis point (x, y)."""
        d = self.data
        if not d.is_map:   # a series: the sample nearest to the click along the axis
            ok = np.flatnonzero(d.done)
            if ok.size:
                self.cell_picked.emit(int(ok[np.argmin(np.abs(d.x[ok] - x))]))
            return
        p = self.image.mapFromParent(QtCore.QPointF(x, y))
        i, j = int(np.floor(p.x())), int(np.floor(p.y()))
        if 0 <= i < d.shape[1] and 0 <= j < d.shape[0]:
            self.cell_picked.emit(j * d.shape[1] + i)


class HistogramView(QtWidgets.QWidget):
    """Histogram of the selected measure: all finished cells (grey) and brushed cells (orange);
    a draggable range brushes by value."""

    def __init__(self, selection: Selection, parent=None):
        super().__init__(parent)
        self.selection = selection
        self.data = None
        self.measure = ""
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        bar = QtWidgets.QHBoxLayout()
        self.info = QtWidgets.QLabel("")
        self.info.setToolTip("Drag across the histogram to brush a value range; Shift adds, Alt/Ctrl "
                             "removes; the right button and the wheel zoom")
        self.info.setWordWrap(True)
        self.info.setMinimumWidth(60)
        bar.addWidget(self.info, 1)
        lay.addLayout(bar)
        self.legend = Legend(self._legend_entries(True))
        self.legend.setObjectName("histogram_legend")
        lay.addWidget(self.legend)
        self.plot = pg.PlotWidget()
        self.plot.setBackground("w")
        self.plot.setLabel("left", "cells")
        for ax in ("bottom", "left"):
            self.plot.getAxis(ax).enableAutoSIPrefix(False)
        self.stack, self.hint = _hint_stack(self.plot, "The histogram of the map's measure appears here.")
        lay.addWidget(self.stack, 1)
        self.all_item = pg.PlotDataItem(stepMode="center", fillLevel=0, brush=(150, 150, 150, 160),
                                        pen=pg.mkPen((110, 110, 110)), name="all finished cells")
        self.sel_item = pg.PlotDataItem(stepMode="center", fillLevel=0, brush=SEL_RGBA,
                                        pen=pg.mkPen((220, 110, 0)), name="brushed cells")
        self.plot.addItem(self.all_item)
        self.plot.addItem(self.sel_item)
        self.thr_line = pg.InfiniteLine(angle=90, pen=pg.mkPen((200, 0, 0), style=QtCore.Qt.DashLine))
        self.plot.addItem(self.thr_line)
        self.thr_line.hide()
        self.regions = []               # the kept value ranges of the measure shown
        self._drag = None
        self.preview = pg.LinearRegionItem([0, 0], movable=False, brush=(255, 140, 0, 40))
        self.preview.setZValue(30)
        self.preview.hide()
        self.plot.addItem(self.preview)
        self.plot.getPlotItem().vb.setMouseEnabled(x=False, y=False)
        self.plot.viewport().installEventFilter(self)
        self.edges = np.linspace(0, 1, HIST_BINS + 1)
        self.bin_index = None
        self.sel_counts = np.zeros(HIST_BINS, dtype=np.int64)
        self.all_counts = np.zeros(HIST_BINS, dtype=np.int64)
        selection.subscribe(self._on_selection)

    @property
    def hint_shown(self) -> bool:
        return self.stack.currentWidget() is self.hint

    def show_hint(self, on=True):
        self.stack.setCurrentWidget(self.hint if on else self.plot)

    def set_result(self, data: ResultData, measure: str):
        self.data = data
        self.show_hint(False)
        self.selection.bind(data, lambda m, d=data: display_values(d, m))
        self.set_measure(measure)

    def set_measure(self, measure, threshold=None):
        d = self.data
        if d is None or measure not in d.measures:
            return
        self.measure = measure
        v = display_values(d, measure)
        lo, hi = _finite_range(v)
        self.edges = np.linspace(lo, hi, HIST_BINS + 1)
        idx = np.floor((v - lo) / (hi - lo) * HIST_BINS)
        idx = np.where(np.isfinite(idx), np.clip(idx, 0, HIST_BINS - 1), HIST_BINS).astype(np.int32)
        self.bin_index = idx
        self.all_counts = np.bincount(idx, minlength=HIST_BINS + 1)[:HIST_BINS]
        self.all_item.setData(self.edges, self.all_counts)
        self.plot.setLabel("bottom", measure_label(measure, d))
        if threshold is not None and measure == "inverse_condition":
            self.thr_line.setValue(threshold)
            self.thr_line.show()
        elif measure != "inverse_condition":
            self.thr_line.hide()
        self.legend.set_entries(self._legend_entries(measure == "inverse_condition"))
        self._on_selection(self.selection, None, True)

    @staticmethod
    def _legend_entries(threshold_shown):
        e = [((150, 150, 150, 160), "fill", "all finished cells"), (SEL_RGBA, "fill", "brushed cells")]
        if threshold_shown:
            e.append(((200, 0, 0), "dash", "near-singular threshold"))
        return e

    def set_threshold(self, t):
        if self.measure == "inverse_condition":
            self.thr_line.setValue(t)
            self.thr_line.show()

    def _x_of(self, pos):
        return float(self.plot.getPlotItem().vb.mapSceneToView(self.plot.mapToScene(pos.toPoint())).x())

    def eventFilter(self, obj, ev):
        """A left drag across the histogram brushes a value range (Shift adds, Alt/Ctrl removes)."""
        if obj is not self.plot.viewport() or self.data is None:
            return False
        t = ev.type()
        if t == QtCore.QEvent.MouseButtonPress and ev.button() == QtCore.Qt.LeftButton:
            self._drag = [self._x_of(ev.position())] * 2
            self._drag_op = MapView.op_of(ev.modifiers())
            return True
        if t == QtCore.QEvent.MouseMove and self._drag is not None:
            self._drag[1] = self._x_of(ev.position())
            self.preview.setRegion(sorted(self._drag))
            self.preview.show()
            return True
        if t == QtCore.QEvent.MouseButtonRelease and ev.button() == QtCore.Qt.LeftButton and self._drag is not None:
            self._drag[1] = self._x_of(ev.position())
            lo, hi = sorted(self._drag)
            self._drag = None
            self.preview.hide()
            if hi > lo:
                self.brush_range(lo, hi, op=self._drag_op)
            return True
        return False

    def brush_range(self, lo, hi, final=True, op="replace"):
        """Brush the cells whose shown value of the current measure lies in [lo, hi]."""
        self.selection.brush(Brush("range", (lo, hi), op, measure=self.measure), source="histogram", final=final)

    def _draw_ranges(self):
        """The kept value ranges of the measure shown (ranges of other measures are not drawn
        here: their cells are still counted in orange)."""
        for r in self.regions:
            self.plot.removeItem(r)
        self.regions = []
        for b in self.selection.brushes:
            if b.kind == "range" and b.measure == self.measure:
                reg = pg.LinearRegionItem(list(b.shape), movable=False,
                                          brush=(170, 0, 0, 40) if b.op == "remove" else (255, 140, 0, 50))
                reg.setZValue(20)
                self.plot.addItem(reg)
                self.regions.append(reg)

    def _on_selection(self, sel, source, final):
        if self.bin_index is None or sel.size != self.bin_index.size:
            return
        if not final and source != "histogram":
            return
        self._draw_ranges()
        if sel.active:
            self.sel_counts = np.bincount(self.bin_index[sel.mask], minlength=HIST_BINS + 1)[:HIST_BINS]
        else:
            self.sel_counts = np.zeros(HIST_BINS, dtype=np.int64)
        self.sel_item.setData(self.edges, self.sel_counts)
        n = int(self.all_counts.sum())
        self.info.setText(f"{sel.count:,} of {n:,} cells brushed" if sel.active else f"{n:,} cells")


class PoseTableModel(QtCore.QAbstractTableModel):
    """Lazy table over the result arrays: only the visible cells are formatted. ``order`` holds the
    flat cell index of each row (all finished cells, or the brushed ones), sorted on demand."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.data_ = None
        self.threshold = NEAR_SINGULAR
        self.order = np.zeros(0, dtype=np.int64)
        self.columns = []
        self._sort = None          # (column, ascending)
        self._perm_cache = {}

    def set_result(self, data: ResultData):
        self.beginResetModel()
        self.data_ = data
        cols = [("cell", None)]
        # an axis that is a joint is not repeated: the joint's column shows the same values
        joint_axes = data.extras.get("axis_joints", {}) if data.has_poses and data.joint_names else {}
        if "x" not in joint_axes:
            cols.append((data.x_label, "x"))
        if data.is_map and "y" not in joint_axes:
            cols.append((data.y_label, "y"))
        for m in data.measure_names:
            cols.append((measure_label(m, data, log=False), ("m", m)))   # the list shows the values as stored
        if data.has_poses and data.joint_names:
            kinds = data.joint_kinds or ("revolute",) * len(data.joint_names)
            for k, (name, kind) in enumerate(zip(data.joint_names, kinds)):
                cols.append((f"{name} ({'°' if kind == 'revolute' else 'mm'})", ("q", k, kind)))
        cols.append(("note", "note"))
        self.columns = cols
        self._sort = None
        self._perm_cache = {}
        self.order = np.flatnonzero(data.done)
        self.endResetModel()

    def invalidate(self):
        self._perm_cache = {}

    def set_rows(self, mask):
        """Show the cells where ``mask`` (N,) is True (None: all finished cells)."""
        d = self.data_
        if d is None:
            return
        m = d.done if mask is None else (mask & d.done)
        self.beginResetModel()
        if self._sort is None:
            self.order = np.flatnonzero(m)
        else:
            perm = self._perm(*self._sort)
            self.order = perm[m[perm]]
        self.endResetModel()

    def column_values(self, col):
        d = self.data_
        key = self.columns[col][1]
        if key is None:
            return np.arange(d.size, dtype=float)
        if key == "x":
            return np.tile(d.x, d.shape[0]) if d.is_map else d.x
        if key == "y":
            return np.repeat(d.y, d.shape[1])
        if key == "note":
            return self._near().astype(float)
        if key[0] == "q":
            return d.poses(np.arange(d.size))[:, key[1]]
        return d.measures[key[1]]

    def _near(self):
        d = self.data_
        if "inverse_condition" in d.measures:
            with np.errstate(invalid="ignore"):
                return d.measures["inverse_condition"] < self.threshold
        return np.zeros(d.size, dtype=bool)

    def _perm(self, col, ascending):
        key = (col, ascending)
        if key not in self._perm_cache:
            v = np.asarray(self.column_values(col), dtype=float)
            order_key = np.where(np.isnan(v), np.inf, v if ascending else -v)   # no value: last either way
            p = np.argsort(order_key, kind="stable")
            self._perm_cache[key] = p
        return self._perm_cache[key]

    # ---- Qt model API --------------------------------------------------------------------
    def rowCount(self, parent=QtCore.QModelIndex()):
        return 0 if parent.isValid() else int(self.order.size)

    def columnCount(self, parent=QtCore.QModelIndex()):
        return 0 if parent.isValid() else len(self.columns)

    def headerData(self, section, orientation, role=QtCore.Qt.DisplayRole):
        if role != QtCore.Qt.DisplayRole:
            return None
        if orientation == QtCore.Qt.Horizontal:
            return self.columns[section][0] if section < len(self.columns) else None
        return str(section + 1)

    def data(self, index, role=QtCore.Qt.DisplayRole):
        if not index.isValid() or self.data_ is None:
            return None
        c = int(self.order[index.row()])
        key = self.columns[index.column()][1]
        d = self.data_
        if role == QtCore.Qt.DisplayRole:
            if key is None:
                return str(c)
            if key == "note":
                return "near singular" if self._near()[c] else ""
            if key == "x":
                return fmt_number(round(d.cell_xy(c)[0], 9))
            if key == "y":
                return fmt_number(round(d.cell_xy(c)[1], 9))
            if key[0] == "q":
                v = d.poses([c])[0, key[1]]
                if not np.isfinite(v):
                    return ""
                v = np.degrees(v) if key[2] == "revolute" else v * 1000.0
                return f"{round(float(v), 1) + 0.0:,.1f}"      # + 0.0: no "-0.0"
            return fmt_number(d.measures[key[1]][c])
        if role == QtCore.Qt.ForegroundRole and key == "note":
            return QtGui.QBrush(QtGui.QColor(180, 20, 20))
        return None

    def sort(self, column, order=QtCore.Qt.AscendingOrder):
        if self.data_ is None or column < 0:
            return
        sort = (column, order == QtCore.Qt.AscendingOrder)
        perm = self._perm(*sort)                 # all the work before the view is told
        keep = rows_mask(self.data_.size, self.order)
        self.layoutAboutToBeChanged.emit()
        self._sort = sort
        self.order = perm[keep[perm]]
        self.layoutChanged.emit()

    def cell_of_row(self, row) -> int:
        return int(self.order[row])


class PoseListView(QtWidgets.QWidget):
    """The pose list: brushed cells (or all finished cells when nothing is brushed)."""

    cell_picked = QtCore.Signal(int)

    def __init__(self, selection: Selection, parent=None):
        super().__init__(parent)
        self.selection = selection
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        self.caption = QtWidgets.QLabel("Poses: click one to show it; select several rows to brush them")
        lay.addWidget(self.caption)
        self.table = QtWidgets.QTableView()
        self.model = PoseTableModel(self)
        self.table.setModel(self.model)
        self.table.setSortingEnabled(True)
        self.table.setSelectionBehavior(QtWidgets.QAbstractItemView.SelectRows)
        self.table.verticalHeader().setDefaultSectionSize(20)
        self.table.horizontalHeader().setDefaultSectionSize(92)
        self.table.clicked.connect(lambda ix: self.cell_picked.emit(self.model.cell_of_row(ix.row())))
        lay.addWidget(self.table, 1)
        self.brush_btn = QtWidgets.QPushButton("Brush selected rows")
        self.brush_btn.clicked.connect(self.brush_selected_rows)
        lay.addWidget(self.brush_btn)
        selection.subscribe(self._on_selection)

    def set_result(self, data):
        self.model.set_result(data)
        self.table.sortByColumn(-1, QtCore.Qt.AscendingOrder)
        fm = self.table.horizontalHeader().fontMetrics()
        for c, (title, _key) in enumerate(self.model.columns):   # headers readable, rows not measured
            self.table.setColumnWidth(c, max(70, fm.horizontalAdvance(str(title)) + 28))

    def refresh(self):
        """New chunks finished: show them (keeps the brush filter)."""
        self.model.invalidate()
        self._on_selection(self.selection, None, True)

    def brush_selected_rows(self):
        rows = sorted({ix.row() for ix in self.table.selectionModel().selectedRows()})
        if not rows or self.model.data_ is None:
            return
        cells = self.model.order[np.asarray(rows)]
        self.selection.brush(Brush("cells", cells), source="list", final=True)

    def _on_selection(self, sel, source, final):
        if not final or self.model.data_ is None or sel.size != self.model.data_.size or source == "list":
            return
        self.model.set_rows(sel.mask if sel.active else None)
        n = self.model.rowCount()
        self.caption.setText(f"Poses: {n} {'brushed' if sel.active else 'finished'} cells; click one to show it")
