"""Mount search: where should the arm's base go so that it reaches every work point well?

For every candidate mount ``M`` of the cell's ``[mount]`` region (x, y, height, yaw, style) the
work points are expressed in the arm's base frame, ``inverse(M) @ pose`` (a base placed at
``g @ FK(q)^-1`` reaches ``g`` with the joint values ``q``: the inversion property used for base
placement by Vahrenkamp, Asfour & Dillmann, "Robot placement based on reachability inversion",
ICRA 2013), and solved with the batched multi-seed IK. Per candidate:

* ``served`` k: how many work points are served: reached within their tolerances, inside the
  joint limits, and the cell's requirements met (holding torques, tool speed) at the chosen solution
  (and collision-free with the asked clearance where collisions are checked);
* ``worst_measure`` w: the smallest measure (inverse condition, minimum singular value or
  manipulability of the chosen rows) over the served work points;
* ``min_margin`` m: the smallest joint-limit margin (:meth:`Arm.limit_margin`, 1 at mid range,
  0 at a limit) over the served work points; ``min_torque_margin`` t likewise (when the cell
  states requirements); ``min_obstacle_clearance`` c: the smallest clearance between the arm and the
  cell's obstacles (floor, boxes, pillars, keep-out zones) over the served work points, when
  collisions are checked. The arm's clearance to itself only decides whether a pose counts (at least
  the ``clearance`` setting, like the clearance to obstacles): it is a property of the arm's build,
  nearly the same wherever the base goes (on a spherical wrist the tool passes the forearm at the
  same distance at most poses), so it does not grade one mount against another;
* ``score`` (the quality) Q = w^a * m^b * t^c * min(1, c / 0.1 m)^d  (defaults a = 1, b = 0.5,
  c = 0.5, d = 0.5; a factor is 1 where its value is absent; 0 when nothing is served);
* ``rank_value`` = k + Q / (1 + Q): feasibility first. Its whole part is the number of points served,
  its fraction the quality squeezed into [0, 1) (strictly increasing in Q), so a candidate serving
  every work point always ranks above one that serves fewer, whatever their qualities; among
  candidates serving as many points the quality orders them. The map, the ranking, the refinement
  and the recommendation all use this one value.

Which IK solution counts (``solutions``): "best" (default) runs every seed and keeps per work
point the served solution with the largest measure^a * margin^b; "first" keeps the first solution
found (seeds in order: home pose, then random poses; faster, fewer good branches). The whole grid
uses the same rule, so the map shows the values the ranking sorts. Joints with more than a full
turn of travel are counted at the equivalent angle nearest mid range.

The grid is then refined off the grid: the best few candidates are polished over (x, y, yaw) by
Nelder-Mead (scipy.optimize) on the rank value; the best is rounded to 1 mm and 0.1 degree, scored
again there, and stored as the ``recommended`` table (one row: x, y, height in mm, yaw in degrees in
the cell frame, style, tilt, rank value, quality, points served, and the grid cell it was refined
from). A sensitivity check reports how much the quality drops (and whether a point is lost) when
the base is placed 1-2 cm or 1-2 degrees off.
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace
from typing import Mapping

import numpy as np

from ..quantities import label, unit_of
from .base import MAX_SEEDS, Axis, Field, Plan, StudyError, StudyKind, Table, check_rows
from . import collide
from .cell import WorkPoint, candidate_grid, mount_transforms, relative_targets

__all__ = ["MountSearch", "MountSettings", "evaluate_mounts", "score_candidates", "score_formula",
           "refine_candidate", "sensitivity", "solve_targets", "rank_values", "quality_formula", "RANK_RULE", "reached_check", "center_turns", "bench_mount_search",
           "MEASURES"]

_DEG = math.pi / 180.0
MEASURES = ("inverse_condition", "min_sv", "manipulability")


# ----------------------------------------------------------------------------------------------
# IK adapter (the one place that calls the batched IK)


def solve_targets(arm, T, orientation: str, seeds=8, q0=None):
    """Batched multi-seed IK of targets ``T`` (N, 4, 4) in the arm's base frame.

    Parameters
    ----------
    arm : workbench.kinematics.Arm
    T : (N, 4, 4) ndarray
        TCP goals in the arm base frame (m).
    orientation : {"fixed", "axis", "free"}
    seeds : int
        Number of seeds per target.
    q0 : (N, n) ndarray, optional
        A preferred seed per target (e.g. the previous solution), tried first.

    Returns
    -------
    q : (N, n) ndarray
        Joint values (rad / m); NaN rows are never returned (the best attempt is kept).
    status : (N,) int ndarray
        0 = converged (see :mod:`workbench.kinematics.ik`).
    """
    from ..kinematics.ik import solve_ik

    T = np.ascontiguousarray(np.asarray(T, float).reshape(-1, 4, 4))
    if T.shape[0] == 0:
        return np.empty((0, arm.n)), np.empty(0, dtype=np.int64)
    kw = {}
    if q0 is not None:
        kw["q_seed"] = np.asarray(q0, float).reshape(-1, arm.n)
    res = solve_ik(arm, T, seeds=seeds, orientation=orientation, **kw)
    return np.asarray(res.q, float).reshape(-1, arm.n), np.asarray(res.status).reshape(-1)


def center_turns(arm, q):
    """The same poses with every revolute joint turned by whole turns (+-2 pi) to the value nearest
    its mid range that stays inside its limits (joints with more than a turn of travel reach one
    pose several ways; the limit margin should count the best of them).

    Parameters
    ----------
    q : (N, n) ndarray

    Returns
    -------
    (N, n) ndarray
    """
    q = np.array(q, float, copy=True)
    m = arm.model
    for j in range(m.n):
        lo, hi = m.lower[j], m.upper[j]
        if m.kinds[j] != 0 or not (np.isfinite(lo) and np.isfinite(hi)) or hi - lo <= 2 * np.pi:
            continue
        mid = 0.5 * (lo + hi)
        best = q[:, j].copy()
        for k in (-2, -1, 1, 2):
            cand = q[:, j] + 2 * np.pi * k
            ok = (cand >= lo) & (cand <= hi) & (np.abs(cand - mid) < np.abs(best - mid))
            best = np.where(ok, cand, best)
        q[:, j] = best
    return q


def reached_check(arm, q, T, rule: str, tol, atol):
    """Whether joint values ``q`` (N, n) put the TCP on goals ``T`` (N, 4, 4) (base frame).

    Position error <= ``tol`` (m); orientation (rule "fixed": full rotation angle; "axis": angle
    between tool z axes; "free": none) <= ``atol`` (rad); joints inside their limits.

    Returns
    -------
    (N,) bool ndarray
    """
    q = np.asarray(q, float)
    ok = np.all(np.isfinite(q), axis=-1)
    qs = np.where(ok[:, None], q, 0.0)
    F = arm.fk(qs)
    dp = np.linalg.norm(F[:, :3, 3] - T[:, :3, 3], axis=-1)
    ok &= dp <= np.asarray(tol)
    if rule == "fixed":
        tr = np.einsum("nij,nij->n", F[:, :3, :3], T[:, :3, :3])
        ang = np.arccos(np.clip((tr - 1.0) / 2.0, -1.0, 1.0))
        ok &= ang <= np.asarray(atol)
    elif rule == "axis":
        c = np.einsum("ni,ni->n", F[:, :3, 2], T[:, :3, 2])
        ok &= np.arccos(np.clip(c, -1.0, 1.0)) <= np.asarray(atol)
    ok &= arm.in_limits(qs, tol=1e-9)
    return ok


# ----------------------------------------------------------------------------------------------
# settings


@dataclass(frozen=True)
class MountSettings:
    """Validated mount-search settings (SI).

    measure : which measure is scored ("inverse_condition", "min_sv", "manipulability")
    rows : task rows of the measure ("full", "translation", ...); length : characteristic length (m)
    seeds : IK seeds per target; measure_power a, margin_power b, torque_power c, clearance_power d :
    the quality's exponents (reach_power: read from older study files, no longer used: the points
    served come first in the rank value)
    refine : how many of the best grid candidates are refined; refine_evaluations : budget each
    sensitivity : whether the sensitivity check runs
    """

    measure: str = "inverse_condition"
    rows: str | tuple = "full"
    length: float | None = None
    seeds: int = 8
    reach_power: float = 2.0
    measure_power: float = 1.0
    margin_power: float = 0.5
    torque_power: float = 0.5
    clearance_power: float = 0.5
    refine: int = 3
    refine_evaluations: int = 120
    sensitivity: bool = True
    solutions: str = "best"
    points: tuple = ()
    requirements: tuple = ()   # per work point Requirements (set by the plan from the cell; () = none stated)
    collisions: bool = False   # a solution counts only with clearance >= ``clearance`` (set by validate)
    clearance: float = collide.DEFAULT_CLEARANCE
    collision_reason: str = ""  # why collisions are off ("" when on)
    cell: object = field(default=None, compare=False, repr=False)  # the obstacles (set by validate)


_KEYS = {"measure", "rows", "length", "seeds", "reach_power", "measure_power", "margin_power", "torque_power",
         "clearance_power", "refine",
         "refine_evaluations", "sensitivity", "solutions", "points"} | collide.KEYS


#: clearance (m) at which the clearance factor of the quality reaches 1
CLEARANCE_FULL = 0.1

#: the ranking rule in words (results file, README, report)
RANK_RULE = ("rank value = k + Q / (1 + Q), k = number of work points served (reached within tolerance, inside the "
             "joint limits, requirements met, collision-free where collisions are checked), Q = the quality score: "
             "feasibility first, so a candidate serving every work point always ranks above one serving fewer; "
             "among candidates serving as many points the higher quality ranks first")


def quality_formula(s: MountSettings) -> str:
    """The quality formula in words, with this study's exponents (shown in results and the report)."""
    return (f"quality Q = w^{s.measure_power:g} * m^{s.margin_power:g} * t^{s.torque_power:g} * "
            f"min(1, c / {CLEARANCE_FULL * 1000:g} mm)^{s.clearance_power:g}, where w = worst "
            f"{s.measure.replace('_', ' ')} ({_rows_text(s.rows)} rows), m = smallest joint-limit margin (1 mid-range, "
            f"0 at a limit), t = smallest holding-torque margin, c = smallest clearance to the cell's obstacles, each "
            f"over the served work points (a factor is 1 where its value is not checked); 0 when no point is served")


def score_formula(s: MountSettings) -> str:
    """The ranking rule and the quality formula in words (the description of ``rank_value``)."""
    return RANK_RULE + "; " + quality_formula(s)


def _rows_text(rows):
    return rows if isinstance(rows, str) else ",".join(map(str, rows))


def _validate(settings: Mapping, arm, where: str) -> MountSettings:
    unknown = sorted(set(settings) - _KEYS)
    if unknown:
        raise StudyError(f"{where}: unknown key '{unknown[0]}'; allowed keys: {', '.join(sorted(_KEYS))}")
    out = {}
    m = settings.get("measure", "inverse_condition")
    if m not in MEASURES:
        raise StudyError(f"{where} measure: expected one of {', '.join(MEASURES)}, got {m!r}")
    out["measure"] = m
    rows = settings.get("rows", "full")
    check_rows(rows, where)
    out["rows"] = rows if isinstance(rows, str) else tuple(rows)
    if "length" in settings:
        out["length"] = _pos(settings["length"], where, "length")
    for key, lo, hi in (("seeds", 1, MAX_SEEDS), ("refine", 0, None), ("refine_evaluations", 10, None)):
        if key in settings:
            v = settings[key]
            if isinstance(v, bool) or not isinstance(v, int) or v < lo or (hi is not None and v > hi):
                expected = f"from {lo} to {hi}" if hi is not None else f">= {lo}"
                raise StudyError(f"{where} {key}: expected an integer {expected}, got {v!r}")
            out[key] = v
    for key in ("reach_power", "measure_power", "margin_power", "torque_power", "clearance_power"):
        if key in settings:
            v = settings[key]
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not (0 <= v <= 20):
                raise StudyError(f"{where} {key}: expected an exponent between 0 and 20, got {v!r}")
            out[key] = float(v)
    if "points" in settings:
        pts = settings["points"]
        if (not isinstance(pts, list) or not pts or not all(isinstance(x, str) for x in pts)
                or len(set(pts)) != len(pts)):
            raise StudyError(f"{where} points: expected a non-empty list of distinct work point names, got {pts!r}")
        out["points"] = tuple(pts)
    if "solutions" in settings:
        if settings["solutions"] not in ("first", "best"):
            raise StudyError(f"{where} solutions: expected 'first' (fast) or 'best' (every seed), "
                             f"got {settings['solutions']!r}")
        out["solutions"] = settings["solutions"]
    if "sensitivity" in settings:
        if not isinstance(settings["sensitivity"], bool):
            raise StudyError(f"{where} sensitivity: expected true or false, got {settings['sensitivity']!r}")
        out["sensitivity"] = settings["sensitivity"]
    cs = collide.collision_settings(settings, arm, where)
    out.update(collisions=cs.on, clearance=cs.clearance, collision_reason=cs.reason)
    return MountSettings(**out)


def collision_of(s: MountSettings) -> collide.CollisionSettings:
    """The collision settings of a mount search."""
    return collide.CollisionSettings(bool(s.collisions), float(s.clearance), s.collision_reason)


def _pos(v, where, key):
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or v <= 0:
        raise StudyError(f"{where} {key}: expected a positive number, got {v!r}")
    return float(v)


# ----------------------------------------------------------------------------------------------
# the maths


def _measure_of_q(arm, q, s: MountSettings) -> np.ndarray:
    from ..measures import measures_from_sv

    length = s.length if s.length is not None else arm.nominal_reach()
    sv = arm.singular_values(np.ascontiguousarray(q), rows=s.rows, length=length)
    return measures_from_sv(sv)[s.measure]


def evaluate_mounts(arm, mounts, points, s: MountSettings, q0=None, choose: str = "first") -> dict:
    """IK of every work point from every mount and the per-point measures.

    Parameters
    ----------
    arm : workbench.kinematics.Arm
    mounts : (C, 4, 4) ndarray
        Candidate base-in-cell transforms.
    points : sequence of WorkPoint
        The P work points (cell frame).
    s : MountSettings
        With ``s.collisions`` a solution counts only when its clearance
        (:func:`workbench.collision.clearance` against ``s.cell``) is at least ``s.clearance``, and
        a candidate whose base shapes come closer than that to an obstacle reaches nothing.
    q0 : (C, P, n) ndarray, optional
        Preferred seeds (warm start), tried first.
    choose : {"first", "best"}
        "first": the first clear solution found (seeds in order: ``q0``, home, random; fast: only
        targets whose first solution collides run every seed again).
        "best": every seed runs and each point keeps the reached, clear solution with the largest
        ``measure^a * margin^b`` (the score's exponents): slower by about the number of seeds,
        but it finds the better branch (e.g. the unflipped wrist).

    Returns
    -------
    dict with ``q`` (C, P, n), ``reached`` (C, P) bool, ``measure`` (C, P) (0 where not reached),
    ``margin`` (C, P) (0 where not reached), ``torque_margin``, ``unmet``, ``clearance`` (C, P) m at
    the chosen solutions (+inf when collisions are off), ``colliding`` (C, P) bool (reached only by
    solutions below the clearance), ``base_clearance`` (C,) m (+inf: not checked or nothing near).
    """
    mounts = np.asarray(mounts, float).reshape(-1, 4, 4)
    C, P, n = mounts.shape[0], len(points), arm.n
    cs = collision_of(s)
    poses = np.array([p.pose for p in points]).reshape(P, 4, 4)
    T = relative_targets(mounts, poses)  # (C, P, 4, 4)
    q = np.zeros((C, P, n))
    reached = np.zeros((C, P), bool)
    colliding = np.zeros((C, P), bool)
    clear = np.full((C, P), np.inf)
    for rule in ("fixed", "axis", "free"):
        idx = [k for k, p in enumerate(points) if p.rule == rule]
        if not idx:
            continue
        Tg = T[:, idx].reshape(-1, 4, 4)
        seed = None if q0 is None else np.asarray(q0)[:, idx].reshape(-1, n)
        tol = np.tile([points[k].tolerance for k in idx], C)
        atol = np.tile([points[k].angle_tolerance for k in idx], C)
        Mg = np.repeat(mounts, len(idx), axis=0)  # the mount of each target
        if choose == "best":
            qs, ok, d, hit = _best_solutions(arm, Tg, rule, s, seed, tol, atol, Mg)
        else:
            qs, _status = solve_targets(arm, Tg, rule, seeds=s.seeds, q0=seed)
            ok = reached_check(arm, qs, Tg, rule, tol, atol)
            qs, ok, d, hit = _clear_first(arm, Tg, rule, s, seed, tol, atol, Mg, qs, ok)
        q[:, idx] = np.where(np.isfinite(qs), qs, 0.0).reshape(C, len(idx), n)
        reached[:, idx] = ok.reshape(C, len(idx))
        colliding[:, idx] = hit.reshape(C, len(idx))
        clear[:, idx] = d.reshape(C, len(idx))
    base = np.full(C, np.inf)
    if cs.on:
        from ..collision import base_clearance

        base = base_clearance(arm, s.cell, mounts)
        with np.errstate(invalid="ignore"):
            blocked = ~(base >= cs.clearance)
        reached &= ~blocked[:, None]
    flat = center_turns(arm, q.reshape(-1, n))
    q = flat.reshape(C, P, n)
    meas = _measure_of_q(arm, flat, s).reshape(C, P)
    marg = arm.limit_margin(flat).reshape(C, P)
    reached, torque, unmet = _apply_requirements(arm, mounts, q, reached, s)
    meas = np.where(reached, meas, 0.0)
    marg = np.where(reached, np.clip(marg, 0.0, 1.0), 0.0)
    obstacle = np.full((C, P), np.inf)
    if cs.on and reached.any():  # the quality's clearance factor: to the cell's obstacles only
        from ..collision import clearance as _clearance

        Mq = np.broadcast_to(mounts[:, None], (C, P, 4, 4))
        obstacle = np.where(reached, _clearance(arm, q, s.cell, self_collision=False, mounts=Mq), np.inf)
    return {"q": q, "reached": reached, "measure": meas, "margin": marg, "torque_margin": torque, "unmet": unmet,
            "clearance": clear, "obstacle_clearance": obstacle, "colliding": colliding, "base_clearance": base}


def _clear_first(arm, Tg, rule, s, seed, tol, atol, Mg, qs, ok):
    """Collision-aware "first" choice: keep the first converged solution where it is clear;
    where it collides, run every seed of those targets again (one batched IK call), take the
    clearance of all their solutions in one call and keep the first reached, clear one (seeds in
    the same order, so the result is the first clear solution of the seed order).

    Returns (q (N, n), reached (N,), clearance (N,) m at the chosen solution, colliding (N,):
    some solution reaches the target but none with the clearance asked)."""
    cs = collision_of(s)
    N, n = qs.shape
    if not cs.on:
        return qs, ok, np.full(N, np.inf), np.zeros(N, bool)
    d, good = collide.clear_of(arm, qs, s.cell, cs, mounts=Mg)
    redo = np.flatnonzero(ok & ~good)
    hit = np.zeros(N, bool)
    if redo.size:
        from ..kinematics.ik import solve_ik

        kw = {} if seed is None else {"q_seed": np.ascontiguousarray(seed[redo])}
        res = solve_ik(arm, np.ascontiguousarray(Tg[redo]), seeds=s.seeds, orientation=rule, all_solutions=True, **kw)
        K = res.q.shape[1]
        qK = np.where(np.isfinite(res.q), res.q, 0.0)
        okK = reached_check(arm, qK.reshape(-1, n), np.repeat(Tg[redo], K, axis=0), rule,
                            np.repeat(tol[redo], K), np.repeat(atol[redo], K)).reshape(-1, K)
        dK, goodK = collide.clear_of(arm, qK, s.cell, cs, mounts=Mg[redo][:, None])
        pick, found = collide.first_clear(okK & goodK)
        rows = np.arange(redo.size)
        qs = qs.copy()
        d = d.copy()
        qs[redo[found]] = qK[rows, pick][found]
        d[redo[found]] = dK[rows, pick][found]
        hit[redo[~found]] = True
    reached = ok & ~hit
    return qs, reached, d, hit


def _apply_requirements(arm, mounts, q, reached, s):
    """A work point is served only if its requirements hold at the chosen solution: holding torques
    within the joint limits and the asked tool speed within the joint speed limits
    (:func:`workbench.studies.requirements.requirement_check`). Returns (served (C, P), smallest
    torque margin (C, P), NaN where not reached or not checked, unmet (C, P): reached but a
    requirement fails)."""
    C, P = reached.shape
    torque = np.full((C, P), np.nan)
    unmet = np.zeros((C, P), bool)
    reqs = getattr(s, "requirements", ())
    if not reqs:
        return reached, torque, unmet
    from .requirements import requirement_check

    for k in range(P):
        if not reached[:, k].any():
            continue
        chk = requirement_check(arm, q[:, k], reqs[k], mounts=mounts)
        torque[:, k] = np.where(reached[:, k], chk.torque_margin, np.nan)
        unmet[:, k] = reached[:, k] & ~chk.ok
    return reached & ~unmet, torque, unmet


def _best_solutions(arm, Tg, rule, s, seed, tol, atol, Mg=None):
    """Every seed's solution; per target the reached (and, with collisions on, clear) one with the
    largest measure^a * margin^b. The clearance of all solutions is one batched call.

    Returns (q (N, n), reached (N,), clearance (N,) m at the pick, colliding (N,))."""
    from ..kinematics.ik import solve_ik

    N, n = Tg.shape[0], arm.n
    kw = {} if seed is None else {"q_seed": seed.reshape(N, n)}
    res = solve_ik(arm, Tg, seeds=s.seeds, orientation=rule, all_solutions=True, **kw)
    K = res.q.shape[1]
    qK = center_turns(arm, np.where(np.isfinite(res.q), res.q, 0.0).reshape(-1, n))
    okK = reached_check(arm, qK, np.repeat(Tg, K, axis=0), rule, np.repeat(tol, K), np.repeat(atol, K))
    cs = collision_of(s)
    dK, goodK = collide.clear_of(arm, qK.reshape(N, K, n), s.cell, cs,
                                 mounts=None if Mg is None or not cs.on else Mg[:, None])
    dK, goodK = dK.reshape(-1), goodK.reshape(-1)
    anyok = okK.reshape(N, K).any(axis=1)
    okK = okK & goodK
    with np.errstate(invalid="ignore"):
        val = (np.maximum(_measure_of_q(arm, qK, s), 0) ** s.measure_power
               * np.clip(arm.limit_margin(qK), 0, 1) ** s.margin_power)
    val = np.where(okK, val, -1.0).reshape(N, K)
    pick = np.argmax(val, axis=1)
    rows = np.arange(N)
    got = okK.reshape(N, K)[rows, pick]
    return (qK.reshape(N, K, n)[rows, pick], got, dK.reshape(N, K)[rows, pick], anyok & ~got)


def rank_values(served, quality):
    """The one ranking value: ``served + quality / (1 + quality)`` (see the module docstring).

    Parameters
    ----------
    served : (...,) int or float ndarray
        Number of work points served.
    quality : (...,) ndarray
        Quality score Q >= 0.

    Returns
    -------
    (...,) float ndarray; the whole part is ``served``, the fraction in [0, 1) increases with Q.
    """
    q = np.maximum(np.asarray(quality, float), 0.0)
    with np.errstate(invalid="ignore"):
        frac = np.where(np.isinf(q), 1.0, q / (1.0 + q))
    # kept below 1 by more than the rounding of the sum (qualities above 1e9 tie)
    return np.asarray(served, float) + np.minimum(frac, 1.0 - 1e-9)


def _worst_over_served(values, reached):
    """Smallest finite value over the served points per candidate; NaN where none is finite."""
    v = np.where(np.asarray(reached, bool) & np.isfinite(values), values, np.inf)
    m = v.min(axis=-1) if v.shape[-1] else np.full(v.shape[:-1], np.inf)
    return np.where(np.isfinite(m), m, np.nan)


def score_candidates(reached, measure, margin, s: MountSettings, torque=None, clearance=None) -> dict:
    """Per-candidate points served, worst values, quality and rank value (feasibility first).

    Parameters
    ----------
    reached : (C, P) bool ndarray
        Work point served (reached, inside limits, requirements met, collision-free if checked).
    measure, margin : (C, P) ndarray
    torque : (C, P) ndarray, optional
        Holding-torque margin per point (NaN where not checked).
    clearance : (C, P) ndarray, optional
        Clearance (m) to the cell's obstacles per point at the chosen solution (NaN where not checked).

    Returns
    -------
    dict of (C,) arrays: ``served`` (count), ``reached_fraction`` (served / P), ``worst_measure``,
    ``min_margin`` (0 when nothing is served), ``min_torque_margin``, ``min_obstacle_clearance`` (NaN
    when not checked), ``score`` (the quality Q, :func:`quality_formula`), ``rank_value``
    (:func:`rank_values`).
    """
    reached = np.asarray(reached, bool)
    P = reached.shape[-1]
    served = reached.sum(axis=-1)
    f = served / P if P else np.zeros(reached.shape[:-1])
    anyr = served > 0
    big = np.where(reached, measure, np.inf)
    w = np.where(anyr, big.min(axis=-1) if P else 0.0, 0.0)
    mm = np.where(anyr, np.where(reached, margin, np.inf).min(axis=-1) if P else 0.0, 0.0)
    with np.errstate(invalid="ignore"):
        score = (np.maximum(w, 0) ** s.measure_power) * (np.maximum(mm, 0) ** s.margin_power)
    out = {"served": served, "reached_fraction": f, "worst_measure": w, "min_margin": mm}
    for key, vals, power, full in (("min_torque_margin", torque, s.torque_power, 1.0),
                                   ("min_obstacle_clearance", clearance, s.clearance_power, CLEARANCE_FULL)):
        if vals is None:
            out[key] = np.full(served.shape, np.nan)
            continue
        worst = _worst_over_served(np.asarray(vals, float), reached)
        with np.errstate(invalid="ignore"):
            factor = np.where(np.isfinite(worst), np.clip(worst / full, 0.0, 1.0) ** power, 1.0)
        score = score * factor
        out[key] = worst
    score = np.where(anyr, score, 0.0)
    out["score"] = score
    out["rank_value"] = rank_values(served, score)
    return out


def _scores(ev, s):
    """:func:`score_candidates` of an :func:`evaluate_mounts` result."""
    return score_candidates(ev["reached"], ev["measure"], ev["margin"], s, torque=ev.get("torque_margin"),
                            clearance=ev.get("obstacle_clearance"))


def _score_at(arm, points, s, x, y, h, yaw, tilt, q0=None):
    """Rank value of one mount, and its :func:`evaluate_mounts` result (with ``scores``)."""
    M = mount_transforms(x, y, h, yaw, tilt)[None]
    # warm-started from chosen solutions the first solution stays on their branch (cheap);
    # without a warm start every seed is tried
    ev = evaluate_mounts(arm, M, points, s, q0=q0, choose="first" if q0 is not None else "best")
    sc = _scores(ev, s)
    ev["scores"] = {k: float(v[0]) for k, v in sc.items()}
    return float(sc["rank_value"][0]), ev


def refine_candidate(arm, points, s: MountSettings, x, y, h, yaw, tilt, step_xy, step_yaw, bounds=None,
                     q0=None, maxfev=None):
    """Polish one candidate over (x, y, yaw) with Nelder-Mead (scipy.optimize.minimize).

    The objective is the rank value (:func:`rank_values`), so the polish never trades a served work
    point for quality. Height and style stay fixed. ``step_xy`` (m) and ``step_yaw`` (rad) set the
    first simplex; ``bounds`` ((x0, x1), (y0, y1)) keeps x, y inside the candidate region (clipped).

    Returns
    -------
    dict with ``x``, ``y``, ``yaw``, ``rank_value``, ``start_rank_value``, ``score`` (quality),
    ``start_score``, ``served``, ``evaluations``, ``q`` (P, n).
    """
    from scipy.optimize import minimize

    maxfev = maxfev or s.refine_evaluations
    start_rank, ev0 = _score_at(arm, points, s, x, y, h, yaw, tilt, q0=q0)
    warm = ev0["q"]
    best = {"rank": start_rank, "scores": ev0["scores"], "v": np.array([x, y, yaw]), "q": warm[0]}
    scale = np.array([step_xy, step_xy, max(step_yaw, 1e-3)])

    def clip(v):
        v = v.copy()
        if bounds is not None:
            v[0] = min(max(v[0], bounds[0][0]), bounds[0][1])
            v[1] = min(max(v[1], bounds[1][0]), bounds[1][1])
        return v

    def f(z):
        v = clip(np.array([x, y, yaw]) + z * scale)
        rv, ev = _score_at(arm, points, s, v[0], v[1], h, v[2], tilt, q0=warm)
        if rv > best["rank"]:
            best.update(rank=rv, scores=ev["scores"], v=v, q=ev["q"][0])
        return -rv

    simplex = np.array([[0, 0, 0], [0.5, 0, 0], [0, 0.5, 0], [0, 0, 0.5]], float)
    res = minimize(f, np.zeros(3), method="Nelder-Mead",
                   options={"initial_simplex": simplex, "maxfev": int(maxfev), "xatol": 1e-5, "fatol": 1e-12})
    v = best["v"]
    return {"x": float(v[0]), "y": float(v[1]), "yaw": float(v[2] % (2 * np.pi)), "rank_value": float(best["rank"]),
            "start_rank_value": float(start_rank), "score": best["scores"]["score"],
            "start_score": ev0["scores"]["score"], "served": int(best["scores"]["served"]),
            "evaluations": int(res.nfev), "q": best["q"]}


def sensitivity(arm, points, s: MountSettings, x, y, h, yaw, tilt, q0=None,
                offsets_xy=(0.01, 0.02), offsets_yaw=(1 * _DEG, 2 * _DEG)) -> dict:
    """Quality drop (and points lost) when the base is placed off by the given offsets.

    For each position offset d the base is moved by d along +x, -x, +y, -y and the move with the
    lowest rank value is kept; for each yaw offset the base is turned by +-d.

    Returns
    -------
    dict with ``score`` (nominal quality), ``served`` (nominal) and ``rows``: list of (kind, offset
    in mm or deg, quality of the worst move, quality drop, work points lost by the worst move).
    """
    _nominal_rank, ev = _score_at(arm, points, s, x, y, h, yaw, tilt, q0=q0)
    nominal, served = ev["scores"]["score"], int(ev["scores"]["served"])
    warm = ev["q"]
    rows = []

    def worst_of(M, kind, off):
        e = evaluate_mounts(arm, M, points, s, q0=np.repeat(warm, len(M), axis=0))
        sc = _scores(e, s)
        k = int(np.argmin(sc["rank_value"]))
        q = float(sc["score"][k])
        rows.append((kind, off, q, float(nominal - q), int(served - sc["served"][k])))

    for d in offsets_xy:
        moves = [(d, 0), (-d, 0), (0, d), (0, -d)]
        worst_of(np.stack([mount_transforms(x + dx, y + dy, h, yaw, tilt) for dx, dy in moves]), "position", d * 1000.0)
    for d in offsets_yaw:
        worst_of(np.stack([mount_transforms(x, y, h, yaw + sg * d, tilt) for sg in (1, -1)]), "yaw", d / _DEG)
    return {"score": nominal, "served": served, "rows": rows}


# ----------------------------------------------------------------------------------------------
# the study kind


class MountSearch(StudyKind):
    """Mount search over the cell's candidate region (see the module docstring)."""

    name = "mount_search"
    title = "mount search"
    needs_cell = True

    def default_settings(self, arm) -> dict:
        return {"measure": "inverse_condition", "rows": "full", "seeds": 8, "measure_power": 1.0,
                "margin_power": 0.5, "torque_power": 0.5, "clearance_power": 0.5, "solutions": "best", "refine": 3,
                "sensitivity": True}

    def unused_settings(self, settings) -> dict:
        if "reach_power" in (settings or {}):
            return {"reach_power": "no longer used: candidates are ranked by the number of work points served "
                                   "first, then by quality (rank value)"}
        return {}

    def validate(self, settings, arm, cell, where="settings"):
        if cell is None:
            raise StudyError(f"{where}: a mount search needs a cell file ([study] cell)")
        if cell.mount is None:
            raise StudyError(f"{cell.path}: no [mount] table; a mount search needs the candidate region")
        s = _validate(settings or {}, arm, where)
        names = [p.name for p in cell.points]
        for nm in s.points:
            if nm not in names:
                raise StudyError(f"{where} points: no work point named {nm!r} in {cell.path}; points are "
                                 f"{', '.join(names)}")
        return replace(s, cell=cell)

    def plan(self, spec, arm, cell, chunk_cells=None) -> Plan:
        where = f"{spec.where}: [settings]"
        s = self.validate(spec.settings, arm, cell, where)
        reg = cell.mount
        axes = (
            Axis("style", np.arange(len(reg.tilts)), "", "mount style"),
            Axis("height", reg.heights, "m", "base height"),
            Axis("yaw", reg.yaws, "rad", "base yaw"),
            Axis("y", reg.ys, "m", "base y"),
            Axis("x", reg.xs, "m", "base x"),
        )
        pts = tuple(cell.points) if not s.points else tuple(cell.point(nm) for nm in s.points)
        P, n = len(pts), arm.n
        reqs = tuple(cell.requirements_for(point=p.name) for p in pts) if hasattr(cell, "requirements_for") else ()
        if reqs and not all(r.empty for r in reqs):
            s = replace(s, requirements=reqs)
        formula = score_formula(s)
        fields = (
            Field("rank_value", (), "float64", "", formula, kind="measure"),
            Field("served", (), "float64", "", f"number of work points served (of {P})"),
            Field("score", (), "float64", "", quality_formula(s), kind="measure"),
            Field("reached_fraction", (), "float64", "", "fraction of work points served"),
            Field("worst_measure", (), "float64", unit_of(s.measure, s.rows, arm.kinds) or "",
                  f"worst {label(s.measure)} ({_rows_text(s.rows)} rows) over the served work points"),
            Field("min_margin", (), "float64", "", "smallest joint-limit margin over the served work points"),
            Field("point_reached", (P,), "uint8", "", "1 where that work point is served", kind="other"),
            Field("point_measure", (P,), "float64", "", "measure at each work point (0 if not served)",
                  kind="other"),
            Field("q", (P, n), "float64", "rad", "IK solution of each work point", kind="pose"),
        )
        if s.requirements:
            fields += (Field("min_torque_margin", (), "float64", "",
                             "smallest holding-torque margin (limit - |tau|) / limit over the reached work points "
                             "(the unmet ones included)"),)
        if s.collisions:
            fields += (Field("min_clearance", (), "float64", "m",
                             "smallest clearance (m) over the reached work points at the chosen solutions, to the "
                             "cell's obstacles and between the arm's own links"),
                       Field("min_obstacle_clearance", (), "float64", "m",
                             "smallest clearance (m) between the arm and the cell's obstacles over the served work "
                             "points (the quality's clearance factor)"),
                       Field("base_clearance", (), "float64", "m",
                             "clearance (m) between the base's shapes and the cell's obstacles (below the "
                             "clearance setting: the candidate reaches nothing)"),
                       Field("point_clearance", (P,), "float64", "m",
                             "clearance (m) at each work point's chosen solution", kind="other"),
                       Field("point_colliding", (P,), "uint8", "",
                             "1 where the work point is reached only by solutions below the clearance setting",
                             kind="other"))
        data = {"point_names": [p.name for p in pts], "tilts": reg.tilts, "styles": list(reg.styles),
                "formula": formula, "arm_model": arm.model, "points": pts,
                "result_attrs": collide.result_attrs(collision_of(s)),
                "step_x": float(reg.xs[1] - reg.xs[0]) if len(reg.xs) > 1 else 0.05,
                "step_y": float(reg.ys[1] - reg.ys[0]) if len(reg.ys) > 1 else 0.05,
                "step_yaw": float(np.min(np.diff(np.sort(reg.yaws)))) if len(reg.yaws) > 1 else 10 * _DEG,
                "bounds": ((float(reg.xs[0]), float(reg.xs[-1])), (float(reg.ys[0]), float(reg.ys[-1])))}
        cc = chunk_cells or max(1, 4096 // max(P, 1))
        return Plan(self.name, spec, s, axes, fields, chunk_cells=cc, data=data)

    def compute_chunk(self, plan, arm, cell, chunk) -> dict:
        s = plan.settings
        idx = np.arange(chunk.start, chunk.stop)
        si, hi, yi, yyi, xi = np.unravel_index(idx, plan.shape)
        ax = {a.name: a.values for a in plan.axes}
        M = mount_transforms(ax["x"][xi], ax["y"][yyi], ax["height"][hi], ax["yaw"][yi], plan.data["tilts"][si])
        points = plan.data["points"]
        ev = evaluate_mounts(arm, M, points, s, choose=s.solutions)
        sc = _scores(ev, s)
        return {"rank_value": sc["rank_value"], "served": sc["served"].astype(float), "score": sc["score"],
                "reached_fraction": sc["reached_fraction"],
                "worst_measure": sc["worst_measure"], "min_margin": sc["min_margin"],
                "point_reached": ev["reached"].astype(np.uint8), "point_measure": ev["measure"],
                "q": ev["q"], **_torque_columns(plan, ev), **_clearance_columns(plan, ev)}

    def summarise(self, plan, arrays) -> dict:
        return summarise_mount_search(plan, arrays)


def _clearance_columns(plan, ev) -> dict:
    if not any(f.name == "min_clearance" for f in plan.fields):
        return {}
    d = np.where(ev["reached"], ev["clearance"], np.inf)
    worst = np.where(ev["reached"].any(axis=-1), d.min(axis=-1), np.nan)
    ob = np.where(ev["reached"], ev["obstacle_clearance"], np.inf)
    ob_worst = np.where(ev["reached"].any(axis=-1), ob.min(axis=-1), np.nan)
    return {"min_clearance": worst, "min_obstacle_clearance": np.where(np.isfinite(ob_worst), ob_worst, np.nan),
            "base_clearance": ev["base_clearance"],
            "point_clearance": np.where(np.isfinite(ev["clearance"]), ev["clearance"], np.nan),
            "point_colliding": ev["colliding"].astype(np.uint8)}


def _torque_columns(plan, ev) -> dict:
    if not any(f.name == "min_torque_margin" for f in plan.fields):
        return {}
    # over every reached point, the unmet ones included (they say why a point is not served); the
    # quality's torque factor takes the served points only
    t = ev["torque_margin"]
    with np.errstate(invalid="ignore"):
        worst = np.where(np.isfinite(t).any(axis=-1), np.nanmin(np.where(np.isfinite(t), t, np.inf), axis=-1), np.nan)
    return {"min_torque_margin": worst}


#: the recommended mount is rounded to this placement resolution (m, rad) before it is scored again
ROUND_XY = 0.001
ROUND_YAW = 0.1 * _DEG
#: rank values closer than this count as equal for ``map_best`` (below the 6 digits shown)
MAP_TIE = 1e-6


def summarise_mount_search(plan, arrays, top: int = 20) -> dict:
    """Ranking table, refined candidates, the recommended mount, sensitivity and per-point table.

    The grid ranking sorts the grid's own ``rank_value`` (the map's value: the same IK rule, see
    ``solutions``); the refinement and the recommendation use the same rank value.
    """
    from ..kinematics import Arm

    s = plan.settings
    ax = {a.name: a.values for a in plan.axes}
    styles = plan.data["styles"]
    P = len(plan.data["point_names"])
    rank = np.asarray(arrays["rank_value"], float).reshape(-1) if "rank_value" in arrays else None
    score = np.asarray(arrays["score"], float).reshape(-1)
    done = np.isfinite(score) if rank is None else np.isfinite(rank)
    if rank is None:  # partial arrays without the field: nothing to rank by
        rank = np.where(done, 0.0, np.nan)
    order = np.argsort(-np.where(done, rank, -np.inf), kind="stable")[: min(top, int(done.sum()))]
    formula = plan.data["formula"]
    f = np.asarray(arrays["reached_fraction"]).reshape(-1)
    served = np.asarray(arrays["served"], float).reshape(-1) if "served" in arrays else np.round(f * P)
    w = np.asarray(arrays["worst_measure"]).reshape(-1)
    mm = np.asarray(arrays["min_margin"]).reshape(-1)
    points = plan.data["points"]
    arm = Arm(plan.data["arm_model"])
    qall = np.asarray(arrays["q"], float).reshape((-1,) + (len(points), arm.n))
    tmr = np.asarray(arrays["min_torque_margin"], float).reshape(-1) if "min_torque_margin" in arrays else None
    si, hi, yi, yyi, xi = np.unravel_index(order, plan.shape)
    rule = ("the grid's own values, the same as the map: " + ("every seed's best solution per work point"
            if s.solutions == "best" else "the first IK solution found per work point (solutions = 'first')"))
    tables = {"ranking": Table(
        "Mount ranking (grid)",
        {"rank": np.arange(1, len(order) + 1), "x": ax["x"][xi] * 1000, "y": ax["y"][yyi] * 1000,
         "height": ax["height"][hi] * 1000, "yaw": np.degrees(ax["yaw"][yi]),
         "style": (np.array([styles[k] for k in si], dtype=object) if len(si) else np.zeros(0, dtype="S1")),
         "served": served[order].astype(int), "reached": f[order] * 100, "worst_measure": w[order],
         "min_margin": mm[order], **({"torque_margin": tmr[order]} if tmr is not None else {}),
         "score": score[order], "rank_value": rank[order]},
        {"x": "mm", "y": "mm", "height": "mm", "yaw": "deg", "reached": "%"},
        f"feasibility first, sorted by rank value ({rule}); {formula}")}
    pr = np.asarray(arrays["point_reached"]).reshape(-1, P)
    never = ~(pr[done] > 0).any(axis=0) if done.any() else np.ones(P, bool)
    if never.any():
        names = [nm for nm, nv in zip(plan.data["point_names"], never) if nv]
        tables["unreachable"] = Table(
            "Work points not reached from any candidate mount",
            {"point": np.array(names, dtype=object),
             "note": np.array(["unreachable from every candidate mount of the region (out of reach, "
                               "blocked by joint limits, or not found from the IK seeds)"] * len(names), dtype=object)},
            {}, f"{len(names)} of {len(never)} work points are unreachable from all {int(done.sum())} candidates")
    if not len(order) or served[order[0]] <= 0:
        return tables
    refined = []
    seen = []
    for k in order:
        if len(refined) >= s.refine:
            break
        a, b, c, d, e = np.unravel_index(k, plan.shape)
        key = (a, b, ax["x"][e], ax["y"][d], ax["yaw"][c])
        if any(key[:2] == t[:2] and abs(key[2] - t[2]) <= 1.01 * plan.data["step_x"]
               and abs(key[3] - t[3]) <= 1.01 * plan.data["step_y"] and key[4] == t[4] for t in seen):
            continue  # a neighbour of a candidate already refined
        seen.append(key)
        r = refine_candidate(arm, points, s, ax["x"][e], ax["y"][d], ax["height"][b], ax["yaw"][c],
                             plan.data["tilts"][a], max(plan.data["step_x"], plan.data["step_y"]),
                             plan.data["step_yaw"], bounds=plan.data["bounds"], q0=qall[k][None])
        r.update(style=styles[a], height=float(ax["height"][b]), tilt=float(plan.data["tilts"][a]),
                 grid_x=float(ax["x"][e]), grid_y=float(ax["y"][d]), grid_yaw=float(ax["yaw"][c]),
                 grid_rank_value=float(rank[k]), grid_index=int(k))
        refined.append(r)
    if refined:
        refined.sort(key=lambda r: -r["rank_value"])
        tables["refined"] = Table(
            "Refined mounts (off the grid, Nelder-Mead over x, y, yaw on the rank value)",
            {"rank": np.arange(1, len(refined) + 1), "x": np.array([r["x"] for r in refined]) * 1000,
             "y": np.array([r["y"] for r in refined]) * 1000, "height": np.array([r["height"] for r in refined]) * 1000,
             "yaw": np.degrees([r["yaw"] for r in refined]), "style": np.array([r["style"] for r in refined], dtype=object),
             "served": np.array([r["served"] for r in refined]), "score": np.array([r["score"] for r in refined]),
             "rank_value": np.array([r["rank_value"] for r in refined]),
             "grid_x": np.array([r["grid_x"] for r in refined]) * 1000,
             "grid_y": np.array([r["grid_y"] for r in refined]) * 1000,
             "grid_yaw": np.degrees([r["grid_yaw"] for r in refined]),
             "grid_rank_value": np.array([r["grid_rank_value"] for r in refined]),
             "evaluations": np.array([r["evaluations"] for r in refined])},
            {"x": "mm", "y": "mm", "height": "mm", "yaw": "deg", "grid_x": "mm", "grid_y": "mm", "grid_yaw": "deg"},
            formula)
        start = refined[0]
        # the refined mount rounded to what can be marked on the floor, scored again there
        xr = round(start["x"] / ROUND_XY) * ROUND_XY
        yr = round(start["y"] / ROUND_XY) * ROUND_XY
        yawr = (round(start["yaw"] / ROUND_YAW) * ROUND_YAW) % (2 * np.pi)
        rv, ev_r = _score_at(arm, points, s, xr, yr, start["height"], yawr, start["tilt"], q0=start["q"][None])
        rounded = dict(start, x=xr, y=yr, yaw=yawr, rank_value=rv, score=ev_r["scores"]["score"],
                       served=int(ev_r["scores"]["served"]), q=ev_r["q"][0], source="refined")
        cand = [rounded]
    else:  # no polishing: the best grid candidate is the answer
        k = int(order[0])
        a, b, c, d, e = np.unravel_index(k, plan.shape)
        rv, ev0 = _score_at(arm, points, s, ax["x"][e], ax["y"][d], ax["height"][b], ax["yaw"][c],
                            plan.data["tilts"][a], q0=qall[k][None])
        cand = [{"x": float(ax["x"][e]), "y": float(ax["y"][d]), "yaw": float(ax["yaw"][c]), "rank_value": rv,
                 "score": ev0["scores"]["score"], "served": int(ev0["scores"]["served"]), "q": ev0["q"][0],
                 "style": styles[a], "height": float(ax["height"][b]), "tilt": float(plan.data["tilts"][a]),
                 "grid_x": float(ax["x"][e]), "grid_y": float(ax["y"][d]), "grid_yaw": float(ax["yaw"][c]),
                 "grid_rank_value": float(rank[k]), "grid_index": k, "source": "grid"}]
    # the grid cell itself when rounding or refinement ended below it (never recommend worse than the map)
    k0 = int(order[0])
    if cand[0]["rank_value"] < rank[k0]:
        a, b, c, d, e = np.unravel_index(k0, plan.shape)
        rv, ev0 = _score_at(arm, points, s, ax["x"][e], ax["y"][d], ax["height"][b], ax["yaw"][c],
                            plan.data["tilts"][a], q0=qall[k0][None])
        cand.append({"x": float(ax["x"][e]), "y": float(ax["y"][d]), "yaw": float(ax["yaw"][c]), "rank_value": rv,
                     "score": ev0["scores"]["score"], "served": int(ev0["scores"]["served"]), "q": ev0["q"][0],
                     "style": styles[a], "height": float(ax["height"][b]), "tilt": float(plan.data["tilts"][a]),
                     "grid_x": float(ax["x"][e]), "grid_y": float(ax["y"][d]), "grid_yaw": float(ax["yaw"][c]),
                     "grid_rank_value": float(rank[k0]), "grid_index": k0, "source": "grid"})
    best = max(cand, key=lambda r: r["rank_value"])  # first of equals: the rounded refined mount
    # (the rounding may cost a little against the refined table's row 1; never below the map's best)
    best.setdefault("source", "refined")
    a0, b0, c0, d0, e0 = np.unravel_index(int(best["grid_index"]), plan.shape)
    tables["recommended"] = Table(
        "Recommended mount (cell frame)",
        {"x": np.array([best["x"] * 1000]), "y": np.array([best["y"] * 1000]),
         "height": np.array([best["height"] * 1000]), "yaw": np.array([math.degrees(best["yaw"])]),
         "tilt": np.array([math.degrees(best["tilt"])]), "style": np.array([best["style"]], dtype=object),
         "served": np.array([int(best["served"])]), "points": np.array([P]),
         "score": np.array([best["score"]]), "rank_value": np.array([best["rank_value"]]),
         "source": np.array([best["source"]], dtype=object),
         "grid_x": np.array([best["grid_x"] * 1000]), "grid_y": np.array([best["grid_y"] * 1000]),
         "grid_yaw": np.array([math.degrees(best["grid_yaw"])]),
         "grid_height": np.array([float(ax["height"][b0]) * 1000]),
         "grid_style": np.array([styles[a0]], dtype=object),
         "grid_rank_value": np.array([best["grid_rank_value"]]),
         # the map's best cell: rank 1 of the grid, or a cell within MAP_TIE of its value (ties, e.g. yaws that
         # joint 1 takes up, count as the best)
         "map_best": np.array([int(int(best["grid_index"]) == k0 or best["grid_rank_value"] >= rank[k0] - MAP_TIE)])},
        {"x": "mm", "y": "mm", "height": "mm", "yaw": "deg", "tilt": "deg", "grid_x": "mm", "grid_y": "mm",
         "grid_yaw": "deg", "grid_height": "mm"},
        "the one recommended mount: " + ("the best refined mount rounded to 1 mm and 0.1 deg and scored again there"
                                         if best["source"] == "refined" else "the best grid cell")
        + "; grid_*: the grid cell it comes from (map_best = 1: the map's best cell, or within 1e-6 of its "
        "rank value); " + RANK_RULE)
    if s.sensitivity:
        sens = sensitivity(arm, points, s, best["x"], best["y"], best["height"], best["yaw"], best["tilt"],
                           q0=best["q"][None])
        rows = sens["rows"]
        tables["sensitivity"] = Table(
            "Sensitivity of the best mount to placement errors",
            {"offset_kind": np.array([r[0] for r in rows], dtype=object), "offset": np.array([r[1] for r in rows]),
             "offset_unit": np.array(["mm" if r[0] == "position" else "deg" for r in rows], dtype=object),
             "worst_score": np.array([r[2] for r in rows]), "score_drop": np.array([r[3] for r in rows]),
             "points_lost": np.array([r[4] for r in rows]),
             "nominal_score": np.full(len(rows), sens["score"])},
            {}, "quality of the worst (lowest rank value) of the +-x, +-y (position) or +-yaw offsets of the "
                "recommended mount, its drop from the nominal quality and the work points it loses")
    # the solutions behind the recommended rank value (warm-started from them, the first solution is
    # the same pose): the per-point values then give exactly the 'recommended' table's values
    ev = evaluate_mounts(arm, mount_transforms(best["x"], best["y"], best["height"], best["yaw"], best["tilt"])[None],
                         points, s, q0=best["q"][None], choose="first")
    cols = {"point": np.array([p.name for p in points], dtype=object), "reached": ev["reached"][0].astype(int),
            "measure": ev["measure"][0], "margin": ev["margin"][0]}
    if s.requirements:
        cols["torque_margin"] = ev["torque_margin"][0]
        cols["requirements_met"] = np.where(ev["unmet"][0], 0, 1)
    units = {}
    if s.collisions:  # clearance (mm) at the chosen solutions; 'colliding': reached only below the setting
        cols["clearance"] = ev["clearance"][0] * 1000.0
        cols["obstacle_clearance"] = np.where(ev["reached"][0], ev["obstacle_clearance"][0] * 1000.0, np.nan)
        cols["colliding"] = ev["colliding"][0].astype(int)
        units["clearance"] = "mm"
        units["obstacle_clearance"] = "mm"
    for j, joint in enumerate(arm.model.joints):  # joint values at the recommended mount
        cols[f"q_{joint.name}"] = np.degrees(ev["q"][0][:, j]) if joint.revolute else ev["q"][0][:, j] * 1000
        units[f"q_{joint.name}"] = "deg" if joint.revolute else "mm"
    tables["best_points"] = Table(
        "Work points from the recommended mount", cols, units,
        f"{s.measure.replace('_', ' ')}, joint-limit margin and joint values per work point (the solutions "
        f"behind the recommended rank value)")
    return tables


# ----------------------------------------------------------------------------------------------
# bench


def bench_mount_search(quick: bool = False) -> dict:
    """20 x 20 floor positions x 8 yaws x 2 heights against 20 work points of the demo arm.

    Bar (issue 4): the ~128 000 IK problems finish in under 60 s on this machine (quick: a 10 x 10
    x 4 x 1 grid, the bar scaled to the same per-problem rate). Reference rate: the same IK run
    one candidate at a time (batches of 20 targets) on a small sample of candidates.
    """
    from ..kinematics import load_arm
    from ..benchutil import demo_arm_path
    from .cell import MountRegion

    arm = load_arm(demo_arm_path())
    pts = demo_work_points(20)
    nx, ny, nyaw, nh = (10, 10, 4, 1) if quick else (20, 20, 8, 2)
    reg = MountRegion(np.linspace(-0.4, 0.4, nx), np.linspace(-0.4, 0.4, ny), np.array([0.0, 0.3])[:nh],
                      np.linspace(0, 2 * np.pi, nyaw, endpoint=False), ("floor",), np.array([0.0]))
    M = candidate_grid(reg).reshape(-1, 4, 4)
    s = MountSettings(seeds=8)
    evaluate_mounts(arm, M[:4], pts, s)  # warm / compile
    t0 = time.perf_counter()
    out = []
    block = 512
    for i in range(0, len(M), block):
        ev = evaluate_mounts(arm, M[i:i + block], pts, s)
        out.append(_scores(ev, s)["score"])
    dt = time.perf_counter() - t0
    problems = len(M) * len(pts)
    sample = M[:: max(1, len(M) // 16)][:16]
    t1 = time.perf_counter()
    for Mk in sample:
        evaluate_mounts(arm, Mk[None], pts, s)
    ref_rate = len(sample) * len(pts) / (time.perf_counter() - t1)
    rate = problems / dt
    bar_s = 60.0 * problems / 128_000
    scores = np.concatenate(out)
    # the same search with collisions on (issue 9: at most 2x the time without): the demo arm's
    # shapes against the floor and four boxes, self-collision included, clearance 10 mm
    from .cell import parse_cell_text

    sc_on = replace(s, collisions=True, clearance=collide.DEFAULT_CLEARANCE,
                    cell=parse_cell_text(BENCH_CELL, "bench cell"))
    evaluate_mounts(arm, M[:4], pts, sc_on)  # warm / compile the clearance kernel
    t2 = time.perf_counter()
    out_c = []
    for i in range(0, len(M), block):
        ev = evaluate_mounts(arm, M[i:i + block], pts, sc_on)
        out_c.append(ev["reached"].mean())
    dt_c = time.perf_counter() - t2
    ratio = dt_c / dt
    return {"name": "mount search", "metrics": {"candidates": len(M), "ik_problems": problems, "seconds": dt,
                                                "problems_per_s": rate, "best_score": float(scores.max()),
                                                "reached_any": float((scores > 0).mean()),
                                                "seconds_with_collisions": dt_c,
                                                "reached_with_collisions": float(np.mean(out_c))},
            "ratios": {"batched_vs_per_candidate": rate / ref_rate, "collisions_vs_none": ratio},
            "bars": {f"{problems} IK problems < {bar_s:.0f} s": [dt, bar_s, bool(dt < bar_s)],
                     "collision-aware search <= 2x the time without": [ratio, 2.0, bool(ratio <= 2.0)]},
            "notes": ["demo_s6, 20 work points (fixed tool-down orientation), 8 seeds per target",
                      "with collisions: the demo arm's shapes vs the floor, four boxes and its own links, "
                      "10 mm clearance; a point whose first solution collides re-runs every seed"]}


#: the obstacles of the collision-aware bench (invented): a low table under the work points, a rack
#: and a cabinet beside the base region, a pillar behind it
BENCH_CELL = """[cell]
name = "bench cell"
[[point]]
name = "unused"
xyz = [0.8, 0.0, 0.5]
[[box]]
name = "table"
center = [0.85, 0.0, 0.05]
size = [0.6, 1.2, 0.1]
[[box]]
name = "rack"
center = [0.0, 0.95, 0.6]
size = [0.8, 0.3, 1.2]
[[box]]
name = "cabinet"
center = [0.0, -0.95, 0.9]
size = [0.6, 0.3, 1.8]
[[box]]
name = "pillar"
center = [-0.8, 0.8, 1.0]
size = [0.2, 0.2, 2.0]
"""


def demo_work_points(count: int = 20) -> tuple:
    """``count`` invented work points (tool pointing down) spread over a table in front of a base
    at the origin; used by the bench."""
    from ..arm.transforms import make_transform

    rng = np.random.default_rng(7)
    xy = np.column_stack([rng.uniform(0.6, 1.1, count), rng.uniform(-0.5, 0.5, count)])
    z = rng.uniform(0.2, 0.7, count)
    return tuple(WorkPoint(f"p{i + 1}", make_transform([xy[i, 0], xy[i, 1], z[i]], [np.pi, 0, 0]), "fixed",
                           1e-3, 0.5 * _DEG) for i in range(count))
