"""`Arm`: the kinematic face of an :class:`~workbench.arm.model.ArmModel`.

``fk``, ``jacobian`` and ``singular_values`` take joint values shaped (..., n) (rad / m) and run the
compiled batch kernels; one pose is a batch of one. Jacobians, singular values and measures use
the structure-of-arrays kernels of :mod:`workbench.kinematics.lanes` for chains of up to
``lanes.MAX_JOINTS`` joints and the per-pose kernels of :mod:`workbench.kinematics.kernels`
otherwise (and for ``fk`` / ``frames``).
"""
from __future__ import annotations

import numpy as np

from ..arm.model import ArmError, ArmModel
from ..arm.transforms import inverse_transform
from . import kernels, lanes
from .reference import numeric_jacobian
from .rows import parse_rows, row_scale

__all__ = ["Arm", "FrameSpec"]


class FrameSpec(tuple):
    """(link index k in -1..n-1, (4, 4) offset from joint frame k)."""


class Arm:
    """A serial arm with batched kinematics.

    Parameters
    ----------
    model : ArmModel
        The arm description (see :mod:`workbench.arm.model`).

    Frames
    ------
    ``frame`` arguments accept ``"tcp"`` (default), ``"flange"``, ``"base"``, a joint name or
    ``"joint:K"`` (1-based) for that joint's frame, ``"com:NAME"`` / ``"com:K"`` for the centre of
    mass of the link moved by that joint. ``point`` (3,) adds a point fixed in the chosen frame.
    Results are in the arm's base frame; ``world=True`` applies the mount transform.
    """

    def __init__(self, model: ArmModel):
        if not isinstance(model, ArmModel):
            raise TypeError(f"Arm expects an ArmModel, got {type(model).__name__}")
        self.model = model
        self._frame_cache: dict = {}

    # delegate plain data (n, names, lower, upper, home_q, ...) to the model
    def __getattr__(self, name):
        if name == "model":
            raise AttributeError(name)
        return getattr(self.model, name)

    def __repr__(self) -> str:
        return f"Arm({self.model.name!r}, n={self.model.n})"

    # ------------------------------------------------------------------------------------------
    def resolve_frame(self, frame="tcp", point=None) -> FrameSpec:
        """Turn a frame name into (link index, offset transform)."""
        key = (frame, None if point is None else tuple(np.asarray(point, float).ravel()))
        hit = self._frame_cache.get(key)
        if hit is not None:
            return hit
        m = self.model
        off = np.eye(4)
        if isinstance(frame, (int, np.integer)):
            k = m.joint_index(int(frame))
        else:
            f = str(frame).strip()
            fl = f.lower()
            if fl == "tcp":
                k, off = m.n - 1, m.tcp_offset.copy()
            elif fl == "flange":
                k, off = m.n - 1, m.end.copy()
            elif fl == "base":
                k = -1
            elif fl.startswith("com:"):
                k = self._joint_ref(f[4:])
                off[:3, 3] = m.coms[k]
            elif fl.startswith("joint:"):
                k = self._joint_ref(f[6:])
            elif f in m.names:
                k = m.names.index(f)
            else:
                raise ArmError(f"frame: unknown frame {frame!r}; expected tcp, flange, base, a joint name "
                               f"({', '.join(m.names)}), joint:K or com:NAME")
        if point is not None:
            pt = np.asarray(point, dtype=float).reshape(-1)
            if pt.shape != (3,) or not np.all(np.isfinite(pt)):
                raise ArmError(f"point: expected 3 finite coordinates in metres, got {point!r}")
            extra = np.eye(4)
            extra[:3, 3] = pt
            off = off @ extra
        spec = FrameSpec((k, np.ascontiguousarray(off)))
        self._frame_cache[key] = spec
        return spec

    def _joint_ref(self, s: str) -> int:
        s = s.strip()
        if s.isdigit():
            k = int(s) - 1
            if not 0 <= k < self.model.n:
                raise ArmError(f"frame: joint number {s} is out of range 1..{self.model.n}")
            return k
        return self.model.joint_index(s)

    def _prep(self, q):
        try:
            q = np.asarray(q, dtype=float)
        except (TypeError, ValueError):
            raise ArmError(f"q: expected numbers shaped (..., {self.model.n}) (rad / m) for arm "
                           f"{self.model.name!r}, got {type(q).__name__} with values that are not numbers") from None
        if q.ndim == 0 or q.shape[-1] != self.model.n:
            raise ArmError(f"q: expected joint values shaped (..., {self.model.n}) for arm "
                           f"{self.model.name!r}, got shape {q.shape}")
        lead = q.shape[:-1]
        Q = np.ascontiguousarray(q.reshape(-1, self.model.n))
        return Q, lead

    def _rot(self, world: bool) -> np.ndarray:
        return np.ascontiguousarray(self.model.mount[:3, :3]) if world else np.eye(3)

    # ------------------------------------------------------------------------------------------
    def fk(self, q, frame="tcp", point=None, world=False):
        """Pose of ``frame`` (..., 4, 4) for joint values q (..., n) (rad / m)."""
        Q, lead = self._prep(q)
        k, off = self.resolve_frame(frame, point)
        pre = self.model.mount if world else np.eye(4)
        out = np.empty((Q.shape[0], 4, 4))
        m = self.model
        kernels.dynamic_schedule()
        kernels.announce_compile("kernels")
        kernels.fk_batch(Q, m.origins, m.axes, m.kinds, k, off, np.ascontiguousarray(pre), out)
        return out.reshape(lead + (4, 4))

    def frames(self, q, world=False):
        """All joint frames (..., n, 4, 4)."""
        Q, lead = self._prep(q)
        m = self.model
        out = np.empty((Q.shape[0], m.n, 4, 4))
        pre = self.model.mount if world else np.eye(4)
        kernels.dynamic_schedule()
        kernels.announce_compile("kernels")
        kernels.frames_batch(Q, m.origins, m.axes, m.kinds, np.ascontiguousarray(pre), out)
        return out.reshape(lead + (m.n, 4, 4))

    def jacobian(self, q, frame="tcp", point=None, world=False):
        """Geometric Jacobian (..., 6, n), rows [vx vy vz wx wy wz], of the frame's origin.

        Columns of joints after the frame's link are zero.
        """
        Q, lead = self._prep(q)
        k, off = self.resolve_frame(frame, point)
        m = self.model
        out = np.empty((Q.shape[0], 6, m.n))
        kernels.dynamic_schedule()
        if lanes.covers(m.n):
            G, kinds, A = self._lane_chain()
            kernels.announce_compile("lanes")
            lanes.jacobian_lanes(Q, G, kinds, k, lanes.canonical_offset(A, k, off), self._rot(world), out)
        else:
            kernels.announce_compile("kernels")
            kernels.jacobian_batch(Q, m.origins, m.axes, m.kinds, k, off, self._rot(world), out)
        return out.reshape(lead + (6, m.n))

    def _lane_chain(self):
        """(G, kinds, A) of :func:`workbench.kinematics.lanes.canonical_chain`, made once per arm."""
        hit = self.__dict__.get("_lanes_chain")
        if hit is None:
            hit = lanes.canonical_chain(self.model)
            self.__dict__["_lanes_chain"] = hit
        return hit

    def numeric_jacobian(self, q, frame="tcp", point=None, world=False, h=1e-6):
        """Central-difference Jacobian (..., 6, n), for cross-checks."""
        return numeric_jacobian(lambda x: self.fk(x, frame=frame, point=point, world=world), q, h=h)

    def singular_values(self, q, frame="tcp", rows="full", length=None, point=None, world=False):
        """Fused FK -> Jacobian -> singular values (..., m) of the selected, scaled rows, descending.

        ``length`` is the characteristic length (m) dividing translational rows when the selection
        mixes translation and rotation; default: the arm's characteristic length.
        """
        return self._sv_map(q, frame, rows, length, point, world, False)

    def pose_measures(self, q, frame="tcp", rows="full", length=None, point=None, world=False) -> dict:
        """Fused FK -> Jacobian -> singular values and measures, as
        :func:`workbench.measures.measures_from_sv` gives them: ``manipulability``, ``condition``,
        ``inverse_condition``, ``min_sv`` (...) and ``sv`` (..., m)."""
        return self._sv_map(q, frame, rows, length, point, world, True)

    def _sv_map(self, q, frame, rows, length, point, world, with_measures):
        Q, lead = self._prep(q)
        k, off = self.resolve_frame(frame, point)
        r = np.asarray(parse_rows(rows), dtype=np.int64)
        if length is None:
            length = self.nominal_reach()
        scale = row_scale(tuple(r), length)
        m = self.model
        N = Q.shape[0]
        out = np.empty((N, len(r)))
        kernels.dynamic_schedule()
        if lanes.covers(m.n):
            G, kinds, A = self._lane_chain()
            w, cond, inv = lanes._outs(N, with_measures)
            kernels.announce_compile("lanes")
            lanes.sv_map_lanes(Q, G, kinds, k, lanes.canonical_offset(A, k, off), self._rot(world), r, scale,
                               lanes.sweeps_for(len(r), m.n), out, w, cond, inv)
            if with_measures:
                return lanes.measures_dict(out, w, cond, inv, lead, len(r))
        else:
            kernels.announce_compile("kernels")
            kernels.sv_map_batch(Q, m.origins, m.axes, m.kinds, k, off, self._rot(world), r, scale, out)
        sv = out.reshape(lead + (len(r),))
        return lanes.measures_from_sv(sv) if with_measures else sv

    # ------------------------------------------------------------------------------------------
    def characteristic_length(self) -> float:
        """The arm's characteristic length (m): the value stated in its file, else the length of
        its axis chain (:func:`workbench.arm.model.axis_chain_length`), the same whatever form
        (DH, modified DH, origins, URDF) describes the arm. The default length of every measure."""
        return self.model.characteristic_length

    def nominal_reach(self) -> float:
        """Same as :meth:`characteristic_length` (the older name)."""
        return self.model.characteristic_length

    def base_to_world(self):
        return self.model.mount

    def world_to_base(self):
        return inverse_transform(self.model.mount)

    def clip_to_limits(self, q):
        return np.clip(q, self.model.lower, self.model.upper)

    def joints_in_limits(self, q, tol=1e-12):
        """Per joint: inside its limits (..., n) bool (``tol`` rad / m of slack)."""
        q = np.asarray(q, float)
        return (q >= self.model.lower - tol) & (q <= self.model.upper + tol)

    def in_limits(self, q, tol=1e-12):
        return np.all(self.joints_in_limits(q, tol), axis=-1)

    def joint_margins(self, q):
        """Per joint: distance to the nearer limit as a fraction of the half range (..., n); 1 at
        mid-range, 0 at a limit, negative outside; unlimited joints give 1."""
        q = np.asarray(q, float)
        lo, hi = self.model.lower, self.model.upper
        finite = np.isfinite(lo) & np.isfinite(hi) & (hi > lo)
        lo_f, hi_f = np.where(finite, lo, -1.0), np.where(finite, hi, 1.0)
        half = (hi_f - lo_f) / 2
        mid = (hi_f + lo_f) / 2
        return np.where(finite, 1.0 - np.abs(q - mid) / half, 1.0)

    def limit_margin(self, q):
        """Smallest distance to a joint limit as a fraction of that joint's half range (...,);
        1 at mid-range, 0 at a limit; unlimited joints count as 1."""
        return np.min(self.joint_margins(q), axis=-1)

    def random_q(self, count, rng=None, unlimited=np.pi):
        """Uniform random joint values inside the limits, (count, n); unlimited revolute joints in
        [-unlimited, unlimited] rad."""
        rng = np.random.default_rng(rng)
        lo = np.where(np.isfinite(self.model.lower), self.model.lower, -unlimited)
        hi = np.where(np.isfinite(self.model.upper), self.model.upper, unlimited)
        return rng.uniform(lo, hi, size=(int(count), self.model.n))

    # ------------------------------------------------------------------------------------------
    def ik(self, T_goal, seeds=8, orientation="fixed", **kwargs):
        """Inverse kinematics of the TCP: T_goal (..., 4, 4) in the base frame -> (q (..., n), status (...)).

        Status codes and the other keyword arguments (q_seed, pos_tol, rot_tol, max_iter, rng,
        all_solutions) are those of :func:`workbench.kinematics.ik.solve_ik`; status 0 = converged.
        """
        from .ik import solve_ik

        res = solve_ik(self, T_goal, seeds=seeds, orientation=orientation, **kwargs)
        return res.q, res.status


def load_arm(path, base_link=None, tip_link=None) -> Arm:
    """Load an arm file (.toml) or URDF (.urdf) -> :class:`Arm` (also ``workbench.load_arm``)."""
    from ..arm import read_arm_model

    return Arm(read_arm_model(path, base_link=base_link, tip_link=tip_link))
