"""The decision model (workbench.decision): numbers for people, the recommendation as the ranking
gives it, per-point values that reproduce the ranking's score, verdicts, risks whose "what to
change" holds when re-solved, comparisons."""
import math
import re
from pathlib import Path

import numpy as np
import pytest

from workbench.decision import (FAIL, NOT_CHECKED, PASS, arm_shapes, compare_decisions, decision_for, fmt_deg,
                                fmt_mm, fmt_number, fmt_percent)
from workbench.errors import WorkbenchError

ROOT = Path(__file__).resolve().parents[1]



@pytest.fixture(scope="module")
def res(small_cell_results):
    return small_cell_results[1]


@pytest.fixture(scope="module")
def decs(res):
    return {k: decision_for(r) for k, r in res.items()}


def test_numbers_for_people():
    # no "-0", no "5.551e-14 mm", lengths in whole mm (0.1 mm below 10 mm), angles to 0.1 deg
    # (common practice in drawings and layout tables)
    assert fmt_mm(-1e-17) == "0" and fmt_mm(5.551e-17) == "0" and fmt_mm(0.0) == "0"
    assert fmt_mm(0.70000001725) == "700" and fmt_mm(-0.17911980953) == "-179" and fmt_mm(0.00234) == "2.3"
    assert fmt_deg(math.radians(-1e-9)) == "0.0" and fmt_deg(math.radians(202.1532643)) == "202.2"
    assert fmt_number(-0.00001, 2) == "-1e-5" and fmt_number(1.83094625e-08) == "1.8e-8"
    assert fmt_number(0.02) == "0.02" and fmt_number(0.0200, trim=False) == "0.0200"
    assert fmt_number(0.11320388) == "0.113" and fmt_number(58.69506528) == "58.7" and fmt_number(1000.4) == "1000"
    assert fmt_number(-0.0) == "0" and fmt_percent(-1.3e-8) == "0.0 %" and fmt_number(float("nan")) == "-"


def test_mount_recommendation_is_the_rankings_first(res, decs):
    r, d = res["ms"], decs["ms"]
    ref = r.tables["recommended"].columns  # the refined mount 1, rounded to 1 mm / 0.1 deg
    refined = r.tables["refined"].columns
    assert abs(ref["x"][0] - refined["x"][0]) <= 0.5 + 1e-9 and abs(ref["y"][0] - refined["y"][0]) <= 0.5 + 1e-9
    rec = d.recommendation
    assert rec.kind == "mount"
    assert rec.x == pytest.approx(ref["x"][0] / 1000) and rec.y == pytest.approx(ref["y"][0] / 1000)
    assert rec.height == pytest.approx(ref["height"][0] / 1000)
    assert math.degrees(rec.yaw) == pytest.approx(ref["yaw"][0]) and rec.style == ref["style"][0]
    assert rec.score == pytest.approx(ref["rank_value"][0])
    # the stated values are the table's, rounded for people
    assert dict(rec.values())["x"] == f"{round(ref['x'][0])} mm".replace("-0 ", "0 ")
    assert f"x = {fmt_mm(rec.x)} mm" in rec.answer and f"yaw {fmt_deg(rec.yaw)} deg" in rec.answer
    # the arm of the decision stands there
    np.testing.assert_allclose(d.arm.model.mount, rec.transform, atol=1e-12)


def test_per_point_values_reproduce_the_score_and_the_measures(res, decs):
    d = decs["ms"]
    s = res["ms"].context()[1].settings
    pts = d.points
    assert [p.name for p in pts] == ["a", "b"]
    arm = d.arm
    for p in pts:
        assert p.reached
        # the pose reaches the point: FK of the mounted arm (rows of the 4x4 product) within 1 mm
        T = arm.fk(p.q, world=True)
        assert np.linalg.norm(T[:3, 3] - p.position) < 1e-3
        # inverse condition from numpy's SVD of the Jacobian, translation rows / L (Tandirci,
        # Angeles, Ranjbaran 1992: a characteristic length makes the rows commensurate)
        J = arm.jacobian(p.q).copy()
        L = s.length if s.length is not None else arm.nominal_reach()
        J[:3] /= L
        sv = np.linalg.svd(J, compute_uv=False)
        assert p.inverse_condition == pytest.approx(sv[-1] / sv[0], rel=1e-9)
        assert p.min_sv == pytest.approx(sv[-1], rel=1e-9)
        assert p.manipulability == pytest.approx(np.prod(sv), rel=1e-9)
        # margin by hand: 1 - |q - mid| / half range, smallest over the joints
        lo, hi = arm.model.lower, arm.model.upper
        m = 1 - np.abs(p.q - (lo + hi) / 2) / ((hi - lo) / 2)
        assert p.margin == pytest.approx(min(1.0, m.min()), abs=1e-12)
        assert p.margin_joint == arm.model.names[int(np.argmin(m))]
    # rank value = served + Q / (1 + Q), Q = w * m^0.5, by hand from these values equals the
    # ranking's (one answer)
    w = min(p.inverse_condition for p in pts)
    mm = min(p.margin for p in pts)
    q = w * mm ** 0.5
    if all(p.clearance is not None for p in pts):  # collisions checked: times min(1, c / 0.1 m)^0.5,
        from workbench.studies.mount_search import CLEARANCE_FULL  # c = clearance to the obstacles

        assert all(p.obstacle_clearance >= p.clearance - 1e-12 for p in pts)
        q *= min(1.0, min(p.obstacle_clearance for p in pts) / CLEARANCE_FULL) ** 0.5
    assert len(pts) + q / (1 + q) == pytest.approx(d.recommendation.score, rel=1e-9)
    assert not d.notes


def test_mount_verdicts(decs):
    d = decs["ms"]
    v = {x.key: x for x in d.verdicts}
    assert v["points_served"].status == PASS and v["points_served"].worst == "2 of 2"
    w = min(p.inverse_condition for p in d.points)
    assert v["inverse_condition"].value == pytest.approx(w) and v["inverse_condition"].status == (
        PASS if w >= 0.02 else FAIL)
    # torques are not in these results: said so, with the reason, never left out
    if arm_shapes(d.arm.model) is None:
        assert v["clearance"].status == NOT_CHECKED and v["clearance"].note
        assert "no collision shapes" in v["clearance"].note and "Collisions not checked" in d.collisions
    else:
        # the arm has shapes: the clearance at the chosen solutions (best_points 'clearance', mm)
        # is the verdict's worst value, against the default 10 mm
        c = min(p.clearance for p in d.points)
        assert v["clearance"].value == pytest.approx(c) and v["clearance"].status == (PASS if c >= 0.01 else FAIL)
        assert "Collisions checked" in d.collisions
    assert v["torque_margin"].status == NOT_CHECKED
    assert v["path_speeds"].status == NOT_CHECKED and "path audit" in v["path_speeds"].note
    assert len(d.risks) == 3


def test_path_audit_risk_and_the_base_move_it_proposes(res, decs):
    from workbench.arm.transforms import translation
    from workbench.studies.mount_search import reached_check, solve_targets

    r, d = res["pa"], decs["pa"]
    rec = d.recommendation
    assert rec.kind == "placement" and "[placement]" in rec.source
    assert (rec.x, rec.y, rec.height) == pytest.approx((0.05, 0.0, 0.0))
    v = {x.key: x for x in d.verdicts}
    inv = np.asarray(r.arrays["inverse_condition"], float)
    assert v["inverse_condition"].status == FAIL and v["inverse_condition"].value == pytest.approx(np.nanmin(inv))
    top = d.risks[0]
    assert top.key == "near_singular" and top.where.startswith("over, ")
    # the cause from the singularity note at that pose: joint 1's axis and joint 6's line up over the base
    assert "joints 1 and 6 cancel" in top.what
    # the stated spans cover the study's own near-singular table
    ns = r.tables["near_singular"].columns
    a0, a1 = (float(t) for t in top.where.split(", ")[1].replace(" mm", "").split("-"))
    assert a0 <= round(ns["from"].min()) and a1 >= round(ns["to"].max())
    # "moving the base D mm towards +-x": re-solve every sample of the near-singular stretch from a base moved
    # so, and check the inverse condition with numpy's SVD
    import re

    m = re.search(r"moving the base (\d+) mm towards ([+-])([xyz])", top.change)
    assert m, top.change
    dvec = np.zeros(3)
    dvec["xyz".index(m.group(3))] = (1 if m.group(2) == "+" else -1) * float(m.group(1)) / 1000
    kind, plan, arm, cell = r.context()
    near = np.flatnonzero((np.asarray(r.arrays["path_index"]) == 1) & (inv < 0.02))
    k0, k1 = near.min(), near.max()
    G = np.einsum("ij,njk->nik", plan.data["mount"], plan.data["targets"][k0:k1 + 1])
    Mn = translation(*dvec) @ plan.data["mount"]
    T = np.einsum("ij,njk->nik", np.linalg.inv(Mn), G)
    q, _ = solve_targets(arm, T, "fixed", seeds=8)
    ok = reached_check(arm, q, T, "fixed", np.full(len(T), 1e-3), np.full(len(T), math.radians(0.5)))
    assert ok.all()
    L = arm.nominal_reach()
    for qi in q:
        J = arm.jacobian(qi).copy()
        J[:3] /= L
        sv = np.linalg.svd(J, compute_uv=False)
        assert sv[-1] / sv[0] >= 0.02 * 0.999


def test_load_map_decision(res, decs):
    r, d = res["lm"], decs["lm"]
    pay = np.asarray(r.arrays["payload"], float)
    v = {x.key: x for x in d.verdicts}
    # no payload stated by the cell: the smallest payload is reported but not judged
    assert v["payload"].status == NOT_CHECKED and v["payload"].value == pytest.approx(np.nanmin(pay))
    k = np.unravel_index(np.nanargmin(pay), pay.shape)
    z, y = r.axes[0].values[k[0]], r.axes[1].values[k[1]]
    assert v["payload"].where == f"x = 600 mm, y = {fmt_mm(y)} mm, z = {fmt_mm(z)} mm"
    assert d.risks[0].key == "payload" and d.risks[0].where == v["payload"].where


def test_comparisons(decs):
    with pytest.raises(WorkbenchError, match="one study kind"):
        compare_decisions([decs["ms"], decs["pa"]])
    c = compare_decisions([decs["pa"], decs["pa"]])
    assert c.labels == ("A", "B") and c.best == 0
    assert c.differences == ("no difference in placement, arm, cell or settings",)
    assert set(c.keys) >= {"inverse_condition", "speed_ratio", "clearance"}


def _capsule_box_distance(a, b, r, box):
    """Signed distance (m) of a capsule (segment a-b, radius r) to a yawed box, by dense sampling of
    the segment and the closed-form point-to-box signed distance (outside: norm of the excess over
    the half sizes; inside: minus the distance to the nearest face). Common practice."""
    t = np.linspace(0.0, 1.0, 20001)[:, None]
    p = (a + t * (b - a) - box.center) @ box.rotation  # into the box frame
    e = np.abs(p) - box.size / 2
    out = np.linalg.norm(np.maximum(e, 0.0), axis=1)
    inside = np.minimum(e.max(axis=1), 0.0)
    return float((out + inside).min() - r)


def test_a_path_that_strikes_the_equipment_is_risk_one_and_the_answer_names_the_failing_path(tmp_path):
    """The tray demo's camera pass from the cell's [placement]: link 2 passes through the conveyor.
    The collision is the first risk (a strike outranks a slow or singular stretch), its depth matches
    an independent capsule-box distance at the drawn pose, and the answer says which paths fail."""
    from workbench.results import read_results
    from workbench.runner import run_study

    run_study(str(ROOT / "arms" / "cells" / "tray_path_audit.toml"), out=str(tmp_path / "a.h5"))
    r = read_results(str(tmp_path / "a.h5"))
    d = decision_for(r)
    top = d.risks[0]
    assert top.key == "clearance" and "box 'conveyor'" in top.what and top.where.startswith("camera_pass, ")
    assert "would strike the equipment" in top.what
    depth_mm = float(re.search(r"overlaps box 'conveyor' by (\d+) mm", top.what).group(1))
    arm = d.arm
    cell = r.context()[3]
    conveyor = next(b for b in cell.boxes if b.name == "conveyor")
    F = arm.frames(top.pose, world=True)  # frame of each joint; link 2's capsule lives in frame 2
    shp = arm.model.body_shapes()[2][0]
    a = (F[1] @ np.append(shp.a, 1.0))[:3]
    b = (F[1] @ np.append(shp.b, 1.0))[:3]
    assert _capsule_box_distance(a, b, shp.radius, conveyor) * 1000 == pytest.approx(-depth_mm, abs=0.6)
    ans = d.recommendation.answer
    assert "camera_pass fails" in ans and "glue_seam and transfer pass every checked requirement" in ans
    assert "Avoid: camera_pass, " in ans
