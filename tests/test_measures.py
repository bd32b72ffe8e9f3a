"""Measures for picked poses: singular directions, ellipsoids, plain-words notes, limit penalty."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from workbench import load_arm
from workbench import measures as measures_module
from workbench.arm.files import parse_arm_dict
from workbench.errors import WorkbenchError
from workbench.kinematics import Arm
from workbench.measures import (NEAR_SINGULAR, explain_singularity, force_ellipsoid,
                                joint_limit_penalty, limit_aware_manipulability, measures,
                                pose_measures, singularity_note, svd_directions,
                                velocity_ellipsoid)

ROOT = Path(__file__).resolve().parents[1]
D = math.pi / 180


@pytest.fixture(scope="module")
def demo():
    return load_arm(ROOT / "arms" / "demo_s6.toml")


def dh_arm(rows, name="test arm", geometry="dh", **extra):
    data = {"arm": {"name": name, "geometry": geometry},
            "joint": [dict(name=f"j{i + 1}", **r) for i, r in enumerate(rows)]}
    data.update(extra)
    return Arm(parse_arm_dict(data, source_name=name))


def two_link(l1=1.0, l2=1.0):
    return dh_arm([dict(a=l1, alpha=0, d=0, theta=0), dict(a=l2, alpha=0, d=0, theta=0)], "2R")


# ---- singular directions ----------------------------------------------------------------------

def test_svd_directions_reconstruct_the_selected_rows(demo):
    rng = np.random.default_rng(1)
    Q = demo.random_q(7, rng)
    J = demo.jacobian(Q)
    L = 1.3
    U, s, V = svd_directions(J, "full", L)
    assert U.shape == (7, 6, 6) and s.shape == (7, 6) and V.shape == (7, 6, 6)
    A = J * np.array([1 / L, 1 / L, 1 / L, 1, 1, 1])[:, None]
    np.testing.assert_allclose(A @ V, U * s[:, None, :], atol=1e-12)
    np.testing.assert_allclose(s, measures(J, rows="full", length=L)["sv"], rtol=0, atol=1e-12)
    # translation rows of a 6-joint arm: 3 directions, 6 joint motions (3 of them self-motions
    # of the point, which leave it still)
    U, s, V = svd_directions(J, "translation")
    assert U.shape == (7, 3, 3) and s.shape == (7, 3) and V.shape == (7, 6, 6)
    np.testing.assert_allclose(J[:, :3] @ V[:, :, 3:], 0.0, atol=1e-12)


def test_svd_directions_pad_when_rows_exceed_joints():
    arm = two_link()
    U, s, V = svd_directions(arm.jacobian(np.array([0.3, 1.0])), "full", 1.0)
    assert U.shape == (6, 6) and s.shape == (6,) and V.shape == (2, 2)
    assert np.all(s[2:] == 0) and s[1] > 0


# ---- ellipsoids ---------------------------------------------------------------------------------

def test_velocity_ellipsoid_axes_are_s_u(demo):
    J = demo.jacobian(np.radians([10, -60, 80, 20, 40, 30]))
    e = velocity_ellipsoid(J)
    U, s, _ = svd_directions(J, "translation")
    np.testing.assert_allclose(e.radii, s)
    np.testing.assert_allclose(np.abs(np.einsum("ij,ij->j", e.directions, U)), 1.0, atol=1e-12)
    assert e.rows == ("vx", "vy", "vz") and e.kind == "velocity" and not e.weighted
    # the ellipsoid is exactly the image of the unit ball: J qd for |qd| = 1 lies on it
    rng = np.random.default_rng(2)
    qd = rng.normal(size=(500, 6))
    qd /= np.linalg.norm(qd, axis=1, keepdims=True)
    v = qd @ J[:3].T
    c = v @ e.directions
    assert np.all(np.sum((c / e.radii) ** 2, axis=1) <= 1 + 1e-9)


def test_weighted_velocity_ellipsoid_2r_worked_by_hand():
    # Worked by hand: l1 = l2 = 1 m, th1 = 0, th2 = 90 deg -> J = [[-1, -1], [1, 0]].
    # Joint speed limits (2, 1) rad/s, joint speeds inside (qd1/2)^2 + (qd2/1)^2 <= 1.
    #  along +x: vy = 2 x1 = 0 forces x1 = 0, so vx = -x2 and the largest |vx| is 1 m/s;
    #  along +y: vx = -2 x1 - x2 = 0 gives x2 = -2 x1, x1^2 + 4 x1^2 <= 1, vy = 2/sqrt(5) m/s.
    arm = two_link()
    J = arm.jacobian(np.array([0.0, 90 * D]))
    np.testing.assert_allclose(J[:2], [[-1, -1], [1, 0]], atol=1e-15)
    e = velocity_ellipsoid(J, rows="vx,vy", max_speed=[2.0, 1.0])
    assert e.weighted
    assert e.radius_along([1, 0]) == pytest.approx(1.0, rel=1e-12)
    assert e.radius_along([0, 1]) == pytest.approx(2 / math.sqrt(5), rel=1e-12)
    # unweighted: radii are the singular values of J, sqrt((3 +- sqrt 5) / 2)
    e0 = velocity_ellipsoid(J, rows="vx,vy")
    np.testing.assert_allclose(e0.radii, np.sqrt([(3 + math.sqrt(5)) / 2, (3 - math.sqrt(5)) / 2]))


def test_torque_weighted_force_ellipsoid_2r_worked_by_hand():
    # Worked by hand (same pose): tau = J^T F, so tau1 = -fx + fy and tau2 = -fx.
    # Torque limits (10, 5) N m, torques inside (tau1/10)^2 + (tau2/5)^2 <= 1:
    #   F along +x: (f/10)^2 + (f/5)^2 <= 1 -> f = 1/sqrt(0.05) = 4.4721 N
    #   F along +y: (f/10)^2 <= 1            -> f = 10 N
    arm = two_link()
    J = arm.jacobian(np.array([0.0, 90 * D]))
    e = force_ellipsoid(J, rows="vx,vy", max_effort=[10.0, 5.0])
    assert e.kind == "force" and e.weighted
    assert e.radius_along([1, 0]) == pytest.approx(1 / math.sqrt(0.05), rel=1e-12)
    assert e.radius_along([0, 1]) == pytest.approx(10.0, rel=1e-12)
    # unweighted: radii 1/s_i along the same directions as the velocity ellipsoid (duality)
    f0, v0 = force_ellipsoid(J, rows="vx,vy"), velocity_ellipsoid(J, rows="vx,vy")
    np.testing.assert_allclose(f0.radii * v0.radii, 1.0, rtol=1e-12)
    np.testing.assert_allclose(np.abs(np.einsum("ij,ij->j", f0.directions, v0.directions)), 1.0)


def test_force_ellipsoid_is_unbounded_at_a_singularity():
    # stretched 2R (th2 = 0): a force along the arm costs no torque (common practice)
    arm = two_link()
    e = force_ellipsoid(arm.jacobian(np.array([0.0, 0.0])), rows="vx,vy")
    assert np.isinf(e.radii[-1]) and np.isfinite(e.radii[0])
    assert np.isinf(e.radius_along([1, 0])) and e.radius_along([0, 1]) == pytest.approx(1 / math.sqrt(5))
    assert np.all(np.isfinite(e.axes[:, 0]))


def test_ellipsoids_are_batched(demo):
    Q = demo.random_q(12, np.random.default_rng(3)).reshape(3, 4, 6)
    e = force_ellipsoid(demo.jacobian(Q), max_effort=demo.max_effort)
    assert e.directions.shape == (3, 4, 3, 3) and e.radii.shape == (3, 4, 3)


def test_weighting_needs_limits_for_every_joint():
    arm = two_link()
    J = arm.jacobian(np.array([0.0, 1.0]))
    with pytest.raises(WorkbenchError, match="joint 2"):
        velocity_ellipsoid(J, max_speed=[1.0, np.nan])
    with pytest.raises(WorkbenchError, match="expected 2 joint limits"):
        force_ellipsoid(J, max_effort=[1.0, 2.0, 3.0])


# ---- joint-limit penalty ----------------------------------------------------------------------

def test_joint_limit_penalty_values_worked_by_hand():
    # P = 1 - exp(-k prod (q-l)(u-q)/(u-l)^2) (Tsai 1986 as reported by Vahrenkamp et al. 2012;
    # formula from memory). One joint in [-1, 1]:
    #   q = 0, k = 4:  factor 1*1/4 = 0.25, P = 1 - e^-1 = 0.63212...
    #   q = 0.5, default k = 3*4 = 12: factor 1.5*0.5/4 = 0.1875, P = 1 - e^-2.25 = 0.89460...
    lo, hi = np.array([-1.0]), np.array([1.0])
    assert joint_limit_penalty([0.0], lo, hi, k=4) == pytest.approx(1 - math.exp(-1), rel=1e-14)
    assert joint_limit_penalty([0.5], lo, hi) == pytest.approx(1 - math.exp(-2.25), rel=1e-14)
    assert joint_limit_penalty([1.0], lo, hi) == 0.0
    assert joint_limit_penalty([1.5], lo, hi) == 0.0
    # two joints multiply; an unlimited joint is left out
    lo2, hi2 = np.array([-1.0, -np.inf, 0.0]), np.array([1.0, np.inf, 2.0])
    q = np.array([[0.0, 123.0, 0.5], [0.0, -5.0, 1.0]])
    f = np.array([0.25 * (0.5 * 1.5 / 4), 0.25 * 0.25])
    np.testing.assert_allclose(joint_limit_penalty(q, lo2, hi2, k=10), 1 - np.exp(-10 * f), rtol=1e-14)
    # default k: 1 - e^-3 with every limited joint at mid-range, whatever the number of joints
    assert joint_limit_penalty([1.0, 0.0, 1.0], np.array([0.0, -1, 0]), np.array([2.0, 1, 2])) == \
        pytest.approx(1 - math.exp(-3), rel=1e-14)
    # no limited joint: no penalty
    assert joint_limit_penalty([3.0], [-np.inf], [np.inf]) == 1.0


def test_limit_aware_manipulability(demo):
    rng = np.random.default_rng(4)
    Q = demo.random_q(50, rng)
    w = pose_measures(demo, Q)["manipulability"]
    P = joint_limit_penalty(Q, demo.lower, demo.upper)
    np.testing.assert_allclose(limit_aware_manipulability(demo, Q), P * w, rtol=1e-14)
    assert np.all(P < 1) and np.all(P > 0)
    mid = (demo.lower + demo.upper) / 2
    near = mid.copy()
    near[2] = demo.upper[2] - 1e-3
    assert joint_limit_penalty(near, demo.lower, demo.upper) < 0.05 * joint_limit_penalty(mid, demo.lower, demo.upper)
    with pytest.raises(WorkbenchError):
        joint_limit_penalty(Q, demo.lower, demo.upper, k=-1)


# ---- plain-words notes ------------------------------------------------------------------------

def test_wrist_singularity_names_the_aligned_joints(demo):
    q = np.radians([10, -80, 70, 20, 0, 30])
    q[4] = 1e-7
    note = singularity_note(demo, q)
    assert note.near_singular and note.cause == "aligned_axes"
    assert note.pairs == ((3, 5),) and set(note.joints) == {3, 5}
    np.testing.assert_allclose(np.abs(note.null_motion[[3, 5]]), 1 / math.sqrt(2), atol=1e-6)
    assert "Joints 4 and 6 cancel: their axes line up" in note.text
    assert explain_singularity(demo, q) == note.text


@pytest.mark.parametrize("th5_deg, words", [
    (0.5, "Joints 4 and 6 cancel: their axes line up (angle between them 0.5 deg)"),
    (6.0, "Joints 4 and 6 nearly cancel: their axes cross at a shallow angle of 6 deg"),
])
def test_near_wrist_singularity(demo, th5_deg, words):
    q = np.radians([10, -80, 70, 20, th5_deg, 30])
    note = singularity_note(demo, q)
    assert note.near_singular and note.cause == "aligned_axes" and note.pairs == ((3, 5),)
    assert words in note.text and "can hardly" in note.text


def test_wrist_alone_loses_the_rotation_about_the_common_normal():
    # A bare spherical wrist (three revolute axes meeting at a point) at th2 = 0: axes 1 and 3
    # line up and the rotation about the normal of axes 1 and 2 is lost (common practice).
    wrist = dh_arm([dict(a=0, alpha=-90, d=0, theta=0), dict(a=0, alpha=90, d=0, theta=0),
                    dict(a=0, alpha=0, d=0.1, theta=0)], "wrist")
    q = np.array([0.4, 1e-9, -0.7])
    note = singularity_note(wrist, q, rows="rotation")
    F = wrist.frames(q)
    n12 = np.cross(F[0, :3, 2], F[1, :3, 2])
    assert abs(abs(note.lost_rotation @ n12) - 1) < 1e-9
    assert note.cause == "aligned_axes" and note.pairs == ((0, 2),)
    assert "cannot rotate about" in note.text and "Joints 1 and 3 cancel" in note.text


def _elbow_function(arm, q):
    """z2 . ((p3 - p2) x (pw - p3)): zero where joint 3's axis and the wrist centre lie in one
    plane with joint 2's axis (the elbow singularities)."""
    F = arm.frames(q)
    z2, p2, p3, pw = F[1, :3, 2], F[1, :3, 3], F[2, :3, 3], F[3, :3, 3]
    return float(z2 @ np.cross(p3 - p2, pw - p3))


def test_elbow_singularities_stretched_and_folded(demo):
    q = np.radians([10, -60, 0, 20, 40, 30])

    def f(q3):
        return _elbow_function(demo, np.r_[q[:2], q3, q[3:]])

    grid = np.linspace(-2.0, 2.7, 48)
    vals = [f(g) for g in grid]
    roots = [brentq(f, a, b, xtol=1e-15) for a, b, fa, fb in zip(grid[:-1], grid[1:], vals[:-1], vals[1:])
             if fa * fb < 0]
    assert len(roots) == 2
    causes = []
    for r in roots:
        qq = q.copy()
        qq[2] = r
        note = singularity_note(demo, qq)
        assert note.near_singular and note.pairs == ((1, 2),)
        causes.append(note.cause)
        assert "joints 2 and 3 turn about parallel axes" in note.text
        assert "wrist centre" in note.text
    # stretched: the wrist centre is beyond joint 3 as seen from joint 2; folded: back towards it
    assert causes == ["stretched", "folded"]
    # 4 degrees away from the stretched pose the note still recognises it, and says "nearly"
    qq = q.copy()
    qq[2] = roots[0] + 4 * D
    note = singularity_note(demo, qq)
    assert note.near_singular and note.cause == "stretched"
    assert "The arm is nearly stretched out (4 deg from it): joints 2 and 3" in note.text
    assert "can hardly move it" in note.text


def test_shoulder_singularity_point_on_axis(demo):
    q = np.radians([10, 0, 20, 20, 40, 30])

    def radial(q2):
        qq = q.copy()
        qq[1] = q2
        w = demo.fk(qq, frame="joint:4")[:3, 3]
        return math.hypot(w[0], w[1]) * np.sign(demo.fk(qq, frame="joint:1")[:3, 0] @ w)

    q[1] = brentq(radial, -2.0, 0.0, xtol=1e-15)
    note = singularity_note(demo, q)
    assert note.cause == "point_on_axis" and note.pairs == ((0,),)
    assert "The wrist centre lies on the axis of joint 1" in note.text


def test_planar_three_link_stretched_and_folded():
    arm = dh_arm([dict(a=0.5, alpha=0, d=0, theta=0), dict(a=0.4, alpha=0, d=0, theta=0),
                  dict(a=0.2, alpha=0, d=0, theta=0)], "planar 3R", tool={"xyz": [0.0, 0.1, 0.0]})
    cases = {(0.3, 0.0, 0.0): "stretched", (0.3, math.pi, 0.0): "folded", (0.3, 0.0, math.pi): "folded"}
    for q, cause in cases.items():
        note = singularity_note(arm, np.array(q), rows="planar")
        assert note.near_singular and note.cause == cause, (q, note.text)
        assert note.pairs == ((0, 1, 2),)
    ok = singularity_note(arm, np.array([0.3, 1.2, 0.9]), rows="planar")
    assert not ok.near_singular and ok.cause == "none"
    assert ok.text.startswith("Not near a singularity")


def test_parallel_sliding_joints():
    arm = dh_arm([dict(type="prismatic", xyz=[0, 0, 0], axis=[1, 0, 0]),
                  dict(type="prismatic", xyz=[0, 0.2, 0], axis=[1, 0, 0]),
                  dict(xyz=[0.1, 0, 0], axis=[0, 0, 1])], "sliders", geometry="origins",
                 tool={"xyz": [0.3, 0, 0]})
    note = singularity_note(arm, np.array([0.1, 0.2, 0.4]), rows="planar")
    assert note.cause == "parallel_slides" and note.pairs == ((0, 1),)
    assert "slide along parallel axes" in note.text


def test_too_few_joints_for_the_rows():
    arm = dh_arm([dict(a=0.4, alpha=0, d=0.5, theta=0), dict(a=0.3, alpha=180, d=0, theta=0),
                  dict(type="prismatic", a=0, alpha=0, d=0, theta=0, limits=[0, 0.3]),
                  dict(a=0, alpha=0, d=0.1, theta=0)], "SCARA-type")
    note = singularity_note(arm, np.array([0.3, 1.0, 0.1, 0.2]))
    assert note.cause == "too_few_joints" and note.inverse_condition == 0.0
    assert "4 joints for 6 task rows" in note.text
    ok = singularity_note(arm, np.array([0.3, 1.0, 0.1, 0.2]), rows="vx,vy,vz,wz")
    assert ok.cause == "none"


def test_joints_after_the_frame(demo):
    q = np.radians([10, -60, 80, 20, 40, 30])
    note = singularity_note(demo, q, frame="joint:4")
    assert note.cause == "joints_after_frame" and note.pairs == ((4, 5),)
    assert "Joints 5 and 6 come after the chosen frame" in note.text
    assert note.text.startswith("At a singularity (inverse condition 0): frame 'joint:4' cannot")


def test_note_threshold_and_frame(demo):
    q = np.radians([10, -60, 80, 20, 40, 30])
    inv = pose_measures(demo, q)["inverse_condition"]
    assert singularity_note(demo, q, threshold=inv * 1.01).near_singular
    assert not singularity_note(demo, q, threshold=inv * 0.99).near_singular
    assert NEAR_SINGULAR == 0.02
    assert "(world frame)" in explain_singularity(demo, q, world=True)
    with pytest.raises(WorkbenchError, match="one pose"):
        singularity_note(demo, np.zeros((2, 6)))
    with pytest.raises(WorkbenchError, match="threshold"):
        singularity_note(demo, q, threshold=2.0)


def test_module_stays_callable(demo):
    J = demo.jacobian(demo.random_q(3, 5))
    np.testing.assert_array_equal(measures_module(J, rows="translation")["sv"],
                                  measures(J, rows="translation")["sv"])
