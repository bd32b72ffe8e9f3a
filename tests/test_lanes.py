"""The structure-of-arrays kernels (workbench/kinematics/lanes.py) against independent references.

References: ``np.linalg.svd`` (LAPACK's divide-and-conquer SVD) for singular values, the plain
np.matmul chain of workbench/kinematics/reference.py for Jacobians (itself checked against sympy in
tests/reference/test_sympy_jacobians.py), and the per-pose kernels of kernels.py for every demo arm.
The accuracy bar, |s - s_numpy| <= 1e-9 * s1, is the product's (DESIGN §8); the Jacobi method is
accurate to a few ulps of s1 (Demmel & Veselic, "Jacobi's method is more accurate than QR",
SIAM J. Matrix Anal. Appl. 1992), so the tests also check 1e-13 * s1 where no bar is at stake.
No test here times anything.
"""
from __future__ import annotations

import io
import zlib
from pathlib import Path

import numpy as np
import pytest
from numba import njit

from workbench import load_arm
from workbench.arm.files import parse_arm_dict
from workbench.kinematics import Arm, kernels, lanes, row_scale
from workbench.kinematics.reference import jacobian_numpy, sv_numpy
from workbench.kinematics.rows import parse_rows
from workbench.measures import measures, pose_measures

ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted(p.name for p in (ROOT / "arms").iterdir() if p.suffix in (".toml", ".urdf"))
ROW_SETS = ["full", "translation", "rotation", "planar", "vx,vy,vz,wx", "vx,vy,vz,wx,wy", "vz,wx"]


def rel_err(s, ref):
    return float(np.max(np.abs(s - ref) / np.maximum(ref[..., :1], 1e-300)))


def old_sv(arm, Q, rows, length, frame="tcp", world=False):
    """Singular values from the per-pose kernels (the fallback path)."""
    k, off = arm.resolve_frame(frame)
    r = np.asarray(parse_rows(rows), dtype=np.int64)
    m = arm.model
    out = np.empty((len(Q), len(r)))
    R = np.ascontiguousarray(m.mount[:3, :3]) if world else np.eye(3)
    kernels.sv_map_batch(np.ascontiguousarray(Q), m.origins, m.axes, m.kinds, k, off, R, r,
                         row_scale(tuple(r), length), out)
    return out


@pytest.fixture(scope="module", params=DEMOS)
def demo(request):
    return load_arm(ROOT / "arms" / request.param)


# ---- the chain with every axis turned to local z ------------------------------------------------

def test_align_z_takes_z_to_the_axis_and_is_a_rotation():
    rng = np.random.default_rng(2)
    axes = np.concatenate([rng.normal(size=(50, 3)), np.eye(3), -np.eye(3)])
    for a in axes:
        A = lanes._align_z(a)
        np.testing.assert_allclose(A @ [0, 0, 1], a / np.linalg.norm(a), atol=1e-15)
        np.testing.assert_allclose(A.T @ A, np.eye(3), atol=1e-15)  # orthonormal, common practice
        assert np.linalg.det(A) == pytest.approx(1.0, abs=1e-14)


def test_lane_jacobians_match_plain_numpy_for_every_demo_arm(demo):
    rng = np.random.default_rng(11)
    Q = demo.random_q(257, rng)  # not a multiple of the lane block: the tail lanes are exercised
    J = demo.jacobian(Q)
    np.testing.assert_allclose(J, jacobian_numpy(demo.model, Q), rtol=0, atol=1e-13)


def test_lane_jacobians_match_the_per_pose_kernels_for_frames_points_and_world(demo):
    rng = np.random.default_rng(12)
    Q = demo.random_q(100, rng)
    m = demo.model
    frames = ["tcp", "flange", "base", "joint:1", f"joint:{m.n}", f"com:{m.n}"]
    if m.n >= 3:
        frames.append("joint:3")
    for frame in frames:
        for world in (False, True):
            for point in (None, (0.05, -0.02, 0.1)):
                k, off = demo.resolve_frame(frame, point)
                R = np.ascontiguousarray(m.mount[:3, :3]) if world else np.eye(3)
                ref = np.empty((len(Q), 6, m.n))
                kernels.jacobian_batch(Q, m.origins, m.axes, m.kinds, k, off, R, ref)
                got = demo.jacobian(Q, frame=frame, point=point, world=world)
                np.testing.assert_allclose(got, ref, rtol=0, atol=1e-13, err_msg=f"{frame} {world} {point}")


def test_general_axes_and_prismatic_joints_fold_into_z_axis_chain():
    # an invented arm with skew axes, negative z, a prismatic joint along a skew axis and a tool
    data = {"arm": {"name": "skew test arm", "geometry": "origins"},
            "joint": [{"name": "a", "axis": [0, 0, -1]},
                      {"name": "b", "xyz": [0.1, 0, 0.3], "rpy": [10, 20, 30], "axis": list(np.array([0.3, -0.5, 0.8]) / np.linalg.norm([0.3, -0.5, 0.8]))},
                      {"name": "c", "type": "prismatic", "xyz": [0, 0.2, 0.1], "axis": [2 ** -0.5, 2 ** -0.5, 0], "limits": [0, 0.4]},
                      {"name": "d", "xyz": [0.3, 0, 0], "axis": [0, 1, 0]},
                      {"name": "e", "xyz": [0.1, 0.1, 0], "rpy": [0, 90, 0], "axis": [1, 0, 0]}],
            "tool": {"xyz": [0.05, 0.02, 0.12], "rpy": [5, 0, -40]}}
    arm = Arm(parse_arm_dict(data, source_name="<skew>"))
    Q = arm.random_q(300, np.random.default_rng(3))
    np.testing.assert_allclose(arm.jacobian(Q), jacobian_numpy(arm.model, Q), rtol=0, atol=1e-13)
    for rows in ROW_SETS:
        L = 0.7
        r = parse_rows(rows)
        ref = sv_numpy(jacobian_numpy(arm.model, Q), r, row_scale(r, L))
        assert rel_err(arm.singular_values(Q, rows=rows, length=L), ref) < 1e-13, rows


# ---- singular values against np.linalg.svd -------------------------------------------------------

def test_singular_values_match_numpy_svd_at_random_poses_every_arm_and_row_set(demo):
    rng = np.random.default_rng(21)
    Q = demo.random_q(3000, rng)
    J = jacobian_numpy(demo.model, Q)
    L = demo.nominal_reach()
    for rows in ROW_SETS:
        r = parse_rows(rows)
        ref = sv_numpy(J, r, row_scale(r, L))
        fused = demo.singular_values(Q, rows=rows, length=L)
        stack = measures(J, rows=rows, length=L)["sv"]
        assert rel_err(fused, ref) < 1e-13, rows
        assert rel_err(stack, ref) < 1e-13, rows


def test_singular_values_match_the_per_pose_kernels_for_every_demo_arm(demo):
    Q = demo.random_q(1000, np.random.default_rng(22))
    L = demo.nominal_reach()
    for rows in ("full", "translation", "planar"):
        for world in (False, True):
            a = demo.singular_values(Q, rows=rows, length=L, world=world)
            b = old_sv(demo, Q, rows, L, world=world)
            assert rel_err(a, b) < 1e-13


def _wrist_arm():
    """A 6R arm with a spherical wrist (axes 4, 5, 6 meet in one point), invented."""
    return Arm(parse_arm_dict({
        "arm": {"name": "wrist test arm", "geometry": "dh"},
        "joint": [{"name": "j1", "a": 0.15, "alpha": -90, "d": 0.45, "theta": 0},
                  {"name": "j2", "a": 0.6, "alpha": 0, "d": 0, "theta": -90},
                  {"name": "j3", "a": 0.12, "alpha": -90, "d": 0, "theta": 0},
                  {"name": "j4", "a": 0, "alpha": 90, "d": 0.64, "theta": 0},
                  {"name": "j5", "a": 0, "alpha": -90, "d": 0, "theta": 0},
                  {"name": "j6", "a": 0, "alpha": 0, "d": 0.1, "theta": 0}]}, source_name="<wrist>"))


@pytest.mark.parametrize("arm_name", ["wrist", "demo_s6.toml", "demo_u6.urdf", "demo_o6.toml"])
def test_exactly_singular_wrist_and_near_singular_poses(arm_name):
    arm = _wrist_arm() if arm_name == "wrist" else load_arm(ROOT / "arms" / arm_name)
    rng = np.random.default_rng(23)
    Q = arm.random_q(4000, rng)
    # wrist joint 5 at, or within 1e-12 .. 1e-4 rad of, the value that lines up axes 4 and 6
    # (q5 = 0 for these arms: common practice for a wrist whose 4th and 6th axes are parallel there)
    Q[:, 4] = rng.choice([0.0, 1e-12, -1e-8, 1e-6, 1e-4], size=len(Q))
    Q[::7, 2] = 0.0  # and some elbows at the zero of joint 3 besides
    L = arm.nominal_reach()
    J = jacobian_numpy(arm.model, Q)
    ref = sv_numpy(J, parse_rows("full"), row_scale(parse_rows("full"), L))
    assert np.min(ref[:, -1] / ref[:, 0]) < 1e-12  # the set really holds singular poses
    got = arm.singular_values(Q, rows="full", length=L)
    assert rel_err(got, ref) <= 1e-9  # the product's bar (DESIGN §8)
    assert rel_err(got, ref) < 1e-13
    assert rel_err(measures(J, rows="full", length=L)["sv"], ref) < 1e-13


@pytest.mark.parametrize("kind", ["gauss", "cluster", "graded", "rank-deficient", "orthogonal", "zero"])
@pytest.mark.parametrize("shape", [(6, 6), (6, 7), (3, 6), (6, 3), (5, 7), (2, 2), (6, 1), (1, 4)])
def test_stacks_of_hard_matrices_match_numpy_svd(kind, shape):
    m, n = shape
    rng = np.random.default_rng(zlib.crc32(f"{kind}{shape}".encode()))
    N = 600
    k = min(m, n)
    if kind == "gauss":
        A = rng.normal(size=(N, m, n))
    elif kind == "zero":
        A = np.zeros((N, m, n))
    else:
        U = np.linalg.qr(rng.normal(size=(N, m, m)))[0][:, :, :k]
        V = np.linalg.qr(rng.normal(size=(N, n, n)))[0][:, :k, :]
        s = {"cluster": np.array([1, 1 - 1e-9, 1e-3, 1e-3 * (1 + 1e-8), 0.5, 0.5 - 1e-7]),
             "graded": 2.0 * 10.0 ** -np.arange(6.0),
             "rank-deficient": np.array([1.0, 1.0, 0.3, 1e-300, 0.0, 0.0]),
             "orthogonal": np.ones(6)}[kind][:k]
        A = (U * s[None, None, :]) @ V
    S = np.zeros((N, 6, n))
    S[:, :m, :] = A
    rows = tuple(range(m))
    res = measures(S, rows=list(rows), length=1.0)
    ref = sv_numpy(S, rows)
    if kind == "zero":
        assert np.all(res["sv"] == 0.0) and np.all(res["inverse_condition"] == 0.0)
        return
    assert rel_err(res["sv"], ref) < 1e-13


def test_sweep_counts_keep_a_margin_of_one_sweep():
    """SWEEPS_FOR[k] - 1 sweeps already reach 1e-10 * s1 on the hardest stacks tried (clustered and
    Gaussian 6-column stacks, arm Jacobians at singular poses); the last sweep is the margin."""
    rng = np.random.default_rng(5)
    N = 2000
    for k in range(2, 7):
        U = np.linalg.qr(rng.normal(size=(N, k, k)))[0]
        V = np.linalg.qr(rng.normal(size=(N, 7, 7)))[0][:, :k, :]
        s = np.array([1, 1 - 1e-9, 1e-3, 1e-3 * (1 + 1e-8), 0.5, 0.5 - 1e-7])[:k]
        for A in (rng.normal(size=(N, k, 7)), (U * s[None, None, :]) @ V):
            S = np.zeros((N, 6, 7))
            S[:, :k] = A
            rows = np.arange(k, dtype=np.int64)
            need = lanes.sweeps_needed(S, rows, np.ones(k), tol=1e-10)
            assert need <= lanes.SWEEPS_FOR[k] - (1 if k > 2 else 0), (k, need)


# ---- measures -----------------------------------------------------------------------------------

def test_kernel_measures_follow_measures_from_sv(demo):
    Q = demo.random_q(777, np.random.default_rng(31))
    Q[::5, min(4, demo.n - 1)] = 0.0
    L = demo.nominal_reach()
    for rows in ("full", "translation", "planar", "rotation"):
        got = pose_measures(demo, Q, rows=rows, length=L)
        plain = lanes.measures_from_sv(got["sv"])
        for key in ("manipulability", "condition", "inverse_condition", "min_sv"):
            np.testing.assert_array_equal(got[key], plain[key], err_msg=key)
        via_stack = measures(demo.jacobian(Q), rows=rows, length=L)
        for key in ("manipulability", "inverse_condition", "min_sv", "sv"):
            np.testing.assert_allclose(via_stack[key], got[key], rtol=1e-12, atol=1e-14, err_msg=key)


def test_more_rows_than_joints_pads_zeros_and_gives_infinite_condition():
    arm = load_arm(ROOT / "arms" / "demo_planar2r.toml")
    Q = arm.random_q(70, np.random.default_rng(4))
    res = pose_measures(arm, Q, rows="full", length=1.0)
    assert res["sv"].shape == (70, 6)
    assert np.all(res["sv"][:, 2:] == 0.0)
    assert np.all(res["manipulability"] == 0.0)  # Yoshikawa 1985: w = 0 when rows > joints
    assert np.all(np.isinf(res["condition"])) and np.all(res["inverse_condition"] == 0.0)


def test_leading_shapes_empty_and_single_batches():
    arm = load_arm(ROOT / "arms" / "demo_u6.urdf")
    Q = arm.random_q(24, np.random.default_rng(6)).reshape(2, 3, 4, 6)
    res = pose_measures(arm, Q)
    assert res["sv"].shape == (2, 3, 4, 6) and res["manipulability"].shape == (2, 3, 4)
    flat = pose_measures(arm, Q.reshape(-1, 6))
    np.testing.assert_array_equal(res["sv"].reshape(-1, 6), flat["sv"])
    assert pose_measures(arm, np.zeros((0, 6)))["sv"].shape == (0, 6)
    assert measures(np.zeros((0, 6, 6)))["manipulability"].shape == (0,)
    one = pose_measures(arm, Q[0, 0, 0])
    assert one["sv"].shape == (6,) and one["manipulability"].shape == ()


def test_results_do_not_depend_on_the_batch_a_pose_is_in():
    """Studies need the values of a cell independent of chunking (DEVELOPERS.md): every lane does
    the same fixed sweeps, so a pose gives bit-identical results in any batch."""
    arm = load_arm(ROOT / "arms" / "demo_u6.urdf")
    Q = arm.random_q(1000, np.random.default_rng(7))
    whole = pose_measures(arm, Q)["sv"]
    parts = np.concatenate([pose_measures(arm, Q[a:b])["sv"] for a, b in [(0, 1), (1, 33), (33, 600), (600, 1000)]])
    np.testing.assert_array_equal(whole, parts)


# ---- first-use compilation is announced ---------------------------------------------------------

def test_is_ready_tells_a_fresh_kernel_from_a_compiled_one():
    @njit
    def fresh(x):
        return x + 1.0

    assert not kernels.is_ready(fresh)
    fresh(1.0)
    assert kernels.is_ready(fresh)
    lanes.warm_up()
    assert all(kernels.is_ready(d) for d in (lanes.sv_map_lanes, lanes.jacobian_lanes, lanes.sv_lanes))


def test_announce_compile_prints_the_expected_time_once(monkeypatch):
    @njit
    def fresh2(x):
        return x * 2.0

    monkeypatch.setattr(kernels, "_group", lambda name: ([fresh2], lambda: fresh2(1.0)))
    monkeypatch.setattr(kernels, "_CHECKED", set())
    err = io.StringIO()
    assert kernels.announce_compile("lanes", stream=err)
    text = err.getvalue()
    assert text.startswith(f"compiling vector kernels (first use, about {kernels.COMPILE_SECONDS['lanes']} s")
    assert kernels.is_ready(fresh2)
    err2 = io.StringIO()
    assert not kernels.announce_compile("lanes", stream=err2)  # once per process
    assert err2.getvalue() == ""


# ---- cos / sin in the lanes ---------------------------------------------------------------------

def test_pi_over_two_split_sums_to_pi_over_two():
    """The three parts of the Cody-Waite reduction (Cody & Waite, "Software Manual for the
    Elementary Functions", 1980) sum to pi/2 (reference: mpmath at 300 bits); the first two have
    at most 33 significant bits, so k * part is exact for |k| < 2^20."""
    import mpmath

    mpmath.mp.prec = 300
    total = mpmath.mpf(lanes._PIO2_1) + mpmath.mpf(lanes._PIO2_2) + mpmath.mpf(lanes._PIO2_3)
    assert abs(total - mpmath.pi / 2) < mpmath.mpf(1e-36)
    for part in (lanes._PIO2_1, lanes._PIO2_2):
        m, _ = np.frexp(part)
        assert float(m * 2.0 ** 33) == int(m * 2.0 ** 33)


@pytest.mark.parametrize("bound", [1e-3, 4.0, 40.0, 1e5, 1e7])
def test_lane_sincos_matches_numpy_cos_and_sin(bound):
    """Reference: np.cos / np.sin (the C library, correctly rounded or within 1 ulp); the lane
    polynomials are within 2 ulp of 1 at every angle, and beyond SINCOS_REDUCED fall back to them."""
    rng = np.random.default_rng(int(bound * 10))
    q = rng.uniform(-bound, bound, (200, lanes.LANES))
    q[0, :8] = [0.0, -0.0, np.pi / 4, np.pi / 2, np.pi, -np.pi, 3 * np.pi / 4, -3 * np.pi / 2]
    c = np.empty(lanes.LANES)
    s = np.empty(lanes.LANES)
    for row in q:
        lanes._sincos(row, c, s)
        np.testing.assert_allclose(c, np.cos(row), rtol=0, atol=2.3e-16)
        np.testing.assert_allclose(s, np.sin(row), rtol=0, atol=2.3e-16)


def test_lane_sincos_of_nan_and_inf_is_nan():
    q = np.zeros(lanes.LANES)
    q[:3] = [np.nan, np.inf, -np.inf]
    c = np.empty(lanes.LANES)
    s = np.empty(lanes.LANES)
    with np.errstate(invalid="ignore"):
        lanes._sincos(q, c, s)
    assert np.all(np.isnan(c[:3])) and np.all(np.isnan(s[:3]))
    assert np.all(c[3:] == 1.0) and np.all(s[3:] == 0.0)
