"""Arm files (our TOML schema): lossless round trips, equivalent descriptions, and one clear
error for every kind of bad input."""
from __future__ import annotations

import copy
import math
import os
import tomllib
from pathlib import Path

import numpy as np
import pytest

from workbench.arm import (ArmFileError, ArmModel, Joint, arm_to_dict, dumps_arm, parse_arm_dict,
                           parse_arm_text, read_arm_file, read_arm_model, same_arm, write_arm_file)
from workbench.arm.files import MAX_JOINTS
from workbench.arm.transforms import make_transform, rot_x, rot_z
from workbench.errors import WorkbenchError
from workbench.kinematics import Arm

ARMS = Path(__file__).resolve().parents[2] / "arms"
TOML_ARMS = sorted(ARMS.glob("*.toml"))


def test_demo_arms_exist():
    names = {p.name for p in TOML_ARMS}
    assert {"demo_s6.toml", "demo_o6.toml", "demo_r7.toml", "demo_scara4.toml", "demo_p3.toml",
            "demo_planar2r.toml"} <= names
    assert (ARMS / "demo_u6.urdf").is_file()


# ---- round trips -----------------------------------------------------------------------------

@pytest.mark.parametrize("path", TOML_ARMS, ids=lambda p: p.name)
def test_round_trip_demo_arm(path, tmp_path):
    a = read_arm_file(path)
    out = tmp_path / "copy.toml"
    write_arm_file(a, out)
    b = read_arm_file(out)
    assert same_arm(a, b, atol=0.0)
    assert b.source == a.source == tomllib.loads(path.read_text(encoding="utf-8"))
    # writing again gives the very same text
    assert dumps_arm(b) == out.read_text(encoding="utf-8")
    assert not list(tmp_path.glob("*.tmp*"))  # nothing half-written left behind


def _code_arm() -> ArmModel:
    """An arm built in code with every field set, including a flange offset and a prismatic joint."""
    j = [
        Joint("yaw", "revolute", make_transform([0, 0, 0.3], [0, 0, 0.2]), np.array([0, 0, 1.0]),
              -2.0, 2.5, 3.0, 150.0, 7.5, np.array([0.01, 0.02, 0.1])),
        Joint("lift", "prismatic", make_transform([0.2, 0.05, 0], [math.pi / 2, 0.1, -0.3]),
              np.array([0.6, 0.0, 0.8]), 0.0, 0.4, 0.5, 900.0, 3.0, np.array([0, 0, -0.05])),
        Joint("tilt", "revolute", make_transform([0.1, 0, 0.02], [0.3, -1.2, 2.9]), np.array([0, 1.0, 0]),
              max_speed=None, max_effort=None, mass=None, com=None),
    ]
    return ArmModel("Code arm", tuple(j), end=make_transform([0, 0, 0.05], [0, math.pi / 2, 0]),
                    tool=make_transform([0.01, 0, 0.12], [0.1, 0.2, 0.3]),
                    mount=make_transform([1.0, -0.5, 0.2], [0, 0, math.pi / 3]),
                    home=np.array([0.1, 0.2, -0.3]), description="built in code", tool_mass=1.25,
                    tool_com=np.array([0, 0.01, 0.04]))


def test_round_trip_model_built_in_code(tmp_path):
    a = _code_arm()
    out = tmp_path / "code.toml"
    write_arm_file(a, out)
    b = read_arm_file(out)
    assert same_arm(a, b, atol=1e-12)
    d = arm_to_dict(a)
    assert b.source == d                               # same dict
    c = read_arm_file(_write(tmp_path / "again.toml", dumps_arm(b)))
    assert c.source == b.source and same_arm(b, c, atol=0.0)
    # the unlimited joint stays unlimited, missing optional values stay missing
    assert math.isinf(b.joints[2].lower) and b.joints[2].max_speed is None and b.joints[2].mass is None
    # and the kinematics agree
    q = np.array([[0.3, 0.1, -0.7], [-1.0, 0.35, 2.0]])
    np.testing.assert_allclose(Arm(a).jacobian(q), Arm(b).jacobian(q), atol=1e-12)
    np.testing.assert_allclose(Arm(a).fk(q, world=True), Arm(b).fk(q, world=True), atol=1e-12)


def test_changed_model_is_written_from_the_model_not_the_stale_source(tmp_path):
    import dataclasses

    a = read_arm_file(ARMS / "demo_s6.toml")
    moved = dataclasses.replace(a, mount=make_transform([0, 0, 0.5], [0, 0, 0]))
    out = tmp_path / "moved.toml"
    write_arm_file(moved, out)
    b = read_arm_file(out)
    assert same_arm(moved, b, atol=1e-12) and not same_arm(a, b)
    assert b.source["mount"]["xyz"] == [0.0, 0.0, 0.5]


def test_write_refuses_a_directory(tmp_path):
    with pytest.raises(ArmFileError, match="is a directory"):
        write_arm_file(_code_arm(), tmp_path)


def test_one_sided_limit_cannot_be_written():
    a = _code_arm()
    j = a.joints[2]
    import dataclasses

    b = dataclasses.replace(a, joints=a.joints[:2] + (dataclasses.replace(j, lower=-1.0),))
    with pytest.raises(WorkbenchError, match="one-sided limit"):
        dumps_arm(b)


def _write(path, text):
    Path(path).write_text(text, encoding="utf-8")
    return path


# ---- equivalent descriptions -------------------------------------------------------------------

S6_MDH = """
[arm]
name = "S6 demo arm (spherical wrist)"
geometry = "mdh"
[[joint]]
name = "j1"
a = 0
alpha = 0
d = 0.45
theta = 0
[[joint]]
name = "j2"
a = 0.15
alpha = -90
d = 0
theta = -90
[[joint]]
name = "j3"
a = 0.60
alpha = 0
d = 0
theta = 0
[[joint]]
name = "j4"
a = 0.12
alpha = -90
d = 0.62
theta = 0
[[joint]]
name = "j5"
a = 0
alpha = 90
d = 0
theta = 0
[[joint]]
name = "j6"
a = 0
alpha = -90
d = 0.10
theta = 0
[tool]
xyz = [0, 0, 0.12]
"""


def test_std_dh_and_modified_dh_of_the_same_arm_give_the_same_jacobian():
    # the same S6 geometry written by hand in modified DH rows: row i holds a_{i-1}, alpha_{i-1} of
    # standard DH and d_i, theta_i (Craig, "Introduction to Robotics", 3rd ed. 2005, sec. 3.4 vs
    # Denavit & Hartenberg 1955: common practice)
    std = Arm(read_arm_file(ARMS / "demo_s6.toml"))
    mdh = Arm(parse_arm_text(S6_MDH, "s6_mdh.toml"))
    q = std.random_q(200, rng=1)
    for frame in ("tcp", "flange"):
        np.testing.assert_allclose(std.jacobian(q, frame=frame), mdh.jacobian(q, frame=frame), atol=1e-12)
        np.testing.assert_allclose(std.fk(q, frame=frame), mdh.fk(q, frame=frame), atol=1e-12)


def _dh_to_mdh(d: dict) -> dict:
    """Rewrite a standard-DH arm dict as modified DH (a, alpha shift down one row; the last a,
    alpha go into [flange])."""
    out = copy.deepcopy(d)
    out["arm"]["geometry"] = "mdh"
    rows = out["joint"]
    prev = (0, 0)
    for r in rows:
        cur = (r["a"], r["alpha"])
        r["a"], r["alpha"] = prev
        prev = cur
        r.pop("com", None)  # COMs are given in different link frames; not compared here
    out["flange"] = {"xyz": [prev[0], 0, 0], "rpy": [prev[1], 0, 0]}
    assert "flange" not in d
    return out


def test_std_and_modified_dh_with_a_prismatic_joint_in_mm():
    d = tomllib.loads((ARMS / "demo_scara4.toml").read_text(encoding="utf-8"))
    std = Arm(parse_arm_dict(d, "scara"))
    mdh = Arm(parse_arm_dict(_dh_to_mdh(d), "scara_mdh"))
    q = std.random_q(200, rng=2)
    np.testing.assert_allclose(std.jacobian(q), mdh.jacobian(q), atol=1e-12)


def test_metres_and_millimetres_give_the_same_model():
    d = tomllib.loads((ARMS / "demo_scara4.toml").read_text(encoding="utf-8"))
    m = copy.deepcopy(d)
    m["arm"]["length_unit"] = "m"
    for r in m["joint"]:
        r["a"] /= 1000
        r["d"] /= 1000
        r["com"] = [x / 1000 for x in r["com"]]
        if r["type"] == "prismatic":
            r["limits"] = [x / 1000 for x in r["limits"]]
            r["max_speed"] /= 1000
    m["arm"]["home"][2] /= 1000
    m["tool"]["xyz"] = [x / 1000 for x in m["tool"]["xyz"]]
    m["tool"]["com"] = [x / 1000 for x in m["tool"]["com"]]
    a = parse_arm_dict(d, "mm")
    b = parse_arm_dict(m, "m")
    assert same_arm(a, b, atol=1e-15)
    assert a.joints[2].upper == pytest.approx(0.2) and a.joints[2].max_speed == pytest.approx(1.1)


def test_origins_and_std_dh_agree_for_the_s6_arm():
    # the origins description written from the DH model (by the writer) reads back to the same
    # chain, so both geometries name one arm
    a = read_arm_file(ARMS / "demo_s6.toml")
    import dataclasses

    b = parse_arm_text(dumps_arm(dataclasses.replace(a, source=None)), "s6_origins")
    assert b.source["arm"]["geometry"] == "origins"
    assert same_arm(a, b, atol=1e-12)


def test_rotation_matrix_form_equals_rpy():
    base = (ARMS / "demo_p3.toml").read_text(encoding="utf-8")
    a = parse_arm_text(base.replace('[mount]                   # base plane (x, y) turned upright: base y points up in the cell\nxyz = [0, 0, 0.8]\nrpy = [90, 0, 0]',
                                    '[mount]\nxyz = [0, 0, 0.8]\nrot = [[1, 0, 0], [0, 0, -1], [0, 1, 0]]'), "rot")
    b = read_arm_file(ARMS / "demo_p3.toml")
    assert a.source["mount"]["rot"]
    np.testing.assert_allclose(a.mount, b.mount, atol=1e-15)
    np.testing.assert_allclose(b.mount[:3, :3], rot_x(math.pi / 2)[:3, :3], atol=1e-15)


def test_dh_com_is_moved_into_the_joint_frame():
    # S6 joint 2: DH link frame 2 sits a = 0.60 m along x of the joint frame (theta offset -90 deg
    # turns it): the COM [-0.30, 0, 0.06] of the file is at [0.30, 0, 0.06] from the joint origin
    a = read_arm_file(ARMS / "demo_s6.toml")
    post = np.eye(4)
    post[0, 3] = 0.60
    np.testing.assert_allclose(a.joints[1].com, (post @ [-0.30, 0, 0.06, 1])[:3], atol=1e-15)
    assert a.joints[1].com == pytest.approx([0.30, 0.0, 0.06])


def test_dh_origin_matches_the_textbook_link_transform():
    # std DH: A_i = Rz(theta) Tz(d) Tx(a) Rx(alpha) (Denavit & Hartenberg 1955; common practice)
    a = Arm(read_arm_file(ARMS / "demo_s6.toml"))
    rows = [(0.15, -90, 0.45, 0), (0.60, 0, 0, -90), (0.12, -90, 0, 0), (0, 90, 0.62, 0), (0, -90, 0, 0),
            (0, 0, 0.10, 0)]
    q = np.radians([10, -20, 30, -40, 50, -60])
    T = np.eye(4)
    for (ai, al, di, th), qi in zip(rows, q):
        Tz = np.eye(4)
        Tz[2, 3] = di
        Tx = np.eye(4)
        Tx[0, 3] = ai
        T = T @ rot_z(np.radians(th) + qi) @ Tz @ Tx @ rot_x(np.radians(al))
    tool = np.eye(4)
    tool[2, 3] = 0.12
    np.testing.assert_allclose(a.fk(q), T @ tool, atol=1e-14)


# ---- bad input: one clear line each --------------------------------------------------------------

P3 = (ARMS / "demo_p3.toml").read_text(encoding="utf-8")
S6 = (ARMS / "demo_s6.toml").read_text(encoding="utf-8")


def _sub(text, old, new):
    assert old in text, old
    return text.replace(old, new, 1)


BAD = {
    "malformed TOML": (_sub(P3, 'name = "p2"', 'name = "p2'), r"bad\.toml: malformed TOML: .*line 22"),
    "unknown joint key": (_sub(P3, "max_speed = 150", "max_sped = 150"),
                          r"bad\.toml:27: joint 2 \('p2'\) 'max_sped': unknown key 'max_sped'; allowed keys"),
    "unknown arm key": (_sub(P3, 'length_unit = "m"', 'length_units = "m"'),
                        r"bad\.toml:7: \[arm\] 'length_units': unknown key"),
    "unknown table": (P3 + "\n[gripper]\nmass = 1\n", r"bad\.toml:\d+: unknown table 'gripper'"),
    "missing arm": (P3.replace("[arm]", "[armx]"), r"unknown table 'armx'"),
    "missing arm name": (_sub(P3, 'name = "P3 demo planar arm"', ""), r"\[arm\]: missing key 'name'"),
    "missing axis": (_sub(P3, 'xyz = [0.4, 0, 0]\naxis = [0, 0, 1]', 'xyz = [0.4, 0, 0]'),
                     r"joint 3 \('p3'\): missing key 'axis'"),
    "missing DH field": (_sub(S6, "a = 0.60\n", ""), r"bad\.toml:\d+: joint 2 \('j2'\): missing key 'a'"),
    "missing joints": ('[arm]\nname = "x"\n', r"no \[\[joint\]\] tables"),
    "missing joint name": ('[arm]\nname = "x"\n[[joint]]\naxis = [0, 0, 1]\n',
                           r"bad\.toml:3: joint 1: missing key 'name'"),
    "NaN": (_sub(P3, "mass = 3.5", "mass = nan"), r"bad\.toml:29: joint 2 \('p2'\) 'mass': expected a finite number, got nan"),
    "inf": (_sub(P3, "xyz = [0.4, 0, 0]", "xyz = [0.4, inf, 0]"), r"joint 3 \('p3'\) 'xyz': expected a finite number, got inf"),
    "-inf limit": (_sub(P3, "limits = [-170, 170]", "limits = [-inf, 170]"), r"joint 1 \('p1'\) 'limits': expected a finite"),
    "huge integer": (_sub(P3, "mass = 3.5", "mass = 1" + "0" * 400), r"'mass': expected a number of magnitude below"),
    "huge float": (_sub(S6, "d = 0.45", "d = 1e300"), r"joint 1 \('j1'\) 'd': expected a number of magnitude below"),
    "string for number": (_sub(S6, "alpha = -90", 'alpha = "-90"'), r"'alpha': expected a number, got '-90'"),
    "bool for number": (_sub(P3, "max_effort = 40", "max_effort = true"), r"'max_effort': expected a number, got True"),
    "zero-length axis": (_sub(P3, 'xyz = [0.4, 0, 0]\naxis = [0, 0, 1]', 'xyz = [0.4, 0, 0]\naxis = [0, 0, 0]'),
                         r"joint 3 \('p3'\) 'axis': zero-length axis"),
    "non-unit axis": (_sub(P3, 'xyz = [0.4, 0, 0]\naxis = [0, 0, 1]', 'xyz = [0.4, 0, 0]\naxis = [0, 0, 2]'),
                      r"'axis': expected a unit vector, got \[0, 0, 2\] of length 2"),
    "short axis list": (_sub(P3, 'xyz = [0.4, 0, 0]\naxis = [0, 0, 1]', 'xyz = [0.4, 0, 0]\naxis = [0, 1]'),
                        r"'axis': expected a list of 3 numbers"),
    "reversed limits": (_sub(P3, "limits = [-150, 150]\nmax_speed = 200", "limits = [150, -150]\nmax_speed = 200"),
                        r"bad\.toml:37: joint 3 \('p3'\) 'limits': lower 150 must be below upper -150"),
    "empty limits range": (_sub(P3, "limits = [-150, 150]\nmax_speed = 200", "limits = [5, 5]\nmax_speed = 200"),
                           r"'limits': lower 5 must be below upper 5"),
    "limits not a pair": (_sub(P3, "limits = [-170, 170]", "limits = 170"), r"'limits': expected \[lower, upper\]"),
    "negative mass": (_sub(P3, "mass = 3.5", "mass = -3.5"), r"'mass': expected a number >= 0"),
    "zero max speed": (_sub(P3, "max_speed = 150", "max_speed = 0"), r"'max_speed': expected a positive number"),
    "non-orthonormal rot": (_sub(P3, "xyz = [0.4, 0, 0]", "xyz = [0.4, 0, 0]\nrot = [[1, 0, 0], [0, 1, 0.1], [0, 0, 1]]"),
                            r"joint 3 \('p3'\) 'rot': not orthonormal .*differs from the identity by 0\.1"),
    "reflection rot": (_sub(P3, "xyz = [0.4, 0, 0]", "xyz = [0.4, 0, 0]\nrot = [[1, 0, 0], [0, 1, 0], [0, 0, -1]]"),
                       r"'rot': determinant is -1 \(a reflection\)"),
    "rot and rpy": (_sub(P3, "xyz = [0.4, 0, 0]", "xyz = [0.4, 0, 0]\nrpy = [0, 0, 0]\nrot = [[1, 0, 0], [0, 1, 0], [0, 0, 1]]"),
                    r"give either 'rpy' or 'rot', not both"),
    "rot wrong shape": (_sub(P3, "xyz = [0, 0, 0.8]", "xyz = [0, 0, 0.8]\nrot = [1, 0, 0]").replace("rpy = [90, 0, 0]", ""),
                        r"\[mount\] 'rot': expected a 3x3 rotation matrix"),
    "unknown geometry": (_sub(P3, 'geometry = "origins"', 'geometry = "screw"'), r"'geometry': expected one of 'dh', 'mdh', 'origins'"),
    "geometry not a string": (_sub(P3, 'geometry = "origins"', 'geometry = ["origins"]'), r"'geometry': expected one of"),
    "length unit": (_sub(P3, 'length_unit = "m"', 'length_unit = "in"'), r"'length_unit': expected 'm' or 'mm', got 'in'"),
    "joint type": (_sub(S6, 'type = "revolute"', 'type = "Revolute"'), r"joint 1 \('j1'\) 'type': expected 'revolute' or 'prismatic'"),
    "duplicate names": (_sub(P3, 'name = "p2"', 'name = "p1"'), r"joint 2 \('p1'\) 'name': duplicate joint name; joint 1"),
    "reserved name": (_sub(P3, 'name = "p2"', 'name = "tcp"'), r"bad joint name 'tcp'"),
    "digit name": (_sub(P3, 'name = "p2"', 'name = "2"'), r"bad joint name '2'"),
    "colon in name": (_sub(P3, 'name = "p2"', 'name = "com:2"'), r"bad joint name 'com:2'"),
    "joint not a table": ('joint = [1, 2]\n[arm]\nname = "x"\n', r"joint 1: expected a table, got an integer"),
    "joint not an array": ('joint = 3\n[arm]\nname = "x"\n', r"'joint': expected an array of tables"),
    "too many joints": ('[arm]\nname = "x"\n' + '[[joint]]\nname = "j"\naxis = [0, 0, 1]\n' * (MAX_JOINTS + 1),
                        rf"{MAX_JOINTS + 1} joints; at most {MAX_JOINTS} are supported"),
    "huge joint count": ('[arm]\nname = "x"\n' + '[[joint]]\n' * 5000, r"5000 joints; at most"),
    "home length": (_sub(P3, "home = [30, 60, 30]", "home = [30, 60]"), r"\[arm\] 'home': expected a list of 3 joint values"),
    "home outside limits": (_sub(P3, "home = [30, 60, 30]", "home = [30, 60, 170]"),
                            r"'home': joint 3 \('p3'\) value 170 is outside its limits"),
    "tool unknown key": (_sub(P3, "[tool]\n", "[tool]\nlength = 3\n"), r"\[tool\] 'length': unknown key"),
    "mount bad xyz": (_sub(P3, "xyz = [0, 0, 0.8]", 'xyz = "up"'), r"\[mount\] 'xyz': expected a list of 3 numbers"),
    "tool negative mass": (_sub(P3, "mass = 0.5", "mass = -1"), r"\[tool\] 'mass': expected a number >= 0"),
    "description not text": (_sub(P3, 'description = "Invented', 'description = 5\nx_description = "Invented'),
                             r"unknown key|'description': expected a string"),
    "NUL": ("[arm]\nname = \"a\x00\"\n", r"contains NUL characters"),
}


@pytest.mark.parametrize("case", sorted(BAD), ids=str)
def test_bad_arm_file_gives_one_clear_error(case, tmp_path):
    text, pattern = BAD[case]
    path = _write(tmp_path / "bad.toml", text)
    with pytest.raises(ArmFileError) as info:
        read_arm_file(path)
    msg = str(info.value)
    assert "\n" not in msg
    assert msg.startswith(str(path)), msg   # names the file
    assert __import__("re").search(pattern.replace(r"bad\.toml", "bad\\.toml"), msg), msg


def test_errors_name_joint_number_and_name():
    with pytest.raises(ArmFileError, match=r"joint 5 \('j5'\) 'limits'"):
        parse_arm_text(_sub(S6, "limits = [-125, 125]", "limits = [125, -125]"), "s6.toml")


def test_non_utf8_file(tmp_path):
    path = tmp_path / "latin1.toml"
    path.write_bytes(P3.replace("Invented", "Invent\xe9d").encode("latin-1"))
    with pytest.raises(ArmFileError, match=r"latin1\.toml: not UTF-8 text \(bad byte at offset \d+\)"):
        read_arm_file(path)


def test_binary_garbage(tmp_path):
    path = tmp_path / "garbage.toml"
    path.write_bytes(bytes(range(256)) * 4)
    with pytest.raises(ArmFileError, match="garbage.toml: not UTF-8"):
        read_arm_file(path)


def test_utf8_bom_is_accepted(tmp_path):
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + P3.encode("utf-8"))
    assert read_arm_file(path).n == 3


def test_directory_missing_file_and_wrong_extension(tmp_path):
    with pytest.raises(ArmFileError, match="is a directory"):
        read_arm_file(tmp_path)
    d = tmp_path / "looks_like.toml"
    d.mkdir()
    with pytest.raises(ArmFileError, match="is a directory"):
        read_arm_model(d)
    with pytest.raises(ArmFileError, match=r"nothere\.toml: no such file"):
        read_arm_model(tmp_path / "nothere.toml")
    with pytest.raises(ArmFileError, match=r"unknown arm file type '\.yaml'; expected \.toml"):
        read_arm_model(_write(tmp_path / "arm.yaml", P3))
    with pytest.raises(ArmFileError, match="only be chosen for a URDF"):
        read_arm_model(ARMS / "demo_p3.toml", tip_link="x")


def test_huge_file_is_refused_without_reading_it_all(tmp_path):
    from workbench.arm.files import MAX_FILE_BYTES

    path = tmp_path / "huge.toml"
    with open(path, "wb") as fh:
        fh.write(b"# " + b"x" * (MAX_FILE_BYTES + 10) + b"\n")
    with pytest.raises(ArmFileError, match="larger than 4 MB"):
        read_arm_file(path)


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0, reason="needs file permissions")
def test_unreadable_file(tmp_path):
    path = _write(tmp_path / "locked.toml", P3)
    path.chmod(0)
    try:
        with pytest.raises(ArmFileError, match=r"locked\.toml: cannot be read"):
            read_arm_file(path)
    finally:
        path.chmod(0o600)


def test_near_orthonormal_rot_is_cleaned_to_a_rotation():
    R = rot_z(0.3)[:3, :3] + 1e-8
    rows = ", ".join("[" + ", ".join(repr(float(x)) for x in r) + "]" for r in R)
    a = parse_arm_text(_sub(P3, "xyz = [0.4, 0, 0]", f"xyz = [0.4, 0, 0]\nrot = [{rows}]"), "near")
    O = a.joints[2].origin[:3, :3]
    np.testing.assert_allclose(O.T @ O, np.eye(3), atol=1e-14)
    np.testing.assert_allclose(O, rot_z(0.3)[:3, :3], atol=1e-7)


def test_write_into_a_missing_folder_is_one_clear_error(tmp_path):
    with pytest.raises(ArmFileError, match=r"no_dir/a\.toml: cannot be written"):
        write_arm_file(_code_arm(), tmp_path / "no_dir" / "a.toml")
    assert not (tmp_path / "no_dir").exists()
