"""Requirements in the cell file ([requirements], per point / per path), joint acceleration limits
in arm files, and requirement_check at poses."""
from __future__ import annotations

import math

import numpy as np
import pytest

from workbench.arm.files import dumps_arm, parse_arm_dict, parse_arm_text
from workbench.kinematics import Arm
from workbench.studies.cell import CellFileError, parse_cell_text
from workbench.studies.requirements import Requirements, largest_tool_speed, requirement_check

D = math.pi / 180

CELL = '''
[cell]
name = "press cell"
length_unit = "mm"

[requirements]
force = [0, 0, 150]
payload = 12
payload_com = [0, 0, 100]

[[point]]
name = "a"
xyz = [800, 0, 300]
rpy = [180, 0, 0]
requirements = {force = [0, 0, 0], speed = 150}

[[point]]
name = "b"
xyz = [800, 300, 300]
rpy = [180, 0, 0]

[point.requirements]
payload = 5
wrench_frame = "cell"

[[point]]
name = "c"
xyz = [700, 300, 300]
rpy = [180, 0, 0]

[[path]]
name = "seam"
speed = 100
through = ["a", "b"]
requirements = {time = 3.5, payload_inertia = [0.2, 0.2, 0.1]}
'''


def test_cell_requirements_defaults_and_overrides():
    c = parse_cell_text(CELL, "press.toml")
    base = c.requirements
    np.testing.assert_array_equal(base.force, [0, 0, 150])
    assert base.payload.mass == 12.0
    np.testing.assert_allclose(base.payload.com, [0, 0, 0.1])  # mm -> m
    a = c.requirements_for(point="a")
    np.testing.assert_array_equal(a.force, [0, 0, 0])
    assert not np.any(a.force) and a.payload.mass == 12.0 and a.speed == pytest.approx(0.150)
    b = c.requirements_for(point="b")
    assert b.payload.mass == 5.0 and b.frame == "world"
    np.testing.assert_allclose(b.payload.com, [0, 0, 0.1])  # kept from the defaults
    assert c.requirements_for(point="c") is base  # no own table: the cell-wide ones
    p = c.requirements_for(path="seam")
    assert p.time == 3.5 and p.payload.mass == 12.0
    np.testing.assert_allclose(np.diag(p.payload.inertia), [0.2, 0.2, 0.1])
    assert "payload 5 kg" in b.describe() and "time 3.5 s" in p.describe()
    # no [requirements] at all: empty
    text = CELL.split("[requirements]")[0] + "[[point]]" + CELL.split("[[point]]", 1)[1]
    text = "\n".join(ln for ln in text.splitlines() if "requirements" not in ln and not ln.startswith(
        ("payload", "wrench_frame")))
    plain = parse_cell_text(text, "plain.toml")
    assert plain.requirements.force is None and plain.requirements_for(point="a").empty


@pytest.mark.parametrize("old,new,expect", [
    ("force = [0, 0, 150]", "force = [0, 0]", "press.toml: [requirements] 'force' (line 7): expected a list of 3"),
    ("force = [0, 0, 150]", "forse = [0, 0, 1]", "press.toml: [requirements] 'forse' (line 7): unknown requirement"),
    ("payload = 12", "payload = -1", "press.toml: [requirements] 'payload' (line 8): expected a number >= 0"),
    ("{force = [0, 0, 0], speed = 150}", "{speed = 0}",
     "press.toml: [[point]] 1 'requirements.speed' (line 15): expected a number > 0"),
    ("{force = [0, 0, 0], speed = 150}", "{time = 3}",
     "press.toml: [[point]] 1 'requirements.time' (line 15): 'time' applies to paths"),
    ("{time = 3.5, payload_inertia", "{speed = 5, payload_inertia",
     "press.toml: [[path]] 1 'requirements.speed' (line 35): a path's tool speed is its own 'speed' key"),
    ("payload_inertia = [0.2, 0.2, 0.1]", "payload_inertia = [[1, 2, 0], [0, 1, 0], [0, 0, 1]]",
     "press.toml: [[path]] 1 'requirements.payload_inertia' (line 35): expected a symmetric 3x3"),
    ("wrench_frame = \"cell\"", "wrench_frame = \"flange\"",
     "press.toml: [[point]] 2 'requirements.wrench_frame'"),
])
def test_bad_requirements_one_line(old, new, expect):
    assert old in CELL
    with pytest.raises(CellFileError) as e:
        parse_cell_text(CELL.replace(old, new), "press.toml")
    msg = str(e.value)
    assert msg.startswith(expect), msg
    assert "\n" not in msg


def two_link(**joint_extra):
    data = {"arm": {"name": "2R", "geometry": "dh"},
            "joint": [{"name": "j1", "a": 1.0, "alpha": 0, "d": 0, "theta": 0, **joint_extra},
                      {"name": "j2", "a": 0.5, "alpha": 0, "d": 0, "theta": 0, **joint_extra}]}
    return data


def test_arm_files_take_joint_acceleration_limits(tmp_path):
    data = two_link(max_speed=90, max_acceleration=360)
    m = parse_arm_dict(data)
    np.testing.assert_allclose(m.max_acceleration, [2 * math.pi, 2 * math.pi])  # deg/s^2 -> rad/s^2
    m2 = parse_arm_text(dumps_arm(m), "again.toml")
    np.testing.assert_allclose(m2.max_acceleration, m.max_acceleration)
    assert np.all(np.isnan(parse_arm_dict(two_link()).max_acceleration))
    from workbench.arm.files import ArmFileError
    with pytest.raises(ArmFileError, match="max_acceleration"):
        parse_arm_dict(two_link(max_acceleration=-1))
    from workbench.cli.info import format_info, summarise
    info = summarise(Arm(m), samples=200)
    assert info["joints"][0]["max_acceleration"] == pytest.approx(360.0)
    text = format_info(info)
    assert "max accel" in text and "360 deg/s^2" in text


def test_largest_tool_speed_two_link_worked_by_hand():
    # Planar 2R (l1 = 1, l2 = 0.5) at q = (0, 90 deg): tip (1, 0.5); Jacobian columns z x (p_tip - p_i):
    # (-0.5, 1) and (-0.5, 0). Along +x: q_dot = (0, -2) per m/s; along +y: (1, -1) per m/s.
    # Speed limits (1, 1.5) rad/s: +x allows 1.5 / 2 = 0.75 m/s (joint 2), +y 1 m/s (joint 1).
    data = two_link()
    data["joint"][0]["max_speed"] = 1 / D
    data["joint"][1]["max_speed"] = 1.5 / D
    arm = Arm(parse_arm_dict(data))
    q = np.array([0, 90 * D])
    s, j = largest_tool_speed(arm, q, [1, 0, 0])
    assert s == pytest.approx(0.75, rel=1e-12) and j == 1
    s, j = largest_tool_speed(arm, q, [0, 1, 0])
    assert s == pytest.approx(1.0, rel=1e-12) and j == 0
    # stretched out (q2 = 0) the tip cannot move along the arm: 0
    s, j = largest_tool_speed(arm, np.array([0.0, 0.0]), [1, 0, 0])
    assert s == 0.0 and j == -1
    # through requirement_check: asking 0.9 m/s along +x fails (ratio 1.2), along +y passes
    r = Requirements(speed=0.9, direction=np.array([1.0, 0, 0]))
    chk = requirement_check(arm, q, r)
    assert chk.speed_ratio == pytest.approx(1.2) and not bool(chk.ok)
    assert any("no link masses" in n for n in chk.notes)
    assert np.isnan(chk.torque_margin)
    chk = requirement_check(arm, q, Requirements(speed=0.9, direction=np.array([0.0, 1, 0])))
    assert chk.speed_ratio == pytest.approx(0.9) and bool(chk.ok)


def test_requirement_check_torques_worked_by_hand():
    # The vertical 2R of tests/reference/test_holding.py (limits 60 and 15 N m) at q = 0 pressing
    # 10 N down (cell frame): tau = (23.544 - 18, 3.924 - 8) = (5.544, -4.076) N m; margins
    # (1 - 5.544/60, 1 - 4.076/15): joint 2 limits at 0.72827. Adding 1 kg 0.2 m ahead of the TCP
    # (levers 2.0 and 1.0 m): tau = (5.544 + 19.62, -4.076 + 9.81) = (25.164, 5.734).
    from tests.reference.test_holding import vertical_two_link

    arm = vertical_two_link()
    r = Requirements(force=np.array([0, 0, -10.0]), frame="world")
    chk = requirement_check(arm, np.zeros(2), r)
    np.testing.assert_allclose(chk.tau, [5.544, -4.076], rtol=1e-12)
    assert chk.torque_margin == pytest.approx(1 - 4.076 / 15, rel=1e-12) and chk.torque_joint == 1 and chk.ok
    from workbench.measures import Payload
    r2 = Requirements(force=np.array([0, 0, -10.0]), frame="world", payload=Payload(1.0, [0.2, 0, 0]))
    chk = requirement_check(arm, np.zeros((3, 2)), r2)
    np.testing.assert_allclose(chk.tau, np.tile([25.164, 5.734], (3, 1)), rtol=1e-12)
    np.testing.assert_allclose(chk.payload, np.tile([19.62, 9.81], (3, 1)), rtol=1e-12)
    # 100 N down overloads both joints: fails, joint 2 worst
    chk = requirement_check(arm, np.zeros(2), Requirements(force=np.array([0, 0, -100.0]), frame="world"))
    assert not bool(chk.ok) and chk.torque_margin < 0 and chk.torque_joint == 1


def test_requirement_check_per_mount_equals_the_mounted_arm():
    # requirement_check(mounts=M) works in the base frame with gravity R^T g per pose; it must give
    # the holding torques of workbench.measures on an arm mounted at each M (tilted, turned mounts,
    # a payload with an offset, a tool force in the tool frame and a moment in the cell frame)
    from dataclasses import replace as dreplace
    from pathlib import Path

    from workbench import load_arm
    from workbench.arm.transforms import make_transform
    from workbench.measures import Payload, holding_torques

    arm = load_arm(Path(__file__).resolve().parents[2] / "arms" / "demo_s6.toml")
    rng = np.random.default_rng(8)
    Q = arm.random_q(6, rng)
    M = np.array([make_transform(rng.normal(size=3), rng.uniform(-np.pi, np.pi, 3)) for _ in range(6)])
    pay = Payload(7.0, [0.02, -0.01, 0.12])
    for frame in ("tool", "world"):
        r = Requirements(force=np.array([10.0, -20, 150]), moment=np.array([1.0, 2, -3]), frame=frame, payload=pay)
        chk = requirement_check(arm, Q, r, mounts=M)
        for k in range(6):
            marm = Arm(dreplace(arm.model, mount=M[k]))
            tau = holding_torques(marm, Q[k], force=r.force, moment=r.moment, payload=pay, frame=frame)
            np.testing.assert_allclose(chk.tau[k], tau, rtol=1e-10, atol=1e-9)
