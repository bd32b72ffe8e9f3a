"""The one shared selection of result cells (pure Python + numpy, no Qt).

Every linked view (map, histogram, pose list, scene ghosts) reads the same boolean mask and
subscribes to its changes; a view that brushes calls :meth:`Selection.set_mask` (or one of the
helpers) and names itself as ``source`` so it does not redraw from its own event.

Brushing helpers turn a gesture into a mask over the flat cells of a result:

* :func:`rect_mask` - a rectangle on a 2D grid map (axes in display units),
* :func:`range_mask` - a value range of one measure (histogram),
* :func:`rows_mask` - explicit cell indices (rows picked in the pose list).
"""
from __future__ import annotations

from typing import Callable

import numpy as np

__all__ = ["Selection", "rect_mask", "polygon_mask", "range_mask", "rows_mask", "axis_index_range", "Brush",
           "combine", "save_brushes", "load_brushes", "brush_file", "OPS"]


class Selection:
    """A boolean mask over ``size`` result cells plus listeners.

    Parameters
    ----------
    size : int
        Number of cells (flat).

    Listeners are called as ``fn(selection, source, final)``: ``source`` names the view that made
    the change (or ``None``), ``final`` is False while a drag is still going on (views may show a
    cheap preview then and do the full update when ``final`` is True).
    """

    def __init__(self, size: int = 0):
        self._mask = np.zeros(int(size), dtype=bool)
        self._active = False
        self._count = 0
        self._listeners: list[Callable] = []
        #: the brushes behind the mask (shapes and value ranges), re-evaluated by :meth:`reevaluate`
        self.brushes: list = []
        self._data = None
        self._values = None

    # ---- state ---------------------------------------------------------------------------
    @property
    def size(self) -> int:
        return self._mask.size

    @property
    def mask(self) -> np.ndarray:
        """(size,) bool: the selected cells (read-only view)."""
        v = self._mask.view()
        v.flags.writeable = False
        return v

    @property
    def active(self) -> bool:
        """True when something is brushed (an empty brush is still active: it selects nothing)."""
        return self._active

    @property
    def count(self) -> int:
        return self._count

    def indices(self) -> np.ndarray:
        """(count,) int64 flat indices of the selected cells, ascending."""
        return np.flatnonzero(self._mask)

    # ---- changes -------------------------------------------------------------------------
    def resize(self, size: int) -> None:
        """Start over with ``size`` cells and nothing selected (a new result)."""
        self.brushes = []
        self._mask = np.zeros(int(size), dtype=bool)
        self._active = False
        self._count = 0
        self._emit(None, True)

    def set_mask(self, mask, source=None, final=True, _keep_brushes=False) -> None:
        """Replace the selection with ``mask`` (size,) bool (a bare mask: the brushes are dropped)."""
        if not _keep_brushes:
            self.brushes = []
        mask = np.asarray(mask, dtype=bool)
        if mask.shape != self._mask.shape:
            raise ValueError(f"selection mask: expected shape {self._mask.shape}, got {mask.shape}")
        self._mask = mask
        self._active = True
        self._count = int(np.count_nonzero(mask))
        self._emit(source, final)

    def clear(self, source=None) -> None:
        """Nothing brushed (the brushes are dropped too)."""
        self.brushes = []
        self._mask = np.zeros_like(self._mask)
        self._active = False
        self._count = 0
        self._emit(source, True)

    def bind(self, data, values) -> None:
        """The result brushes are evaluated on: ``data`` (ResultData) and ``values(measure)``
        -> (size,) shown values."""
        self._data, self._values = data, values

    def brush(self, brush, source=None, final=True) -> None:
        """Add ``brush`` (its op says how it combines; "replace" drops the earlier ones) and
        select what all brushes select now."""
        if self._data is None:
            raise ValueError("selection: no result bound to brush on")
        self.brushes = [brush] if brush.op == "replace" else self.brushes + [brush]
        self.set_mask(combine(self.brushes, self._data, self._values), source, final, _keep_brushes=True)

    def set_brushes(self, brushes, source=None) -> None:
        """Replace the brushes (a saved set, reopened) and evaluate them."""
        self.brushes = list(brushes)
        if not self.brushes:
            self.clear(source)
            return
        self.set_mask(combine(self.brushes, self._data, self._values), source, True, _keep_brushes=True)

    def reevaluate(self, source="data") -> bool:
        """New chunks arrived (or the values changed): the brushes select again; True when the
        selected cells changed."""
        if not self.brushes or self._data is None or self._data.size != self.size:
            return False
        m = combine(self.brushes, self._data, self._values)
        if np.array_equal(m, self._mask):
            return False
        self.set_mask(m, source, True, _keep_brushes=True)
        return True

    # ---- listeners -----------------------------------------------------------------------
    def subscribe(self, fn: Callable) -> None:
        self._listeners.append(fn)

    def unsubscribe(self, fn: Callable) -> None:
        if fn in self._listeners:
            self._listeners.remove(fn)

    def _emit(self, source, final) -> None:
        for fn in list(self._listeners):
            fn(self, source, final)


def axis_index_range(values, lo, hi):
    """Index range [i0, i1) of the sorted axis ``values`` (k,) whose cells lie within [lo, hi].

    A cell counts when its centre is inside the closed interval.
    """
    v = np.asarray(values, dtype=float)
    if lo > hi:
        lo, hi = hi, lo
    if v.size > 1 and v[0] > v[-1]:  # descending axis
        i0 = v.size - int(np.searchsorted(v[::-1], hi, side="right"))
        i1 = v.size - int(np.searchsorted(v[::-1], lo, side="left"))
        return i0, i1
    return int(np.searchsorted(v, lo, side="left")), int(np.searchsorted(v, hi, side="right"))


def rect_mask(x, y, x0, x1, y0, y1) -> np.ndarray:
    """Mask of the cells of a (len(y), len(x)) row-major grid whose centres are in the rectangle.

    Parameters
    ----------
    x : (nx,) array
        Cell-centre coordinates along the map's horizontal axis (display units).
    y : (ny,) array
        Cell-centre coordinates along the vertical axis.
    x0, x1, y0, y1 : float
        The rectangle (any order).

    Returns
    -------
    (ny * nx,) bool
    """
    nx, ny = len(x), len(y)
    i0, i1 = axis_index_range(x, x0, x1)
    j0, j1 = axis_index_range(y, y0, y1)
    m = np.zeros((ny, nx), dtype=bool)
    m[j0:j1, i0:i1] = True
    return m.reshape(-1)


def polygon_mask(x, y, polygon) -> np.ndarray:
    """Mask of the cells of a (len(y), len(x)) row-major grid whose centres lie inside ``polygon``
    (k, 2) (a lasso; closed implicitly). Only the cells in the polygon's bounding box are tested.

    Returns
    -------
    (ny * nx,) bool
    """
    from matplotlib.path import Path

    poly = np.asarray(polygon, dtype=float).reshape(-1, 2)
    x, y = np.asarray(x, float), np.asarray(y, float)
    m = np.zeros((len(y), len(x)), dtype=bool)
    if len(poly) < 3:
        return m.reshape(-1)
    i0, i1 = axis_index_range(x, poly[:, 0].min(), poly[:, 0].max())
    j0, j1 = axis_index_range(y, poly[:, 1].min(), poly[:, 1].max())
    if i1 <= i0 or j1 <= j0:
        return m.reshape(-1)
    X, Y = np.meshgrid(x[i0:i1], y[j0:j1])
    inside = Path(poly).contains_points(np.column_stack([X.ravel(), Y.ravel()]))
    m[j0:j1, i0:i1] = inside.reshape(X.shape)
    return m.reshape(-1)


def range_mask(values, lo, hi) -> np.ndarray:
    """Mask of the finite ``values`` (N,) within [lo, hi] (any order)."""
    if lo > hi:
        lo, hi = hi, lo
    v = np.asarray(values)
    with np.errstate(invalid="ignore"):
        return (v >= lo) & (v <= hi)


def rows_mask(size, rows) -> np.ndarray:
    """Mask with the flat cell indices ``rows`` set."""
    m = np.zeros(int(size), dtype=bool)
    r = np.asarray(rows, dtype=np.int64)
    if r.size:
        m[r] = True
    return m


# ---- brushes kept as shapes and value ranges -------------------------------------------------
#: how a brush combines with the ones before it: a plain drag replaces, Shift adds, Alt/Ctrl removes
OPS = ("replace", "add", "remove")


class Brush:
    """One brush gesture kept as what was drawn, so it can be evaluated again on new data.

    Parameters
    ----------
    kind : str
        "rect" (``shape`` = (x0, x1, y0, y1), axis units of the map), "polygon" (``shape`` =
        (k, 2) corners), "range" (``shape`` = (lo, hi) of the shown values of ``measure``) or
        "xrange" (``shape`` = (lo, hi) along a series' axis) or "cells" (``shape`` = flat cell
        indices).
    op : str
        One of :data:`OPS`.
    measure : str
        The measure a "range" brush reads.
    """

    def __init__(self, kind, shape, op="replace", measure=""):
        if kind not in ("rect", "polygon", "range", "xrange", "cells"):
            raise ValueError(f"brush kind: expected rect, polygon, range, xrange or cells, got {kind!r}")
        if op not in OPS:
            raise ValueError(f"brush op: expected one of {OPS}, got {op!r}")
        self.kind, self.op, self.measure = kind, op, measure
        self.shape = np.asarray(shape, dtype=float if kind != "cells" else np.int64)

    def mask(self, data, values) -> np.ndarray:
        """(size,) bool over ``data`` (a ResultData); ``values(measure)`` gives shown values."""
        if self.kind == "rect":
            x0, x1, y0, y1 = self.shape
            return rect_mask(data.x, data.y, x0, x1, y0, y1)
        if self.kind == "polygon":
            return polygon_mask(data.x, data.y, self.shape)
        if self.kind == "range":
            if self.measure not in data.measures:
                return np.zeros(data.size, dtype=bool)
            return range_mask(values(self.measure), *self.shape)
        if self.kind == "xrange":
            return range_mask(np.asarray(data.x, float), *self.shape)
        return rows_mask(data.size, self.shape[self.shape < data.size])

    def to_dict(self) -> dict:
        return {"kind": self.kind, "op": self.op, "measure": self.measure, "shape": self.shape.tolist()}

    @classmethod
    def from_dict(cls, d) -> "Brush":
        return cls(d["kind"], d["shape"], d.get("op", "replace"), d.get("measure", ""))

    def __repr__(self):
        return f"Brush({self.kind!r}, {self.shape.tolist()!r}, op={self.op!r}, measure={self.measure!r})"


def combine(brushes, data, values) -> np.ndarray:
    """The cells the ``brushes`` select on ``data``, in order (replace, add, remove); only
    finished cells (``data.done``) count."""
    m = np.zeros(data.size, dtype=bool)
    for b in brushes:
        bm = b.mask(data, values)
        if b.op == "replace":
            m = bm.copy()
        elif b.op == "add":
            m |= bm
        else:
            m &= ~bm
    return m & np.asarray(data.done, dtype=bool)


def save_brushes(path, brushes) -> None:
    """Write the brushes as JSON (beside a results file: ``brush_file(results)``)."""
    import json

    tmp = f"{path}.partial"
    with open(tmp, "w", encoding="utf-8") as fh:
        json.dump({"brushes": [b.to_dict() for b in brushes]}, fh)
    import os

    os.replace(tmp, path)


def load_brushes(path) -> list:
    """Brushes saved by :func:`save_brushes`; [] when there is no readable file."""
    import json

    try:
        with open(path, encoding="utf-8") as fh:
            return [Brush.from_dict(d) for d in json.load(fh)["brushes"]]
    except (OSError, ValueError, KeyError, TypeError):
        return []


def brush_file(results_path) -> str:
    """Where the brushes of a results file are kept (in the project folder beside it)."""
    return f"{results_path}.brush.json"
