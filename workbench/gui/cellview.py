"""What the scene draws of a cell (pure numpy, no Qt): work points, paths, equipment boxes and
mount candidates, in world coordinates (m).

:func:`cell_content` turns whatever the cell module gives (an object with attributes or a mapping)
into this one plain form, so the scene does not depend on the cell file schema.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["CellContent", "cell_content", "box_edges"]


@dataclass
class CellContent:
    points: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))       # (k, 3) m
    point_frames: np.ndarray | None = None                                     # (k, 4, 4)
    point_names: list = field(default_factory=list)
    paths: list = field(default_factory=list)                                  # [(m, 3)]
    boxes: list = field(default_factory=list)                                  # [(8, 3) corners]
    candidates: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))   # (c, 3) m
    candidate_scores: np.ndarray | None = None                                 # (c,) in [0, 1]
    name: str = ""

    @property
    def empty(self) -> bool:
        return not (len(self.points) or self.paths or self.boxes or len(self.candidates))


def _get(obj, *names, default=None):
    for n in names:
        if isinstance(obj, dict) and n in obj:
            return obj[n]
        if hasattr(obj, n):
            return getattr(obj, n)
    return default


def _pos(p):
    """Position (3,) of a work point given as a transform, an object or a mapping."""
    arr = None
    for key in ("T", "pose", "transform", "position", "xyz", "p"):
        v = _get(p, key)
        if v is not None:
            arr = np.asarray(v, dtype=float)
            break
    if arr is None:
        arr = np.asarray(p, dtype=float)
    if arr.shape == (4, 4):
        return arr[:3, 3], arr
    return arr.reshape(-1)[:3], None


def _corners_from_lo_hi(lo, hi):
    lo, hi = np.asarray(lo, float).reshape(3), np.asarray(hi, float).reshape(3)
    return np.array([[(hi if b else lo)[a] for a, b in enumerate((ix, iy, iz))]
                     for ix in (0, 1) for iy in (0, 1) for iz in (0, 1)])


def cell_content(cell, path_spacing=0.01) -> CellContent:
    """Plain drawing content from a cell (:class:`workbench.studies.cell.Cell` or any object /
    mapping with similar parts); parts it does not know are left out."""
    if cell is None:
        return CellContent()
    if isinstance(cell, CellContent):
        return cell
    out = CellContent(name=str(_get(cell, "name", default="") or ""))
    pts = _get(cell, "points", "work_points", default=None)
    if pts is not None:
        items = list(pts.items()) if isinstance(pts, dict) else \
            [(_get(p, "name", default=str(i)), p) for i, p in enumerate(pts)]
        P, F, names = [], [], []
        for name, p in items:
            pos, T = _pos(p)
            P.append(pos)
            F.append(T if T is not None else np.vstack([np.hstack([np.eye(3), pos[:, None]]), [0, 0, 0, 1]]))
            names.append(str(name))
        if P:
            out.points = np.asarray(P, float)
            out.point_frames = np.asarray(F, float)
            out.point_names = names
    for p in _get(cell, "paths", default=None) or ():
        xyz = None
        try:
            from ..studies.cell import sample_path

            xyz = sample_path(cell, p, path_spacing).poses[:, :3, 3]
        except Exception:  # not a studies Cell: look for sample points
            v = _get(p, "samples", "polyline", "xyz")
            if v is not None:
                xyz = np.asarray(v, float).reshape(-1, 3)
        if xyz is not None and len(xyz) > 1:
            out.paths.append(np.asarray(xyz, float))
    for b in _get(cell, "boxes", default=None) or ():
        if hasattr(b, "corners"):
            out.boxes.append(np.asarray(b.corners(), float))
            continue
        lo, hi = _get(b, "lo", "min"), _get(b, "hi", "max")
        if lo is None:
            c, sz = _get(b, "center", "centre"), _get(b, "size")
            if c is not None and sz is not None:
                lo, hi = np.asarray(c, float) - np.asarray(sz, float) / 2, np.asarray(c, float) + np.asarray(sz, float) / 2
        if lo is not None:
            out.boxes.append(_corners_from_lo_hi(lo, hi))
    region = _get(cell, "mount", default=None)
    if region is not None and hasattr(region, "xs"):
        X, Y = np.meshgrid(region.xs, region.ys)
        h = float(region.heights[0]) if len(region.heights) else 0.0
        out.candidates = np.column_stack([X.ravel(), Y.ravel(), np.full(X.size, h)])
    return out


def box_edges(corners) -> np.ndarray:
    """The 12 edges of a box from its 8 corners (index bits = which end along each box axis, as
    :meth:`workbench.studies.cell.Box.corners` orders them) -> (24, 3) segment end points."""
    c = np.asarray(corners, float)
    return np.asarray([c[i] if t == 0 else c[j] for i in range(8) for j in range(i + 1, 8)
                       if (i ^ j) in (1, 2, 4) for t in (0, 1)])
