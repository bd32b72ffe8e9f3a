"""The shared selection model and the brushing helpers (pure numpy; answers worked by hand)."""
import numpy as np
import pytest

from workbench.gui.selection import Selection, axis_index_range, range_mask, rect_mask, rows_mask


def test_rect_mask_on_a_small_grid_by_hand():
    # x centres 0, 10, 20, 30; y centres 0, 1, 2 -> grid (3, 4), flat c = j * 4 + i
    x = np.array([0.0, 10.0, 20.0, 30.0])
    y = np.array([0.0, 1.0, 2.0])
    m = rect_mask(x, y, 5, 25, 0.5, 2.0)    # x in {10, 20}, y in {1, 2}
    assert np.flatnonzero(m).tolist() == [5, 6, 9, 10]
    # any corner order, and a rectangle through cell centres includes them
    assert np.array_equal(rect_mask(x, y, 25, 5, 2.0, 0.5), m)
    assert np.flatnonzero(rect_mask(x, y, 0, 0, 0, 0)).tolist() == [0]
    assert not rect_mask(x, y, 31, 40, 0, 2).any()


def test_axis_index_range_descending_axis():
    v = np.array([30.0, 20.0, 10.0, 0.0])
    assert axis_index_range(v, 5, 25) == (1, 3)
    assert axis_index_range(np.array([0.0, 10, 20, 30]), 5, 25) == (1, 3)


def test_range_and_rows_masks():
    v = np.array([0.1, np.nan, 0.5, 0.9, np.inf])
    assert range_mask(v, 0.4, 1.0).tolist() == [False, False, True, True, False]
    assert range_mask(v, 1.0, 0.4).tolist() == [False, False, True, True, False]
    assert rows_mask(5, [4, 1]).tolist() == [False, True, False, False, True]


def test_selection_notifies_with_source_and_counts():
    sel = Selection(6)
    heard = []
    sel.subscribe(lambda s, src, fin: heard.append((src, fin, s.count, s.active)))
    sel.set_mask(rows_mask(6, [1, 2]), source="map", final=False)
    sel.set_mask(rows_mask(6, [1, 2, 5]), source="map")
    sel.clear(source="list")
    assert heard == [("map", False, 2, True), ("map", True, 3, True), ("list", True, 0, False)]
    with pytest.raises(ValueError, match=r"expected shape \(6,\)"):
        sel.set_mask(np.zeros(5, bool))
    # the mask handed out cannot be written through
    with pytest.raises(ValueError):
        sel.mask[0] = True


def test_polygon_mask_by_hand():
    from workbench.gui.selection import polygon_mask

    x = np.arange(5.0)          # centres 0..4
    y = np.arange(4.0)          # centres 0..3; flat c = j * 5 + i
    # a square around x 1..3, y 1..2 selects the same cells as the rectangle
    sq = [(0.5, 0.5), (3.5, 0.5), (3.5, 2.5), (0.5, 2.5)]
    assert np.array_equal(polygon_mask(x, y, sq), rect_mask(x, y, 0.5, 3.5, 0.5, 2.5))
    # a triangle with corners (0, -0.5), (4.5, -0.5), (4.5, 4): the cells below its diagonal
    # y = x - 0.5 (no centre lies on it): row 0 x 1..4, row 1 x 2..4, row 2 x 3..4, row 3 x 4
    tri = [(0.0, -0.5), (4.5, -0.5), (4.5, 4.0)]
    got = np.flatnonzero(polygon_mask(x, y, tri)).tolist()
    assert got == [1, 2, 3, 4, 7, 8, 9, 13, 14, 19]
    assert not polygon_mask(x, y, [(10, 10), (11, 10), (11, 11)]).any()
