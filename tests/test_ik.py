"""Batched inverse kinematics: reproduction by FK, unreachable and limit-blocked targets, seeds,
the two elbow solutions of a planar 2R arm, and the three orientation rules."""
import numpy as np
import pytest

from workbench.arm.files import parse_arm_dict
from workbench.arm.transforms import make_transform
from workbench.kinematics import Arm
from workbench.kinematics.ik import (CONVERGED, LIMITS, NOT_CONVERGED, OUT_OF_REACH, IKError,
                                     count_solutions, distinct_solutions, solve_ik)
from workbench.kinematics.reference import fk_numpy

L1, L2 = 0.5, 0.3


def planar_2r(limits1=(-180, 180), limits2=(-180, 180)):
    return Arm(parse_arm_dict({
        "arm": {"name": "planar 2R", "geometry": "origins"},
        "joint": [
            {"name": "a", "xyz": [0, 0, 0], "axis": [0, 0, 1], "limits": list(limits1)},
            {"name": "b", "xyz": [L1, 0, 0], "axis": [0, 0, 1], "limits": list(limits2)},
        ],
        "tool": {"xyz": [L2, 0, 0]},
    }, source_name="<2R>"))


def six_r():
    # an invented six-axis arm with a spherical wrist (standard DH), different from the demo arm
    rows = [(0.10, -90, 0.40, 0, (-165, 165)), (0.50, 0, 0, -90, (-130, 85)), (0.10, -90, 0, 0, (-115, 150)),
            (0, 90, 0.50, 0, (-185, 185)), (0, -90, 0, 0, (-120, 120)), (0, 0, 0.08, 0, (-350, 350))]
    return Arm(parse_arm_dict({
        "arm": {"name": "test 6R", "geometry": "dh"},
        "joint": [{"name": f"j{k + 1}", "a": a, "alpha": al, "d": d, "theta": th, "limits": list(lim)}
                  for k, (a, al, d, th, lim) in enumerate(rows)],
        "tool": {"xyz": [0, 0, 0.1]},
    }, source_name="<6R>"))


@pytest.fixture(scope="module")
def arm6():
    return six_r()


def _rot_angle(Ra, Rb):
    c = (np.trace(Ra @ np.swapaxes(Rb, -1, -2), axis1=-2, axis2=-1) - 1) / 2
    return np.arccos(np.clip(c, -1, 1))


def test_fixed_solutions_reproduce_targets_by_fk(arm6):
    q_true = arm6.random_q(300, rng=11)
    goals = fk_numpy(arm6.model, q_true)  # independent numpy FK makes the targets
    res = solve_ik(arm6, goals, seeds=8)
    ok = res.status == CONVERGED
    # >= 99.5 % is the bar measured by `workbench bench` on 20000 targets; on 300 we ask for 98 %
    assert ok.mean() >= 0.98
    T = fk_numpy(arm6.model, res.q[ok])
    assert np.max(np.linalg.norm(T[:, :3, 3] - goals[ok][:, :3, 3], axis=-1)) <= 1e-6
    assert np.max(_rot_angle(T[:, :3, :3], goals[ok][:, :3, :3])) <= 1e-6
    # the reported errors are the true ones
    assert np.allclose(res.pos_err[ok], np.linalg.norm(T[:, :3, 3] - goals[ok][:, :3, 3], axis=-1), atol=1e-12)
    assert np.all(arm6.in_limits(res.q))
    assert res.q.shape == (300, 6) and res.status.dtype == np.int8


def test_batch_shapes_and_arm_method(arm6):
    goals = arm6.fk(arm6.random_q(6, rng=3)).reshape(2, 3, 4, 4)
    q, status = arm6.ik(goals, seeds=8, orientation="fixed")
    assert q.shape == (2, 3, 6) and status.shape == (2, 3)
    assert np.all(status == CONVERGED)
    assert np.allclose(arm6.fk(q)[..., :3, 3], goals[..., :3, 3], atol=1e-6)
    one_q, one_status = arm6.ik(goals[0, 0])
    assert one_q.shape == (6,) and one_status.shape == () and int(one_status) == CONVERGED


def test_far_targets_are_out_of_reach_never_converged(arm6):
    rng = np.random.default_rng(5)
    d = rng.normal(size=(50, 3))
    d /= np.linalg.norm(d, axis=-1, keepdims=True)
    goals = np.tile(np.eye(4), (50, 1, 1))
    goals[:, :3, 3] = d * 5.0  # the arm reaches about 1.3 m
    for orient in ("fixed", "axis", "free"):
        res = solve_ik(arm6, goals, orientation=orient)
        assert np.all(res.status == OUT_OF_REACH), orient
        assert np.all(res.pos_err > 3.0)
        every = solve_ik(arm6, goals, orientation=orient, all_solutions=True)
        assert not np.any(every.status == CONVERGED)


def test_2r_target_out_of_its_plane_is_out_of_reach_not_converged():
    arm = planar_2r()
    goal = make_transform([0.4, 0.3, 0.05], [0, 0, 0])  # within the reach bound, but off the plane
    res = solve_ik(arm, goal, orientation="free")
    assert int(res.status) == OUT_OF_REACH
    # the least-squares minimum: the in-plane point right below the target, 0.05 m away
    assert res.pos_err == pytest.approx(0.05, abs=1e-6)
    ring = make_transform([0.1, 0.0, 0.0], [0, 0, 0])  # inside the inner hole |l1 - l2| = 0.2 m
    assert int(solve_ik(arm, ring, orientation="free").status) == OUT_OF_REACH


def test_limit_blocked_target_is_reported_and_limits_hold():
    arm = planar_2r(limits1=(-30, 30), limits2=(-150, 150))
    goal = make_transform([0.0, 0.6, 0.0], [0, 0, 0])  # needs the first joint near 90 deg
    res = solve_ik(arm, goal, orientation="free", all_solutions=True)
    assert not np.any(res.status == CONVERGED)
    single = solve_ik(arm, goal, orientation="free")
    assert int(single.status) == LIMITS
    assert np.all(arm.in_limits(res.q)) and arm.in_limits(single.q)
    # the best it can do with the first joint held at its +30 deg limit
    assert single.q[0] == pytest.approx(np.radians(30), abs=1e-9)


def test_random_solutions_respect_limits(arm6):
    goals = arm6.fk(arm6.random_q(100, rng=8))
    res = solve_ik(arm6, goals, all_solutions=True)
    lo, hi = arm6.model.lower, arm6.model.upper
    assert np.all(res.q >= lo - 1e-12) and np.all(res.q <= hi + 1e-12)


def test_user_seed_picks_the_branch_and_seeds_are_required():
    arm = planar_2r()
    x, y = 0.55, 0.25
    goal = make_transform([x, y, 0.0], [0, 0, 0])
    c2 = (x * x + y * y - L1 ** 2 - L2 ** 2) / (2 * L1 * L2)
    for sign in (1, -1):
        th2 = sign * np.arccos(c2)
        th1 = np.arctan2(y, x) - np.arctan2(L2 * np.sin(th2), L1 + L2 * np.cos(th2))
        near = np.array([th1, th2]) + 0.1
        res = solve_ik(arm, goal, seeds=0, q_seed=near, orientation="free")
        assert int(res.status) == CONVERGED
        assert np.allclose(res.q, [th1, th2], atol=1e-6)
    with pytest.raises(IKError, match="no seeds"):
        solve_ik(arm, goal, seeds=0)


def test_2r_both_analytic_elbow_solutions_found():
    # planar 2R: th2 = +-acos((x^2 + y^2 - l1^2 - l2^2) / (2 l1 l2)),
    # th1 = atan2(y, x) - atan2(l2 sin th2, l1 + l2 cos th2) (common practice; from memory)
    arm = planar_2r()
    pts = np.array([[0.55, 0.25], [-0.3, 0.5], [0.1, -0.7], [0.65, 0.0]])
    goals = np.tile(np.eye(4), (len(pts), 1, 1))
    goals[:, :2, 3] = pts
    res = solve_ik(arm, goals, seeds=8, orientation="free", all_solutions=True)
    assert res.q.shape == (4, 8, 2)
    keep = distinct_solutions(arm, res.q, res.status)
    assert np.all(count_solutions(arm, res.q, res.status) == 2)
    for i, (x, y) in enumerate(pts):
        c2 = (x * x + y * y - L1 ** 2 - L2 ** 2) / (2 * L1 * L2)
        expected = []
        for sign in (1, -1):
            th2 = sign * np.arccos(c2)
            th1 = np.arctan2(y, x) - np.arctan2(L2 * np.sin(th2), L1 + L2 * np.cos(th2))
            expected.append([th1, th2])
        found = res.q[i][keep[i]]
        for e in expected:
            d = (found - np.array(e) + np.pi) % (2 * np.pi) - np.pi
            assert np.min(np.max(np.abs(d), axis=-1)) < 1e-6


def test_2r_fixed_orientation_uses_the_joint_space_form():
    # 6 task rows, 2 joints: the (J^T J + lambda^2 I) form; the planar pose fixes th1 + th2
    arm = planar_2r()
    q = np.array([0.4, -1.1])
    res = solve_ik(arm, arm.fk(q), orientation="fixed")
    assert int(res.status) == CONVERGED
    assert np.allclose(res.q, q, atol=1e-6)


def test_axis_rule_matches_tool_axis_and_leaves_spin_free(arm6):
    q_true = arm6.random_q(60, rng=21)
    goals = arm6.fk(q_true)
    # turn every target about its own z axis: the axis rule must not care
    spun = goals @ make_transform([0, 0, 0], [0, 0, 0.7])
    res = solve_ik(arm6, spun, orientation="axis")
    ok = res.status == CONVERGED
    assert ok.mean() >= 0.95
    T = arm6.fk(res.q[ok])
    assert np.max(np.linalg.norm(T[:, :3, 3] - spun[ok][:, :3, 3], axis=-1)) <= 1e-6
    cosz = np.einsum("ij,ij->i", T[:, :3, 2], spun[ok][:, :3, 2])
    assert np.max(np.arccos(np.clip(cosz, -1, 1))) <= 1e-6
    # the full orientation generally differs from the spun target (spin was left free)
    assert np.median(_rot_angle(T[:, :3, :3], spun[ok][:, :3, :3])) > 1e-3


def test_free_rule_reaches_positions_with_any_orientation(arm6):
    q_true = arm6.random_q(60, rng=22)
    goals = arm6.fk(q_true)
    goals[:, :3, :3] = np.eye(3)  # an orientation the arm usually cannot take there: ignored
    res = solve_ik(arm6, goals, orientation="free")
    assert np.mean(res.status == CONVERGED) >= 0.98
    ok = res.status == CONVERGED
    T = arm6.fk(res.q[ok])
    assert np.max(np.linalg.norm(T[:, :3, 3] - goals[ok][:, :3, 3], axis=-1)) <= 1e-6
    assert np.all(res.rot_err == 0)


def test_distinct_solutions_wraps_full_turns():
    arm = planar_2r()
    q = np.array([[[0.3, 1.0], [0.3 + 2 * np.pi, 1.0], [0.3, -1.0], [0.3, 1.0005]]])
    status = np.array([[CONVERGED, CONVERGED, CONVERGED, NOT_CONVERGED]])
    keep = distinct_solutions(arm, q, status, tol=1e-3)
    assert keep.tolist() == [[True, False, True, False]]
    assert count_solutions(arm, q, status).tolist() == [2]


def test_bad_inputs_give_one_line_errors(arm6):
    with pytest.raises(IKError, match="orientation: expected one of fixed, axis, free"):
        solve_ik(arm6, np.eye(4), orientation="sideways")
    with pytest.raises(IKError, match=r"T_goal: expected target poses shaped \(..., 4, 4\), got shape \(3, 3\)"):
        solve_ik(arm6, np.eye(3))
    with pytest.raises(IKError, match="pos_tol"):
        solve_ik(arm6, np.eye(4), pos_tol=0)
    with pytest.raises(IKError, match="q_seed"):
        solve_ik(arm6, np.eye(4), q_seed=np.zeros(4))


def test_fixed_orientation_wrist_beyond_reach_is_out_of_reach_without_iterating(arm6):
    from workbench.kinematics.ik import _arm_arrays

    *_, reach, center, _wrap = _arm_arrays(arm6)
    # inside the TCP bound, but the tool points back at the base: its last joint frame lies
    # 0.18 m (flange + tool) further out, beyond the bound for that frame
    goal = make_transform(center + [reach[0] - 0.05, 0, 0], np.radians([0, -90, 0]))  # tool z along -x
    assert np.allclose(goal[:3, 2], [-1, 0, 0])
    res = solve_ik(arm6, goal, orientation="fixed")
    assert int(res.status) == OUT_OF_REACH and int(res.iterations) == 0
    # with the position-only rule the same point is reachable (arm stretched out along x)
    free = solve_ik(arm6, goal, orientation="free")
    assert int(free.status) == CONVERGED and free.pos_err <= 1e-6


def test_warm_up_compiles_both_kernels():
    from workbench.kinematics import ik_kernels
    from workbench.kinematics.ik import warm_up

    warm_up()
    assert ik_kernels.ik_batch.signatures and ik_kernels.near_seeds_batch.signatures
