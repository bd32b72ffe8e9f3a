"""Reach slice: which points of a plane (or box) of the cell the tool reaches, and how well.

Per grid point the tool goal is the point with an orientation rule; batched IK
(:func:`workbench.kinematics.ik.solve_ik`) runs from several seeds; the study records whether the
point is reached, how many distinct joint solutions the seeds found, the measures of DESIGN §4 at
the best of them (highest ``best`` measure, default inverse condition) and that joint solution.
A point that no seed reaches is retried once from the solutions its two row neighbours (previous and
next point along the last grid axis) found (a missed point inside a reached region is most often a
seeding miss; a neighbour's first pass is recomputed when it lies outside the chunk, so results do
not depend on the chunking).

Optionally (orientation = "sampled") a **reachability index** per point: the fraction of a set of
sampled tool orientations that are reached (Zacharias, Borst & Hirzinger, "Capturing robot workspace
structure: representing robot capabilities", IROS 2007; from memory: orientations whose tool axis
points at the point from directions spread over a sphere, each turned about that axis in several
steps). Directions here are a spiral point set on the sphere (common practice), ``spins`` turns
about each (``spins = 0``: the axis rule, spin free).

Settings (study file ``[settings]``; lengths in m, angles in degrees)::

    grid = "plane"                 # "plane" or "box"
    plane = "xz"                   # "xy", "xz", "yz" of the cell frame, or "frame"
    at = 0.0                       # xy/xz/yz: offset of the plane along its normal (m)
    origin = [0, 0, 0]             # plane = "frame": origin of the plane frame in the cell (m)
    plane_rpy = [0, 0, 0]          # plane = "frame": its orientation (deg); the plane is its local xy
    u = [0.2, 1.4]                 # range of the first plane coordinate (m)
    v = [0.0, 1.2]                 # range of the second plane coordinate (m)
    # grid = "box": x = [..], y = [..], z = [..] ranges (m)
    step = 0.05                    # grid step (m) ... or
    steps = [200, 200]             # points per axis (plane: [u, v]; box: [x, y, z])
    orientation = "fixed"          # "fixed", "axis", "free" or "sampled"
    rpy = [180, 0, 0]              # fixed: tool orientation in the cell frame (deg)
    axis = [0, 0, -1]              # axis: the tool z direction in the cell frame
    directions = 26                # sampled: approach directions on the sphere
    spins = 4                      # sampled: turns about each direction (0 = spin free)
    seeds = 8                      # IK seeds per target (<= 8 is enough, see `workbench bench`)
    neighbour_seeds = true         # retry a missed point from its row neighbours' solutions
    frame = "tcp"; rows = "full"; length = <nominal reach>   # measures, as in the joint sweep
    best = "inverse_condition"     # measure that picks the best solution
    distinct_tol = 0.1             # deg: solutions closer than this in every joint are one
    near_singular = 0.02           # status flag: inverse condition below this (workbench.measures.NEAR_SINGULAR)
    mount_xyz = [..]; mount_rpy = [..]   # optional arm base in the cell; else the cell's
                                         # [placement], else the arm file's mount

Targets are given in the cell (world) frame and turned into the arm's base frame with the inverse
mount before IK.
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass, replace
from typing import Mapping

import numpy as np

from ..arm.transforms import inverse_transform, make_transform
from ..measures import NEAR_SINGULAR as _NEAR_DEFAULT
from . import collide
from ..quantities import label, quantity, sign_of_better, unit_of
from .base import Axis, Chunk, Field, Plan, StudyError, StudyKind, Table, check_rows

__all__ = ["ReachSlice", "ReachSettings", "sphere_orientations", "bench_reach_slice",
           "REACHED", "NEAR_SINGULAR", "OUT_OF_REACH", "LIMITS", "NOT_CONVERGED", "COLLIDING"]

_DEG = math.pi / 180.0
_KEYS = {"grid", "plane", "at", "origin", "plane_rpy", "u", "v", "x", "y", "z", "step", "steps",
         "orientation", "rpy", "axis", "directions", "spins", "seeds", "frame", "rows", "length", "best",
         "distinct_tol", "near_singular", "mount_xyz", "mount_rpy", "neighbour_seeds"} | collide.KEYS
_PLANES = {"xy": (0, 1, 2), "xz": (0, 2, 1), "yz": (1, 2, 0)}
#: the measures that can pick the best solution (which way is better: workbench/quantities.py)
_BEST = ("inverse_condition", "manipulability", "min_sv", "condition")
MAX_POINTS = 4_000_000
MAX_TARGETS = 50_000_000

# status bits of the "status" field
REACHED = 1
NEAR_SINGULAR = 2
OUT_OF_REACH = 4
LIMITS = 8
NOT_CONVERGED = 16
COLLIDING = 32   # IK reaches the point, but only with solutions below the clearance setting
_FLAGS = {REACHED: "reached", NEAR_SINGULAR: "near singular at the best solution",
          OUT_OF_REACH: "out of reach", LIMITS: "blocked by joint limits", NOT_CONVERGED: "IK did not converge",
          COLLIDING: "reached only by colliding solutions"}


@dataclass(frozen=True, eq=False)
class ReachSettings:
    """Validated reach-slice settings (SI units).

    ``plane_frame`` (4, 4) maps plane coordinates (u, v, 0) to the cell frame (grid = "plane");
    ``rotations`` (K, 3, 3) are the tool orientations tried per point (one for fixed/axis/free);
    ``rule`` is the IK orientation rule used for each of them.
    """

    grid: str
    axes_values: tuple          # plane: (us, vs); box: (xs, ys, zs)
    plane: str
    plane_frame: np.ndarray
    orientation: str
    rule: str
    rotations: np.ndarray
    seeds: int
    frame: str
    rows: str
    length: float
    best: str
    distinct_tol: float
    near_singular: float
    mount: np.ndarray
    neighbour_seeds: bool = True
    collisions: collide.CollisionSettings = collide.CollisionSettings(False)


def sphere_orientations(directions: int, spins: int) -> np.ndarray:
    """Tool orientations (K, 3, 3) whose z axis points at the target from ``directions`` points of a
    spiral set on the unit sphere, each turned about that axis ``spins`` times (spins = 0: one each).

    The spiral set: z_k = 1 - (2k + 1)/N, longitude k * pi (3 - sqrt 5) (common practice).
    """
    N = int(directions)
    k = np.arange(N)
    zc = 1.0 - (2 * k + 1) / N
    r = np.sqrt(np.maximum(0.0, 1 - zc * zc))
    lon = k * math.pi * (3 - math.sqrt(5))
    d = np.stack([r * np.cos(lon), r * np.sin(lon), zc], axis=-1)  # from the point outwards
    out = []
    for z in -d:  # tool z axis points at the point (approach direction)
        ref = np.array([1.0, 0, 0]) if abs(z[0]) < 0.9 else np.array([0, 1.0, 0])
        x = ref - z * (ref @ z)
        x /= np.linalg.norm(x)
        y = np.cross(z, x)
        R0 = np.stack([x, y, z], axis=1)
        for s in range(max(1, int(spins))):
            a = 2 * math.pi * s / max(1, int(spins))
            Rz = np.array([[math.cos(a), -math.sin(a), 0], [math.sin(a), math.cos(a), 0], [0, 0, 1]])
            out.append(R0 @ Rz)
    return np.array(out)


def _err(where, key, msg):
    return StudyError(f"{where} {key}: {msg}")


def _nums(settings, where, key, size, default=None):
    v = settings.get(key, default)
    if not isinstance(v, (list, tuple)) or len(v) != size or not all(
            isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x) for x in v):
        raise _err(where, key, f"expected a list of {size} numbers, got {v!r}")
    return np.array([float(x) for x in v])


def _num(settings, where, key, default, positive=False):
    v = settings.get(key, default)
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        raise _err(where, key, f"expected a number, got {v!r}")
    if positive and not v > 0:
        raise _err(where, key, f"expected a positive number, got {v!r}")
    return float(v)


def _int(settings, where, key, default, lo, hi):
    v = settings.get(key, default)
    if isinstance(v, bool) or not isinstance(v, int) or not lo <= v <= hi:
        raise _err(where, key, f"expected an integer from {lo} to {hi}, got {v!r}")
    return int(v)


def _range(settings, where, key, default):
    r = _nums(settings, where, key, 2, default)
    if r[1] < r[0]:
        raise _err(where, key, f"empty range: {r[0]:g} > {r[1]:g} (expected [lower, upper] in m)")
    return r


def _grid_values(settings, where, ranges, names):
    if "steps" in settings and "step" in settings:  # one would be silently ignored
        raise _err(where, "step", f"give either 'step' (grid step in m) or 'steps' (points per axis), not both; "
                                  f"got step = {settings['step']!r} and steps = {settings['steps']!r}")
    if "steps" in settings:
        st = settings["steps"]
        if (not isinstance(st, list) or len(st) != len(ranges)
                or not all(isinstance(x, int) and not isinstance(x, bool) and 1 <= x <= 100_000 for x in st)):
            raise _err(where, "steps", f"expected {len(ranges)} integers from 1 to 100000 (points along "
                                       f"{', '.join(names)}), got {st!r}")
        vals = []
        for (lo, hi), n, name in zip(ranges, st, names):
            if n > 1 and hi == lo:
                raise _err(where, "steps", f"{n} points along {name} but its range is empty ({lo:g} .. {hi:g})")
            vals.append(np.linspace(lo, hi, n) if n > 1 else np.array([(lo + hi) / 2]))
        return tuple(vals)
    step = _num(settings, where, "step", 0.05, positive=True)
    vals = []
    for lo, hi in ranges:
        count = int((hi - lo) / step + 1e-9) + 1
        if count > 100_000:
            raise _err(where, "step", f"{count} points along one axis; at most 100000 (use a larger step)")
        vals.append(lo + step * np.arange(count))
    return tuple(vals)


def _validate(settings: Mapping, arm, cell, where: str) -> ReachSettings:
    unknown = sorted(set(settings) - _KEYS)
    if unknown:
        raise StudyError(f"{where}: unknown key '{unknown[0]}'; allowed keys: {', '.join(sorted(_KEYS))}")
    grid = settings.get("grid", "plane")
    if grid not in ("plane", "box"):
        raise _err(where, "grid", f"expected 'plane' or 'box', got {grid!r}")
    plane = settings.get("plane", "xz")
    F = np.eye(4)
    if grid == "plane":
        if plane in _PLANES:
            a, b, c = _PLANES[plane]
            F[:3, 0] = np.eye(3)[a]
            F[:3, 1] = np.eye(3)[b]
            F[:3, 2] = np.cross(F[:3, 0], F[:3, 1])
            F[c, 3] = _num(settings, where, "at", 0.0)
        elif plane == "frame":
            F = make_transform(_nums(settings, where, "origin", 3, [0, 0, 0]),
                               _nums(settings, where, "plane_rpy", 3, [0, 0, 0]) * _DEG)
        else:
            raise _err(where, "plane", f"expected one of xy, xz, yz, frame, got {plane!r}")
        u = _range(settings, where, "u", [0.0, 1.0])
        v = _range(settings, where, "v", [0.0, 1.0])
        vals = _grid_values(settings, where, (u, v), ("u", "v"))
    else:
        rx = _range(settings, where, "x", [0.0, 1.0])
        ry = _range(settings, where, "y", [0.0, 1.0])
        rz = _range(settings, where, "z", [0.0, 1.0])
        vals = _grid_values(settings, where, (rx, ry, rz), ("x", "y", "z"))
    points = int(np.prod([len(x) for x in vals]))
    key = "steps" if "steps" in settings else "step"
    if points > MAX_POINTS:
        raise _err(where, key, f"{points:,} grid points; at most {MAX_POINTS:,} (use fewer points)")

    orientation = settings.get("orientation", "fixed")
    if orientation not in ("fixed", "axis", "free", "sampled"):
        raise _err(where, "orientation", f"expected fixed, axis, free or sampled, got {orientation!r}")
    rule = orientation
    if orientation == "fixed":
        rot = make_transform(np.zeros(3), _nums(settings, where, "rpy", 3, [180, 0, 0]) * _DEG)[:3, :3][None]
    elif orientation == "axis":
        ax = _nums(settings, where, "axis", 3, [0, 0, -1])
        if np.linalg.norm(ax) == 0:
            raise _err(where, "axis", f"expected a non-zero direction, got {ax.tolist()!r}")
        z = ax / np.linalg.norm(ax)
        ref = np.array([1.0, 0, 0]) if abs(z[0]) < 0.9 else np.array([0, 1.0, 0])
        x = ref - z * (ref @ z)
        x /= np.linalg.norm(x)
        rot = np.stack([x, np.cross(z, x), z], axis=1)[None]
    elif orientation == "free":
        rot = np.eye(3)[None]
    else:
        dirs = _int(settings, where, "directions", 26, 1, 10_000)
        spins = _int(settings, where, "spins", 4, 0, 360)
        rot = sphere_orientations(dirs, spins)
        rule = "fixed" if spins > 0 else "axis"
        if points * len(rot) > MAX_TARGETS:
            raise _err(where, "directions", f"{points:,} points x {len(rot)} orientations = "
                                            f"{points * len(rot):,} IK targets; at most {MAX_TARGETS:,}")
    seeds = _int(settings, where, "seeds", 8, 1, 64)
    frame = settings.get("frame", "tcp")
    try:
        arm.resolve_frame(frame)
    except Exception as exc:
        raise _err(where, "frame", str(exc)) from None
    rows = settings.get("rows", "full")
    check_rows(rows, where)
    length = settings.get("length")
    length = float(arm.nominal_reach()) if length is None else _num(settings, where, "length", 1.0, positive=True)
    best = settings.get("best", "inverse_condition")
    if best not in _BEST:
        raise _err(where, "best", f"expected one of {', '.join(_BEST)}, got {best!r}")
    dtol = _num(settings, where, "distinct_tol", 0.1, positive=True) * _DEG
    near = _num(settings, where, "near_singular", _NEAR_DEFAULT)
    if not 0 <= near <= 1:
        raise _err(where, "near_singular", f"expected an inverse condition between 0 and 1, got {near!r}")
    nbs = settings.get("neighbour_seeds", True)
    if not isinstance(nbs, bool):
        raise _err(where, "neighbour_seeds", f"expected true or false, got {nbs!r}")
    if "mount_xyz" in settings or "mount_rpy" in settings:
        mount = make_transform(_nums(settings, where, "mount_xyz", 3, [0, 0, 0]),
                               _nums(settings, where, "mount_rpy", 3, [0, 0, 0]) * _DEG)
    elif cell is not None and getattr(cell, "placement", None) is not None:
        mount = np.asarray(cell.placement, float)
    else:
        mount = np.asarray(arm.model.mount, float)
    return ReachSettings(grid=grid, axes_values=vals, plane=plane if grid == "plane" else "", plane_frame=F,
                         orientation=orientation, rule=rule, rotations=np.ascontiguousarray(rot), seeds=seeds,
                         frame=str(frame), rows=rows if isinstance(rows, str) else list(rows), length=length,
                         best=best, distinct_tol=dtol, near_singular=near, mount=mount, neighbour_seeds=nbs,
                         collisions=collide.collision_settings(settings, arm, where))


def _ik_status_bits(status):
    """Combine per-seed IK status codes (..., S) into status bits (...) like the kernel does:
    converged if any seed converged, else 'did not converge' if any seed ran out of iterations,
    else out of reach / blocked by limits (limits if any seed was blocked)."""
    from ..kinematics import ik

    conv = np.any(status == ik.CONVERGED, axis=-1)
    running = np.any(status == ik.NOT_CONVERGED, axis=-1)
    lim = np.any(status == ik.LIMITS, axis=-1)
    bits = np.where(conv, REACHED, np.where(running, NOT_CONVERGED, np.where(lim, LIMITS, OUT_OF_REACH)))
    return bits.astype(np.uint8)


class ReachSlice(StudyKind):
    """Reach slice over a plane or box of the cell (see the module docstring)."""

    name = "reach_slice"
    title = "reach slice"
    needs_cell = False

    def default_settings(self, arm) -> dict:
        R = float(arm.nominal_reach())
        r = round(R, 2)
        return {"grid": "plane", "plane": "xz", "at": 0.0, "u": [-r, r], "v": [-r / 2, r], "steps": [101, 101],
                "orientation": "fixed", "rpy": [180, 0, 0], "seeds": 8}

    def validate(self, settings, arm, cell, where="settings"):
        return _validate(settings or {}, arm, cell, where)

    def unused_settings(self, settings) -> dict:
        grid = settings.get("grid", "plane")
        plane = settings.get("plane", "xz")
        orient = settings.get("orientation", "fixed")
        why = {}
        if grid == "box":
            why.update({k: "grid is 'box'" for k in ("plane", "at", "origin", "plane_rpy", "u", "v")})
        else:
            why.update({k: "grid is 'plane'" for k in ("x", "y", "z")})
            if plane == "frame":
                why["at"] = "plane is 'frame'"
            else:
                why.update({k: f"plane is {plane!r}" for k in ("origin", "plane_rpy")})
        for key, rule in (("rpy", "fixed"), ("axis", "axis"), ("directions", "sampled"), ("spins", "sampled")):
            if orient != rule:
                why[key] = f"orientation is {orient!r}"
        if orient == "sampled":
            why.update({k: "orientation is 'sampled' (no solution count)" for k in ("distinct_tol", "neighbour_seeds")})
        return {k: v for k, v in why.items() if k in settings}

    def plan(self, spec, arm, cell, chunk_cells=None) -> Plan:
        where = f"{spec.where}: [settings]"
        s = self.validate(spec.settings, arm, cell, where)
        n = arm.n
        if s.grid == "plane":
            us, vs = s.axes_values
            if s.plane in _PLANES:
                a, b, _ = _PLANES[s.plane]
                axes = (Axis("xyz"[b], vs, "m", f"cell {'xyz'[b]}"), Axis("xyz"[a], us, "m", f"cell {'xyz'[a]}"))
            else:
                axes = (Axis("v", vs, "m", "plane v"), Axis("u", us, "m", "plane u"))
        else:
            xs, ys, zs = s.axes_values
            axes = (Axis("z", zs, "m", "cell z"), Axis("y", ys, "m", "cell y"), Axis("x", xs, "m", "cell x"))
        what = f"at the best solution ({'lowest' if sign_of_better(s.best) < 0 else 'highest'} {s.best})"
        fields = [
            Field("status", (), "uint8", "", "status bits", kind="status", flags=dict(_FLAGS)),
            # labels and units: the one registry (workbench/quantities.py)
            *(Field(name, (), "float64", unit_of(name, s.rows, arm.kinds) or "",
                    f"{label(name)} {what}" if name in _BEST else f"{quantity(name).description} of the best solution")
              for name in ("manipulability", "inverse_condition", "condition", "min_sv", "limit_margin",
                           "limit_aware_manipulability")),
        ]
        if s.orientation == "sampled":
            fields.append(Field("reachability", (), "float64", "",
                                f"fraction of {len(s.rotations)} sampled tool orientations reached "
                                "(reachability index, Zacharias et al. 2007)"))
        else:
            fields.append(Field("solutions", (), "int16", "", f"distinct IK solutions found from {s.seeds} seeds",
                                fill=0))
        if s.collisions.on:
            fields.append(Field("clearance", (), "float64", "m",
                                f"clearance (m) at the best solution (points reached only by colliding solutions: "
                                f"the largest over them); a solution counts with at least "
                                f"{s.collisions.clearance * 1000:g} mm"))
        fields.append(Field("q", (n,), "float64", "rad/m", "joint values of the best solution", kind="pose"))
        fields.append(Field("target", (3,), "float64", "m", "grid point in the cell frame", kind="point"))
        default_chunk = 4096 if s.orientation != "sampled" else max(16, 4096 // len(s.rotations))
        return Plan(self.name, spec, s, axes, tuple(fields), chunk_cells=chunk_cells or default_chunk,
                    data={"base_from_cell": inverse_transform(s.mount),
                          "result_attrs": collide.result_attrs(s.collisions), "cell": cell})

    # ------------------------------------------------------------------------------------------
    def points(self, plan: Plan, start: int, stop: int) -> np.ndarray:
        """Grid points [start, stop) of the flattened grid in the cell frame, (count, 3) m."""
        return self.points_at(plan, np.arange(start, stop))

    def points_at(self, plan: Plan, idx) -> np.ndarray:
        """Grid points of flat grid indices ``idx`` (count,) in the cell frame, (count, 3) m."""
        s = plan.settings
        sub = np.unravel_index(np.asarray(idx, dtype=np.int64), plan.shape)
        if s.grid == "plane":
            v = plan.axes[0].values[sub[0]]
            u = plan.axes[1].values[sub[1]]
            F = s.plane_frame
            return F[:3, 3] + u[:, None] * F[:3, 0] + v[:, None] * F[:3, 1]
        z = plan.axes[0].values[sub[0]]
        y = plan.axes[1].values[sub[1]]
        x = plan.axes[2].values[sub[2]]
        return np.stack([x, y, z], axis=-1)

    @staticmethod
    def _targets(plan, P):
        """Tool goals (count, K, 4, 4) in the arm base frame for cell points P (count, 3)."""
        s = plan.settings
        T = np.tile(np.eye(4), (len(P), len(s.rotations), 1, 1))
        T[:, :, :3, :3] = s.rotations[None]
        T[:, :, :3, 3] = P[:, None, :]
        return plan.data["base_from_cell"] @ T

    def _first_pass(self, plan, arm, idx):
        """IK of grid points ``idx`` from the generated seeds, every seed run:
        (q (count, S, n), status (count, S), distinct mask (count, S))."""
        from ..kinematics.ik import distinct_solutions, solve_ik

        s = plan.settings
        Tb = self._targets(plan, self.points_at(plan, idx))[:, 0]
        res = solve_ik(arm, Tb, seeds=s.seeds, orientation=s.rule, all_solutions=True)
        keep = distinct_solutions(arm, res.q, res.status, s.distinct_tol)
        return res.q, res.status, self._clear(plan, arm, res.q, keep)

    @staticmethod
    def _clear(plan, arm, q, keep):
        """``keep`` (count, S) restricted to solutions with the clearance asked (one batched call
        of :func:`workbench.collision.clearance` over every kept solution)."""
        cs = plan.settings.collisions
        if not cs.on or not keep.any():
            return keep
        out = keep.copy()
        r, c = np.nonzero(keep)
        _d, good = collide.clear_of(arm, q[r, c], plan.data.get("cell"), cs, mounts=plan.settings.mount)
        out[r, c] = good
        return out

    @staticmethod
    def _neighbours(plan, idx):
        """Flat indices (count, 2) of the grid neighbours of ``idx`` along the last grid axis (the
        previous and next point of its row); -1 off the grid. Only row neighbours are used so that
        a chunk needs at most two points beyond its ends, whatever its size."""
        shape = plan.shape
        sub = np.unravel_index(idx, shape)
        last = sub[-1]
        out = []
        for d in (-1, 1):
            valid = (last + d >= 0) & (last + d < shape[-1])
            out.append(np.where(valid, idx + d, -1))
        return np.stack(out, axis=1)

    def _neighbour_pass(self, plan, arm, idx, q, status, keep):
        """Retry the missed points of ``idx`` from the distinct solutions their row neighbours found
        in the first pass (neighbours outside the chunk get their first pass here too, so the result
        does not depend on the chunking). Updates q, status, keep in place."""
        from ..kinematics.ik import distinct_solutions, solve_ik

        s = plan.settings
        miss = np.where(~keep.any(axis=1))[0]
        if miss.size == 0:
            return
        start, stop = int(idx[0]), int(idx[-1]) + 1
        nb = self._neighbours(plan, idx[miss])                     # (F, D)
        need = np.unique(nb[nb >= 0])
        outside = need[(need < start) | (need >= stop)]
        S, n = q.shape[1], q.shape[2]
        if outside.size:
            qo, _sto, keepo = self._first_pass(plan, arm, outside)
        F, D = nb.shape
        NQ = np.zeros((F, D, S, n))
        NK = np.zeros((F, D, S), dtype=bool)
        ins = (nb >= start) & (nb < stop)
        r, c = np.nonzero(ins)
        NQ[r, c] = q[nb[r, c] - start]
        NK[r, c] = keep[nb[r, c] - start]
        r, c = np.nonzero((nb >= 0) & ~ins)
        if r.size:
            pos = np.searchsorted(outside, nb[r, c])
            NQ[r, c] = qo[pos]
            NK[r, c] = keepo[pos]
        NQ = NQ.reshape(F, D * S, n)
        NK = NK.reshape(F, D * S)
        has = NK.any(axis=1)
        if not has.any():
            return
        order = np.argsort(~NK[has], axis=1, kind="stable")[:, :S]      # kept solutions first
        seeds = np.take_along_axis(NQ[has], order[:, :, None], axis=1)
        counts = np.minimum(NK[has].sum(axis=1), S)
        rows = miss[has]
        for c in np.unique(counts):  # one batch per seed count: no padded duplicate seeds
            sel = counts == c
            r_ = rows[sel]
            Tb = self._targets(plan, self.points_at(plan, idx[r_]))[:, 0]
            res = solve_ik(arm, Tb, seeds=0, q_seed=np.ascontiguousarray(seeds[sel, :c]), orientation=s.rule,
                           all_solutions=True)
            k2 = self._clear(plan, arm, res.q, distinct_solutions(arm, res.q, res.status, s.distinct_tol))
            got = k2.any(axis=1)
            g = r_[got]
            q[g, :c] = res.q[got]
            status[g, :c] = res.status[got]
            keep[g] = False
            keep[g, :c] = k2[got]

    def compute_chunk(self, plan, arm, cell, chunk) -> dict:
        from ..kinematics import Arm
        from ..kinematics.ik import CONVERGED, solve_ik
        from ..measures import joint_limit_penalty, pose_measures

        s = plan.settings
        idx = np.arange(chunk.start, chunk.stop)
        P = self.points_at(plan, idx)
        M = len(P)
        n = arm.n
        marm = Arm(replace(arm.model, mount=s.mount))
        if s.orientation == "sampled":
            Tb = self._targets(plan, P)
            res = solve_ik(arm, Tb, seeds=s.seeds, orientation=s.rule)  # (M, K)
            q, ok, status = res.q, res.status == CONVERGED, res.status
            if s.collisions.on:
                q, ok = self._clear_sampled(plan, arm, Tb, q, ok)
            reach_index = ok.mean(axis=1)
        else:
            q, status, ok = self._first_pass(plan, arm, idx)                     # (M, S, ...)
            if s.neighbour_seeds and M:
                self._neighbour_pass(plan, arm, idx, q, status, ok)
            count = ok.sum(axis=1).astype(np.int16)
        meas = pose_measures(marm, q, frame=s.frame, rows=s.rows, length=s.length, world=True)
        key = np.where(ok, sign_of_better(s.best) * meas[s.best], -np.inf)
        pick = np.argmax(key, axis=1)
        reached = ok.any(axis=1)
        rows = np.arange(M)
        qb = q[rows, pick]
        out = {}
        for name in ("manipulability", "inverse_condition", "condition", "min_sv"):
            out[name] = np.where(reached, meas[name][rows, pick], np.nan)
        out["limit_margin"] = np.where(reached, arm.limit_margin(qb), np.nan)
        pen = joint_limit_penalty(qb, arm.model.lower, arm.model.upper)
        out["limit_aware_manipulability"] = np.where(reached, pen * out["manipulability"], np.nan)
        bits = _ik_status_bits(status)
        if s.collisions.on:  # converged somewhere, but no solution with the clearance asked
            hit = ~reached & np.any(status == CONVERGED, axis=1)
            bits = np.where(hit, COLLIDING, bits)
        bits = np.where(reached, REACHED, bits).astype(np.uint8)
        bits |= np.where(reached & (out["inverse_condition"] < s.near_singular), NEAR_SINGULAR, 0).astype(np.uint8)
        out["status"] = bits
        if s.orientation == "sampled":
            out["reachability"] = reach_index
        else:
            out["solutions"] = count
        if s.collisions.on:
            out["clearance"] = self._clearance_field(plan, arm, cell, q, status, qb, reached, hit)
        out["q"] = np.where(reached[:, None], qb, np.nan)
        out["target"] = P
        return out

    @staticmethod
    def _clearance_field(plan, arm, cell, q, status, qb, reached, hit):
        """Clearance (m) per point: at the best solution where reached; where only colliding
        solutions reach it, the largest clearance among the converged ones; NaN elsewhere."""
        from ..kinematics.ik import CONVERGED

        cs, mount = plan.settings.collisions, plan.settings.mount
        d = np.full(len(qb), np.nan)
        if reached.any():
            d[reached] = collide.clear_of(arm, qb[reached], cell, cs, mounts=mount)[0]
        if hit.any():
            conv = status[hit] == CONVERGED
            dh = collide.clear_of(arm, np.where(conv[..., None], q[hit], 0.0), cell, cs, mounts=mount)[0]
            d[hit] = np.max(np.where(conv, dh, -np.inf), axis=1)
        return d

    def _clear_sampled(self, plan, arm, Tb, q, ok):
        """Sampled orientations: where the first converged solution collides, run every seed of
        those targets again and keep the first clear one (one IK call, one clearance call)."""
        from ..kinematics.ik import CONVERGED, solve_ik

        s = plan.settings
        cell = plan.data.get("cell")
        _d, good = collide.clear_of(arm, np.where(np.isfinite(q), q, 0.0), cell, s.collisions, mounts=s.mount)
        redo = ok & ~good
        if not redo.any():
            return q, ok
        r, c = np.nonzero(redo)
        res = solve_ik(arm, np.ascontiguousarray(Tb[r, c]), seeds=s.seeds, orientation=s.rule, all_solutions=True)
        conv = res.status == CONVERGED
        _dk, gk = collide.clear_of(arm, np.where(np.isfinite(res.q), res.q, 0.0), cell, s.collisions, mounts=s.mount)
        pick, found = collide.first_clear(conv & gk)
        q, ok = q.copy(), ok.copy()
        q[r, c] = res.q[np.arange(len(r)), pick]
        ok[r, c] = found
        return q, ok

    def summarise(self, plan, arrays) -> dict:
        s = plan.settings
        st = np.asarray(arrays["status"])
        done = st != 0
        reached = (st & REACHED) != 0
        inv = np.asarray(arrays["inverse_condition"], float)
        cols = {"points": np.array([int(done.sum())]),
                "reached": np.array([int(reached.sum())]),
                "reached_fraction": np.array([float(reached.sum() / max(1, done.sum()))]),
                "out_of_reach": np.array([int(((st & OUT_OF_REACH) != 0).sum())]),
                "blocked_by_limits": np.array([int(((st & LIMITS) != 0).sum())]),
                "not_converged": np.array([int(((st & NOT_CONVERGED) != 0).sum())]),
                "near_singular": np.array([int(((st & NEAR_SINGULAR) != 0).sum())])}
        if s.collisions.on:
            cols["colliding_only"] = np.array([int(((st & COLLIDING) != 0).sum())])
            clr = np.asarray(arrays["clearance"], float)
            if reached.any():
                cols["min_clearance"] = np.array([float(np.nanmin(clr[reached]))])
        if reached.any():
            cols["min_inverse_condition"] = np.array([float(np.nanmin(inv[reached]))])
            cols["median_inverse_condition"] = np.array([float(np.nanmedian(inv[reached]))])
        note = f"orientation rule: {s.orientation}"
        if s.collisions.on:
            note += (f"; a point counts as reached only by a solution with at least "
                     f"{s.collisions.clearance * 1000:g} mm clearance (colliding_only: reached only by colliding "
                     f"solutions; min_clearance in m)")
        tables = {"reach": Table("Reach summary", cols, {}, note)}
        if reached.any():
            tgt = np.asarray(arrays["target"], float)
            idx = np.where(reached)[0]
            worst = idx[np.argsort(inv[idx], kind="stable")[:10]]
            tables["worst"] = Table("Reached points closest to a singularity",
                                    {"x": tgt[worst, 0] * 1000, "y": tgt[worst, 1] * 1000, "z": tgt[worst, 2] * 1000,
                                     "inverse_condition": inv[worst]},
                                    {"x": "mm", "y": "mm", "z": "mm", "inverse_condition": ""},
                                    "lowest inverse condition at the best solution found")
        return tables


# ----------------------------------------------------------------------------------------------


def bench_reach_slice(quick: bool = False) -> dict:
    """Time of a 200 x 200 reach slice with a fixed tool orientation on demo_s6 (in-process,
    all kernel threads): vertical plane through the first axis, tool pointing down."""
    from ..benchutil import demo_arm_path
    from ..kinematics.arm import load_arm
    from .spec import StudySpec

    path = demo_arm_path("demo_s6.toml")
    arm = load_arm(path)
    side = 60 if quick else 200
    spec = StudySpec(kind="reach_slice", arm=str(path), name="bench reach slice",
                     settings={"grid": "plane", "plane": "xz", "at": 0.0, "u": [-1.4, 1.4], "v": [-0.6, 1.8],
                               "steps": [side, side], "orientation": "fixed", "rpy": [180, 0, 0], "seeds": 8})
    kind = ReachSlice()
    plan = kind.plan(spec, arm, None)
    kind.compute_chunk(plan, arm, None, Chunk(0, 0, 8))  # compile / load kernels outside the timing
    t = time.perf_counter()
    parts = [kind.compute_chunk(plan, arm, None, c) for c in plan.chunks]
    dt = time.perf_counter() - t
    st = np.concatenate([p["status"] for p in parts])
    sol = np.concatenate([p["solutions"] for p in parts])
    reached = (st & REACHED) != 0
    return {
        "name": "reach_slice",
        "metrics": {"points": plan.cells, "seconds": dt, "points_per_s": plan.cells / dt,
                    "reached_fraction": float(reached.mean()),
                    "mean_solutions_where_reached": float(sol[reached].mean()) if reached.any() else 0.0,
                    "out_of_reach_points": int(((st & OUT_OF_REACH) != 0).sum()),
                    "limit_blocked_points": int(((st & LIMITS) != 0).sum()),
                    "not_converged_points": int(((st & NOT_CONVERGED) != 0).sum())},
        "ratios": {},
        "bars": {},
        "notes": [f"{side} x {side} points of the xz plane through the first axis, x -1.4..1.4 m, z -0.6..1.8 m, "
                  "tool pointing down (rpy 180, 0, 0), 8 seeds, every seed run (distinct solutions counted), "
                  "measures at the best solution; compute only (no runner, no file)"],
    }
