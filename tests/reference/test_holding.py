"""Holding torques, torque margins, the largest force along a direction and the largest payload
with an offset centre of mass (workbench.measures, issue 10)."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import linprog

from workbench import load_arm
from workbench.arm.files import parse_arm_dict
from workbench.errors import WorkbenchError
from workbench.kinematics import Arm
from workbench.measures import (Payload, force_ellipsoid, gravity_torques, holding_parts, holding_torques,
                                largest_along, largest_force, largest_payload, max_payload, torque_check)

ROOT = Path(__file__).resolve().parents[2]
G = 9.81
D = math.pi / 180


def vertical_two_link(effort=(60.0, 15.0)):
    """Invented 2R arm in the vertical x-z plane of the world: l1 = 1 m, l2 = 0.8 m, links 2 kg
    (com mid link 1) and 1 kg (com 0.4 m from the elbow); the mount rolls the base 90 deg about x,
    so the joint axes point along world -y and q = 0 lies along world +x at height 1 m."""
    data = {"arm": {"name": "vertical 2R", "geometry": "dh"},
            "joint": [{"name": "j1", "a": 1.0, "alpha": 0, "d": 0, "theta": 0, "max_effort": effort[0],
                       "mass": 2.0, "com": [-0.5, 0, 0]},
                      {"name": "j2", "a": 0.8, "alpha": 0, "d": 0, "theta": 0, "max_effort": effort[1],
                       "mass": 1.0, "com": [-0.4, 0, 0]}],
            "mount": {"xyz": [0, 0, 1.0], "rpy": [90, 0, 0]}}
    return Arm(parse_arm_dict(data))


def test_two_link_pressing_worked_by_hand():
    # Statics tau = J^T F with F the force the tool exerts on its surroundings: Craig,
    # "Introduction to Robotics: Mechanics and Control", 3rd ed. 2005, ch. 5 (from memory).
    # Worked by hand at q = 0 (arm along world +x, tip at x = 1.8): each joint axis is world -y,
    # so a vertical tip force F_z needs tau_i = lever_i * F_z with levers 1.8 m and 0.8 m.
    # Gravity alone (tests/reference/test_statics.py): (23.544, 3.924) N m.
    # Pressing down on a part with 100 N, F = (0, 0, -100): J^T F = (-180, -80) N m.
    arm = vertical_two_link()
    q = np.zeros(2)
    parts = holding_parts(arm, q, force=[0, 0, -100], frame="world")
    np.testing.assert_allclose(parts["links"], [23.544, 3.924], rtol=1e-12)
    np.testing.assert_allclose(parts["wrench"], [-180.0, -80.0], rtol=1e-12)
    np.testing.assert_allclose(parts["total"], [23.544 - 180, 3.924 - 80], rtol=1e-12)
    # the same force given in the tool frame: the last DH frame has x along link 2 (world +x)
    # and z on the joint axis (world -y), so its y axis is z cross x = world +z: tool (0, -100, 0)
    np.testing.assert_allclose(holding_torques(arm, q, force=[0, -100, 0], frame="tool"),
                               [23.544 - 180, 3.924 - 80], rtol=1e-12)
    # a moment of 5 N m about tool z (world -y) is felt 1:1 by both joints
    np.testing.assert_allclose(holding_parts(arm, q, moment=[0, 0, 5])["wrench"], [5.0, 5.0], atol=1e-12)
    # Elbow up, q = (0, 90 deg): tip at (1, 1.8) in x-z; a horizontal push F = (50, 0, 0): the
    # moment of F about each axis is r x F with r = (1, 0, 0.8) for joint 1 and (0, 0, 0.8) for
    # joint 2: y components 40 and 40, about world -y: -40 and -40. Gravity: (19.62, 0).
    np.testing.assert_allclose(holding_torques(arm, [0, 90 * D], force=[50, 0, 0], frame="world"),
                               [19.62 - 40, -40.0], atol=1e-12)
    # pressing with 10 N down at q = 0: tau = (5.544, -4.076); margins 1 - |tau|/limit
    chk = torque_check(arm, q=q, force=[0, 0, -10], frame="world")
    np.testing.assert_allclose(chk.margin, [1 - 5.544 / 60, 1 - 4.076 / 15], rtol=1e-12)
    assert chk.joint == 1 and bool(chk.ok)
    chk = torque_check(arm, q=q, force=[0, 0, -100], frame="world")
    assert not bool(chk.ok) and chk.joint == 1  # joint 2: (15 - 76.076) / 15 = -4.07 is the worst
    assert chk.worst == pytest.approx((15 - 76.076) / 15, rel=1e-12)
    # batched
    Q = np.zeros((4, 3, 2))
    assert holding_torques(arm, Q, force=[0, 0, -10], frame="world").shape == (4, 3, 2)


def test_two_link_largest_force_worked_by_hand():
    # q = 0, limits 60 and 15 N m, gravity torques (23.544, 3.924); per newton straight down
    # the joints need (-1.8, -0.8): joint 1 allows (60 + 23.544) / 1.8 = 46.41, joint 2
    # (15 + 3.924) / 0.8 = 23.655 N. Straight up: (60 - 23.544) / 1.8 = 20.25 and
    # (15 - 3.924) / 0.8 = 13.845 N -- which is max_payload (1.4113 kg) times g, as it must be.
    arm = vertical_two_link()
    f, j = largest_force(arm, np.zeros(2), [0, 0, -1])
    assert f == pytest.approx((15 + 3.924) / 0.8, rel=1e-12) and j == 1
    f, j = largest_force(arm, np.zeros(2), [0, 0, 2.0])  # not unit: normalised
    assert f == pytest.approx((15 - 3.924) / 0.8, rel=1e-12) and j == 1
    assert f == pytest.approx(max_payload(arm, np.zeros(2))[0] * G, rel=1e-12)
    # along the arm (x) at q = 0 no joint is loaded: unbounded
    f, j = largest_force(arm, np.zeros(2), [1, 0, 0])
    assert np.isinf(f) and j == -1
    # a 0.5 kg payload 0.2 m ahead of the TCP (tool x): 0.5 * 9.81 N at levers 2.0 and 1.0 m
    # a = (23.544 + 9.81, 3.924 + 4.905); upward: joint 2 (15 - 8.829) / 0.8 = 7.71375 N
    f, j = largest_force(arm, np.zeros(2), [0, 0, 1], payload=Payload(0.5, [0.2, 0, 0]))
    assert f == pytest.approx((15 - 8.829) / 0.8, rel=1e-12) and j == 1
    # too weak to hold itself (joint 2 limit 3 N m < 3.924): pushing down at least 1.155 N
    # brings joint 2 back inside, so the largest downward force is still (3 + 3.924) / 0.8 = 8.655 N;
    # upward there is none: NaN, joint 2 named
    weak = vertical_two_link(effort=(60.0, 3.0))
    f, j = largest_force(weak, np.zeros(2), [0, 0, -1])
    assert f == pytest.approx((3 + 3.924) / 0.8, rel=1e-12) and j == 1
    f, j = largest_force(weak, np.zeros(2), [0, 0, 1])
    assert np.isnan(f) and j == 1


def _linprog_largest(a, b, L):
    """max s s.t. -L <= a + s b <= L, s >= 0 with scipy.optimize.linprog (HiGHS)."""
    A = np.vstack([b, -b]).T.reshape(-1, 1)
    ub = np.column_stack([L - a, L + a]).reshape(-1)
    r = linprog([-1.0], A_ub=A, b_ub=ub, bounds=[(0, None)], method="highs")
    if r.status == 2:
        return np.nan
    if r.status == 3:
        return np.inf
    assert r.status == 0, r.message
    return float(r.x[0])


@pytest.mark.parametrize("name,scale", [("demo_s6.toml", 1.0), ("demo_r7.toml", 1.0), ("demo_s6.toml", 0.15)])
def test_largest_force_against_linprog(name, scale):
    # The box-constrained largest force is a linear programme in the force magnitude; its closed
    # form must equal scipy.optimize.linprog's optimum on random poses, directions and payloads.
    # scale < 1 weakens the joints so that some poses are over a limit already (NaN / a push needed).
    arm = load_arm(ROOT / "arms" / name)
    if scale != 1.0:
        from dataclasses import replace

        from workbench.arm.model import ArmModel
        m = arm.model
        arm = Arm(ArmModel(m.name, tuple(replace(j, max_effort=j.max_effort * scale) for j in m.joints), m.end,
                           m.tool, m.mount, m.home, m.description, m.tool_mass, m.tool_com))
    rng = np.random.default_rng(7)
    N = 60
    Q = arm.random_q(N, rng)
    d = rng.normal(size=(N, 3))
    pay = Payload(3.0, [0.05, -0.02, 0.1])
    f, j = largest_force(arm, Q, d, payload=pay)
    a = holding_torques(arm, Q, payload=pay)
    J = arm.jacobian(Q, world=True)
    L = arm.model.max_effort
    kinds = set()
    for k in range(N):
        b = J[k, :3, :].T @ (d[k] / np.linalg.norm(d[k]))
        ref = _linprog_largest(a[k], b, L)
        if np.isnan(ref):
            assert np.isnan(f[k]), (k, f[k])
            kinds.add("infeasible")
            continue
        assert f[k] == pytest.approx(ref, rel=1e-7, abs=1e-7), k
        # the limiting joint is at its limit at the optimum
        tau = a[k] + f[k] * b
        assert abs(tau[j[k]]) == pytest.approx(L[j[k]], rel=1e-9)
        assert np.all(np.abs(tau) <= L * (1 + 1e-9))
        kinds.add("feasible")
    assert "feasible" in kinds
    if scale < 1:
        assert "infeasible" in kinds


def test_largest_along_against_linprog_random_boxes():
    # random a, b and limits including exact zeros in b (joints the direction does not load)
    rng = np.random.default_rng(3)
    for _ in range(300):
        n = int(rng.integers(1, 8))
        L = rng.uniform(0.5, 2.0, n)
        a = rng.normal(scale=1.0, size=n)
        b = rng.normal(size=n) * (rng.random(n) > 0.3)
        s, j = largest_along(a, b, L)
        ref = _linprog_largest(a, b, L)
        if np.isnan(ref):
            assert np.isnan(s)
        elif np.isinf(ref):
            assert np.isinf(s) and j == -1
        else:
            assert s == pytest.approx(ref, rel=1e-7, abs=1e-9)


def test_force_ellipsoid_is_inside_the_box_answer():
    # The torque-weighted force ellipsoid is inscribed in the polytope of forces the box of
    # torque limits allows (Yoshikawa 1985, from memory), so with gravity off the true largest
    # force is at least the ellipsoid's radius along any direction, and for a 6-joint arm usually
    # more (the 1.02-1.95x seen in issue 10 on a 7-joint arm).
    arm = load_arm(ROOT / "arms" / "demo_r7.toml")
    rng = np.random.default_rng(2)
    Q = arm.random_q(200, rng)
    d = rng.normal(size=(200, 3))
    d /= np.linalg.norm(d, axis=1, keepdims=True)
    f, _ = largest_force(arm, Q, d, g=0.0, links=False)
    J = arm.jacobian(Q, world=True)
    ell = force_ellipsoid(J, rows="translation", max_effort=arm.model.max_effort)
    r = ell.radius_along(d)
    ratio = f / r
    assert np.all(ratio >= 1 - 1e-9)
    assert np.median(ratio) > 1.05


def test_payload_with_offset_against_line_search():
    # The largest payload with its centre of mass offset from the TCP, against a brute-force line
    # search over the mass in which the torques are worked by hand from the TCP Jacobian: a mass m
    # at c (tool frame) is held by the tool with f = -m g at the point r = R c, i.e. the wrench at
    # the TCP [f; r x f] (moment transfer, common practice), tau = tau_links + J_tcp^T [f; r x f].
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    rng = np.random.default_rng(4)
    Q = arm.random_q(12, rng)
    c = np.array([0.0, 0.03, 0.10])  # 10 cm ahead of the TCP along tool z, 3 cm aside
    mass, joint = largest_payload(arm, Q, com=c)
    L = arm.model.max_effort
    tau0 = gravity_torques(arm, Q)
    J = arm.jacobian(Q, world=True)
    R = arm.fk(Q, world=True)[:, :3, :3]
    g = np.array([0, 0, -G])
    step = 0.01
    for k in range(len(Q)):
        f1 = -g  # per kg
        r = R[k] @ c
        per = J[k].T @ np.concatenate([f1, np.cross(r, f1)])
        ms = np.arange(0.0, 400.0, step)
        ok = np.all(np.abs(tau0[k][None, :] + ms[:, None] * per[None, :]) <= L, axis=1)
        if not ok[0]:
            assert np.isnan(mass[k]) or mass[k] >= 0
            continue
        first_bad = np.flatnonzero(~ok)
        brute = ms[first_bad[0] - 1] if first_bad.size else np.inf
        if np.isinf(brute):
            assert mass[k] >= 400 - step
        else:
            assert brute <= mass[k] < brute + step + 1e-9, k
            over = np.abs(tau0[k] + (brute + step) * per) > L
            assert over[joint[k]]
    # the same payload through holding_torques sits exactly at the limit of the named joint
    for i in np.flatnonzero(np.isfinite(mass)):
        tau = holding_torques(arm, Q[i], payload=Payload(mass[i], c))
        assert abs(tau[joint[i]]) == pytest.approx(L[joint[i]], rel=1e-9)
        assert np.all(np.abs(tau) <= L * (1 + 1e-9))
    # with no offset it is the point-mass max_payload
    m0, j0 = largest_payload(arm, Q)
    mp, jp = max_payload(arm, Q)
    fin = np.isfinite(mp) & (mp > 0)
    np.testing.assert_allclose(m0[fin], mp[fin], rtol=1e-12)


def test_bad_inputs_say_what_is_wrong():
    arm = vertical_two_link()
    with pytest.raises(WorkbenchError, match="payload mass"):
        Payload(-1.0)
    with pytest.raises(WorkbenchError, match="payload com"):
        Payload(1.0, [0, 0])
    with pytest.raises(WorkbenchError, match="inertia"):
        Payload(1.0, [0, 0, 0], [[1, 2, 0], [0, 1, 0], [0, 0, 1]])
    with pytest.raises(WorkbenchError, match="direction"):
        largest_force(arm, np.zeros(2), [0, 0, 0])
    with pytest.raises(WorkbenchError, match="frame"):
        holding_torques(arm, np.zeros(2), force=[1, 0, 0], frame="elbow")
    with pytest.raises(WorkbenchError, match="force"):
        holding_torques(arm, np.zeros(2), force=[1, 0])
    no_lim = Arm(parse_arm_dict({"arm": {"name": "2R", "geometry": "dh"},
                                 "joint": [{"name": "j1", "a": 1.0, "alpha": 0, "d": 0, "theta": 0},
                                           {"name": "j2", "a": 0.5, "alpha": 0, "d": 0, "theta": 0}]}))
    with pytest.raises(WorkbenchError, match="max_effort"):
        largest_force(no_lim, np.zeros(2), [0, 0, 1], links=False)
    assert Payload(2.0, [0, 0, 0.1], [0.1, 0.2, 0.3]).inertia.shape == (3, 3)


def test_torques_do_not_depend_on_the_frame_of_the_sums():
    # joint torques are scalars: summing in the world frame or the base frame of a tilted mount
    # gives the same holding torques, largest force and payload (the inputs stay in the world frame)
    from dataclasses import replace

    from workbench.arm.transforms import make_transform

    arm0 = load_arm(ROOT / "arms" / "demo_s6.toml")
    arm = Arm(replace(arm0.model, mount=make_transform([0.3, -0.2, 1.1], np.radians([150, 20, -40]))))
    rng = np.random.default_rng(9)
    Q = arm.random_q(20, rng)
    pay = Payload(4.0, [0.0, 0.05, 0.1])
    kw = dict(force=[0, 0, 80.0], moment=[1.0, 0, 0], payload=pay, frame="world")
    np.testing.assert_allclose(holding_torques(arm, Q, world=False, **kw), holding_torques(arm, Q, **kw),
                               rtol=1e-10, atol=1e-9)
    f1, j1 = largest_force(arm, Q, [0, 0, 1], payload=pay)
    f2, j2 = largest_force(arm, Q, [0, 0, 1], payload=pay, world=False)
    np.testing.assert_allclose(f1, f2, rtol=1e-10)
    m1, _ = largest_payload(arm, Q, com=[0, 0, 0.1])
    m2, _ = largest_payload(arm, Q, com=[0, 0, 0.1], world=False)
    np.testing.assert_allclose(m1, m2, rtol=1e-10)
