"""Statics: kineto-statics duality, tip forces, gravity torques and the largest payload."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from workbench import load_arm
from workbench.arm.files import parse_arm_dict
from workbench.errors import WorkbenchError
from workbench.kinematics import Arm
from workbench.measures import gravity_torques, joint_torques, max_payload

ROOT = Path(__file__).resolve().parents[2]
G = 9.81
D = math.pi / 180


def test_kineto_statics_duality_random():
    # Siciliano et al., "Robotics: Modelling, Planning and Control", 2009, sec. 3.8.1
    # (kineto-statics duality, virtual work; from memory): F . (J q_dot) = (J^T F) . q_dot.
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    rng = np.random.default_rng(11)
    Q = arm.random_q(50, rng)
    qd = rng.normal(size=(50, 6))
    F = rng.normal(size=(50, 6)) * np.array([100, 100, 100, 10, 10, 10])
    J = arm.jacobian(Q)
    lhs = np.einsum("ni,ni->n", F, np.einsum("nij,nj->ni", J, qd))
    rhs = np.einsum("nj,nj->n", joint_torques(J, F), qd)
    np.testing.assert_allclose(lhs, rhs, rtol=1e-12, atol=1e-9)
    # one wrench broadcast over the batch
    tau = joint_torques(J, F[0])
    np.testing.assert_allclose(tau, np.einsum("nij,i->nj", J, F[0]), rtol=1e-14)


def two_link(l1=1.0, l2=0.5, **extra):
    data = {"arm": {"name": "2R", "geometry": "dh"},
            "joint": [{"name": "j1", "a": l1, "alpha": 0, "d": 0, "theta": 0},
                      {"name": "j2", "a": l2, "alpha": 0, "d": 0, "theta": 0}]}
    data.update(extra)
    return Arm(parse_arm_dict(data))


def test_two_link_tip_force_worked_by_hand():
    # Worked by hand: l1 = 1, l2 = 0.5, th1 = 0, th2 = 90 deg puts the elbow at (1, 0) and the
    # tip at (1, 0.5). A tip force F = (fx, fy) needs joint torques equal to the moments of F
    # about each axis (z): tau_i = (p_tip - p_i) x F.
    #   F = (10, 0):  tau1 = 1*0 - 0.5*10 = -5,  tau2 = 0*0 - 0.5*10 = -5   (N m)
    #   F = (0, -10): tau1 = 1*(-10) - 0.5*0 = -10, tau2 = 0*(-10) - 0.5*0 = 0
    arm = two_link()
    J = arm.jacobian(np.array([0.0, 90 * D]))
    np.testing.assert_allclose(joint_torques(J, [10, 0, 0, 0, 0, 0]), [-5.0, -5.0], atol=1e-12)
    np.testing.assert_allclose(joint_torques(J, [0, -10, 0, 0, 0, 0]), [-10.0, 0.0], atol=1e-12)
    # a pure moment about z of 3 N m is felt 1:1 by both joints
    np.testing.assert_allclose(joint_torques(J, [0, 0, 0, 0, 0, 3]), [3.0, 3.0], atol=1e-12)


def vertical_two_link(com2=-0.4, effort=(60.0, 15.0), tool=None, masses=True):
    """Invented 2R arm turning in the vertical x-z plane of the world: l1 = 1 m, l2 = 0.8 m,
    link masses 2 kg and 1 kg. The mount rolls the base by 90 deg about x, so base y -> world z
    and the joint axes (base z) point along world -y."""
    j1 = {"name": "j1", "a": 1.0, "alpha": 0, "d": 0, "theta": 0, "max_effort": effort[0]}
    j2 = {"name": "j2", "a": 0.8, "alpha": 0, "d": 0, "theta": 0, "max_effort": effort[1]}
    if masses:
        # com in the DH link frame (x along the link, origin at the link's far end)
        j1.update(mass=2.0, com=[-0.5, 0, 0])
        j2.update(mass=1.0, com=[com2, 0, 0])
    data = {"arm": {"name": "vertical 2R", "geometry": "dh"}, "joint": [j1, j2],
            "mount": {"xyz": [0, 0, 1.0], "rpy": [90, 0, 0]}}
    if tool is not None:
        data["tool"] = tool
    return Arm(parse_arm_dict(data))


def test_gravity_torques_worked_by_hand():
    # Worked by hand, arm horizontal along world +x (q = 0), g = (0, 0, -9.81):
    #   link 1 (2 kg at x = 0.5), link 2 (1 kg at x = 1.4), elbow at x = 1, tip at x = 1.8.
    #   Holding torque about the axis (world -y) = lever * weight:
    #   tau1 = 0.5*2*9.81 + 1.4*1*9.81 = 9.81 + 13.734 = 23.544 N m
    #   tau2 = 0.4*1*9.81 = 3.924 N m
    arm = vertical_two_link()
    np.testing.assert_allclose(gravity_torques(arm, np.zeros(2)), [23.544, 3.924], rtol=1e-12)
    # pointing the other way (q1 = 180 deg) flips the signs
    np.testing.assert_allclose(gravity_torques(arm, np.array([180 * D, 0])), [-23.544, -3.924],
                               rtol=1e-12)
    # straight up: nothing to hold
    np.testing.assert_allclose(gravity_torques(arm, np.array([90 * D, 0])), [0, 0], atol=1e-12)
    # elbow up (q2 = 90 deg): link 2 hangs over x = 1 -> tau1 = 9.81 + 1*9.81 = 19.62, tau2 = 0
    np.testing.assert_allclose(gravity_torques(arm, np.array([0, 90 * D])), [19.62, 0], atol=1e-12)
    # g given in the base frame instead (world=False): base y -> world z, so the same physical
    # gravity (world -z) is base -y: g_base = (0, -9.81, 0).
    np.testing.assert_allclose(gravity_torques(arm, np.zeros(2), g=(0, -G, 0), world=False),
                               [23.544, 3.924], rtol=1e-12)
    # batched over leading dims
    Q = np.zeros((3, 4, 2))
    assert gravity_torques(arm, Q).shape == (3, 4, 2)


def test_gravity_torques_include_the_tool():
    # Worked by hand: a 0.5 kg tool with its centre of mass at the flange (x = 1.8 at q = 0)
    # adds 0.5*9.81*1.8 = 8.829 N m at joint 1 and 0.5*9.81*0.8 = 3.924 N m at joint 2.
    arm = vertical_two_link(tool={"xyz": [0.1, 0, 0], "mass": 0.5, "com": [0, 0, 0]})
    np.testing.assert_allclose(gravity_torques(arm, np.zeros(2)), [23.544 + 8.829, 3.924 + 3.924],
                               rtol=1e-12)


def test_gravity_torques_are_the_gradient_of_potential_energy():
    # common practice: the holding torques are dV/dq with V = -sum_k m_k g . p_k (world frame);
    # checked by central differences of V on the demo arm with a tilted mount.
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    m = arm.model
    g = np.array([0.0, 0.0, -G])
    from workbench.arm.model import ArmModel
    from workbench.arm.transforms import make_transform

    tilted = Arm(ArmModel(name="tilted demo", joints=m.joints, end=m.end, tool=m.tool,
                          mount=make_transform([0.2, 0.1, 2.0], np.radians([160, 20, 30])),
                          tool_mass=m.tool_mass, tool_com=m.tool_com))

    def potential(q):
        V = 0.0
        for k in range(m.n):
            V -= m.masses[k] * g @ tilted.fk(q, frame=k, point=m.coms[k], world=True)[:3, 3]
        V -= m.tool_mass * g @ tilted.fk(q, frame="flange", point=m.tool_com, world=True)[:3, 3]
        return V

    rng = np.random.default_rng(5)
    for q in tilted.random_q(5, rng):
        h = 1e-6
        grad = np.array([(potential(q + h * e) - potential(q - h * e)) / (2 * h) for e in np.eye(6)])
        np.testing.assert_allclose(gravity_torques(tilted, q), grad, rtol=0, atol=1e-6)


def test_max_payload_worked_by_hand():
    # Worked by hand (arm as above, q = 0, limits 60 and 15 N m): per kg at the tip (x = 1.8)
    # joint 1 needs 1.8*9.81 = 17.658 N m, joint 2 0.8*9.81 = 7.848 N m.
    #   joint 1: (60 - 23.544) / 17.658 = 2.064560...
    #   joint 2: (15 - 3.924) / 7.848 = 1.411315...   -> 1.4113 kg, limited by joint 2
    arm = vertical_two_link()
    mass, limiting = max_payload(arm, np.zeros(2))
    assert mass == pytest.approx((15 - 3.924) / 7.848, rel=1e-12)
    assert limiting == 1
    # the same with the arm pointing the other way (all torques negative)
    mass, limiting = max_payload(arm, np.array([180 * D, 0]))
    assert mass == pytest.approx((15 - 3.924) / 7.848, rel=1e-12) and limiting == 1
    # elbow up: joint 2 carries nothing, joint 1 (60 - 19.62) / 9.81 = 4.116208...
    mass, limiting = max_payload(arm, np.array([0, 90 * D]))
    assert mass == pytest.approx((60 - 19.62) / 9.81, rel=1e-12) and limiting == 0
    # straight up: no joint carries any payload
    mass, limiting = max_payload(arm, np.array([90 * D, 0]))
    assert np.isinf(mass) and limiting == -1
    # a joint already over its limit without payload: 0
    weak = vertical_two_link(effort=(60.0, 3.0))
    mass, limiting = max_payload(weak, np.zeros(2))
    assert mass == 0.0 and limiting == 1
    # batched
    masses, lim = max_payload(arm, np.array([[0.0, 0.0], [0.0, 90 * D], [90 * D, 0.0]]))
    np.testing.assert_allclose(masses, [(15 - 3.924) / 7.848, (60 - 19.62) / 9.81, np.inf], rtol=1e-12)
    np.testing.assert_array_equal(lim, [1, 0, -1])


def test_max_payload_with_a_counterweight_worked_by_hand():
    # Worked by hand: link 2's centre of mass 0.4 m *behind* the elbow (world x = 0.6 at q = 0)
    # makes its holding torque negative, so the payload first brings joint 2 back through zero:
    #   tau2 = -0.4*9.81 = -3.924; payload allowed (15 + 3.924) / 7.848 = 2.411315...
    #   tau1 = 9.81 + 0.6*9.81 = 15.696; payload allowed (60 - 15.696) / 17.658 = 2.509004...
    arm = vertical_two_link(com2=-1.2)
    np.testing.assert_allclose(gravity_torques(arm, np.zeros(2)), [15.696, -3.924], rtol=1e-12)
    mass, limiting = max_payload(arm, np.zeros(2))
    assert mass == pytest.approx((15 + 3.924) / 7.848, rel=1e-12) and limiting == 1


def test_statics_refuse_missing_data():
    arm = vertical_two_link(masses=False)
    with pytest.raises(WorkbenchError, match="no link mass"):
        gravity_torques(arm, np.zeros(2))
    no_limits = two_link()
    with pytest.raises(WorkbenchError):
        max_payload(no_limits, np.zeros(2))
    with pytest.raises(WorkbenchError, match="gravity vector"):
        gravity_torques(vertical_two_link(), np.zeros(2), g=(0, 0))
    with pytest.raises(WorkbenchError, match="wrench"):
        joint_torques(np.zeros((6, 2)), [1, 2, 3])
