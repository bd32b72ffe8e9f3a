"""One characteristic length per arm, whatever the file form (issue 9 item 6).

The same invented six-axis arm is written as standard DH, modified DH, general origins (frames slid
along and turned about their axes) and URDF (frames placed differently again, axes not along z).
All four must give the same default characteristic length (to 1e-9 relative) and so the same
measures. Before this change the DH form gave 2.032 m and the URDF form 3.450 m for this arm
(inverse condition 0.0430 vs 0.0262 at one pose); now both give 2.17 m (0.0405).
"""
import math

import numpy as np
import pytest

from workbench import load_arm, measures
from workbench.measures import pose_measures
from workbench.arm.files import dumps_arm, parse_arm_text
from workbench.arm.model import axis_chain_length
from workbench.arm.transforms import matrix_to_rpy
from workbench.arm.urdf import parse_urdf_text
from workbench.kinematics import Arm

# invented DH rows (a m, alpha deg, d m, theta deg); axes 2 and 3 parallel, spherical wrist
DH = [(0.20, -90, 0.55, 0), (0.80, 0, 0.0, -90), (0.15, -90, 0.0, 0),
      (0.0, 90, 0.90, 0), (0.0, -90, 0.0, 0), (0.0, 0, 0.12, 0)]
LIMITS = [(-170, 170), (-140, 90), (-120, 160), (-190, 190), (-125, 125), (-350, 350)]


def _dh_text():
    rows = []
    for k, ((a, al, d, th), (lo, hi)) in enumerate(zip(DH, LIMITS)):
        rows.append(f"[[joint]]\nname = \"j{k + 1}\"\na = {a}\nalpha = {al}\nd = {d}\ntheta = {th}\n"
                    f"limits = [{lo}, {hi}]\n")
    return "[arm]\nname = \"CL demo\"\ngeometry = \"dh\"\n\n" + "\n".join(rows)


def _mdh_text():
    # the same chain in modified DH: row i holds (a_{i-1}, alpha_{i-1}, d_i, theta_i); the last
    # standard row's (a_6, alpha_6) go to the flange (Craig's convention; common practice)
    prev = [(0.0, 0.0)] + [(a, al) for a, al, _, _ in DH[:-1]]
    rows = []
    for k, ((a, al), (_, _, d, th), (lo, hi)) in enumerate(zip(prev, DH, LIMITS)):
        rows.append(f"[[joint]]\nname = \"j{k + 1}\"\na = {a}\nalpha = {al}\nd = {d}\ntheta = {th}\n"
                    f"limits = [{lo}, {hi}]\n")
    a6, al6 = DH[-1][0], DH[-1][1]
    return ("[arm]\nname = \"CL demo\"\ngeometry = \"mdh\"\n\n" + "\n".join(rows)
            + f"\n[flange]\nxyz = [{a6}, 0, 0]\nrpy = [{al6}, 0, 0]\n")


def _axis_rot(axis, ang):
    x, y, z = axis
    c, s = math.cos(ang), math.sin(ang)
    K = np.array([[0, -z, y], [z, 0, -x], [-y, x, 0]])
    return np.eye(3) + s * K + (1 - c) * K @ K


def _rt(R, p):
    T = np.eye(4)
    T[:3, :3], T[:3, 3] = R, p
    return T


def _moved_frames(model, shifts, turns, tilt):
    """Origins/axes of the same arm with joint frame i slid by shifts[i] along its axis, turned by
    turns[i] about it and then rotated by a fixed ``tilt`` rotation (so the axis is no longer z)."""
    out = []
    carry = np.eye(4)         # inverse of the previous joint's frame change
    for j, s, t in zip(model.joints, shifts, turns):
        A = _rt(_axis_rot(j.axis, t), s * np.asarray(j.axis))
        B = _rt(tilt, np.zeros(3))
        change = A @ B
        origin = carry @ j.origin @ change
        axis = tilt.T @ j.axis
        out.append((origin, axis))
        carry = np.linalg.inv(change)
    end = carry @ model.end
    return out, end


def _origins_text(frames, end):
    rows = []
    for k, ((T, ax), (lo, hi)) in enumerate(zip(frames, LIMITS)):
        xyz = ", ".join(repr(float(v)) for v in T[:3, 3])
        rpy = ", ".join(repr(float(math.degrees(v))) for v in matrix_to_rpy(T[:3, :3]))
        axs = ", ".join(repr(float(v)) for v in ax)
        rows.append(f"[[joint]]\nname = \"j{k + 1}\"\nxyz = [{xyz}]\nrpy = [{rpy}]\naxis = [{axs}]\n"
                    f"limits = [{lo}, {hi}]\n")
    exyz = ", ".join(repr(float(v)) for v in end[:3, 3])
    erpy = ", ".join(repr(float(math.degrees(v))) for v in matrix_to_rpy(end[:3, :3]))
    return ("[arm]\nname = \"CL demo\"\ngeometry = \"origins\"\n\n" + "\n".join(rows)
            + f"\n[flange]\nxyz = [{exyz}]\nrpy = [{erpy}]\n")


def _urdf_text(frames, end):
    parts = ['<robot name="cl_demo">', '<link name="base"/>']
    parent = "base"
    for k, ((T, ax), (lo, hi)) in enumerate(zip(frames, LIMITS)):
        xyz = " ".join(repr(float(v)) for v in T[:3, 3])
        rpy = " ".join(repr(float(v)) for v in matrix_to_rpy(T[:3, :3]))
        axs = " ".join(repr(float(v)) for v in ax)
        parts += [f'<link name="l{k + 1}"/>',
                  f'<joint name="j{k + 1}" type="revolute"><parent link="{parent}"/><child link="l{k + 1}"/>'
                  f'<origin xyz="{xyz}" rpy="{rpy}"/><axis xyz="{axs}"/>'
                  f'<limit lower="{math.radians(lo)!r}" upper="{math.radians(hi)!r}" effort="1" velocity="1"/></joint>']
        parent = f"l{k + 1}"
    xyz = " ".join(repr(float(v)) for v in end[:3, 3])
    rpy = " ".join(repr(float(v)) for v in matrix_to_rpy(end[:3, :3]))
    parts += ['<link name="flange"/>', f'<joint name="fl" type="fixed"><parent link="{parent}"/>'
              f'<child link="flange"/><origin xyz="{xyz}" rpy="{rpy}"/></joint>', '</robot>']
    return "\n".join(parts)


def _old_nominal(model):
    """The former default (sum of the norms of the fixed offsets), frame-dependent."""
    total = float(np.linalg.norm(model.origins[1:, :3, 3], axis=-1).sum())
    return total + float(np.linalg.norm(model.tcp_offset[:3, 3]))


@pytest.fixture(scope="module")
def forms():
    dh = parse_arm_text(_dh_text(), "cl_dh.toml")
    mdh = parse_arm_text(_mdh_text(), "cl_mdh.toml")
    tilt = _axis_rot(np.array([1.0, 1.0, 0.0]) / math.sqrt(2), 0.7)
    fr_o, end_o = _moved_frames(dh, [0.3, -0.4, 0.25, 0.5, -0.2, 0.1], [0.4, -1.0, 2.0, 0.3, 1.1, -0.6], np.eye(3))
    fr_u, end_u = _moved_frames(dh, [-0.35, 0.6, -0.1, -0.45, 0.3, 0.2], [1.3, 0.2, -0.8, 2.5, -0.4, 0.9], tilt)
    org = parse_arm_text(_origins_text(fr_o, end_o), "cl_origins.toml")
    urdf = parse_urdf_text(_urdf_text(fr_u, end_u), "cl.urdf")
    return {"dh": dh, "mdh": mdh, "origins": org, "urdf": urdf}


def test_forms_are_one_arm(forms):
    # precondition of the comparison: the four files describe the same kinematics
    q = Arm(forms["dh"]).random_q(50, rng=1)
    ref = Arm(forms["dh"]).jacobian(q)
    for name, m in forms.items():
        np.testing.assert_allclose(Arm(m).fk(q), Arm(forms["dh"]).fk(q), atol=1e-12, err_msg=name)
        np.testing.assert_allclose(Arm(m).jacobian(q), ref, atol=1e-12, err_msg=name)


def test_old_default_depended_on_the_form(forms):
    # the reproduction of the issue: the former default was 2.032 m (DH) vs 3.450 m (URDF), so the
    # inverse condition at one pose was 0.0430 vs 0.0262; with the axis-chain length both give 0.0405
    assert _old_nominal(forms["dh"]) == pytest.approx(2.032, abs=5e-4)
    assert _old_nominal(forms["urdf"]) == pytest.approx(3.450, abs=5e-4)
    q = np.radians([10, -60, 40, 20, 50, 30])
    old = [measures(Arm(forms[k]).jacobian(q), rows="full", length=_old_nominal(forms[k]))["inverse_condition"]
           for k in ("dh", "urdf")]
    assert old == pytest.approx([0.0430, 0.0262], abs=5e-5)
    new = [pose_measures(Arm(forms[k]), q, rows="full")["inverse_condition"] for k in ("dh", "urdf")]
    assert new[0] == pytest.approx(new[1], rel=1e-9)


def test_same_length_every_form(forms):
    L = {k: Arm(m).characteristic_length() for k, m in forms.items()}
    for k, v in L.items():
        assert v == pytest.approx(L["dh"], rel=1e-9), (k, L)
    # by hand (Denavit & Hartenberg 1955: a_i is the length of the common normal of consecutive
    # axes, d_i the offset along an axis between normals): the polyline from the first axis is
    # a1 + a2 + a3 + d4 + d6 (d1 is the base height, not reach; axes 2 and 3 are parallel with d2 = 0)
    assert L["dh"] == pytest.approx(0.20 + 0.80 + 0.15 + 0.90 + 0.12, rel=1e-12)


def test_same_measures_every_form(forms):
    q = Arm(forms["dh"]).random_q(200, rng=2)
    ref = measures(Arm(forms["dh"]).jacobian(q), rows="full", length=Arm(forms["dh"]).characteristic_length())
    for k, m in forms.items():
        a = Arm(m)
        got = pose_measures(a, q, rows="full")  # default length: the arm's
        np.testing.assert_allclose(got["inverse_condition"], ref["inverse_condition"], rtol=1e-9, err_msg=k)
        got2 = measures(a.jacobian(q), rows="full", length=a.characteristic_length())
        np.testing.assert_allclose(got2["inverse_condition"], ref["inverse_condition"], rtol=1e-9, err_msg=k)
        np.testing.assert_allclose(a.singular_values(q, rows="full"), ref["sv"], rtol=1e-9, atol=1e-12, err_msg=k)


def test_reach_bound(forms):
    # every piece of the polyline is rigid in one link, so the TCP stays within L of the start point
    # x1 on the first axis (triangle inequality); sampled over random poses
    a = Arm(forms["dh"])
    L = a.characteristic_length()
    x1 = np.array([0.0, 0.0, 0.55])       # foot of the common normal of axes 1 and 2 (DH: d1 along z0)
    P = a.fk(a.random_q(20000, rng=3))[..., :3, 3]
    r = np.linalg.norm(P - x1, axis=-1)
    assert r.max() <= L + 1e-12
    assert r.max() > 0.9 * L              # and it is not a loose bound for this arm


def test_planar_and_demo_values():
    # planar 2R with unit links: the largest reach l1 + l2 = 2 m (common practice)
    assert load_arm("arms/demo_planar2r.toml").characteristic_length() == pytest.approx(2.0, rel=1e-12)
    # planar 3R demo: links 0.5 + 0.4 and a 0.25 m tool, all axes parallel
    assert load_arm("arms/demo_p3.toml").characteristic_length() == pytest.approx(1.15, rel=1e-12)


def test_stated_length_wins_and_round_trips(forms):
    text = _dh_text().replace('geometry = "dh"', 'geometry = "dh"\ncharacteristic_length = 1.25')
    m = parse_arm_text(text, "cl_stated.toml")
    assert m.characteristic_length == 1.25
    assert Arm(m).nominal_reach() == 1.25
    assert m.axis_chain_length == pytest.approx(forms["dh"].axis_chain_length, rel=1e-12)
    back = parse_arm_text(dumps_arm(m), "back.toml")
    assert back.stated_length == 1.25
    mm = parse_arm_text(text.replace('geometry = "dh"', 'geometry = "dh"\nlength_unit = "mm"')
                        .replace("characteristic_length = 1.25", "characteristic_length = 1250"), "mm.toml")
    assert mm.stated_length == pytest.approx(1.25)


@pytest.mark.parametrize("bad", ["0", "-1", '"long"', "nan"])
def test_stated_length_bad(bad):
    text = _dh_text().replace('geometry = "dh"', f'geometry = "dh"\ncharacteristic_length = {bad}')
    from workbench.arm.files import ArmFileError
    with pytest.raises(ArmFileError) as e:
        parse_arm_text(text, "bad.toml")
    msg = str(e.value)
    assert "bad.toml" in msg and "characteristic_length" in msg and "\n" not in msg


def test_prismatic_travel_counts():
    text = ("[arm]\nname = \"lift\"\ngeometry = \"origins\"\n[[joint]]\nname = \"z\"\ntype = \"prismatic\"\n"
            "axis = [0, 0, 1]\nlimits = [-0.2, 0.7]\n[[joint]]\nname = \"r\"\nxyz = [0.3, 0, 0.1]\naxis = [0, 0, 1]\n"
            "[tool]\nxyz = [0.4, 0, 0]\n")
    m = parse_arm_text(text, "lift.toml")
    # one revolute axis: from its foot of the TCP's perpendicular to the TCP 0.4 m, plus 0.7 m travel
    assert axis_chain_length(m) == pytest.approx(1.1, rel=1e-12)
