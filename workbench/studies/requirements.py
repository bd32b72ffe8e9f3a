"""What the work asks of the arm: the cell file's ``[requirements]`` and the check at a pose.

Cell-file schema (every key optional; lengths in the cell's ``length_unit``)::

    [requirements]                 # cell-wide defaults
    force = [0, 0, 150]            # N: the force the tool EXERTS on the part (here: press 150 N along tool z)
    moment = [0, 0, 0]             # N m, about the TCP
    wrench_frame = "tool"          # frame of force and moment: "tool" (default) or "cell"
    payload = 12.0                 # kg held by the tool (gripper + part beyond the arm file's tool)
    payload_com = [0, 0, 0.1]      # centre of mass offset from the TCP, tool frame (length unit)
    payload_inertia = [0.2, 0.2, 0.1]  # kg m^2 about the centre of mass: 3 principal values,
                                   # [ixx, iyy, izz, ixy, ixz, iyz] or 3 rows (kept; statics does not use it)
    speed = 150                    # work points: tool speed (mm/s) the pose must allow along `direction`
    direction = [0, 0, -1]         # cell frame; default the point's tool z axis (its approach)
    time = 8.0                     # paths: required time (s) to run the path

    [[point]]
    name = "press"
    requirements = {force = [0, 0, 200]}   # per point: overrides key by key (or a [point.requirements] table)

    [[path]]
    name = "seam"
    speed = 150                    # the path's tool speed (mm/s), as before
    requirements = {time = 6.0, payload = 5.0}

A per-point or per-path table overrides the cell-wide keys it names; ``force = [0, 0, 0]`` or
``payload = 0`` switch a default off. ``speed`` and ``direction`` apply to work points (a path's
speed is its own ``speed``), ``time`` to paths.

:func:`requirement_check` checks a set of requirements at poses: holding torques (arm weight,
payload, tool wrench; :func:`workbench.measures.holding_torques`) against ``max_effort``, and the
largest tool speed along the asked direction within ``max_speed``.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from ..errors import WorkbenchError
from ..measures import Payload

__all__ = ["Requirements", "RequirementCheck", "requirement_check", "parse_requirements", "REQUIREMENT_KEYS",
           "largest_tool_speed"]

REQUIREMENT_KEYS = {"force", "moment", "wrench_frame", "payload", "payload_com", "payload_inertia", "speed",
                    "direction", "time"}
_FRAMES = {"tool": "tool", "cell": "world", "world": "world"}


@dataclass(frozen=True, eq=False)
class Requirements:
    """Requirements of one work point or path (SI units).

    Attributes
    ----------
    force, moment : (3,) ndarray or None
        The wrench the tool exerts on its surroundings at the TCP (N, N m about the TCP).
    frame : {"tool", "world"}
        Frame of ``force`` and ``moment`` ("world" is the cell frame).
    payload : Payload or None
        Mass held by the tool with its centre of mass offset (tool frame).
    speed : float or None
        Tool speed (m/s) a work point's pose must allow along ``direction``.
    direction : (3,) ndarray or None
        Unit direction of that speed in the cell frame (None: the tool z axis at the pose).
    time : float or None
        Required time (s) for a path.
    """

    force: np.ndarray | None = None
    moment: np.ndarray | None = None
    frame: str = "tool"
    payload: Payload | None = None
    speed: float | None = None
    direction: np.ndarray | None = None
    time: float | None = None

    @property
    def loads(self) -> bool:
        """True when a tool wrench or a payload is asked."""
        return bool((self.force is not None and np.any(self.force)) or (self.moment is not None and np.any(self.moment))
                    or (self.payload is not None and self.payload.mass > 0))

    @property
    def empty(self) -> bool:
        return not self.loads and self.speed is None and self.time is None

    def describe(self) -> str:
        """Plain words, e.g. "force [0, 0, 150] N (tool), payload 12 kg at [0, 0, 100] mm"."""
        parts = []
        fr = "tool" if self.frame == "tool" else "cell"
        if self.force is not None and np.any(self.force):
            parts.append(f"force [{', '.join(f'{v:g}' for v in self.force)}] N ({fr} frame)")
        if self.moment is not None and np.any(self.moment):
            parts.append(f"moment [{', '.join(f'{v:g}' for v in self.moment)}] N m ({fr} frame)")
        if self.payload is not None and self.payload.mass > 0:
            parts.append(f"payload {self.payload.mass:g} kg at [{', '.join(f'{v * 1000:g}' for v in self.payload.com)}]"
                         f" mm from the TCP")
        if self.speed is not None:
            parts.append(f"tool speed {self.speed * 1000:g} mm/s")
        if self.time is not None:
            parts.append(f"time {self.time:g} s")
        return ", ".join(parts) if parts else "none"


def parse_requirements(ctx, tbl, where, length_scale, base=None, kind="cell"):
    """Parse one requirements table (a dict from TOML) over ``base`` (a :class:`Requirements`).

    ``ctx`` is the cell reader's error context (``ctx.err(msg, table, index, key)``); ``where`` is
    ``(table, index)`` for its messages (e.g. ``("requirements", None)`` or ``("point", 3)``; for a
    point or path the keys are inside its ``requirements`` key). ``kind`` is "cell", "point" or "path".
    """
    table, index = where
    inner = table != "requirements"

    def err(msg, key):
        k = f"requirements.{key}" if inner else key
        e = ctx.err(msg, table, index, k)
        if inner and "(line" not in str(e):  # inline tables: point at the 'requirements' line instead
            e2 = ctx.err(msg, table, index, "requirements")
            e = type(e2)(str(e2).replace("'requirements'", f"'requirements.{key}'", 1))
        return e

    if not isinstance(tbl, dict):
        raise ctx.err(f"expected a table of requirements (keys: {', '.join(sorted(REQUIREMENT_KEYS))}), got "
                      f"{tbl!r}", table, index, "requirements" if inner else None)
    unknown = sorted(set(tbl) - REQUIREMENT_KEYS)
    if unknown:
        raise err(f"unknown requirement; allowed keys: {', '.join(sorted(REQUIREMENT_KEYS))}", unknown[0])

    def num(key, positive=False, nonneg=False):
        v = tbl[key]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(float(v)):
            raise err(f"expected a finite number, got {v!r}", key)
        v = float(v)
        if positive and v <= 0:
            raise err(f"expected a number > 0, got {v:g}", key)
        if nonneg and v < 0:
            raise err(f"expected a number >= 0, got {v:g}", key)
        return v

    def vec(key, size=3):
        v = tbl[key]
        if (not isinstance(v, list) or len(v) != size
                or not all(isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(float(x))
                           for x in v)):
            raise err(f"expected a list of {size} finite numbers, got {v!r}", key)
        return np.array(v, dtype=float)

    r = base if base is not None else Requirements()
    ch = {}
    if "force" in tbl:
        ch["force"] = vec("force")
    if "moment" in tbl:
        ch["moment"] = vec("moment")
    if "wrench_frame" in tbl:
        f = tbl["wrench_frame"]
        if f not in ("tool", "cell"):
            raise err(f"expected 'tool' or 'cell', got {f!r}", "wrench_frame")
        ch["frame"] = _FRAMES[f]
    if any(k in tbl for k in ("payload", "payload_com", "payload_inertia")):
        old = r.payload
        mass = num("payload", nonneg=True) if "payload" in tbl else (old.mass if old else None)
        if mass is None:
            raise err("a payload centre of mass or inertia needs 'payload' (kg) too", next(
                k for k in ("payload_com", "payload_inertia") if k in tbl))
        com = vec("payload_com") * length_scale if "payload_com" in tbl else (old.com if old else None)
        inertia = old.inertia if old else None
        if "payload_inertia" in tbl:
            inertia = tbl["payload_inertia"]
        try:
            ch["payload"] = Payload(mass, com, inertia)
        except WorkbenchError as exc:
            key = "payload_inertia" if "inertia" in str(exc) else ("payload_com" if " com" in str(exc) else "payload")
            raise err(str(exc).split(": ", 1)[-1], key) from None
    if "speed" in tbl:
        if kind == "path":
            raise err("a path's tool speed is its own 'speed' key (mm/s), not a requirement", "speed")
        ch["speed"] = num("speed", positive=True) * 1e-3
    if "direction" in tbl:
        if kind == "path":
            raise err("'direction' applies to work points (the direction of their tool speed)", "direction")
        d = vec("direction")
        n = float(np.linalg.norm(d))
        if n < 1e-12:
            raise err("zero-length direction; expected a direction in the cell frame", "direction")
        ch["direction"] = d / n
    if "time" in tbl:
        if kind == "point":
            raise err("'time' applies to paths (the required time to run one)", "time")
        ch["time"] = num("time", positive=True)
    return replace(r, **ch)


# ----------------------------------------------------------------------------------------------
# the check at poses


def largest_tool_speed(arm, q, direction, max_speed=None, rows="translation", world=True):
    """Largest tool speed (m/s) along ``direction`` (cell frame, (3,) or (..., 3)) at poses ``q``
    with every joint inside its speed limit.

    The joint motion is the least-squares one, q_dot = J^+ [d; 0] for ``rows="full"`` (the tool
    keeps its orientation) or J_v^+ d for ``rows="translation"``; each joint allows
    s <= max_speed_i / |q_dot_i|, so the answer is the smallest of these. For an arm with more
    joints than rows this is the minimum-norm motion, not the best of all joint motions (which
    would be a small LP); it is then a lower bound. Returns (speed (...), limiting joint (...));
    ``inf`` / -1 where no joint moves, 0 where the direction cannot be followed (singular:
    the least-squares motion misses it by more than 1e-6 of the asked speed).
    """
    lim = np.asarray(arm.model.max_speed if max_speed is None else max_speed, dtype=float)
    if not np.all(np.isfinite(lim) & (lim > 0)):
        k = int(np.flatnonzero(~(np.isfinite(lim) & (lim > 0)))[0])
        raise WorkbenchError(f"arm {arm.model.name!r}: joint {k + 1} ({arm.model.names[k]!r}) has no max_speed; the "
                             f"largest tool speed needs a speed limit for every joint")
    Q = np.asarray(q, dtype=float)
    J = arm.jacobian(Q, frame="tcp", world=world)
    d = np.asarray(direction, dtype=float)
    d = d / np.linalg.norm(d, axis=-1, keepdims=True)
    d = np.broadcast_to(d, Q.shape[:-1] + (3,))
    if rows == "full":
        A, t = J, np.concatenate([d, np.zeros(d.shape)], axis=-1)
    else:
        A, t = J[..., :3, :], d
    qd = np.einsum("...ij,...j->...i", np.linalg.pinv(A, rcond=1e-10), t)
    miss = np.linalg.norm(np.einsum("...ij,...j->...i", A, qd) - t, axis=-1) > 1e-6
    per = np.where(np.abs(qd) > 1e-15, lim / np.where(np.abs(qd) > 1e-15, np.abs(qd), 1.0), np.inf)
    s = np.min(per, axis=-1)
    j = np.where(np.isinf(s), -1, np.argmin(per, axis=-1))
    return np.where(miss, 0.0, s), np.where(miss, -1, j)


@dataclass(frozen=True)
class RequirementCheck:
    """A set of requirements checked at poses (leading shape ``...``).

    Attributes
    ----------
    tau, links, payload, wrench : ndarray (..., n)
        Holding torques (N m / N) and their parts.
    torque_margin : ndarray (...)
        Smallest (limit - |tau|) / limit over the joints; NaN when not checked.
    torque_joint : ndarray of int (...)
        0-based joint of that margin (-1 when not checked).
    speed : ndarray (...)
        Largest tool speed (m/s) along the asked direction; NaN when no speed is asked or checked.
    speed_ratio : ndarray (...)
        Asked speed / largest speed (<= 1 passes); NaN when not checked.
    speed_joint : ndarray of int (...)
    ok : ndarray of bool (...)
        Every checked requirement holds.
    notes : tuple of str
        What was not checked, and why.
    """

    tau: np.ndarray
    links: np.ndarray
    payload: np.ndarray
    wrench: np.ndarray
    torque_margin: np.ndarray
    torque_joint: np.ndarray
    speed: np.ndarray
    speed_ratio: np.ndarray
    speed_joint: np.ndarray
    ok: np.ndarray
    notes: tuple = ()

    @property
    def torque_checked(self) -> bool:
        return bool(np.isfinite(self.torque_margin).any())


def _holding_in_base(arm, Q, reqs, gb, R, links):
    """Holding-torque parts (..., n) in the arm's base frame with a per-pose gravity ``gb`` (..., 3)
    and base rotation ``R`` (..., 3, 3) in the cell (the same sums as measures.holding_parts)."""
    m = arm.model
    shape = Q.shape[:-1] + (m.n,)
    out = {"links": np.zeros(shape), "payload": np.zeros(shape), "wrench": np.zeros(shape)}

    def grav(Jc, mass):
        return -mass * np.einsum("...ij,...i->...j", Jc[..., :3, :], gb)

    if links:
        for k in range(m.n):
            if m.masses[k]:
                out["links"] += grav(arm.jacobian(Q, frame=k, point=m.coms[k]), m.masses[k])
        if m.tool_mass:
            out["links"] += grav(arm.jacobian(Q, frame="flange", point=m.tool_com), m.tool_mass)
    if reqs.payload is not None and reqs.payload.mass:
        out["payload"] = grav(arm.jacobian(Q, frame="tcp", point=reqs.payload.com), reqs.payload.mass)
    if reqs.force is not None or reqs.moment is not None:
        W = np.zeros(Q.shape[:-1] + (6,))
        Rt = arm.fk(Q)[..., :3, :3] if reqs.frame == "tool" else np.swapaxes(R, -1, -2)
        if reqs.force is not None:
            W[..., :3] = np.einsum("...ij,j->...i", Rt, reqs.force)
        if reqs.moment is not None:
            W[..., 3:] = np.einsum("...ij,j->...i", Rt, reqs.moment)
        out["wrench"] = np.einsum("...ij,...i->...j", arm.jacobian(Q, frame="tcp"), W)
    out["total"] = out["links"] + out["payload"] + out["wrench"]
    return out


def requirement_check(arm, q, reqs: Requirements | None, g=9.81, world=True, speed_rows="translation",
                      directions=None, mounts=None) -> RequirementCheck:
    """Check ``reqs`` at poses ``q`` (..., n) of ``arm`` in the cell.

    The arm stands at its own mount (``world=True``), or at ``mounts`` (..., 4, 4) per pose (the
    base-in-cell transforms of a mount search's candidates); ``world=False`` takes the cell frame
    as the base frame. ``g`` is a magnitude along the cell's -z or a cell-frame vector.

    Torques: the holding torques (the arm's own weight when the arm file gives masses, the payload,
    the tool wrench) against ``max_effort``; checked whenever the arm gives torque limits for every
    joint, since the arm's own weight matters even without a payload. Speed: when ``reqs.speed`` is
    set, the largest tool speed along ``reqs.direction`` (cell frame) or ``directions`` (..., 3),
    default the tool z axis at each pose, within ``max_speed`` (:func:`largest_tool_speed`).
    """
    from ..measures import _g_vector

    reqs = reqs if reqs is not None else Requirements()
    m = arm.model
    Q = np.asarray(q, dtype=float)
    lead = Q.shape[:-1]
    if mounts is not None:
        R = np.broadcast_to(np.asarray(mounts, float)[..., :3, :3], lead + (3, 3))
    else:
        R = np.broadcast_to(m.mount[:3, :3] if world else np.eye(3), lead + (3, 3))
    gb = np.einsum("...ji,j->...i", R, _g_vector(g))  # R^T g: gravity in the base frame
    notes = []
    links = m.has_masses
    limits_ok = bool(np.all(np.isfinite(m.max_effort) & (m.max_effort > 0)))
    if not links:
        notes.append("the arm file gives no link masses: the arm's own weight is left out of the holding torques")
    parts = _holding_in_base(arm, Q, reqs, gb, R, links)
    nan = np.full(lead, np.nan)
    if limits_ok and (links or reqs.loads):
        lim = m.max_effort
        marg = (lim - np.abs(parts["total"])) / lim
        tm = np.min(marg, axis=-1)
        tj = np.argmin(marg, axis=-1).astype(np.int64)
    else:
        tm, tj = nan.copy(), np.full(lead, -1, np.int64)
        if not limits_ok:
            notes.append("the arm file gives no torque limit for every joint: holding torques not checked")
        else:
            notes.append("no link masses, tool wrench or payload: nothing loads the joints")
    sp, sr, sj = nan.copy(), nan.copy(), np.full(lead, -1, np.int64)
    if reqs.speed is not None:
        if np.all(np.isfinite(m.max_speed)):
            if reqs.direction is not None:
                d = np.einsum("...ji,j->...i", R, reqs.direction)
            elif directions is not None:
                d = np.einsum("...ji,...j->...i", R, np.asarray(directions, dtype=float))
            else:
                d = arm.fk(Q)[..., :3, 2]
            sp, sj = largest_tool_speed(arm, Q, d, rows=speed_rows, world=False)
            with np.errstate(divide="ignore"):
                sr = np.where(sp > 0, reqs.speed / np.where(sp > 0, sp, 1.0), np.inf)
        else:
            notes.append("the arm file gives no speed limit for every joint: the tool speed is not checked")
    ok = np.ones(lead, bool)
    ok &= ~(np.isfinite(tm) & (tm < 0))
    ok &= ~(~np.isnan(sr) & (sr > 1))
    return RequirementCheck(parts["total"], parts["links"], parts["payload"], parts["wrench"], tm, tj, sp, sr, sj,
                            ok, tuple(notes))
