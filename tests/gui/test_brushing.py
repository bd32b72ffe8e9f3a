"""Issue 12 item 4: brushing by mouse gestures (a mode switch; drag draws; Shift adds, Alt/Ctrl
removes), brushes kept as shapes and value ranges and evaluated again on new chunks and on
reopening, the same brush in every linked view. Expected cells are worked out by hand on a
10 x 8 grid with unit spacing (cell centres at integer coordinates)."""
import os

import numpy as np
import pytest
from PySide6 import QtCore, QtTest, QtWidgets

from workbench.gui.result_views import HistogramView, MapView
from workbench.gui.resultdata import ResultData
from workbench.gui.selection import Brush, Selection, combine

NX, NY = 10, 8


def _data(done=None):
    x = np.arange(NX, dtype=float)
    y = np.arange(NY, dtype=float)
    v = np.add.outer(y, x).reshape(-1) / 20.0          # cell (j, i): (i + j) / 20
    d = ResultData(kind="joint sweep", shape=(NY, NX), x=x, y=y, x_label="a", y_label="b",
                   measures={"inverse_condition": v.copy(), "manipulability": 1.0 - v},
                   threshold_measure="inverse_condition")
    d.done[:] = True if done is None else done
    return d


@pytest.fixture
def views(qtbot):
    sel = Selection()
    box = QtWidgets.QWidget()
    lay = QtWidgets.QHBoxLayout(box)
    mv, hv = MapView(sel), HistogramView(sel)
    lay.addWidget(mv)
    lay.addWidget(hv)
    qtbot.addWidget(box)
    box.resize(1100, 560)
    d = _data()
    sel.resize(d.size)
    mv.set_result(d)
    hv.set_result(d, "inverse_condition")
    box.show()
    qtbot.waitExposed(box)
    mv.plot.getPlotItem().vb.setRange(xRange=(-0.5, NX - 0.5), yRange=(-0.5, NY - 0.5), padding=0)
    QtWidgets.QApplication.processEvents()
    yield sel, mv, hv, d
    box.close()


def _px(view, x, y):
    vb = view.plot.getPlotItem().vb
    return view.plot.mapFromScene(vb.mapViewToScene(QtCore.QPointF(x, y)))


def _drag(view, pts, mod=QtCore.Qt.NoModifier):
    vp = view.plot.viewport()
    px = [_px(view, *p) for p in pts]
    QtTest.QTest.mousePress(vp, QtCore.Qt.LeftButton, mod, px[0])
    for p in px[1:]:
        QtTest.QTest.mouseMove(vp, p)
    QtTest.QTest.mouseRelease(vp, QtCore.Qt.LeftButton, mod, px[-1])


def _cells(ii, jj):
    return {j * NX + i for i in ii for j in jj}


def test_rectangle_drags_replace_add_and_remove(views):
    sel, mv, hv, d = views
    mv.set_mode("rect")
    _drag(mv, [(1.5, 1.5), (3.0, 2.5), (4.5, 3.5)])
    want = _cells(range(2, 5), range(2, 4))                  # i 2..4, j 2..3: 6 cells
    assert set(sel.indices().tolist()) == want and len(want) == 6
    _drag(mv, [(6.5, 4.5), (8.5, 6.5)], QtCore.Qt.ShiftModifier)      # Shift adds
    want |= _cells(range(7, 9), range(5, 7))
    assert set(sel.indices().tolist()) == want and sel.count == 10
    _drag(mv, [(2.5, 1.5), (3.5, 3.5)], QtCore.Qt.ControlModifier)    # Ctrl removes
    want -= _cells([3], range(2, 4))
    assert set(sel.indices().tolist()) == want and sel.count == 8
    _drag(mv, [(6.5, 4.5), (7.5, 5.5)], QtCore.Qt.AltModifier)        # Alt removes too
    want -= _cells([7], [5])
    assert sel.count == 7 and set(sel.indices().tolist()) == want
    assert [b.op for b in sel.brushes] == ["replace", "add", "remove", "remove"]
    # the same brushes are drawn: one outline per rectangle, corners at the drag's ends
    assert len(mv.shape_items) == 4
    xs, ys = mv.shape_items[0].getData()
    assert min(xs) == pytest.approx(1.5, abs=0.05) and max(ys) == pytest.approx(3.5, abs=0.05)
    # and counted in the histogram's orange bars
    assert hv.sel_counts.sum() == 7
    # a plain drag starts over
    _drag(mv, [(-0.4, -0.4), (0.5, 0.5)])
    assert set(sel.indices().tolist()) == {0} and len(mv.shape_items) == 1


def test_pan_mode_drags_the_view_not_a_brush(views):
    sel, mv, hv, d = views
    mv.set_mode("rect")
    mv.mode_buttons["pan"].click()
    assert mv.mode == "pan" and not mv.mode_buttons["rect"].isChecked()
    _drag(mv, [(2, 2), (4, 2), (6, 2)])
    assert not sel.active and sel.count == 0


def test_lasso_drag_selects_the_cells_inside(views):
    sel, mv, hv, d = views
    mv.set_mode("lasso")
    corners = [(0.5, 0.5), (6.6, 0.5), (0.5, 6.6)]
    path = []
    for a, b in zip(corners, corners[1:] + corners[:1]):
        for t in np.linspace(0, 1, 8, endpoint=False):
            path.append((a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])))
    _drag(mv, path)
    # centres (i, j) with i, j >= 1 and i + j <= 7 (the edge x + y = 7.1): 6 + 5 + ... + 1 = 21
    want = {j * NX + i for i in range(1, 7) for j in range(1, 7) if i + j <= 7}
    assert len(want) == 21 and set(sel.indices().tolist()) == want
    assert sel.brushes[0].kind == "polygon"


def test_histogram_drag_brushes_a_value_range_kept_for_its_measure(views):
    sel, mv, hv, d = views
    _drag(hv, [(0.095, 10), (0.2, 10), (0.255, 10)])
    v = d.measures["inverse_condition"]
    want = np.flatnonzero((v >= 0.095) & (v <= 0.255))        # (i + j) in 2..5
    assert np.array_equal(sel.indices(), want)
    assert len(hv.regions) == 1
    lo, hi = hv.regions[0].getRegion()
    assert lo == pytest.approx(0.095, abs=0.01) and hi == pytest.approx(0.255, abs=0.01)
    # the map shows the same cells in its overlay
    assert mv.overlay.image.sum() == want.size
    # another measure: its histogram does not draw the range of inverse condition ...
    hv.set_measure("manipulability")
    assert hv.regions == [] and np.array_equal(sel.indices(), want)
    assert hv.sel_counts.sum() == want.size
    # ... and back, the drawn range again matches the selected cells
    hv.set_measure("inverse_condition")
    assert len(hv.regions) == 1


def test_brushes_are_evaluated_again_when_chunks_arrive(qtbot):
    # the case: a value brush stayed [2, 3, 4] after new chunks put more cells in range
    sel = Selection()
    hv = HistogramView(sel)
    qtbot.addWidget(hv)
    vals = np.array([0.9, 0.1, 0.5, 0.55, 0.6, 0.52, 0.58, 0.2, 0.51, 0.59])
    d = ResultData(kind="s", shape=(10,), x=np.arange(10.0), y=None, x_label="s",
                   measures={"inverse_condition": np.where(np.arange(10) < 5, vals, np.nan)})
    d.done[:5] = True
    sel.resize(d.size)
    hv.set_result(d, "inverse_condition")
    hv.brush_range(0.5, 0.6)
    assert sel.indices().tolist() == [2, 3, 4]
    d.measures["inverse_condition"][5:] = vals[5:]         # the next chunk
    d.done[5:] = True
    assert sel.reevaluate()
    assert sel.indices().tolist() == [2, 3, 4, 5, 6, 8, 9]


def test_combine_orders_replace_add_remove():
    d = _data()
    b = [Brush("rect", (0, 2, 0, 0), "replace"), Brush("cells", [9], "add"), Brush("rect", (1, 1, 0, 0), "remove")]
    assert np.flatnonzero(combine(b, d, lambda m: d.measures[m])).tolist() == [0, 2, 9]
    d.done[2] = False                                       # unfinished cells are never selected
    assert np.flatnonzero(combine(b, d, lambda m: d.measures[m])).tolist() == [0, 9]


def test_brushes_are_kept_with_the_results_file_and_reopened(window, qtbot):
    w = window
    w.study_panel.edits["steps"].setText("[9, 7]")
    w.act_run.trigger()
    qtbot.waitUntil(lambda: not w.running, timeout=60000)
    d = w.result
    x0, x1 = d.x[1] - 1e-6, d.x[3] + 1e-6
    y0, y1 = d.y[2] - 1e-6, d.y[4] + 1e-6
    w.map_view.brush_rect(x0, x1, y0, y1)
    w.hist_view.brush_range(-1.0, 2.0, op="remove")        # then remove everything ...
    assert w.selection.count == 0
    w.map_view.brush_rect(x0, x1, y0, y1, op="add")         # ... and add the rectangle again
    want = {j * d.shape[1] + i for i in (1, 2, 3) for j in (2, 3, 4)}
    assert set(w.selection.indices().tolist()) == want
    path = w.results_file
    assert os.path.exists(path + ".brush.json")
    w.clear_result()
    assert w.open_file(path)
    assert set(w.selection.indices().tolist()) == want
    assert [b.op for b in w.selection.brushes] == ["replace", "remove", "add"]
    assert len(w.map_view.shape_items) == 2               # the two rectangles drawn again
