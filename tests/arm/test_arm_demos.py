"""Demo arms: each loads, is plausible, and at the all-zero pose its Jacobian columns are what one
derives by hand from v_i = z_i x (p - o_i), w_i = z_i for revolute joints and v_i = z_i, w_i = 0
for prismatic ones (the geometric Jacobian; common practice, e.g. Siciliano et al., "Robotics:
Modelling, Planning and Control", 2009, sec. 3.1.3)."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from workbench import load_arm

ARMS = Path(__file__).resolve().parents[2] / "arms"
DEMOS = sorted(ARMS.glob("demo_*.toml")) + [ARMS / "demo_u6.urdf"]


@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.name)
def test_demo_arm_is_complete_and_plausible(path):
    arm = load_arm(path)
    m = arm.model
    assert m.has_masses and np.all(m.masses > 0), "statics need a mass on every link"
    assert np.all(np.isfinite(m.max_effort)) and np.all(m.max_effort > 0), "load maps need efforts"
    assert np.all(np.isfinite(m.max_speed)) and np.all(m.max_speed > 0)
    assert np.all(m.upper > m.lower)
    assert arm.in_limits(arm.home_q)
    # moving links of an invented industrial-size arm: a few kg to a few tens of kg each
    assert 0.1 <= np.sum(m.masses) <= 200
    # the home pose is not singular for the rows the arm can serve
    from workbench.measures import measures

    rows = {2: "vx,vy", 3: "planar", 4: "vx,vy,vz,wz"}.get(m.n, "full")
    q = arm.home_q
    if path.suffix == ".urdf":  # URDF has no home pose: zeros, a wrist singularity for this arm
        assert np.array_equal(q, np.zeros(m.n))
        q = np.array([0, -0.5, 1.0, 0, 0.6, 0])
    J = arm.jacobian(q)
    assert measures(J, rows=rows, length=arm.nominal_reach())["inverse_condition"] > 0.02


def test_planar3_zero_pose_by_hand():
    arm = load_arm(ARMS / "demo_p3.toml")
    J = arm.jacobian(np.zeros(3))
    # stretched along x: TCP at 0.5 + 0.4 + 0.25 = 1.15 m; column i is z x (p - o_i) = (0, 1.15 - x_i, 0)
    expected = np.zeros((6, 3))
    expected[1] = [1.15, 0.65, 0.25]
    expected[5] = [1, 1, 1]
    np.testing.assert_allclose(J, expected, atol=1e-12)
    # a 10 N tip force along +y needs tau = J^T F = (11.5, 6.5, 2.5) N m (lever arms by hand)
    F = np.array([0, 10.0, 0, 0, 0, 0])
    np.testing.assert_allclose(J.T @ F, [11.5, 6.5, 2.5], atol=1e-12)
    # stretched out: no velocity along x (rank 2 in the planar rows vx, vy, wz)
    assert np.linalg.matrix_rank(J[[0, 1, 5]], tol=1e-9) == 2
    # the centre of mass of link 1 (0.25 m out) moves only with joint 1
    Jc = arm.jacobian(np.zeros(3), frame="com:p1")
    np.testing.assert_allclose(Jc[1], [0.25, 0, 0], atol=1e-12)
    # the mount stands the plane upright: base y is world z
    np.testing.assert_allclose(arm.fk(np.radians([90, 0, 0]), world=True)[:3, 3], [0, 0, 0.8 + 1.15], atol=1e-12)


def test_planar2r_at_ninety_degrees_by_hand():
    arm = load_arm(ARMS / "demo_planar2r.toml")
    J = arm.jacobian(np.radians([0, 90]))
    # tip at (1, 1): column 1 = z x (1, 1, 0) = (-1, 1, 0), column 2 = z x (0, 1, 0) = (-1, 0, 0)
    np.testing.assert_allclose(J[:2], [[-1, -1], [1, 0]], atol=1e-12)
    assert np.linalg.det(J[:2]) == pytest.approx(1.0)  # l1 l2 sin(th2) with l1 = l2 = 1 (common practice)


def test_s6_zero_pose_by_hand():
    arm = load_arm(ARMS / "demo_s6.toml")
    q = np.zeros(6)
    T = arm.fk(q)
    # upper arm up (0.45 + 0.60 + 0.12 = 1.17 m), forearm along x (0.15 + 0.62 + 0.10 + 0.12 = 0.99 m)
    np.testing.assert_allclose(T[:3, 3], [0.99, 0, 1.17], atol=1e-12)
    J = arm.jacobian(q)
    expected = np.array([
        [0, 0.72, 0.12, 0, 0, 0],       # joints 2, 3 turn about +y at heights 0.45 / 1.05 m
        [0.99, 0, 0, 0, 0, 0],          # joint 1 swings the TCP at radius 0.99 m
        [0, -0.84, -0.84, 0, -0.22, 0],  # joint 5 at the wrist centre, 0.22 m behind the TCP
        [0, 0, 0, 1, 0, 1],
        [0, 1, 1, 0, 1, 0],
        [1, 0, 0, 0, 0, 0]])
    np.testing.assert_allclose(J, expected, atol=1e-12)
    # joints 4 and 6 line up at th5 = 0: the wrist singularity (rank 5)
    assert np.linalg.matrix_rank(J, tol=1e-9) == 5


def test_o6_zero_pose_by_hand():
    arm = load_arm(ARMS / "demo_o6.toml")
    q = np.zeros(6)
    # standing straight up; the flange faces +y; TCP = (0, 0.135 - 0.12 + 0.10 + 0.09 + 0.15, 0.16 + 0.45 + 0.40 + 0.10)
    np.testing.assert_allclose(arm.fk(q)[:3, 3], [0, 0.355, 1.11], atol=1e-12)
    np.testing.assert_allclose(arm.fk(q)[:3, 2], [0, 1, 0], atol=1e-12)
    J = arm.jacobian(q)
    expected = np.zeros((6, 6))
    expected[0] = [-0.355, 0.95, 0.50, 0.10, -0.24, 0]
    expected[3:] = np.array([[0, 0, 0, 0, 0, 0], [0, 1, 1, 1, 0, 1], [1, 0, 0, 0, 1, 0]])
    np.testing.assert_allclose(J, expected, atol=1e-12)
    # stretched upright: the TCP cannot move along y or z at all
    assert np.allclose(J[1:3], 0)


def test_r7_zero_pose_by_hand():
    arm = load_arm(ARMS / "demo_r7.toml")
    q = np.zeros(7)
    # upright: 0.32 + 0.42 + 0.38 to the wrist, then 0.11 flange and 0.10 tool
    np.testing.assert_allclose(arm.fk(q)[:3, 3], [0, 0, 1.33], atol=1e-12)
    J = arm.jacobian(q)
    expected = np.zeros((6, 7))
    # joint 2 (+y at 0.32 m): 1.01 m lever; joint 4 (-y, 0.06 m elbow offset at 0.74 m);
    # joint 6 (-y at the wrist, 0.21 m below the TCP)
    expected[0] = [0, 1.01, 0, -0.59, 0, -0.21, 0]
    expected[2] = [0, 0, 0, -0.06, 0, 0, 0]
    expected[4] = [0, 1, 0, -1, 0, -1, 0]
    expected[5] = [1, 0, 1, 0, 1, 0, 1]
    np.testing.assert_allclose(J, expected, atol=1e-12)


def test_scara4_zero_pose_by_hand():
    arm = load_arm(ARMS / "demo_scara4.toml")
    q = np.zeros(4)
    # 350 + 300 mm out, 420 mm up, then down 40 mm (joint 4 offset) and 60 mm (tool)
    np.testing.assert_allclose(arm.fk(q)[:3, 3], [0.65, 0, 0.32], atol=1e-12)
    J = arm.jacobian(q)
    expected = np.zeros((6, 4))
    expected[1] = [0.65, 0.30, 0, 0]
    expected[2] = [0, 0, -1, 0]        # the quill slides down
    expected[5] = [1, 1, 0, -1]        # joint 4's axis points down after the 180 deg twist
    np.testing.assert_allclose(J, expected, atol=1e-12)
    # in x, y the determinant is a1 a2 sin(th2) (common practice): 0 stretched, a1 a2 at 90 deg
    Jq = arm.jacobian(np.array([0.3, np.pi / 2, 0.1, 0.2]))
    assert np.linalg.det(Jq[:2, :2]) == pytest.approx(0.35 * 0.30, rel=1e-12)
