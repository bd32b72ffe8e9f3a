"""Published closed forms of Jacobian determinants, manipulability and isotropy.

Arms are built in code (invented dimensions). Standard DH rows throughout.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from workbench.arm.files import parse_arm_dict
from workbench.kinematics import Arm
from workbench.measures import measures

D = math.pi / 180


def dh_arm(rows, name="closed form arm", **extra):
    data = {"arm": {"name": name, "geometry": "dh"},
            "joint": [dict(name=f"j{i + 1}", **r) for i, r in enumerate(rows)]}
    data.update(extra)
    return Arm(parse_arm_dict(data, source_name=name))


def planar_2r(l1, l2):
    return dh_arm([dict(a=l1, alpha=0, d=0, theta=0), dict(a=l2, alpha=0, d=0, theta=0)], "planar 2R")


# ---- planar 2R --------------------------------------------------------------------------------

def test_planar_2r_determinant():
    # Yoshikawa, "Manipulability of robotic mechanisms", IJRR 4(2), 1985, the two-link example
    # (from memory): det J = l1 l2 sin(th2) for the tip velocity (vx, vy).
    l1, l2 = 0.9, 0.55
    arm = planar_2r(l1, l2)
    rng = np.random.default_rng(1)
    Q = rng.uniform(-math.pi, math.pi, size=(200, 2))
    J = arm.jacobian(Q)[:, :2, :]
    np.testing.assert_allclose(np.linalg.det(J), l1 * l2 * np.sin(Q[:, 1]), rtol=0, atol=1e-14)


def test_planar_2r_yoshikawa_maximum_at_plus_minus_90_degrees():
    # Yoshikawa 1985 (as above, from memory): w = l1 l2 |sin th2| is largest at th2 = +-90 deg
    # whatever th1 and the link lengths.
    l1, l2 = 0.9, 0.55
    arm = planar_2r(l1, l2)
    th2 = np.radians(np.arange(-180.0, 180.0, 0.25))
    for th1 in (-1.0, 0.0, 2.2):
        Q = np.stack([np.full_like(th2, th1), th2], axis=-1)
        w = measures(arm.jacobian(Q), rows="vx,vy")["manipulability"]
        best = np.degrees(th2[np.argsort(w)[-2:]])
        assert sorted(np.round(best, 6)) == [-90.0, 90.0]
        assert w.max() == pytest.approx(l1 * l2, rel=1e-14)
        np.testing.assert_allclose(w, l1 * l2 * np.abs(np.sin(th2)), rtol=0, atol=1e-14)


@pytest.mark.parametrize("th2_deg", [135.0, -135.0])
def test_isotropic_2r(th2_deg):
    # Salisbury & Craig, "Articulated hands: force control and kinematic issues", IJRR 1(1), 1982
    # (from memory): with l2 = l1 / sqrt(2) the two-link finger is isotropic (condition number 1)
    # at th2 = +-135 deg.
    l1 = 0.8
    arm = planar_2r(l1, l1 / math.sqrt(2))
    for th1 in (-2.0, 0.0, 0.7):
        m = measures(arm.jacobian(np.array([th1, th2_deg * D])), rows="vx,vy")
        assert m["condition"] == pytest.approx(1.0, abs=1e-12)
        assert m["inverse_condition"] == pytest.approx(1.0, abs=1e-12)
    # and not elsewhere: 10 degrees off the condition number is clearly above 1
    m = measures(arm.jacobian(np.array([0.0, (th2_deg - 10) * D])), rows="vx,vy")
    assert m["condition"] > 1.1


# ---- anthropomorphic arm ----------------------------------------------------------------------

def test_anthropomorphic_arm_position_determinant():
    # Siciliano, Sciavicco, Villani & Oriolo, "Robotics: Modelling, Planning and Control", 2009,
    # sec. 3.3 (kinematic singularities, anthropomorphic arm; from memory):
    # det(Jp) = -a2 a3 s3 (a2 c2 + a3 c23) with DH rows (0, 90 deg, 0), (a2, 0, 0), (a3, 0, 0).
    a2, a3 = 0.7, 0.5
    arm = dh_arm([dict(a=0, alpha=90, d=0, theta=0), dict(a=a2, alpha=0, d=0, theta=0),
                  dict(a=a3, alpha=0, d=0, theta=0)], "anthropomorphic")
    rng = np.random.default_rng(2)
    Q = rng.uniform(-math.pi, math.pi, size=(200, 3))
    det = np.linalg.det(arm.jacobian(Q)[:, :3, :])
    c2, s3, c23 = np.cos(Q[:, 1]), np.sin(Q[:, 2]), np.cos(Q[:, 1] + Q[:, 2])
    np.testing.assert_allclose(det, -a2 * a3 * s3 * (a2 * c2 + a3 * c23), rtol=0, atol=1e-14)
    # the elbow (s3 = 0) and shoulder (wrist point on axis 1) singularities of that section
    for q in ([0.3, 0.4, 0.0], [0.3, 0.4, math.pi]):
        assert measures(arm.jacobian(np.array(q)), rows="translation")["min_sv"] < 1e-15
    th3 = 1.1
    th2 = math.atan2(-(a2 + a3 * math.cos(th3)), -a3 * math.sin(th3))  # a2 c2 + a3 c23 = 0
    q = np.array([0.3, th2, th3])
    assert abs(arm.fk(q)[0, 3]) < 1e-15 and abs(arm.fk(q)[1, 3]) < 1e-15
    assert measures(arm.jacobian(q), rows="translation")["min_sv"] < 1e-15


# ---- spherical wrist --------------------------------------------------------------------------

A2, D4, D6 = 0.6, 0.55, 0.12


def anthropomorphic_with_wrist():
    # anthropomorphic arm with spherical wrist, DH rows as in Siciliano et al. 2009, sec. 2.9.7
    # (from memory): (0, 90, 0), (a2, 0, 0), (0, 90, 0), (0, -90, d4), (0, 90, 0), (0, 0, d6).
    return dh_arm([dict(a=0, alpha=90, d=0, theta=0), dict(a=A2, alpha=0, d=0, theta=0),
                   dict(a=0, alpha=90, d=0, theta=0), dict(a=0, alpha=-90, d=D4, theta=0),
                   dict(a=0, alpha=90, d=0, theta=0), dict(a=0, alpha=0, d=D6, theta=0)],
                  "anthropomorphic with spherical wrist")


def test_spherical_wrist_block_triangular_and_determinant():
    # Siciliano et al. 2009, sec. 3.3.1 (singularity decoupling; from memory): with the wrist
    # centre as reference point J = [[J11, 0], [J21, J22]], so det J = det J11 det J22 and the
    # wrist singularity is det J22 = 0, i.e. s5 = 0.
    arm = anthropomorphic_with_wrist()
    rng = np.random.default_rng(3)
    Q = rng.uniform(-math.pi, math.pi, size=(100, 6))
    # the wrist centre is fixed to the last link at -d6 along its z axis
    J = arm.jacobian(Q, frame=5, point=(0.0, 0.0, -D6))
    np.testing.assert_allclose(J[:, :3, 3:], 0.0, atol=1e-15)
    det = np.linalg.det(J)
    det11 = np.linalg.det(J[:, :3, :3])
    det22 = np.linalg.det(J[:, 3:, 3:])
    np.testing.assert_allclose(det, det11 * det22, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(np.abs(det22), np.abs(np.sin(Q[:, 4])), rtol=0, atol=1e-14)
    # the TCP Jacobian has the same determinant (moving the reference point is a unimodular
    # change of the twist coordinates; common practice)
    np.testing.assert_allclose(np.linalg.det(arm.jacobian(Q)), det, rtol=1e-10, atol=1e-15)


@pytest.mark.parametrize("th5", [0.0, 1e-8, -1e-6])
def test_spherical_wrist_singularity_at_th5_zero(th5):
    # Siciliano et al. 2009, sec. 3.3.1 (from memory): wrist singularity at th5 = 0 (axes 4
    # and 6 aligned). The smallest singular value of the full Jacobian is O(|th5|).
    arm = anthropomorphic_with_wrist()
    q = np.array([0.2, -0.7, 1.3, 0.4, th5, -0.9])
    sv = measures(arm.jacobian(q), rows="full", length=1.0)["sv"]
    assert sv[-1] <= 2 * abs(th5) + 1e-13
    assert sv[-2] > 0.05
    far = measures(arm.jacobian(q + np.array([0, 0, 0, 0, 0.5, 0])), rows="full", length=1.0)["sv"]
    assert far[-1] > 0.05


# ---- SCARA ------------------------------------------------------------------------------------

def test_scara_determinant():
    # Siciliano et al. 2009, sec. 3.3 (SCARA manipulator; from memory): the Jacobian of the rows
    # (vx, vy, vz, wz) has det = a1 a2 s2 (with alpha2 = 180 deg so that the prismatic joint
    # moves down and joint 4 turns about -z; the sign follows from that choice).
    a1, a2 = 0.4, 0.3
    arm = dh_arm([dict(a=a1, alpha=0, d=0.5, theta=0), dict(a=a2, alpha=180, d=0, theta=0),
                  dict(type="prismatic", a=0, alpha=0, d=0, theta=0, limits=[0, 0.3]),
                  dict(a=0, alpha=0, d=0.1, theta=0)], "SCARA-type")
    rng = np.random.default_rng(4)
    Q = rng.uniform(-math.pi, math.pi, size=(200, 4))
    Q[:, 2] = rng.uniform(0, 0.3, size=200)
    det = np.linalg.det(arm.jacobian(Q)[:, [0, 1, 2, 5], :])
    np.testing.assert_allclose(det, a1 * a2 * np.sin(Q[:, 1]), rtol=0, atol=1e-14)
    w = measures(arm.jacobian(Q), rows="vx,vy,vz,wz")["manipulability"]
    np.testing.assert_allclose(w, a1 * a2 * np.abs(np.sin(Q[:, 1])), rtol=1e-9, atol=1e-14)
