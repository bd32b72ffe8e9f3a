"""URDF import: chain extraction, fixed-joint folding, inertials, and refusal of hostile or
unsupported files with one clear line."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from workbench import load_arm
from workbench.arm import ArmFileError, dumps_arm, parse_arm_text, read_arm_model, same_arm
from workbench.arm.transforms import make_transform, rot_y
from workbench.arm.urdf import parse_urdf_text, read_urdf

ARMS = Path(__file__).resolve().parents[2] / "arms"
U6 = (ARMS / "demo_u6.urdf").read_text(encoding="utf-8")


def _joint(name, parent, child, jtype="revolute", xyz="0 0 0", rpy="0 0 0", axis="0 0 1",
           limit='<limit lower="-1" upper="1" effort="10" velocity="1"/>', extra=""):
    return (f'<joint name="{name}" type="{jtype}"><parent link="{parent}"/><child link="{child}"/>'
            f'<origin xyz="{xyz}" rpy="{rpy}"/><axis xyz="{axis}"/>{limit}{extra}</joint>')


def _robot(links, joints, name="t"):
    ls = "".join(f'<link name="{n}"/>' for n in links)
    return f'<?xml version="1.0"?><robot name="{name}">{ls}{"".join(joints)}</robot>'


# ---- the demo URDF, checked by hand ------------------------------------------------------------

def test_demo_u6_chain_limits_and_efforts():
    m = read_urdf(ARMS / "demo_u6.urdf")
    assert m.name == "U6 demo arm (URDF)"
    assert m.names == ("joint_1", "joint_2", "joint_3", "joint_4", "joint_5", "joint_6")
    assert tuple(m.kinds) == (0,) * 6
    # URDF limits are in rad, efforts in N m, velocities in rad/s (URDF joint element; common practice)
    assert (m.joints[1].lower, m.joints[1].upper) == (-2.2, 1.6)
    assert m.joints[0].max_effort == 420 and m.joints[0].max_speed == 2.4
    # continuous = unlimited revolute, with its effort and velocity kept
    assert math.isinf(m.joints[5].lower) and math.isinf(m.joints[5].upper)
    assert m.joints[5].max_effort == 25 and m.joints[5].max_speed == 7.0


def test_demo_u6_fixed_joints_are_folded():
    m = read_urdf(ARMS / "demo_u6.urdf")
    # base_to_pedestal (z 0.10) is folded into joint_1's origin (z 0.25)
    np.testing.assert_allclose(m.joints[0].origin[:3, 3], [0, 0, 0.35], atol=1e-15)
    # link_6_to_flange (x 0.02, pitch 90 deg) and flange_to_tool0 (z 0.10) become the flange transform
    expected = make_transform([0.02, 0, 0], [0, math.pi / 2, 0]) @ make_transform([0, 0, 0.10], [0, 0, 0])
    np.testing.assert_allclose(m.end, expected, atol=1e-15)
    np.testing.assert_allclose(m.end[:3, 3], [0.12, 0, 0], atol=1e-12)
    np.testing.assert_allclose(m.tool, np.eye(4))


def test_demo_u6_zero_pose_by_hand():
    # straight upper arm, horizontal forearm: TCP x = 0.10 + 0.25 + 0.30 + 0.08 + 0.02 + 0.10,
    # z = 0.10 + 0.25 + 0.15 + 0.55 + 0.08; the tool's z axis points along base x (pitch 90 deg)
    arm = load_arm(ARMS / "demo_u6.urdf")
    T = arm.fk(np.zeros(6))
    np.testing.assert_allclose(T[:3, 3], [0.85, 0, 1.13], atol=1e-12)
    np.testing.assert_allclose(T[:3, 2], [1, 0, 0], atol=1e-12)
    # Jacobian columns: v_i = z_i x (p - o_i), w_i = z_i (common practice)
    J = arm.jacobian(np.zeros(6))
    expected = np.array([
        [0, 0.63, 0.08, 0, 0, 0],
        [0.85, 0, 0, 0, 0, 0],
        [0, -0.75, -0.75, 0, -0.20, 0],
        [0, 0, 0, 1, 0, 1],
        [0, 1, 1, 0, 1, 0],
        [1, 0, 0, 0, 0, 0]])
    np.testing.assert_allclose(J, expected, atol=1e-12)
    # joints 4 and 6 share the forearm axis here: a wrist singularity (rank 5)
    assert np.linalg.matrix_rank(J, tol=1e-9) == 5


def test_demo_u6_masses_are_lumped_in_joint_frames():
    m = read_urdf(ARMS / "demo_u6.urdf")
    np.testing.assert_allclose(m.masses, [9.0, 11.0, 5.5, 2.6, 1.4, 0.5])
    # the inertial origin's rotation does not move the centre of mass
    np.testing.assert_allclose(m.joints[0].com, [0.02, 0, 0.08], atol=1e-15)
    np.testing.assert_allclose(m.joints[1].com, [0, 0, 0.27], atol=1e-15)
    # link_6 (0.3 kg at x 0.01) + flange (0.2 kg at 0.01 along the flange z, which is base x after
    # the 90 deg pitch, from x 0.02): (0.3 * 0.01 + 0.2 * 0.03) / 0.5 = 0.018
    np.testing.assert_allclose(m.joints[5].com, [0.018, 0, 0], atol=1e-9)


def test_urdf_to_arm_file_round_trip(tmp_path):
    m = read_urdf(ARMS / "demo_u6.urdf")
    text = dumps_arm(m)
    b = parse_arm_text(text, "u6.toml")
    assert same_arm(m, b, atol=1e-12)
    assert "[flange]" in text and b.source["arm"]["geometry"] == "origins"


def test_load_arm_passes_base_and_tip_links():
    arm = load_arm(ARMS / "demo_u6.urdf", base_link="link_2", tip_link="link_5")
    assert arm.names == ("joint_3", "joint_4", "joint_5")
    np.testing.assert_allclose(arm.model.joints[0].origin[:3, 3], [0, 0, 0.55])
    np.testing.assert_allclose(arm.model.end, np.eye(4))
    m = read_arm_model(ARMS / "demo_u6.urdf", tip_link="link_6")
    assert m.n == 6 and np.allclose(m.end, np.eye(4))


def test_inertial_rotation_and_axis_normalisation():
    text = _robot(["a", "b"], [_joint("j", "a", "b", axis="0 0 2")]).replace(
        '<link name="b"/>', '<link name="b"><inertial><origin xyz="0.1 0.2 0.3" rpy="1 2 3"/>'
        '<mass value="2"/></inertial></link>')
    m = parse_urdf_text(text)
    np.testing.assert_allclose(m.joints[0].axis, [0, 0, 1])
    np.testing.assert_allclose(m.joints[0].com, [0.1, 0.2, 0.3])
    assert m.joints[0].mass == 2


def test_default_axis_is_x_and_missing_inertials_give_no_mass():
    text = _robot(["a", "b"], [_joint("j", "a", "b").replace('<axis xyz="0 0 1"/>', "")])
    m = parse_urdf_text(text)
    np.testing.assert_allclose(m.joints[0].axis, [1, 0, 0])
    assert m.joints[0].mass is None and not m.has_masses


def test_prismatic_joint_and_zero_effort_means_not_given():
    text = _robot(["a", "b"], [_joint("slide", "a", "b", jtype="prismatic",
                                      limit='<limit lower="0" upper="0.5" effort="0" velocity="0"/>')])
    m = parse_urdf_text(text)
    assert m.joints[0].kind == "prismatic" and (m.joints[0].lower, m.joints[0].upper) == (0.0, 0.5)
    assert m.joints[0].max_effort is None and m.joints[0].max_speed is None


def test_side_branches_are_ignored_but_fixed_children_add_mass():
    links = ["base", "l1", "l2", "cam", "finger"]
    joints = [_joint("j1", "base", "l1"), _joint("j2", "l1", "l2", axis="0 1 0"),
              _joint("cam_mount", "l1", "cam", jtype="fixed", xyz="0 0 0.5", limit=""),
              _joint("finger", "l2", "finger", jtype="prismatic", extra='<mimic joint="j2"/>')]
    text = _robot(links, joints).replace('<link name="l1"/>', '<link name="l1"><inertial><mass value="1"/></inertial></link>') \
        .replace('<link name="cam"/>', '<link name="cam"><inertial><mass value="1"/></inertial></link>')
    with pytest.raises(ArmFileError, match=r"2 leaf links below 'base' \((cam, finger|finger, cam)\); choose the tip link"):
        parse_urdf_text(text)
    m = parse_urdf_text(text, tip_link="l2")  # the mimic joint is off the chain: not refused
    assert m.names == ("j1", "j2")
    assert m.joints[0].mass == 2.0
    np.testing.assert_allclose(m.joints[0].com, [0, 0, 0.25])   # half way to the camera
    with pytest.raises(ArmFileError, match=r"joint 'finger' mimics joint 'j2'; mimic joints are not supported"):
        parse_urdf_text(text, tip_link="finger")


# ---- refused with one line -----------------------------------------------------------------------

GOOD2 = _robot(["a", "b", "c"], [_joint("j1", "a", "b"), _joint("j2", "b", "c")])

BAD = {
    "billion laughs": ('<?xml version="1.0"?><!DOCTYPE lolz [<!ENTITY lol "lol">'
                       '<!ENTITY lol2 "&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;">'
                       '<!ENTITY lol3 "&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;">]>'
                       '<robot name="x"><link name="&lol3;"/></robot>', r"contains a DTD .*refused for safety"),
    "external entity": ('<?xml version="1.0"?><!DOCTYPE r [<!ENTITY x SYSTEM "file:///etc/passwd">]>'
                        '<robot name="&x;"><link name="a"/></robot>', r"refused for safety"),
    "external DTD": ('<?xml version="1.0"?><!DOCTYPE robot SYSTEM "http://example.invalid/r.dtd">'
                     '<robot name="x"><link name="a"/></robot>', r"refused for safety"),
    "malformed": ('<robot name="x"><link name="a"></robot>', r"malformed XML: mismatched tag: line 1, column \d+"),
    "empty": ("", r"malformed XML"),
    "not a robot": ('<sdf version="1.6"/>', r"root element is <sdf>; expected <robot>"),
    "xacro": ('<robot name="r" xmlns:xacro="http://www.ros.org/wiki/xacro"><xacro:property name="a" value="1"/>'
              '<link name="a"/></robot>', r"xacro macros .*expand them"),
    "no links": ('<robot name="r"/>', r"no <link> elements"),
    "two roots": (_robot(["a", "b", "c"], [_joint("j", "a", "b")]), r"2 root links \(a, c\); a URDF must have exactly one"),
    "cycle": (_robot(["a", "b", "c"], [_joint("j1", "a", "b"), _joint("j2", "b", "c"), _joint("j3", "c", "b")]),
              r"link 'b' already has parent joint 'j1' \(a closed loop\)"),
    "pure cycle": (_robot(["a", "b"], [_joint("j1", "a", "b"), _joint("j2", "b", "a")]),
                   r"the joints form a cycle through links"),
    "self loop": (_robot(["a"], [_joint("j1", "a", "a")]), r"parent and child are the same link 'a'"),
    "missing parent": (_robot(["a", "b"], [_joint("j1", "ghost", "b")]),
                       r"joint 'j1': <parent> names link 'ghost', which is not defined"),
    "missing child element": (_robot(["a", "b"], [_joint("j1", "a", "b").replace('<child link="b"/>', "")]),
                              r"joint 'j1': missing <child link=\"...\"/>"),
    "duplicate link": (_robot(["a", "a"], []), r"<link name='a'> is defined twice"),
    "duplicate joint": (_robot(["a", "b", "c"], [_joint("j", "a", "b"), _joint("j", "b", "c")]), r"joint 'j': defined twice"),
    "floating": (GOOD2.replace('type="revolute"', 'type="floating"', 1),
                 r"joint 'j1' is floating; only revolute, continuous, prismatic and fixed"),
    "planar": (GOOD2.replace('name="j2" type="revolute"', 'name="j2" type="planar"'), r"joint 'j2' is planar"),
    "unknown type": (GOOD2.replace('type="revolute"', 'type="ball"', 1), r"joint 'j1': unknown type 'ball'"),
    "mimic": (GOOD2.replace("</joint></robot>", '<mimic joint="j1"/></joint></robot>'), r"joint 'j2' mimics joint 'j1'"),
    "NaN origin": (GOOD2.replace('xyz="0 0 0"', 'xyz="nan 0 0"', 1), r"joint 'j1': origin xyz: expected a finite number, got 'nan'"),
    "inf limit": (GOOD2.replace('upper="1"', 'upper="inf"', 1), r"joint 'j1': limit upper: expected a finite number"),
    "text number": (GOOD2.replace('effort="10"', 'effort="lots"', 1), r"limit effort: expected a number, got 'lots'"),
    "two numbers": (GOOD2.replace('rpy="0 0 0"', 'rpy="0 0"', 1), r"origin rpy: expected three numbers, got '0 0'"),
    "zero axis": (GOOD2.replace('axis xyz="0 0 1"', 'axis xyz="0 0 0"', 1), r"joint 'j1': <axis xyz> has zero length"),
    "reversed limits": (GOOD2.replace('lower="-1" upper="1"', 'lower="1" upper="-1"', 1),
                        r"joint 'j1': limit lower 1 must be below upper -1"),
    "missing limit": (GOOD2.replace('<limit lower="-1" upper="1" effort="10" velocity="1"/>', "", 1),
                      r"joint 'j1': revolute joint without <limit>"),
    "negative mass": (GOOD2.replace('<link name="b"/>', '<link name="b"><inertial><mass value="-1"/></inertial></link>'),
                      r"link 'b': inertial mass: expected a number >= 0"),
    "inertial without mass": (GOOD2.replace('<link name="b"/>', '<link name="b"><inertial/></link>'),
                              r"link 'b': <inertial> without <mass"),
    "only fixed": (_robot(["a", "b"], [_joint("j", "a", "b", jtype="fixed")]), r"has no moving joints"),
    "too many joints": (_robot([f"l{k}" for k in range(41)], [_joint(f"j{k}", f"l{k}", f"l{k + 1}") for k in range(40)]),
                        r"has 40 moving joints; at most 32"),
}


@pytest.mark.parametrize("case", sorted(BAD), ids=str)
def test_bad_urdf_gives_one_clear_error(case, tmp_path):
    text, pattern = BAD[case]
    path = tmp_path / "bad.urdf"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ArmFileError, match=pattern) as info:
        read_arm_model(path)
    msg = str(info.value)
    assert "\n" not in msg and msg.startswith(str(path))


def test_billion_laughs_is_refused_quickly():
    import time

    depth = "".join(f'<!ENTITY e{k} "' + f"&e{k - 1};" * 10 + '">' for k in range(1, 10))
    text = f'<?xml version="1.0"?><!DOCTYPE r [<!ENTITY e0 "ha">{depth}]><robot name="&e9;"><link name="a"/></robot>'
    t0 = time.perf_counter()
    with pytest.raises(ArmFileError, match="refused for safety"):
        parse_urdf_text(text)
    assert time.perf_counter() - t0 < 1.0  # nothing was expanded (10^9 copies otherwise)


def test_base_and_tip_errors():
    with pytest.raises(ArmFileError, match=r"base link 'nope' is not defined; links are base_link, pedestal"):
        read_urdf(ARMS / "demo_u6.urdf", base_link="nope")
    with pytest.raises(ArmFileError, match=r"tip link 'nope' is not defined"):
        read_urdf(ARMS / "demo_u6.urdf", tip_link="nope")
    with pytest.raises(ArmFileError, match=r"tip link 'link_2' is not below base link 'link_4'"):
        read_urdf(ARMS / "demo_u6.urdf", base_link="link_4", tip_link="link_2")
    with pytest.raises(ArmFileError, match=r"the chain 'link_6' -> 'tool0' has no moving joints"):
        read_urdf(ARMS / "demo_u6.urdf", base_link="link_6")


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(ArmFileError, match=r"no such file"):
        read_urdf(tmp_path / "none.urdf")
    with pytest.raises(ArmFileError, match=r"is a directory"):
        read_urdf(tmp_path)


def test_urdf_matches_an_arm_file_written_by_hand():
    # the same arm as an "origins" arm file; both must give the same Jacobian everywhere
    toml = """
[arm]
name = "U6 by hand"
geometry = "origins"
[[joint]]
name = "joint_1"
xyz = [0, 0, 0.35]
axis = [0, 0, 1]
[[joint]]
name = "joint_2"
xyz = [0.10, 0, 0.15]
axis = [0, 1, 0]
[[joint]]
name = "joint_3"
xyz = [0, 0, 0.55]
axis = [0, 1, 0]
[[joint]]
name = "joint_4"
xyz = [0.25, 0, 0.08]
axis = [1, 0, 0]
[[joint]]
name = "joint_5"
xyz = [0.30, 0, 0]
axis = [0, 1, 0]
[[joint]]
name = "joint_6"
xyz = [0.08, 0, 0]
axis = [1, 0, 0]
[flange]
xyz = [0.02, 0, 0]
rpy = [0, 90, 0]
[tool]
xyz = [0, 0, 0.10]
"""
    a = load_arm(ARMS / "demo_u6.urdf")
    from workbench.kinematics import Arm

    b = Arm(parse_arm_text(toml, "u6_by_hand.toml"))
    q = a.random_q(100, rng=3)
    np.testing.assert_allclose(a.jacobian(q), b.jacobian(q), atol=1e-12)
    np.testing.assert_allclose(a.fk(q), b.fk(q), atol=1e-12)
    assert np.allclose(rot_y(math.pi / 2)[:3, 2], [1, 0, 0])
