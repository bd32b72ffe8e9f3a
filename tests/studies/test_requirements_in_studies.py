"""The requirements used by the studies: path audit (holding torques, largest tool speed, cycle
time vs the required time) and load map (payload with an offset, force mode)."""
from __future__ import annotations

import math

import numpy as np
import pytest

from workbench.arm.files import parse_arm_dict
from workbench.kinematics import Arm
from workbench.studies.base import Chunk
from workbench.studies.cell import parse_cell_text
from workbench.studies.load_map import LoadMap
from workbench.studies.path_audit import PathAudit
from workbench.studies.spec import StudySpec


def gantry(masses=True, efforts=(500, 400, 200)):
    """Invented 3-axis gantry: x, y, z slides (TCP = (q1, q2, q3)); speed and acceleration limits
    x 0.9 m/s, 2 m/s^2; y 0.4 m/s, 1 m/s^2; z 0.5 m/s, 3 m/s^2; z carries 5 kg, limit 200 N."""
    j = []
    for name, ax, v, a, f, m in (("x", [1, 0, 0], 0.9, 2.0, efforts[0], 20.0),
                                 ("y", [0, 1, 0], 0.4, 1.0, efforts[1], 10.0),
                                 ("z", [0, 0, 1], 0.5, 3.0, efforts[2], 5.0)):
        jd = {"name": name, "type": "prismatic", "xyz": [0, 0, 0], "axis": ax, "limits": [-0.5, 2.0],
              "max_speed": v, "max_acceleration": a, "max_effort": f}
        if masses:
            jd["mass"] = m
        j.append(jd)
    return Arm(parse_arm_dict({"arm": {"name": "gantry", "geometry": "origins"}, "joint": j}))


CELL = """
[cell]
name = "gantry cell"
[requirements]
payload = 4.0
[[point]]
name = "a"
xyz = [0.2, 0.1, 0.3]
[[point]]
name = "b"
xyz = [0.8, 0.9, 0.3]
[[path]]
name = "diagonal"
speed = 1000
through = ["a", "b"]
requirements = {time = 2.0}
"""


def run_audit(arm, cell, settings=None):
    kind = PathAudit()
    spec = StudySpec(kind="path_audit", arm="gantry", cell="cell", settings=settings or {"spacing": 0.001})
    plan = kind.plan(spec, arm, cell)
    arrays = kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells))
    return plan, arrays, kind.summarise(plan, arrays)


def test_gantry_line_cycle_time_closed_form_and_unmet_requirement():
    # A straight tool line of 1 m along (0.6, 0.8, 0) moves x and y in proportion (gantry:
    # q = TCP position), so the path speed is capped by V = min(0.9 / 0.6, 0.4 / 0.8, 1.0 tool)
    # = 0.5 m/s (joint y binds) and accelerated by A = min(2 / 0.6, 1 / 0.8) = 1.25 m/s^2
    # (joint y). Rest to rest: T = S / V + V / A = 2 + 0.4 = 2.4 s (trapezoidal profile, common
    # practice). The cell asks 2.0 s: not met, and said so.
    arm = gantry()
    cell = parse_cell_text(CELL, "gantry.toml")
    plan, a, t = run_audit(arm, cell)
    ct = t["cycle_time"].columns
    assert list(ct["path"]) == ["diagonal"]
    assert ct["time"][0] == pytest.approx(2.4, rel=2e-3)
    assert ct["required"][0] == 2.0
    assert str(ct["meets"][0]).startswith("no: 0.4")
    assert "joint speed limits" in ct["limited_by"][0]
    # the largest tool speed each sample allows within the joint speed limits: 0.5 m/s (y)
    np.testing.assert_allclose(a["tool_speed_max"], 0.5, rtol=1e-6)
    # holding torques: the z slide holds its own 5 kg and the 4 kg payload: 9 * 9.81 N, margin
    # (200 - 88.29) / 200; x and y hold nothing against gravity
    np.testing.assert_allclose(a["tau"][:, 2], 9 * 9.81, rtol=1e-9)
    np.testing.assert_allclose(a["tau"][:, :2], 0, atol=1e-9)
    np.testing.assert_allclose(a["torque_margin"], (200 - 9 * 9.81) / 200, rtol=1e-9)
    assert np.all(a["torque_joint"] == 2)
    # the decision sees the cycle time and the torque margin
    from workbench.decision import _cycle_verdict

    class Ctx:
        def table(self, name):
            return t.get(name)
    v = _cycle_verdict(Ctx())
    assert v.status == "fail" and v.value == pytest.approx(2.4, rel=2e-3)
    # a longer required time passes
    _, _, t2 = run_audit(arm, parse_cell_text(CELL.replace("time = 2.0", "time = 2.5"), "gantry.toml"))
    assert t2["cycle_time"].columns["meets"][0] == "yes"


def test_heavy_press_fails_the_torque_check_along_the_path():
    # Pressing 150 N down (cell frame): the tool exerts F = (0, 0, -150) N on the part, the z slide
    # supplies J^T F = -150 N on top of holding 9 kg: tau_z = 88.29 - 150 = -61.71 N, margin
    # (200 - 61.71) / 200. Pressing 300 N: tau_z = -211.71 N, over the 200 N limit.
    arm = gantry()
    cell = parse_cell_text(CELL.replace("payload = 4.0", "payload = 4.0\nforce = [0, 0, -150]\n"
                                        "wrench_frame = \"cell\""), "gantry.toml")
    _, a, _ = run_audit(arm, cell, {"spacing": 0.05})
    np.testing.assert_allclose(a["tau"][:, 2], 9 * 9.81 - 150, rtol=1e-9)
    np.testing.assert_allclose(a["torque_margin"], (200 - (150 - 9 * 9.81)) / 200, rtol=1e-9)
    cell = parse_cell_text(CELL.replace("payload = 4.0", "payload = 4.0\nforce = [0, 0, -300]\n"
                                        "wrench_frame = \"cell\""), "gantry.toml")
    _, a, _ = run_audit(arm, cell, {"spacing": 0.05})
    assert np.all(a["torque_margin"] < 0)


def test_no_acceleration_limits_is_said():
    arm = gantry()
    m = arm.model
    from dataclasses import replace

    from workbench.arm.model import ArmModel
    arm2 = Arm(ArmModel(m.name, tuple(replace(j, max_acceleration=None) for j in m.joints)))
    _, _, t = run_audit(arm2, parse_cell_text(CELL, "gantry.toml"), {"spacing": 0.01})
    ct = t["cycle_time"].columns
    assert ct["time"][0] == pytest.approx(2.0, rel=1e-5)  # S / V, speeds change instantly (IK to 1e-6 m)
    assert "no joint acceleration limits" in ct["note"][0]


def vertical_2r():
    from tests.reference.test_holding import vertical_two_link

    return vertical_two_link()


def test_load_map_payload_with_offset_and_force_mode():
    # The vertical 2R of tests/reference/test_holding.py over joint 1 only (joint 2 at 0):
    # at q = 0 a payload 0.2 m ahead of the TCP (levers 2.0 and 1.0 m) is limited by joint 2:
    # (15 - 3.924) / 9.81 = 1.12905 kg. Force mode, straight up with 0.5 kg there:
    # (15 - 3.924 - 4.905) / 0.8 = 7.71375 N (joint 2).
    arm = vertical_2r()
    kind = LoadMap()
    st = {"grid": "joints", "joints": ["j1"], "ranges": [[-30, 30]], "steps": [3], "pose": [0, 0],
          "payload_com": [0.2, 0, 0]}
    plan = kind.plan(StudySpec(kind="load_map", arm="2r", settings=st), arm, None)
    a = kind.compute_chunk(plan, arm, None, Chunk(0, 0, plan.cells))
    assert a["payload"][1] == pytest.approx((15 - 3.924) / 9.81, rel=1e-12) and a["limiting_joint"][1] == 1
    st = dict(st, mode="force", direction=[0, 0, 1], payload=0.5)
    plan = kind.plan(StudySpec(kind="load_map", arm="2r", settings=st), arm, None)
    a = kind.compute_chunk(plan, arm, None, Chunk(0, 0, plan.cells))
    assert plan.fields[0].name == "force"
    assert a["force"][1] == pytest.approx((15 - 3.924 - 4.905) / 0.8, rel=1e-12) and a["force_joint"][1] == 1
    from workbench.measures import Payload, largest_force

    f, _ = largest_force(arm, a["q"], [0, 0, 1], payload=Payload(0.5, [0.2, 0, 0]))
    np.testing.assert_allclose(a["force"], f, rtol=1e-12)
    tables = kind.summarise(plan, a)
    assert tables["force"].columns["min_force"][0] == pytest.approx(float(np.min(f)))
    # defaults from the cell's requirements: payload 0.5 kg at 0.2 m -> the "requirements" table
    cell = parse_cell_text("""
[cell]
name = "c"
[requirements]
payload = 0.5
payload_com = [0.2, 0, 0]
[[point]]
name = "a"
xyz = [1, 0, 1]
""", "c.toml")
    st = {"grid": "joints", "joints": ["j1"], "ranges": [[-30, 30]], "steps": [3], "pose": [0, 0]}
    plan = kind.plan(StudySpec(kind="load_map", arm="2r", cell="c.toml", settings=st), arm, cell)
    a = kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells))
    assert a["payload"][1] == pytest.approx((15 - 3.924) / 9.81, rel=1e-12)
    assert kind.summarise(plan, a)["requirements"].columns["payload"][0] == 0.5


MOUNT_CELL = """
[cell]
name = "gantry press"
[requirements]
force = [100, 0, 0]
wrench_frame = "cell"
[[point]]
name = "press"
xyz = [0.5, 0.5, 0.3]
[[point]]
name = "free"
xyz = [0.4, 0.3, 0.3]
requirements = {force = [0, 0, 0]}
[mount]
x = [0, 0]
y = [0, 0]
yaws = [90, 0]
"""


def test_mount_search_serves_a_point_only_where_its_requirements_hold():
    # The gantry's y slide holds at most 60 N. Pressing 100 N along the cell's x axis: with the base
    # at yaw 0 the x slide takes it (margin (500 - 100) / 500), the z slide still holds its own 5 kg
    # (margin (200 - 49.05) / 200 = 0.75475, the smallest); at yaw 90 the base y axis is the cell's
    # -x, so the y slide must supply 100 N > 60 N: the point is reached but not served there.
    from workbench.studies.mount_search import MountSearch, MountSettings, evaluate_mounts
    from workbench.studies.cell import mount_transforms
    from workbench.studies.requirements import Requirements

    arm = gantry(efforts=(500, 60, 200))
    cell = parse_cell_text(MOUNT_CELL, "press.toml")
    pts = cell.points[:1]
    s = MountSettings(measure="min_sv", rows="translation", seeds=4,
                      requirements=(cell.requirements_for(point="press"),))
    M = mount_transforms(np.zeros(2), np.zeros(2), 0.0, np.radians([0.0, 90.0]), 0.0)
    ev = evaluate_mounts(arm, M, pts, s)
    assert ev["reached"][:, 0].tolist() == [True, False]
    assert ev["unmet"][:, 0].tolist() == [False, True]
    assert ev["torque_margin"][0, 0] == pytest.approx((200 - 5 * 9.81) / 200, rel=1e-9)
    assert ev["torque_margin"][1, 0] == pytest.approx((60 - 100) / 60, rel=1e-9)
    # without requirements both mounts serve it
    ev0 = evaluate_mounts(arm, M, pts, MountSettings(measure="min_sv", rows="translation", seeds=4))
    assert ev0["reached"][:, 0].tolist() == [True, True]
    # the whole study: yaw 0 ranks first, the ranking and the per-point table report the margin
    kind = MountSearch()
    spec = StudySpec(kind="mount_search", arm="gantry", cell="press.toml",
                     settings={"measure": "min_sv", "rows": "translation", "seeds": 4, "refine": 1,
                               "sensitivity": False})
    plan = kind.plan(spec, arm, cell)
    arrays = kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells))
    t = kind.summarise(plan, arrays)
    r = t["ranking"].columns
    assert r["yaw"][0] == pytest.approx(0.0) and r["reached"][0] == 100.0 and r["reached"][1] == 50.0
    assert r["torque_margin"][0] == pytest.approx((200 - 5 * 9.81) / 200, rel=1e-9)
    # yaw 90 serves only 'free'; its smallest margin is the unmet press point's, which says why
    assert r["torque_margin"][1] == pytest.approx((60 - 100) / 60, rel=1e-9)
    bp = t["best_points"].columns
    assert list(bp["requirements_met"]) == [1, 1] and list(bp["reached"]) == [1, 1]
    np.testing.assert_allclose(bp["torque_margin"], (200 - 5 * 9.81) / 200, rtol=1e-9)
