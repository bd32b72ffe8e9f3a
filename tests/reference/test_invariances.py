"""Invariances every Jacobian engine must respect (common practice unless a source is named)."""
from __future__ import annotations

import copy
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest

from workbench.arm.files import parse_arm_dict
from workbench.arm.model import ArmModel
from workbench.arm.transforms import make_transform
from workbench.kinematics import Arm
from workbench.measures import measures

ROOT = Path(__file__).resolve().parents[2]


def demo_data():
    return tomllib.loads((ROOT / "arms" / "demo_s6.toml").read_text())


def demo_arm():
    return Arm(parse_arm_dict(demo_data()))


def with_mount(arm, T):
    m = arm.model
    return Arm(ArmModel(name=m.name, joints=m.joints, end=m.end, tool=m.tool, mount=T,
                        tool_mass=m.tool_mass, tool_com=m.tool_com))


@pytest.mark.parametrize("rows", ["full", "translation", "rotation", "vx,vy,wz"])
def test_rotating_the_base_leaves_singular_values_unchanged(rows):
    # Rotating the whole arm (its mount) rotates every column of J by the same rotation R; the
    # singular values of diag(R, R) J are those of J (orthogonal invariance of the SVD) for the
    # full, translation and rotation rows. (For a partial selection like "vx,vy,wz" this holds
    # only for rotations about the world z axis, used below for that case.)
    arm = demo_arm()
    rng = np.random.default_rng(21)
    Q = arm.random_q(200, rng)
    base = arm.singular_values(Q, rows=rows)
    for k in range(4):
        if rows == "vx,vy,wz":
            rpy = [0.0, 0.0, rng.uniform(-math.pi, math.pi)]
        else:
            rpy = rng.uniform(-math.pi, math.pi, 3)
        moved = with_mount(arm, make_transform(rng.normal(size=3), rpy))
        sv_world = moved.singular_values(Q, rows=rows, world=True)
        np.testing.assert_allclose(sv_world, base, rtol=0, atol=1e-12 * base[:, :1].max())
        # the Jacobians themselves differ (the test could fail)
        assert np.abs(moved.jacobian(Q[:3], world=True) - arm.jacobian(Q[:3])).max() > 1e-3
        # the same through measures() on the stored Jacobians
        np.testing.assert_allclose(measures(moved.jacobian(Q, world=True), rows=rows,
                                            length=arm.nominal_reach())["sv"], base,
                                   rtol=0, atol=1e-12 * base[:, :1].max())


def std_to_modified(data):
    """The same arm in modified DH: row i takes a_{i-1}, alpha_{i-1} from standard row i-1 and
    d_i, theta_i from standard row i (Craig 2005, sec. 3.4 vs. Siciliano et al. 2009, sec. 2.8.2;
    from memory). The last standard row's a_n, alpha_n must then go into the tool; the demo arm
    has a_6 = alpha_6 = 0."""
    out = copy.deepcopy(data)
    out["arm"]["geometry"] = "mdh"
    rows = data["joint"]
    assert rows[-1]["a"] == 0 and rows[-1]["alpha"] == 0
    for i, row in enumerate(out["joint"]):
        prev = rows[i - 1] if i else {"a": 0.0, "alpha": 0.0}
        row["a"], row["alpha"] = prev["a"], prev["alpha"]
        # the link frame changes for mdh, so link masses' com would need moving; drop them here
        for key in ("mass", "com"):
            row.pop(key, None)
    return out


def test_standard_and_modified_dh_give_the_same_jacobian():
    std = demo_data()
    arm_std = Arm(parse_arm_dict(std))
    arm_mdh = Arm(parse_arm_dict(std_to_modified(std)))
    rng = np.random.default_rng(22)
    Q = arm_std.random_q(300, rng)
    np.testing.assert_allclose(arm_mdh.jacobian(Q), arm_std.jacobian(Q), rtol=0, atol=1e-12)
    np.testing.assert_allclose(arm_mdh.fk(Q), arm_std.fk(Q), rtol=0, atol=1e-12)


def scaled_copy(data, factor, unit):
    out = copy.deepcopy(data)
    out["arm"]["length_unit"] = unit
    for row in out["joint"]:
        for key in ("a", "d"):
            row[key] = row[key] * factor
        row.pop("com", None)
        row.pop("mass", None)
    for table in ("tool", "mount"):
        if table in out:
            out[table]["xyz"] = [v * factor for v in out[table]["xyz"]]
            out[table].pop("com", None)
            out[table].pop("mass", None)
    return out


def test_the_same_arm_in_millimetres_gives_the_same_jacobian():
    data = demo_data()
    arm_m = Arm(parse_arm_dict(scaled_copy(data, 1.0, "m")))
    arm_mm = Arm(parse_arm_dict(scaled_copy(data, 1000.0, "mm")))
    rng = np.random.default_rng(23)
    Q = arm_m.random_q(100, rng)
    np.testing.assert_allclose(arm_mm.jacobian(Q), arm_m.jacobian(Q), rtol=0, atol=1e-12)


def test_metre_numbers_read_as_millimetres_scale_as_they_must():
    # The same numbers read as millimetres make an arm 1000 times smaller: the translational rows
    # scale by 1e-3 and the rotational rows not at all; translational manipulability (3 rows)
    # scales by 1e-9, rotational manipulability and every condition number of a single kind of
    # rows are unchanged; with the characteristic length scaled alike the full-row singular
    # values are unchanged (Tandirci, Angeles & Ranjbaran, ASME 1992 -- the reason for L).
    data = demo_data()
    big = Arm(parse_arm_dict(scaled_copy(data, 1.0, "m")))
    small = Arm(parse_arm_dict(scaled_copy(data, 1.0, "mm")))
    rng = np.random.default_rng(24)
    Q = big.random_q(200, rng)
    Jb, Js = big.jacobian(Q), small.jacobian(Q)
    np.testing.assert_allclose(Js[:, :3], 1e-3 * Jb[:, :3], rtol=0, atol=1e-15)
    np.testing.assert_allclose(Js[:, 3:], Jb[:, 3:], rtol=0, atol=1e-15)
    mb, ms = measures(Jb, rows="translation"), measures(Js, rows="translation")
    np.testing.assert_allclose(ms["manipulability"], 1e-9 * mb["manipulability"], rtol=1e-9)
    np.testing.assert_allclose(ms["sv"], 1e-3 * mb["sv"], rtol=0, atol=1e-12 * mb["sv"].max())
    np.testing.assert_allclose(ms["inverse_condition"], mb["inverse_condition"], rtol=1e-7, atol=1e-12)
    rb, rs = measures(Jb, rows="rotation"), measures(Js, rows="rotation")
    np.testing.assert_allclose(rs["manipulability"], rb["manipulability"], rtol=1e-12)
    L = 1.3
    fb = measures(Jb, rows="full", length=L)
    fs = measures(Js, rows="full", length=L * 1e-3)
    np.testing.assert_allclose(fs["sv"], fb["sv"], rtol=0, atol=1e-12 * fb["sv"].max())
    # ... but not with an unscaled L (the check can fail)
    fs_wrong = measures(Js, rows="full", length=L)
    assert np.abs(fs_wrong["manipulability"] - fb["manipulability"]).max() > 1e-3
    assert small.nominal_reach() == pytest.approx(1e-3 * big.nominal_reach(), rel=1e-12)
