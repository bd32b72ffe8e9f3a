"""Reach slice: grid points, reach of a planar 2R arm worked by hand, measures at the best solution,
the reachability index, chunk independence, bad settings and the demo study file."""
import math
from pathlib import Path

import numpy as np
import pytest

from workbench.arm.files import parse_arm_dict
from workbench.arm.transforms import make_transform
from workbench.kinematics import Arm
from workbench.kinematics.ik import solve_ik
from workbench.studies import StudyError, StudySpec, get_kind, load_context, read_study_file
from workbench.studies.base import Chunk
from workbench.studies.reach_slice import (LIMITS, NEAR_SINGULAR, NOT_CONVERGED, OUT_OF_REACH, REACHED,
                                           ReachSlice, sphere_orientations)

ROOT = Path(__file__).resolve().parents[2]
L1, L2 = 0.5, 0.3


def planar_2r():
    return Arm(parse_arm_dict({
        "arm": {"name": "planar 2R", "geometry": "origins"},
        "joint": [{"name": "a", "xyz": [0, 0, 0], "axis": [0, 0, 1], "limits": [-180, 180]},
                  {"name": "b", "xyz": [L1, 0, 0], "axis": [0, 0, 1], "limits": [-180, 180]}],
        "tool": {"xyz": [L2, 0, 0]},
    }, source_name="<2R>"))


def six_r():
    rows = [(0.10, -90, 0.40, 0, (-165, 165)), (0.50, 0, 0, -90, (-130, 85)), (0.10, -90, 0, 0, (-115, 150)),
            (0, 90, 0.50, 0, (-185, 185)), (0, -90, 0, 0, (-120, 120)), (0, 0, 0.08, 0, (-350, 350))]
    return Arm(parse_arm_dict({
        "arm": {"name": "test 6R", "geometry": "dh"},
        "joint": [{"name": f"j{k + 1}", "a": a, "alpha": al, "d": d, "theta": th, "limits": list(lim)}
                  for k, (a, al, d, th, lim) in enumerate(rows)],
        "tool": {"xyz": [0, 0, 0.1]},
    }, source_name="<6R>"))


def run_all(plan, arm, chunk_cells=None):
    kind = get_kind("reach_slice")
    if chunk_cells:
        plan = plan.with_chunk_cells(chunk_cells)
    parts = [kind.compute_chunk(plan, arm, None, c) for c in plan.chunks]
    return {k: np.concatenate([p[k] for p in parts]) for k in parts[0]}


def spec(**settings):
    return StudySpec(kind="reach_slice", arm="<in code>", settings=settings)


def test_kind_is_registered_and_plane_points_are_laid_out():
    kind = get_kind("reach_slice")
    assert isinstance(kind, ReachSlice)
    arm = planar_2r()
    plan = kind.plan(spec(plane="xz", at=0.25, u=[0.0, 0.4], v=[-0.1, 0.1], steps=[5, 3], orientation="free"),
                     arm, None)
    assert plan.shape == (3, 5)
    assert [a.name for a in plan.axes] == ["z", "x"]
    P = kind.points(plan, 0, plan.cells)
    assert np.allclose(P[1], [0.1, 0.25, -0.1]) and np.allclose(P[5], [0.0, 0.25, 0.0])
    # a general plane frame: origin + rpy; the plane is the frame's local xy
    plan2 = kind.plan(spec(plane="frame", origin=[1, 2, 3], plane_rpy=[90, 0, 0], u=[0, 1], v=[0, 1],
                           steps=[2, 2], orientation="free"), arm, None)
    P2 = kind.points(plan2, 0, 4)
    # roll 90 deg about x: local y -> cell z
    assert np.allclose(P2, [[1, 2, 3], [2, 2, 3], [1, 2, 4], [2, 2, 4]])
    box = kind.plan(spec(grid="box", x=[0, 1], y=[0, 0.5], z=[0, 0.2], step=0.5, orientation="free"), arm, None)
    assert box.shape == (1, 2, 3)
    assert np.allclose(kind.points(box, 0, box.cells)[-1], [1.0, 0.5, 0.0])


def test_planar_2r_reach_matches_the_annulus_and_hand_worked_measures():
    # the 2R arm reaches exactly the annulus |l1 - l2| <= r <= l1 + l2 of its plane, with two
    # (elbow up / down) solutions inside; translational manipulability |det J| = l1 l2 |sin th2|
    # (Yoshikawa, "Manipulability of robotic mechanisms", IJRR 1985, two-link example)
    arm = planar_2r()
    plan = get_kind("reach_slice").plan(spec(plane="xy", at=0.0, u=[-0.9, 0.9], v=[-0.9, 0.9], steps=[19, 19],
                                             orientation="free", rows="vx,vy"), arm, None)
    out = run_all(plan, arm)
    P = out["target"]
    r = np.linalg.norm(P[:, :2], axis=-1)
    inside = (r > 0.2 + 1e-3) & (r < 0.8 - 1e-3)
    outside = (r < 0.2 - 1e-3) | (r > 0.8 + 1e-3)
    reached = (out["status"] & REACHED) != 0
    assert np.all(reached[inside]) and not np.any(reached[outside])
    assert np.all((out["status"][outside] & OUT_OF_REACH) != 0)
    assert np.all(out["solutions"][inside] == 2)
    c2 = (r[inside] ** 2 - L1 ** 2 - L2 ** 2) / (2 * L1 * L2)
    w = L1 * L2 * np.sqrt(1 - c2 ** 2)
    # solutions are good to the IK tolerance (1e-6 m), so th2 and w to a few 1e-6
    assert np.allclose(out["manipulability"][inside], w, rtol=2e-5, atol=1e-9)
    assert np.all(np.isnan(out["manipulability"][outside])) and np.all(np.isnan(out["q"][outside]))
    # the stored solution is a solution: FK lands on the target
    q = out["q"][inside]
    assert np.allclose(arm.fk(q)[:, :3, 3], P[inside], atol=1e-6)


def test_fixed_orientation_with_mount_reproduces_targets_in_the_cell_frame():
    arm = six_r()
    kind = get_kind("reach_slice")
    plan = kind.plan(spec(plane="xz", at=0.1, u=[0.3, 0.9], v=[0.6, 1.2], steps=[6, 5], orientation="fixed",
                          rpy=[180, 0, 30], mount_xyz=[0.2, -0.1, 0.5], mount_rpy=[0, 0, 45]), arm, None)
    out = run_all(plan, arm)
    reached = (out["status"] & REACHED) != 0
    assert reached.mean() > 0.5
    M = make_transform([0.2, -0.1, 0.5], np.radians([0, 0, 45]))
    T = M @ arm.fk(out["q"][reached])
    assert np.max(np.linalg.norm(T[:, :3, 3] - out["target"][reached], axis=-1)) <= 1e-6
    R = make_transform([0, 0, 0], np.radians([180, 0, 30]))[:3, :3]
    ang = np.arccos(np.clip((np.einsum("nij,ij->n", T[:, :3, :3], R) - 1) / 2, -1, 1))
    assert np.max(ang) <= 1e-6
    assert np.all(arm.in_limits(out["q"][reached]))
    # the best solution is the one with the highest inverse condition among the distinct ones
    assert np.all(out["solutions"][reached] >= 1)
    assert np.all((out["inverse_condition"][reached] > 0) & (out["inverse_condition"][reached] <= 1))
    assert np.allclose(out["condition"][reached], 1 / out["inverse_condition"][reached])
    ns = (out["status"] & NEAR_SINGULAR) != 0
    assert np.array_equal(ns, reached & (out["inverse_condition"] < 0.02))  # the default, measures.NEAR_SINGULAR
    # limit-aware manipulability of the best solution: workbench.measures at that pose (arm mounted)
    from dataclasses import replace

    from workbench.measures import limit_aware_manipulability
    marm = Arm(replace(arm.model, mount=M))
    ref = limit_aware_manipulability(marm, out["q"][reached], world=True)
    np.testing.assert_allclose(out["limit_aware_manipulability"][reached], ref, rtol=1e-10, atol=1e-15)
    assert np.all(np.isnan(out["limit_aware_manipulability"][~reached]))
    # status bits of unreached points name one reason
    reasons = out["status"][~reached] & (OUT_OF_REACH | LIMITS | NOT_CONVERGED)
    assert np.all(np.isin(reasons, [OUT_OF_REACH, LIMITS, NOT_CONVERGED]))


def test_results_do_not_depend_on_chunking():
    arm = six_r()
    plan = get_kind("reach_slice").plan(spec(plane="xz", at=0.0, u=[-0.8, 0.8], v=[0.2, 1.0], steps=[7, 5],
                                             orientation="axis", axis=[0, 0, -1]), arm, None)
    a = run_all(plan, arm, chunk_cells=35)
    b = run_all(plan, arm, chunk_cells=4)
    for k in a:
        assert np.array_equal(a[k], b[k], equal_nan=True), k


def test_sphere_orientations_spread_and_are_rotations():
    R = sphere_orientations(26, 4)
    assert R.shape == (104, 3, 3)
    assert np.allclose(R @ np.swapaxes(R, -1, -2), np.eye(3), atol=1e-12)
    assert np.allclose(np.linalg.det(R), 1.0)
    z = R[::4, :, 2]
    assert np.allclose(np.linalg.norm(z.mean(axis=0)), 0.0, atol=0.05)  # spread over the sphere
    # the four spins about one direction share the tool axis and differ by 90 deg about it
    assert np.allclose(R[0:4, :, 2], R[0, :, 2])
    assert np.isclose(R[0, :, 0] @ R[1, :, 0], 0.0, atol=1e-12)


def test_reachability_index_is_the_fraction_of_sampled_orientations_reached():
    arm = six_r()
    kind = get_kind("reach_slice")
    plan = kind.plan(spec(plane="xz", at=0.0, u=[0.5, 2.5], v=[0.6, 0.6], steps=[2, 1], orientation="sampled",
                          directions=8, spins=2), arm, None)
    out = run_all(plan, arm)
    idx = out["reachability"]
    assert np.all((idx >= 0) & (idx <= 1))
    assert idx[-1] == 0.0 and (out["status"][-1] & OUT_OF_REACH)  # 2.5 m away: beyond the reach
    # independent count for the first point (0.5 m out, well inside) with the same orientations
    R = sphere_orientations(8, 2)
    T = np.tile(np.eye(4), (len(R), 1, 1))
    T[:, :3, :3] = R
    T[:, :3, 3] = out["target"][0]
    res = solve_ik(arm, T, seeds=8, orientation="fixed")
    assert idx[0] == pytest.approx(np.mean(res.status == 0))
    assert 0 < idx[0] < 1


@pytest.mark.parametrize("settings, message", [
    ({"colour": "red"}, "unknown key 'colour'"),
    ({"plane": "diagonal"}, "plane: expected one of xy, xz, yz, frame, got 'diagonal'"),
    ({"steps": [0, 10]}, "steps: expected 2 integers from 1 to 100000"),
    ({"u": [1.0, 0.0]}, "u: empty range: 1 > 0"),
    ({"step": 0}, "step: expected a positive number, got 0"),
    ({"step": 1e-6, "u": [0, 10], "v": [0, 10]}, "step: 10000001 points along one axis"),
    ({"orientation": "sideways"}, "orientation: expected fixed, axis, free or sampled"),
    ({"best": "beauty"}, "best: expected one of"),
    ({"axis": [0, 0, 0], "orientation": "axis"}, "axis: expected a non-zero direction"),
])
def test_bad_settings_one_line(settings, message):
    arm = planar_2r()
    with pytest.raises(StudyError) as exc:
        get_kind("reach_slice").plan(StudySpec(kind="reach_slice", arm="x", settings=settings, source="s.toml"),
                                     arm, None)
    text = str(exc.value)
    assert message in text and "\n" not in text and text.startswith("s.toml: [settings]")


def test_demo_study_file_plans_and_computes_a_chunk():
    sp = read_study_file(ROOT / "arms" / "cells" / "reach_slice_s6.toml")
    arm, cell, _arm_text, _cell_text = load_context(sp)
    kind = get_kind(sp.kind)
    plan = kind.plan(sp, arm, cell)
    assert plan.shape == (121, 141)
    # the row of points at z = 0.6 m (row 60), x from 0.6 to 0.8 m (columns 100..110)
    start = 60 * 141 + 100
    out = kind.compute_chunk(plan, arm, cell, Chunk(0, start, start + 11))
    assert np.all((out["status"] & REACHED) != 0)
    T = arm.fk(out["q"])
    assert np.allclose(T[:, :3, 3], out["target"], atol=1e-6)
    assert np.allclose(T[:, :3, 2], [0, 0, -1], atol=1e-6)  # tool pointing down


def test_neighbour_seeds_fill_a_seeding_hole_without_losing_points():
    # a spot of the demo arm's tool-down slice (just behind the first axis, x = -0.02 m, z 0.74-0.78 m)
    # where the 8 generated seeds miss points that their grid neighbours' solutions reach (found by
    # running the whole 141 x 121 slice with and without the retry)
    sp = read_study_file(ROOT / "arms" / "cells" / "reach_slice_s6.toml")
    arm, cell, _a, _c = load_context(sp)
    kind = get_kind("reach_slice")
    reached = {}
    for flag in (False, True):
        plan = kind.plan(sp.with_settings(u=[-0.06, 0.02], v=[0.70, 0.82], steps=[5, 7], neighbour_seeds=flag),
                         arm, cell)
        out = run_all(plan, arm)
        reached[flag] = (out["status"] & REACHED) != 0
        T = arm.fk(out["q"][reached[flag]])
        if flag:  # the retry reads neighbours in other chunks: still independent of the chunking
            small = run_all(plan, arm, chunk_cells=3)
            for k in out:
                assert np.array_equal(out[k], small[k], equal_nan=True), k
        assert np.allclose(T[:, :3, 3], out["target"][reached[flag]], atol=1e-6)
    assert np.all(reached[True][reached[False]])          # never loses a point
    assert reached[True].sum() > reached[False].sum()     # and fills some of the hole


@pytest.mark.parametrize("base,extra", [
    ({"grid": "plane", "plane": "xz", "at": 0.0, "u": [0.3, 0.7], "v": [0.2, 0.6], "steps": [3, 3],
      "orientation": "fixed", "rpy": [180, 0, 0]},
     {"x": [0, 1], "y": [0, 1], "z": [0, 1], "origin": [1, 2, 3], "plane_rpy": [10, 0, 0],
      "axis": [1, 0, 0], "directions": 6, "spins": 2}),
    ({"grid": "box", "x": [0.3, 0.6], "y": [-0.2, 0.2], "z": [0.4, 0.5], "steps": [2, 2, 2],
      "orientation": "axis", "axis": [0, 0, -1]},
     {"plane": "yz", "at": 0.3, "u": [0, 1], "v": [0, 1], "rpy": [0, 90, 0], "spins": 3}),
    ({"grid": "plane", "plane": "frame", "origin": [0.4, 0, 0.3], "u": [0, 0.2], "v": [0, 0.2], "steps": [2, 2],
      "orientation": "sampled", "directions": 4, "spins": 2},
     {"at": 0.5, "distinct_tol": 5.0, "neighbour_seeds": False, "rpy": [0, 0, 0], "axis": [0, 1, 0]}),
])
def test_settings_named_as_unused_really_change_nothing(base, extra):
    # every key the kind reports as ignored is checked to be ignored: same arrays with and without it
    kind, arm = get_kind("reach_slice"), six_r()
    noisy = dict(base, **extra)
    assert set(kind.unused_settings(noisy)) == set(extra)
    assert kind.unused_settings(base) == {}
    a = run_all(kind.plan(spec(**base), arm, None), arm)
    b = run_all(kind.plan(spec(**noisy), arm, None), arm)
    assert a.keys() == b.keys()
    for k in a:
        np.testing.assert_array_equal(a[k], b[k], err_msg=k)
