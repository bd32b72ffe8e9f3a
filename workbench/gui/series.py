"""Series results (no 2D grid: joint sweeps of one joint, random samples, path samples) shown in
the map area as the measure along the series axis, with near-singular spans shaded."""
from __future__ import annotations

import numpy as np
import pyqtgraph as pg

from .result_views import display_values, measure_label


__all__ = ["show_series", "near_spans"]


def near_spans(x, inv, threshold):
    """[(x0, x1), ...] stretches of the series axis ``x`` (k,) where ``inv`` (k,) < threshold."""
    x = np.asarray(x, float)
    with np.errstate(invalid="ignore"):
        low = np.asarray(inv, float) < threshold
    if not low.any():
        return []
    d = np.diff(np.concatenate([[0], low.astype(np.int8), [0]]))
    starts, stops = np.flatnonzero(d == 1), np.flatnonzero(d == -1) - 1
    return [(float(x[a]), float(x[b])) for a, b in zip(starts, stops)]


def show_series(view, data, threshold):
    """Draw ``data`` (a series ResultData) into the MapView ``view``'s plot."""
    plot = view.plot
    for it in getattr(view, "_series_items", []):
        plot.removeItem(it)
    view._series_items = []
    view.image.hide()
    view.cbar.hide()
    if view.measure_combo.count() != len(data.measure_names):
        view.measure_combo.blockSignals(True)
        view.measure_combo.clear()
        for m in data.measure_names:
            view.measure_combo.addItem(measure_label(m, data), m)
        view.measure_combo.setCurrentIndex(max(0, data.measure_names.index(data.threshold_measure)
                                               if data.threshold_measure in data.measures else 0))
        view.measure_combo.blockSignals(False)
    m = view.measure or data.threshold_measure
    v = display_values(data, m)
    x = np.asarray(data.x, float)
    order = np.argsort(x, kind="stable")
    unordered = bool(data.extras.get("unordered"))
    if unordered:   # random samples: dots, no line and no spans (neighbours are not related)
        fin = np.isfinite(v)
        curve = pg.ScatterPlotItem(x[fin], v[fin], size=3, pen=None, brush=(40, 80, 180, 120))
    else:
        curve = pg.PlotDataItem(x[order], v[order], pen=pg.mkPen((40, 80, 180), width=2), connect="finite")
    plot.addItem(curve)
    view._series_items.append(curve)
    if "inverse_condition" in data.measures and not unordered:
        for a, b in near_spans(x[order], data.measures["inverse_condition"][order], threshold):
            reg = pg.LinearRegionItem([a, b], movable=False, brush=(220, 40, 40, 50))
            plot.addItem(reg)
            view._series_items.append(reg)
    sel = view.selection
    if sel.active and sel.size == data.size:
        mk = sel.mask[order] & np.isfinite(v[order])
        pts = pg.ScatterPlotItem(x[order][mk], v[order][mk], size=5, brush=(255, 140, 0, 200), pen=None)
        plot.addItem(pts)
        view._series_items.append(pts)
    plot.setLabel("bottom", data.x_label)
    plot.setLabel("left", measure_label(m, data))
    plot.setTitle(data.title or data.kind)
    brushed = ((255, 140, 0), "dot", "brushed samples")
    view.legend.set_entries([brushed, ((40, 150, 60), "dot", "TCP points in the scene (colour: measure)")]
                            if unordered else
                            [((220, 40, 40, 60), "fill", f"near singular (1/k < {threshold:g})"), brushed])
    plot.getPlotItem().vb.autoRange(padding=0.02)
    if getattr(view, "picked", None) is not None and view.picked < data.size:
        view.mark_cell(view.picked)     # the ring follows the measure shown

    view.series_x = x     # brushing: MapView.brush_series (an "xrange" brush over data.x)
