"""Mount search: a planar 2R arm with a known best base, the inversion property, bad regions."""
import math

import numpy as np
import pytest

from workbench import load_arm
from workbench.arm.model import ArmModel, Joint
from workbench.arm.transforms import inverse_transform, make_transform, translation
from workbench.kinematics import Arm
from workbench.studies.base import Chunk, StudyError
from workbench.studies.cell import WorkPoint, parse_cell_text, relative_targets
from workbench.studies.mount_search import (MountSearch, MountSettings, evaluate_mounts, refine_candidate,
                                            score_candidates, score_formula)
from workbench.studies.spec import StudySpec

ROOT = __import__("pathlib").Path(__file__).resolve().parents[2]


def planar_2r(l1=1.0, l2=1.0):
    """Planar 2R arm built in code: both axes along z, unlimited joints."""
    j1 = Joint("th1", "revolute", np.eye(4), np.array([0.0, 0, 1]))
    j2 = Joint("th2", "revolute", translation(l1, 0, 0), np.array([0.0, 0, 1]))
    return Arm(ArmModel("2R", (j1, j2), end=translation(l2, 0, 0)))


def circle_points(c, r, k=12):
    pts = []
    for i in range(k):
        a = 2 * math.pi * i / k + 0.1
        pts.append(WorkPoint(f"p{i}", make_transform([c[0] + r * math.cos(a), c[1] + r * math.sin(a), 0.0],
                                                     [0, 0, 0]), "free", 1e-6))
    return tuple(pts)


SETTINGS = MountSettings(measure="manipulability", rows=("vx", "vy"), seeds=4, reach_power=2, measure_power=1,
                         margin_power=0.5)


def test_2r_best_base_is_centre_of_the_sqrt2_circle():
    # Yoshikawa, "Manipulability of robotic mechanisms", IJRR 4(2) 1985, sec. 4: for the planar 2R
    # arm w = l1 l2 |sin th2|, largest at th2 = +-90 deg, i.e. at tip distance sqrt(l1^2 + l2^2) from
    # the base. Work points on a circle of that radius: from the circle's centre every point has
    # w = l1 l2 = 1 (the largest possible), and any other base makes some point worse.
    arm = planar_2r()
    c = np.array([0.33, -0.17])
    pts = circle_points(c, math.sqrt(2.0))
    step = 0.1
    xs = np.arange(-0.5, 1.0001, step)
    ys = np.arange(-0.8, 0.5001, step)
    X, Y = np.meshgrid(xs, ys)
    from workbench.studies.cell import mount_transforms

    M = mount_transforms(X.ravel(), Y.ravel(), 0.0, 0.0, 0.0)
    ev = evaluate_mounts(arm, M, pts, SETTINGS)
    sc = score_candidates(ev["reached"], ev["measure"], ev["margin"], SETTINGS)
    k = int(np.argmax(sc["score"]))
    found = np.array([X.ravel()[k], Y.ravel()[k]])
    assert np.all(np.abs(found - c) <= step + 1e-9)  # within one grid step
    assert sc["reached_fraction"][k] == 1.0
    r = refine_candidate(arm, pts, SETTINGS, found[0], found[1], 0.0, 0.0, 0.0, step, math.radians(10),
                         maxfev=600)
    assert np.hypot(r["x"] - c[0], r["y"] - c[1]) < 1e-3
    assert r["score"] == pytest.approx(1.0, abs=1e-6)  # w = l1 l2 = 1, f = 1, margin 1 (unlimited)
    assert r["score"] >= r["start_score"]


def test_worst_measure_matches_the_closed_form_off_centre():
    # w = l1 l2 |sin th2| with cos th2 = (d^2 - l1^2 - l2^2) / (2 l1 l2) (law of cosines, common practice)
    arm = planar_2r()
    pts = circle_points((0.0, 0.0), math.sqrt(2.0))
    from workbench.studies.cell import mount_transforms

    b = np.array([0.2, 0.0])
    ev = evaluate_mounts(arm, mount_transforms(b[0], b[1], 0, 0, 0)[None], pts, SETTINGS)
    d = np.array([np.linalg.norm(p.position[:2] - b) for p in pts])
    w = np.sqrt(1 - ((d ** 2 - 2) / 2) ** 2)
    np.testing.assert_allclose(ev["measure"][0], w, atol=1e-6)  # IK position tolerance 1e-6 m
    sc = score_candidates(ev["reached"], ev["measure"], ev["margin"], SETTINGS)
    assert sc["worst_measure"][0] == pytest.approx(w.min(), abs=1e-6)


def test_base_placed_by_inversion_reaches_the_goal():
    # Vahrenkamp, Asfour & Dillmann, "Robot placement based on reachability inversion", ICRA 2013:
    # a base at g @ FK(q)^-1 puts the TCP on g with the joint values q.
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    rng = np.random.default_rng(3)
    qs = arm.random_q(5, rng=rng)
    g = make_transform([1.2, -0.4, 0.8], np.radians([170, 10, 30]))
    for q in qs:
        M = g @ inverse_transform(arm.fk(q))
        np.testing.assert_allclose(M @ arm.fk(q), g, atol=1e-12)
        np.testing.assert_allclose(relative_targets(M[None], g[None])[0, 0], arm.fk(q), atol=1e-12)
        pt = WorkPoint("g", g, "fixed", 1e-6, 1e-6)
        ev = evaluate_mounts(arm, M[None], (pt,), MountSettings(seeds=1), q0=q[None, None])
        assert ev["reached"][0, 0]
        np.testing.assert_allclose(M @ arm.fk(ev["q"][0, 0]), g, atol=1e-6)


def test_score_formula_is_stated_and_zero_when_nothing_is_reached():
    s = MountSettings()
    text = score_formula(s)
    assert "rank value = k + Q / (1 + Q)" in text and "w^1" in text and "m^0.5" in text
    reached = np.array([[True, True], [True, False], [False, False]])
    meas = np.array([[0.5, 0.2], [0.4, 0.0], [0.0, 0.0]])
    marg = np.array([[0.81, 0.25], [0.36, 0.0], [0.0, 0.0]])
    sc = score_candidates(reached, meas, marg, s)
    # worked by hand: quality 0.2 * sqrt(0.25) = 0.1; 0.4 * sqrt(0.36) = 0.24 over the one served
    # point; nothing served: 0. Rank value = served + Q / (1 + Q)
    np.testing.assert_allclose(sc["score"], [0.1, 0.24, 0.0])
    np.testing.assert_allclose(sc["reached_fraction"], [1.0, 0.5, 0.0])
    np.testing.assert_allclose(sc["rank_value"], [2 + 0.1 / 1.1, 1 + 0.24 / 1.24, 0.0])


CELL_FAR = """
[cell]
name = "far"
[[point]]
name = "near"
xyz = [0.9, 0.0, 0.5]
rpy = [180, 0, 0]
[[point]]
name = "moon"
xyz = [30.0, 0.0, 0.5]
rpy = [180, 0, 0]
[mount]
x = [-0.1, 0.1]
y = [0.0, 0.1]
step = 0.1
yaws = [0, 180]
"""


def test_points_beyond_any_reach_give_a_clear_unreachable_result():
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    cell = parse_cell_text(CELL_FAR, "far.toml")
    kind = MountSearch()
    spec = StudySpec(kind="mount_search", arm="demo", cell="far.toml", settings={"refine": 1, "seeds": 4,
                                                                                   "refine_evaluations": 10,
                                                                                   "sensitivity": False})
    plan = kind.plan(spec, arm, cell)
    assert plan.shape == (1, 1, 2, 2, 3)
    arrays = kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells))
    assert np.all(arrays["point_reached"][:, 1] == 0)  # the far point: never
    assert np.all(arrays["reached_fraction"] <= 0.5)
    tables = kind.summarise(plan, arrays)
    t = tables["unreachable"]
    assert [p.decode() if isinstance(p, bytes) else p for p in t.columns["point"]] == ["moon"]
    assert "unreachable" in t.columns["note"][0]


def test_mount_search_refuses_a_cell_without_region():
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    cell = parse_cell_text(CELL_FAR.split("[mount]")[0], "nomount.toml")
    spec = StudySpec(kind="mount_search", arm="demo", cell="nomount.toml")
    with pytest.raises(StudyError, match=r"no \[mount\] table"):
        MountSearch().plan(spec, arm, cell)
    with pytest.raises(StudyError, match="measure"):
        MountSearch().plan(StudySpec(kind="mount_search", arm="d", settings={"measure": "beauty"}), arm,
                           parse_cell_text(CELL_FAR, "far.toml"))
