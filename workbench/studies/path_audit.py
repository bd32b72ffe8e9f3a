"""Path audit: follow the cell's tool paths with the arm and report the poses to avoid.

Each path of the cell is sampled every ``spacing`` metres (:func:`workbench.studies.cell.sample_path`)
and followed by continuation: the IK of sample k starts from the solution of sample k-1 alone (no
other seeds), so the arm stays on one branch of solutions. Only when that fails (out of reach of
the local step, or a joint limit) is the sample re-solved from several seeds ("forced"), taking the
solution closest to the previous one; and a joint-space step larger than ``jump`` between two
samples is flagged either way as a branch flip.

Per sample: the measures of the chosen rows, the joint speeds needed for the tool speed,
``qdot = A^+ b`` (Moore-Penrose pseudo-inverse; ``A`` the task rows of the Jacobian: all 6 for a
"fixed" path, translation plus the two tilts of the tool axis for "axis", translation for "free";
``b`` the tool twist along the path tangent at the path's speed, with the turn rate of the
orientation interpolation), the ratio of each joint speed to its limit, and the joint-limit margin.

Requirements (the cell's ``[requirements]`` merged per path, :mod:`workbench.studies.requirements`):
holding torques along the path (arm weight, payload with its centre of mass, tool wrench) and
their margin against ``max_effort`` (fields ``torque_margin``, ``torque_joint``, ``tau``); the
largest tool speed each sample allows within the joint speed limits (``tool_speed_max`` = path
speed / speed ratio: joint speeds scale with the tool speed along the path); and a cycle-time
estimate per path (table ``cycle_time``, :func:`workbench.studies.timing.time_parameterise`:
joint speed and acceleration limits and the path's tool speed, rest to rest, dynamics neglected)
against the path's required ``time``.

Collisions (settings ``clearance``, ``collisions``; :mod:`workbench.studies.collide`): the first
sample's branch is chosen among the clear solutions; every tracked pose's clearance and nearest
pair are fields (``clearance``, ``clearance_pair``), samples below the setting are flagged
COLLIDING (they keep their measures) and listed as spans in the table ``clearance_spans`` with the
pair in words ("link 3 within 4 mm of box 'conveyor'").

Summaries: the near-singular spans (inverse condition below ``near_singular``) with their path
distances, the worst joint-speed ratio in them and a plain-words note
(:func:`workbench.measures.explain_singularity`); the worst joint-speed ratio of every path and
where; the branch flips.
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from ..arm.transforms import inverse_transform, make_transform
from ..measures import NEAR_SINGULAR as _NEAR_DEFAULT
from ..quantities import label, quantity, unit_of
from . import collide
from .base import MAX_SEEDS, Axis, Field, Plan, StudyError, StudyKind, Table, check_rows
from ..limits import MAX_PATH_SAMPLES
from .cell import sample_path

__all__ = ["PathAudit", "PathSettings", "track_path", "joint_speeds", "task_rows_matrix", "audit_samples",
           "near_singular_spans", "cycle_time_table", "FLAGS", "bench_path_audit"]

_DEG = math.pi / 180.0

REACHED, FORCED, JUMP, NEAR_SINGULAR, OVER_SPEED, COLLIDING = 1, 2, 4, 8, 16, 32
FLAGS = {REACHED: "reached", FORCED: "re-solved from several seeds (tracking lost)",
         JUMP: "large joint step from the previous sample (branch flip)",
         NEAR_SINGULAR: "near singular", OVER_SPEED: "a joint would exceed its speed limit",
         COLLIDING: "the tracked pose is closer than the clearance setting (fails the clearance requirement)"}


@dataclass(frozen=True)
class PathSettings:
    """Validated path-audit settings (SI).

    paths : names of the cell paths to audit (all when empty)
    spacing : sample spacing along the path (m)
    rows, length : task rows and characteristic length (m) of the measures
    near_singular : inverse-condition threshold of the near-singular spans
    jump : joint step (rad) between samples flagged as a branch flip
    seeds : seeds for the first sample and for forced re-solves
    mount : (4, 4) base-in-cell transform, or None (the cell's [placement], else the arm file's mount)
    """

    paths: tuple = ()
    spacing: float = 0.002
    rows: str | tuple = "full"
    length: float | None = None
    near_singular: float = _NEAR_DEFAULT
    jump: float = 10 * _DEG
    seeds: int = 16
    mount: np.ndarray | None = None
    trajectories: tuple = ()
    collisions: collide.CollisionSettings = collide.CollisionSettings(False)


_KEYS = {"paths", "spacing", "rows", "length", "near_singular", "jump", "seeds", "mount_xyz", "mount_rpy",
         "trajectories"} | collide.KEYS


def _validate(settings: Mapping, arm, cell, where: str) -> PathSettings:
    unknown = sorted(set(settings) - _KEYS)
    if unknown:
        raise StudyError(f"{where}: unknown key '{unknown[0]}'; allowed keys: {', '.join(sorted(_KEYS))}")
    out = {}
    trajs = getattr(cell, "trajectories", ())
    if not cell.paths and not trajs:
        raise StudyError(f"{cell.path}: the cell has no [[path]] or [[trajectory]] tables; a path audit needs at "
                         f"least one")
    tn = settings.get("trajectories", [])
    if isinstance(tn, str):
        tn = [tn]
    if not isinstance(tn, list) or not all(isinstance(x, str) for x in tn):
        raise StudyError(f"{where} trajectories: expected a list of trajectory names, got {tn!r}")
    for x in tn:
        if x not in [t.name for t in trajs]:
            raise StudyError(f"{where} trajectories: no trajectory named {x!r} in {cell.path}; trajectories are "
                             f"{', '.join(t.name for t in trajs) or 'none'}")
    out["trajectories"] = tuple(tn)
    names = [p.name for p in cell.paths]
    paths = settings.get("paths", [])
    if isinstance(paths, str):
        paths = [paths]
    if not isinstance(paths, list) or not all(isinstance(p, str) for p in paths):
        raise StudyError(f"{where} paths: expected a list of path names, got {paths!r}")
    for p in paths:
        if p not in names:
            raise StudyError(f"{where} paths: no path named {p!r} in {cell.path}; paths are {', '.join(names)}")
    out["paths"] = tuple(paths)
    for key, lo, hi in (("spacing", 1e-5, 1.0), ("near_singular", 1e-6, 0.999), ("length", 1e-3, 1e3)):
        if key in settings:
            v = settings[key]
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not (lo <= v <= hi):
                unit = " (m)" if key != "near_singular" else ""
                raise StudyError(f"{where} {key}: expected a number between {lo:g} and {hi:g}{unit}, got {v!r}")
            out[key] = float(v)
    if "jump" in settings:
        v = settings["jump"]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not (0 < v <= 360):
            raise StudyError(f"{where} jump: expected a joint step in degrees (0, 360], got {v!r}")
        out["jump"] = float(v) * _DEG
    if "seeds" in settings:
        v = settings["seeds"]
        if isinstance(v, bool) or not isinstance(v, int) or not 1 <= v <= MAX_SEEDS:
            raise StudyError(f"{where} seeds: expected an integer from 1 to {MAX_SEEDS}, got {v!r}")
        out["seeds"] = v
    rows = settings.get("rows", "full")
    check_rows(rows, where)
    out["rows"] = rows if isinstance(rows, str) else tuple(rows)
    mount = None
    if "mount_xyz" in settings or "mount_rpy" in settings:
        xyz = settings.get("mount_xyz", [0, 0, 0])
        rpy = settings.get("mount_rpy", [0, 0, 0])
        for key, v in (("mount_xyz", xyz), ("mount_rpy", rpy)):
            if (not isinstance(v, list) or len(v) != 3
                    or not all(isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)
                               for x in v)):
                raise StudyError(f"{where} {key}: expected a list of 3 finite numbers (m / deg), got {v!r}")
        mount = make_transform(np.array(xyz, float), np.array(rpy, float) * _DEG)
    out["mount"] = mount
    out["collisions"] = collide.collision_settings(settings, arm, where)
    return PathSettings(**out)


def _mount_of(s: PathSettings, arm, cell) -> np.ndarray:
    if s.mount is not None:
        return s.mount
    if cell.placement is not None:
        return cell.placement
    return np.asarray(arm.model.mount, float)


# ----------------------------------------------------------------------------------------------
# the maths


def _joint_step(arm, a, b):
    return float(np.max(np.abs(np.asarray(a) - np.asarray(b)))) if a is not None else 0.0


def track_path(arm, targets, rule: str, seeds: int = 16, jump: float = 10 * _DEG, q_start=None, clear=None):
    """Follow targets (N, 4, 4) (arm base frame) by continuation.

    Sample k starts from the solution of sample k-1 only; if that does not converge the sample is
    re-solved from ``seeds`` seeds plus the previous solution and the converged solution nearest
    to the previous one is kept (flag FORCED). Steps larger than ``jump`` (rad, largest joint
    change) are flagged JUMP. ``clear`` (optional): a function of joint values (K, n) -> (K,) bool
    (clearance at least the setting); the first sample's branch is then chosen among the clear
    solutions (the most central of them) when there are any.

    Returns
    -------
    q : (N, n) ndarray
    flags : (N,) uint8 ndarray (REACHED, FORCED, JUMP bits)
    pos_err : (N,) ndarray, m
    """
    from ..kinematics.ik import CONVERGED, solve_ik

    T = np.asarray(targets, float).reshape(-1, 4, 4)
    N, n = T.shape[0], arm.n
    q = np.zeros((N, n))
    flags = np.zeros(N, np.uint8)
    perr = np.full(N, np.inf)
    prev = None if q_start is None else np.asarray(q_start, float)
    import numba

    threads = numba.get_num_threads()
    numba.set_num_threads(1)  # one target per call: a parallel region would only add wake-up cost
    try:
        _track(arm, T, rule, seeds, jump, prev, q, flags, perr, clear)
    finally:
        numba.set_num_threads(threads)
    return q, flags, perr


def _track(arm, T, rule, seeds, jump, prev, q, flags, perr, clear=None):
    from ..kinematics.ik import CONVERGED, solve_ik

    for k in range(T.shape[0]):
        res = None
        if prev is not None:
            res = solve_ik(arm, T[k], seeds=0, orientation=rule, q_seed=prev)
        if res is None or int(res.status) != CONVERGED:
            many = solve_ik(arm, T[k], seeds=seeds, orientation=rule,
                            q_seed=prev if prev is not None else None, all_solutions=True)
            ok = many.status == CONVERGED
            if prev is not None:
                flags[k] |= FORCED
            if ok.any():
                cand = many.q[ok]
                if prev is not None:
                    j = int(np.argmin(np.max(np.abs(cand - prev), axis=-1)))
                else:  # the start: the most central solution (of the clear ones, if any)
                    score = arm.limit_margin(cand)
                    if clear is not None:
                        score = np.where(clear(cand), score + 10.0, score)
                    j = int(np.argmax(score))
                qk, stat, pe = cand[j], CONVERGED, float(many.pos_err[ok][j])
            else:
                j = int(np.argmin(many.pos_err))
                qk, stat, pe = many.q[j], int(many.status[j]), float(many.pos_err[j])
        else:
            qk, stat, pe = res.q, int(res.status), float(res.pos_err)
        if stat == CONVERGED:
            flags[k] |= REACHED
        # a flip is between two reached samples: an unreached sample's joint values are only the
        # solver's closest miss, and a jump to or from it says nothing about the arm's branch
        if stat == CONVERGED and prev is not None and _joint_step(arm, qk, prev) > jump:
            flags[k] |= JUMP
        q[k] = qk
        perr[k] = pe
        if stat == CONVERGED:
            prev = qk


def task_rows_matrix(rule: str, tool_z=None) -> np.ndarray:
    """Selection S (..., k, 6) of task rows for an orientation rule.

    "fixed": the identity (6 rows); "free": translation (3 rows); "axis": translation plus the
    angular velocity about two unit vectors perpendicular to the tool z axis ``tool_z`` (..., 3)
    (5 rows: the spin about the tool axis is free).
    """
    if rule == "fixed":
        return np.eye(6)
    if rule == "free":
        return np.eye(6)[:3]
    z = np.asarray(tool_z, float)
    ref = np.where(np.abs(z[..., :1]) < 0.9, np.array([1.0, 0, 0]), np.array([0, 1.0, 0]))
    e1 = ref - z * np.sum(ref * z, axis=-1, keepdims=True)
    e1 /= np.linalg.norm(e1, axis=-1, keepdims=True)
    e2 = np.cross(z, e1)
    S = np.zeros(z.shape[:-1] + (5, 6))
    S[..., 0, 0] = S[..., 1, 1] = S[..., 2, 2] = 1.0
    S[..., 3, 3:] = e1
    S[..., 4, 3:] = e2
    return S


def joint_speeds(J, twist, rule: str = "fixed", tool_z=None) -> np.ndarray:
    """Joint speeds ``qdot = (S J)^+ (S twist)`` for the tool twist (least-norm, pseudo-inverse).

    Parameters
    ----------
    J : (..., 6, n) ndarray
        Geometric Jacobians (rows vx vy vz wx wy wz).
    twist : (..., 6) ndarray
        Tool twist [v (m/s), w (rad/s)] in the same frame as J's rows.
    rule : {"fixed", "axis", "free"}
    tool_z : (..., 3) ndarray
        Tool z axis (needed for "axis").

    Returns
    -------
    (..., n) ndarray, rad/s or m/s
    """
    S = task_rows_matrix(rule, tool_z)
    A = S @ J
    b = np.einsum("...ij,...j->...i", S, twist)
    return np.einsum("...ij,...j->...i", np.linalg.pinv(A), b)


def expected_samples(cell, path, spacing: float) -> int:
    """Samples :func:`~workbench.studies.cell.sample_path` makes for ``path`` at ``spacing`` (m), worked
    out from the segment lengths without making them (at most one more per segment)."""
    if getattr(path, "poses", None) is not None:  # a path from a CSV file: its rows
        return len(path.poses)
    corners = sample_path(cell, path, 1e12).corners  # two samples per segment: cheap
    seg = np.diff(corners)
    return int(1 + np.sum(np.maximum(1, np.ceil(seg / spacing - 1e-9))))


def audit_samples(arm, q, samples_twist, rule, s: PathSettings, R_base):
    """Measures, joint speeds, speed ratios and limit margins for tracked poses.

    Parameters
    ----------
    q : (N, n) joint values; samples_twist : (N, 6) tool twist in the cell frame;
    R_base : (3, 3) rotation of the arm base in the cell frame.

    Returns
    -------
    dict of arrays (N, ...)
    """
    from ..measures import measures_from_sv

    length = s.length if s.length is not None else arm.nominal_reach()
    sv = arm.singular_values(q, rows=s.rows, length=length)
    m = measures_from_sv(sv)
    J = arm.jacobian(q)
    tw = np.concatenate([samples_twist[:, :3] @ R_base, samples_twist[:, 3:] @ R_base], axis=1)  # R^T x
    F = arm.fk(q)
    qd = joint_speeds(J, tw, rule, F[:, :3, 2])
    lim = arm.model.max_speed
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.abs(qd) / lim
    ratio = np.where(np.isfinite(lim), ratio, np.nan)
    worst = np.nanmax(np.where(np.isnan(ratio), -np.inf, ratio), axis=-1)
    worst = np.where(np.isfinite(worst), worst, np.nan)
    wj = np.argmax(np.where(np.isnan(ratio), -np.inf, ratio), axis=-1)
    return {"inverse_condition": m["inverse_condition"], "min_sv": m["min_sv"],
            "manipulability": m["manipulability"], "qdot": qd, "speed_ratio": worst, "speed_joint": wj,
            "margin": arm.limit_margin(q)}


def near_singular_spans(s, inv, threshold, path_index=None):
    """Contiguous runs of samples with ``inv < threshold``.

    Returns
    -------
    list of (start_index, stop_index) with stop exclusive; runs never cross paths.
    """
    s = np.asarray(s)
    bad = np.asarray(inv) < threshold
    pidx = np.zeros(len(s), int) if path_index is None else np.asarray(path_index)
    spans = []
    k = 0
    N = len(s)
    while k < N:
        if bad[k]:
            j = k
            while j + 1 < N and bad[j + 1] and pidx[j + 1] == pidx[k]:
                j += 1
            spans.append((k, j + 1))
            k = j + 1
        else:
            k += 1
    return spans


# ----------------------------------------------------------------------------------------------
# the study kind


class PathAudit(StudyKind):
    """Path audit of the cell's paths (see the module docstring)."""

    name = "path_audit"
    title = "path audit"
    needs_cell = True
    #: tracking is sequential: keep the plan's one chunk (the runner does not re-chunk it)
    calibrated_chunks = False

    def default_settings(self, arm) -> dict:
        return {"spacing": 0.002, "rows": "full", "near_singular": _NEAR_DEFAULT, "jump": 10.0, "seeds": 16}

    def validate(self, settings, arm, cell, where="settings"):
        if cell is None:
            raise StudyError(f"{where}: a path audit needs a cell file ([study] cell)")
        return _validate(settings or {}, arm, cell, where)

    def plan(self, spec, arm, cell, chunk_cells=None) -> Plan:
        s = self.validate(spec.settings, arm, cell, f"{spec.where}: [settings]")
        paths = [cell.get_path(nm) for nm in s.paths] if s.paths else list(cell.paths)
        N = sum(expected_samples(cell, p, s.spacing) for p in paths)  # before any sample is made
        if N > MAX_PATH_SAMPLES:
            raise StudyError(f"{spec.where}: [settings] spacing: {s.spacing:g} m gives {N:,} samples along "
                             f"{', '.join(p.name for p in paths)}; at most {MAX_PATH_SAMPLES:,} (use a larger spacing)")
        parts = [sample_path(cell, p, s.spacing) for p in paths]
        mount = _mount_of(s, arm, cell)
        given = {}
        for tr in getattr(cell, "trajectories", ()):
            if s.trajectories and tr.name not in s.trajectories:
                continue
            given[len(parts)] = (tr.t, tr.joint_values(arm))
            parts.append(_trajectory_samples(arm, mount, tr, given[len(parts)][1]))
        N = sum(len(p.s) for p in parts)
        if N > MAX_PATH_SAMPLES:
            raise StudyError(f"{spec.where}: {N:,} samples in the paths and trajectories; at most "
                             f"{MAX_PATH_SAMPLES:,}")
        inv = inverse_transform(mount)
        poses = np.concatenate([p.poses for p in parts])
        data = {
            "targets": np.einsum("ij,njk->nik", inv, poses),
            "cell_xyz": poses[:, :3, 3].copy(),
            "s": np.concatenate([p.s for p in parts]),
            "path_index": np.concatenate([np.full(len(p.s), k) for k, p in enumerate(parts)]),
            "twist": np.concatenate([np.concatenate([p.tangent * p.speed, p.omega_per_m * p.speed], axis=1)
                                     for p in parts]),
            "rules": [p.rule for p in parts], "names": [p.name for p in parts],
            "speeds": [p.speed for p in parts], "lengths": [p.length for p in parts],
            "corners": [p.corners for p in parts],
            "mount": mount, "arm_model": arm.model,
            "requirements": [cell.requirements_for(path=p.name) for p in parts],
            "given": given,
            "cell": cell, "result_attrs": collide.result_attrs(s.collisions),
        }
        n = arm.n
        fields = (
            Field("distance", (), "float64", "m", "distance along the path", kind="other"),
            Field("path_index", (), "int32", "", "which path (0-based, see the plan's names)", kind="other"),
            Field("q", (n,), "float64", "rad", "tracked joint values", kind="pose"),
            Field("flags", (), "uint8", "", "sample flags", kind="status", flags=dict(FLAGS)),
            # labels and units: the one registry (workbench/quantities.py)
            *(Field(name, (), "float64", unit_of(name, s.rows, arm.kinds) or "",
                    f"{label(name)} ({_rows_text(s.rows)} rows)")
              for name in ("inverse_condition", "min_sv", "manipulability")),
            Field("qdot", (n,), "float64", "rad/s", "joint speeds needed for the tool speed (pseudo-inverse)",
                  kind="other"),
            Field("speed_ratio", (), "float64", "", quantity("speed_ratio").description),
            Field("speed_joint", (), "int32", "", "joint (0-based) with the largest speed ratio", kind="other"),
            Field("margin", (), "float64", "", quantity("margin").description),
            Field("pos_err", (), "float64", "m", "TCP position error of the tracked solution", kind="other"),
            Field("xyz", (3,), "float64", "m", "sample position in the cell frame", kind="point"),
        )
        m = arm.model
        if given:
            fields += (Field("accel_ratio", (), "float64", "",
                             "largest |joint acceleration| / limit (joint trajectories: from their times)"),)
        if np.all(np.isfinite(m.max_speed)):
            fields += (Field("tool_speed_max", (), "float64", "m/s",
                             "largest tool speed along the path within the joint speed limits"),)
        if np.all(np.isfinite(m.max_effort)) and (m.has_masses or any(r.loads for r in data["requirements"])):
            fields += (
                Field("torque_margin", (), "float64", "",
                      "smallest holding-torque margin (limit - |tau|) / limit (arm weight, payload, tool wrench)"),
                Field("torque_joint", (), "int32", "", "joint (0-based) of the smallest torque margin", kind="other"),
                Field("tau", (n,), "float64", "N m", "holding torques (arm weight, payload, tool wrench)",
                      kind="other"),
            )
        if s.collisions.on:
            from ..collision import pair_names

            data["pair_names"] = [f"{a}|{b}" for a, b in pair_names(arm, cell)]
            fields += (
                Field("clearance", (), "float64", "m", "clearance (m) of the tracked pose (arm vs the cell's "
                      "obstacles and its own links)"),
                Field("clearance_pair", (), "int32", "", "nearest pair (index into the results' pair names)",
                      kind="other"),
            )
        axes = (Axis("sample", np.arange(N), "", "path sample"),)
        # continuation is sequential: one chunk per run keeps the work linear (any chunking gives
        # the same values: each chunk re-tracks its paths from their start)
        return Plan(self.name, spec, s, axes, fields, chunk_cells=chunk_cells or max(N, 1), data=data)

    def compute_chunk(self, plan, arm, cell, chunk) -> dict:
        return compute_audit_chunk(plan, arm, chunk.start, chunk.stop)

    def summarise(self, plan, arrays) -> dict:
        return summarise_audit(plan, arrays)


def _col(values, text=False):
    """A table column: text as an object array of str (an empty one as bytes, which HDF5 can store)."""
    if text:
        return np.array(values, dtype=object) if len(values) else np.zeros(0, dtype="S1")
    return np.array(values, dtype=float)


def _rows_text(rows):
    return rows if isinstance(rows, str) else ",".join(map(str, rows))


def _trajectory_samples(arm, mount, tr, q):
    """PathSamples of a recorded trajectory: the TCP poses of its joint values (cell frame), the
    distance along the tool path; no tangent or tool speed (the times say how it moves)."""
    from .cell import PathSamples

    T = _mounted(arm, mount).fk(q, world=True)
    P = T[:, :3, 3]
    dist = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(P, axis=0), axis=1))])
    N = len(dist)
    return PathSamples(dist, T, np.zeros((N, 3)), np.zeros((N, 3)), np.zeros(N, int), np.array([0.0, dist[-1]]),
                       "fixed", float("nan"), tr.name)


def _rates_from_times(arm, given, sl, a, out, o):
    """Joint speeds and accelerations of a recorded trajectory from its times, against the limits."""
    from .taskdata import trajectory_rates

    t, q = given
    qd, qdd = trajectory_rates(t, q)
    qd, qdd = qd[sl], qdd[sl]
    m = arm.model
    with np.errstate(invalid="ignore", divide="ignore"):
        r = np.where(np.isfinite(m.max_speed), np.abs(qd) / m.max_speed, -np.inf)
        ra = np.where(np.isfinite(m.max_acceleration), np.abs(qdd) / m.max_acceleration, -np.inf)
    a["qdot"] = qd
    a["speed_ratio"] = np.where(np.isfinite(r.max(axis=1)), r.max(axis=1), np.nan)
    a["speed_joint"] = np.argmax(r, axis=1)
    if "accel_ratio" in out:
        out["accel_ratio"][o] = np.where(np.isfinite(ra.max(axis=1)), ra.max(axis=1), np.nan)


def _mounted(arm, M):
    from dataclasses import replace

    from ..kinematics import Arm

    return Arm(replace(arm.model, mount=np.asarray(M, float)))


def compute_audit_chunk(plan, arm, start, stop) -> dict:
    """Track the paths touching samples [start, stop) from their first sample and audit the slice."""
    s = plan.settings
    d = plan.data
    pidx = d["path_index"]
    out = {f.name: f.empty(stop - start) for f in plan.fields}
    R_base = d["mount"][:3, :3]
    for p in np.unique(pidx[start:stop]):
        idx = np.flatnonzero(pidx == p)
        p0 = idx[0]
        hi = min(stop, idx[-1] + 1)
        rule = d["rules"][p]
        given = d.get("given", {}).get(int(p))
        if given is None:
            clear = None
            if s.collisions.on:
                def clear(cand, _c=d.get("cell"), _m=d["mount"]):
                    return collide.clear_of(arm, cand, _c, s.collisions, mounts=_m)[1]
            q, flags, perr = track_path(arm, d["targets"][p0:hi], rule, seeds=s.seeds, jump=s.jump, clear=clear)
        else:  # a recorded joint trajectory: its own joint values, audited as they are
            q = given[1][: hi - p0]
            step = np.concatenate([[0.0], np.max(np.abs(np.diff(q, axis=0)), axis=1)]) if len(q) else np.zeros(0)
            flags = (REACHED | np.where(step > s.jump, JUMP, 0)).astype(np.uint8)
            perr = np.zeros(len(q))
        lo = max(start, p0)
        sl = slice(lo - p0, hi - p0)
        qq, ff = q[sl], flags[sl]
        if s.collisions.on:  # one batched call over the slice's tracked poses
            from ..collision import nearest

            dd, kk = nearest(arm, qq, d.get("cell"), mounts=d["mount"])
            hit = ((ff & REACHED) > 0) & ~(dd >= s.collisions.clearance)
            # the tracked branch still reaches the sample: its measures stay (a span can be near
            # singular and colliding at once); the clearance requirement fails there
            ff = np.where(hit, ff | COLLIDING, ff).astype(np.uint8)
            out["clearance"][slice(lo - start, hi - start)] = dd
            out["clearance_pair"][slice(lo - start, hi - start)] = kk
        a = audit_samples(arm, qq, d["twist"][lo:hi], rule, s, R_base)
        if given is not None:
            _rates_from_times(arm, given, sl, a, out, slice(lo - start, hi - start))
        miss = (ff & REACHED) == 0  # no pose there: no measures either
        for key in ("inverse_condition", "min_sv", "manipulability", "qdot", "speed_ratio", "margin"):
            a[key] = np.where(miss.reshape((-1,) + (1,) * (a[key].ndim - 1)), np.nan, a[key])
        ff = ff | np.where(a["inverse_condition"] < s.near_singular, NEAR_SINGULAR, 0).astype(np.uint8)
        ff = ff | np.where(a["speed_ratio"] > 1.0, OVER_SPEED, 0).astype(np.uint8)
        o = slice(lo - start, hi - start)
        out["distance"][o] = d["s"][lo:hi]
        out["path_index"][o] = p
        out["q"][o] = qq
        out["flags"][o] = ff
        for key in ("inverse_condition", "min_sv", "manipulability", "qdot", "speed_ratio", "speed_joint", "margin"):
            out[key][o] = a[key]
        if "tool_speed_max" in out:
            with np.errstate(divide="ignore", invalid="ignore"):
                out["tool_speed_max"][o] = np.where(a["speed_ratio"] > 0, d["speeds"][p] / a["speed_ratio"], np.inf)
        if "torque_margin" in out:
            from .requirements import requirement_check

            chk = requirement_check(_mounted(arm, d["mount"]), qq, d["requirements"][p])
            out["torque_margin"][o] = np.where(miss, np.nan, chk.torque_margin)
            out["torque_joint"][o] = np.where(miss, -1, chk.torque_joint)
            out["tau"][o] = np.where(miss[:, None], np.nan, chk.tau)
        out["pos_err"][o] = perr[sl]
        out["xyz"][o] = d["cell_xyz"][lo:hi]
    return out


def summarise_audit(plan, arrays) -> dict:
    """Tables: near-singular spans (with plain-words notes), worst joint speed per path, branch flips."""
    from ..kinematics import Arm
    from ..measures import explain_singularity

    s = plan.settings
    d = plan.data
    arm = Arm(d["arm_model"])
    dist = np.asarray(arrays["distance"], float)
    pidx = np.asarray(arrays["path_index"])
    inv = np.asarray(arrays["inverse_condition"], float)
    ratio = np.asarray(arrays["speed_ratio"], float)
    sj = np.asarray(arrays["speed_joint"])
    q = np.asarray(arrays["q"], float)
    flags = np.asarray(arrays["flags"]).astype(np.uint8)
    done = np.isfinite(dist)
    names = d["names"]
    jn = arm.model.names
    tables = {}
    reached = (flags & REACHED) > 0
    spans = near_singular_spans(dist, np.where(done & reached, inv, np.inf), s.near_singular, pidx)
    rows = {"path": [], "from": [], "to": [], "min_inverse_condition": [], "at": [], "worst_speed_ratio": [],
            "note": []}
    for a, b in spans:
        k = a + int(np.argmin(inv[a:b]))
        rows["path"].append(names[pidx[a]])
        rows["from"].append(dist[a] * 1000)
        rows["to"].append(dist[b - 1] * 1000)
        rows["min_inverse_condition"].append(inv[k])
        rows["at"].append(dist[k] * 1000)
        rr = ratio[a:b]
        rows["worst_speed_ratio"].append(float(np.nanmax(rr)) if np.any(np.isfinite(rr)) else np.nan)
        try:
            note = explain_singularity(arm, q[k], rows=s.rows, length=s.length, threshold=s.near_singular)
        except Exception as exc:  # a note is a help, never a reason to lose the results
            note = f"(no note: {exc})"
        rows["note"].append(note)
    tables["near_singular"] = Table(
        "Near-singular spans", {k: _col(v, k in ("path", "note")) for k, v in rows.items()},
        {"from": "mm", "to": "mm", "at": "mm"},
        f"samples with inverse condition ({_rows_text(s.rows)} rows) below {s.near_singular:g}")
    wrow = {"path": [], "length": [], "tool_speed": [], "worst_speed_ratio": [], "at": [], "joint": [],
            "unreached": [], "branch_flips": [], "forced": []}
    for p, nm in enumerate(names):
        m = done & (pidx == p)
        if not m.any():
            continue
        wrow["path"].append(nm)
        wrow["length"].append(d["lengths"][p] * 1000)
        wrow["tool_speed"].append(d["speeds"][p] * 1000)
        rr = np.where(m & reached & np.isfinite(ratio), ratio, -np.inf)
        k = int(np.argmax(rr))
        ok = np.isfinite(rr[k])
        wrow["worst_speed_ratio"].append(float(rr[k]) if ok else np.nan)
        wrow["at"].append(dist[k] * 1000 if ok else np.nan)
        wrow["joint"].append(jn[int(sj[k])] if ok else "-")
        wrow["unreached"].append(int((m & ~reached).sum()))
        wrow["branch_flips"].append(int((m & ((flags & JUMP) > 0)).sum()))
        wrow["forced"].append(int((m & ((flags & FORCED) > 0)).sum()))
    tables["paths"] = Table(
        "Paths: worst joint-speed ratio and tracking",
        {k: _col(v, k in ("path", "joint")) for k, v in wrow.items()},
        {"length": "mm", "tool_speed": "mm/s", "at": "mm"},
        "speed ratio = |joint speed needed| / joint speed limit (> 1: the tool speed cannot be kept)")
    tables["cycle_time"] = cycle_time_table(plan, arrays)
    if s.collisions.on and "clearance" in arrays:
        tables["clearance_spans"] = clearance_spans_table(plan, arrays)
    fl = np.flatnonzero(done & ((flags & JUMP) > 0))
    if len(fl):
        def before(k):  # the reached sample of the same path the flip came from
            j = k - 1
            while j >= 0 and pidx[j] == pidx[k] and not reached[j]:
                j -= 1
            return j if j >= 0 and pidx[j] == pidx[k] else None

        steps = [np.abs(q[k] - q[before(k)]) if before(k) is not None else np.zeros(arm.n) for k in fl]
        tables["branch_flips"] = Table(
            "Branch flips (large joint steps between samples)",
            {"path": np.array([names[pidx[k]] for k in fl], dtype=object), "at": dist[fl] * 1000,
             "step": np.array([np.degrees(st.max()) for st in steps]),
             "joints": np.array([", ".join(jn[j] for j in np.flatnonzero(st > s.jump / 2)) for st in steps],
                                dtype=object)},
            {"at": "mm", "step": "deg"}, f"joint steps above {np.degrees(s.jump):g} deg")
    return tables


def clearance_spans_table(plan, arrays) -> Table:
    """Table ``clearance_spans``: runs of samples (within one path) whose tracked pose is closer
    than the clearance setting, with the smallest clearance, where, and the pair named in words
    ("link 3 within 4 mm of box 'conveyor'")."""
    s = plan.settings
    d = plan.data
    dist = np.asarray(arrays["distance"], float)
    pidx = np.asarray(arrays["path_index"])
    clr = np.asarray(arrays["clearance"], float)
    pair = np.asarray(arrays["clearance_pair"])
    names = [tuple(x.split("|", 1)) for x in d.get("pair_names", [])]
    done = np.isfinite(dist)
    with np.errstate(invalid="ignore"):
        low = done & (clr < s.collisions.clearance)
    spans = near_singular_spans(dist, np.where(low, -1.0, 1.0), 0.0, pidx)
    rows = {"path": [], "from": [], "to": [], "min_clearance": [], "at": [], "pair": [], "note": []}
    for a, b in spans:
        k = a + int(np.argmin(clr[a:b]))
        pr = names[int(pair[k])] if 0 <= int(pair[k]) < len(names) else ("arm", "obstacle")
        rows["path"].append(d["names"][pidx[a]])
        rows["from"].append(dist[a] * 1000)
        rows["to"].append(dist[b - 1] * 1000)
        rows["min_clearance"].append(clr[k] * 1000)
        rows["at"].append(dist[k] * 1000)
        rows["pair"].append(f"{pr[0]} - {pr[1]}")
        rows["note"].append(collide.span_sentence(pr, float(clr[k])))
    return Table("Spans closer than the clearance setting",
                 {k: _col(v, k in ("path", "pair", "note")) for k, v in rows.items()},
                 {"from": "mm", "to": "mm", "min_clearance": "mm", "at": "mm"},
                 f"samples whose tracked pose has less than {s.collisions.clearance * 1000:g} mm clearance "
                 f"(flag 32: they fail the clearance requirement)")


def cycle_time_table(plan, arrays) -> Table:
    """Table ``cycle_time``: per path the time-optimal estimate within the joint speed and
    acceleration limits and the path's tool speed (:func:`workbench.studies.timing.time_parameterise`),
    the required time from the cell's requirements, whether it is met and what limits the speed."""
    from .timing import NEGLECTED, time_parameterise

    d = plan.data
    m = d["arm_model"]
    dist = np.asarray(arrays["distance"], float)
    pidx = np.asarray(arrays["path_index"])
    q = np.asarray(arrays["q"], float)
    flags = np.asarray(arrays["flags"]).astype(np.uint8)
    rows = {"path": [], "time": [], "required": [], "meets": [], "length": [], "tool_speed": [],
            "at_tool_speed": [], "limited_by": [], "note": []}
    reqs = d.get("requirements") or [None] * len(d["names"])
    for p, nm in enumerate(d["names"]):
        sel = np.flatnonzero((pidx == p) & np.isfinite(dist))
        if not len(sel):
            continue
        need = reqs[p].time if reqs[p] is not None else None
        rows["path"].append(nm)
        rows["required"].append(np.nan if need is None else need)
        rows["length"].append(d["lengths"][p] * 1000)
        rows["tool_speed"].append(d["speeds"][p] * 1000)
        est, frac, lim, note = np.nan, np.nan, "-", ""
        given = d.get("given", {}).get(p)
        if given is not None:
            est, lim = float(given[0][-1] - given[0][0]), "recorded times"
            note = "a recorded joint trajectory: its own duration"
            if "accel_ratio" in arrays:
                ar = np.asarray(arrays["accel_ratio"], float)[sel]
                if np.isfinite(ar).any() and np.nanmax(ar) > 1:
                    note += f"; joint accelerations up to {np.nanmax(ar):.2f}x the limits"
            sr = np.asarray(arrays["speed_ratio"], float)[sel]
            if np.isfinite(sr).any() and np.nanmax(sr) > 1:
                note += f"; joint speeds up to {np.nanmax(sr):.2f}x the limits"
        elif np.any((flags[sel] & REACHED) == 0):
            note = f"not estimated: {int(np.sum((flags[sel] & REACHED) == 0))} samples unreached"
        elif not np.any(np.isfinite(m.max_speed)):
            note = "not estimated: the arm file gives no joint speed limits"
        else:
            s_, q_ = dist[sel], q[sel]
            keep = np.concatenate([[True], np.diff(s_) > 0])
            try:
                r = time_parameterise(s_[keep], q_[keep], m.max_speed, m.max_acceleration, d["speeds"][p])
            except Exception as exc:  # an estimate is a help, never a reason to lose the results
                note = f"not estimated: {exc}"
            else:
                est = r.time
                frac = float(np.mean(r.binding == 0))
                lim = r.summary()
                note = "; ".join(r.notes + ((("branch flips on the path: the joint jumps are timed as they are"),)
                                            if np.any(flags[sel] & JUMP) else ()))
        rows["time"].append(est)
        rows["at_tool_speed"].append(frac)
        rows["limited_by"].append(lim)
        rows["note"].append(note)
        if need is None:
            rows["meets"].append("no time asked")
        elif not np.isfinite(est):
            rows["meets"].append("not checked")
        else:
            rows["meets"].append("yes" if est <= need else f"no: {est - need:.2f} s over")
    return Table("Cycle time per path (time-optimal within joint speed and acceleration limits)",
                 {k: _col(v, k in ("path", "meets", "limited_by", "note")) for k, v in rows.items()},
                 {"time": "s", "required": "s", "length": "mm", "tool_speed": "mm/s"},
                 f"rest to rest along the path at most at its tool speed; neglected: {NEGLECTED}")


# ----------------------------------------------------------------------------------------------
# bench


def bench_path_audit(quick: bool = False) -> dict:
    """A 2 000-sample path audit of the demo arm (a line and an arc, fixed orientation).

    Bar (issue 4): under 5 s. Reference: the same samples solved independently from several
    seeds each (no continuation), to show what tracking saves.
    """
    from ..kinematics import load_arm
    from ..benchutil import demo_arm_path
    from .base import Chunk
    from .cell import parse_cell_text
    from .spec import StudySpec

    arm = load_arm(demo_arm_path())
    text = _BENCH_CELL
    cell = parse_cell_text(text, "<bench cell>")
    length = sum(sample_path(cell, p, 1.0).length for p in cell.paths)
    N = 500 if quick else 2000
    spacing = length / (N - len(cell.paths))
    while sum(len(sample_path(cell, p, spacing).s) for p in cell.paths) > N:  # ceil() may add one each
        spacing *= 1.0005
    spec = StudySpec(kind="path_audit", arm=str(demo_arm_path()), settings={"spacing": spacing})
    kind = PathAudit()
    plan = kind.plan(spec, arm, cell)
    kind.compute_chunk(plan, arm, cell, Chunk(0, 0, 5))  # warm
    t0 = time.perf_counter()
    arrays = kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells))
    tables = kind.summarise(plan, arrays)
    dt = time.perf_counter() - t0
    from ..kinematics.ik import solve_ik

    sub = plan.data["targets"][:: max(1, plan.cells // 200)]
    t1 = time.perf_counter()
    for T in sub:
        solve_ik(arm, T, seeds=16)
    ref_rate = len(sub) / (time.perf_counter() - t1)
    bar = 5.0 * plan.cells / 2000
    return {"name": "path audit",
            "metrics": {"samples": plan.cells, "seconds": dt, "samples_per_s": plan.cells / dt,
                        "reached": float(((arrays["flags"] & REACHED) > 0).mean()),
                        "near_singular_spans": tables["near_singular"].rows},
            "ratios": {"tracked_vs_independent_multiseed": (plan.cells / dt) / ref_rate},
            "bars": {f"{plan.cells}-sample audit < {bar:.2g} s": [dt, bar, bool(dt < bar)]},
            "notes": ["demo_s6 mounted at the origin; a line and an arc with the tool pointing down"]}


_BENCH_CELL = """
[cell]
name = "bench cell"
[[point]]
name = "a"
xyz = [0.8, -0.4, 0.3]
rpy = [180, 0, 0]
[[point]]
name = "b"
xyz = [0.8, 0.4, 0.3]
rpy = [180, 0, 90]
[[point]]
name = "c"
xyz = [1.0, 0.0, 0.5]
rpy = [180, 0, 0]
[[path]]
name = "line"
speed = 250
through = ["a", "b"]
[[path]]
name = "arc"
speed = 250
start = "a"
segments = [{arc = "b", via = "c"}]
"""
