"""Jacobians against an independent symbolic derivation (sympy).

The derivation here shares no code with workbench.kinematics: it multiplies the DH link
transforms symbolically, differentiates the TCP position for the linear rows and takes the
angular rows from the rotation, omega_j = axial((dR/dq_j) R^T) (common practice; e.g. Siciliano,
Sciavicco, Villani & Oriolo, "Robotics: Modelling, Planning and Control", 2009, sec. 3.1.1 on the
derivative of a rotation matrix). Link transforms:

* standard DH  T_i = Rz(theta_i) Tz(d_i) Tx(a_i) Rx(alpha_i)
  (Denavit & Hartenberg 1955; as tabulated in Siciliano et al. 2009, sec. 2.8.2),
* modified DH  T_i = Rx(alpha_{i-1}) Tx(a_{i-1}) Rz(theta_i) Tz(d_i)
  (Craig, "Introduction to Robotics", 3rd ed. 2005, sec. 3.4 -- from memory),

with theta_i += q_i for a revolute joint and d_i += q_i for a prismatic joint; the tool is
xyz + roll-pitch-yaw (R = Rz(yaw) Ry(pitch) Rx(roll), the URDF convention, common practice)
after the last link; the mount the same in front of the base.
"""
from __future__ import annotations

import math
import tomllib
from pathlib import Path

import numpy as np
import pytest
import sympy as sp

from workbench.arm.files import parse_arm_dict
from workbench.kinematics import Arm

ROOT = Path(__file__).resolve().parents[2]
DEG = math.pi / 180


# ---- the independent symbolic model -----------------------------------------------------------

def _rx(a):
    c, s = sp.cos(a), sp.sin(a)
    return sp.Matrix([[1, 0, 0, 0], [0, c, -s, 0], [0, s, c, 0], [0, 0, 0, 1]])


def _ry(a):
    c, s = sp.cos(a), sp.sin(a)
    return sp.Matrix([[c, 0, s, 0], [0, 1, 0, 0], [-s, 0, c, 0], [0, 0, 0, 1]])


def _rz(a):
    c, s = sp.cos(a), sp.sin(a)
    return sp.Matrix([[c, -s, 0, 0], [s, c, 0, 0], [0, 0, 1, 0], [0, 0, 0, 1]])


def _tr(x, y, z):
    return sp.Matrix([[1, 0, 0, x], [0, 1, 0, y], [0, 0, 1, z], [0, 0, 0, 1]])


def _xyz_rpy(xyz, rpy_deg):
    r, p, y = (sp.Float(v) * sp.pi / 180 for v in rpy_deg)
    return _tr(*[sp.Float(v) for v in xyz]) * _rz(y) * _ry(p) * _rx(r)


def symbolic_jacobian(rows, convention, tool=None, mount=None, world=False, unit=1.0):
    """Numerical function q -> 6 x n Jacobian from symbolic DH rows (file units and degrees)."""
    n = len(rows)
    q = sp.symbols(f"q0:{n}", real=True)
    T = sp.eye(4)
    for i, row in enumerate(rows):
        a = sp.Float(row["a"] * unit)
        alpha = sp.Float(row["alpha"]) * sp.pi / 180
        d = sp.Float(row["d"] * unit)
        theta = sp.Float(row["theta"]) * sp.pi / 180
        if row.get("type", "revolute") == "revolute":
            theta = theta + q[i]
        else:
            d = d + q[i]
        if convention == "dh":
            T = T * _rz(theta) * _tr(0, 0, d) * _tr(a, 0, 0) * _rx(alpha)
        else:
            T = T * _rx(alpha) * _tr(a, 0, 0) * _rz(theta) * _tr(0, 0, d)
    if tool is not None:
        T = T * _xyz_rpy([v * unit for v in tool["xyz"]], tool["rpy"])
    if world and mount is not None:
        T = _xyz_rpy([v * unit for v in mount["xyz"]], mount["rpy"]) * T
    p = T[:3, 3]
    R = T[:3, :3]
    cols = []
    for j in range(n):
        dp = p.diff(q[j])
        W = R.diff(q[j]) * R.T
        cols.append([dp[0], dp[1], dp[2], W[2, 1], W[0, 2], W[1, 0]])
    Jsym = sp.Matrix(cols).T
    return sp.lambdify([q], Jsym, modules="numpy", cse=True)


def _random_q(arm, rng, count):
    lo = np.where(np.isfinite(arm.model.lower), arm.model.lower, -math.pi)
    hi = np.where(np.isfinite(arm.model.upper), arm.model.upper, math.pi)
    return rng.uniform(lo, hi, size=(count, arm.model.n))


# ---- arms -------------------------------------------------------------------------------------

def _demo_s6():
    data = tomllib.loads((ROOT / "arms" / "demo_s6.toml").read_text())
    return data


def _mdh_with_prismatic():
    """An invented modified-DH arm: R, P, R, R, R with a tool offset and a tilted mount."""
    return {
        "arm": {"name": "mdh test arm", "geometry": "mdh", "length_unit": "m"},
        "joint": [
            {"name": "turn", "a": 0.0, "alpha": 0.0, "d": 0.3, "theta": 10.0},
            {"name": "lift", "type": "prismatic", "a": 0.1, "alpha": -90.0, "d": 0.05, "theta": 30.0,
             "limits": [0.0, 0.5]},
            {"name": "shoulder", "a": 0.2, "alpha": 90.0, "d": 0.0, "theta": -20.0},
            {"name": "elbow", "a": 0.45, "alpha": 0.0, "d": 0.07, "theta": 0.0},
            {"name": "wrist", "a": 0.35, "alpha": -90.0, "d": 0.0, "theta": 45.0},
        ],
        "tool": {"xyz": [0.02, -0.03, 0.15], "rpy": [10.0, -25.0, 40.0]},
        "mount": {"xyz": [1.0, 2.0, 0.5], "rpy": [30.0, 15.0, -60.0]},
    }


def _dh_with_prismatic_mm():
    """An invented standard-DH arm in millimetres: R, R, P, R with a tool offset and a wall mount."""
    return {
        "arm": {"name": "dh prismatic test arm", "geometry": "dh", "length_unit": "mm"},
        "joint": [
            {"name": "j1", "a": 250.0, "alpha": 0.0, "d": 400.0, "theta": 0.0},
            {"name": "j2", "a": 200.0, "alpha": 180.0, "d": 0.0, "theta": 15.0},
            {"name": "j3", "type": "prismatic", "a": 0.0, "alpha": 0.0, "d": 20.0, "theta": 0.0,
             "limits": [-100.0, 200.0]},
            {"name": "j4", "a": 30.0, "alpha": 60.0, "d": 50.0, "theta": -30.0},
        ],
        "tool": {"xyz": [10.0, 0.0, 80.0], "rpy": [0.0, 90.0, 0.0]},
        "mount": {"xyz": [0.0, 0.0, 2000.0], "rpy": [90.0, 0.0, 0.0]},
    }


CASES = {
    "demo_s6 (std DH, tool)": (_demo_s6, "dh", 1.0),
    "modified DH, prismatic, tool, mount": (_mdh_with_prismatic, "mdh", 1.0),
    "std DH in mm, prismatic, tool, mount": (_dh_with_prismatic_mm, "dh", 1e-3),
}


@pytest.fixture(scope="module", params=list(CASES))
def case(request):
    make, convention, unit = CASES[request.param]
    data = make()
    arm = Arm(parse_arm_dict(data, source_name=request.param))
    tool = data.get("tool")
    if tool is not None:
        tool = {"xyz": tool.get("xyz", [0, 0, 0]), "rpy": tool.get("rpy", [0, 0, 0])}
    base_fn = symbolic_jacobian(data["joint"], convention, tool=tool, unit=unit)
    world_fn = symbolic_jacobian(data["joint"], convention, tool=tool, mount=data.get("mount"),
                                 world=True, unit=unit)
    return arm, base_fn, world_fn


def test_jacobian_matches_sympy_to_1e_12(case):
    arm, base_fn, _ = case
    rng = np.random.default_rng(7)
    Q = _random_q(arm, rng, 25)
    J = arm.jacobian(Q)
    for i, q in enumerate(Q):
        Jref = np.asarray(base_fn(q), dtype=float)
        np.testing.assert_allclose(J[i], Jref, rtol=0, atol=1e-12)


def test_world_jacobian_matches_sympy_to_1e_12(case):
    # the mount only rotates the rows (the point's velocity seen from the cell)
    arm, _, world_fn = case
    rng = np.random.default_rng(8)
    Q = _random_q(arm, rng, 25)
    J = arm.jacobian(Q, world=True)
    for i, q in enumerate(Q):
        np.testing.assert_allclose(J[i], np.asarray(world_fn(q), dtype=float), rtol=0, atol=1e-12)


def test_jacobian_matches_central_differences_to_1e_7(case):
    arm, _, _ = case
    rng = np.random.default_rng(9)
    Q = _random_q(arm, rng, 40)
    np.testing.assert_allclose(arm.jacobian(Q), arm.numeric_jacobian(Q), rtol=0, atol=1e-7)
    np.testing.assert_allclose(arm.jacobian(Q, world=True), arm.numeric_jacobian(Q, world=True),
                               rtol=0, atol=1e-7)


def test_sympy_model_is_not_trivially_equal():
    # guard: a wrong sign in the symbolic twist of one joint must show up (the check can fail)
    data = _mdh_with_prismatic()
    arm = Arm(parse_arm_dict(data))
    wrong = [dict(r) for r in data["joint"]]
    wrong[2]["alpha"] = -wrong[2]["alpha"]
    fn = symbolic_jacobian(wrong, "mdh", tool={"xyz": data["tool"]["xyz"], "rpy": data["tool"]["rpy"]})
    q = np.array([0.3, 0.2, -0.4, 0.8, 1.1])
    assert np.abs(arm.jacobian(q) - np.asarray(fn(q), dtype=float)).max() > 1e-3
