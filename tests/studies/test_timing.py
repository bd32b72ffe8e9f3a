"""Cycle-time estimate (workbench.studies.timing): closed forms, the LP of the discrete problem,
and an exhaustive search over a fine speed grid."""
from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import linprog

from workbench.errors import WorkbenchError
from workbench.studies.timing import ACCEL, SPEED, TOOL, path_derivatives, time_parameterise


def test_straight_joint_line_trapezoid_closed_form():
    # A straight line in joint space q(s) = q0 + s c, s in [0, S]: every joint moves in proportion,
    # so the path speed is capped by V = min_i v_i / |c_i| and its acceleration by
    # A = min_i a_i / |c_i|; rest to rest the fastest motion is the trapezoidal profile with time
    # T = S / V + V / A when S >= V^2 / A, else the triangle 2 sqrt(S / A) (common practice).
    S = 1.2
    c = np.array([0.5, -1.0, 0.25])
    vmax = np.array([2.0, 1.0, 3.0])      # per unit s: 4, 1, 12 -> joint 2 (index 1) binds, V = 1
    amax = np.array([4.0, 6.0, 1.0])      # per unit s: 8, 6, 4  -> joint 3 (index 2) binds, A = 4
    N = 4001
    s = np.linspace(0, S, N)
    q = np.array([0.1, 0.2, -0.3]) + s[:, None] * c
    r = time_parameterise(s, q, vmax, amax)
    V, A = 1.0, 4.0
    assert r.time == pytest.approx(S / V + V / A, rel=2e-4)
    mid = N // 2
    assert r.binding[mid] == SPEED and r.joint[mid] == 1
    assert r.sdot[mid] == pytest.approx(V, rel=1e-9)
    assert r.binding[N // 50] == ACCEL and r.joint[N // 50] == 2
    # speed limits only: T = S / V, no ramps
    r0 = time_parameterise(s, q, vmax, None)
    assert r0.time == pytest.approx(S / V, rel=1e-12)
    assert any("no joint acceleration limits" in n for n in r0.notes)
    # a short move never reaches V: the triangle
    s2 = np.linspace(0, 0.1, 2001)
    r2 = time_parameterise(s2, q[0] + s2[:, None] * c, vmax, amax)
    assert 0.1 < V ** 2 / A and r2.time == pytest.approx(2 * np.sqrt(0.1 / A), rel=2e-4)
    # a tool speed cap below V binds instead: T = S / 0.5 + 0.5 / A
    r3 = time_parameterise(s, q, vmax, amax, tool_speed=0.5)
    assert r3.time == pytest.approx(S / 0.5 + 0.5 / A, rel=2e-4)
    assert r3.binding[mid] == TOOL and r3.joint[mid] == -1


def random_path(rng, n=3, N=120, S=1.0):
    s = np.linspace(0, S, N)
    A = rng.uniform(0.2, 0.8, (n, 3))
    w = rng.uniform(1.0, 6.0, (n, 3))
    ph = rng.uniform(0, 2 * np.pi, (n, 3))
    q = np.sum(A[None] * np.sin(w[None] * s[:, None, None] + ph[None]), axis=-1)
    return s, q, rng.uniform(1.0, 3.0, n), rng.uniform(2.0, 6.0, n)


def _lp_profile(s, q, vmax, amax, tool_speed=None):
    """The discrete problem as an LP in x_k = sdot_k^2: maximise sum x subject to the speed bounds,
    the acceleration bounds at each sample with u_k = (x_{k+1} - x_k) / (2 ds_k), rest to rest."""
    dq, ddq = path_derivatives(s, q)
    N, n = q.shape
    ds = np.diff(s)
    rows, ub = [], []
    for k in range(N - 1):
        for i in range(n):
            row = np.zeros(N)
            row[k] = ddq[k, i] - dq[k, i] / (2 * ds[k])
            row[k + 1] = dq[k, i] / (2 * ds[k])
            rows.append(row)
            ub.append(amax[i])
            rows.append(-row)
            ub.append(amax[i])
    with np.errstate(divide="ignore"):
        xs = np.min(np.where(np.abs(dq) > 1e-12, (vmax / np.abs(dq)) ** 2, np.inf), axis=1)
    if tool_speed is not None:
        xs = np.minimum(xs, tool_speed ** 2)
    bounds = [(0, float(b)) for b in xs]
    bounds[0] = bounds[-1] = (0, 0)
    r = linprog(-np.ones(N), A_ub=np.array(rows), b_ub=np.array(ub), bounds=bounds, method="highs")
    assert r.status == 0, r.message
    return r.x


@pytest.mark.parametrize("seed", [0, 1, 10, 13])
def test_profile_against_a_fine_lp_reference(seed):
    # Reference: the same smooth path sampled 10x finer, its discrete problem solved by
    # scipy.optimize.linprog (HiGHS) as max sum x (in the fine limit the pointwise-largest
    # feasible profile, which is the time-optimal one: Bobrow, Dubowsky & Gibson 1985, from
    # memory), its time sum 2 ds / (sqrt x_k + sqrt x_k+1). The estimate from 150 samples is within
    # 1 % of it, and from the fine samples within 0.05 %.
    s, q, vmax, amax = random_path(np.random.default_rng(seed), N=150)
    coarse = time_parameterise(s, q, vmax, amax).time
    s2, q2, _, _ = random_path(np.random.default_rng(seed), N=1500)
    x = _lp_profile(s2, q2, vmax, amax)
    v = np.sqrt(np.maximum(x, 0))
    ref = float(np.sum(2 * np.diff(s2) / (v[:-1] + v[1:])))
    assert coarse == pytest.approx(ref, rel=0.01)
    fine = time_parameterise(s2, q2, vmax, amax)
    assert fine.time == pytest.approx(ref, rel=5e-4)
    # the LP's sum of x is an upper bound of any feasible profile's, ours included
    assert np.sum(fine.sdot ** 2) <= np.sum(x) * (1 + 1e-7)


def test_profile_respects_every_limit():
    # joint speeds q' sdot and accelerations q' u + q'' x at every sample inside the limits
    rng = np.random.default_rng(5)
    s, q, vmax, amax = random_path(rng, n=4, N=400)
    r = time_parameterise(s, q, vmax, amax)
    dq, ddq = path_derivatives(s, q)
    x = r.sdot ** 2
    u = np.diff(x) / (2 * np.diff(s))
    assert np.all(np.abs(dq * r.sdot[:, None]) <= vmax * (1 + 1e-9))
    acc = dq[:-1] * u[:, None] + ddq[:-1] * x[:-1, None]
    assert np.all(np.abs(acc) <= amax * (1 + 1e-9))
    assert r.sdot[0] == 0 and r.sdot[-1] == 0
    assert np.all(np.diff(r.t) > 0)


def test_bad_input():
    s = np.linspace(0, 1, 5)
    q = np.zeros((5, 2))
    with pytest.raises(WorkbenchError, match="increasing"):
        time_parameterise(s[::-1], q, [1, 1], [1, 1])
    with pytest.raises(WorkbenchError, match="no limit bounds"):
        time_parameterise(s, q, None, None)
    with pytest.raises(WorkbenchError, match="max_speed"):
        time_parameterise(s, q, [1, 1, 1], None)
    with pytest.raises(WorkbenchError, match="not all finite"):
        time_parameterise(s, np.full((5, 2), np.nan), [1, 1], None)
