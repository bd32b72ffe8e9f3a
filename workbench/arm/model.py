"""The arm model: pure data (joints, fixed transforms, limits, masses), no kinematics.

Internal units are SI: metres, radians, seconds, newtons, kilograms.

Chain convention
----------------
Every joint ``i`` has a fixed ``origin`` transform from the previous joint frame (or from the
arm's base frame for the first joint) to its own frame at zero joint value, and a unit ``axis``
expressed in its own frame. The joint's motion is a rotation about (revolute) or a translation
along (prismatic) that axis, so that::

    T_i(q) = T_{i-1}(q) @ origin_i @ motion_i(q_i)          T_{-1} = I (the arm base)
    flange = T_{n-1}(q) @ end
    tcp    = flange @ tool
    world  = mount @ (any of the above)

The frame after joint ``i``'s motion is "joint frame i"; the link moved by joint ``i`` is rigidly
attached to it (its centre of mass ``com`` is given in that frame). Standard DH, modified DH and
general origin/axis descriptions are all turned into this one chain by :mod:`workbench.arm.files`.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from ..errors import WorkbenchError

__all__ = ["Joint", "ArmModel", "axis_chain_length", "REVOLUTE", "PRISMATIC", "ArmError"]

REVOLUTE = "revolute"
PRISMATIC = "prismatic"
_KIND_CODE = {REVOLUTE: 0, PRISMATIC: 1}


class ArmError(WorkbenchError):
    """A bad arm description: the message names what is wrong and where."""


@dataclass(frozen=True, eq=False)
class Joint:
    """One joint of a serial chain (SI units).

    Parameters
    ----------
    name : str
        Unique joint name.
    kind : {"revolute", "prismatic"}
    origin : (4, 4) ndarray
        Fixed transform from the previous joint frame (or the base) to this joint's frame at q = 0.
    axis : (3,) ndarray
        Unit joint axis in this joint's frame.
    lower, upper : float
        Limits in rad (revolute) or m (prismatic); ``-inf``/``inf`` when unlimited.
    max_speed : float or None
        Largest joint speed, rad/s or m/s.
    max_effort : float or None
        Largest joint torque (N m) or force (N).
    mass : float or None
        Mass (kg) of the link moved by this joint.
    com : (3,) ndarray or None
        Centre of mass of that link in this joint's frame (m).
    max_acceleration : float or None
        Largest joint acceleration, rad/s^2 or m/s^2 (cycle-time estimates).
    shapes : tuple of workbench.arm.shapes.Shape
        Collision shapes of that link in this joint's frame (m); empty when none are given.
    """

    name: str
    kind: str
    origin: np.ndarray
    axis: np.ndarray
    lower: float = -np.inf
    upper: float = np.inf
    max_speed: float | None = None
    max_effort: float | None = None
    mass: float | None = None
    com: np.ndarray | None = None
    max_acceleration: float | None = None
    shapes: tuple = ()

    @property
    def revolute(self) -> bool:
        return self.kind == REVOLUTE


@dataclass(frozen=True, eq=False)
class ArmModel:
    """A serial arm: joints plus fixed end (flange), tool (TCP) and mount transforms.

    ``source`` keeps the parsed arm-file content (file units) so the file can be written back
    losslessly; it is ``None`` for arms built in code.
    """

    name: str
    joints: tuple[Joint, ...]
    end: np.ndarray = field(default_factory=lambda: np.eye(4))
    tool: np.ndarray = field(default_factory=lambda: np.eye(4))
    mount: np.ndarray = field(default_factory=lambda: np.eye(4))
    home: np.ndarray | None = None
    description: str = ""
    tool_mass: float = 0.0
    tool_com: np.ndarray = field(default_factory=lambda: np.zeros(3))
    source: dict | None = None
    path: str | None = None
    tool_shapes: tuple = ()
    base_shapes: tuple = ()
    skip_pairs: tuple = ()
    stated_length: float | None = None   # characteristic length (m) stated in the arm file

    # collision bodies: 0 the base (base frame), 1..n the link of joint 1..n (its joint frame),
    # n + 1 the tool (flange frame); ``skip_pairs`` holds extra (body, body) pairs not checked
    @property
    def has_shapes(self) -> bool:
        """True when any link or the tool has a collision shape."""
        return bool(self.tool_shapes) or any(j.shapes for j in self.joints)

    def body_shapes(self) -> list:
        """Shapes per body: [base, link 1, ..., link n, tool] (n + 2 tuples)."""
        return [tuple(self.base_shapes)] + [tuple(j.shapes) for j in self.joints] + [tuple(self.tool_shapes)]

    def body_names(self) -> list:
        """Readable body names: 'base', 'link 1', ..., 'link n', 'tool'."""
        return ["base"] + [f"link {k + 1}" for k in range(self.n)] + ["tool"]

    # ---- array views used by the kernels (computed once) -------------------------------
    @property
    def n(self) -> int:
        """Number of joints (degrees of freedom)."""
        return len(self.joints)

    @cached_property
    def names(self) -> tuple[str, ...]:
        return tuple(j.name for j in self.joints)

    @cached_property
    def origins(self) -> np.ndarray:
        """(n, 4, 4) fixed joint origins."""
        return np.ascontiguousarray(np.array([j.origin for j in self.joints], dtype=float).reshape(self.n, 4, 4))

    @cached_property
    def axes(self) -> np.ndarray:
        """(n, 3) unit joint axes, each in its own joint frame."""
        return np.ascontiguousarray(np.array([j.axis for j in self.joints], dtype=float).reshape(self.n, 3))

    @cached_property
    def kinds(self) -> np.ndarray:
        """(n,) int8: 0 revolute, 1 prismatic."""
        return np.array([_KIND_CODE[j.kind] for j in self.joints], dtype=np.int8)

    @cached_property
    def lower(self) -> np.ndarray:
        return np.array([j.lower for j in self.joints], dtype=float)

    @cached_property
    def upper(self) -> np.ndarray:
        return np.array([j.upper for j in self.joints], dtype=float)

    @cached_property
    def max_speed(self) -> np.ndarray:
        """(n,) joint speed limits; NaN where not given."""
        return np.array([np.nan if j.max_speed is None else j.max_speed for j in self.joints], dtype=float)

    @cached_property
    def max_acceleration(self) -> np.ndarray:
        """(n,) joint acceleration limits; NaN where not given."""
        return np.array([np.nan if j.max_acceleration is None else j.max_acceleration for j in self.joints],
                        dtype=float)

    @cached_property
    def max_effort(self) -> np.ndarray:
        """(n,) joint torque/force limits; NaN where not given."""
        return np.array([np.nan if j.max_effort is None else j.max_effort for j in self.joints], dtype=float)

    @cached_property
    def masses(self) -> np.ndarray:
        """(n,) link masses; NaN where not given."""
        return np.array([np.nan if j.mass is None else j.mass for j in self.joints], dtype=float)

    @cached_property
    def coms(self) -> np.ndarray:
        """(n, 3) link centres of mass in their joint frames; zeros where not given."""
        return np.array([np.zeros(3) if j.com is None else j.com for j in self.joints], dtype=float).reshape(self.n, 3)

    @cached_property
    def home_q(self) -> np.ndarray:
        """(n,) home pose (zeros clipped into the limits when the file gives none)."""
        if self.home is not None:
            return np.asarray(self.home, dtype=float)
        return np.clip(np.zeros(self.n), self.lower, self.upper)

    @property
    def has_masses(self) -> bool:
        return bool(np.all(np.isfinite(self.masses)))

    @cached_property
    def tcp_offset(self) -> np.ndarray:
        """(4, 4) fixed transform from the last joint frame to the TCP (end @ tool)."""
        return self.end @ self.tool

    def joint_index(self, name_or_index) -> int:
        """0-based joint index from a joint name or a 0-based integer."""
        if isinstance(name_or_index, (int, np.integer)):
            k = int(name_or_index)
            if not 0 <= k < self.n:
                raise ArmError(f"joint index {k} is out of range: this arm has joints 0..{self.n - 1}")
            return k
        try:
            return self.names.index(str(name_or_index))
        except ValueError:
            raise ArmError(f"no joint named {name_or_index!r}: joints are {', '.join(self.names)}") from None

    @cached_property
    def axis_chain_length(self) -> float:
        """The arm's own characteristic length (m), from its joint axes as lines; see
        :func:`axis_chain_length`."""
        return axis_chain_length(self)

    @property
    def characteristic_length(self) -> float:
        """The characteristic length (m) that divides translational rows of mixed measures: the
        value stated in the arm file (``characteristic_length``) or else :attr:`axis_chain_length`."""
        return float(self.stated_length) if self.stated_length is not None else self.axis_chain_length

    def limit_span(self) -> np.ndarray:
        """(n,) upper - lower (inf for unlimited joints)."""
        return self.upper - self.lower


# ---------------------------------------------------------------------------------------------
# the characteristic length from the joint axes

_PARALLEL_SIN = 1e-7     # |u x v| below this: the two axes are parallel


def _feet(p, u, r, v):
    """Feet of the common perpendicular of the lines p + s u and r + t v (unit u, v, not
    parallel): the closest points on each."""
    w = p - r
    b, d, e = float(u @ v), float(u @ w), float(v @ w)
    den = 1.0 - b * b
    s = (b * e - d) / den
    t = (e - b * d) / den
    return p + s * u, r + t * v


def _project(x, r, v):
    """The point of the line r + t v nearest to x."""
    return r + float((x - r) @ v) * v


def axis_chain_length(model: "ArmModel") -> float:
    """Characteristic length (m) of an arm from its kinematics only, the same however the arm file
    places the joint frames along (or around) the joint axes.

    The revolute joint axes at q = 0 are taken as lines in space. A polyline runs from a point x1 on
    the first axis to the TCP: along each axis from where it arrived to the foot of the common
    perpendicular with the next axis, then along that perpendicular to the next axis (for parallel
    neighbours: straight across, without moving along the axis); along the last axis to the foot of
    the TCP's perpendicular, then to the TCP. x1 is the foot on the first axis of the common
    perpendicular with the first later axis not parallel to it (if all are parallel: the TCP's
    projection on the first axis). The length is the polyline's length plus, for each prismatic
    joint with finite limits, its largest travel max(|lower|, |upper|).

    Each piece of the polyline is rigid in one link (the common perpendicular of two consecutive
    revolute axes does not change with the joint values), so for arms without prismatic joints
    the TCP never gets further than this length from x1: it is the arm's reach measured from its
    first axis, with the base height excluded. The result depends only on the lines and the TCP,
    not on where the file puts its frames, so standard DH, modified DH, origins and URDF forms of
    one arm agree (to rounding). Returns 1.0 for an arm where everything is zero.
    """
    T = np.eye(4)
    lines = []
    travel = 0.0
    for j in model.joints:
        T = T @ np.asarray(j.origin, float)
        u = T[:3, :3] @ np.asarray(j.axis, float)
        u = u / np.linalg.norm(u)
        if j.kind == REVOLUTE:
            lines.append((T[:3, 3].copy(), u))
        elif np.isfinite(j.lower) and np.isfinite(j.upper):
            travel += max(abs(j.lower), abs(j.upper))
    P = (T @ np.asarray(model.end, float) @ np.asarray(model.tool, float))[:3, 3]
    if not lines:
        total = travel
        return float(total) if total > 0 else 1.0

    def parallel(a, b):
        return float(np.linalg.norm(np.cross(a[1], b[1]))) < _PARALLEL_SIN

    x = None
    for k in range(1, len(lines)):
        if not parallel(lines[0], lines[k]):
            x = _feet(*lines[0], *lines[k])[0]
            break
    if x is None:
        x = _project(P, *lines[0])
    total = 0.0
    for a, b in zip(lines[:-1], lines[1:]):
        if parallel(a, b):
            f, g = x, _project(x, *b)
        else:
            f, g = _feet(*a, *b)
        total += float(np.linalg.norm(f - x) + np.linalg.norm(g - f))
        x = g
    h = _project(P, *lines[-1])
    total += float(np.linalg.norm(h - x) + np.linalg.norm(P - h)) + travel
    return float(total) if total > 0 else 1.0
