"""Batched kinematics (FK, frames, Jacobians of any frame) and the fast measure path."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from workbench import load_arm
from workbench.arm.files import parse_arm_dict
from workbench.arm.model import ArmError
from workbench.kinematics import Arm, row_scale
from workbench.kinematics.reference import fk_numpy, frames_numpy, jacobian_numpy
from workbench.kinematics.rows import RowsError, parse_rows
from workbench.measures import measures, pose_measures

ROOT = Path(__file__).resolve().parents[1]
D = math.pi / 180


@pytest.fixture(scope="module")
def demo():
    return load_arm(ROOT / "arms" / "demo_s6.toml")


def dh_arm(rows, name="test arm", **extra):
    data = {"arm": {"name": name, "geometry": "dh"},
            "joint": [dict(name=f"j{i + 1}", **r) for i, r in enumerate(rows)]}
    data.update(extra)
    return Arm(parse_arm_dict(data, source_name=name))


def scara():
    return dh_arm([dict(a=0.4, alpha=0, d=0.5, theta=0), dict(a=0.3, alpha=180, d=0, theta=0),
                   dict(type="prismatic", a=0, alpha=0, d=0, theta=0, limits=[0, 0.3]),
                   dict(a=0, alpha=0, d=0.1, theta=0)], "SCARA-type")


def numpy_sv(J, rows, length):
    r = parse_rows(rows)
    A = J[..., list(r), :] * row_scale(tuple(r), length)[:, None]
    s = np.linalg.svd(A, compute_uv=False)
    m, n = A.shape[-2:]
    if m > n:
        s = np.concatenate([s, np.zeros(s.shape[:-1] + (m - n,))], axis=-1)
    return s


# ---- kinematics against the plain numpy references ---------------------------------------------

def test_fk_frames_and_jacobian_match_plain_numpy(demo):
    rng = np.random.default_rng(31)
    Q = demo.random_q(300, rng)
    np.testing.assert_allclose(demo.fk(Q), fk_numpy(demo.model, Q), rtol=0, atol=1e-13)
    np.testing.assert_allclose(demo.frames(Q), frames_numpy(demo.model, Q), rtol=0, atol=1e-13)
    np.testing.assert_allclose(demo.jacobian(Q), jacobian_numpy(demo.model, Q), rtol=0, atol=1e-13)


def test_any_leading_shape(demo):
    rng = np.random.default_rng(32)
    Q = demo.random_q(24, rng).reshape(2, 3, 4, 6)
    assert demo.fk(Q).shape == (2, 3, 4, 4, 4)
    assert demo.jacobian(Q).shape == (2, 3, 4, 6, 6)
    assert demo.singular_values(Q, rows="translation").shape == (2, 3, 4, 3)
    np.testing.assert_allclose(demo.jacobian(Q)[1, 2, 3], demo.jacobian(Q[1, 2, 3]), atol=1e-15)
    assert demo.fk(np.zeros(6)).shape == (4, 4)


def test_frames_of_joints_and_centres_of_mass(demo):
    rng = np.random.default_rng(33)
    Q = demo.random_q(30, rng)
    F = demo.frames(Q)
    for k in range(6):
        np.testing.assert_allclose(demo.fk(Q, frame=f"joint:{k + 1}"), F[:, k], atol=1e-14)
        np.testing.assert_allclose(demo.fk(Q, frame=demo.names[k]), F[:, k], atol=1e-14)
        com = demo.fk(Q, frame=f"com:{k + 1}")[:, :3, 3]
        expect = np.einsum("nij,j->ni", F[:, k, :3, :3], demo.coms[k]) + F[:, k, :3, 3]
        np.testing.assert_allclose(com, expect, atol=1e-14)
        J = demo.jacobian(Q, frame=f"com:{k + 1}")
        # joints after the link do not move it
        assert np.all(J[:, :, k + 1:] == 0)
        np.testing.assert_allclose(J, demo.numeric_jacobian(Q, frame=f"com:{k + 1}"), atol=1e-7)
    np.testing.assert_allclose(demo.fk(Q, frame="base"), np.broadcast_to(np.eye(4), (30, 4, 4)))
    tcp = demo.fk(Q)
    np.testing.assert_allclose(tcp, demo.fk(Q, frame="flange") @ demo.model.tool, atol=1e-14)


def test_point_fixed_to_a_frame(demo):
    rng = np.random.default_rng(34)
    Q = demo.random_q(20, rng)
    pt = np.array([0.05, -0.02, 0.3])
    T = demo.fk(Q, frame="flange", point=pt)
    np.testing.assert_allclose(T[:, :3, 3], (demo.fk(Q, frame="flange") @ np.append(pt, 1.0))[:, :3],
                               atol=1e-14)
    np.testing.assert_allclose(demo.jacobian(Q, frame="flange", point=pt),
                               demo.numeric_jacobian(Q, frame="flange", point=pt), atol=1e-7)


def test_all_zero_pose_by_hand():
    # common practice, worked by hand: planar 2R (l1 = 1, l2 = 0.5) at q = 0 lies along x with
    # the tip at (1.5, 0): joint 1 gives vy = 1.5 m/s per rad/s, joint 2 vy = 0.5, both wz = 1.
    arm = dh_arm([dict(a=1.0, alpha=0, d=0, theta=0), dict(a=0.5, alpha=0, d=0, theta=0)])
    np.testing.assert_allclose(arm.fk(np.zeros(2))[:3, 3], [1.5, 0, 0], atol=1e-15)
    J = arm.jacobian(np.zeros(2))
    np.testing.assert_allclose(J, [[0, 0], [1.5, 0.5], [0, 0], [0, 0], [0, 0], [1, 1]], atol=1e-15)


def test_bad_inputs_raise_one_line_errors(demo):
    with pytest.raises(ArmError, match=r"expected joint values shaped \(\.\.\., 6\)"):
        demo.jacobian(np.zeros(5))
    with pytest.raises(ArmError, match="unknown frame"):
        demo.jacobian(np.zeros(6), frame="elbow-ish")
    with pytest.raises(ArmError, match="out of range"):
        demo.jacobian(np.zeros(6), frame="joint:7")
    with pytest.raises(RowsError):
        measures(demo.jacobian(np.zeros(6)), rows="vq")
    with pytest.raises(RowsError):
        measures(demo.jacobian(np.zeros(6)), rows="full", length=-1.0)


# ---- the fast path vs np.linalg.svd ---------------------------------------------------------

ROWS = ["full", "translation", "rotation", "planar", "vx,vz,wy", ["wz", "vx"], (0, 1, 2, 5)]


@pytest.mark.parametrize("rows", ROWS, ids=str)
def test_fast_singular_values_match_numpy_svd(demo, rows):
    # accuracy bar of issue 2: within 1e-9 * s1 of numpy's SVD
    rng = np.random.default_rng(35)
    Q = demo.random_q(400, rng)
    L = demo.nominal_reach()
    J = demo.jacobian(Q)
    ref = numpy_sv(J, rows, L)
    tol = 1e-9 * ref[:, :1]
    assert np.all(np.abs(measures(J, rows=rows, length=L)["sv"] - ref) <= tol)
    assert np.all(np.abs(demo.singular_values(Q, rows=rows) - ref) <= tol)
    pm = pose_measures(demo, Q, rows=rows)
    np.testing.assert_allclose(pm["manipulability"], np.prod(ref, axis=1), rtol=1e-8, atol=1e-15)


@pytest.mark.parametrize("th5", [0.0, 1e-12, 1e-8, -1e-5, 1e-3])
def test_fast_singular_values_near_the_wrist_singularity(demo, th5):
    rng = np.random.default_rng(36)
    Q = demo.random_q(100, rng)
    Q[:, 4] = th5
    for rows in ("full", "rotation", "translation"):
        ref = numpy_sv(demo.jacobian(Q), rows, demo.nominal_reach())
        fast = demo.singular_values(Q, rows=rows)
        assert np.all(np.abs(fast - ref) <= 1e-9 * ref[:, :1])
        assert np.all(fast[:, :-1] >= fast[:, 1:])  # descending
    # the smallest full-row singular value follows th5 (the check can fail)
    sm = demo.singular_values(Q, rows="full")[:, -1]
    assert np.all(sm <= 2 * abs(th5) + 1e-12)


def test_fast_path_rows_exceed_joints():
    arm = scara()
    rng = np.random.default_rng(37)
    Q = arm.random_q(200, rng)
    J = arm.jacobian(Q)
    m = measures(J, rows="full", length=0.7)
    assert m["sv"].shape == (200, 6)
    assert np.all(m["sv"][:, 4:] == 0) and np.all(m["manipulability"] == 0)
    assert np.all(m["inverse_condition"] == 0) and np.all(np.isinf(m["condition"]))
    ref = numpy_sv(J, "full", 0.7)
    assert np.all(np.abs(m["sv"] - ref) <= 1e-9 * ref[:, :1])
    assert np.all(np.abs(arm.singular_values(Q, rows="full", length=0.7) - ref) <= 1e-9 * ref[:, :1])
    # the rows that match the arm: a1 a2 |s2| (see tests/reference/test_closed_forms.py)
    w = measures(J, rows="vx,vy,vz,wz")["manipulability"]
    np.testing.assert_allclose(w, 0.4 * 0.3 * np.abs(np.sin(Q[:, 1])), rtol=1e-9, atol=1e-15)


def test_fast_path_exact_singular_and_degenerate_inputs():
    # worked by hand: planar 2R (1, 0.5) stretched has tip-speed columns of length 1.5 and 0.5
    # along one line, s1 = sqrt(1.5^2 + 0.5^2) = sqrt(2.5); folded back: 0.5 and 0.5,
    # s1 = sqrt(0.5); the other singular value is 0. A zero Jacobian gives all zeros.
    arm = dh_arm([dict(a=1.0, alpha=0, d=0, theta=0), dict(a=0.5, alpha=0, d=0, theta=0)])
    sv = arm.singular_values(np.array([[0.3, 0.0], [0.3, math.pi]]), rows="vx,vy")
    assert np.all(sv[:, 1] <= 1e-15)
    np.testing.assert_allclose(sv[:, 0], [math.sqrt(2.5), math.sqrt(0.5)], rtol=1e-14)
    m = measures(np.zeros((2, 6, 3)), rows="translation")
    assert np.all(m["sv"] == 0) and np.all(m["inverse_condition"] == 0)
    assert measures(np.zeros((0, 6, 6)))["sv"].shape == (0, 6)


def test_world_rows_rotate_with_the_mount():
    rng = np.random.default_rng(38)
    data = {"arm": {"name": "mounted", "geometry": "dh"},
            "joint": [dict(name="j1", a=0.5, alpha=90, d=0.3, theta=0),
                      dict(name="j2", a=0.4, alpha=0, d=0, theta=0)],
            "mount": {"xyz": [1, 2, 3], "rpy": [180, 0, 90]}}
    arm = Arm(parse_arm_dict(data))
    q = rng.uniform(-3, 3, size=(10, 2))
    R = arm.model.mount[:3, :3]
    Jb, Jw = arm.jacobian(q), arm.jacobian(q, world=True)
    np.testing.assert_allclose(Jw[:, :3], np.einsum("ij,njk->nik", R, Jb[:, :3]), atol=1e-14)
    np.testing.assert_allclose(Jw[:, 3:], np.einsum("ij,njk->nik", R, Jb[:, 3:]), atol=1e-14)
    np.testing.assert_allclose(arm.fk(q, world=True), arm.model.mount @ arm.fk(q), atol=1e-14)
    np.testing.assert_allclose(Jw, arm.numeric_jacobian(q, world=True), atol=1e-7)
