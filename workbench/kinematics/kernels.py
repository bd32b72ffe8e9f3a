"""Compiled batch kernels (numba): forward kinematics, Jacobians, singular values, fused measures.

All kernels work on one contiguous batch ``Q`` of shape (N, n) and loop in parallel over blocks of
poses; the per-pose work is straight-line arithmetic on small scratch arrays. The compiled code is
cached on disk (``cache=True``) so only the very first run on a machine pays the compile time;
:func:`warm_up` compiles everything on a tiny batch and is called in the background by the GUI.

The chain convention is the one of :mod:`workbench.arm.model`.
Singular values use one-sided Jacobi (Hestenes 1958; Demmel & Veselic, "Jacobi's method is more
accurate than QR", SIAM J. Matrix Anal. Appl. 1992), which is accurate to a few ulps of s1 even
near singular poses.
"""
from __future__ import annotations

import os

import numpy as np
from numba import njit, prange

BLOCK = 512  # poses per parallel work item

# ----------------------------------------------------------------------------------------------
# per-pose building blocks


@njit(cache=True, inline="always", error_model="numpy")
def _chain(q, origins, axes, kinds, upto, T, Z, O, tmp):
    """Walk the chain up to joint ``upto`` (inclusive).

    On return ``T`` (3x4) is joint frame ``upto`` in the base frame, and for j <= upto, Z[j] is the
    joint axis and O[j] a point on it, both in the base frame.
    """
    for r in range(3):
        for c in range(4):
            T[r, c] = 1.0 if r == c else 0.0
    for j in range(upto + 1):
        G = origins[j]
        # T = T @ G (rigid: only the first 3 rows of T are stored)
        for r in range(3):
            for c in range(4):
                s = T[r, 0] * G[0, c] + T[r, 1] * G[1, c] + T[r, 2] * G[2, c]
                if c == 3:
                    s += T[r, 3]
                tmp[r, c] = s
        ax, ay, az = axes[j, 0], axes[j, 1], axes[j, 2]
        for r in range(3):
            Z[j, r] = tmp[r, 0] * ax + tmp[r, 1] * ay + tmp[r, 2] * az
            O[j, r] = tmp[r, 3]
        qj = q[j]
        if kinds[j] == 0 and ax == 0.0 and ay == 0.0 and az == 1.0:
            # the common DH case: rotation about z touches only the first two columns
            c = np.cos(qj)
            s = np.sin(qj)
            for r in range(3):
                a0, a1 = tmp[r, 0], tmp[r, 1]
                T[r, 0] = a0 * c + a1 * s
                T[r, 1] = a1 * c - a0 * s
                T[r, 2] = tmp[r, 2]
                T[r, 3] = tmp[r, 3]
        elif kinds[j] == 0:
            c = np.cos(qj)
            s = np.sin(qj)
            v = 1.0 - c
            m00 = c + ax * ax * v
            m01 = ax * ay * v - az * s
            m02 = ax * az * v + ay * s
            m10 = ay * ax * v + az * s
            m11 = c + ay * ay * v
            m12 = ay * az * v - ax * s
            m20 = az * ax * v - ay * s
            m21 = az * ay * v + ax * s
            m22 = c + az * az * v
            for r in range(3):
                a0, a1, a2 = tmp[r, 0], tmp[r, 1], tmp[r, 2]
                T[r, 0] = a0 * m00 + a1 * m10 + a2 * m20
                T[r, 1] = a0 * m01 + a1 * m11 + a2 * m21
                T[r, 2] = a0 * m02 + a1 * m12 + a2 * m22
                T[r, 3] = tmp[r, 3]
        else:
            for r in range(3):
                T[r, 0] = tmp[r, 0]
                T[r, 1] = tmp[r, 1]
                T[r, 2] = tmp[r, 2]
                T[r, 3] = tmp[r, 3] + Z[j, r] * qj


@njit(cache=True, inline="always", error_model="numpy")
def _point(T, off, p):
    for r in range(3):
        p[r] = T[r, 0] * off[0, 3] + T[r, 1] * off[1, 3] + T[r, 2] * off[2, 3] + T[r, 3]


@njit(cache=True, inline="always", error_model="numpy")
def _fill_jacobian(Z, O, kinds, upto, p, R, J):
    """Geometric Jacobian (6 x n) of point ``p``; columns after ``upto`` are zero.

    Rows are rotated by ``R`` (3x3; identity for the base frame, the mount rotation for world).
    """
    n = J.shape[1]
    for j in range(n):
        if j > upto:
            for r in range(6):
                J[r, j] = 0.0
            continue
        zx, zy, zz = Z[j, 0], Z[j, 1], Z[j, 2]
        if kinds[j] == 0:
            dx, dy, dz = p[0] - O[j, 0], p[1] - O[j, 1], p[2] - O[j, 2]
            vx = zy * dz - zz * dy
            vy = zz * dx - zx * dz
            vz = zx * dy - zy * dx
            wx, wy, wz = zx, zy, zz
        else:
            vx, vy, vz = zx, zy, zz
            wx, wy, wz = 0.0, 0.0, 0.0
        for r in range(3):
            J[r, j] = R[r, 0] * vx + R[r, 1] * vy + R[r, 2] * vz
            J[3 + r, j] = R[r, 0] * wx + R[r, 1] * wy + R[r, 2] * wz


@njit(cache=True, error_model="numpy")
def jacobi_sv(B, out):
    """Singular values of B (rows x cols, overwritten) into ``out[:cols]``, descending.

    One-sided Jacobi: rotate column pairs until all are orthogonal to working precision
    (|cos| <= 1e-15 between every pair); the singular values are then the column norms. The
    squared column norms are carried through each sweep with the exact update
    alpha' = alpha - t*gamma, beta' = beta + t*gamma and recomputed at the start of every sweep.
    Cyclic Jacobi converges quadratically, so once every pair of a sweep started with
    |cos| < 1e-8 the columns leave that sweep orthogonal to ~1e-16 and no checking sweep is run.
    ``error_model="numpy"``: a float division by zero gives inf/nan, never an exception.
    """
    rows, cols = B.shape
    for sweep in range(40):
        for j in range(cols):
            acc = 0.0
            for r in range(rows):
                acc += B[r, j] * B[r, j]
            out[j] = acc
        rotated = False
        worst = 0.0
        for i in range(cols - 1):
            for j in range(i + 1, cols):
                alpha = out[i]
                beta = out[j]
                if alpha <= 0.0 or beta <= 0.0:
                    # the carried squared norms can round to <= 0 once a column is (nearly)
                    # zero: recompute both from the columns (rare; keeps sqrt and zeta finite)
                    alpha = 0.0
                    beta = 0.0
                    for r in range(rows):
                        alpha += B[r, i] * B[r, i]
                        beta += B[r, j] * B[r, j]
                    out[i] = alpha
                    out[j] = beta
                if alpha == 0.0 or beta == 0.0:
                    continue
                gamma = 0.0
                for r in range(rows):
                    gamma += B[r, i] * B[r, j]
                ref = np.sqrt(alpha * beta)
                if abs(gamma) <= 1e-15 * ref:
                    continue
                rel = abs(gamma) / ref if ref > 0.0 else 1.0
                if rel > worst:
                    worst = rel
                rotated = True
                zeta = (beta - alpha) / (2.0 * gamma)
                t = (1.0 if zeta >= 0 else -1.0) / (abs(zeta) + np.sqrt(1.0 + zeta * zeta))
                c = 1.0 / np.sqrt(1.0 + t * t)
                s = c * t
                for r in range(rows):
                    bi = B[r, i]
                    bj = B[r, j]
                    B[r, i] = c * bi - s * bj
                    B[r, j] = s * bi + c * bj
                out[i] = alpha - t * gamma
                out[j] = beta + t * gamma
        if not rotated or worst < 1e-8:
            break
    for j in range(cols):
        acc = 0.0
        for r in range(rows):
            acc += B[r, j] * B[r, j]
        out[j] = np.sqrt(acc)
    # insertion sort, descending
    for a in range(1, cols):
        v = out[a]
        b = a - 1
        while b >= 0 and out[b] < v:
            out[b + 1] = out[b]
            b -= 1
        out[b + 1] = v


@njit(cache=True, inline="always", error_model="numpy")
def _selected_sv(J, rows, scale, B, tmp, sv):
    """Singular values of diag(scale) @ J[rows] into sv (length m, zero-padded)."""
    m = rows.shape[0]
    n = J.shape[1]
    if m <= n:  # orthogonalise the m columns of A^T (n x m)
        for a in range(m):
            ra = rows[a]
            sa = scale[a]
            for j in range(n):
                B[j, a] = J[ra, j] * sa
        jacobi_sv(B[:n, :m], tmp)
        for a in range(m):
            sv[a] = tmp[a]
    else:  # orthogonalise the n columns of A (m x n)
        for a in range(m):
            ra = rows[a]
            sa = scale[a]
            for j in range(n):
                B[a, j] = J[ra, j] * sa
        jacobi_sv(B[:m, :n], tmp)
        for a in range(m):
            sv[a] = tmp[a] if a < n else 0.0


# ----------------------------------------------------------------------------------------------
# batch kernels


@njit(cache=True, parallel=True, nogil=True, error_model="numpy")
def fk_batch(Q, origins, axes, kinds, upto, off, pre, out):
    """out[i] = pre @ T_upto(Q[i]) @ off, (N, 4, 4). ``upto`` = -1 means the base frame."""
    N, n = Q.shape
    nb = (N + BLOCK - 1) // BLOCK
    for b in prange(nb):
        T = np.empty((3, 4))
        W = np.empty((3, 4))
        Z = np.empty((max(n, 1), 3))
        O = np.empty((max(n, 1), 3))
        M = np.empty((3, 4))
        for i in range(b * BLOCK, min(N, (b + 1) * BLOCK)):
            _chain(Q[i], origins, axes, kinds, upto, T, Z, O, W)
            for r in range(3):
                for c in range(4):
                    s = T[r, 0] * off[0, c] + T[r, 1] * off[1, c] + T[r, 2] * off[2, c]
                    if c == 3:
                        s += T[r, 3]
                    M[r, c] = s
            for r in range(3):
                for c in range(4):
                    s = pre[r, 0] * M[0, c] + pre[r, 1] * M[1, c] + pre[r, 2] * M[2, c]
                    if c == 3:
                        s += pre[r, 3]
                    out[i, r, c] = s
            out[i, 3, 0] = 0.0
            out[i, 3, 1] = 0.0
            out[i, 3, 2] = 0.0
            out[i, 3, 3] = 1.0


@njit(cache=True, parallel=True, nogil=True, error_model="numpy")
def frames_batch(Q, origins, axes, kinds, pre, out):
    """All joint frames: out[i, j] = pre @ T_j(Q[i]), (N, n, 4, 4)."""
    N, n = Q.shape
    nb = (N + BLOCK - 1) // BLOCK
    for b in prange(nb):
        T = np.empty((3, 4))
        W = np.empty((3, 4))
        Z = np.empty((max(n, 1), 3))
        O = np.empty((max(n, 1), 3))
        for i in range(b * BLOCK, min(N, (b + 1) * BLOCK)):
            for j in range(n):
                _chain(Q[i], origins, axes, kinds, j, T, Z, O, W)
                for r in range(3):
                    for c in range(4):
                        s = pre[r, 0] * T[0, c] + pre[r, 1] * T[1, c] + pre[r, 2] * T[2, c]
                        if c == 3:
                            s += pre[r, 3]
                        out[i, j, r, c] = s
                out[i, j, 3, 0] = 0.0
                out[i, j, 3, 1] = 0.0
                out[i, j, 3, 2] = 0.0
                out[i, j, 3, 3] = 1.0


@njit(cache=True, parallel=True, nogil=True, error_model="numpy")
def jacobian_batch(Q, origins, axes, kinds, upto, off, R, out):
    """Geometric Jacobians (N, 6, n) of the point ``off`` fixed to joint frame ``upto``."""
    N, n = Q.shape
    nb = (N + BLOCK - 1) // BLOCK
    for b in prange(nb):
        T = np.empty((3, 4))
        W = np.empty((3, 4))
        Z = np.empty((max(n, 1), 3))
        O = np.empty((max(n, 1), 3))
        p = np.empty(3)
        for i in range(b * BLOCK, min(N, (b + 1) * BLOCK)):
            _chain(Q[i], origins, axes, kinds, upto, T, Z, O, W)
            _point(T, off, p)
            _fill_jacobian(Z, O, kinds, upto, p, R, out[i])


@njit(cache=True, parallel=True, nogil=True, error_model="numpy")
def sv_batch(A, rows, scale, out):
    """Singular values of diag(scale) @ A[i][rows] for a stack A (N, 6, n) -> out (N, m)."""
    N = A.shape[0]
    n = A.shape[2]
    m = rows.shape[0]
    k = max(m, n)
    nb = (N + BLOCK - 1) // BLOCK
    for b in prange(nb):
        B = np.empty((k, k))
        tmp = np.empty(k)
        for i in range(b * BLOCK, min(N, (b + 1) * BLOCK)):
            _selected_sv(A[i], rows, scale, B, tmp, out[i])


@njit(cache=True, parallel=True, nogil=True, error_model="numpy")
def sv_map_batch(Q, origins, axes, kinds, upto, off, R, rows, scale, out):
    """Fused FK -> Jacobian -> singular values, (N, n) -> out (N, m); no Jacobian stack is stored."""
    N, n = Q.shape
    m = rows.shape[0]
    k = max(m, n)
    nb = (N + BLOCK - 1) // BLOCK
    for b in prange(nb):
        T = np.empty((3, 4))
        W = np.empty((3, 4))
        Z = np.empty((max(n, 1), 3))
        O = np.empty((max(n, 1), 3))
        p = np.empty(3)
        J = np.empty((6, n))
        B = np.empty((k, k))
        tmp = np.empty(k)
        for i in range(b * BLOCK, min(N, (b + 1) * BLOCK)):
            _chain(Q[i], origins, axes, kinds, upto, T, Z, O, W)
            _point(T, off, p)
            _fill_jacobian(Z, O, kinds, upto, p, R, J)
            _selected_sv(J, rows, scale, B, tmp, out[i])


_THREAD_STATE = __import__("threading").local()


def dynamic_schedule() -> None:
    """Hand the parallel blocks out to the kernel threads dynamically (one block of 512 poses at a
    time) instead of splitting them evenly up front. With an even split, a kernel call waits for
    its slowest thread, so any other busy thread of the process (the results writer compressing a
    chunk, the GUI) delays the whole call; handed out one by one, the other thread takes up the
    slack. numba keeps this setting per calling thread, so it is set once per thread here."""
    if not getattr(_THREAD_STATE, "dynamic", False):
        import numba

        numba.set_parallel_chunksize(1)
        _THREAD_STATE.dynamic = True


# ----------------------------------------------------------------------------------------------
# first-use compilation: say so on stderr, with the expected time

#: Kernel groups: (label, expected first compile in s on a quiet 2-core machine, dispatchers).
#: The times were measured with an empty numba cache (see DEVELOPERS.md, "Compiled kernels").
COMPILE_SECONDS = {"kernels": 20, "lanes": 35, "ik": 50}
_CHECKED: set = set()


def _group(name):
    if name == "kernels":
        return [fk_batch, frames_batch, jacobian_batch, sv_batch, sv_map_batch], warm_up
    if name == "lanes":
        from . import lanes

        return [lanes.sv_map_lanes, lanes.jacobian_lanes, lanes.sv_lanes], lanes.warm_up
    if name == "ik":
        from . import ik, ik_kernels

        return [ik_kernels.ik_batch, ik_kernels.near_seeds_batch], ik.warm_up
    raise KeyError(name)


def is_ready(dispatcher) -> bool:
    """Whether a numba dispatcher runs without compiling: compiled in this process, or an on-disk
    cache entry for this source and this CPU exists (numba's own index; any doubt counts as not
    ready)."""
    if dispatcher.signatures:
        return True
    try:
        cache = dispatcher._cache
        index = cache._cache_file._load_index()
        tail = cache._index_key((), dispatcher.targetctx.codegen())[1:]
        return any(tuple(key[1:]) == tuple(tail) for key in index)
    except Exception:  # pragma: no cover - numba internals moved: assume a compile
        return False


def announce_compile(name, stream=None) -> bool:
    """Before the first use of a kernel group in a process: when any of its kernels would compile
    (no fresh on-disk cache), print ``compiling <group> kernels (first use, about N s)...`` on
    stderr and compile the whole group at once. Returns True when it compiled. Cheap after the
    first call (one set lookup)."""
    if name in _CHECKED:
        return False
    _CHECKED.add(name)
    dispatchers, warm = _group(name)
    if all(is_ready(d) for d in dispatchers):
        return False
    import sys
    import time

    stream = sys.stderr if stream is None else stream
    label = {"kernels": "kinematics", "lanes": "vector", "ik": "inverse-kinematics"}[name]
    print(f"compiling {label} kernels (first use, about {COMPILE_SECONDS[name]} s; cached afterwards)...",
          file=stream, flush=True)
    t = time.perf_counter()
    warm()
    print(f"compiled {label} kernels in {time.perf_counter() - t:.0f} s", file=stream, flush=True)
    return True


def warm_up() -> None:
    """Compile (or load from the on-disk cache) every kernel on a tiny batch."""
    n = 2
    origins = np.tile(np.eye(4), (n, 1, 1))
    axes = np.tile(np.array([0.0, 0.0, 1.0]), (n, 1))
    kinds = np.zeros(n, dtype=np.int8)
    Q = np.zeros((1, n))
    eye = np.eye(4)
    fk_batch(Q, origins, axes, kinds, n - 1, eye, eye, np.empty((1, 4, 4)))
    frames_batch(Q, origins, axes, kinds, eye, np.empty((1, n, 4, 4)))
    J = np.empty((1, 6, n))
    jacobian_batch(Q, origins, axes, kinds, n - 1, eye, np.eye(3), J)
    rows = np.arange(6, dtype=np.int64)
    scale = np.ones(6)
    sv_batch(J, rows, scale, np.empty((1, 6)))
    sv_map_batch(Q, origins, axes, kinds, n - 1, eye, np.eye(3), rows, scale, np.empty((1, 6)))


def set_threads(k: int | None) -> None:
    """Limit the kernels' threads (runner worker processes use 1 so processes don't oversubscribe)."""
    import numba

    if k is None:
        k = numba.config.NUMBA_NUM_THREADS
    numba.set_num_threads(max(1, min(int(k), numba.config.NUMBA_NUM_THREADS)))


if os.environ.get("WORKBENCH_WARM_KERNELS") == "1":  # pragma: no cover - opt-in eager compile
    warm_up()
