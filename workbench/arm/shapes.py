"""Collision shapes of an arm's links (pure data, SI units, in the frame of the body carrying them).

Kinds
-----
``capsule``  the points within ``radius`` of the segment ``a``-``b``
``sphere``   a capsule with ``a == b``
``box``      ``pose`` (4, 4) centre and axes, full edge lengths ``size`` (3,)
``cylinder`` ``pose`` (4, 4): centre and axis (the pose's z axis), ``radius``, ``length``
``mesh``     a mesh (URDF ``<mesh>``) stood in for by a conservative enclosure of its convex hull:
             the intersection of a capsule (``a``, ``b``, ``radius``) and an oriented box
             (``pose``, ``size``), both containing every vertex; ``mesh`` names the file and
             ``volume_ratio`` is the enclosure's volume over the hull's.

Bodies: 0 is the arm base (fixed in the base frame), 1..n the link moved by joint 1..n (in that
joint's frame), n + 1 the tool (in the flange frame).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .model import ArmError

__all__ = ["Shape", "capsule", "sphere", "box", "cylinder", "SHAPE_KINDS", "check_shape", "MAX_SHAPES"]

SHAPE_KINDS = ("capsule", "sphere", "box", "cylinder", "mesh")
MAX_SHAPES = 256          # per body; an arm description, not a scene
_MAX_SIZE = 1e3           # m: any larger shape is a unit mistake


@dataclass(frozen=True, eq=False)
class Shape:
    """One collision shape (SI units, body frame); build with :func:`capsule`, :func:`sphere`,
    :func:`box`, :func:`cylinder`."""

    kind: str
    a: np.ndarray = field(default_factory=lambda: np.zeros(3))
    b: np.ndarray = field(default_factory=lambda: np.zeros(3))
    radius: float = 0.0
    pose: np.ndarray = field(default_factory=lambda: np.eye(4))
    size: np.ndarray = field(default_factory=lambda: np.zeros(3))
    length: float = 0.0
    mesh: str = ""
    volume_ratio: float = 1.0
    name: str = ""
    mesh_scale: tuple = (1.0, 1.0, 1.0)
    mesh_origin: np.ndarray = field(default_factory=lambda: np.eye(4))

    @property
    def center(self) -> np.ndarray:
        if self.kind in ("capsule", "sphere"):
            return (np.asarray(self.a) + np.asarray(self.b)) / 2
        return np.asarray(self.pose)[:3, 3]

    def transformed(self, T) -> "Shape":
        """The same shape in another frame: ``T`` (4, 4) maps this frame to the new one."""
        T = np.asarray(T, float)
        pa = (T @ np.append(self.a, 1.0))[:3]
        pb = (T @ np.append(self.b, 1.0))[:3]
        return Shape(self.kind, pa, pb, self.radius, T @ self.pose, self.size.copy(), self.length, self.mesh,
                     self.volume_ratio, self.name, self.mesh_scale, T @ self.mesh_origin)

    def same(self, other: "Shape", atol: float = 1e-9) -> bool:
        return (self.kind == other.kind and self.mesh == other.mesh
                and abs(self.radius - other.radius) <= atol and abs(self.length - other.length) <= atol
                and self._same_placement(other, atol)
                and np.allclose(self.size, other.size, atol=atol, rtol=0))

    def _same_placement(self, other: "Shape", atol: float) -> bool:
        # a cylinder is symmetric about its axis (local z) and a sphere or capsule has no pose of
        # its own beyond its points: a turn about that axis is the same shape
        if self.kind in ("sphere", "capsule"):
            R, t, R2, t2 = self.pose[:3, :3], self.pose[:3, 3], other.pose[:3, :3], other.pose[:3, 3]
            return bool(np.allclose(R @ self.a + t, R2 @ other.a + t2, atol=atol, rtol=0)
                        and np.allclose(R @ self.b + t, R2 @ other.b + t2, atol=atol, rtol=0))
        if not np.allclose(self.pose[:3, 3], other.pose[:3, 3], atol=atol, rtol=0):
            return False
        if self.kind == "cylinder":
            return bool(np.allclose(self.pose[:3, 2], other.pose[:3, 2], atol=atol, rtol=0)
                        or np.allclose(self.pose[:3, 2], -other.pose[:3, 2], atol=atol, rtol=0))
        return bool(np.allclose(self.pose, other.pose, atol=atol, rtol=0))

    def describe(self) -> str:
        """Short words with sizes in mm, e.g. 'capsule r 60 mm, 450 mm long'."""
        if self.kind == "capsule":
            return f"capsule r {self.radius * 1e3:.0f} mm, {np.linalg.norm(self.b - self.a) * 1e3:.0f} mm long"
        if self.kind == "sphere":
            return f"sphere r {self.radius * 1e3:.0f} mm"
        if self.kind == "box":
            return "box " + " x ".join(f"{s * 1e3:.0f}" for s in self.size) + " mm"
        if self.kind == "cylinder":
            return f"cylinder r {self.radius * 1e3:.0f} mm, {self.length * 1e3:.0f} mm long"
        import os

        return (f"mesh {self.name or os.path.basename(self.mesh)} (checked as a capsule and a box around its "
                f"convex hull, at most {self.volume_ratio:.2f}x the hull's volume)")


def check_shape(s: Shape, where: str) -> Shape:
    """Refuse degenerate shapes with one line naming ``where``."""
    def bad(msg):
        raise ArmError(f"{where}: {msg}")

    arrays = (s.a, s.b, s.pose, s.size)
    if not all(np.all(np.isfinite(np.asarray(x, float))) for x in arrays) or not (
            math.isfinite(s.radius) and math.isfinite(s.length)):
        bad("a shape value is not a finite number (NaN or infinite)")
    if s.kind not in SHAPE_KINDS:
        bad(f"unknown shape kind {s.kind!r}; expected one of {', '.join(SHAPE_KINDS[:4])}")
    if s.kind in ("capsule", "sphere", "cylinder", "mesh") and not s.radius > 0:
        bad(f"radius must be > 0, got {s.radius:g} m")
    if s.kind in ("box", "mesh") and not np.all(np.asarray(s.size) > 0):
        bad(f"every box size must be > 0, got {[float(x) for x in s.size]} m")
    if s.kind == "cylinder" and not s.length > 0:
        bad(f"cylinder length must be > 0, got {s.length:g} m")
    big = max(s.radius, s.length, float(np.max(np.abs(s.size))), float(np.max(np.abs(s.a))),
              float(np.max(np.abs(s.b))), float(np.max(np.abs(np.asarray(s.pose)[:3, 3]))))
    if big > _MAX_SIZE:
        bad(f"a shape dimension of {big:g} m; shapes are below {_MAX_SIZE:g} m (a unit mistake?)")
    R = np.asarray(s.pose, float)[:3, :3]
    if np.abs(R.T @ R - np.eye(3)).max() > 1e-6:
        bad("the shape's rotation is not orthonormal")
    return s


def capsule(a, b, radius, name: str = "") -> Shape:
    return Shape("capsule", np.asarray(a, float).reshape(3).copy(), np.asarray(b, float).reshape(3).copy(),
                 float(radius), name=name)


def sphere(center, radius, name: str = "") -> Shape:
    c = np.asarray(center, float).reshape(3).copy()
    return Shape("sphere", c, c.copy(), float(radius), name=name)


def box(pose, size, name: str = "") -> Shape:
    return Shape("box", pose=np.asarray(pose, float).reshape(4, 4).copy(), size=np.asarray(size, float).reshape(3).copy(),
                 name=name)


def cylinder(pose, radius, length, name: str = "") -> Shape:
    return Shape("cylinder", pose=np.asarray(pose, float).reshape(4, 4).copy(), radius=float(radius),
                 length=float(length), name=name)
