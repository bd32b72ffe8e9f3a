"""Batched inverse kinematics: damped least squares over many targets, several seeds each.

Method: damped least squares (Wampler 1986) with damping adapted per step in the manner of
Levenberg-Marquardt (Marquardt 1963), plus an optional singularity-robust term of Nakamura &
Hanafusa 1986 (off by default); see :mod:`workbench.kinematics.ik_kernels` for the iteration and
its safeguards (step cap, joint-limit active set, wrapping of full-turn joints). The kernel is
compiled with numba and runs in parallel over targets.

Targets are tool (TCP) poses ``T_goal`` (..., 4, 4) **in the arm's base frame**. For targets given
in the world (cell) frame, apply the inverse mount first: ``arm.world_to_base() @ T_world``.

Seeds per target, tried in this order: the user seeds ``q_seed`` (if any); then up to ``NEAR`` (7)
poses picked from a pool of ``POOL`` random in-limit poses (fixed generator ``rng``) as the ones
whose TCP pose is nearest the target, spread out in joint space; then the arm's home pose; then
random in-limit poses from the same generator until ``seeds`` generated seeds are used. Results are
reproducible. Seeds of a target stop at the first converged one unless ``all_solutions=True``.

Orientation rules
-----------------
``"fixed"``  full pose: position and tool orientation (6-D error: position, rotation vector).
``"axis"``   position and the tool z axis along the target's z axis; spin about it is free
             (5-D error: position and the two tilt components in the tool frame).
``"free"``   position only (3-D error).

Status codes (per target, int8)
-------------------------------
"""
from __future__ import annotations

import hashlib
import time
from dataclasses import dataclass

import numpy as np

from ..errors import WorkbenchError
from . import ik_kernels as _k

__all__ = ["solve_ik", "IKResult", "IKError", "distinct_solutions", "count_solutions", "bench_ik",
           "target_seeds", "seed_pool", "make_seeds", "warm_up",
           "CONVERGED", "OUT_OF_REACH", "LIMITS", "NOT_CONVERGED", "STATUS_NAMES", "ORIENTATIONS"]

#: reached the target within ``pos_tol`` and ``rot_tol``
CONVERGED = _k.CONVERGED
#: out of reach: the target lies beyond the arm's reach bound (distance from the first joint axis
#: point larger than the sum of link offsets, tool length and prismatic travel; with a fixed
#: orientation also the same bound, without the tool, on the last joint frame), or every seed
#: settled on a non-zero error with no joint held at a limit (a least-squares minimum away from
#: the target: the pose is outside the workspace as far as the seeds can tell)
OUT_OF_REACH = _k.OUT_OF_REACH
#: blocked by joint limits: the best seed settled on a non-zero error while pushing against limits
LIMITS = _k.LIMITS
#: did not converge: a seed was still improving when ``max_iter`` ran out
NOT_CONVERGED = _k.NOT_CONVERGED
STATUS_NAMES = {CONVERGED: "converged", OUT_OF_REACH: "out of reach", LIMITS: "blocked by joint limits",
                NOT_CONVERGED: "did not converge"}
ORIENTATIONS = {"fixed": _k.MODE_FIXED, "axis": _k.MODE_AXIS, "free": _k.MODE_FREE}

__doc__ += "".join(f"``{code}`` {name}\n" for code, name in STATUS_NAMES.items())

# damping and step settings (dimensionless: translational rows are divided by the arm's length)
W0 = 1e-3        # manipulability threshold of the Nakamura & Hanafusa damping term
LAMBDA0 = 0.0    # its largest damping (0: off; the adaptive Marquardt term does the work)
MAX_STEP = 0.5   # largest joint step per iteration, rad (prismatic: times the arm length)
POOL = 65536     # random in-limit poses from which the seeds nearest each target are picked
NEAR = 7         # how many of the generated seeds are picked from the pool (the rest: home, random)
GRID_CELLS_PER_LENGTH = 24  # pool bucketing: cell size = arm length / this
NEAR_CANDIDATES = 64  # pool poses nearest a target among which the spread-out near seeds are picked
NEAR_SPREAD = 1.0     # rad: picked near seeds differ by at least this in some joint (when possible)


class IKError(WorkbenchError):
    """Bad IK input (target shapes, orientation rule, tolerances, seeds)."""


@dataclass(frozen=True)
class IKResult:
    """Result of :func:`solve_ik`.

    Attributes
    ----------
    q : ndarray, (..., n) or (..., K, n) with ``all_solutions``
        Joint values (rad / m): the converged solution, or the seed end point with the smallest
        error when none converged. With ``all_solutions`` one row per seed (K seeds).
    status : ndarray of int8, (...) or (..., K)
        Status codes (module constants CONVERGED, OUT_OF_REACH, LIMITS, NOT_CONVERGED).
    pos_err : ndarray, (...) or (..., K)
        Distance from the TCP to the target position (m).
    rot_err : ndarray, (...) or (..., K)
        Orientation error (rad): rotation angle ("fixed"), angle between z axes ("axis"), 0 ("free").
    iterations : ndarray of int32, (...) or (..., K)
        Iterations spent (over all seeds tried, or per seed with ``all_solutions``).
    """

    q: np.ndarray
    status: np.ndarray
    pos_err: np.ndarray
    rot_err: np.ndarray
    iterations: np.ndarray

    @property
    def converged(self) -> np.ndarray:
        """Boolean mask of converged targets (or seeds)."""
        return self.status == CONVERGED


def _arm_arrays(arm):
    m = arm.model
    lower = np.ascontiguousarray(m.lower, dtype=float)
    upper = np.ascontiguousarray(m.upper, dtype=float)
    L = float(arm.nominal_reach())
    cap = np.where(m.kinds == 1, L, 1.0).astype(float)
    # reach bounds: |origin of the last joint frame - origin of joint 1| <= sum of the later fixed
    # offsets + prismatic travel; |p_tcp - origin of joint 1| <= that + the tool offset
    last = float(np.linalg.norm(m.origins[1:, :3, 3], axis=-1).sum()) if m.n > 1 else 0.0
    for j in range(m.n):
        if m.kinds[j] == 1:
            last += max(abs(m.upper[j]), abs(m.lower[j]))
    tcp = last + float(np.linalg.norm(m.tcp_offset[:3, 3]))
    reach = np.array([tcp, last]) * (1 + 1e-9) + 1e-12
    center = np.ascontiguousarray(m.origins[0, :3, 3], dtype=float)
    # revolute joints whose range spans a full turn move across a limit by wrapping
    wrap = ((m.kinds == 0) & (upper - lower >= 2 * np.pi)).astype(np.int8)
    return lower, upper, L, cap, reach, center, wrap


def make_seeds(arm, seeds=8, rng=0) -> np.ndarray:
    """The generated seeds (seeds, n): the home pose, then ``seeds - 1`` random in-limit poses."""
    seeds = int(seeds)
    if seeds < 0:
        raise IKError(f"seeds: expected a count >= 0, got {seeds}")
    out = np.empty((seeds, arm.model.n))
    if seeds:
        out[0] = arm.model.home_q
        if seeds > 1:
            out[1:] = arm.random_q(seeds - 1, rng=rng)
    return out


_POOLS: dict = {}  # (kinematic fingerprint, seed, size) -> pool; a few arms at most
_POOLS_MAX = 8


def _fingerprint(model) -> str:
    """Digest of everything the pool depends on, so copies of one arm (unpickled in worker
    processes) share a pool."""
    h = hashlib.sha1()
    for a in (model.origins, model.axes, model.kinds, model.lower, model.upper, model.tcp_offset):
        h.update(np.ascontiguousarray(a).tobytes())
    return h.hexdigest()


def _EMPTY_POOL(n):
    return (np.zeros((0, n)), np.zeros((0, 4, 4)), np.zeros(3), 1.0, np.ones(3, dtype=np.int64),
            np.zeros(2, dtype=np.int64))


def seed_pool(arm, rng=0):
    """The pool of random in-limit poses from which near seeds are picked, bucketed by TCP position.

    Returns (pool_q (P, n), pool_T (P, 4, 4) base-frame TCP poses sorted by grid cell, grid_lo (3,) m,
    cell size h (m), grid dims (3,), cell starts (cells + 1,)). Cached per arm geometry and generator
    seed (``rng`` given as an int; a Generator draws a fresh pool).
    """
    key = int(rng) if isinstance(rng, (int, np.integer)) else None
    ckey = (_fingerprint(arm.model), key, POOL, GRID_CELLS_PER_LENGTH)
    if key is not None and ckey in _POOLS:
        return _POOLS[ckey]
    gen = np.random.default_rng([7, key]) if key is not None else np.random.default_rng(rng)
    q = arm.random_q(POOL, rng=gen)
    T = arm.fk(q)
    L = float(arm.nominal_reach())
    h = L / GRID_CELLS_PER_LENGTH
    p = T[:, :3, 3]
    lo = p.min(axis=0) - 1e-9
    dims = np.maximum(np.ceil((p.max(axis=0) + 1e-9 - lo) / h).astype(np.int64), 1)
    idx = np.clip(np.floor((p - lo) / h).astype(np.int64), 0, dims - 1)
    cell = (idx[:, 0] * dims[1] + idx[:, 1]) * dims[2] + idx[:, 2]
    order = np.argsort(cell, kind="stable")
    starts = np.searchsorted(cell[order], np.arange(int(np.prod(dims)) + 1)).astype(np.int64)
    out = (np.ascontiguousarray(q[order]), np.ascontiguousarray(T[order]), lo, float(h), dims, starts)
    if key is not None:
        if len(_POOLS) >= _POOLS_MAX:
            _POOLS.pop(next(iter(_POOLS)))
        _POOLS[ckey] = out
    return out


def solve_ik(arm, T_goal, seeds=8, orientation="fixed", q_seed=None, pos_tol=1e-6, rot_tol=1e-6,
             max_iter=100, rng=0, all_solutions=False) -> IKResult:
    """Inverse kinematics of the TCP for many target poses at once.

    Parameters
    ----------
    arm : workbench.kinematics.Arm
    T_goal : array_like, (..., 4, 4)
        Target TCP poses in the arm's base frame (m). For world-frame targets pass
        ``arm.world_to_base() @ T_world``.
    seeds : int
        Generated seeds per target (<= 8 is enough on FK-of-random targets, see ``bench_ik``): up to
        ``NEAR`` pool poses nearest the target, the home pose, then random in-limit poses, all
        drawn from ``rng`` (see module docstring). Default 8.
    orientation : {"fixed", "axis", "free"}
        Orientation rule (see module docstring).
    q_seed : array_like, optional
        User seeds tried first: (n,) or (K, n) for all targets, or (..., n) / (..., K, n) matching
        the leading shape of ``T_goal`` (an (N, n) array for N targets is one seed per target).
    pos_tol : float
        Position tolerance (m). Default 1e-6.
    rot_tol : float
        Orientation tolerance (rad). Default 1e-6.
    max_iter : int
        Iterations per seed. Default 100.
    rng : int or numpy.random.Generator
        Source of the random seeds. Default 0 (reproducible).
    all_solutions : bool
        Run every seed and return one row per seed (see :class:`IKResult`); use
        :func:`distinct_solutions` to find the different solutions among them.

    Returns
    -------
    IKResult
    """
    mode = ORIENTATIONS.get(orientation)
    if mode is None:
        raise IKError(f"orientation: expected one of {', '.join(ORIENTATIONS)}, got {orientation!r}")
    G = np.asarray(T_goal, dtype=float)
    if G.ndim < 2 or G.shape[-2:] != (4, 4):
        raise IKError(f"T_goal: expected target poses shaped (..., 4, 4), got shape {G.shape}")
    if not np.all(np.isfinite(G)):
        raise IKError("T_goal: target poses contain NaN or infinite values")
    _check_rigid(G)
    for name, v in (("pos_tol", pos_tol), ("rot_tol", rot_tol)):
        if not (np.isfinite(v) and v > 0):
            raise IKError(f"{name}: expected a positive tolerance, got {v!r}")
    if int(max_iter) < 1:
        raise IKError(f"max_iter: expected at least 1 iteration, got {max_iter!r}")
    if isinstance(rng, (int, np.integer)) and not isinstance(rng, bool) and rng < 0:
        raise IKError(f"rng: expected a seed >= 0 or a numpy Generator, got {rng!r}")
    n = arm.model.n
    lead = G.shape[:-2]
    goals = np.ascontiguousarray(G.reshape(-1, 4, 4))
    N = goals.shape[0]
    common = make_seeds(arm, seeds, rng)
    if q_seed is None:
        user = np.zeros((N, 0, n))
    else:
        qs = np.asarray(q_seed, dtype=float)
        if qs.ndim == 0 or qs.shape[-1] != n:
            raise IKError(f"q_seed: expected seeds shaped (n,), (K, n), (..., n) or (..., K, n) with n = {n}, "
                          f"got shape {qs.shape}")
        if qs.shape[:-1] == lead and len(lead) > 0:
            user = qs.reshape(N, 1, n)
        elif qs.shape[:-2] == lead and qs.ndim >= 2 and len(lead) > 0:
            user = qs.reshape(N, qs.shape[-2], n)
        elif qs.ndim <= 2:
            user = np.broadcast_to(qs.reshape(1, -1, n), (N, qs.reshape(-1, n).shape[0], n))
        else:
            raise IKError(f"q_seed: shape {qs.shape} does not match the targets' leading shape {lead}")
        if not np.all(np.isfinite(user)):
            raise IKError("q_seed: seeds contain NaN or infinite values")
        user = np.ascontiguousarray(user)
    n_near = 0
    pool = _EMPTY_POOL(n)
    if common.shape[0] > 1 and NEAR > 0 and POOL > 0:
        n_near = min(NEAR, common.shape[0] - 1)
        pool = seed_pool(arm, rng)
        common = np.concatenate([common[:1], common[1 + n_near:]])  # home, then the remaining random seeds
    K = user.shape[1] + n_near + common.shape[0]
    if K == 0:
        raise IKError("seeds: no seeds to start from (seeds=0 and no q_seed)")
    lower, upper, L, cap, reach, center, wrap = _arm_arrays(arm)
    slots = K if all_solutions else 1
    out_q = np.empty((N, slots, n))
    out_status = np.empty((N, slots), dtype=np.int8)
    out_pos = np.empty((N, slots))
    out_rot = np.empty((N, slots))
    out_iter = np.empty((N, slots), dtype=np.int32)
    m = arm.model
    if N:
        from .kernels import announce_compile

        announce_compile("ik")
        _k.ik_batch(goals, np.ascontiguousarray(common), user, *pool, n_near, NEAR_CANDIDATES, NEAR_SPREAD, m.origins, m.axes, m.kinds,
                    np.ascontiguousarray(m.tcp_offset), lower, upper, mode, 1.0 / L, cap, center, reach,
                    float(pos_tol), float(rot_tol), int(max_iter), W0, LAMBDA0, MAX_STEP, wrap, bool(all_solutions),
                    out_q, out_status, out_pos, out_rot, out_iter)
    if all_solutions:
        shape = lead + (K,)
        return IKResult(out_q.reshape(shape + (n,)), out_status.reshape(shape), out_pos.reshape(shape),
                        out_rot.reshape(shape), out_iter.reshape(shape))
    return IKResult(out_q.reshape(lead + (n,)), out_status.reshape(lead), out_pos.reshape(lead),
                    out_rot.reshape(lead), out_iter.reshape(lead))


def _check_rigid(G: np.ndarray, tol: float = 1e-6) -> None:
    """Refuse target "poses" that are not rigid transforms: the last row must be [0, 0, 0, 1] and
    the rotation part orthonormal with determinant +1 (to within ``tol``), else the solver would
    chase a target no pose can meet and report a meaningless status."""
    flat = G.reshape(-1, 4, 4)
    if not flat.shape[0]:
        return
    R = flat[:, :3, :3]
    err_rot = np.abs(np.einsum("kji,kjl->kil", R, R) - np.eye(3)).max(axis=(1, 2))
    err_row = np.abs(flat[:, 3, :] - np.array([0.0, 0.0, 0.0, 1.0])).max(axis=1)
    bad = (err_rot > tol) | (err_row > tol) | (np.linalg.det(R) < 0)
    if bad.any():
        k = int(np.flatnonzero(bad)[0])
        where = f" (target {tuple(int(i) for i in np.unravel_index(k, G.shape[:-2]))})" if G.ndim > 2 else ""
        raise IKError(f"T_goal: expected rigid poses (orthonormal rotation with determinant +1, last row "
                      f"[0, 0, 0, 1]){where}; got rotation error {err_rot[k]:.3g}, last row "
                      f"{flat[k, 3].tolist()}")


def target_seeds(arm, T_goal, seeds=8, orientation="fixed", rng=0) -> np.ndarray:
    """The generated seeds :func:`solve_ik` tries for each target, in order: (..., K, n).

    (User seeds, when given to :func:`solve_ik`, come before these.)
    """
    mode = ORIENTATIONS.get(orientation)
    if mode is None:
        raise IKError(f"orientation: expected one of {', '.join(ORIENTATIONS)}, got {orientation!r}")
    G = np.asarray(T_goal, dtype=float)
    lead = G.shape[:-2]
    goals = np.ascontiguousarray(G.reshape(-1, 4, 4))
    common = make_seeds(arm, seeds, rng)
    if not (common.shape[0] > 1 and NEAR > 0 and POOL > 0):
        return np.broadcast_to(common, lead + common.shape).copy()
    n_near = min(NEAR, common.shape[0] - 1)
    pool = seed_pool(arm, rng)
    idx = np.empty((goals.shape[0], n_near), dtype=np.int64)
    from .kernels import announce_compile

    announce_compile("ik")
    _k.near_seeds_batch(goals, *pool[:6], n_near, NEAR_CANDIDATES, NEAR_SPREAD, arm.model.kinds, mode, 1.0 / float(arm.nominal_reach()), idx)
    rest = np.concatenate([common[:1], common[1 + n_near:]])
    out = np.concatenate([pool[0][idx], np.broadcast_to(rest, (goals.shape[0],) + rest.shape)], axis=1)
    return out.reshape(lead + out.shape[1:])


def warm_up() -> None:
    """Compile (or load from the on-disk cache) the IK kernels on a tiny two-joint arm; a GUI may
    call this in the background like :func:`workbench.kinematics.kernels.warm_up`."""
    from ..arm.files import parse_arm_dict
    from .arm import Arm

    arm = Arm(parse_arm_dict({"arm": {"name": "warm-up 2R", "geometry": "origins"},
                              "joint": [{"name": "a", "axis": [0, 0, 1]},
                                        {"name": "b", "xyz": [0.5, 0, 0], "axis": [0, 0, 1]}],
                              "tool": {"xyz": [0.3, 0, 0]}}, source_name="<warm-up>"))
    goal = arm.fk(np.array([0.3, 0.6]))
    solve_ik(arm, goal, orientation="free")
    target_seeds(arm, goal, orientation="free")


def _joint_distance(arm, a, b):
    """Largest per-joint distance between joint vectors a and b (broadcast), revolute joints wrapped."""
    d = a - b
    rev = arm.model.kinds == 0
    d = np.where(rev, (d + np.pi) % (2 * np.pi) - np.pi, d)
    return np.max(np.abs(d), axis=-1)


#: two converged solutions up to this far apart (rad or m, largest joint) are the same solution when
#: the joint-space midpoint between them still reaches their pose (see :func:`distinct_solutions`)
SAME_SPAN = 0.25
#: ... to within this position (m) and orientation (rad)
SAME_POS_TOL = 1e-5
SAME_ROT_TOL = 1e-5


def distinct_solutions(arm, q, status, tol=1e-3, span=SAME_SPAN) -> np.ndarray:
    """Mask of distinct converged solutions among the seeds of each target.

    Parameters
    ----------
    arm : Arm
    q : array_like, (..., K, n)
        Per-seed solutions from ``solve_ik(..., all_solutions=True)``.
    status : array_like, (..., K)
        Their status codes.
    tol : float
        Two solutions are the same when every joint differs by at most ``tol`` (rad or m);
        revolute differences are wrapped to [-pi, pi), so q and q + 2 pi count as one.
    span : float
        Near a singularity the solver stops anywhere in a small set of poses that all reach the
        target (at a smallest singular value of 4e-5 a position tolerance of 1e-6 m leaves 0.03 rad
        of play): two solutions up to ``span`` apart are also the same when the midpoint between
        them reaches the same position (within :data:`SAME_POS_TOL`) and, where both have the same
        orientation, the same orientation (:data:`SAME_ROT_TOL`). Distinct branches (elbow up and
        down, shoulder turned by half a turn) fail that test: the midpoint is off the target.

    Returns
    -------
    ndarray of bool, (..., K)
        True for the first seed of every distinct converged solution.
    """
    q = np.asarray(q, dtype=float)
    status = np.asarray(status)
    ok = status == CONVERGED
    K = q.shape[-2]
    keep = np.zeros(ok.shape, dtype=bool)
    rev = arm.model.kinds == 0
    T = None
    for a in range(K):
        new = ok[..., a].copy()
        for b in range(a):
            dist = _joint_distance(arm, q[..., a, :], q[..., b, :])
            same = dist <= tol
            near = new & keep[..., b] & ~same & (dist <= span)
            if np.any(near):
                if T is None:
                    T = np.asarray(arm.fk(np.where(ok[..., None], q, 0.0)), dtype=float)  # (..., K, 4, 4)
                idx = np.nonzero(near)
                qa, qb = q[..., a, :][idx], q[..., b, :][idx]
                d = qa - qb
                d = np.where(rev, (d + np.pi) % (2 * np.pi) - np.pi, d)
                Tm = np.asarray(arm.fk(qb + 0.5 * d), dtype=float)
                Ta, Tb = T[..., a, :, :][idx], T[..., b, :, :][idx]
                pos = np.maximum(np.linalg.norm(Tm[:, :3, 3] - Ta[:, :3, 3], axis=-1),
                                 np.linalg.norm(Tm[:, :3, 3] - Tb[:, :3, 3], axis=-1)) <= SAME_POS_TOL
                same_rot = _rot_angle(Ta[:, :3, :3], Tb[:, :3, :3]) <= SAME_ROT_TOL
                rot = ~same_rot | (_rot_angle(Tm[:, :3, :3], Ta[:, :3, :3]) <= SAME_ROT_TOL)
                merged = np.zeros(near.shape, dtype=bool)
                merged[idx] = pos & rot
                same = same | merged
            new &= ~(keep[..., b] & same)
        keep[..., a] = new
    return keep


def _rot_angle(Ra, Rb):
    """Angle (rad) of the rotation between (..., 3, 3) rotations (robust near 0)."""
    D = np.swapaxes(Ra, -1, -2) @ Rb
    skew = np.stack([D[..., 2, 1] - D[..., 1, 2], D[..., 0, 2] - D[..., 2, 0], D[..., 1, 0] - D[..., 0, 1]], -1)
    tr = D[..., 0, 0] + D[..., 1, 1] + D[..., 2, 2]
    return np.arctan2(0.5 * np.linalg.norm(skew, axis=-1), 0.5 * (tr - 1.0))


def count_solutions(arm, q, status, tol=1e-3, span=SAME_SPAN) -> np.ndarray:
    """Number of distinct converged solutions per target, (...) int; see :func:`distinct_solutions`."""
    return distinct_solutions(arm, q, status, tol, span).sum(axis=-1)


# ----------------------------------------------------------------------------------------------
# benchmark against a per-target scipy.optimize.least_squares loop


class _PlainChain:
    """Per-pose numpy FK and geometric Jacobian of the TCP (the plain reference for the bench)."""

    def __init__(self, arm):
        m = arm.model
        self.origins = [np.array(o) for o in m.origins]
        self.axes = [np.array(a) for a in m.axes]
        self.kinds = list(m.kinds)
        self.tcp = np.array(m.tcp_offset)
        self.n = m.n

    def _motion(self, j, qj):
        M = np.eye(4)
        a = self.axes[j]
        if self.kinds[j] == 1:
            M[:3, 3] = a * qj
            return M
        c, s = np.cos(qj), np.sin(qj)
        K = np.array([[0, -a[2], a[1]], [a[2], 0, -a[0]], [-a[1], a[0], 0]])
        M[:3, :3] = np.eye(3) + s * K + (1 - c) * (K @ K)
        return M

    def fk_jac(self, q, want_jac=True):
        T = np.eye(4)
        zs, os_ = [], []
        for j in range(self.n):
            T = T @ self.origins[j]
            zs.append(T[:3, :3] @ self.axes[j])
            os_.append(T[:3, 3].copy())
            T = T @ self._motion(j, q[j])
        T = T @ self.tcp
        if not want_jac:
            return T, None
        J = np.empty((6, self.n))
        p = T[:3, 3]
        for j in range(self.n):
            if self.kinds[j] == 0:
                J[:3, j] = np.cross(zs[j], p - os_[j])
                J[3:, j] = zs[j]
            else:
                J[:3, j] = zs[j]
                J[3:, j] = 0.0
        return T, J


def _residual_fn(chain, goal, mode, L):
    """Same task error as the kernel (translation / L, rotation vector or tilt, or none), with the
    matching task Jacobian; plain numpy per pose."""
    Rg = goal[:3, :3]
    pg = goal[:3, 3]

    def res(q):
        T, _ = chain.fk_jac(q, want_jac=False)
        e_p = (pg - T[:3, 3]) / L
        if mode == "free":
            return e_p
        R = T[:3, :3]
        if mode == "fixed":
            M = Rg @ R.T
            v = 0.5 * np.array([M[2, 1] - M[1, 2], M[0, 2] - M[2, 0], M[1, 0] - M[0, 1]])
            s = np.linalg.norm(v)
            c = 0.5 * (np.trace(M) - 1.0)
            th = np.arctan2(s, c)
            w = v * (th / s) if s > 1e-12 else v
            return np.concatenate([e_p, w])
        k = np.cross(R[:, 2], Rg[:, 2])
        s = np.linalg.norm(k)
        th = np.arctan2(s, R[:, 2] @ Rg[:, 2])
        w = k * (th / s) if s > 1e-12 else k
        return np.concatenate([e_p, R[:, :2].T @ w])

    def jac(q):
        # d(residual)/dq = -(task Jacobian), the Gauss-Newton model the kernel uses too
        T, J = chain.fk_jac(q)
        J[:3] /= L
        if mode == "free":
            return -J[:3]
        if mode == "fixed":
            return -J
        return -np.vstack([J[:3], T[:3, :2].T @ J[3:]])

    return res, jac


def _pose_errors(arm, q, goal):
    T = arm.fk(q)
    pos = np.linalg.norm(T[..., :3, 3] - goal[..., :3, 3], axis=-1)
    M = goal[..., :3, :3] @ np.swapaxes(T[..., :3, :3], -1, -2)
    c = np.clip((np.trace(M, axis1=-2, axis2=-1) - 1) / 2, -1, 1)
    return pos, np.arccos(c)


def bench_ik(quick: bool = False) -> dict:
    """IK throughput and success on demo_s6 vs a per-target scipy.optimize.least_squares loop.

    Targets: FK of random in-limit poses (fixed orientation). Both solvers use the same seeds
    (8 per target), the same residual and the same success test (FK within 1e-6 m and 1e-6 rad). scipy runs the 'trf' method with the
    joint limits as bounds and the analytic Jacobian on a subset of targets; its time per target is
    scaled to the full set.
    """
    from scipy.optimize import least_squares

    from ..benchutil import demo_arm_path
    from .arm import load_arm

    arm = load_arm(demo_arm_path("demo_s6.toml"))
    N = 2000 if quick else 20000
    N_ref = 40 if quick else 200
    S = 8
    rng = np.random.default_rng(12345)
    goals = arm.fk(arm.random_q(N, rng=rng))
    solve_ik(arm, goals[:4], seeds=S)  # compile / load from cache outside the timing
    best = np.inf
    res = None
    for _ in range(1 if quick else 3):
        t = time.perf_counter()
        res = solve_ik(arm, goals, seeds=S, orientation="fixed")
        best = min(best, time.perf_counter() - t)
    pos, rot = _pose_errors(arm, res.q, goals)
    ok = (res.status == CONVERGED) & (pos <= 1e-6) & (rot <= 1e-6) & arm.in_limits(res.q)
    ours_rate = N / best
    ours_success = float(ok.mean())

    L = arm.nominal_reach()
    lo, hi = arm.model.lower, arm.model.upper
    sub = goals[:N_ref]
    sub_seeds = target_seeds(arm, sub, S, "fixed", 0)  # exactly the seeds the kernel tries, in order

    chain = _PlainChain(arm)
    t = time.perf_counter()
    ref_ok = 0
    for g, seeds in zip(sub, sub_seeds):
        f, jac = _residual_fn(chain, g, "fixed", L)
        for s0 in seeds:
            x0 = np.clip(s0, lo, hi)
            r = least_squares(f, x0, jac=jac, bounds=(lo, hi), method="trf", xtol=1e-10, ftol=1e-10,
                              gtol=1e-10, max_nfev=100)
            p_, r_ = _pose_errors(arm, r.x, g)
            if p_ <= 1e-6 and r_ <= 1e-6:
                ref_ok += 1
                break
    t_ref = time.perf_counter() - t
    ref_rate = N_ref / t_ref
    ref_success = ref_ok / N_ref
    ours_sub = float(ok[:N_ref].mean())
    ratio = ours_rate / ref_rate
    far = np.tile(np.eye(4), (200, 1, 1))
    far[:, :3, 3] = rng.normal(size=(200, 3))
    far[:, :3, 3] *= (3.0 * L / np.linalg.norm(far[:, :3, 3], axis=-1))[:, None]
    far_res = solve_ik(arm, far, seeds=S)
    status_counts = {STATUS_NAMES[c]: int((res.status == c).sum()) for c in STATUS_NAMES}
    return {
        "name": "ik",
        "metrics": {
            "targets": N,
            "seeds_per_target": S,
            "ik_targets_per_s": ours_rate,
            "scipy_loop_targets_per_s": ref_rate,
            "ik_success_rate": ours_success,
            "ik_success_rate_on_scipy_subset": ours_sub,
            "scipy_success_rate": ref_success,
            "scipy_subset_targets": N_ref,
            "mean_iterations_per_target": float(res.iterations.mean()),
            "far_targets_reported_out_of_reach": float((far_res.status == OUT_OF_REACH).mean()),
            **{f"status_{k.replace(' ', '_')}": v for k, v in status_counts.items()},
        },
        "ratios": {"ik_vs_scipy": ratio},
        "bars": {
            "ik_speed_ratio>=100": [ratio, 100, bool(ratio >= 100)],
            "ik_success>=0.995": [ours_success, 0.995, bool(ours_success >= 0.995)],
            "ik_success_vs_scipy": [ours_sub - ref_success, 0, bool(ours_sub - ref_success >= 0)],
        },
        "notes": ["targets: FK of random in-limit poses of demo_s6, fixed orientation, tolerance 1e-6 m / 1e-6 rad",
                  f"scipy least_squares (trf, bounds = joint limits, analytic Jacobian, plain numpy FK) on the "
                  f"first {N_ref} targets, the kernel's own seeds per target, stop at the first success; rate per target"],
    }
