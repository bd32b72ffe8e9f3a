"""Structure-of-arrays kernels (numba): a block of poses in SIMD lanes.

The per-pose kernels of :mod:`workbench.kinematics.kernels` walk one pose at a time through
small scratch arrays, so the compiler cannot use the vector units. Here a block of ``LANES``
poses is held in arrays shaped (component, lane): every arithmetic step of the chain, the
Jacobian and the singular value iteration is a loop over the lanes of one component, which LLVM
turns into vector instructions. The arithmetic per pose is the same as the per-pose kernels'.

* **Chain.** :func:`canonical_chain` turns an arm model into one fixed 3x4 transform per joint
  (fixed joints of a URDF are already folded into these by the importer) with every joint axis
  along its local z: joint ``j``'s frame is re-expressed by a constant rotation ``A_j`` taking z to
  the joint axis, so ``origin_j @ motion(axis_j, q) = (origin_j A_j) motion(z, q) A_j^T`` and the
  ``A_j^T`` is folded into the next transform. A revolute joint then touches two columns of the
  frame (cos, sin of one angle), a prismatic joint one column.
* **Singular values.** One-sided Jacobi (Hestenes, "Inversion of matrices by biorthogonalization
  and related results", J. SIAM 1958; accuracy: Demmel & Veselic, "Jacobi's method is more accurate
  than QR", SIAM J. Matrix Anal. Appl. 1992) on the k = min(m, n) <= 6 columns of the selected,
  scaled m x n Jacobian or its transpose, with a fixed number of cyclic sweeps (``SWEEPS_FOR[k]``) and no
  per-lane branch: every lane does the same rotations. The rotation angle uses the form
  t = 2 g sgn(b - a) / (|b - a| + sqrt((b - a)^2 + 4 g^2)), which is the usual
  t = sgn(z) / (|z| + sqrt(1 + z^2)), z = (b - a) / 2g, multiplied through by |2g| so that g = 0
  gives t = 0 without a division by zero. Squared column norms are carried through a sweep with the
  exact updates a' = a - t g, b' = b + t g and recomputed at the start of every sweep. Cyclic
  Jacobi converges quadratically once the off-diagonal part is small (Demmel & Veselic 1992), so a
  few sweeps reach working precision; ``SWEEPS_FOR`` was chosen from the residuals measured by
  :func:`sweeps_needed` (tests/test_lanes.py checks it at random, clustered and exactly singular
  poses against ``np.linalg.svd``, to 1e-9 * s1).
* **Measures.** The kernels also write manipulability, condition number and inverse condition
  with the conventions of :func:`workbench.measures.measures_from_sv`.

All kernels are compiled with ``cache=True`` (the first use on a machine compiles them once;
:func:`workbench.kinematics.kernels.announce_compile` says so on stderr).
"""
from __future__ import annotations

import numpy as np
from numba import njit, prange

LANES = 32        # poses per SIMD block (one (component, lane) array row is 256 bytes)
BLOCKS = 16       # lane blocks per parallel work item (512 poses, as the per-pose kernels)
# Fixed cyclic Jacobi sweeps for k = 0..6 columns. The counts one short of these were the most
# that any stack in tests/test_lanes.py needed to reach 1e-10 * s1 (Gaussian, graded, rank-
# deficient, clustered singular values, arm Jacobians at random and singular poses; measured with
# sweeps_needed); one more sweep squares the remaining off-diagonal part.
SWEEPS_FOR = (0, 0, 2, 5, 6, 6, 7)
SWEEPS = SWEEPS_FOR[6]
MAX_JOINTS = 16   # longer chains use the per-pose kernels (scratch arrays stay in L1)

_FAST = {"contract"}  # allow fused multiply-add only; no reassociation, inf/nan kept


# ----------------------------------------------------------------------------------------------
# chain preparation (plain numpy, once per arm)


def _align_z(axis) -> np.ndarray:
    """A rotation (3, 3) taking the z axis to the unit vector ``axis`` (Rodrigues' formula)."""
    a = np.asarray(axis, dtype=float)
    a = a / np.linalg.norm(a)
    z = np.array([0.0, 0.0, 1.0])
    c = float(a @ z)
    if c > 1.0 - 1e-15:
        return np.eye(3)
    if c < -1.0 + 1e-15:
        return np.diag([1.0, -1.0, -1.0])  # half turn about x
    v = np.cross(z, a)
    s = np.linalg.norm(v)
    k = v / s
    K = np.array([[0.0, -k[2], k[1]], [k[2], 0.0, -k[0]], [-k[1], k[0], 0.0]])
    return np.eye(3) + s * K + (1.0 - c) * (K @ K)


def canonical_chain(model):
    """(G (n, 3, 4), kinds (n,) int8, A (n, 3, 3)) of an arm model with every axis along local z.

    ``G[j] = A_{j-1}^T origin_j A_j`` (A_{-1} = I); the lane chain's frame j is T_j A_j, where T_j
    is the model's joint frame j (see :mod:`workbench.arm.model`).
    """
    n = model.n
    A = np.empty((n, 3, 3))
    G = np.empty((n, 3, 4))
    prev = np.eye(3)
    for j in range(n):
        A[j] = _align_z(model.axes[j])
        Oj = np.asarray(model.origins[j], dtype=float)
        G[j, :, :3] = prev.T @ Oj[:3, :3] @ A[j]
        G[j, :, 3] = prev.T @ Oj[:3, 3]
        prev = A[j]
    return np.ascontiguousarray(G), np.ascontiguousarray(model.kinds, dtype=np.int8), A


def canonical_offset(A, k, off) -> np.ndarray:
    """Offset (4, 4) from lane frame k for a point/frame at ``off`` from the model's joint frame k."""
    off = np.asarray(off, dtype=float)
    if k < 0:
        return np.ascontiguousarray(off)
    M = np.eye(4)
    M[:3, :3] = A[k].T
    return np.ascontiguousarray(M @ off)


# ----------------------------------------------------------------------------------------------
# lane building blocks: arrays shaped (..., LANES)


@njit(cache=True, error_model="numpy", fastmath=_FAST)
def _load_q(Q, start, stop, q):
    """q[j, l] = Q[start + l, j]; lanes past ``stop`` get 0 (computed, never stored)."""
    n = Q.shape[1]
    L = q.shape[1]
    for l in range(L):
        i = start + l
        if i < stop:
            for j in range(n):
                q[j, l] = Q[i, j]
        else:
            for j in range(n):
                q[j, l] = 0.0


# cos / sin of joint angles in the lanes. numba's np.cos / np.sin call the scalar C library once
# per lane (about 11 ns each here, the larger part of the chain), so the lanes use a reduction and
# polynomials the compiler can vectorise:
# * q = k pi/2 + r, k = round(q 2/pi), |r| <= pi/4 (plus rounding), with pi/2 split in three
#   parts (Cody & Waite, "Software Manual for the Elementary Functions", 1980): the first two
#   have 33 significant bits, so k * part is exact for |k| < 2^20, and the three sum to pi/2
#   within 1e-37 (computed with mpmath at 300 bits; tests/test_lanes.py checks the sum);
# * sin r, cos r by their Taylor series up to r^17 / r^18 (the first omitted terms are below
#   |r|^19/19! < 1e-19 for |r| <= pi/4), Horner form in r^2, coefficients 1/n! rounded once;
# * the quadrant k mod 4 picks (+-sin r, +-cos r) branch-free.
# Beyond |q| = SINCOS_REDUCED the three-part reduction loses bits; those lanes are recomputed with
# np.cos / np.sin (a lane's value depends on its own q only).
_PIO2_1 = 1.5707963267341256       # 0x1.921fb544p+0: pi/2 to 33 bits
_PIO2_2 = 6.077100506303966e-11    # the next 33 bits
_PIO2_3 = 2.0222662487959506e-21   # the rest, rounded
_TWO_OVER_PI = 0.6366197723675814
SINCOS_REDUCED = 1.0e5             # |q| (rad) up to which the reduction above is used


def _inv_fact(n):
    from fractions import Fraction
    from math import factorial

    return float(Fraction(1, factorial(n)))


_S3, _S5, _S7, _S9, _S11, _S13, _S15, _S17 = (_inv_fact(n) for n in (3, 5, 7, 9, 11, 13, 15, 17))
_C2, _C4, _C6, _C8, _C10, _C12, _C14, _C16, _C18 = (_inv_fact(n) for n in (2, 4, 6, 8, 10, 12, 14, 16, 18))


@njit(cache=True, error_model="numpy", fastmath=_FAST)
def _sincos(q, c, s):
    """c[l] = cos(q[l]), s[l] = sin(q[l]) for the LANES lanes (see the notes above)."""
    for l in range(LANES):
        x = q[l]
        kf = np.floor(x * _TWO_OVER_PI + 0.5)
        r = ((x - kf * _PIO2_1) - kf * _PIO2_2) - kf * _PIO2_3
        z = r * r
        sr = r - r * z * (_S3 - z * (_S5 - z * (_S7 - z * (_S9 - z * (_S11 - z * (_S13 - z * (_S15 - z * _S17)))))))
        cr = 1.0 - z * (_C2 - z * (_C4 - z * (_C6 - z * (_C8 - z * (_C10 - z * (_C12 - z * (_C14 - z * (_C16 - z * _C18))))))))
        m = kf - 4.0 * np.floor(kf * 0.25)  # k mod 4 in {0, 1, 2, 3}
        odd = m == 1.0 or m == 3.0
        sv = cr if odd else sr
        cv = sr if odd else cr
        s[l] = -sv if m >= 2.0 else sv
        c[l] = -cv if (m == 1.0 or m == 2.0) else cv
    for l in range(LANES):
        if not abs(q[l]) <= SINCOS_REDUCED:  # also nan
            c[l] = np.cos(q[l])
            s[l] = np.sin(q[l])


@njit(cache=True, error_model="numpy", fastmath=_FAST)
def _chain(q, G, kinds, upto, R, T, tmp, Z, O, c, s):
    """Walk the lane chain up to joint ``upto``: T (3, 4, L) = R @ frame upto; Z, O (n, 3, L)
    hold each joint's axis and a point on it (rotated by R, the world rotation or I)."""
    L = q.shape[1]
    for r in range(3):
        for cc in range(3):
            v = R[r, cc]
            for l in range(L):
                T[r, cc, l] = v
        for l in range(L):
            T[r, 3, l] = 0.0
    for j in range(upto + 1):
        for r in range(3):
            for cc in range(3):
                g0 = G[j, 0, cc]
                g1 = G[j, 1, cc]
                g2 = G[j, 2, cc]
                for l in range(L):
                    tmp[r, cc, l] = T[r, 0, l] * g0 + T[r, 1, l] * g1 + T[r, 2, l] * g2
            g0 = G[j, 0, 3]
            g1 = G[j, 1, 3]
            g2 = G[j, 2, 3]
            for l in range(L):
                tmp[r, 3, l] = T[r, 0, l] * g0 + T[r, 1, l] * g1 + T[r, 2, l] * g2 + T[r, 3, l]
        for r in range(3):
            for l in range(L):
                Z[j, r, l] = tmp[r, 2, l]
                O[j, r, l] = tmp[r, 3, l]
        if kinds[j] == 0:
            _sincos(q[j], c, s)
            for r in range(3):
                for l in range(L):
                    a0 = tmp[r, 0, l]
                    a1 = tmp[r, 1, l]
                    T[r, 0, l] = a0 * c[l] + a1 * s[l]
                    T[r, 1, l] = a1 * c[l] - a0 * s[l]
                    T[r, 2, l] = tmp[r, 2, l]
                    T[r, 3, l] = tmp[r, 3, l]
        else:
            for r in range(3):
                for l in range(L):
                    T[r, 0, l] = tmp[r, 0, l]
                    T[r, 1, l] = tmp[r, 1, l]
                    T[r, 2, l] = tmp[r, 2, l]
                    T[r, 3, l] = tmp[r, 3, l] + tmp[r, 2, l] * q[j, l]


@njit(cache=True, error_model="numpy", fastmath=_FAST)
def _jacobian(T, Z, O, kinds, upto, off, p, J):
    """J (6, n, L): geometric Jacobian of the point ``off`` fixed to lane frame ``upto``."""
    L = T.shape[2]
    n = J.shape[1]
    for r in range(3):
        o0 = off[0, 3]
        o1 = off[1, 3]
        o2 = off[2, 3]
        for l in range(L):
            p[r, l] = T[r, 0, l] * o0 + T[r, 1, l] * o1 + T[r, 2, l] * o2 + T[r, 3, l]
    for j in range(n):
        if j > upto:
            for r in range(6):
                for l in range(L):
                    J[r, j, l] = 0.0
        elif kinds[j] == 0:
            for l in range(L):
                zx = Z[j, 0, l]
                zy = Z[j, 1, l]
                zz = Z[j, 2, l]
                dx = p[0, l] - O[j, 0, l]
                dy = p[1, l] - O[j, 1, l]
                dz = p[2, l] - O[j, 2, l]
                J[0, j, l] = zy * dz - zz * dy
                J[1, j, l] = zz * dx - zx * dz
                J[2, j, l] = zx * dy - zy * dx
                J[3, j, l] = zx
                J[4, j, l] = zy
                J[5, j, l] = zz
        else:
            for l in range(L):
                J[0, j, l] = Z[j, 0, l]
                J[1, j, l] = Z[j, 1, l]
                J[2, j, l] = Z[j, 2, l]
                J[3, j, l] = 0.0
                J[4, j, l] = 0.0
                J[5, j, l] = 0.0


@njit(cache=True, error_model="numpy", fastmath=_FAST)
def _select(J, rows, scale, W):
    """W (k, len, L): the columns to orthogonalise of A = diag(scale) J[rows] (m x n): the m rows of
    A when m <= n (columns of A^T), else the n columns of A."""
    m = rows.shape[0]
    n = J.shape[1]
    L = J.shape[2]
    if m <= n:
        for a in range(m):
            ra = rows[a]
            sa = scale[a]
            for j in range(n):
                for l in range(L):
                    W[a, j, l] = J[ra, j, l] * sa
    else:
        for a in range(m):
            ra = rows[a]
            sa = scale[a]
            for j in range(n):
                for l in range(L):
                    W[j, a, l] = J[ra, j, l] * sa


@njit(cache=True, error_model="numpy", fastmath=_FAST)
def _jacobi(W, k, ln, sweeps, d, g, sv):
    """Singular values sv (k, L), descending, of the k columns of length ``ln`` held in W[:k, :ln]
    (overwritten): ``sweeps`` cyclic one-sided Jacobi sweeps, the same rotations in every lane.

    Per column pair (i, j): a = |w_i|^2, b = |w_j|^2, g = w_i . w_j; the rotation that makes the
    pair orthogonal has t = tan(theta) = num / den with num = 2 g sgn(b - a),
    den = |b - a| + sqrt((b - a)^2 + 4 g^2), so cos = 1 / sqrt(1 + t^2), sin = t cos (|t| <= 1, so nothing overflows or underflows
    even for columns of rounding-level size).
    """
    L = W.shape[2]
    cs = d[0]
    sn = d[1]
    for sweep in range(sweeps):
        for i in range(k - 1):
            for j in range(i + 1, k):
                for l in range(L):
                    g[0, l] = 0.0
                    g[1, l] = 0.0
                    g[2, l] = 0.0
                for e in range(ln):
                    for l in range(L):
                        wi = W[i, e, l]
                        wj = W[j, e, l]
                        g[0, l] += wi * wi
                        g[1, l] += wj * wj
                        g[2, l] += wi * wj
                for l in range(L):
                    diff = g[1, l] - g[0, l]
                    gg = g[2, l]
                    num = 2.0 * gg if diff >= 0.0 else -2.0 * gg
                    den = abs(diff) + np.sqrt(diff * diff + 4.0 * gg * gg)
                    t = num / den if den > 0.0 else 0.0  # |t| <= 1: den >= |num|
                    cc = 1.0 / np.sqrt(1.0 + t * t)
                    cs[l] = cc
                    sn[l] = cc * t
                for e in range(ln):
                    for l in range(L):
                        bi = W[i, e, l]
                        bj = W[j, e, l]
                        W[i, e, l] = cs[l] * bi - sn[l] * bj
                        W[j, e, l] = sn[l] * bi + cs[l] * bj
    for i in range(k):
        for l in range(L):
            g[0, l] = 0.0
        for e in range(ln):
            for l in range(L):
                g[0, l] += W[i, e, l] * W[i, e, l]
        for l in range(L):
            sv[i, l] = np.sqrt(g[0, l])
    # descending order: odd-even transposition network (k rounds), branch-free max/min
    for rnd in range(k):
        for i in range(rnd % 2, k - 1, 2):
            for l in range(L):
                x = sv[i, l]
                y = sv[i + 1, l]
                sv[i, l] = x if x >= y else y
                sv[i + 1, l] = y if x >= y else x


@njit(cache=True, error_model="numpy", fastmath=_FAST)
def _store(sv, k, m, start, stop, out_sv, out_w, out_cond, out_inv):
    """Singular values (zero-padded to m) and, when the measure arrays are not empty, the measures
    of :func:`workbench.measures.measures_from_sv` for the lanes of poses start..stop-1."""
    want = out_w.shape[0] > 0
    for l in range(stop - start):
        i = start + l
        w = 1.0
        for a in range(m):
            v = sv[a, l] if a < k else 0.0
            out_sv[i, a] = v
            w *= v
        if want:
            s1 = sv[0, l]
            sm = sv[m - 1, l] if m <= k else 0.0
            out_w[i] = w
            out_inv[i] = sm / s1 if s1 > 0.0 else 0.0
            out_cond[i] = s1 / sm if sm > 0.0 else np.inf


# ----------------------------------------------------------------------------------------------
# batch kernels


@njit(cache=True, parallel=True, nogil=True, error_model="numpy", fastmath=_FAST)
def sv_map_lanes(Q, G, kinds, upto, off, R, rows, scale, sweeps, out_sv, out_w, out_cond, out_inv):
    """Fused FK -> Jacobian -> singular values (and measures) of Q (N, n) -> out_sv (N, m).

    ``out_w``, ``out_cond``, ``out_inv`` are (N,) or empty (then only singular values are written).
    """
    N, n = Q.shape
    m = rows.shape[0]
    k = min(m, n)
    ln = max(m, n)
    L = LANES
    per = L * BLOCKS
    nb = (N + per - 1) // per
    for b in prange(nb):
        q = np.empty((n, L))
        T = np.empty((3, 4, L))
        tmp = np.empty((3, 4, L))
        Z = np.empty((n, 3, L))
        O = np.empty((n, 3, L))
        c = np.empty(L)
        s = np.empty(L)
        p = np.empty((3, L))
        J = np.empty((6, n, L))
        W = np.empty((k, ln, L))
        if m > n:
            W[:] = 0.0
        d = np.empty((2, L))
        g = np.empty((3, L))
        sv = np.empty((k, L))
        for start in range(b * per, min(N, (b + 1) * per), L):
            stop = min(N, start + L)
            _load_q(Q, start, stop, q)
            _chain(q, G, kinds, upto, R, T, tmp, Z, O, c, s)
            _jacobian(T, Z, O, kinds, upto, off, p, J)
            _select(J, rows, scale, W)
            _jacobi(W, k, ln, sweeps, d, g, sv)
            _store(sv, k, m, start, stop, out_sv, out_w, out_cond, out_inv)


@njit(cache=True, parallel=True, nogil=True, error_model="numpy", fastmath=_FAST)
def jacobian_lanes(Q, G, kinds, upto, off, R, out):
    """Geometric Jacobians out (N, 6, n) of the point ``off`` fixed to lane frame ``upto``."""
    N, n = Q.shape
    L = LANES
    per = L * BLOCKS
    nb = (N + per - 1) // per
    for b in prange(nb):
        q = np.empty((n, L))
        T = np.empty((3, 4, L))
        tmp = np.empty((3, 4, L))
        Z = np.empty((n, 3, L))
        O = np.empty((n, 3, L))
        c = np.empty(L)
        s = np.empty(L)
        p = np.empty((3, L))
        J = np.empty((6, n, L))
        for start in range(b * per, min(N, (b + 1) * per), L):
            stop = min(N, start + L)
            _load_q(Q, start, stop, q)
            _chain(q, G, kinds, upto, R, T, tmp, Z, O, c, s)
            _jacobian(T, Z, O, kinds, upto, off, p, J)
            for l in range(stop - start):
                i = start + l
                for r in range(6):
                    for j in range(n):
                        out[i, r, j] = J[r, j, l]


@njit(cache=True, parallel=True, nogil=True, error_model="numpy", fastmath=_FAST)
def sv_lanes(A, rows, scale, sweeps, out_sv, out_w, out_cond, out_inv):
    """Singular values (and measures) of diag(scale) @ A[i][rows] for a stack A (N, 6, n)."""
    N = A.shape[0]
    n = A.shape[2]
    m = rows.shape[0]
    k = min(m, n)
    ln = max(m, n)
    L = LANES
    per = L * BLOCKS
    nb = (N + per - 1) // per
    for b in prange(nb):
        J = np.empty((6, n, L))
        W = np.empty((k, ln, L))
        if m > n:
            W[:] = 0.0
        d = np.empty((2, L))
        g = np.empty((3, L))
        sv = np.empty((k, L))
        for start in range(b * per, min(N, (b + 1) * per), L):
            stop = min(N, start + L)
            for l in range(L):
                i = start + l
                if i < stop:
                    for r in range(6):
                        for j in range(n):
                            J[r, j, l] = A[i, r, j]
                else:
                    for r in range(6):
                        for j in range(n):
                            J[r, j, l] = 0.0
            _select(J, rows, scale, W)
            _jacobi(W, k, ln, sweeps, d, g, sv)
            _store(sv, k, m, start, stop, out_sv, out_w, out_cond, out_inv)


# ----------------------------------------------------------------------------------------------
# plain-Python face


_EMPTY = np.empty(0)


def measures_from_sv(sv) -> dict:
    """Measures from singular values ``sv`` (..., m) sorted descending (zero-padded when m > n):
    the plain-numpy form of what the lane kernels write (see :func:`workbench.measures.measures_from_sv`)."""
    sv = np.asarray(sv, dtype=float)
    s1 = sv[..., 0]
    sm = sv[..., -1]
    w = np.prod(sv, axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        inv = np.where(s1 > 0, sm / np.where(s1 > 0, s1, 1.0), 0.0)
        cond = np.where(sm > 0, s1 / np.where(sm > 0, sm, 1.0), np.inf)
    return {
        "manipulability": w,
        "condition": cond,
        "inverse_condition": inv,
        "min_sv": sm.copy(),
        "sv": sv,
    }


def measures_dict(sv, w, cond, inv, lead, m) -> dict:
    """The dict of :func:`workbench.measures.measures_from_sv` from the kernel outputs."""
    sv = sv.reshape(lead + (m,))
    return {
        "manipulability": w.reshape(lead),
        "condition": cond.reshape(lead),
        "inverse_condition": inv.reshape(lead),
        "min_sv": sv[..., -1].copy(),
        "sv": sv,
    }


def sweeps_for(m, n) -> int:
    """The fixed sweep count for an m-row selection of an n-joint Jacobian."""
    return SWEEPS_FOR[min(m, n, 6)]


def covers(n) -> bool:
    """Whether the lane kernels take an arm or Jacobian stack with n joints."""
    return 1 <= n <= MAX_JOINTS


def sv_measures(A, rows, scale, with_measures=True, sweeps=None):
    """Singular values (N, m) and the measures of a stack A (N, 6, n) -> (sv, w, cond, inv)."""
    if sweeps is None:
        sweeps = sweeps_for(rows.shape[0], A.shape[2])
    N = A.shape[0]
    m = rows.shape[0]
    out = np.empty((N, m))
    w, cond, inv = _outs(N, with_measures)
    if N:
        sv_lanes(A, rows, scale, sweeps, out, w, cond, inv)
    return out, w, cond, inv


def _outs(N, with_measures):
    if with_measures:
        return np.empty(N), np.empty(N), np.empty(N)
    return _EMPTY, _EMPTY, _EMPTY


def sweeps_needed(A, rows=None, scale=None, tol=1e-14, most=12) -> int:
    """Smallest sweep count whose singular values of the stack A (N, 6, n) are within
    ``tol * s1`` of ``np.linalg.svd`` at every pose (``most`` + 1 if none is); used to choose
    ``SWEEPS``."""
    if rows is None:
        rows = np.arange(6, dtype=np.int64)
    if scale is None:
        scale = np.ones(len(rows))
    ref = np.linalg.svd(A[:, rows, :] * scale[:, None], compute_uv=False)
    m = len(rows)
    if ref.shape[-1] < m:
        ref = np.concatenate([ref, np.zeros(ref.shape[:-1] + (m - ref.shape[-1],))], axis=-1)
    for k in range(1, most + 1):
        sv, _, _, _ = sv_measures(A, rows, scale, with_measures=False, sweeps=k)
        err = np.max(np.abs(sv - ref) / np.maximum(ref[:, :1], 1e-300))
        if err <= tol:
            return k
    return most + 1


def warm_up() -> None:
    """Compile (or load from the on-disk cache) the lane kernels on a tiny batch."""
    n = 2
    G = np.zeros((n, 3, 4))
    G[:, :, :3] = np.eye(3)
    kinds = np.zeros(n, dtype=np.int8)
    Q = np.zeros((1, n))
    eye = np.eye(4)
    rows = np.arange(6, dtype=np.int64)
    scale = np.ones(6)
    J = np.empty((1, 6, n))
    jacobian_lanes(Q, G, kinds, n - 1, eye, np.eye(3), J)
    w, cond, inv = _outs(1, True)
    sv_map_lanes(Q, G, kinds, n - 1, eye, np.eye(3), rows, scale, SWEEPS, np.empty((1, 6)), w, cond, inv)
    sv_lanes(J, rows, scale, SWEEPS, np.empty((1, 6)), w, cond, inv)
