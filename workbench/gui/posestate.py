"""The arm at the current pose: joint values, task rows, frame, characteristic length and what
the panel and the scene show for them (pure Python + numpy, no Qt).

Angles are kept in radians inside; the panel converts to degrees at its edge.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from ..kinematics.rows import parse_rows
from ..measures import NEAR_SINGULAR, pose_measures

__all__ = ["PoseState", "PoseInfo", "sphere_mesh", "ellipsoid_points", "singularity_note",
           "ROW_CHOICES", "DEFAULT_THRESHOLD"]

ROW_CHOICES = ("full", "translation", "rotation", "planar")
# near-singular when the inverse condition 1/k of the chosen rows falls below this (a setting of
# the panel); the one default of the whole product, shared with the studies and the notes
DEFAULT_THRESHOLD = NEAR_SINGULAR
# the velocity ellipsoid is drawn for joint speeds on the unit ball times this time (s), so a
# singular value of 1 m/s per rad/s becomes a 0.2 m half-axis on screen
ELLIPSOID_DRAW_SCALE = 0.2


@dataclass
class PoseInfo:
    """Everything drawn and shown for one pose (world frame, SI units)."""

    q: np.ndarray                      # (n,) rad / m
    points: np.ndarray                 # (n + 2, 3) base, joint origins, TCP: the link polyline
    joint_axes: np.ndarray             # (n, 3) unit joint axes in world
    tcp: np.ndarray                    # (4, 4) TCP pose in world
    measures: dict                     # manipulability, condition, inverse_condition, min_sv, sv
    ellipsoid_axes: np.ndarray         # (3, 3) columns: half-axes s_i u_i (m/s per rad/s)
    near_singular: bool
    note: str = ""
    in_limits: bool = True
    limit_margin: float = 1.0


def sphere_mesh(rings: int = 12, sectors: int = 18):
    """Unit sphere as a triangle mesh: vertices (V, 3), faces (F, 3) int."""
    th = np.linspace(0, np.pi, rings + 1)
    ph = np.linspace(0, 2 * np.pi, sectors, endpoint=False)
    T, P = np.meshgrid(th, ph, indexing="ij")
    v = np.stack([np.sin(T) * np.cos(P), np.sin(T) * np.sin(P), np.cos(T)], -1).reshape(-1, 3)
    faces = []
    for i in range(rings):
        for j in range(sectors):
            a = i * sectors + j
            b = i * sectors + (j + 1) % sectors
            c = (i + 1) * sectors + j
            d = (i + 1) * sectors + (j + 1) % sectors
            faces.append((a, b, d))
            faces.append((a, d, c))
    return v, np.asarray(faces, dtype=np.int32)


def ellipsoid_points(axes, centre, unit_points, scale=ELLIPSOID_DRAW_SCALE):
    """Map unit-sphere points (V, 3) onto the ellipsoid with half-axes ``axes`` (3, 3) columns,
    scaled by ``scale`` and moved to ``centre`` (3,) -> (V, 3)."""
    return np.asarray(centre)[None, :] + scale * unit_points @ np.asarray(axes).T


def singularity_note(arm, q, frame, rows, length, inverse_condition, threshold) -> str:
    """Plain-words note for a near-singular pose ('' when not near singular).

    Uses :func:`workbench.measures.explain_singularity` when the measures module offers it.
    """
    if not (inverse_condition < threshold):
        return ""
    from .. import measures as M

    explain = getattr(M, "explain_singularity", None)
    if explain is not None:
        try:
            text = explain(arm, q, frame=frame, rows=rows, length=length, threshold=threshold, world=True)
        except TypeError:  # an older signature
            text = explain(arm, q, frame=frame, rows=rows, length=length)
        if isinstance(text, dict):
            text = text.get("text") or text.get("note") or "; ".join(str(v) for v in text.values())
        elif isinstance(text, (list, tuple)):
            text = "; ".join(str(t) for t in text)
        return str(text)
    # without the measures module's explanation: name the lost direction from the SVD
    J = arm.jacobian(q, frame=frame, world=True)
    r = list(parse_rows(rows))
    U, S, Vt = np.linalg.svd(J[r], full_matrices=True)
    u = U[:, -1]
    names = ("vx", "vy", "vz", "wx", "wy", "wz")
    main = ", ".join(f"{names[r[i]]} {u[i]:+.2f}" for i in np.argsort(-np.abs(u))[:3] if abs(u[i]) > 0.2)
    v = Vt[-1]
    joints = [arm.names[i] for i in np.argsort(-np.abs(v))[:3] if abs(v[i]) > 0.3]
    return (f"Near a singularity (1/k = {inverse_condition:.3f}): the tool can hardly move along "
            f"[{main}]; the joint motion of {', '.join(joints)} moves almost nothing.")


class PoseState:
    """The arm, its current pose and the measure settings; listeners hear every change.

    Parameters
    ----------
    arm : workbench.kinematics.Arm
    """

    def __init__(self, arm):
        self._listeners: list[Callable] = []
        self.frame = "tcp"
        self.rows = "full"
        self.length = None          # m; None = the arm's nominal reach
        self.threshold = DEFAULT_THRESHOLD
        self.set_arm(arm, notify=False)

    # ---- settings ------------------------------------------------------------------------
    def set_arm(self, arm, notify=True):
        self.arm = arm
        self.q = np.asarray(arm.home_q, dtype=float).copy()
        self.length = None
        self.frame = "tcp"
        self._info = None
        if notify:
            self._emit("arm")

    @property
    def char_length(self) -> float:
        return float(self.length) if self.length else float(self.arm.nominal_reach())

    def set_q(self, q):
        q = np.asarray(q, dtype=float).reshape(self.arm.n)
        self.q = q.copy()
        self._info = None
        self._emit("q")

    def set_joint(self, k: int, value: float):
        q = self.q.copy()
        q[int(k)] = float(value)
        self.set_q(q)

    def set_rows(self, rows):
        parse_rows(rows)  # raises a one-line WorkbenchError when bad
        self.rows = rows
        self._info = None
        self._emit("settings")

    def set_frame(self, frame):
        self.arm.resolve_frame(frame)
        self.frame = frame
        self._info = None
        self._emit("settings")

    def set_length(self, length):
        if length is not None and not (np.isfinite(length) and length > 0):
            from ..kinematics.rows import RowsError
            raise RowsError(f"characteristic length: expected a positive number of metres, got {length!r}")
        self.length = length
        self._info = None
        self._emit("settings")

    def set_threshold(self, t):
        self.threshold = float(t)
        self._info = None
        self._emit("settings")

    # ---- derived -------------------------------------------------------------------------
    def info(self) -> PoseInfo:
        if self._info is None:
            self._info = self.compute(self.q)
        return self._info

    def compute(self, q) -> PoseInfo:
        arm = self.arm
        q = np.asarray(q, dtype=float)
        F = arm.frames(q, world=True)                      # (n, 4, 4)
        tcp = arm.fk(q, frame=self.frame, world=True)
        flange = arm.fk(q, frame="tcp", world=True)
        pts = np.vstack([arm.model.mount[:3, 3], F[:, :3, 3], flange[:3, 3]])
        ax = np.einsum("nij,nj->ni", F[:, :3, :3], arm.model.axes)
        m = pose_measures(arm, q, frame=self.frame, rows=self.rows, length=self.char_length, world=True)
        m = {k: (float(v) if np.ndim(v) == 0 else np.asarray(v)) for k, v in m.items()}
        J = arm.jacobian(q, frame=self.frame, world=True)
        U, S, _ = np.linalg.svd(J[:3])
        axes = U[:, :3] * np.concatenate([S, np.zeros(3 - S.size)])[None, :3]
        near = m["inverse_condition"] < self.threshold
        note = singularity_note(arm, q, self.frame, self.rows, self.char_length,
                                m["inverse_condition"], self.threshold) if near else ""
        return PoseInfo(q=q.copy(), points=pts, joint_axes=ax, tcp=tcp, measures=m,
                        ellipsoid_axes=axes, near_singular=bool(near), note=note,
                        in_limits=bool(arm.in_limits(q)), limit_margin=float(arm.limit_margin(q)))

    def link_points(self, Q, mounts=None) -> np.ndarray:
        """Link polylines for many poses Q (k, n) -> (k, n + 2, 3) world points (ghost arms).

        ``mounts`` (k, 4, 4) places each arm (mount search); default: the arm's own mount.
        """
        arm = self.arm
        Q = np.asarray(Q, dtype=float).reshape(-1, arm.n)
        F = arm.frames(Q, world=False)
        tcp = arm.fk(Q, frame="tcp", world=False)
        base = np.zeros((Q.shape[0], 1, 3))
        pts = np.concatenate([base, F[:, :, :3, 3], tcp[:, None, :3, 3]], axis=1)
        M = np.broadcast_to(arm.model.mount, (Q.shape[0], 4, 4)) if mounts is None else np.asarray(mounts, float)
        return np.einsum("kij,kmj->kmi", M[:, :3, :3], pts) + M[:, None, :3, 3]

    # ---- listeners -----------------------------------------------------------------------
    def subscribe(self, fn):
        self._listeners.append(fn)

    def _emit(self, what):
        for fn in list(self._listeners):
            fn(what)
