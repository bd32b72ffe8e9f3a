"""What the scene draws of a cell and of the arm's collision shapes (pure numpy, no Qt): work
points, paths, equipment boxes, pillars, keep-out zones, mount candidates, the recommended mount,
the shapes of every body at a pose and the clearance check of that pose, in world coordinates (m).

:func:`cell_content` turns whatever the cell module gives (an object with attributes or a mapping)
into this one plain form, so the scene does not depend on the cell file schema.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["CellContent", "CellCylinder", "cell_content", "box_edges", "cylinder_edges", "shape_edges",
           "body_frames", "world_shapes", "PoseClearance", "pose_clearance", "stripe_segments",
           "DEFAULT_CLEARANCE", "shape_mesh", "body_wires", "body_meshes"]

# m: a link closer than this to an obstacle or another link is drawn red (the studies' default)
DEFAULT_CLEARANCE = 0.01


@dataclass
class CellCylinder:
    """A pillar as drawn: centre (3,), unit axis (3,), radius, height (m)."""

    name: str
    center: np.ndarray
    axis: np.ndarray
    radius: float
    height: float
    collide: bool = True


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
    box_names: list = field(default_factory=list)                              # one per box
    box_collide: list = field(default_factory=list)                            # one bool per box
    cylinders: list = field(default_factory=list)                              # [CellCylinder]
    keep_outs: list = field(default_factory=list)                              # [(8, 3) corners]
    keep_out_names: list = field(default_factory=list)
    floor: bool = True

    @property
    def empty(self) -> bool:
        return not (len(self.points) or self.paths or self.boxes or len(self.candidates) or self.cylinders
                    or self.keep_outs)


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
    out.floor = bool(_get(cell, "floor", default=True))
    for i, b in enumerate(_get(cell, "keep_outs", default=None) or ()):
        out.keep_outs.append(np.asarray(b.corners(), float))
        out.keep_out_names.append(str(_get(b, "name", default=f"keep-out {i + 1}")))
    for i, c in enumerate(_get(cell, "cylinders", default=None) or ()):
        ax = np.asarray(_get(c, "axis", default=(0.0, 0.0, 1.0)), float)
        out.cylinders.append(CellCylinder(str(_get(c, "name", default=f"pillar {i + 1}")),
                                          np.asarray(c.center, float), ax / np.linalg.norm(ax), float(c.radius),
                                          float(c.height), bool(_get(c, "collide", default=True))))
    for i, b in enumerate(_get(cell, "boxes", default=None) or ()):
        out.box_names.append(str(_get(b, "name", default=f"box {i + 1}")))
        out.box_collide.append(bool(_get(b, "collide", default=True)))
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


def stripe_segments(corners, spacing=None) -> np.ndarray:
    """Warning stripes on the four side faces of a box given by its 8 corners: segments at 45
    degrees every ``spacing`` m along each face (default: a tenth of the box's largest edge, at
    least 0.1 m), plus the edges -> (2k, 3) segment end points.

    A keep-out zone is drawn this way (hatched) so it never reads as solid equipment."""
    c = np.asarray(corners, float)
    o = c[0]
    ex, ey, ez = c[4] - o, c[2] - o, c[1] - o       # index bits: x = 4, y = 2, z = 1
    if spacing is None:
        spacing = max(0.1, max(float(np.linalg.norm(e)) for e in (ex, ey, ez)) / 10)
    segs = [box_edges(c)]
    for origin, u in ((o, ex), (o + ey, ex), (o, ey), (o + ex, ey)):
        w, h = float(np.linalg.norm(u)), float(np.linalg.norm(ez))
        if w <= 0 or h <= 0:
            continue
        uu, zz = u / w, ez / h
        # lines s + t = d (s along the face, t up), for d from spacing to w + h
        for d in np.arange(spacing, w + h, spacing):
            s0, t0 = (d, 0.0) if d <= w else (w, d - w)
            s1, t1 = (0.0, d) if d <= h else (d - h, h)
            segs.append(np.array([origin + s0 * uu + t0 * zz, origin + s1 * uu + t1 * zz]))
    return np.vstack(segs)


def _circle(centre, x, y, r, k):
    t = np.linspace(0, 2 * np.pi, k + 1)
    return centre[None, :] + r * (np.cos(t)[:, None] * x[None, :] + np.sin(t)[:, None] * y[None, :])


def _perp(z):
    z = np.asarray(z, float) / np.linalg.norm(z)
    x = np.cross(z, [1.0, 0, 0] if abs(z[0]) < 0.9 else [0, 1.0, 0])
    x /= np.linalg.norm(x)
    return z, x, np.cross(z, x)


def _polyline_pairs(p) -> np.ndarray:
    return np.stack([p[:-1], p[1:]], axis=1).reshape(-1, 3)


def cylinder_edges(center, axis, radius, height, k=24) -> np.ndarray:
    """Wireframe of a cylinder: two end circles and four side lines -> (2m, 3) segment end points."""
    z, x, y = _perp(axis)
    c = np.asarray(center, float)
    lo, hi = c - z * height / 2, c + z * height / 2
    segs = [_polyline_pairs(_circle(lo, x, y, radius, k)), _polyline_pairs(_circle(hi, x, y, radius, k))]
    for a in np.linspace(0, 2 * np.pi, 4, endpoint=False):
        d = radius * (np.cos(a) * x + np.sin(a) * y)
        segs.append(np.array([lo + d, hi + d]))
    return np.vstack(segs)


def _capsule_edges(a, b, r, k=20) -> np.ndarray:
    a, b = np.asarray(a, float), np.asarray(b, float)
    L = float(np.linalg.norm(b - a))
    if L < 1e-12:   # a sphere: three great circles
        c = a
        E = np.eye(3)
        return np.vstack([_polyline_pairs(_circle(c, E[i], E[(i + 1) % 3], r, 2 * k)) for i in range(3)])
    z, x, y = _perp(b - a)
    segs = [_polyline_pairs(_circle(a, x, y, r, k)), _polyline_pairs(_circle(b, x, y, r, k))]
    for u in (x, y, -x, -y):
        segs.append(np.array([a + r * u, b + r * u]))
    # the two half-sphere caps as arcs in two planes
    t = np.linspace(0, np.pi, k // 2 + 1)
    for u in (x, y):
        segs.append(_polyline_pairs(b[None] + r * (np.cos(t)[:, None] * u + np.sin(t)[:, None] * z)))
        segs.append(_polyline_pairs(a[None] + r * (np.cos(t)[:, None] * u - np.sin(t)[:, None] * z)))
    return np.vstack(segs)


def _pose_box_corners(pose, size) -> np.ndarray:
    P = np.asarray(pose, float)
    s = np.array([[sx, sy, sz] for sx in (-1, 1) for sy in (-1, 1) for sz in (-1, 1)], float) * np.asarray(size) / 2
    return s @ P[:3, :3].T + P[:3, 3]


def shape_edges(shape) -> np.ndarray:
    """Wireframe of one :class:`workbench.arm.shapes.Shape` (in whatever frame it is given) ->
    (2m, 3) segment end points. A mesh enclosure is drawn as its capsule and its box (the shape
    is their intersection)."""
    k = shape.kind
    if k in ("capsule", "sphere"):
        return _capsule_edges(shape.a, shape.a if k == "sphere" else shape.b, shape.radius)
    if k == "box":
        return box_edges(_pose_box_corners(shape.pose, shape.size))
    if k == "cylinder":
        P = np.asarray(shape.pose, float)
        return cylinder_edges(P[:3, 3], P[:3, 2], shape.radius, shape.length)
    if k == "mesh":
        return np.vstack([_capsule_edges(shape.a, shape.b, shape.radius),
                          box_edges(_pose_box_corners(shape.pose, shape.size))])
    return np.zeros((0, 3))


def body_frames(arm, q) -> np.ndarray:
    """World frames of the collision bodies at pose ``q`` (n,): base (the mount), the frame of
    joint 1..n, the flange -> (n + 2, 4, 4), the frames :mod:`workbench.collision` places the
    shapes in."""
    q = np.asarray(q, float).reshape(arm.n)
    F = arm.frames(q, world=True)
    return np.concatenate([np.asarray(arm.model.mount, float)[None], F,
                           arm.fk(q, frame="flange", world=True)[None]], axis=0)


def world_shapes(arm, q) -> list:
    """[(body index, Shape in the world)] of every collision shape at pose ``q``."""
    F = body_frames(arm, q)
    return [(b, s.transformed(F[b])) for b, shapes in enumerate(arm.model.body_shapes()) for s in shapes]


@dataclass
class PoseClearance:
    """The clearance check of one pose.

    Attributes
    ----------
    distance : float
        Smallest signed distance (m) over the checked pairs (inf when nothing is checked).
    pair : tuple of str or None
        The nearest pair's names, e.g. ("link 3", "box 'conveyor'").
    close_bodies : set of int
        Bodies (0 base, 1..n links, n + 1 tool) in a pair closer than ``setting``.
    close_pairs : list of (str, str, float)
        Every pair closer than ``setting``, nearest first.
    setting : float
        The clearance setting (m).
    checked : bool
        False when the arm has no shapes (nothing was checked).
    """

    distance: float = np.inf
    pair: tuple | None = None
    close_bodies: set = field(default_factory=set)
    close_pairs: list = field(default_factory=list)
    setting: float = DEFAULT_CLEARANCE
    checked: bool = False

    @property
    def too_close(self) -> bool:
        return bool(self.checked and self.distance < self.setting)

    def text(self) -> str:
        """Plain words: "link 3 within 4 mm of box 'conveyor'" (or "overlaps", or the clearance)."""
        if not self.checked:
            return "no collision shapes: clearance not checked"
        if self.pair is None or not np.isfinite(self.distance):
            return "nothing to check against"
        a, b = self.pair
        mm = self.distance * 1000.0
        if mm < 0:
            return f"{a} overlaps {b} by {-mm:.0f} mm"
        if self.distance < self.setting:
            return f"{a} within {mm:.0f} mm of {b}"
        return f"nearest: {a} to {b}, {mm:.0f} mm"


def pose_clearance(arm, q, cell=None, setting=DEFAULT_CLEARANCE, self_collision=True) -> PoseClearance:
    """Check one pose against the cell's obstacles (and the arm's own links) with
    :func:`workbench.collision.pair_distances`: which bodies are within ``setting`` (m)."""
    model = arm.model
    if not model.has_shapes:
        return PoseClearance(setting=float(setting), checked=False)
    from ..collision import pair_distances, pair_names

    d = np.asarray(pair_distances(arm, np.asarray(q, float), cell, self_collision=self_collision), float)
    names = pair_names(arm, cell, self_collision=self_collision)
    out = PoseClearance(setting=float(setting), checked=True)
    if not len(names) or not np.any(np.isfinite(d)):
        return out
    d, names = list(d), list(names)
    for name, dist in _base_distances(arm, cell):     # the fixed base against the equipment
        d.append(dist)
        names.append(("base", name))
    d = np.asarray(d, float)
    k = int(np.nanargmin(d))
    out.distance, out.pair = float(d[k]), tuple(names[k])
    index = {nm: i for i, nm in enumerate(model.body_names())}
    for i in np.argsort(d):
        if not d[i] < setting:
            break
        a, b = names[i]
        out.close_pairs.append((a, b, float(d[i])))
        for nm in (a, b):
            if nm in index:
                out.close_bodies.add(index[nm])
    return out


class _OneObstacle:
    """A cell stand-in with one obstacle (so the base's distance to each one can be named)."""

    def __init__(self, item):
        self._item = item

    def obstacles(self):
        return [self._item]


def _base_distances(arm, cell) -> list:
    """[(obstacle name, distance m)] of the base's shapes at the arm's mount against every obstacle
    but the floor (:func:`workbench.collision.base_clearance`); empty without base shapes or cell."""
    if cell is None or not getattr(arm.model, "base_shapes", ()) or not hasattr(cell, "obstacles"):
        return []
    from ..collision import base_clearance, obstacle_names

    out = []
    for item in cell.obstacles():
        if item[0] == "floor":
            continue
        one = _OneObstacle(item)
        out.append((obstacle_names(one)[0], float(base_clearance(arm, one, arm.model.mount))))
    return out


def _transform(P, T):
    return P @ np.asarray(T, float)[:3, :3].T + np.asarray(T, float)[:3, 3]


def _unit_sphere(rings=10, sectors=16):
    from .posestate import sphere_mesh

    return sphere_mesh(rings, sectors)


def _capsule_mesh(a, b, r):
    v, f = _unit_sphere()
    a, b = np.asarray(a, float), np.asarray(b, float)
    L = float(np.linalg.norm(b - a))
    z, x, y = _perp(b - a) if L > 1e-12 else (np.array([0, 0, 1.0]), np.array([1.0, 0, 0]), np.array([0, 1.0, 0]))
    up = v[:, 2] >= -1e-9                      # the equator row belongs to the upper cap
    local = r * v + np.where(up, L / 2, -L / 2)[:, None] * np.array([0, 0, 1.0])
    R = np.column_stack([x, y, z])
    return local @ R.T + (a + b) / 2, f


_BOX_FACES = np.array([[0, 1, 3], [0, 3, 2], [4, 6, 7], [4, 7, 5], [0, 4, 5], [0, 5, 1],
                       [2, 3, 7], [2, 7, 6], [0, 2, 6], [0, 6, 4], [1, 5, 7], [1, 7, 3]], dtype=np.int32)


def _cylinder_mesh(center, axis, radius, height, k=24):
    z, x, y = _perp(axis)
    c = np.asarray(center, float)
    t = np.linspace(0, 2 * np.pi, k, endpoint=False)
    ring = radius * (np.cos(t)[:, None] * x + np.sin(t)[:, None] * y)
    lo, hi = c - z * height / 2, c + z * height / 2
    V = np.vstack([lo + ring, hi + ring, lo, hi])
    F = []
    for i in range(k):
        j = (i + 1) % k
        F += [(i, j, k + j), (i, k + j, k + i), (2 * k, j, i), (2 * k + 1, k + i, k + j)]
    return V, np.asarray(F, dtype=np.int32)


def shape_mesh(shape):
    """Triangle mesh (vertices (V, 3), faces (F, 3)) of one shape, in the frame it is given in.
    A mesh enclosure is drawn as its box (the tighter of its two parts in most cases)."""
    k = shape.kind
    if k in ("capsule", "sphere"):
        return _capsule_mesh(shape.a, shape.a if k == "sphere" else shape.b, shape.radius)
    if k in ("box", "mesh"):
        return _pose_box_corners(shape.pose, shape.size), _BOX_FACES
    if k == "cylinder":
        P = np.asarray(shape.pose, float)
        return _cylinder_mesh(P[:3, 3], P[:3, 2], shape.radius, shape.length)
    return np.zeros((0, 3)), np.zeros((0, 3), np.int32)


_WIRES: dict = {}


def _local_wires(model):
    """Per body: the wireframe (2m, 3) of its shapes in its own frame (cached per model)."""
    hit = _WIRES.get(id(model))
    if hit is not None and hit[0] is model:
        return hit[1]
    wires = [np.vstack([shape_edges(s) for s in shapes]) if shapes else np.zeros((0, 3))
             for shapes in model.body_shapes()]
    if len(_WIRES) > 16:
        _WIRES.clear()
    _WIRES[id(model)] = (model, wires)
    return wires


def body_wires(arm, q, frames=None) -> list:
    """Per body (base, links, tool): the wireframe of its shapes in the world at pose ``q``
    -> list of (2m, 3) segment end points (empty arrays for bodies without shapes)."""
    F = body_frames(arm, q) if frames is None else frames
    return [_transform(w, F[b]) if len(w) else w for b, w in enumerate(_local_wires(arm.model))]


def body_meshes(model) -> list:
    """[(body, vertices (V, 3) in the body frame, faces (F, 3))] of every shape (for the 3D view)."""
    return [(b, *shape_mesh(s)) for b, shapes in enumerate(model.body_shapes()) for s in shapes]
