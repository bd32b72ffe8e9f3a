"""Compiled (numba) distance kernels: capsules, oriented boxes, their intersections, the floor.

Primitive layout
----------------
Every shape the kernel checks is one row of 26 numbers (``PAR``) and a type code:

* ``CAPSULE`` (0): points ``a`` = par[0:3], ``b`` = par[3:6], radius par[6] (a sphere has a = b);
* ``BOX`` (1): centre par[7:10], rotation par[10:19] (row-major; its columns are the box axes),
  half sizes par[19:22];
* ``BOTH`` (2): the intersection of the capsule and the box above (a cylinder is exactly the
  capsule over its axis intersected with its bounding box; a mesh is enclosed by a capsule and an
  oriented box around its convex hull). The distance of an intersection is bounded from below by
  the largest of the distances of its parts (each part contains it), which is what is returned:
  never larger than the true distance;
* ``FLOOR`` (3): the half-space z <= 0 (obstacles only).

par[22:25] and par[25] are a bounding sphere (centre, radius), used only to skip pairs that
cannot be the nearest one.

Distances (signed, m; negative when the shapes overlap)
------------------------------------------------------
* capsule-capsule: segment-segment distance (closest points of two segments, clamped parameters;
  Ericson, "Real-Time Collision Detection", 2005, section 5.1.9) minus both radii: exact;
* capsule-box: the box's signed distance function is convex, so along the segment its square
  (outside the box) is a convex, piecewise quadratic function of the segment parameter with
  breaks where the segment crosses a face plane; its derivative is piecewise linear and its root
  is found exactly between breaks. Minus the radius: exact. When the segment enters the box the
  (negative) value is the smallest box signed distance along the segment, found by golden-section
  search of that convex function, minus the radius;
* box-box: separating axes (the 3 + 3 face normals and 9 edge cross products; Gottschalk, Lin &
  Manocha, "OBBTree", SIGGRAPH 1996) decide overlap; overlapping boxes give minus the smallest
  overlap along those axes (the penetration depth); separated boxes give the exact distance,
  the smallest segment-box distance over the 12 edges of each box against the other box (the
  nearest points of two disjoint convex polyhedra can always be taken with one of them on an
  edge);
* anything against the floor: the lowest point of the shape (exact).
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

CAPSULE, BOX, BOTH, FLOOR = 0, 1, 2, 3
PAR = 26
BLOCK = 64
_GOLD = 0.6180339887498949


@njit(cache=True, inline="always", error_model="numpy")
def _clamp01(x):
    return 0.0 if x < 0.0 else (1.0 if x > 1.0 else x)


@njit(cache=True, error_model="numpy")
def seg_seg(a0, a1, a2, b0, b1, b2, c0, c1, c2, e0, e1, e2):
    """Distance between segments [a, b] and [c, e] (Ericson 2005, section 5.1.9)."""
    d10, d11, d12 = b0 - a0, b1 - a1, b2 - a2
    d20, d21, d22 = e0 - c0, e1 - c1, e2 - c2
    r0, r1, r2 = a0 - c0, a1 - c1, a2 - c2
    A = d10 * d10 + d11 * d11 + d12 * d12
    E = d20 * d20 + d21 * d21 + d22 * d22
    F = d20 * r0 + d21 * r1 + d22 * r2
    eps = 1e-18
    if A <= eps and E <= eps:
        s = 0.0
        t = 0.0
    elif A <= eps:
        s = 0.0
        t = _clamp01(F / E)
    else:
        C = d10 * r0 + d11 * r1 + d12 * r2
        if E <= eps:
            t = 0.0
            s = _clamp01(-C / A)
        else:
            B = d10 * d20 + d11 * d21 + d12 * d22
            den = A * E - B * B
            if den > 1e-14 * A * E:
                s = _clamp01((B * F - C * E) / den)
            else:
                s = 0.0
            t = (B * s + F) / E
            if t < 0.0:
                t = 0.0
                s = _clamp01(-C / A)
            elif t > 1.0:
                t = 1.0
                s = _clamp01((B - C) / A)
    x0 = a0 + d10 * s - (c0 + d20 * t)
    x1 = a1 + d11 * s - (c1 + d21 * t)
    x2 = a2 + d12 * s - (c2 + d22 * t)
    return math.sqrt(x0 * x0 + x1 * x1 + x2 * x2)


@njit(cache=True, inline="always", error_model="numpy")
def _box_sd_local(p0, p1, p2, h0, h1, h2):
    """Signed distance of a point (box frame) to the box of half sizes h."""
    q0 = abs(p0) - h0
    q1 = abs(p1) - h1
    q2 = abs(p2) - h2
    o0 = q0 if q0 > 0.0 else 0.0
    o1 = q1 if q1 > 0.0 else 0.0
    o2 = q2 if q2 > 0.0 else 0.0
    m = max(q0, max(q1, q2))
    return math.sqrt(o0 * o0 + o1 * o1 + o2 * o2) + (m if m < 0.0 else 0.0)


@njit(cache=True, inline="always", error_model="numpy")
def point_box(x0, x1, x2, P, k):
    """Signed distance of a world point to the box part of primitive row P[k]."""
    r0, r1, r2 = x0 - P[k, 7], x1 - P[k, 8], x2 - P[k, 9]
    # local = R^T (x - c); R row-major at 10..18
    l0 = P[k, 10] * r0 + P[k, 13] * r1 + P[k, 16] * r2
    l1 = P[k, 11] * r0 + P[k, 14] * r1 + P[k, 17] * r2
    l2 = P[k, 12] * r0 + P[k, 15] * r1 + P[k, 18] * r2
    return _box_sd_local(l0, l1, l2, P[k, 19], P[k, 20], P[k, 21])


@njit(cache=True, inline="always", error_model="numpy")
def _gp1(x, d, h):
    if x > h:
        return 2.0 * (x - h) * d
    if x < -h:
        return 2.0 * (x + h) * d
    return 0.0


@njit(cache=True, inline="always", error_model="numpy")
def _gprime(t, p0, p1, p2, d0, d1, d2, h0, h1, h2):
    return (_gp1(p0 + t * d0, d0, h0) + _gp1(p1 + t * d1, d1, h1) + _gp1(p2 + t * d2, d2, h2))


@njit(cache=True, inline="always", error_model="numpy")
def _out2(x, h):
    v = abs(x) - h
    return v * v if v > 0.0 else 0.0


@njit(cache=True, inline="always", error_model="numpy")
def _insert(ts, n, t):
    """Insert t into the sorted ts[0:n] (t strictly inside (0, 1)); returns n + 1."""
    j = n - 1
    while j >= 0 and ts[j] > t:
        ts[j + 1] = ts[j]
        j -= 1
    ts[j + 1] = t
    return n + 1


@njit(cache=True, error_model="numpy")
def seg_box_local(p, d, h, ts):
    """Signed distance between the segment p + t d (t in [0, 1]) and the box |x_k| <= h_k (box frame).

    ``ts`` is scratch of length >= 8. Exact outside: the squared distance is convex and piecewise
    quadratic in t with breaks where a coordinate crosses +-h_k; its derivative is continuous and
    piecewise linear, and its root is found exactly on the piece where the derivative changes sign.
    Inside, golden-section search of the convex signed distance.
    """
    p0, p1, p2 = p[0], p[1], p[2]
    d0, d1, d2 = d[0], d[1], d[2]
    h0, h1, h2 = h[0], h[1], h[2]
    gp_prev = _gprime(0.0, p0, p1, p2, d0, d1, d2, h0, h1, h2)
    if gp_prev >= 0.0:
        tbest = 0.0
    elif _gprime(1.0, p0, p1, p2, d0, d1, d2, h0, h1, h2) <= 0.0:
        tbest = 1.0
    else:
        ts[0] = 0.0
        n = 1
        if d0 != 0.0:
            t = (h0 - p0) / d0
            if 0.0 < t < 1.0:
                n = _insert(ts, n, t)
            t = (-h0 - p0) / d0
            if 0.0 < t < 1.0:
                n = _insert(ts, n, t)
        if d1 != 0.0:
            t = (h1 - p1) / d1
            if 0.0 < t < 1.0:
                n = _insert(ts, n, t)
            t = (-h1 - p1) / d1
            if 0.0 < t < 1.0:
                n = _insert(ts, n, t)
        if d2 != 0.0:
            t = (h2 - p2) / d2
            if 0.0 < t < 1.0:
                n = _insert(ts, n, t)
            t = (-h2 - p2) / d2
            if 0.0 < t < 1.0:
                n = _insert(ts, n, t)
        ts[n] = 1.0
        n += 1
        tbest = 1.0
        for i in range(1, n):
            gp = _gprime(ts[i], p0, p1, p2, d0, d1, d2, h0, h1, h2)
            if gp >= 0.0:
                t0, t1 = ts[i - 1], ts[i]
                den = gp - gp_prev
                tbest = t1 if den <= 0.0 else t0 - gp_prev * (t1 - t0) / den
                if tbest < t0:
                    tbest = t0
                elif tbest > t1:
                    tbest = t1
                break
            gp_prev = gp
    g = _out2(p0 + tbest * d0, h0) + _out2(p1 + tbest * d1, h1) + _out2(p2 + tbest * d2, h2)
    if g > 1e-20:  # more than 1e-10 m away (below that, rounding cannot tell touching from entering)
        return math.sqrt(g)
    # the segment touches or enters the box: smallest signed distance along it (convex in t)
    lo, hi = 0.0, 1.0
    x1 = hi - _GOLD * (hi - lo)
    x2 = lo + _GOLD * (hi - lo)
    f1 = _box_sd_local(p0 + x1 * d0, p1 + x1 * d1, p2 + x1 * d2, h0, h1, h2)
    f2 = _box_sd_local(p0 + x2 * d0, p1 + x2 * d1, p2 + x2 * d2, h0, h1, h2)
    for _ in range(45):  # 0.618^45 = 4e-10 of the segment length
        if f1 < f2:
            hi = x2
            x2 = x1
            f2 = f1
            x1 = hi - _GOLD * (hi - lo)
            f1 = _box_sd_local(p0 + x1 * d0, p1 + x1 * d1, p2 + x1 * d2, h0, h1, h2)
        else:
            lo = x1
            x1 = x2
            f1 = f2
            x2 = lo + _GOLD * (hi - lo)
            f2 = _box_sd_local(p0 + x2 * d0, p1 + x2 * d1, p2 + x2 * d2, h0, h1, h2)
    best = min(f1, f2)
    v = _box_sd_local(p0, p1, p2, h0, h1, h2)
    if v < best:
        best = v
    v = _box_sd_local(p0 + d0, p1 + d1, p2 + d2, h0, h1, h2)
    if v < best:
        best = v
    v = _box_sd_local(p0 + tbest * d0, p1 + tbest * d1, p2 + tbest * d2, h0, h1, h2)
    if v < best:
        best = v
    return best if best < 0.0 else 0.0


@njit(cache=True, error_model="numpy")
def seg_box(a0, a1, a2, b0, b1, b2, P, k, p, d, h, ts):
    """Signed distance between the world segment [a, b] and the box part of P[k]."""
    r0, r1, r2 = a0 - P[k, 7], a1 - P[k, 8], a2 - P[k, 9]
    e0, e1, e2 = b0 - a0, b1 - a1, b2 - a2
    for c in range(3):
        p[c] = P[k, 10 + c] * r0 + P[k, 13 + c] * r1 + P[k, 16 + c] * r2
        d[c] = P[k, 10 + c] * e0 + P[k, 13 + c] * e1 + P[k, 16 + c] * e2
        h[c] = P[k, 19 + c]
    return seg_box_local(p, d, h, ts)


@njit(cache=True, error_model="numpy")
def box_box(A, i, B, j, best, p, d, h, ts):
    """Signed distance between the box parts of A[i] and B[j]; stops early (returning a value >= best)
    once the boxes are known to be at least ``best`` apart."""
    # separating axes
    ca0, ca1, ca2 = A[i, 7], A[i, 8], A[i, 9]
    cb0, cb1, cb2 = B[j, 7], B[j, 8], B[j, 9]
    t0, t1, t2 = cb0 - ca0, cb1 - ca1, cb2 - ca2
    gap_max = -1e300
    for ax in range(15):
        if ax < 3:
            n0, n1, n2 = A[i, 10 + ax], A[i, 13 + ax], A[i, 16 + ax]
        elif ax < 6:
            n0, n1, n2 = B[j, 10 + ax - 3], B[j, 13 + ax - 3], B[j, 16 + ax - 3]
        else:
            m = ax - 6
            ia, ib = m // 3, m % 3
            u0, u1, u2 = A[i, 10 + ia], A[i, 13 + ia], A[i, 16 + ia]
            v0, v1, v2 = B[j, 10 + ib], B[j, 13 + ib], B[j, 16 + ib]
            n0 = u1 * v2 - u2 * v1
            n1 = u2 * v0 - u0 * v2
            n2 = u0 * v1 - u1 * v0
            nn = math.sqrt(n0 * n0 + n1 * n1 + n2 * n2)
            if nn < 1e-9:
                continue
            n0 /= nn
            n1 /= nn
            n2 /= nn
        ra = 0.0
        rb = 0.0
        for c in range(3):
            ra += A[i, 19 + c] * abs(A[i, 10 + c] * n0 + A[i, 13 + c] * n1 + A[i, 16 + c] * n2)
            rb += B[j, 19 + c] * abs(B[j, 10 + c] * n0 + B[j, 13 + c] * n1 + B[j, 16 + c] * n2)
        gap = abs(t0 * n0 + t1 * n1 + t2 * n2) - ra - rb
        if gap > gap_max:
            gap_max = gap
    if gap_max <= 0.0:
        return gap_max  # overlap: minus the smallest overlap over the axes (penetration depth)
    if gap_max >= best:
        return gap_max  # a lower bound already beyond the best: cannot be the nearest pair
    out = 1e300
    for side in range(2):
        X = A if side == 0 else B
        x = i if side == 0 else j
        Y = B if side == 0 else A
        y = j if side == 0 else i
        for ax in range(3):
            o1 = (ax + 1) % 3
            o2 = (ax + 2) % 3
            for s1 in (-1.0, 1.0):
                for s2 in (-1.0, 1.0):
                    m0 = X[x, 7] + s1 * X[x, 19 + o1] * X[x, 10 + o1] + s2 * X[x, 19 + o2] * X[x, 10 + o2]
                    m1 = X[x, 8] + s1 * X[x, 19 + o1] * X[x, 13 + o1] + s2 * X[x, 19 + o2] * X[x, 13 + o2]
                    m2 = X[x, 9] + s1 * X[x, 19 + o1] * X[x, 16 + o1] + s2 * X[x, 19 + o2] * X[x, 16 + o2]
                    e0 = X[x, 19 + ax] * X[x, 10 + ax]
                    e1 = X[x, 19 + ax] * X[x, 13 + ax]
                    e2 = X[x, 19 + ax] * X[x, 16 + ax]
                    v = seg_box(m0 - e0, m1 - e1, m2 - e2, m0 + e0, m1 + e1, m2 + e2, Y, y, p, d, h, ts)
                    if v < out:
                        out = v
    return out


@njit(cache=True, inline="always", error_model="numpy")
def _floor(A, i, t):
    vc = 1e300
    vb = -1e300
    if t != BOX:
        vc = min(A[i, 2], A[i, 5]) - A[i, 6]
    if t != CAPSULE:
        vb = A[i, 9] - A[i, 19] * abs(A[i, 16]) - A[i, 20] * abs(A[i, 17]) - A[i, 21] * abs(A[i, 18])
    if t == CAPSULE:
        return vc
    if t == BOX:
        return vb
    return max(vc, vb)


@njit(cache=True, error_model="numpy")
def pair_distance(A, i, ta, B, j, tb, best, p, d, h, ts):
    """Signed distance between primitive A[i] (type ta) and B[j] (type tb); a value >= ``best``
    means only "not nearer than best" (work was skipped)."""
    if tb == FLOOR:
        return _floor(A, i, ta)
    if ta == FLOOR:
        return _floor(B, j, tb)
    out = -1e300
    if ta != BOX and tb != BOX:
        v = seg_seg(A[i, 0], A[i, 1], A[i, 2], A[i, 3], A[i, 4], A[i, 5],
                    B[j, 0], B[j, 1], B[j, 2], B[j, 3], B[j, 4], B[j, 5]) - A[i, 6] - B[j, 6]
        if v > out:
            out = v
        if out >= best:
            return out
    if ta != BOX and tb != CAPSULE:
        v = seg_box(A[i, 0], A[i, 1], A[i, 2], A[i, 3], A[i, 4], A[i, 5], B, j, p, d, h, ts) - A[i, 6]
        if v > out:
            out = v
        if out >= best:
            return out
    if ta != CAPSULE and tb != BOX:
        v = seg_box(B[j, 0], B[j, 1], B[j, 2], B[j, 3], B[j, 4], B[j, 5], A, i, p, d, h, ts) - B[j, 6]
        if v > out:
            out = v
        if out >= best:
            return out
    if ta != CAPSULE and tb != CAPSULE:
        if ta == BOX and tb == BOX:
            v = box_box(A, i, B, j, best, p, d, h, ts)
        elif out < 0.0:
            v = box_box(A, i, B, j, best, p, d, h, ts)
        else:
            v = out  # an intersection with a capsule part: the capsule bounds are enough
        if v > out:
            out = v
    return out


@njit(cache=True, inline="always", error_model="numpy")
def lower_bound(A, i, ta, B, j, tb):
    """A cheap lower bound of :func:`pair_distance` (bounding spheres, box distance functions)."""
    if tb == FLOOR:
        return _floor(A, i, ta)
    if ta == FLOOR:
        return _floor(B, j, tb)
    x0 = A[i, 22] - B[j, 22]
    x1 = A[i, 23] - B[j, 23]
    x2 = A[i, 24] - B[j, 24]
    lb = math.sqrt(x0 * x0 + x1 * x1 + x2 * x2) - A[i, 25] - B[j, 25]
    if tb != CAPSULE:
        v = point_box(A[i, 22], A[i, 23], A[i, 24], B, j) - A[i, 25]
        if v > lb:
            lb = v
    if ta != CAPSULE:
        v = point_box(B[j, 22], B[j, 23], B[j, 24], A, i) - B[j, 25]
        if v > lb:
            lb = v
    return lb


@njit(cache=True, inline="always", error_model="numpy")
def _walk(q, origins, axes, kinds, end, pre, F):
    """Frames of the bodies (rows 3x4): F[0] = base (= pre), F[1 + j] = joint frame j, F[n + 1] = flange."""
    n = q.shape[0]
    for r in range(3):
        for c in range(4):
            F[0, r, c] = pre[r, c]
    for j in range(n):
        G = origins[j]
        for r in range(3):
            for c in range(4):
                s = F[j, r, 0] * G[0, c] + F[j, r, 1] * G[1, c] + F[j, r, 2] * G[2, c]
                if c == 3:
                    s += F[j, r, 3]
                F[j + 1, r, c] = s
        ax, ay, az = axes[j, 0], axes[j, 1], axes[j, 2]
        qj = q[j]
        if kinds[j] == 0:
            c = math.cos(qj)
            s = math.sin(qj)
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
                a0, a1, a2 = F[j + 1, r, 0], F[j + 1, r, 1], F[j + 1, r, 2]
                F[j + 1, r, 0] = a0 * m00 + a1 * m10 + a2 * m20
                F[j + 1, r, 1] = a0 * m01 + a1 * m11 + a2 * m21
                F[j + 1, r, 2] = a0 * m02 + a1 * m12 + a2 * m22
        else:
            for r in range(3):
                F[j + 1, r, 3] += (F[j + 1, r, 0] * ax + F[j + 1, r, 1] * ay + F[j + 1, r, 2] * az) * qj
    for r in range(3):
        for c in range(4):
            s = F[n, r, 0] * end[0, c] + F[n, r, 1] * end[1, c] + F[n, r, 2] * end[2, c]
            if c == 3:
                s += F[n, r, 3]
            F[n + 1, r, c] = s


@njit(cache=True, inline="always", error_model="numpy")
def _place(F, b, L, k, W):
    """World row W[k] of the local primitive row L[k] carried by body frame F[b]."""
    for off in (0, 3, 7, 22):
        x0, x1, x2 = L[k, off], L[k, off + 1], L[k, off + 2]
        for r in range(3):
            W[k, off + r] = F[b, r, 0] * x0 + F[b, r, 1] * x1 + F[b, r, 2] * x2 + F[b, r, 3]
    for r in range(3):
        for c in range(3):
            W[k, 10 + 3 * r + c] = (F[b, r, 0] * L[k, 10 + c] + F[b, r, 1] * L[k, 13 + c]
                                    + F[b, r, 2] * L[k, 16 + c])
    W[k, 6] = L[k, 6]
    for c in range(19, 22):
        W[k, c] = L[k, c]
    W[k, 25] = L[k, 25]


@njit(cache=True, parallel=True, nogil=True, error_model="numpy")
def clearance_batch(Q, origins, axes, kinds, end, pre, body, atype, local, otype, opar, pairs,
                    out_d, out_i, out_j):
    """Smallest signed distance over ``pairs`` for every pose.

    Q (N, n); pre (1 or N, 3, 4) base-in-world rows; body (K,) body of each arm primitive
    (0 base, 1..n links, n + 1 tool); atype (K,), local (K, PAR) arm primitives in their body
    frames; otype (M,), opar (M, PAR) obstacles in the world; pairs (P, 2): (arm primitive, j) with
    j >= 0 an obstacle and j < 0 the arm primitive -1 - j. Writes out_d (N,), out_i, out_j (N,)
    (the nearest pair's row of ``pairs``: out_i its index, out_j unused = 0).
    """
    N, n = Q.shape
    K = local.shape[0]
    Pn = pairs.shape[0]
    nb = (N + BLOCK - 1) // BLOCK
    multi = pre.shape[0] > 1
    for blk in prange(nb):
        F = np.empty((n + 2, 3, 4))
        W = np.zeros((max(K, 1), PAR))
        lb = np.empty(max(Pn, 1))
        p = np.empty(3)
        d = np.empty(3)
        h = np.empty(3)
        ts = np.empty(8)
        for i in range(blk * BLOCK, min(N, (blk + 1) * BLOCK)):
            ok = True
            for j in range(n):
                if not math.isfinite(Q[i, j]):
                    ok = False
            if not ok or Pn == 0:
                out_d[i] = np.nan if not ok else np.inf
                out_i[i] = -1
                out_j[i] = 0
                continue
            _walk(Q[i], origins, axes, kinds, end, pre[i if multi else 0], F)
            for k in range(K):
                _place(F, body[k], local, k, W)
            kmin = 0
            vmin = 1e300
            for m in range(Pn):
                a = pairs[m, 0]
                bb = pairs[m, 1]
                if bb >= 0:
                    v = lower_bound(W, a, atype[a], opar, bb, otype[bb])
                else:
                    v = lower_bound(W, a, atype[a], W, -1 - bb, atype[-1 - bb])
                lb[m] = v
                if v < vmin:
                    vmin = v
                    kmin = m
            best = 1e300
            arg = -1
            for rep in range(Pn + 1):
                m = kmin if rep == 0 else rep - 1
                if rep > 0 and (m == kmin or lb[m] >= best):
                    continue
                a = pairs[m, 0]
                bb = pairs[m, 1]
                if bb >= 0:
                    v = pair_distance(W, a, atype[a], opar, bb, otype[bb], best, p, d, h, ts)
                else:
                    v = pair_distance(W, a, atype[a], W, -1 - bb, atype[-1 - bb], best, p, d, h, ts)
                if v < best:
                    best = v
                    arg = m
            out_d[i] = best
            out_i[i] = arg
            out_j[i] = 0


@njit(cache=True, parallel=True, nogil=True, error_model="numpy")
def pairs_batch(Q, origins, axes, kinds, end, pre, body, atype, local, otype, opar, pairs, out):
    """Every pair's signed distance for every pose: out (N, P) (no skipping; for tests and tables)."""
    N, n = Q.shape
    K = local.shape[0]
    Pn = pairs.shape[0]
    nb = (N + BLOCK - 1) // BLOCK
    multi = pre.shape[0] > 1
    for blk in prange(nb):
        F = np.empty((n + 2, 3, 4))
        W = np.zeros((max(K, 1), PAR))
        p = np.empty(3)
        d = np.empty(3)
        h = np.empty(3)
        ts = np.empty(8)
        for i in range(blk * BLOCK, min(N, (blk + 1) * BLOCK)):
            _walk(Q[i], origins, axes, kinds, end, pre[i if multi else 0], F)
            for k in range(K):
                _place(F, body[k], local, k, W)
            for m in range(Pn):
                a = pairs[m, 0]
                bb = pairs[m, 1]
                if bb >= 0:
                    out[i, m] = pair_distance(W, a, atype[a], opar, bb, otype[bb], 1e300, p, d, h, ts)
                else:
                    out[i, m] = pair_distance(W, a, atype[a], W, -1 - bb, atype[-1 - bb], 1e300, p, d, h, ts)


@njit(cache=True, error_model="numpy")
def distance_rows(A, ta, B, tb):
    """Signed distance between world primitive rows A[k] and B[k] for every k (tests, one-offs)."""
    K = A.shape[0]
    out = np.empty(K)
    p = np.empty(3)
    d = np.empty(3)
    h = np.empty(3)
    ts = np.empty(8)
    for k in range(K):
        out[k] = pair_distance(A, k, ta[k], B, k, tb[k], 1e300, p, d, h, ts)
    return out
