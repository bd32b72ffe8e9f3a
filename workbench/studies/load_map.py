"""Load map: the largest payload the arm can hold at the TCP, over a joint grid or a cell slice.

Per grid cell the arm's pose is fixed (a joint grid), or found by IK of a point of a plane in the
cell (a slice: every seed runs and the reached solution that holds the most is kept); the payload is :func:`workbench.measures.max_payload`: the largest point mass m at
the TCP with |tau_g,i(q) + m b_i(q)| <= tau_max,i for every joint i, where tau_g are the gravity
torques of the arm's own links and tool (centre-of-mass Jacobians) and b_i = -J_v,tcp[:, i] . g.
Statics only: no accelerations, no friction.

The arm file must give every joint a ``mass`` (with ``com``) and a ``max_effort``; otherwise the
study refuses to start and names the first joint that lacks them.

Settings (study file, ``[settings]``)::

    grid = "joints"                 # or "plane"
    # grid = "joints": 1 or 2 joints over ranges, the others at `pose` (default: home)
    joints = ["j2", "j3"]
    ranges = [[-140, 90], [-120, 160]]  # degrees (or m for prismatic)
    steps = [61, 61]                    # grid points per joint
    pose = [0, -90, 90, 0, 45, 0]       # optional, degrees
    # grid = "plane": points of a cell plane, IK from several seeds
    plane = "xz"                        # "xy", "xz" or "yz" of the cell frame
    u = [0.2, 1.4]                      # range of the first plane coordinate (m)
    v = [0.0, 1.2]                      # range of the second (m)
    at = 0.0                            # the third coordinate (m)
    step = 0.05                         # grid step (m)
    orientation = "fixed"               # rule for the tool: "fixed" (rpy), "axis" (axis), "free"
    rpy = [180, 0, 0]
    seeds = 8
    gravity = [0, 0, -9.81]             # optional, m/s^2 in the cell frame
    # what the tool carries and does (defaults: the cell's [requirements], else nothing)
    payload_com = [0, 0, 0.1]           # m, tool frame: where the payload's centre of mass sits
    force = [0, 0, 150]                 # N the tool exerts while holding it (and moment, N m)
    wrench_frame = "tool"               # "tool" or "cell"
    # mode = "force": the largest force the tool can exert along `direction` instead
    mode = "payload"                    # or "force"
    direction = [0, 0, -1]              # cell frame (or direction_frame = "tool")
    payload = 12.0                      # force mode: the payload held meanwhile (kg; default the cell's)

In payload mode the payload is :func:`workbench.measures.largest_payload` at the centre of mass
``payload_com`` with the tool wrench added; in force mode the field ``force`` is
:func:`workbench.measures.largest_force` along ``direction`` with the payload held (the exact
box-constrained answer: each joint inside its own torque limit), next to the payload field.
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass, replace
from typing import Mapping

import numpy as np

from ..arm.transforms import inverse_transform, make_transform
from ..limits import grid_count
from ..quantities import quantity
from .base import MAX_SEEDS, Axis, Field, Plan, StudyError, StudyKind, Table
from . import collide

__all__ = ["LoadMap", "LoadSettings", "payload_of_poses", "check_masses", "COLLIDING_TEXT"]

#: meaning of bit 2 of the ``reached`` field
COLLIDING_TEXT = ("collides: closer than the clearance setting (plane: reached only by such solutions; joint grid: "
                  "the grid's pose)")

_DEG = math.pi / 180.0
_KEYS = {"grid", "joints", "ranges", "steps", "pose", "plane", "u", "v", "at", "step", "orientation", "rpy",
         "axis", "seeds", "gravity", "mount_xyz", "mount_rpy", "payload_com", "force", "moment", "wrench_frame",
         "mode", "direction", "direction_frame", "payload"} | collide.KEYS
_PLANES = {"xy": (0, 1, 2), "xz": (0, 2, 1), "yz": (1, 2, 0)}


@dataclass(frozen=True)
class LoadSettings:
    """Validated load-map settings (SI)."""

    grid: str = "joints"
    joints: tuple = ()
    ranges: tuple = ()
    steps: tuple = ()
    pose: np.ndarray | None = None
    plane: str = "xz"
    u: tuple = (0.0, 1.0)
    v: tuple = (0.0, 1.0)
    at: float = 0.0
    step: float = 0.05
    orientation: str = "fixed"
    rotation: np.ndarray | None = None
    seeds: int = 8
    gravity: tuple = (0.0, 0.0, -9.81)
    mount: np.ndarray | None = None
    mode: str = "payload"
    payload_com: tuple | None = None
    force: tuple | None = None
    moment: tuple | None = None
    wrench_frame: str | None = None
    direction: tuple = (0.0, 0.0, -1.0)
    direction_frame: str = "world"
    payload: float | None = None
    collisions: collide.CollisionSettings = collide.CollisionSettings(False)


def check_masses(arm, where: str) -> None:
    """Refuse an arm without link masses or joint torque limits (one line naming the joint)."""
    m = arm.model
    for k in range(m.n):
        if not np.isfinite(m.masses[k]):
            raise StudyError(f"{where}: arm {m.name!r} ({m.path or 'built in code'}): joint {k + 1} "
                             f"({m.names[k]!r}) has no 'mass'; a load map needs link masses (mass, com) "
                             f"for every joint")
        if not np.isfinite(m.max_effort[k]):
            raise StudyError(f"{where}: arm {m.name!r} ({m.path or 'built in code'}): joint {k + 1} "
                             f"({m.names[k]!r}) has no 'max_effort'; a load map needs the torque limit "
                             f"of every joint")


def _nums(v, where, key, size=None):
    if not isinstance(v, list) or (size is not None and len(v) != size) or not all(
            isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x) for x in v):
        want = f"a list of {size} numbers" if size else "a list of numbers"
        raise StudyError(f"{where} {key}: expected {want}, got {v!r}")
    return [float(x) for x in v]


def _validate(settings: Mapping, arm, cell, where: str) -> LoadSettings:
    unknown = sorted(set(settings) - _KEYS)
    if unknown:
        raise StudyError(f"{where}: unknown key '{unknown[0]}'; allowed keys: {', '.join(sorted(_KEYS))}")
    out = {}
    grid = settings.get("grid", "joints")
    if grid not in ("joints", "plane"):
        raise StudyError(f"{where} grid: expected 'joints' or 'plane', got {grid!r}")
    out["grid"] = grid
    m = arm.model
    if "gravity" in settings:
        g = _nums(settings["gravity"], where, "gravity", 3)
        if np.linalg.norm(g) == 0:
            raise StudyError(f"{where} gravity: expected a non-zero vector (m/s^2), got {g!r}")
        out["gravity"] = tuple(g)
    if "mount_xyz" in settings or "mount_rpy" in settings:
        out["mount"] = make_transform(np.array(_nums(settings.get("mount_xyz", [0, 0, 0]), where, "mount_xyz", 3)),
                                      np.array(_nums(settings.get("mount_rpy", [0, 0, 0]), where, "mount_rpy", 3))
                                      * _DEG)
    mode = settings.get("mode", "payload")
    if mode not in ("payload", "force"):
        raise StudyError(f"{where} mode: expected 'payload' or 'force', got {mode!r}")
    out["mode"] = mode
    for key in ("payload_com", "force", "moment"):
        if key in settings:
            out[key] = tuple(_nums(settings[key], where, key, 3))
    for key, default in (("wrench_frame", None), ("direction_frame", "world")):
        if key in settings:
            f = settings[key]
            if f not in ("tool", "cell"):
                raise StudyError(f"{where} {key}: expected 'tool' or 'cell', got {f!r}")
            out[key] = "tool" if f == "tool" else "world"
    if "direction" in settings:
        d = _nums(settings["direction"], where, "direction", 3)
        if np.linalg.norm(d) == 0:
            raise StudyError(f"{where} direction: expected a non-zero direction, got {d!r}")
        out["direction"] = tuple(d)
    if "payload" in settings:
        v = settings["payload"]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not (math.isfinite(v) and v >= 0):
            raise StudyError(f"{where} payload: expected a mass >= 0 (kg), got {v!r}")
        out["payload"] = float(v)
    if grid == "joints":
        joints = settings.get("joints")
        if not isinstance(joints, list) or not 1 <= len(joints) <= 2:
            raise StudyError(f"{where} joints: expected a list of 1 or 2 joint names, got {joints!r}")
        idx = []
        for j in joints:
            try:
                idx.append(m.joint_index(j))
            except Exception:
                raise StudyError(f"{where} joints: no joint named {j!r}; joints are {', '.join(m.names)}") from None
        if len(set(idx)) != len(idx):
            raise StudyError(f"{where} joints: a joint is named twice in {joints!r}")
        ranges = settings.get("ranges")
        if not isinstance(ranges, list) or len(ranges) != len(idx):
            raise StudyError(f"{where} ranges: expected {len(idx)} [lower, upper] pairs, got {ranges!r}")
        rr = []
        for k, r in zip(idx, ranges):
            lo, hi = _nums(r, where, "ranges", 2)
            if not lo < hi:
                raise StudyError(f"{where} ranges: lower {lo:g} must be below upper {hi:g}")
            sc = _DEG if m.joints[k].revolute else 1.0
            rr.append((lo * sc, hi * sc))
        steps = settings.get("steps", [41] * len(idx))
        if (not isinstance(steps, list) or len(steps) != len(idx)
                or not all(isinstance(x, int) and not isinstance(x, bool) and 2 <= x <= 2001 for x in steps)):
            raise StudyError(f"{where} steps: expected {len(idx)} integers between 2 and 2001, got {steps!r}")
        pose = None
        if "pose" in settings:
            p = _nums(settings["pose"], where, "pose", m.n)
            pose = np.array([v * (_DEG if j.revolute else 1.0) for v, j in zip(p, m.joints)])
        out.update(joints=tuple(idx), ranges=tuple(rr), steps=tuple(steps), pose=pose)
    else:
        plane = settings.get("plane", "xz")
        if plane not in _PLANES:
            raise StudyError(f"{where} plane: expected one of xy, xz, yz, got {plane!r}")
        u = _nums(settings.get("u", [0.0, 1.0]), where, "u", 2)
        v = _nums(settings.get("v", [0.0, 1.0]), where, "v", 2)
        for key, r in (("u", u), ("v", v)):
            if r[1] < r[0]:
                raise StudyError(f"{where} {key}: empty range: {r[0]:g} > {r[1]:g}")
        at = settings.get("at", 0.0)
        if isinstance(at, bool) or not isinstance(at, (int, float)) or not math.isfinite(at):
            raise StudyError(f"{where} at: expected a finite number (m), got {at!r}")
        step = settings.get("step", 0.05)
        if (isinstance(step, bool) or not isinstance(step, (int, float)) or not math.isfinite(step)
                or not step > 0):
            raise StudyError(f"{where} step: expected a finite positive number (m), got {step!r}")
        cells = (grid_count(u[0], u[1], step, f"{where} step", error=StudyError)
                 * grid_count(v[0], v[1], step, f"{where} step", error=StudyError))
        if cells > 4_000_000:
            raise StudyError(f"{where} step: {cells} grid points; at most 4 000 000 (use a larger step)")
        rule = settings.get("orientation", "fixed")
        if rule not in ("fixed", "axis", "free"):
            raise StudyError(f"{where} orientation: expected fixed, axis or free, got {rule!r}")
        R = np.eye(3)
        if rule == "fixed":
            R = make_transform(np.zeros(3), np.array(_nums(settings.get("rpy", [180, 0, 0]), where, "rpy", 3)) * _DEG)[:3, :3]
        elif rule == "axis":
            from .cell import _tool_z_frame

            ax = np.array(_nums(settings.get("axis", [0, 0, -1]), where, "axis", 3))
            if np.linalg.norm(ax) == 0:
                raise StudyError(f"{where} axis: expected a direction, got {ax.tolist()!r}")
            R = _tool_z_frame(ax)
        seeds = settings.get("seeds", 8)
        if isinstance(seeds, bool) or not isinstance(seeds, int) or not 1 <= seeds <= MAX_SEEDS:
            raise StudyError(f"{where} seeds: expected an integer from 1 to {MAX_SEEDS}, got {seeds!r}")
        out.update(plane=plane, u=tuple(u), v=tuple(v), at=float(at), step=float(step), orientation=rule,
                   rotation=R, seeds=seeds)
    out["collisions"] = collide.collision_settings(settings, arm, where)
    return LoadSettings(**out)


def _mounted_arm(arm, s: LoadSettings, cell):
    from ..kinematics import Arm

    M = s.mount
    if M is None and cell is not None and getattr(cell, "placement", None) is not None:
        M = cell.placement
    if M is None:
        return arm
    return Arm(replace(arm.model, mount=np.asarray(M, float)))


def payload_of_poses(arm, q, gravity=(0.0, 0.0, -9.81), load=None):
    """Largest payload (kg) and the limiting joint for poses q (..., n) of a mounted arm.

    Without ``load`` the point mass at the TCP (:func:`workbench.measures.max_payload`); with a
    load (:func:`load_of`) the payload at its centre of mass with the tool wrench added
    (:func:`workbench.measures.largest_payload`; 0 where the arm is over a limit already).
    Gravity in the world / cell frame.
    """
    from ..measures import largest_payload, max_payload

    plain = load is None or (not np.any(load["com"]) and not np.any(load["force"] if load["force"] is not None else 0)
                             and not np.any(load["moment"] if load["moment"] is not None else 0))
    if plain:
        return max_payload(arm, q, g=np.asarray(gravity, float), world=True)
    m, j = largest_payload(arm, q, com=load["com"], force=load["force"], moment=load["moment"],
                           g=np.asarray(gravity, float), frame=load["frame"], world=True)
    return np.where(np.isnan(m), 0.0, m), j


def load_of(s: LoadSettings, cell) -> dict:
    """What the tool carries and does: the settings, else the cell's requirements (cell-wide)."""
    r = cell.requirements_for() if cell is not None and hasattr(cell, "requirements_for") else None
    pay = r.payload if r is not None else None
    com = np.array(s.payload_com, float) if s.payload_com is not None else (
        pay.com if pay is not None else np.zeros(3))
    force = np.array(s.force, float) if s.force is not None else (r.force if r is not None else None)
    moment = np.array(s.moment, float) if s.moment is not None else (r.moment if r is not None else None)
    frame = s.wrench_frame or (r.frame if r is not None else "tool")
    mass = s.payload if s.payload is not None else (pay.mass if pay is not None else 0.0)
    return {"com": com, "force": force, "moment": moment, "frame": frame, "mass": mass,
            "required": pay.mass if pay is not None else None}


class LoadMap(StudyKind):
    """Load map over a joint grid or a cell plane (see the module docstring)."""

    name = "load_map"
    title = "load map"
    needs_cell = False

    def default_settings(self, arm) -> dict:
        names = list(arm.model.names[1:3]) if arm.n >= 3 else [arm.model.names[0]]
        return {"grid": "joints", "joints": names, "ranges": [[-90, 90]] * len(names), "steps": [41] * len(names)}

    def validate(self, settings, arm, cell, where="settings"):
        check_masses(arm, where)
        s = _validate(settings or {}, arm, cell, where)
        if s.grid == "plane" and cell is None and s.mount is None:
            pass  # a plane in the arm's own world frame (its file mount) is fine
        return s

    def plan(self, spec, arm, cell, chunk_cells=None) -> Plan:
        where = f"{spec.where}: [settings]"
        s = self.validate(spec.settings, arm, cell, where)
        marm = _mounted_arm(arm, s, cell)
        n = arm.n
        if s.grid == "joints":
            axes = []
            for k, (lo, hi), st in zip(s.joints, s.ranges, s.steps):
                j = arm.model.joints[k]
                axes.append(Axis(j.name, np.linspace(lo, hi, st), "rad" if j.revolute else "m", f"joint {j.name}"))
            axes = tuple(reversed(axes)) if len(axes) == 2 else tuple(axes)  # rows: 2nd joint, cols: 1st
        else:
            a, b, _ = _PLANES[s.plane]
            us = s.u[0] + s.step * np.arange(int((s.u[1] - s.u[0]) / s.step + 1e-9) + 1)
            vs = s.v[0] + s.step * np.arange(int((s.v[1] - s.v[0]) / s.step + 1e-9) + 1)
            axes = (Axis("xyz"[b], vs, "m", f"cell {'xyz'[b]}"), Axis("xyz"[a], us, "m", f"cell {'xyz'[a]}"))
        load = load_of(s, cell)
        fields = (
            Field("payload", (), "float64", "kg", "largest payload at its centre of mass "
                  f"({', '.join(f'{v * 1000:g}' for v in load['com'])} mm from the TCP) within the joint torque limits"),
            Field("limiting_joint", (), "int32", "", "joint (0-based) whose torque limit sets the payload; -1 none",
                  kind="other", fill=-1),
            Field("own_load", (), "float64", "", quantity("own_load").description),
            Field("reached", (), "uint8", "", "1 where the pose exists (always 1 on a joint grid)", kind="status",
                  flags={1: "reached", 2: COLLIDING_TEXT}),
            Field("q", (n,), "float64", "rad", "pose of the grid cell", kind="pose"),
        )
        if s.collisions.on:
            fields += (Field("clearance", (), "float64", "m", "clearance (m) at the cell's pose (arm vs the cell's "
                             "obstacles and its own links)"),)
        if s.mode == "force":
            d = ", ".join(f"{v:g}" for v in s.direction)
            fields = (Field("force", (), "float64", "N", f"largest force along [{d}] ({'tool' if s.direction_frame == 'tool' else 'cell'} "
                            f"frame) within the joint torque limits, {load['mass']:g} kg payload held"),
                      Field("force_joint", (), "int32", "", "joint (0-based) whose torque limit sets the force; -1 none",
                            kind="other", fill=-1)) + fields
        data = {"mounted_model": marm.model, "pose": s.pose if s.pose is not None else arm.model.home_q,
                "load": load, "result_attrs": collide.result_attrs(s.collisions)}
        return Plan(self.name, spec, s, axes, fields, chunk_cells=chunk_cells or 4096, data=data)

    def compute_chunk(self, plan, arm, cell, chunk) -> dict:
        from ..kinematics import Arm
        from ..measures import gravity_torques

        s = plan.settings
        marm = Arm(plan.data["mounted_model"])
        idx = np.arange(chunk.start, chunk.stop)
        sub = np.unravel_index(idx, plan.shape)
        n = arm.n
        if s.grid == "joints":
            q = np.tile(plan.data["pose"], (len(idx), 1))
            for axis, ii in zip(plan.axes, sub):
                q[:, marm.model.names.index(axis.name)] = axis.values[ii]
            reached = np.ones(len(idx), bool)
            hit = np.zeros(len(idx), bool)
            if s.collisions.on:  # the grid gives the pose: flag it where it collides, keep its payload
                hit = ~collide.clear_of(marm, q, cell, s.collisions)[1]
        else:
            from .mount_search import reached_check

            a, b, c = _PLANES[s.plane]
            P = np.zeros((len(idx), 3))
            P[:, b] = plan.axes[0].values[sub[0]]
            P[:, a] = plan.axes[1].values[sub[1]]
            P[:, c] = s.at
            T = np.tile(np.eye(4), (len(idx), 1, 1))
            T[:, :3, :3] = s.rotation
            T[:, :3, 3] = P
            Tb = np.einsum("ij,njk->nik", inverse_transform(marm.model.mount), T)
            # every seed's solution; per point the reached one that holds the most (as a reach
            # slice keeps the best measures over the solutions found)
            from ..kinematics.ik import solve_ik

            res = solve_ik(marm, Tb, seeds=s.seeds, orientation=s.orientation, all_solutions=True)
            K = res.q.shape[1]
            qK = np.where(np.isfinite(res.q), res.q, 0.0).reshape(-1, n)
            okK = reached_check(marm, qK, np.repeat(Tb, K, axis=0), s.orientation, 1e-4, 1e-3)
            anyK = okK.reshape(-1, K).any(axis=1)
            if s.collisions.on:  # only solutions with the clearance asked (one batched call)
                okK = okK & collide.clear_of(marm, qK, cell, s.collisions)[1]
            mK, _ = payload_of_poses(marm, qK, s.gravity, plan.data.get("load"))
            pick = np.argmax(np.where(okK, mK, -1.0).reshape(-1, K), axis=1)
            rows = np.arange(len(idx))
            q = qK.reshape(-1, K, n)[rows, pick]
            reached = okK.reshape(-1, K)[rows, pick]
            hit = anyK & ~reached
        load = plan.data.get("load")
        mass, lim = payload_of_poses(marm, q, s.gravity, load)
        tg = gravity_torques(marm, q, g=np.asarray(s.gravity), world=True)
        own = np.max(np.abs(tg) / marm.model.max_effort, axis=-1)
        mass = np.where(reached, mass, np.nan)
        out = {"payload": mass, "limiting_joint": np.where(reached, lim, -1).astype(np.int32),
               "own_load": np.where(reached, own, np.nan),
               "reached": (reached.astype(np.uint8) | np.where(hit, 2, 0)).astype(np.uint8),
               "q": q.reshape(len(idx), n)}
        if s.collisions.on:
            out["clearance"] = np.where(reached | hit, collide.clear_of(marm, q, cell, s.collisions)[0], np.nan)
        if s.mode == "force":
            from ..measures import Payload, largest_force

            pay = Payload(load["mass"], load["com"]) if load["mass"] else None
            f, fj = largest_force(marm, q, np.array(s.direction), force=load["force"], moment=load["moment"],
                                  payload=pay, g=np.asarray(s.gravity), frame=s.direction_frame,
                                  wrench_frame=load["frame"], world=True)
            out["force"] = np.where(reached, np.where(np.isnan(f), 0.0, f), np.nan)
            out["force_joint"] = np.where(reached, fj, -1).astype(np.int32)
        return out

    def summarise(self, plan, arrays) -> dict:
        names = plan.data["mounted_model"].names
        pay = np.asarray(arrays["payload"], float)
        lim = np.asarray(arrays["limiting_joint"])
        ok = np.isfinite(pay)
        if not ok.any():
            return {"load": Table("Payload summary", {"reached_cells": np.array([0])}, {}, "no grid cell reached")}
        fin = ok & np.isfinite(pay) & (pay < np.inf)
        counts = [int(((lim == k) & ok).sum()) for k in range(len(names))]
        cols = {"reached_cells": np.array([int(ok.sum())]),
                "min_payload": np.array([float(np.min(pay[ok]))]),
                "median_payload": np.array([float(np.median(pay[fin])) if fin.any() else np.nan]),
                "max_payload": np.array([float(np.max(pay[fin])) if fin.any() else np.nan]),
                "cannot_hold_itself": np.array([int((ok & (pay <= 0)).sum())])}
        tables = {"load": Table("Payload summary", cols, {"min_payload": "kg", "median_payload": "kg",
                                                          "max_payload": "kg"},
                                "statics only: gravity of the links and tool, joint torque limits")}
        load = plan.data.get("load") or {}
        if load.get("required") is not None:
            tables["requirements"] = Table("Requirements from the cell",
                                           {"payload": np.array([float(load["required"])]),
                                            "com_mm": np.array([", ".join(f"{v * 1000:g}" for v in load["com"])],
                                                               dtype=object)},
                                           {"payload": "kg"}, "the payload the cell asks the arm to hold")
        if "force" in arrays:
            f = np.asarray(arrays["force"], float)
            okf = np.isfinite(f)
            fin_f = okf & (f < np.inf)
            tables["force"] = Table("Largest force along the direction",
                                    {"min_force": np.array([float(np.min(f[okf])) if okf.any() else np.nan]),
                                     "median_force": np.array([float(np.median(f[fin_f])) if fin_f.any() else np.nan]),
                                     "max_force": np.array([float(np.max(f[fin_f])) if fin_f.any() else np.nan])},
                                    {"min_force": "N", "median_force": "N", "max_force": "N"},
                                    "every joint inside its own torque limit (exact), gravity and the payload included")
        tables["limiting"] = Table("Which joint limits the payload",
                                   {"joint": np.array(names, dtype=object), "cells": np.array(counts)}, {},
                                   "number of grid cells where each joint's torque limit sets the payload")
        return tables


def bench_load_map(quick: bool = False) -> dict:  # pragma: no cover - convenience, not in ENTRIES
    from ..kinematics import load_arm
    from ..benchutil import demo_arm_path
    from .base import Chunk
    from .spec import StudySpec

    arm = load_arm(demo_arm_path())
    spec = StudySpec(kind="load_map", arm=str(demo_arm_path()),
                     settings={"grid": "joints", "joints": ["j2", "j3"], "ranges": [[-140, 90], [-120, 160]],
                               "steps": [101, 101]})
    kind = LoadMap()
    plan = kind.plan(spec, arm, None)
    t = time.perf_counter()
    kind.compute_chunk(plan, arm, None, Chunk(0, 0, plan.cells))
    dt = time.perf_counter() - t
    return {"name": "load map", "metrics": {"cells": plan.cells, "seconds": dt}, "bars": {}}
