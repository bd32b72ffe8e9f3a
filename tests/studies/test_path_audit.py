"""Path audit: a line through a wrist singularity of the demo arm, joint speeds against J^+ v."""
import math

import numpy as np
import pytest

from workbench import load_arm
from workbench.studies.base import Chunk, StudyError
from workbench.studies.cell import parse_cell_text, sample_path
from workbench.studies.path_audit import (JUMP, NEAR_SINGULAR, REACHED, PathAudit, PathSettings, audit_samples,
                                          joint_speeds, near_singular_spans, track_path)
from workbench.studies.spec import StudySpec

ROOT = __import__("pathlib").Path(__file__).resolve().parents[2]
Q_SING = np.array([0.3, -0.5, 0.4, 0.2, 0.0, -0.1])  # th5 = 0: wrist axes 4 and 6 line up


def _line_cell(p0, p1, rpy_deg, speed=200.0):
    return parse_cell_text(f"""
[cell]
name = "line"
[[point]]
name = "a"
xyz = {list(map(float, p0))}
rpy = {list(map(float, rpy_deg))}
[[point]]
name = "b"
xyz = {list(map(float, p1))}
rpy = {list(map(float, rpy_deg))}
[[path]]
name = "line"
speed = {speed}
through = ["a", "b"]
""", "line.toml")


def _singular_line(arm, half=0.2):
    from workbench.arm.transforms import matrix_to_rpy

    T = arm.fk(Q_SING)
    d = np.array([0.0, 0.6, 0.8])
    rpy = np.degrees(matrix_to_rpy(T[:3, :3]))
    return _line_cell(T[:3, 3] - half * d, T[:3, 3] + half * d, rpy), T


def test_wrist_singularity_is_flagged_at_the_right_distance():
    # DH arm with a spherical wrist: axes 4 and 6 are collinear when th5 = 0 (common practice; the
    # demo arm's DH rows give z4 = z6 at th5 = 0), so the 6-row Jacobian loses rank there.
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    assert arm.singular_values(Q_SING, rows="full")[-1] < 1e-12
    cell, T = _singular_line(arm)
    ps = sample_path(cell, cell.paths[0], 0.001)
    assert len(ps.s) == 401 and ps.length == pytest.approx(0.4)
    np.testing.assert_allclose(ps.poses[200], T, atol=1e-12)  # the singular pose is at 200 mm
    q, flags, _ = track_path(arm, ps.poses, "fixed", q_start=Q_SING)
    assert np.all(flags & REACHED)
    s = PathSettings(spacing=0.001, near_singular=0.02)
    tw = np.concatenate([ps.tangent * ps.speed, ps.omega_per_m * ps.speed], axis=1)
    a = audit_samples(arm, q, tw, "fixed", s, np.eye(3))
    k = int(np.argmin(a["inverse_condition"]))
    assert abs(ps.s[k] - 0.200) <= 0.001 + 1e-12
    assert a["inverse_condition"][k] < 1e-3
    spans = near_singular_spans(ps.s, a["inverse_condition"], 0.02)
    assert len(spans) == 1
    lo, hi = spans[0]
    assert 0.0 < ps.s[lo] < 0.200 < ps.s[hi - 1] < 0.4
    # away from the singularity the arm is well conditioned
    assert a["inverse_condition"][0] > 0.02 and a["inverse_condition"][-1] > 0.02


def test_joint_speeds_match_an_independent_pseudo_inverse():
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    cell, _ = _singular_line(arm)
    ps = sample_path(cell, cell.paths[0], 0.005)
    q, flags, _ = track_path(arm, ps.poses, "fixed", q_start=Q_SING)
    a = audit_samples(arm, q, np.concatenate([ps.tangent * 0.2, ps.omega_per_m * 0.2], axis=1), "fixed",
                      PathSettings(), np.eye(3))
    v = np.array([0.0, 0.6, 0.8]) * 0.2  # 200 mm/s along the line, no turning
    for k in range(0, len(q), 5):
        J = arm.jacobian(q[k])
        expect = np.linalg.pinv(J) @ np.concatenate([v, np.zeros(3)])
        np.testing.assert_allclose(a["qdot"][k], expect, rtol=1e-7, atol=1e-9)
        with np.errstate(invalid="ignore"):
            ratio = np.nanmax(np.abs(expect) / arm.model.max_speed)
        assert a["speed_ratio"][k] == pytest.approx(ratio, rel=1e-9)
    # "free" rule: translation rows only, J_v^+ v (least-norm)
    J = arm.jacobian(q[0])
    np.testing.assert_allclose(joint_speeds(J, np.concatenate([v, np.zeros(3)]), "free"),
                               np.linalg.pinv(J[:3]) @ v, atol=1e-12)


def test_study_kind_runs_a_path_and_reports_spans_and_notes():
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    cell, _ = _singular_line(arm)
    kind = PathAudit()
    spec = StudySpec(kind="path_audit", arm="demo", cell="line.toml",
                     settings={"spacing": 0.002, "near_singular": 0.05})
    plan = kind.plan(spec, arm, cell)
    arrays = kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells))
    # any chunking gives the same values (each chunk re-tracks from the path's start)
    half = plan.cells // 2
    a1 = kind.compute_chunk(plan, arm, cell, Chunk(0, 0, half))
    a2 = kind.compute_chunk(plan, arm, cell, Chunk(1, half, plan.cells))
    np.testing.assert_array_equal(np.concatenate([a1["q"], a2["q"]]), arrays["q"])
    assert np.all(arrays["flags"] & REACHED)
    tables = kind.summarise(plan, arrays)
    t = tables["paths"]
    assert t.rows == 1 and t.columns["length"][0] == pytest.approx(400.0)
    assert t.columns["tool_speed"][0] == pytest.approx(200.0)
    ns = tables["near_singular"]
    assert ns.rows >= 1
    for r in range(ns.rows):  # every span has a plain-words note
        assert "singular" in str(ns.columns["note"][r]).lower()
    assert np.all((arrays["flags"][arrays["inverse_condition"] < 0.05] & NEAR_SINGULAR) > 0)


def test_bad_settings_and_cells_give_one_line_errors():
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    cell = _line_cell([0.8, 0, 0.5], [0.9, 0, 0.5], [180, 0, 0])
    with pytest.raises(StudyError, match="spacing"):
        PathAudit().plan(StudySpec(kind="path_audit", arm="d", settings={"spacing": 0}), arm, cell)
    with pytest.raises(StudyError, match="no path named 'nope'"):
        PathAudit().plan(StudySpec(kind="path_audit", arm="d", settings={"paths": ["nope"]}), arm, cell)
    nopath = parse_cell_text('[cell]\nname="x"\n[[point]]\nname="a"\nxyz=[1,0,0]\n', "nopath.toml")
    with pytest.raises(StudyError, match="no \\[\\[path\\]\\]"):
        PathAudit().plan(StudySpec(kind="path_audit", arm="d"), arm, nopath)


def test_a_path_partly_out_of_reach_is_reported_not_crashed():
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    cell = _line_cell([0.8, 0, 0.5], [3.0, 0, 0.5], [180, 0, 0])
    kind = PathAudit()
    plan = kind.plan(StudySpec(kind="path_audit", arm="d", settings={"spacing": 0.02, "seeds": 4}), arm, cell)
    arrays = kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells))
    reached = (arrays["flags"] & REACHED) > 0
    assert reached[0] and not reached[-1]
    assert np.all(np.isnan(arrays["inverse_condition"][~reached]))
    t = kind.summarise(plan, arrays)["paths"]
    assert t.columns["unreached"][0] == (~reached).sum() > 0
