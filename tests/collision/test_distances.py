"""Pair distances of the clearance kernel against independent references.

References: scipy.optimize.minimize (L-BFGS-B) on the squared distance between parametrised points
of the two shapes; for two convex shapes this is a convex problem with box bounds, so the optimum
found is the global one. Hand-worked cases give the closed forms (elementary geometry, common
practice).
"""
import math

import numpy as np
import pytest
from scipy.optimize import minimize
from scipy.spatial.transform import Rotation

from workbench.collision import _row_box, _row_capsule, kernels as K
from workbench.collision import shape_rows
from workbench.arm.shapes import cylinder

RNG = np.random.default_rng(20261203)


def _cap(a, b, r):
    return _row_capsule(np.asarray(a, float), np.asarray(b, float), r)


def _box(c, R, half):
    T = np.eye(4)
    T[:3, :3] = R
    T[:3, 3] = c
    row = _row_box(T, np.asarray(half, float))
    row[22:25] = c
    row[25] = np.linalg.norm(half)
    return row


def _d(A, ta, B, tb):
    return float(K.distance_rows(A[None], np.array([ta]), B[None], np.array([tb]))[0])


def _ref_min(f, n, bounds, starts=6):
    best = math.inf
    for _ in range(starts):
        x0 = np.array([RNG.uniform(lo, hi) for lo, hi in bounds])
        r = minimize(f, x0, method="L-BFGS-B", bounds=bounds, options={"ftol": 1e-15, "gtol": 1e-13,
                                                                        "maxiter": 2000})
        best = min(best, r.fun)
    return math.sqrt(max(best, 0.0))


def _rand_rot():
    return Rotation.random(random_state=RNG.integers(1 << 30)).as_matrix()


def test_segment_segment_against_scipy():
    for _ in range(40):
        a, b, c, e = (RNG.uniform(-1, 1, 3) for _ in range(4))
        if RNG.random() < 0.2:  # near-parallel segments
            e = c + (b - a) * RNG.uniform(0.3, 1.5) + RNG.normal(0, 1e-4, 3)
        r1, r2 = RNG.uniform(0.01, 0.1, 2)
        f = lambda x: float(np.sum((a + x[0] * (b - a) - c - x[1] * (e - c)) ** 2))  # noqa: E731
        ref = _ref_min(f, 2, [(0, 1), (0, 1)]) - r1 - r2
        assert _d(_cap(a, b, r1), 0, _cap(c, e, r2), 0) == pytest.approx(ref, abs=1e-6)


def test_capsule_box_against_scipy():
    n_out = 0
    for _ in range(40):
        R = _rand_rot()
        c = RNG.uniform(-0.3, 0.3, 3)
        h = RNG.uniform(0.05, 0.5, 3)
        a = RNG.uniform(-1.2, 1.2, 3)
        b = RNG.uniform(-1.2, 1.2, 3)
        r = RNG.uniform(0.0, 0.05)

        def f(x):
            p = a + x[0] * (b - a)
            y = c + R @ (h * x[1:])
            return float(np.sum((p - y) ** 2))

        ref = _ref_min(f, 4, [(0, 1)] + [(-1, 1)] * 3)
        got = _d(_cap(a, b, r), 0, _box(c, R, h), 1)
        if ref > 1e-3:
            n_out += 1
            assert got == pytest.approx(ref - r, abs=1e-6)
        else:  # touching or entering: the value is <= -r (a point of the axis is on or in the box)
            assert got <= -r + 1e-6
    assert n_out >= 20


def test_box_box_against_scipy():
    n_out = 0
    for _ in range(30):
        RA, RB = _rand_rot(), _rand_rot()
        ca, cb = RNG.uniform(-0.6, 0.6, 3), RNG.uniform(-0.6, 0.6, 3)
        ha, hb = RNG.uniform(0.05, 0.4, 3), RNG.uniform(0.05, 0.4, 3)

        def f(x):
            return float(np.sum((ca + RA @ (ha * x[:3]) - cb - RB @ (hb * x[3:])) ** 2))

        ref = _ref_min(f, 6, [(-1, 1)] * 6, starts=8)
        got = _d(_box(ca, RA, ha), 1, _box(cb, RB, hb), 1)
        if ref > 1e-4:
            n_out += 1
            assert got == pytest.approx(ref, abs=1e-6)
        elif ref == 0.0:
            assert got <= 1e-9
    assert n_out >= 10


def test_box_box_overlap_is_negative_with_sat_depth():
    # two axis-aligned unit cubes (half 0.5) overlapping by 0.2 along x: penetration depth 0.2
    A = _box(np.zeros(3), np.eye(3), [0.5, 0.5, 0.5])
    B = _box(np.array([0.8, 0.1, 0.0]), np.eye(3), [0.5, 0.5, 0.5])
    assert _d(A, 1, B, 1) == pytest.approx(-0.2, abs=1e-12)


def test_hand_worked_cases():
    # two parallel capsules along x, 1 m apart, radii 0.1 and 0.2: 1 - 0.3
    assert _d(_cap([0, 0, 0], [1, 0, 0], 0.1), 0, _cap([0, 1, 0], [1, 1, 0], 0.2), 0) == pytest.approx(0.7, abs=1e-12)
    # crossing capsules (x axis at z = 0, y axis at z = 0.5), radii 0.1: 0.3
    assert _d(_cap([-1, 0, 0], [1, 0, 0], 0.1), 0, _cap([0, -1, 0.5], [0, 1, 0.5], 0.1), 0) == pytest.approx(0.3)
    # vertical capsule beside a cube of half 0.5: its axis at x = 2, radius 0.1 -> 2 - 0.5 - 0.1
    cube = _box(np.zeros(3), np.eye(3), [0.5, 0.5, 0.5])
    assert _d(_cap([2, 0, 0], [2, 0, 3], 0.1), 0, cube, 1) == pytest.approx(1.4, abs=1e-12)
    # sphere facing the cube's corner along the diagonal: |(1,1,1)| - |(.5,.5,.5)| - r
    s = _cap([1, 1, 1], [1, 1, 1], 0.1)
    assert _d(s, 0, cube, 1) == pytest.approx(math.sqrt(3) * 0.5 - 0.1, abs=1e-12)
    # sphere inside the cube, 0.2 from the nearest face, radius 0.1: -(0.2 + 0.1)
    assert _d(_cap([0.3, 0, 0], [0.3, 0, 0], 0.1), 0, cube, 1) == pytest.approx(-0.3, abs=1e-9)
    # capsule segment passing through the cube's centre: deepest point 0.5 inside, radius 0.05
    assert _d(_cap([-2, 0, 0], [2, 0, 0], 0.05), 0, cube, 1) == pytest.approx(-0.55, abs=1e-9)
    # rotated cube (45 deg about z), sphere on the x axis at 2: its vertex reaches x = 0.5 sqrt(2)
    Rz = Rotation.from_euler("z", 45, degrees=True).as_matrix()
    assert _d(_cap([2, 0, 0], [2, 0, 0], 0.1), 0, _box(np.zeros(3), Rz, [0.5, 0.5, 0.5]), 1) == \
        pytest.approx(2 - 0.5 * math.sqrt(2) - 0.1, abs=1e-12)
    # floor: capsule from z = 0.3 to 1.0, radius 0.1 -> 0.2; box of half 0.5 at z = 0.4 -> -0.1
    floor = np.zeros(K.PAR)
    assert _d(_cap([0, 0, 0.3], [0, 0, 1], 0.1), 0, floor, 3) == pytest.approx(0.2)
    assert _d(_box(np.array([0, 0, 0.4]), np.eye(3), [0.5, 0.5, 0.5]), 1, floor, 3) == pytest.approx(-0.1)


def _pillar(c=(0, 0, 1), r=0.2, length=2.0):
    T = np.eye(4)
    T[:3, 3] = c
    return shape_rows(cylinder(T, r, length))


def test_cylinder_hand_worked():
    t, P = _pillar()
    # a sphere beside the pillar's side: 1.0 - 0.2 - 0.1 (exact: the capsule part)
    assert _d(_cap([1, 0, 1], [1, 0, 1], 0.1), 0, P, t) == pytest.approx(0.7, abs=1e-12)
    # a sphere above the top face, within the radius: 2.5 - 2.0 - 0.1 (exact: the box part)
    assert _d(_cap([0.1, 0, 2.5], [0.1, 0, 2.5], 0.1), 0, P, t) == pytest.approx(0.4, abs=1e-12)
    # pillar on the floor: touching (0)
    assert _d(P, t, np.zeros(K.PAR), 3) == pytest.approx(0.0, abs=1e-12)


def test_cylinder_is_a_lower_bound_never_above_the_true_distance():
    t, P = _pillar((0, 0, 0), 0.3, 1.0)
    ratios = []
    for _ in range(400):
        x = RNG.uniform(-1.5, 1.5, 3)
        rho, z = math.hypot(x[0], x[1]), abs(x[2])
        true = math.hypot(max(rho - 0.3, 0.0), max(z - 0.5, 0.0))  # point to solid cylinder
        if true <= 1e-6:
            continue
        got = _d(_cap(x, x, 0.0), 0, P, t)
        assert got <= true + 1e-9
        if z <= 0.5 or rho <= 0.3:  # beside the side or over an end face: exact
            assert got == pytest.approx(true, abs=1e-9)
        ratios.append(got / true)
    # too cautious only beyond the rims, and there by at most a factor 1/sqrt(2)
    assert min(ratios) >= 1 / math.sqrt(2) - 1e-6
