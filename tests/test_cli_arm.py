"""``workbench info`` and ``workbench jacobian``: output on every demo arm, JSON, and bad input ->
exit status 2 with one line ``error: ...`` and no traceback."""
from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from workbench.cli import main

ROOT = Path(__file__).resolve().parents[1]
ARMS = ROOT / "arms"
DEMOS = sorted(ARMS.glob("demo_*.toml")) + [ARMS / "demo_u6.urdf"]


def _run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def _assert_one_line_error(code, out, err, pattern=None):
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    assert "Traceback" not in err and out == ""
    if pattern:
        import re

        assert re.search(pattern, lines[0]), lines[0]


# ---- info -----------------------------------------------------------------------------------------

@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.name)
def test_info_on_every_demo_arm(path, capsys):
    code, out, err = _run(capsys, "info", path, "--samples", "2000")
    assert code == 0 and err == ""
    assert "joints:" in out and "reach:" in out and "mount (arm base in the cell)" in out
    code, out, _ = _run(capsys, "info", path, "--samples", "2000", "--json")
    info = json.loads(out)
    assert info["dof"] == len(info["joints"]) >= 2
    assert 0 < info["reach"]["from_axis_m"] <= info["reach"]["from_origin_m"] + 1e-12
    # the axis chain bounds the distance from a point of joint 1's axis, so also from the axis
    assert info["reach"]["from_axis_m"] <= info["reach"]["characteristic_length_m"] + 1e-9


def test_info_s6_values(capsys):
    code, out, _ = _run(capsys, "info", ARMS / "demo_s6.toml", "--json")
    info = json.loads(out)
    assert info["name"] == "S6 demo arm (spherical wrist)" and info["dof"] == 6
    j2 = info["joints"][1]
    assert j2["limits"] == [-140, 90] and j2["unit"] == "deg" and j2["max_speed"] == 140
    assert j2["max_effort"] == 900 and j2["mass_kg"] == 14.0
    assert info["tool"]["xyz_mm"] == [0, 0, 120] and info["tool"]["mass_kg"] == 1.0
    assert info["home"] == [0, 0, 0, 0, 90, 0]
    # the largest reach from joint 1's axis cannot exceed the stretched arm: shoulder offset 0.15 m +
    # upper arm 0.60 m + the forearm 0.62 m and the 0.12 m offset + wrist 0.10 m + tool 0.12 m
    r = info["reach"]
    assert r["samples"] == 20001
    stretched = 0.15 + 0.60 + math.hypot(0.12, 0.62) + 0.10 + 0.12
    assert 0.9 * stretched < r["from_axis_m"] <= stretched
    assert info["warnings"] == []


def test_info_scara_units_and_warnings(capsys):
    code, out, _ = _run(capsys, "info", ARMS / "demo_scara4.toml")
    assert "quill  prismatic  0 .. 200 mm      1100 mm/s" in out
    assert "200 N " in out
    assert "4 joints: full 6-row measures are zero" in out
    code, out, _ = _run(capsys, "info", ARMS / "demo_scara4.toml", "--json")
    info = json.loads(out)
    # stretched reach from joint 1's axis is a1 + a2 = 650 mm (within the random sampling)
    assert 0.64 <= info["reach"]["from_axis_m"] <= 0.65 + 1e-12


def test_info_warns_about_missing_data(tmp_path, capsys):
    p = tmp_path / "bare.toml"
    p.write_text('[arm]\nname = "bare"\n[[joint]]\nname = "a"\naxis = [0, 0, 1]\n'
                 '[[joint]]\nname = "b"\naxis = [0, 0, 1]\n[[joint]]\nname = "c"\ntype = "prismatic"\n'
                 'xyz = [1, 0, 0]\naxis = [1, 0, 0]\n', encoding="utf-8")
    code, out, _ = _run(capsys, "info", p, "--json", "--samples", "100")
    w = "\n".join(json.loads(out)["warnings"])
    assert "no limits on revolute joint(s) 1 (a), 2 (b)" in w
    assert "no limits on prismatic joint(s) 3 (c)" in w
    assert "no link mass for joint(s) 1 (a), 2 (b), 3 (c)" in w
    assert "no max effort" in w and "no max speed" in w
    assert "joints 1 (a), 2 (b) share one axis line: the arm is singular at every pose" in w
    assert "no home pose given" in w and "no tool and no flange offset" in w


def test_info_urdf_with_tip(capsys):
    code, out, _ = _run(capsys, "info", ARMS / "demo_u6.urdf", "--tip", "link_5", "--samples", "500", "--json")
    info = json.loads(out)
    assert code == 0 and info["dof"] == 5 and info["joints"][-1]["name"] == "joint_5"


# ---- jacobian ---------------------------------------------------------------------------------------

@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.name)
def test_jacobian_on_every_demo_arm(path, capsys):
    code, out, err = _run(capsys, "jacobian", path)   # home pose
    assert code == 0 and err == ""
    assert "singular values:" in out and "TCP pose:" in out


def test_jacobian_s6_text_and_json(capsys):
    code, out, _ = _run(capsys, "jacobian", ARMS / "demo_s6.toml", "--q", "0,-90,90,0,45,0")
    assert code == 0
    assert "Jacobian of 'tcp' at q = [0, -90, 90, 0, 45, 0] deg (base frame)" in out
    # the labels are the quantity registry's (workbench/quantities.py); the demo arm is all
    # revolute and the rows are the full 6 (translation divided by L): every measure is unitless
    from workbench.quantities import label

    for name in ("manipulability", "condition", "inverse_condition", "min_sv"):
        assert f"  {label(name)}:" in out
    code, out, _ = _run(capsys, "jacobian", ARMS / "demo_s6.toml", "--q", "0", "-90", "90", "0", "45", "0", "--json")
    d = json.loads(out)
    from workbench import load_arm
    from workbench.measures import measures

    arm = load_arm(ARMS / "demo_s6.toml")
    q = np.radians([0, -90, 90, 0, 45, 0])
    J = arm.jacobian(q)
    np.testing.assert_allclose(d["jacobian"], J, atol=1e-15)
    m = measures(J, rows="full", length=arm.nominal_reach())
    np.testing.assert_allclose(d["singular_values"], m["sv"], rtol=1e-12)
    assert d["manipulability"] == pytest.approx(float(np.prod(np.linalg.svd(
        np.diag([1 / arm.nominal_reach()] * 3 + [1] * 3) @ J, compute_uv=False))), rel=1e-9)
    assert d["inverse_condition"] == pytest.approx(m["sv"][-1] / m["sv"][0], rel=1e-12)
    np.testing.assert_allclose(d["tcp"]["xyz_mm"], arm.fk(q)[:3, 3] * 1000, atol=1e-6)
    assert d["note"] and isinstance(d["note"], str)


def test_jacobian_planar2r_closed_form(capsys):
    # det J = l1 l2 sin(th2) (Yoshikawa, "Manipulability of robotic mechanisms", IJRR 1985; from memory)
    code, out, _ = _run(capsys, "jacobian", ARMS / "demo_planar2r.toml", "--q", "30,60", "--rows", "vx,vy", "--json")
    d = json.loads(out)
    assert d["manipulability"] == pytest.approx(math.sin(math.radians(60)), rel=1e-12)
    assert d["rows"] == ["vx", "vy"] and d["length_m"] is None


def test_jacobian_singular_pose_and_frames(capsys):
    code, out, _ = _run(capsys, "jacobian", ARMS / "demo_p3.toml", "--q", "0,0,0", "--rows", "planar")
    # the labels are the registry's (workbench/quantities.py); rows vx, vy, wz mix translation and
    # rotation (translation divided by L): unitless. Stretched out, the arm is singular (s3 = 0).
    from workbench.quantities import label

    heads = {ln.split(":")[0].strip(): ln.split(":", 1)[1].strip() for ln in out.splitlines() if ":" in ln}
    assert heads[label("condition")] == "inf (singular)" and heads[label("min_sv")] == "0"
    assert heads[label("manipulability")] == "0" and heads[label("inverse_condition")] == "0"
    code, out, _ = _run(capsys, "jacobian", ARMS / "demo_p3.toml", "--q", "0,0,0", "--frame", "com:p1", "--json")
    d = json.loads(out)
    np.testing.assert_allclose(np.array(d["jacobian"])[1], [0.25, 0, 0], atol=1e-12)
    assert d["condition"] is None  # inf is written as null in JSON
    code, out, _ = _run(capsys, "jacobian", ARMS / "demo_p3.toml", "--q", "90,0,0", "--frame", "joint:2", "--world", "--json")
    d = json.loads(out)
    # the wall mount turns base y into world z: joint 2 sits 0.5 m above the 0.8 m stand
    np.testing.assert_allclose(d["frame_pose"]["xyz_mm"], [0, 0, 1300], atol=1e-6)
    assert d["reference"] == "world"


def test_jacobian_prismatic_values_in_mm(capsys):
    code, out, _ = _run(capsys, "jacobian", ARMS / "demo_scara4.toml", "--q", "0,0,150,0", "--json")
    d = json.loads(out)
    assert d["q_si"][2] == pytest.approx(0.150)
    # 420 mm base height, quill 150 mm down, 40 mm joint 4 offset, 60 mm tool
    assert d["tcp"]["xyz_mm"] == pytest.approx([650, 0, 420 - 150 - 40 - 60])


def test_jacobian_outside_limits_is_noted(capsys):
    code, out, _ = _run(capsys, "jacobian", ARMS / "demo_p3.toml", "--q", "0,175,0")
    assert code == 0 and "outside the joint limits: p2" in out


def test_negative_first_value_is_not_an_option(capsys):
    code, out, err = _run(capsys, "jacobian", ARMS / "demo_p3.toml", "--q", "-90,10,20")
    assert code == 0, err
    code, out, err = _run(capsys, "jacobian", ARMS / "demo_p3.toml", "--q", "-90", "-10", "-.5")
    assert code == 0, err


# ---- bad input: exit 2, one line -------------------------------------------------------------------

BAD_CLI = {
    "wrong count": (["jacobian", ARMS / "demo_s6.toml", "--q", "1,2,3"],
                    r"--q: got 3 joint value\(s\); arm 'S6 demo arm \(spherical wrist\)' has 6 joints"),
    "not a number": (["jacobian", ARMS / "demo_p3.toml", "--q", "1,abc,3"], r"--q: value 2 \(p2\) 'abc' is not a number"),
    "nan": (["jacobian", ARMS / "demo_p3.toml", "--q", "1,nan,3"], r"not a finite number"),
    "unknown frame": (["jacobian", ARMS / "demo_p3.toml", "--q", "0,0,0", "--frame", "elbow"], r"unknown frame 'elbow'"),
    "joint number out of range": (["jacobian", ARMS / "demo_p3.toml", "--q", "0,0,0", "--frame", "joint:9"],
                                  r"joint number 9 is out of range 1\.\.3"),
    "unknown rows": (["jacobian", ARMS / "demo_p3.toml", "--q", "0,0,0", "--rows", "vx,vq"], r"unknown row 'vq'"),
    "bad length": (["jacobian", ARMS / "demo_p3.toml", "--length", "0"], r"--length: expected a positive length"),
    "length not a number": (["jacobian", ARMS / "demo_p3.toml", "--length", "far"], r"invalid float value"),
    "missing file": (["info", ARMS / "no_such_arm.toml"], r"no_such_arm\.toml: no such file"),
    "directory": (["info", ARMS], r"is a directory"),
    "wrong type": (["info", ROOT / "pyproject.toml"], r"pyproject\.toml:1: unknown table .build-system."),
    "bad tip": (["info", ARMS / "demo_u6.urdf", "--tip", "nope"], r"tip link 'nope' is not defined"),
    "tip on toml": (["jacobian", ARMS / "demo_p3.toml", "--tip", "x"], r"only be chosen for a URDF"),
    "bad samples": (["info", ARMS / "demo_p3.toml", "--samples", "0"], r"--samples: expected a count"),
    "no arm": (["info"], r"required: ARM"),
}


@pytest.mark.parametrize("case", sorted(BAD_CLI), ids=str)
def test_bad_cli_input(case, capsys):
    argv, pattern = BAD_CLI[case]
    try:
        code = main([str(a) for a in argv])
    except SystemExit as exc:  # argparse usage errors
        code = exc.code
    out, err = capsys.readouterr()
    _assert_one_line_error(code, out, err, pattern)


@pytest.mark.parametrize("maker", ["malformed", "hostile", "nan", "reversed"])
def test_bad_files_from_the_cli(maker, tmp_path, capsys):
    if maker == "malformed":
        p = tmp_path / "m.toml"
        p.write_text("[arm\nname = 1\n", encoding="utf-8")
    elif maker == "hostile":
        p = tmp_path / "h.urdf"
        p.write_text('<?xml version="1.0"?><!DOCTYPE r [<!ENTITY a "aaaa"><!ENTITY b "&a;&a;&a;&a;">]>'
                     '<robot name="&b;"><link name="x"/></robot>', encoding="utf-8")
    elif maker == "nan":
        p = tmp_path / "n.toml"
        p.write_text((ARMS / "demo_p3.toml").read_text(encoding="utf-8").replace("mass = 3.5", "mass = nan"),
                     encoding="utf-8")
    else:
        p = tmp_path / "r.toml"
        p.write_text((ARMS / "demo_p3.toml").read_text(encoding="utf-8").replace("[-170, 170]", "[170, -170]"),
                     encoding="utf-8")
    for cmd in (["info", p], ["jacobian", p, "--q", "0,0,0"]):
        code, out, err = _run(capsys, *cmd)
        _assert_one_line_error(code, out, err, str(p).replace(".", r"\."))


def test_real_process_exit_status_and_output():
    env_cmd = [sys.executable, "-m", "workbench"]
    bad = subprocess.run(env_cmd + ["jacobian", str(ARMS / "demo_s6.toml"), "--q", "1,2"],
                         capture_output=True, text=True, timeout=120, cwd=ROOT)
    assert bad.returncode == 2 and bad.stdout == ""
    assert bad.stderr.startswith("error: --q: got 2 joint value(s)") and bad.stderr.count("\n") == 1
    good = subprocess.run(env_cmd + ["info", str(ARMS / "demo_p3.toml"), "--samples", "200"],
                          capture_output=True, text=True, timeout=120, cwd=ROOT)
    assert good.returncode == 0 and "P3 demo planar arm" in good.stdout


@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.name)
def test_jacobian_every_frame_of_every_demo_arm(path, capsys):
    # regression: a centre-of-mass frame with many zero columns once crashed the singular-value
    # kernel (a carried squared norm rounded below zero)
    from workbench import load_arm

    arm = load_arm(path)
    L = arm.nominal_reach()
    frames = ["tcp", "flange", "base"] + [f"com:{k + 1}" for k in range(arm.n)] + [f"joint:{k + 1}" for k in range(arm.n)]
    for frame in frames:
        code, out, err = _run(capsys, "jacobian", path, "--frame", frame, "--json")
        assert code == 0, (frame, err)
        d = json.loads(out)
        J = np.array(d["jacobian"])
        ref = np.linalg.svd(np.diag([1 / L] * 3 + [1] * 3) @ J, compute_uv=False)
        k = min(6, arm.n)
        np.testing.assert_allclose(d["singular_values"][:k], ref[:k], atol=1e-12 * max(ref[0], 1e-300))
