"""Cycle-time estimate along a path: time-optimal parameterisation within joint speed and
acceleration limits (and the path's tool speed).

Method: the phase-plane method of Bobrow, Dubowsky & Gibson, "Time-optimal control of robotic
manipulators along specified paths", IJRR 4(3), 1985, and Shin & McKay, "Minimum-time control of
robotic manipulators with geometric path constraints", IEEE TAC 30(6), 1985 (both from memory), in
its discrete form: the path q(s) is given at samples s_0 < ... < s_N; with x = s_dot^2 and
u = s_ddot, joint speeds are q'(s) s_dot and joint accelerations q'(s) u + q''(s) x, so every
limit is linear in (x, u) at a sample:

* speed:        |q_i'| sqrt(x) <= v_i            ->  x <= (v_i / |q_i'|)^2
* acceleration: -a_i <= q_i' u + q_i'' x <= a_i   (for each joint)
* tool speed:   sqrt(x) <= v_tool (when s is the arc length in m)

Between samples u is constant, x_{k+1} = x_k + 2 (s_{k+1} - s_k) u_k. A backward pass gives at each
sample the largest x from which the arm can still brake to rest at the end (each constraint is
linear in x_k, so this is a closed form per sample), a forward pass from rest accelerates as hard
as the limits allow without leaving that set. The result is the fastest profile of this discrete
problem (it equals the optimum of the linear programme max sum x_k, checked against
scipy.optimize.linprog in the tests); the time is sum 2 ds / (sqrt(x_k) + sqrt(x_{k+1})), exact for
constant acceleration between samples.

Neglected (say so wherever the estimate is shown): the arm's dynamics (the torques to accelerate
the links and the payload, and the torque limits while moving: only the static holding torques are
checked elsewhere), jerk limits, corner blending and the controller's own planner, servo lag.
The path is followed exactly and starts and ends at rest; q' and q'' come from finite differences
of the sampled joint values (np.gradient, second order), so a sharp corner of the tool path (a kink
in q(s)) forces a near stop there, as it would for exact path following.
"""
from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from ..errors import WorkbenchError

__all__ = ["Timing", "time_parameterise", "path_derivatives", "NEGLECTED", "bench_timing"]

NEGLECTED = ("arm dynamics (link and payload inertia, torque limits while moving), jerk limits, corner "
             "blending and the controller's planner; the path starts and ends at rest")

TOOL, SPEED, ACCEL = 0, 1, 2


@dataclass(frozen=True)
class Timing:
    """A time-optimal profile along a path.

    Attributes
    ----------
    time : float
        Total time, s (``inf`` when some sample allows no motion).
    t : ndarray (N,)
        Time at each sample, s.
    sdot : ndarray (N,)
        Path speed at each sample (units of s per second: m/s when s is the arc length).
    limit_sdot : ndarray (N,)
        The speed limit curve: the largest path speed each sample allows (joint speeds, tool speed
        and the acceleration needed just to follow the path's curvature at that speed).
    binding : ndarray of int (N,)
        What holds the speed back at each sample: 0 the tool speed, 1 a joint speed limit,
        2 a joint acceleration limit (speeding up, braking, or the curvature of the path).
    joint : ndarray of int (N,)
        0-based joint of that limit (-1 for the tool speed).
    notes : tuple of str
    """

    time: float
    t: np.ndarray
    sdot: np.ndarray
    limit_sdot: np.ndarray
    binding: np.ndarray
    joint: np.ndarray
    notes: tuple = ()

    def summary(self) -> str:
        """Share of the samples held back by each kind of limit, in words."""
        N = max(len(self.binding), 1)
        parts = []
        for code, what in ((TOOL, "the tool speed"), (SPEED, "joint speed limits"), (ACCEL, "joint accelerations")):
            k = int(np.sum(self.binding == code))
            if k:
                parts.append(f"{what} {100.0 * k / N:.0f} %")
        return ", ".join(parts)


def path_derivatives(s, q):
    """q'(s) and q''(s) (N, n) of samples q (N, n) at increasing s (N,) (np.gradient, second order)."""
    s = np.asarray(s, dtype=float)
    q = np.asarray(q, dtype=float)
    if len(s) < 2:
        return np.zeros_like(q), np.zeros_like(q)
    edge = 2 if len(s) >= 3 else 1
    d1 = np.gradient(q, s, axis=0, edge_order=edge)
    d2 = np.gradient(d1, s, axis=0, edge_order=edge)
    return d1, d2


def _limits(v, n, what):
    if v is None:
        return np.full(n, np.nan)
    v = np.asarray(v, dtype=float).reshape(-1)
    if v.shape != (n,):
        raise WorkbenchError(f"{what}: expected {n} joint limits, got shape {v.shape}")
    if np.any(np.isfinite(v) & (v <= 0)):
        raise WorkbenchError(f"{what}: limits must be > 0, got {v.tolist()}")
    return v


def time_parameterise(s, q, max_speed, max_acceleration=None, tool_speed=None, dq=None, ddq=None,
                      eps=1e-12) -> Timing:
    """Fastest motion along the sampled path q(s) within the limits (rest to rest).

    Parameters
    ----------
    s : array_like (N,)
        Strictly increasing path parameter (the arc length in m for a tool path).
    q : array_like (N, n)
        Joint values at the samples (rad, m).
    max_speed, max_acceleration : array_like (n,) or None
        Joint limits (rad/s, rad/s^2; m/s, m/s^2); NaN (or None) leaves a joint unbounded. With no
        acceleration limit at all the speeds change instantly (the profile is the limit curve).
    tool_speed : float or None
        Largest path speed (m/s when s is the arc length): the path's programmed tool speed.
    dq, ddq : array_like (N, n), optional
        q'(s) and q''(s) when known (default: :func:`path_derivatives`).

    Returns
    -------
    Timing
    """
    s = np.asarray(s, dtype=float).reshape(-1)
    q = np.asarray(q, dtype=float)
    if q.ndim != 2 or q.shape[0] != s.shape[0]:
        raise WorkbenchError(f"q: expected joint values shaped ({s.shape[0]}, n), got shape {q.shape}")
    N, n = q.shape
    if N < 2:
        raise WorkbenchError(f"a cycle-time estimate needs at least 2 path samples, got {N}")
    ds = np.diff(s)
    if not np.all(np.isfinite(s)) or np.any(ds <= 0):
        k = int(np.flatnonzero(~(ds > 0))[0]) if np.any(~(ds > 0)) else 0
        raise WorkbenchError(f"s: expected strictly increasing path positions, got {s[k]!r} then {s[k + 1]!r} "
                             f"at samples {k} and {k + 1}")
    if not np.all(np.isfinite(q)):
        raise WorkbenchError("q: the joint values along the path are not all finite (unreached samples?)")
    vmax = _limits(max_speed, n, "max_speed")
    amax = _limits(max_acceleration, n, "max_acceleration")
    if dq is None or ddq is None:
        dq, ddq = path_derivatives(s, q)
    dq = np.asarray(dq, float)
    ddq = np.asarray(ddq, float)
    notes = []

    # ---- the limit curve x_max (N,) and what sets it
    big = np.inf
    ad = np.abs(dq)
    with np.errstate(divide="ignore", invalid="ignore"):
        xv = np.where(np.isfinite(vmax) & (ad > eps), (vmax / np.where(ad > eps, ad, 1.0)) ** 2, big)  # (N, n)
    x_speed = xv.min(axis=1)
    j_speed = xv.argmin(axis=1)
    x_tool = np.full(N, big if tool_speed is None else float(tool_speed) ** 2)
    acc = np.isfinite(amax)
    has_acc = bool(acc.any())
    moving = acc[None, :] & (ad > eps)  # joints whose acceleration bounds u
    # per joint: L_i(x) = al + be x <= u <= au + be x = U_i(x)
    with np.errstate(divide="ignore", invalid="ignore"):
        safe = np.where(ad > eps, dq, 1.0)
        al = np.where(moving, -amax / np.where(ad > eps, ad, 1.0), -np.inf)
        au = np.where(moving, amax / np.where(ad > eps, ad, 1.0), np.inf)
        be = np.where(moving, -ddq / safe, 0.0)
    x_acc = np.full(N, big)
    if has_acc:
        # a joint that does not move along the path still feels q'' x: x <= a / |q''|
        still = acc[None, :] & (ad <= eps) & (np.abs(ddq) > eps)
        with np.errstate(divide="ignore", invalid="ignore"):
            xs = np.where(still, amax / np.where(still, np.abs(ddq), 1.0), big)
        x_acc = xs.min(axis=1)
        # pairs: L_i(x) <= U_j(x)  <=>  (be_i - be_j) x <= au_j - al_i
        db = be[:, :, None] - be[:, None, :]
        rhs = au[:, None, :] - al[:, :, None]
        pair = moving[:, :, None] & moving[:, None, :] & (db > eps)
        with np.errstate(divide="ignore", invalid="ignore"):
            xp = np.where(pair, rhs / np.where(pair, db, 1.0), big)
        x_acc = np.minimum(x_acc, xp.reshape(N, -1).min(axis=1))
    x_max = np.minimum(np.minimum(x_speed, x_tool), x_acc)
    if np.all(np.isinf(x_max)):
        raise WorkbenchError("no limit bounds the motion along this path (no joint speed limits, no tool speed)")
    if np.any(np.isinf(x_max)):
        notes.append("some samples have no speed bound (no joint moves there and no tool speed is given)")
        x_max = np.where(np.isinf(x_max), np.nanmax(np.where(np.isinf(x_max), np.nan, x_max)), x_max)

    # ---- backward (largest x that can still brake to rest) and forward (accelerate) passes
    if has_acc:
        K = np.empty(N)
        K[-1] = 0.0
        for k in range(N - 2, -1, -1):
            d2 = 2.0 * ds[k]
            m = moving[k]
            xk = x_max[k]
            if m.any():
                c = 1.0 + d2 * be[k, m]
                # x + 2 ds L_i(x) <= K_{k+1}
                r = K[k + 1] - d2 * al[k, m]
                pos = c > eps
                if pos.any():
                    xk = min(xk, float(np.min(r[pos] / c[pos])))
                # x + 2 ds U_i(x) >= 0 (never braking past rest)
                neg = c < -eps
                if neg.any():
                    xk = min(xk, float(np.min(d2 * au[k, m][neg] / -c[neg])))
            K[k] = max(xk, 0.0)
        x = np.empty(N)
        x[0] = 0.0
        up = np.zeros(N, bool)
        for k in range(N - 1):
            m = moving[k]
            if m.any():
                uh = float(np.min(au[k, m] + be[k, m] * x[k]))
                nxt = x[k] + 2.0 * ds[k] * uh
            else:
                nxt = big
            x[k + 1] = min(K[k + 1], max(nxt, 0.0))
            up[k + 1] = nxt < K[k + 1]
        x[-1] = 0.0
    else:
        notes.append("the arm file gives no joint acceleration limits: speeds change instantly (speed limits only)")
        x = x_max.copy()
        K = x_max
        up = np.zeros(N, bool)

    v = np.sqrt(np.maximum(x, 0.0))
    with np.errstate(divide="ignore"):
        dt = np.where(v[:-1] + v[1:] > 0, 2.0 * ds / np.where(v[:-1] + v[1:] > 0, v[:-1] + v[1:], 1.0), np.inf)
    t = np.concatenate([[0.0], np.cumsum(dt)])
    total = float(t[-1])
    if not np.isfinite(total):
        k = int(np.flatnonzero(~np.isfinite(dt))[0])
        notes.append(f"the path cannot be followed at sample {k}: no speed is allowed there")

    # ---- what binds at each sample
    rel = 1e-9
    on_curve = x >= x_max * (1 - 1e-6) - rel
    binding = np.full(N, ACCEL, np.int64)
    joint = np.full(N, -1, np.int64)
    tool_b = on_curve & (x_tool <= np.minimum(x_speed, x_acc) * (1 + 1e-9))
    speed_b = on_curve & ~tool_b & (x_speed <= x_acc * (1 + 1e-9))
    binding[tool_b] = TOOL
    binding[speed_b] = SPEED
    joint[speed_b] = j_speed[speed_b]
    accel = binding == ACCEL
    if has_acc and accel.any():
        # accelerating: the joint with the smallest upper bound of u; braking: the largest lower one
        with np.errstate(invalid="ignore"):
            Uu = np.where(moving, au + be * x[:, None], np.inf)
            Ll = np.where(moving, al + be * x[:, None], -np.inf)
        jj = np.where(up, np.argmin(Uu, axis=1), np.argmax(Ll, axis=1))
        joint[accel] = jj[accel]
    return Timing(total, t, v, np.sqrt(x_max), binding, joint, tuple(notes))


# ----------------------------------------------------------------------------------------------
# bench


def bench_timing(quick: bool = False) -> dict:
    """Cycle-time estimate of a 2 000-sample path (demo_s6 joint values along a smooth random
    path, joint speed and acceleration limits of the arm file, a 1 m/s tool speed cap).
    Bar (issue 10): under 1 s."""
    from ..benchutil import demo_arm_path
    from ..kinematics import load_arm

    arm = load_arm(demo_arm_path())
    m = arm.model
    N = 2000
    rng = np.random.default_rng(3)
    s = np.linspace(0.0, 1.5, N)  # m of tool path
    mid = 0.5 * (np.clip(m.lower, -3, 3) + np.clip(m.upper, -3, 3))
    amp = 0.3 * rng.uniform(0.5, 1.0, (m.n, 3))
    fr = rng.uniform(0.5, 3.0, (m.n, 3))
    ph = rng.uniform(0, 2 * np.pi, (m.n, 3))
    q = mid + np.sum(amp[None] * np.sin(fr[None] * s[:, None, None] * 2 + ph[None]), axis=-1)
    time_parameterise(s[:50], q[:50], m.max_speed, m.max_acceleration, 1.0)  # warm
    best = np.inf
    for _ in range(1 if quick else 3):
        t0 = time.perf_counter()
        res = time_parameterise(s, q, m.max_speed, m.max_acceleration, 1.0)
        best = min(best, time.perf_counter() - t0)
    return {"name": "cycle time",
            "metrics": {"samples": N, "seconds": best, "path_time_s": res.time},
            "ratios": {},
            "bars": {"2000-sample cycle-time estimate < 1 s": [best, 1.0, bool(best < 1.0)]},
            "notes": ["demo_s6 with its joint speed and acceleration limits, smooth random joint path, 1 m/s tool speed cap; "
                      f"binding: {res.summary()}"]}
