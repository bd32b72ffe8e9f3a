"""Live redraw of big maps: while a run goes on a map over LIVE_MAX_CELLS is drawn from every
k-th row and column, at most LIVE_SIDE a side; the final redraw shows every cell."""
import numpy as np

from workbench.gui.result_views import LIVE_MAX_CELLS, LIVE_SIDE, MapView
from workbench.gui.resultdata import ResultData
from workbench.gui.selection import Selection


def _big_map(ny=700, nx=650):

    x = np.linspace(-1.0, 1.0, nx)
    y = np.linspace(-2.0, 2.0, ny)
    v = np.add.outer(np.arange(ny) * 1000.0, np.arange(nx)).reshape(-1)   # cell (j, i) -> 1000 j + i
    return ResultData(kind="joint sweep", shape=(ny, nx), x=x, y=y, x_label="j2 (deg)", y_label="j3 (deg)",
                      measures={"manipulability": v.astype(float)}, threshold_measure="manipulability")


def test_a_big_map_is_decimated_while_running_and_whole_at_the_end(qtbot):
    sel = Selection()
    view = MapView(sel)
    qtbot.addWidget(view)
    d = _big_map()
    assert d.size > LIVE_MAX_CELLS
    view.set_result(d)
    full = view.image.image
    assert full.shape == d.shape            # set_result draws the final image
    view.refresh(final=False)
    live = view.image.image
    k = int(np.ceil(max(d.shape) / LIVE_SIDE))
    assert k == 2 and live.shape == (350, 325)
    assert max(live.shape) <= LIVE_SIDE
    # every k-th row and column of the values, not a resampled blur
    assert np.array_equal(live, d.measures["manipulability"].reshape(d.shape)[::k, ::k])
    # drawn over the same area of the plot as the full image
    r_live = view.image.mapRectToParent(view.image.boundingRect())
    view.refresh(final=True)
    assert view.image.image.shape == d.shape
    r_full = view.image.mapRectToParent(view.image.boundingRect())
    assert np.allclose([r_live.x(), r_live.y(), r_live.width(), r_live.height()],
                       [r_full.x(), r_full.y(), r_full.width(), r_full.height()])


def test_a_small_map_is_drawn_whole_while_running(qtbot):
    view = MapView(Selection())
    qtbot.addWidget(view)
    d = _big_map(40, 30)
    view.set_result(d)
    view.refresh(final=False)
    assert view.image.image.shape == (40, 30)
