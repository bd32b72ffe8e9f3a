"""Clearance between an arm's collision shapes, the cell's obstacles and its own links.

Public API::

    from workbench.collision import clearance, nearest, pair_names, base_clearance
    d = clearance(arm, q, cell)                 # (...,) m, signed (negative = overlap)
    d, k = nearest(arm, q, cell)                # and the nearest pair: pair_names(arm, cell)[k]
    names = pair_names(arm, cell)               # [("link 3", "box 'conveyor'"), ("link 2", "tool"), ...]
    b = base_clearance(arm, cell, mount)        # (...,) m: the fixed base's shapes vs the obstacles

``arm`` is a :class:`workbench.kinematics.Arm` or an :class:`workbench.arm.ArmModel`; ``q`` joint
values (..., n) (rad / m); ``cell`` what :func:`workbench.studies.cell.read_cell_file` returns, or
None (then the floor z = 0 is the only obstacle); ``mounts`` base-in-cell transforms (..., 4, 4)
broadcast against ``q``'s leading shape (default: the arm model's own ``mount``), the same
placement as the studies use (targets in the base frame are ``inverse(mount) @ pose``).

What is checked: every shape of links 1..n and of the tool against every obstacle (the floor
unless ``[cell] floor = false``, boxes with ``collide`` on, cylinders, keep-out boxes), and, with
``self_collision``, every pair of bodies (base, links, tool) that are not neighbours along the
chain and not listed in the arm file's ``skip``. The base is checked against obstacles only by
:func:`base_clearance` (it does not move with q; the floor is not its obstacle).

Shapes are reduced to capsules (spheres are capsules of zero length), oriented boxes and their
intersections (cylinders; mesh enclosures); see :mod:`workbench.collision.kernels` for the
distance of each pair kind and where a value is exact (capsule-capsule, capsule-box, box-box,
floor) or a lower bound (cylinders and mesh enclosures near their rims: never larger than the true
distance). The minimum over pairs is exact: pairs are skipped only when a lower bound shows they
cannot be the nearest.
"""
from __future__ import annotations

import math

import numpy as np

from ..errors import WorkbenchError
from . import kernels as _k
from .kernels import BOTH, BOX, CAPSULE, FLOOR, PAR

__all__ = ["clearance", "nearest", "pair_names", "base_clearance", "pair_distances", "obstacle_names",
           "CollisionError", "Geometry", "geometry", "shape_rows", "obstacle_rows", "self_pairs"]


class CollisionError(WorkbenchError):
    """Bad input to the clearance functions (shapes, q, mounts); one line."""


# ----------------------------------------------------------------------------------------------
# shapes -> primitive rows


def _row_capsule(a, b, r):
    row = np.zeros(PAR)
    row[0:3], row[3:6], row[6] = a, b, r
    row[10:19] = np.eye(3).ravel()
    row[22:25] = (np.asarray(a) + np.asarray(b)) / 2
    row[25] = np.linalg.norm(np.asarray(b) - np.asarray(a)) / 2 + r
    return row


def _row_box(pose, half, row=None):
    if row is None:
        row = np.zeros(PAR)
    pose = np.asarray(pose, float)
    row[7:10] = pose[:3, 3]
    row[10:19] = pose[:3, :3].ravel()
    row[19:22] = half
    return row


def shape_rows(shape) -> tuple[int, np.ndarray]:
    """(type code, (PAR,) row) of one :class:`workbench.arm.shapes.Shape` in its body frame."""
    k = shape.kind
    if k in ("capsule", "sphere"):
        return CAPSULE, _row_capsule(shape.a, shape.b if k == "capsule" else shape.a, shape.radius)
    if k == "box":
        row = _row_box(shape.pose, np.asarray(shape.size) / 2)
        row[22:25] = row[7:10]
        row[25] = float(np.linalg.norm(row[19:22]))
        return BOX, row
    if k == "cylinder":
        P = np.asarray(shape.pose, float)
        z = P[:3, 2] * shape.length / 2
        row = _row_capsule(P[:3, 3] - z, P[:3, 3] + z, shape.radius)
        _row_box(P, np.array([shape.radius, shape.radius, shape.length / 2]), row)
        row[22:25] = P[:3, 3]
        row[25] = math.hypot(shape.radius, shape.length / 2)
        return BOTH, row
    if k == "mesh":
        row = _row_capsule(shape.a, shape.b, shape.radius)
        _row_box(shape.pose, np.asarray(shape.size) / 2, row)
        rb = float(np.linalg.norm(row[19:22]))
        if rb < row[25]:
            row[22:25] = row[7:10]
            row[25] = rb
        return BOTH, row
    raise CollisionError(f"shape kind {k!r}: expected capsule, sphere, box, cylinder or mesh")


def obstacle_names(cell) -> list[str]:
    """Readable names of the obstacles checked, in kernel order ("floor", "box 'conveyor'", ...)."""
    return [n for n, _t, _r in _obstacles(cell)]


def _obstacles(cell):
    out = []
    if cell is None:
        items = [("floor", None)]
    elif hasattr(cell, "obstacles"):
        items = cell.obstacles()
    else:
        raise CollisionError(f"cell: expected what workbench.studies.cell.read_cell_file returns, or None; got "
                             f"{type(cell).__name__}")
    for kind, ob in items:
        if kind == "floor":
            out.append(("floor", FLOOR, np.zeros(PAR)))
        elif kind in ("box", "keep_out"):
            T = np.eye(4)
            c, s = math.cos(ob.yaw), math.sin(ob.yaw)
            T[:3, :3] = [[c, -s, 0], [s, c, 0], [0, 0, 1]]
            T[:3, 3] = ob.center
            row = _row_box(T, np.asarray(ob.size, float) / 2)
            row[22:25] = ob.center
            row[25] = float(np.linalg.norm(row[19:22]))
            label = "box" if kind == "box" else "keep-out"
            out.append((f"{label} '{ob.name}'", BOX, row))
        elif kind == "cylinder":
            from ..arm.shapes import cylinder as _cyl

            ax = np.asarray(ob.axis, float)
            T = np.eye(4)
            ref = np.array([1.0, 0, 0]) if abs(ax[0]) < 0.9 else np.array([0, 1.0, 0])
            x = ref - ax * (ref @ ax)
            x /= np.linalg.norm(x)
            T[:3, :3] = np.stack([x, np.cross(ax, x), ax], axis=1)
            T[:3, 3] = ob.center
            _t, row = shape_rows(_cyl(T, ob.radius, ob.height))
            out.append((f"cylinder '{ob.name}'", BOTH, row))
    return out


def obstacle_rows(cell):
    """(types (M,), rows (M, PAR)) of the cell's obstacles in the cell frame."""
    obs = _obstacles(cell)
    t = np.array([o[1] for o in obs], dtype=np.int64)
    r = np.array([o[2] for o in obs], dtype=float).reshape(len(obs), PAR)
    return t, np.ascontiguousarray(r)


def self_pairs(model) -> list[tuple[int, int]]:
    """Body pairs (a < b) checked for self-collision: both have shapes, not chain neighbours, not
    skipped by the arm file. Bodies: 0 base, 1..n links, n + 1 tool."""
    shapes = model.body_shapes()
    skip = {tuple(sorted(p)) for p in getattr(model, "skip_pairs", ())}
    out = []
    for a in range(len(shapes)):
        for b in range(a + 2, len(shapes)):
            if shapes[a] and shapes[b] and (a, b) not in skip:
                out.append((a, b))
    return out


class Geometry:
    """The kernel's arrays for one arm and one cell (built once, cached)."""

    def __init__(self, model, cell, self_collision: bool):
        self.model = model
        self.cell = cell
        body_shapes = model.body_shapes()
        bodies, types, rows = [], [], []
        for b, shapes in enumerate(body_shapes):
            for s in shapes:
                t, r = shape_rows(s)
                bodies.append(b)
                types.append(t)
                rows.append(r)
        self.body = np.array(bodies, dtype=np.int64)
        self.atype = np.array(types, dtype=np.int64)
        self.local = np.ascontiguousarray(np.array(rows, float).reshape(len(rows), PAR))
        obs = _obstacles(cell)
        self.otype = np.array([o[1] for o in obs], dtype=np.int64)
        self.opar = np.ascontiguousarray(np.array([o[2] for o in obs], float).reshape(len(obs), PAR))
        names = model.body_names()
        self.names: list[tuple[str, str]] = []
        prim_pairs, pair_of = [], []
        n1 = model.n + 1
        for bi in range(1, n1 + 1):            # moving bodies vs obstacles
            ks = np.flatnonzero(self.body == bi)
            if len(ks) == 0:
                continue
            for j, (oname, _t, _r) in enumerate(obs):
                self.names.append((names[bi], oname))
                for k in ks:
                    prim_pairs.append((k, j))
                    pair_of.append(len(self.names) - 1)
        if self_collision:
            for a, b in self_pairs(model):
                self.names.append((names[a], names[b]))
                for ka in np.flatnonzero(self.body == a):
                    for kb in np.flatnonzero(self.body == b):
                        prim_pairs.append((ka, -1 - kb))
                        pair_of.append(len(self.names) - 1)
        self.pairs = np.array(prim_pairs, dtype=np.int64).reshape(len(prim_pairs), 2)
        self.pair_of = np.array(pair_of, dtype=np.int64)
        self.origins = np.ascontiguousarray(model.origins)
        self.axes = np.ascontiguousarray(model.axes)
        self.kinds = np.ascontiguousarray(model.kinds)
        self.end = np.ascontiguousarray(np.asarray(model.end, float))


_CACHE: dict = {}


def geometry(arm, cell=None, self_collision: bool = True) -> Geometry:
    """The (cached) :class:`Geometry` of an arm (Arm or ArmModel) and a cell."""
    model = getattr(arm, "model", arm)
    if not hasattr(model, "body_shapes"):
        raise CollisionError(f"arm: expected a workbench Arm or ArmModel, got {type(arm).__name__}")
    key = (id(model), id(cell), bool(self_collision))
    hit = _CACHE.get(key)
    if hit is not None and hit.model is model and hit.cell is cell:
        return hit
    g = Geometry(model, cell, bool(self_collision))
    if len(_CACHE) > 32:
        _CACHE.clear()
    _CACHE[key] = g
    return g


def _inputs(g: Geometry, q, mounts):
    n = g.model.n
    try:
        q = np.asarray(q, dtype=float)
    except (TypeError, ValueError):
        raise CollisionError(f"q: expected joint values shaped (..., {n}) (rad / m), got values that are not "
                             f"numbers") from None
    if q.ndim == 0 or q.shape[-1] != n:
        raise CollisionError(f"q: expected joint values shaped (..., {n}) for arm {g.model.name!r}, got shape "
                             f"{q.shape}")
    if mounts is None:
        M = np.asarray(g.model.mount, float)
    else:
        try:
            M = np.asarray(mounts, dtype=float)
        except (TypeError, ValueError):
            raise CollisionError("mounts: expected base-in-cell transforms shaped (..., 4, 4)") from None
        if M.ndim < 2 or M.shape[-2:] != (4, 4):
            raise CollisionError(f"mounts: expected base-in-cell transforms shaped (..., 4, 4), got shape {M.shape}")
        if not np.all(np.isfinite(M)):
            raise CollisionError("mounts: a transform holds NaN or infinite values")
    try:
        lead = np.broadcast_shapes(q.shape[:-1], M.shape[:-2])
    except ValueError:
        raise CollisionError(f"mounts: shape {M.shape} does not broadcast against q of shape {q.shape}") from None
    Q = np.ascontiguousarray(np.broadcast_to(q, lead + (n,)).reshape(-1, n))
    if M.ndim == 2:
        pre = np.ascontiguousarray(M[None, :3, :])
    else:
        pre = np.ascontiguousarray(np.broadcast_to(M, lead + (4, 4)).reshape(-1, 4, 4)[:, :3, :])
    return Q, pre, lead


def _run(g: Geometry, q, mounts):
    Q, pre, lead = _inputs(g, q, mounts)
    N = Q.shape[0]
    d = np.empty(N)
    ki = np.empty(N, dtype=np.int64)
    kj = np.empty(N, dtype=np.int64)
    if N:
        _k.clearance_batch(Q, g.origins, g.axes, g.kinds, g.end, pre, g.body, g.atype, g.local, g.otype, g.opar,
                           g.pairs, d, ki, kj)
    pair = np.where(ki >= 0, g.pair_of[np.maximum(ki, 0)] if len(g.pair_of) else -1, -1)
    return d.reshape(lead), pair.reshape(lead)


def clearance(arm, q, cell=None, self_collision: bool = True, mounts=None) -> np.ndarray:
    """Signed clearance (m) of the arm at poses ``q`` (..., n): the smallest distance between its
    links and tool and the cell's obstacles and, with ``self_collision``, between non-neighbour
    bodies of the arm. Negative = overlap; +inf when nothing is checked (no shapes); NaN where q
    holds NaN.

    Parameters
    ----------
    arm : Arm or ArmModel
    q : (..., n) array_like
        Joint values, rad / m.
    cell : Cell, optional
        From :func:`workbench.studies.cell.read_cell_file`; None: the floor only.
    self_collision : bool
        Also check the arm's own bodies against each other.
    mounts : (..., 4, 4) array_like, optional
        Base-in-cell transforms broadcast against q's leading shape; default the model's mount.

    Returns
    -------
    (...,) ndarray of float, metres.
    """
    g = geometry(arm, cell, self_collision)
    return _run(g, q, mounts)[0]


def nearest(arm, q, cell=None, self_collision: bool = True, mounts=None):
    """Like :func:`clearance`, plus the nearest pair per pose.

    Returns
    -------
    d : (...,) ndarray, m
    pair : (...,) int ndarray
        Index into ``pair_names(arm, cell, self_collision)`` (-1 where nothing was checked or q is NaN).
    """
    g = geometry(arm, cell, self_collision)
    return _run(g, q, mounts)


def pair_names(arm, cell=None, self_collision: bool = True) -> list[tuple[str, str]]:
    """Readable names of the checked pairs, indexed as :func:`nearest`'s ``pair``:
    ("link 3", "box 'conveyor'"), ("tool", "floor"), ("link 2", "link 5"), ..."""
    return list(geometry(arm, cell, self_collision).names)


def pair_distances(arm, q, cell=None, self_collision: bool = True, mounts=None) -> np.ndarray:
    """Signed distance of every named pair (..., len(pair_names)) (no pair skipped; slower)."""
    g = geometry(arm, cell, self_collision)
    Q, pre, lead = _inputs(g, q, mounts)
    P = len(g.names)
    out = np.full((Q.shape[0], P), np.inf)
    if Q.shape[0] and len(g.pairs):
        prim = np.empty((Q.shape[0], len(g.pairs)))
        _k.pairs_batch(Q, g.origins, g.axes, g.kinds, g.end, pre, g.body, g.atype, g.local, g.otype, g.opar,
                       g.pairs, prim)
        for m in range(len(g.pairs)):
            out[:, g.pair_of[m]] = np.minimum(out[:, g.pair_of[m]], prim[:, m])
    bad = ~np.all(np.isfinite(Q), axis=1)
    out[bad] = np.nan
    return out.reshape(lead + (P,))


def base_clearance(arm, cell, mount) -> np.ndarray:
    """Signed distance (m) between the base's own shapes placed at ``mount`` (..., 4, 4) and the
    cell's obstacles other than the floor (boxes that collide, cylinders, keep-out zones);
    +inf when the base has no shapes or the cell no such obstacles."""
    model = getattr(arm, "model", arm)
    M = np.asarray(mount, float)
    if M.ndim < 2 or M.shape[-2:] != (4, 4):
        raise CollisionError(f"mount: expected base-in-cell transforms shaped (..., 4, 4), got shape {M.shape}")
    lead = M.shape[:-2]
    shapes = list(getattr(model, "base_shapes", ()))
    obs = [o for o in _obstacles(cell) if o[1] != FLOOR]
    if not shapes or not obs:
        return np.full(lead, np.inf)
    rows = [shape_rows(s) for s in shapes]
    Mf = M.reshape(-1, 4, 4)
    out = np.full(len(Mf), np.inf)
    ot = np.array([o[1] for o in obs], dtype=np.int64)
    orow = np.array([o[2] for o in obs], float)
    for t, r in rows:
        W = np.repeat(r[None], len(Mf), axis=0)
        for off in (0, 3, 7, 22):
            W[:, off:off + 3] = np.einsum("nij,j->ni", Mf[:, :3, :3], r[off:off + 3]) + Mf[:, :3, 3]
        W[:, 10:19] = (Mf[:, :3, :3] @ r[10:19].reshape(3, 3)).reshape(-1, 9)
        for j in range(len(obs)):
            B = np.ascontiguousarray(np.repeat(orow[j][None], len(Mf), axis=0))
            dd = _k.distance_rows(np.ascontiguousarray(W), np.full(len(Mf), t, np.int64), B,
                                  np.full(len(Mf), ot[j], np.int64))
            out = np.minimum(out, dd)
    return out.reshape(lead)


def warm_up() -> None:
    """Compile (or load from numba's cache) the kernels on a tiny problem."""
    from ..arm.model import ArmModel, Joint
    from ..arm.shapes import box, capsule

    T = np.eye(4)
    T[2, 3] = 0.5
    j1 = Joint("a", "revolute", np.eye(4), np.array([0, 0, 1.0]), shapes=(capsule([0, 0, 0], [0, 0, 0.5], 0.05),))
    j2 = Joint("b", "revolute", T, np.array([0, 1.0, 0]), shapes=(box(np.eye(4), [0.1, 0.1, 0.1]),))
    m = ArmModel("warm", (j1, j2), tool_shapes=(capsule([0, 0, 0], [0, 0, 0.1], 0.02),),
                 base_shapes=(capsule([0, 0, 0], [0, 0, 0.1], 0.1),))
    q = np.zeros((2, 2))
    nearest(m, q)
    pair_distances(m, q)
    base_clearance(m, None, np.eye(4))
