"""Compiled inverse-kinematics kernel (numba): damped least squares over many targets and seeds.

Method
------
Damped least squares (Wampler, "Manipulator inverse kinematic solutions based on vector
formulations and damped least-squares methods", IEEE Trans. SMC 16(1), 1986; Nakamura & Hanafusa,
"Inverse kinematic solutions with singularity robustness for robot manipulator control", ASME J.
Dyn. Syst. Meas. Control 108, 1986). Each iteration solves

    dq = Jt^T (Jt Jt^T + lambda^2 I)^-1 e          (m <= n; else (Jt^T Jt + lambda^2 I)^-1 Jt^T e)

for the task error ``e`` (m rows) and task Jacobian ``Jt``, with translational rows divided by a
characteristic length so metres and radians mix evenly.

Damping rule: lambda^2 = mu + lambda0^2 (1 - w / w0)^2 [w < w0]. ``mu`` is adapted per step in the
manner of Levenberg-Marquardt (Marquardt, "An algorithm for least-squares estimation of nonlinear
parameters", SIAM J. Appl. Math. 11, 1963): divided by 10 (down to 1e-12) after a step that lowers
the error, multiplied by 10 and the step re-solved when it does not; it therefore grows by itself
near singular poses where the undamped step overshoots, and vanishes near a regular solution so the
last iterations converge quadratically. The second term is Nakamura & Hanafusa's singularity-robust
rule on the manipulability w = sqrt(det Gram) of the task Jacobian; it is kept as an option
(``lam0``) but off by default because on random targets of the demo arm the adaptive term alone
converged more often.

Safeguards (ours): the step is scaled down to at most ``max_step`` rad (or max_step * length for
prismatic joints); joint limits are kept by an active set (a joint sitting on a limit whose step
points outward is frozen and the step re-solved without its column), then clipping; revolute joints
whose range spans a full turn wrap across a limit instead; a seed that stops lowering its error
(no step accepted up to mu = 1e4, or SLOW_STEPS steps in a row each lowering the squared error by
less than 1 - SLOW_RATIO)
is ended.

Seeds: besides shared seeds, each target gets the poses of a large pool of random in-limit poses
whose TCP poses are nearest the target (searched in a grid of TCP positions; see ``ik.seed_pool``),
spread out in joint space.

Per-seed outcome codes are the public status codes of :mod:`workbench.kinematics.ik`.
"""
from __future__ import annotations

import numpy as np
from numba import njit, prange

from .kernels import _chain, _fill_jacobian

MODE_FIXED, MODE_AXIS, MODE_FREE = 0, 1, 2
CONVERGED, OUT_OF_REACH, LIMITS, NOT_CONVERGED = 0, 1, 2, 3
TBLOCK = 16  # targets per parallel work item
# adaptive damping (Levenberg-Marquardt style): divided after a step that lowers the error,
# multiplied after one that does not
MU_START, MU_MIN, MU_MAX, MU_DOWN, MU_UP, MU_RETRY = 1e-3, 1e-12, 1e4, 0.1, 10.0, 1e-4
# a seed has settled on a non-zero error after SLOW_STEPS accepted steps in a row that each keep
# more than SLOW_RATIO of the squared error
SLOW_RATIO, SLOW_STEPS = 0.99, 4


@njit(cache=True, inline="always")
def _tcp(q, origins, axes, kinds, off, T, Z, O, W, p, R):
    """TCP position p (3,) and rotation R (3x3) in the base frame; fills Z, O for the Jacobian."""
    n = q.shape[0]
    _chain(q, origins, axes, kinds, n - 1, T, Z, O, W)
    for r in range(3):
        for c in range(3):
            R[r, c] = T[r, 0] * off[0, c] + T[r, 1] * off[1, c] + T[r, 2] * off[2, c]
        p[r] = T[r, 0] * off[0, 3] + T[r, 1] * off[1, 3] + T[r, 2] * off[2, 3] + T[r, 3]


@njit(cache=True, inline="always")
def _error(mode, goal, p, R, inv_len, e, errs):
    """Task error e (m,) (translation scaled by inv_len); errs[0] = |dp| m, errs[1] = angle rad.

    Returns the squared norm of the scaled error."""
    dx = goal[0, 3] - p[0]
    dy = goal[1, 3] - p[1]
    dz = goal[2, 3] - p[2]
    e[0] = dx * inv_len
    e[1] = dy * inv_len
    e[2] = dz * inv_len
    errs[0] = np.sqrt(dx * dx + dy * dy + dz * dz)
    sq = e[0] * e[0] + e[1] * e[1] + e[2] * e[2]
    if mode == MODE_FIXED:
        # M = Rg R^T; its rotation vector is the error (base frame)
        m00 = goal[0, 0] * R[0, 0] + goal[0, 1] * R[0, 1] + goal[0, 2] * R[0, 2]
        m11 = goal[1, 0] * R[1, 0] + goal[1, 1] * R[1, 1] + goal[1, 2] * R[1, 2]
        m22 = goal[2, 0] * R[2, 0] + goal[2, 1] * R[2, 1] + goal[2, 2] * R[2, 2]
        m01 = goal[0, 0] * R[1, 0] + goal[0, 1] * R[1, 1] + goal[0, 2] * R[1, 2]
        m10 = goal[1, 0] * R[0, 0] + goal[1, 1] * R[0, 1] + goal[1, 2] * R[0, 2]
        m02 = goal[0, 0] * R[2, 0] + goal[0, 1] * R[2, 1] + goal[0, 2] * R[2, 2]
        m20 = goal[2, 0] * R[0, 0] + goal[2, 1] * R[0, 1] + goal[2, 2] * R[0, 2]
        m12 = goal[1, 0] * R[2, 0] + goal[1, 1] * R[2, 1] + goal[1, 2] * R[2, 2]
        m21 = goal[2, 0] * R[1, 0] + goal[2, 1] * R[1, 1] + goal[2, 2] * R[1, 2]
        vx = 0.5 * (m21 - m12)
        vy = 0.5 * (m02 - m20)
        vz = 0.5 * (m10 - m01)
        c = 0.5 * (m00 + m11 + m22 - 1.0)
        s = np.sqrt(vx * vx + vy * vy + vz * vz)
        th = np.arctan2(s, c)
        if s > 1e-7 or c > 0.0:
            f = th / s if s > 1e-300 else 1.0
            e[3] = vx * f
            e[4] = vy * f
            e[5] = vz * f
        else:  # angle near pi: axis from the symmetric part (M + I) / 2 = k k^T
            d0 = 0.5 * (m00 + 1.0)
            d1 = 0.5 * (m11 + 1.0)
            d2 = 0.5 * (m22 + 1.0)
            if d0 >= d1 and d0 >= d2:
                k0 = np.sqrt(max(d0, 1e-300))
                k1 = 0.25 * (m01 + m10) / k0
                k2 = 0.25 * (m02 + m20) / k0
            elif d1 >= d2:
                k1 = np.sqrt(max(d1, 1e-300))
                k0 = 0.25 * (m01 + m10) / k1
                k2 = 0.25 * (m12 + m21) / k1
            else:
                k2 = np.sqrt(max(d2, 1e-300))
                k0 = 0.25 * (m02 + m20) / k2
                k1 = 0.25 * (m12 + m21) / k2
            e[3] = k0 * th
            e[4] = k1 * th
            e[5] = k2 * th
        errs[1] = th
        sq += e[3] * e[3] + e[4] * e[4] + e[5] * e[5]
    elif mode == MODE_AXIS:
        # rotation taking the tool z axis onto the goal z axis, in tool x / y components
        zx, zy, zz = R[0, 2], R[1, 2], R[2, 2]
        gx, gy, gz = goal[0, 2], goal[1, 2], goal[2, 2]
        kx = zy * gz - zz * gy
        ky = zz * gx - zx * gz
        kz = zx * gy - zy * gx
        s = np.sqrt(kx * kx + ky * ky + kz * kz)
        c = zx * gx + zy * gy + zz * gz
        th = np.arctan2(s, c)
        if s > 1e-7 or c > 0.0:
            f = th / s if s > 1e-300 else 1.0
            wx, wy, wz = kx * f, ky * f, kz * f
        else:  # opposite axes: tilt about the tool x axis
            wx, wy, wz = R[0, 0] * th, R[1, 0] * th, R[2, 0] * th
        e[3] = R[0, 0] * wx + R[1, 0] * wy + R[2, 0] * wz
        e[4] = R[0, 1] * wx + R[1, 1] * wy + R[2, 1] * wz
        errs[1] = th
        sq += e[3] * e[3] + e[4] * e[4]
    else:
        errs[1] = 0.0
    return sq


@njit(cache=True, inline="always")
def _task_jacobian(mode, J, R, inv_len, Jt):
    n = J.shape[1]
    for j in range(n):
        Jt[0, j] = J[0, j] * inv_len
        Jt[1, j] = J[1, j] * inv_len
        Jt[2, j] = J[2, j] * inv_len
        if mode == MODE_FIXED:
            Jt[3, j] = J[3, j]
            Jt[4, j] = J[4, j]
            Jt[5, j] = J[5, j]
        elif mode == MODE_AXIS:
            Jt[3, j] = R[0, 0] * J[3, j] + R[1, 0] * J[4, j] + R[2, 0] * J[5, j]
            Jt[4, j] = R[0, 1] * J[3, j] + R[1, 1] * J[4, j] + R[2, 1] * J[5, j]


@njit(cache=True, inline="always")
def _copy_down(G, k):
    """Copy the top k x k block of G (2k rows) into its bottom half, to be factorised in place."""
    for a in range(k):
        for b in range(k):
            G[k + a, b] = G[a, b]


@njit(cache=True, inline="always")
def _cholesky(A, k):
    """In-place lower Cholesky of A[:k, :k]; returns log det (or -inf if not positive definite)."""
    logdet = 0.0
    for j in range(k):
        s = A[j, j]
        for t in range(j):
            s -= A[j, t] * A[j, t]
        if s <= 0.0:
            return -np.inf
        d = np.sqrt(s)
        A[j, j] = d
        logdet += 2.0 * np.log(d)
        for i in range(j + 1, k):
            s2 = A[i, j]
            for t in range(j):
                s2 -= A[i, t] * A[j, t]
            A[i, j] = s2 / d
    return logdet


@njit(cache=True, inline="always")
def _chol_solve(A, k, b, x):
    for i in range(k):
        s = b[i]
        for t in range(i):
            s -= A[i, t] * x[t]
        x[i] = s / A[i, i]
    for i in range(k - 1, -1, -1):
        s = x[i]
        for t in range(i + 1, k):
            s -= A[t, i] * x[t]
        x[i] = s / A[i, i]


@njit(cache=True, inline="always")
def _dls_step(Jt, m, e, w0, lam0, mu, G, rhs, y, dq):
    """Damped least-squares step dq (n,) for task Jacobian Jt (m x n) and error e (m,).

    Damping lambda^2 = mu (adaptive) + lam0^2 (1 - w/w0)^2 when w < w0 (Nakamura & Hanafusa)."""
    n = Jt.shape[1]
    small = m <= n
    k = m if small else n
    for a in range(k):
        for b in range(a + 1):
            s = 0.0
            if small:
                for j in range(n):
                    s += Jt[a, j] * Jt[b, j]
            else:
                for r in range(m):
                    s += Jt[r, a] * Jt[r, b]
            G[a, b] = s
            G[b, a] = s
    if not small:
        for a in range(n):
            s = 0.0
            for r in range(m):
                s += Jt[r, a] * e[r]
            rhs[a] = s
    else:
        for a in range(m):
            rhs[a] = e[a]
    # manipulability of the task Jacobian from an undamped factorisation
    _copy_down(G, k)  # factorise a copy below (G has 2k rows), keep the matrix above
    logdet = _cholesky(G[k:], k)
    w = np.exp(0.5 * logdet) if logdet > -np.inf else 0.0
    lam2 = mu
    if w < w0:
        f = 1.0 - w / w0
        lam2 += lam0 * lam0 * f * f
    if lam2 > 0.0:
        for a in range(k):
            G[a, a] += lam2
        _copy_down(G, k)
        if _cholesky(G[k:], k) == -np.inf:  # numerically singular even when damped
            _copy_down(G, k)
            for a in range(k):
                G[k + a, a] += 1e-12 + lam0 * lam0
            _cholesky(G[k:], k)
    _chol_solve(G[k:], k, rhs, y)
    if small:
        for j in range(n):
            s = 0.0
            for a in range(m):
                s += Jt[a, j] * y[a]
            dq[j] = s
    else:
        for j in range(n):
            dq[j] = y[j]
    return w


@njit(cache=True)
def _solve_seed(goal, q, origins, axes, kinds, off, lower, upper, mode, m, inv_len, cap,
                pos_tol, rot_tol, max_iter, w0, lam0, max_step, wrap, s):
    """Run DLS from ``q`` (overwritten with the result). Returns (outcome, iterations, sq_err).

    ``s`` is a tuple of scratch arrays; on return errs (s[9]) holds (pos_err, rot_err)."""
    T, W, Z, O, p, R, J, Jt, e = s[0], s[1], s[2], s[3], s[4], s[5], s[6], s[7], s[8]
    errs, qt, dq, G, rhs, y, locked, Zt, Ot = s[9], s[10], s[11], s[12], s[13], s[14], s[15], s[16], s[17]
    pt, Rt, et, errt = s[18], s[19], s[20], s[21]
    n = q.shape[0]
    eye3 = s[22]
    for j in range(n):
        if q[j] < lower[j]:
            q[j] = lower[j]
        elif q[j] > upper[j]:
            q[j] = upper[j]
    _tcp(q, origins, axes, kinds, off, T, Z, O, W, p, R)
    sq = _error(mode, goal, p, R, inv_len, e, errs)
    slow = 0
    it = 0
    mu = MU_START
    Jf = s[23]
    while True:
        if errs[0] <= pos_tol and errs[1] <= rot_tol:
            return CONVERGED, it, sq
        if it >= max_iter:
            return NOT_CONVERGED, it, sq
        it += 1
        _fill_jacobian(Z, O, kinds, n - 1, p, eye3, J)
        _task_jacobian(mode, J, R, inv_len, Jf)
        accepted = False
        nlocked = 0
        for _attempt in range(16):
            for j in range(n):
                locked[j] = 0
                for r in range(m):
                    Jt[r, j] = Jf[r, j]
            nlocked = 0
            for _pass in range(n + 1):
                _dls_step(Jt, m, e, w0, lam0, mu, G, rhs, y, dq)
                new = 0
                for j in range(n):
                    if locked[j] == 0 and wrap[j] == 0 and ((q[j] <= lower[j] and dq[j] < 0.0) or (q[j] >= upper[j] and dq[j] > 0.0)):
                        locked[j] = 1
                        new += 1
                        for r in range(m):
                            Jt[r, j] = 0.0
                nlocked += new
                if new == 0:
                    break
            big = 0.0
            for j in range(n):
                if locked[j]:
                    dq[j] = 0.0
                r_ = abs(dq[j]) / cap[j]
                if r_ > big:
                    big = r_
            scale = max_step / big if big > max_step else 1.0
            moved = 0.0
            for j in range(n):
                v = q[j] + scale * dq[j]
                if wrap[j]:
                    if v > upper[j]:
                        v -= 2.0 * np.pi
                    elif v < lower[j]:
                        v += 2.0 * np.pi
                if v < lower[j]:
                    v = lower[j]
                elif v > upper[j]:
                    v = upper[j]
                qt[j] = v
                moved = max(moved, abs(v - q[j]))
            if moved == 0.0:
                break
            _tcp(qt, origins, axes, kinds, off, T, Zt, Ot, W, pt, Rt)
            sqt = _error(mode, goal, pt, Rt, inv_len, et, errt)
            if sqt < sq:
                accepted = True
                mu = max(mu * MU_DOWN, MU_MIN)
                break
            mu = max(mu * MU_UP, MU_RETRY)
            if mu > MU_MAX:
                break
        if not accepted:
            return (LIMITS if nlocked > 0 else OUT_OF_REACH), it, sq
        slow = slow + 1 if sqt > SLOW_RATIO * sq else 0
        for j in range(n):
            q[j] = qt[j]
            for r in range(3):
                Z[j, r] = Zt[j, r]
                O[j, r] = Ot[j, r]
        for r in range(3):
            p[r] = pt[r]
            for c in range(3):
                R[r, c] = Rt[r, c]
        for r in range(m):
            e[r] = et[r]
        errs[0] = errt[0]
        errs[1] = errt[1]
        sq = sqt
        if slow >= SLOW_STEPS:  # settled on a non-zero residual
            if errs[0] <= pos_tol and errs[1] <= rot_tol:
                return CONVERGED, it, sq
            return (LIMITS if nlocked > 0 else OUT_OF_REACH), it, sq


@njit(cache=True, inline="always")
def _pose_distance(goal, T, mode, inv_len):
    """|dp|^2 / L^2 + (3 - trace(Rg^T R)) (fixed; ~ angle^2), 2 (1 - zg . z) (axis), 0 (free)."""
    dx = goal[0, 3] - T[0, 3]
    dy = goal[1, 3] - T[1, 3]
    dz = goal[2, 3] - T[2, 3]
    d = (dx * dx + dy * dy + dz * dz) * inv_len * inv_len
    if mode == MODE_FIXED:
        tr = 0.0
        for r in range(3):
            for c in range(3):
                tr += goal[r, c] * T[r, c]
        d += 3.0 - tr
    elif mode == MODE_AXIS:
        d += 2.0 * (1.0 - goal[0, 2] * T[0, 2] - goal[1, 2] * T[1, 2] - goal[2, 2] * T[2, 2])
    return d


@njit(cache=True)
def _nearest_grid(goal, pool_T, lo, h, dims, starts, mode, inv_len, k, best_d, best_i):
    """k nearest pool poses (ascending distance) among the pool poses whose TCP lies in the grid
    cells around the target's cell; the block of cells grows until it holds at least k poses."""
    c = np.empty(3, dtype=np.int64)
    for a in range(3):
        v = int(np.floor((goal[a, 3] - lo[a]) / h))
        c[a] = min(max(v, 0), dims[a] - 1)
    rmax = max(dims[0], max(dims[1], dims[2]))
    for rad in range(1, rmax + 1):
        for a in range(k):
            best_d[a] = np.inf
            best_i[a] = 0
        count = 0
        for ix in range(max(c[0] - rad, 0), min(c[0] + rad, dims[0] - 1) + 1):
            for iy in range(max(c[1] - rad, 0), min(c[1] + rad, dims[1] - 1) + 1):
                cell0 = (ix * dims[1] + iy) * dims[2]
                z0 = max(c[2] - rad, 0)
                z1 = min(c[2] + rad, dims[2] - 1)
                for t in range(starts[cell0 + z0], starts[cell0 + z1 + 1]):
                    count += 1
                    d = _pose_distance(goal, pool_T[t], mode, inv_len)
                    if d < best_d[k - 1]:
                        a = k - 1
                        while a > 0 and best_d[a - 1] > d:
                            best_d[a] = best_d[a - 1]
                            best_i[a] = best_i[a - 1]
                            a -= 1
                        best_d[a] = d
                        best_i[a] = t
        if count >= k:
            return


@njit(cache=True, inline="always")
def _spread(pool_q, kinds, cand_i, n_cand, k, spread, out_i):
    """Pick k of the candidates (nearest first): skip a candidate within ``spread`` rad (max over
    joints; revolute differences wrapped to [-pi, pi]) of one already picked while others remain;
    fill up with the nearest skipped ones."""
    n = pool_q.shape[1]
    taken = np.zeros(n_cand, dtype=np.bool_)
    got = 0
    for c in range(n_cand):
        if got == k:
            break
        ok = True
        for a in range(got):
            dmax = 0.0
            for j in range(n):
                d = abs(pool_q[cand_i[c], j] - pool_q[out_i[a], j])
                if kinds[j] == 0:
                    d = d % (2.0 * np.pi)
                    d = min(d, 2.0 * np.pi - d)
                dmax = max(dmax, d)
            if dmax < spread:
                ok = False
                break
        if ok:
            out_i[got] = cand_i[c]
            taken[c] = True
            got += 1
    for c in range(n_cand):
        if got == k:
            break
        if not taken[c]:
            out_i[got] = cand_i[c]
            got += 1


@njit(cache=True, parallel=True, nogil=True)
def ik_batch(goals, seeds, user, pool_q, pool_T, grid_lo, grid_h, grid_dims, grid_starts, n_near, n_candidates, spread, origins, axes, kinds, off, lower, upper, mode, inv_len, cap,
             reach_center, reach, pos_tol, rot_tol, max_iter, w0, lam0, max_step, wrap, all_solutions,
             out_q, out_status, out_pos, out_rot, out_iter):
    """Solve IK for N goal poses (N, 4, 4) in the base frame.

    ``reach`` (2,): bounds on the distance from ``reach_center`` (a point of the first joint axis) to
    the TCP and (fixed orientation only) to the origin of the last joint frame; targets beyond them
    are reported out of reach without iterating.

    Seeds per target: ``user[i]`` (U, n) first, then the ``n_near`` poses of the pool (``pool_q``
    (P, n) with TCP poses ``pool_T`` (P, 4, 4)) whose TCP is nearest the target (see
    :func:`_pose_distance`), then the shared ``seeds`` (S, n). With
    ``all_solutions`` every seed runs and out_* are (N, U+S, ...); otherwise seeds stop at the first
    converged one and out_* hold one result per target in slot 0 (the converged seed, or the seed
    with the smallest error), with out_iter the total iterations spent.
    """
    N = goals.shape[0]
    n = origins.shape[0]
    U = user.shape[1]
    S = seeds.shape[0]
    P = pool_q.shape[0]
    n_near = min(n_near, P)
    K = U + n_near + S
    m = 6 if mode == MODE_FIXED else (5 if mode == MODE_AXIS else 3)
    k = max(m, n)
    nb = (N + TBLOCK - 1) // TBLOCK
    for b in prange(nb):
        scratch = (np.empty((3, 4)), np.empty((3, 4)), np.empty((n, 3)), np.empty((n, 3)),
                   np.empty(3), np.empty((3, 3)), np.empty((6, n)), np.zeros((6, n)), np.zeros(6),
                   np.zeros(2), np.empty(n), np.empty(n), np.empty((2 * k, k)), np.empty(k),
                   np.empty(k), np.zeros(n, dtype=np.int8), np.empty((n, 3)), np.empty((n, 3)),
                   np.empty(3), np.empty((3, 3)), np.zeros(6), np.zeros(2), np.eye(3), np.zeros((6, n)))
        errs = scratch[9]
        q = np.empty(n)
        best_q = np.empty(n)
        n_cand = min(P, max(n_near, n_candidates))
        near_d = np.empty(max(n_cand, 1))
        cand_i = np.zeros(max(n_cand, 1), dtype=np.int64)
        near_i = np.zeros(max(n_near, 1), dtype=np.int64)
        for i in range(b * TBLOCK, min(N, (b + 1) * TBLOCK)):
            goal = goals[i]
            dx = goal[0, 3] - reach_center[0]
            dy = goal[1, 3] - reach_center[1]
            dz = goal[2, 3] - reach_center[2]
            far = np.sqrt(dx * dx + dy * dy + dz * dz) > reach[0]
            if not far and mode == MODE_FIXED:
                # the last joint frame is fixed by the goal (goal @ off^-1): its origin must be in reach
                wx = goal[0, 3] - reach_center[0]
                wy = goal[1, 3] - reach_center[1]
                wz = goal[2, 3] - reach_center[2]
                for r in range(3):
                    t = off[0, r] * off[0, 3] + off[1, r] * off[1, 3] + off[2, r] * off[2, 3]
                    wx -= goal[0, r] * t
                    wy -= goal[1, r] * t
                    wz -= goal[2, r] * t
                far = np.sqrt(wx * wx + wy * wy + wz * wz) > reach[1]
            if n_near > 0:
                if far:  # no search; seeds only report the error (kept deterministic)
                    for a in range(n_near):
                        near_i[a] = 0
                else:
                    _nearest_grid(goal, pool_T, grid_lo, grid_h, grid_dims, grid_starts, mode, inv_len, n_cand,
                                  near_d, cand_i)
                    _spread(pool_q, kinds, cand_i, n_cand, n_near, spread, near_i)
            best_sq = np.inf
            best_pos = np.inf
            best_rot = np.inf
            total = 0
            any_running = False
            best_out = OUT_OF_REACH
            found = False
            for sidx in range(K):
                for j in range(n):
                    if sidx < U:
                        q[j] = user[i, sidx, j]
                    elif sidx < U + n_near:
                        q[j] = pool_q[near_i[sidx - U], j]
                    else:
                        q[j] = seeds[sidx - U - n_near, j]
                if far:
                    # beyond the reach bound: report without iterating
                    T_, W_, Z_, O_, p_, R_ = scratch[0], scratch[1], scratch[2], scratch[3], scratch[4], scratch[5]
                    for j in range(n):
                        q[j] = min(max(q[j], lower[j]), upper[j])
                    _tcp(q, origins, axes, kinds, off, T_, Z_, O_, W_, p_, R_)
                    sq = _error(mode, goal, p_, R_, inv_len, scratch[8], errs)
                    outcome, its = OUT_OF_REACH, 0
                else:
                    outcome, its, sq = _solve_seed(goal, q, origins, axes, kinds, off, lower, upper, mode, m,
                                                   inv_len, cap, pos_tol, rot_tol, max_iter, w0, lam0,
                                                   max_step, wrap, scratch)
                if all_solutions:
                    for j in range(n):
                        out_q[i, sidx, j] = q[j]
                    out_status[i, sidx] = outcome
                    out_pos[i, sidx] = errs[0]
                    out_rot[i, sidx] = errs[1]
                    out_iter[i, sidx] = its
                    continue
                total += its
                if outcome == NOT_CONVERGED:
                    any_running = True
                if outcome == CONVERGED or sq < best_sq:
                    best_sq = sq
                    best_pos = errs[0]
                    best_rot = errs[1]
                    best_out = outcome
                    for j in range(n):
                        best_q[j] = q[j]
                if outcome == CONVERGED:
                    found = True
                    break
                if far:
                    break
            if all_solutions:
                continue
            if found:
                status = CONVERGED
            elif far:
                status = OUT_OF_REACH
            elif any_running:
                status = NOT_CONVERGED
            else:
                status = best_out
            for j in range(n):
                out_q[i, 0, j] = best_q[j]
            out_status[i, 0] = status
            out_pos[i, 0] = best_pos
            out_rot[i, 0] = best_rot
            out_iter[i, 0] = total


@njit(cache=True, parallel=True, nogil=True)
def near_seeds_batch(goals, pool_q, pool_T, grid_lo, grid_h, grid_dims, grid_starts, n_near, n_candidates, spread,
                     kinds, mode, inv_len, out):
    """The pool indices ``ik_batch`` picks as near seeds for each goal: out (N, n_near) int64."""
    N = goals.shape[0]
    P = pool_q.shape[0]
    n_cand = min(P, max(n_near, n_candidates))
    for i in prange(N):
        near_d = np.empty(n_cand)
        cand_i = np.zeros(n_cand, dtype=np.int64)
        _nearest_grid(goals[i], pool_T, grid_lo, grid_h, grid_dims, grid_starts, mode, inv_len, n_cand,
                      near_d, cand_i)
        _spread(pool_q, kinds, cand_i, n_cand, n_near, spread, out[i])
