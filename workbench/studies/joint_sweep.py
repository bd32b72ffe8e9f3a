"""Joint sweep: Jacobian measures over a grid (or random samples) of joint space.

Three modes (``mode`` in the ``[settings]`` table of a study file):

``"grid"`` (default)
    1, 2 or 3 chosen ``joints`` swept over ``ranges`` with ``steps`` points each (end points
    included); the other joints stay at ``pose`` (default: the arm's home pose).
``"reduce"``
    A coarse grid over *all* joints (``coarse_steps`` points for each joint not chosen) reduced
    onto the 2 chosen joints: per cell of the chosen joints' grid, the min / max / mean of each
    measure over the coarse grid of the others, plus the joint values at the best and the worst
    cell (by ``best_by``).
``"samples"``
    ``samples`` uniform random poses inside the joint limits (seeded by ``seed``), giving a point
    cloud of the chosen frame's position with the measures at each point.

Measures per cell (see :mod:`workbench.measures`): manipulability, condition, inverse_condition,
min_sv of the chosen ``frame`` and task ``rows`` (translational rows divided by the characteristic
length ``length`` when rows mix translation and rotation; default the arm's nominal reach), and the
joint-limit margin (:meth:`workbench.kinematics.Arm.limit_margin`) and the limit-aware
manipulability (manipulability times the joint-limit penalty of Tsai 1986,
:func:`workbench.measures.joint_limit_penalty`). Computed by the fused compiled path
:func:`workbench.measures.pose_measures`, batched over the chunk.

File units: revolute joint values in degrees, prismatic in metres, ``length`` in metres.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..limits import MAX_CELLS as _LIMIT_CELLS
from ..measures import NEAR_SINGULAR as _NEAR_DEFAULT
from ..measures import joint_limit_factors, penalty_of_product, pose_measures
from ..quantities import quantity, sign_of_better
from ..quantities import unit_of as quantity_unit
from .base import Axis, Chunk, Field, Plan, StudyError, StudyKind, Table, block_rng, check_rows

__all__ = ["JointSweep", "JointSweepSettings", "MAX_CELLS", "MAX_POSES"]

#: the largest grid a study may describe (the runner also checks memory and disk)
MAX_CELLS = _LIMIT_CELLS
#: the largest number of poses (cells x coarse poses) of a reduce study
MAX_POSES = 100_000_000_000
_MODES = ("grid", "reduce", "samples")
_REDUCE_OPS = ("min", "max", "mean")
_SCALARS = ("manipulability", "condition", "inverse_condition", "min_sv", "limit_margin",
            "limit_aware_manipulability")
#: status bits
NEAR_SINGULAR = 1
OUTSIDE_LIMITS = 2
_KEYS = {"mode", "joints", "ranges", "steps", "pose", "frame", "rows", "length", "coarse_steps",
         "reduce", "best_by", "samples", "seed", "near_singular", "store_sv", "store_tcp", "dtype"}
#: poses per chunk the planner aims at before the runner calibrates
_POSES_PER_CHUNK = 32768


@dataclass(frozen=True, eq=False)
class JointSweepSettings:
    """Validated joint-sweep settings (SI units; joint indices 0-based)."""

    mode: str
    joints: tuple          # chosen joint indices
    ranges: tuple          # ((lo, hi), ...) rad / m, one per chosen joint
    steps: tuple           # points per chosen joint
    pose: np.ndarray       # (n,) fixed pose, rad / m
    frame: str
    rows: tuple            # row indices
    rows_name: str
    length: float          # characteristic length, m
    coarse_steps: tuple    # per other joint (reduce mode)
    reduce: tuple          # subset of ("min", "max", "mean")
    best_by: str
    samples: int
    seed: int
    near_singular: float   # inverse-condition threshold of the status flag
    store_sv: bool
    store_tcp: bool
    dtype: str


def _err(where, key, msg):
    return StudyError(f"{where} {key}: {msg}")


def _is_num(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _is_int(v):
    return isinstance(v, int) and not isinstance(v, bool)


class JointSweep(StudyKind):
    """Measures over a grid or random samples of joint space (see the module docstring)."""

    name = "joint_sweep"
    title = "Joint sweep"

    # ------------------------------------------------------------------------------------------
    def default_settings(self, arm) -> dict:
        names = list(arm.names)
        j = names[1:3] if len(names) >= 3 else names[:2]
        ranges = []
        for name in j:
            k = names.index(name)
            ranges.append([float(v) for v in self._file_limits(arm, k)])
        return {"mode": "grid", "joints": j, "ranges": ranges, "steps": [101] * len(j),
                "frame": "tcp", "rows": "full"}

    @staticmethod
    def _to_file(arm, k, v):
        return np.degrees(v) if arm.kinds[k] == 0 else v

    @staticmethod
    def _to_si(arm, k, v):
        return np.radians(v) if arm.kinds[k] == 0 else v

    def _file_limits(self, arm, k):
        lo, hi = arm.lower[k], arm.upper[k]
        big = 180.0 if arm.kinds[k] == 0 else 1.0
        lo = self._to_file(arm, k, lo) if np.isfinite(lo) else -big
        hi = self._to_file(arm, k, hi) if np.isfinite(hi) else big
        return round(float(lo), 9), round(float(hi), 9)

    # ------------------------------------------------------------------------------------------
    def validate(self, settings, arm, cell=None, where: str = "[settings]") -> JointSweepSettings:
        s = dict(settings or {})
        unknown = sorted(set(s) - _KEYS)
        if unknown:
            raise _err(where, unknown[0], f"unknown setting; allowed: {', '.join(sorted(_KEYS))}")
        n = arm.n
        mode = s.get("mode", "grid")
        if mode not in _MODES:
            raise _err(where, "mode", f"expected one of {', '.join(_MODES)}, got {mode!r}")

        # chosen joints
        joints_raw = s.get("joints")
        if mode == "samples":
            joints_raw = joints_raw if joints_raw is not None else []
        elif joints_raw is None:
            raise _err(where, "joints", f"missing; expected a list of {'2' if mode == 'reduce' else '1 to 3'} "
                                        f"joint names of {', '.join(arm.names)}")
        if isinstance(joints_raw, str):
            joints_raw = [joints_raw]
        if not isinstance(joints_raw, list):
            raise _err(where, "joints", f"expected a list of joint names, got {joints_raw!r}")
        joints = []
        for j in joints_raw:
            if _is_int(j) and 1 <= j <= n:
                joints.append(j - 1)
            elif isinstance(j, str) and j in arm.names:
                joints.append(arm.names.index(j))
            else:
                raise _err(where, "joints", f"unknown joint {j!r}; expected names of {', '.join(arm.names)} "
                                            f"or numbers 1..{n}")
        if len(set(joints)) != len(joints):
            raise _err(where, "joints", f"a joint is listed twice in {joints_raw!r}")
        if mode == "grid" and not 1 <= len(joints) <= 3:
            raise _err(where, "joints", f"a grid sweep takes 1, 2 or 3 joints, got {len(joints)}")
        if mode == "reduce" and len(joints) != 2:
            raise _err(where, "joints", f"a reduce sweep takes exactly 2 joints, got {len(joints)}")

        # ranges and steps of the chosen joints
        ranges, steps = [], []
        if mode != "samples":
            r_raw = s.get("ranges")
            if r_raw is None:
                r_raw = [list(self._file_limits(arm, k)) for k in joints]
            if (not isinstance(r_raw, list) or len(r_raw) != len(joints)
                    or not all(isinstance(r, list) and len(r) == 2 and all(_is_num(v) for v in r) for r in r_raw)):
                raise _err(where, "ranges", f"expected {len(joints)} pairs [from, to] (degrees for revolute "
                                            f"joints, metres for prismatic), got {r_raw!r}")
            st_raw = s.get("steps", [101] * len(joints))
            if _is_int(st_raw):
                st_raw = [st_raw] * len(joints)
            if not isinstance(st_raw, list) or len(st_raw) != len(joints) or not all(_is_int(v) for v in st_raw):
                raise _err(where, "steps", f"expected {len(joints)} whole numbers of grid points, got {st_raw!r}")
            for k, (lo, hi), st in zip(joints, r_raw, st_raw):
                name = arm.names[k]
                if st < 1:
                    raise _err(where, "steps", f"joint {name}: expected at least 1 point, got {st}")
                if hi < lo:
                    raise _err(where, "ranges", f"joint {name}: empty range [{lo}, {hi}]; expected from <= to")
                if hi == lo and st > 1:
                    raise _err(where, "ranges", f"joint {name}: empty range [{lo}, {hi}] with {st} steps; "
                                                f"expected from < to (or steps = 1)")
                ranges.append((float(self._to_si(arm, k, lo)), float(self._to_si(arm, k, hi))))
                steps.append(int(st))

        # fixed pose
        pose_raw = s.get("pose")
        if pose_raw is None:
            pose = np.asarray(arm.home_q, dtype=float).copy()
        else:
            if not isinstance(pose_raw, list) or len(pose_raw) != n or not all(_is_num(v) for v in pose_raw):
                raise _err(where, "pose", f"expected {n} joint values (degrees / metres), got {pose_raw!r}")
            pose = np.array([self._to_si(arm, k, float(v)) for k, v in enumerate(pose_raw)])

        frame = s.get("frame", "tcp")
        if not isinstance(frame, str):
            raise _err(where, "frame", f"expected a frame name, got {frame!r}")
        try:
            arm.resolve_frame(frame)
        except Exception as exc:  # ArmError: name the study key
            raise _err(where, "frame", str(exc).split(": ", 1)[-1]) from None
        rows_raw = s.get("rows", "full")
        rows = check_rows(rows_raw, where)
        rows_name = rows_raw if isinstance(rows_raw, str) else ",".join(str(r) for r in rows_raw)
        length = s.get("length")
        if length is None:
            length = float(arm.nominal_reach())
        elif not _is_num(length) or length <= 0:
            raise _err(where, "length", f"expected a positive characteristic length in metres, got {length!r}")

        others = [k for k in range(n) if k not in joints]
        coarse = ()
        if mode == "reduce":
            c_raw = s.get("coarse_steps", 5)
            if _is_int(c_raw):
                c_raw = [c_raw] * len(others)
            if not isinstance(c_raw, list) or len(c_raw) != len(others) or not all(_is_int(v) and v >= 1 for v in c_raw):
                raise _err(where, "coarse_steps", f"expected a whole number >= 1 or {len(others)} of them "
                                                  f"(one per joint not swept), got {s.get('coarse_steps')!r}")
            coarse = tuple(int(v) for v in c_raw)
        red = s.get("reduce", list(_REDUCE_OPS))
        if isinstance(red, str):
            red = [red]
        if not isinstance(red, list) or not red or not all(r in _REDUCE_OPS for r in red):
            raise _err(where, "reduce", f"expected a non-empty list of {', '.join(_REDUCE_OPS)}, got {red!r}")
        best_by = s.get("best_by", "inverse_condition")
        if best_by not in _SCALARS:
            raise _err(where, "best_by", f"expected one of {', '.join(_SCALARS)}, got {best_by!r}")
        samples = s.get("samples", 10000)
        if mode == "samples" and (not _is_int(samples) or samples < 1):
            raise _err(where, "samples", f"expected a whole number of samples >= 1, got {samples!r}")
        seed = s.get("seed", 0)
        if not _is_int(seed) or seed < 0:
            raise _err(where, "seed", f"expected a whole number >= 0, got {seed!r}")
        ns = s.get("near_singular", _NEAR_DEFAULT)
        if not _is_num(ns) or not 0 <= ns <= 1:
            raise _err(where, "near_singular", f"expected an inverse-condition threshold in [0, 1], got {ns!r}")
        flags = {}
        for key, default in (("store_sv", False), ("store_tcp", mode == "samples")):
            v = s.get(key, default)
            if not isinstance(v, bool):
                raise _err(where, key, f"expected true or false, got {v!r}")
            flags[key] = v
        dtype = s.get("dtype", "float64")
        if dtype not in ("float64", "float32"):
            raise _err(where, "dtype", f"expected 'float64' or 'float32', got {dtype!r}")

        cells = samples if mode == "samples" else int(np.prod(steps, dtype=object))
        if cells > MAX_CELLS:
            key = "samples" if mode == "samples" else "steps"
            raise _err(where, key, f"{cells:,} cells is more than this tool maps in one study "
                                   f"(at most {MAX_CELLS:,}); use fewer {'samples' if key == 'samples' else 'steps'}")
        if mode == "reduce":
            poses = cells * int(np.prod(coarse, dtype=object))
            if poses > MAX_POSES:
                raise _err(where, "coarse_steps", f"{float(poses):.3g} poses is more than {MAX_POSES:.0e}; "
                                                  f"use fewer coarse steps")
        return JointSweepSettings(mode=mode, joints=tuple(joints), ranges=tuple(ranges), steps=tuple(steps),
                                  pose=pose, frame=frame, rows=tuple(rows), rows_name=str(rows_name),
                                  length=float(length), coarse_steps=coarse, reduce=tuple(red),
                                  best_by=best_by, samples=int(samples), seed=int(seed),
                                  near_singular=float(ns), store_sv=flags["store_sv"],
                                  store_tcp=flags["store_tcp"], dtype=dtype)

    #: settings read by each mode besides the common ones
    _MODE_KEYS = {"grid": {"joints", "ranges", "steps", "pose"},
                  "reduce": {"joints", "ranges", "steps", "coarse_steps", "reduce", "best_by"},
                  "samples": {"samples", "seed"}}

    def unused_settings(self, settings) -> dict:
        mode = settings.get("mode", "grid")
        if mode not in self._MODE_KEYS:
            return {}
        mode_keys = set().union(*self._MODE_KEYS.values())
        return {k: f"mode is {mode!r}" for k in settings if k in mode_keys and k not in self._MODE_KEYS[mode]}

    # ------------------------------------------------------------------------------------------
    def plan(self, spec, arm, cell=None, chunk_cells=None) -> Plan:
        where = f"{spec.where}: [settings]"
        st = self.validate(spec.settings, arm, cell, where=where)
        n = arm.n
        dt = st.dtype
        unit_of = lambda k: "rad" if arm.kinds[k] == 0 else "m"  # noqa: E731
        data = {"joint_names": tuple(arm.names), "kinds": np.asarray(arm.kinds).copy()}
        if st.mode == "samples":
            axes = (Axis("sample", np.arange(st.samples, dtype=float), "", "sample number"),)
            lo = np.where(np.isfinite(arm.lower), arm.lower, -np.pi)
            hi = np.where(np.isfinite(arm.upper), arm.upper, np.pi)
            data.update(lo=lo, hi=hi)
        else:
            axes = tuple(Axis(arm.names[k], np.linspace(lo, hi, s), unit_of(k), f"joint {arm.names[k]}")
                         for k, (lo, hi), s in zip(st.joints, st.ranges, st.steps))
        m = len(st.rows)
        # labels, descriptions and units of the measures: the one registry (workbench/quantities.py)
        desc = {name: quantity(name).description for name in _SCALARS}
        unit = {name: quantity_unit(name, st.rows, arm.kinds) or "" for name in _SCALARS}
        fields = []
        if st.mode == "reduce":
            others = [k for k in range(n) if k not in st.joints]
            grids = [np.linspace(lo, hi, c) if c > 1 else np.array([arm.home_q[k]])
                     for k, c in zip(others, st.coarse_steps)
                     for lo, hi in [(arm.lower[k] if np.isfinite(arm.lower[k]) else -np.pi,
                                     arm.upper[k] if np.isfinite(arm.upper[k]) else np.pi)]]
            mesh = np.meshgrid(*grids, indexing="ij") if grids else []
            coarse = np.stack([g.ravel() for g in mesh], axis=-1) if grids else np.zeros((1, 0))
            data.update(others=np.array(others, dtype=np.int64), coarse=coarse)
            for name in _SCALARS:
                for op in st.reduce:
                    fields.append(Field(f"{name}_{op}", (), dt, unit[name], quantity(f"{name}_{op}").description))
            fields.append(Field("best_q", (n,), "float64", "rad/m", f"joint values with the best {st.best_by}",
                                kind="pose"))
            fields.append(Field("worst_q", (n,), "float64", "rad/m", f"joint values with the worst {st.best_by}",
                                kind="pose"))
            poses_per_cell = coarse.shape[0]
        else:
            for name in _SCALARS:
                fields.append(Field(name, (), dt, unit[name], desc[name]))
            if st.store_sv:
                fields.append(Field("sv", (m,), dt, "", "singular values of the scaled, selected rows, descending",
                                    kind="other"))
            if st.store_tcp:
                fields.append(Field("tcp", (3,), dt, "m", f"position of frame {st.frame} in the base frame",
                                    kind="point"))
            if st.mode == "samples":
                fields.append(Field("q", (n,), "float64", "rad/m", "joint values of the sample", kind="pose"))
            poses_per_cell = 1
        fields.append(Field("status", (), "uint8", "", "status bits", kind="status",
                            flags={NEAR_SINGULAR: f"near singular (inverse condition < {st.near_singular:g})",
                                   OUTSIDE_LIMITS: "outside the joint limits"}))
        if chunk_cells is None:
            chunk_cells = max(1, _POSES_PER_CHUNK // poses_per_cell)
        return Plan(kind=self.name, spec=spec, settings=st, axes=axes, fields=tuple(fields),
                    chunk_cells=int(chunk_cells), data=data)

    # ------------------------------------------------------------------------------------------
    def chunk_poses(self, plan: Plan, arm, chunk: Chunk) -> np.ndarray:
        """Joint values (chunk.size, n) of a grid / samples chunk (rad / m)."""
        st = plan.settings
        if st.mode == "samples":
            lo, hi = plan.data["lo"], plan.data["hi"]
            return block_rng(st.seed, chunk.start, chunk.stop,
                             lambda rng, c: rng.uniform(lo, hi, size=(c, len(lo))))
        idx = np.unravel_index(np.arange(chunk.start, chunk.stop), plan.shape)
        q = np.repeat(st.pose[None, :], chunk.size, axis=0)
        for ax, k, i in zip(plan.axes, st.joints, idx):
            q[:, k] = ax.values[i]
        return q

    def _measures(self, st, arm, q):
        m = pose_measures(arm, q, frame=st.frame, rows=st.rows, length=st.length)
        m["limit_margin"] = arm.limit_margin(q)
        f, n_lim = joint_limit_factors(q, arm.model.lower, arm.model.upper)
        m["limit_aware_manipulability"] = penalty_of_product(np.prod(f, axis=-1), n_lim) * m["manipulability"]
        return m

    @staticmethod
    def _grid_limits(plan, arm, chunk):
        """Limit margin, in-limits and joint-limit penalty of grid cells (chunk.size,) from the
        chosen joints' axes: a cell's value is the min / all / product over joints of per-joint
        terms that depend on that joint's value only, so each is worked out once per axis value
        instead of once per cell and joint (the per-joint arithmetic of :meth:`Arm.limit_margin`,
        :meth:`Arm.in_limits` and :func:`workbench.measures.joint_limit_factors`)."""
        st = plan.settings
        lo, hi = arm.model.lower, arm.model.upper
        idx = np.unravel_index(np.arange(chunk.start, chunk.stop), plan.shape)
        fixed = [k for k in range(st.pose.size) if k not in st.joints]
        margin = np.full(chunk.size, np.min(arm.joint_margins(st.pose)[fixed]) if fixed else np.inf)
        inside = np.full(chunk.size, bool(np.all(arm.joints_in_limits(st.pose)[fixed])))
        f_pose, n_lim = joint_limit_factors(st.pose, lo, hi)
        prod = np.full(chunk.size, np.prod(f_pose[fixed]))
        for ax, k, i in zip(plan.axes, st.joints, idx):
            q_axis = np.repeat(st.pose[None, :], ax.values.size, axis=0)
            q_axis[:, k] = ax.values
            np.minimum(margin, arm.joint_margins(q_axis)[:, k][i], out=margin)
            inside &= arm.joints_in_limits(q_axis)[:, k][i]
            prod *= joint_limit_factors(q_axis, lo, hi)[0][:, k][i]
        return margin, inside, penalty_of_product(prod, n_lim)

    def compute_chunk(self, plan: Plan, arm, cell, chunk: Chunk) -> dict:
        st = plan.settings
        if st.mode == "reduce":
            return self._compute_reduce(plan, arm, chunk)
        q = self.chunk_poses(plan, arm, chunk)
        if st.mode == "grid":
            m = pose_measures(arm, q, frame=st.frame, rows=st.rows, length=st.length)
            m["limit_margin"], inside, penalty = self._grid_limits(plan, arm, chunk)
            m["limit_aware_manipulability"] = penalty * m["manipulability"]
        else:
            m = self._measures(st, arm, q)
            inside = arm.in_limits(q)
        out = {}
        for f in plan.fields:
            if f.name in m:
                out[f.name] = np.asarray(m[f.name], dtype=f.dtype)
        if st.store_sv:
            out["sv"] = m["sv"].astype(st.dtype)
        if st.store_tcp:
            out["tcp"] = arm.fk(q, frame=st.frame)[:, :3, 3].astype(st.dtype)
        if st.mode == "samples":
            out["q"] = q
        out["status"] = self._status(st, m["inverse_condition"], inside)
        return out

    @staticmethod
    def _status(st, inv, inside):
        status = np.zeros(inv.shape, dtype=np.uint8)
        status[inv < st.near_singular] |= NEAR_SINGULAR
        status[~inside] |= OUTSIDE_LIMITS
        return status

    def _compute_reduce(self, plan, arm, chunk):
        st = plan.settings
        coarse, others = plan.data["coarse"], plan.data["others"]
        G = coarse.shape[0]
        idx = np.unravel_index(np.arange(chunk.start, chunk.stop), plan.shape)
        q = np.empty((chunk.size, G, arm.n))
        q[:] = st.pose
        q[:, :, others] = coarse[None, :, :]
        for ax, k, i in zip(plan.axes, st.joints, idx):
            q[:, :, k] = ax.values[i][:, None]
        m = self._measures(st, arm, q)
        out = {}
        for name in _SCALARS:
            v = m[name]
            for op in st.reduce:
                with np.errstate(invalid="ignore"):
                    r = getattr(np, op)(v, axis=1)
                out[f"{name}_{op}"] = r.astype(st.dtype)
        key = sign_of_better(st.best_by) * m[st.best_by]       # largest at the best (condition: lowest)
        rows = np.arange(chunk.size)
        out["best_q"] = q[rows, np.argmax(key, axis=1)]
        out["worst_q"] = q[rows, np.argmin(key, axis=1)]
        out["status"] = self._status(st, m["inverse_condition"].min(axis=1),
                                     arm.in_limits(q).all(axis=1))
        return out

    # ------------------------------------------------------------------------------------------
    def summarise(self, plan: Plan, arrays, count: int = 50) -> dict:
        """``near_singular``: the ``count`` poses with the lowest inverse condition (below the
        threshold), and ``best``: the ``count`` with the highest; joint values in degrees / m."""
        st = plan.settings
        key = "inverse_condition" if st.mode != "reduce" else "inverse_condition_min" \
            if "min" in st.reduce else f"inverse_condition_{st.reduce[0]}"
        v = np.asarray(arrays[key], dtype=float).reshape(-1)
        tables = {}
        k = min(count, int(np.count_nonzero(np.isfinite(v))))
        near = np.flatnonzero(v < st.near_singular)  # NaN compares False: finite cells only
        low = near[_smallest(v[near], k)]
        tables["near_singular"] = self._pose_table(plan, arrays, low, f"Near-singular poses ({key} < "
                                                   f"{st.near_singular:g}), most singular first")
        high = _largest_finite(v, k)
        tables["best"] = self._pose_table(plan, arrays, high, f"Best-conditioned poses (highest {key})")
        return tables

    def cell_poses(self, plan: Plan, flat_index, arrays=None) -> np.ndarray:
        """Joint values (k, n) (rad / m) of the grid cells ``flat_index`` (for pose lists); in
        reduce mode the worst pose over the other joints (needs ``arrays``)."""
        st = plan.settings
        flat_index = np.asarray(flat_index, dtype=np.int64).reshape(-1)
        if st.mode == "samples":
            if arrays is not None and "q" in arrays:
                return np.asarray(arrays["q"]).reshape(plan.cells, -1)[flat_index]
            return np.array([self.chunk_poses(plan, None, Chunk(0, int(i), int(i) + 1))[0]
                             for i in flat_index]).reshape(-1, st.pose.size)
        if st.mode == "reduce":
            return np.asarray(arrays["worst_q"]).reshape(plan.cells, -1)[flat_index]
        return self._grid_poses(plan, flat_index)

    def _grid_poses(self, plan, flat_index):
        st = plan.settings
        idx = np.unravel_index(flat_index, plan.shape)
        q = np.repeat(st.pose[None, :], flat_index.size, axis=0)
        for ax, k, i in zip(plan.axes, st.joints, idx):
            q[:, k] = ax.values[i]
        return q

    def _pose_table(self, plan, arrays, flat_index, title):
        st = plan.settings
        spec_names = plan.data.get("joint_names")
        q = self.cell_poses(plan, flat_index, arrays)
        n = st.pose.size
        kinds = plan.data.get("kinds")
        cols, units = {"cell": np.asarray(flat_index, dtype=np.int64)}, {"cell": ""}
        for k in range(n):
            name = spec_names[k] if spec_names is not None else f"j{k + 1}"
            revolute = kinds is None or kinds[k] == 0
            cols[name] = np.degrees(q[:, k]) if revolute else q[:, k] * 1000.0
            units[name] = "deg" if revolute else "mm"
        for f in plan.fields:
            if f.shape == () and f.kind == "measure":
                cols[f.name] = np.asarray(arrays[f.name]).reshape(-1)[flat_index].astype(float)
                units[f.name] = ""
        return Table(title=title, columns=cols, units=units)


def _largest_finite(v: np.ndarray, k: int) -> np.ndarray:
    """Indices of the k largest finite values of v, descending (ties by index), without a
    negated copy of v."""
    if k <= 0:
        return np.empty(0, dtype=np.int64)
    if v.size > 65536 and 32 * k < v.size:
        sub = v[::32]
        sub = sub[np.isfinite(sub)]
        if sub.size >= k:
            # the k-th largest of the finite values of every 32nd cell bounds the k-th largest
            # finite value of all from below: the cells at or above it hold every answer
            t = np.partition(sub, sub.size - k)[sub.size - k]
            cand = np.flatnonzero(v >= t)
            cand = cand[np.isfinite(v[cand])]
            return cand[_smallest(-v[cand], k)]
    idx = np.flatnonzero(np.isfinite(v))
    return idx[_smallest(-v[idx], k)]


def _smallest(v: np.ndarray, k: int) -> np.ndarray:
    """Indices of the k smallest values of v, ascending (ties by index); O(N) selection."""
    if k <= 0:
        return np.empty(0, dtype=np.int64)
    if v.size > 65536 and 32 * k < v.size:
        # the k-th smallest of every 32nd value bounds the k-th smallest of all from above, so
        # the cells at or below it hold every answer (and all ties): select among those only
        t = np.partition(v[::32], k - 1)[k - 1]
        if np.isfinite(t):
            sub = np.flatnonzero(v <= t)
            return sub[_smallest(v[sub], k)]
    if k < v.size:
        part = np.argpartition(v, k - 1)[:k]
        kth = v[part].max()
        cand = np.flatnonzero(v <= kth)  # all ties of the k-th value, so the order is stable
    else:
        cand = np.arange(v.size)
    order = np.lexsort((cand, v[cand]))
    return cand[order][:k]
