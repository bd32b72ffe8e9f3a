"""``workbench bench`` entry of the clearance kernel (listed in :mod:`workbench.bench`; here because it reads a cell)."""
from __future__ import annotations

import numpy as np

from ..benchutil import best_time, demo_arm_path

FIVE_BOXES = """[cell]
name = "five boxes (bench)"
floor = false
[[point]]
name = "p"
xyz = [0.8, 0, 0.6]
[[box]]
name = "rack"
center = [0.70, 1.00, 0.65]
size = [0.80, 0.45, 1.30]
[[box]]
name = "conveyor"
center = [0.80, -0.75, 0.40]
size = [2.20, 0.50, 0.80]
[[box]]
name = "cabinet"
center = [-0.90, 0.60, 0.90]
size = [0.60, 0.40, 1.80]
[[box]]
name = "table"
center = [1.10, 0.0, 0.35]
size = [0.60, 0.80, 0.70]
yaw = 20
[[box]]
name = "guard"
center = [-0.60, -0.80, 1.00]
size = [0.05, 1.20, 2.00]
yaw = -30
"""


def _reference(arm, q, cell):
    """Plain numpy: the arm's frames (kinematics), every capsule against every box by a
    golden-section search of the box distance along the capsule's axis (80 steps, all pairs at
    once), minus the radius; the smallest per pose."""
    m = arm.model
    F = arm.frames(q, world=True)                       # (N, n, 4, 4)
    N = len(q)
    Fl = F[:, -1] @ m.end                                # flange
    bodies = [None] + [F[:, k] for k in range(m.n)] + [Fl]
    segs = []
    for b, shapes in enumerate(m.body_shapes()):
        if b == 0:
            continue
        for s in shapes:
            R, t = bodies[b][:, :3, :3], bodies[b][:, :3, 3]
            segs.append((R @ s.a + t, R @ s.b + t, s.radius))
    out = np.full(N, np.inf)
    for bx in cell.boxes:
        c, sn = np.cos(bx.yaw), np.sin(bx.yaw)
        Rb = np.array([[c, -sn, 0], [sn, c, 0], [0, 0, 1.0]])
        h = bx.size / 2
        for a, b, r in segs:
            pa = (a - bx.center) @ Rb
            d = (b - a) @ Rb

            def sd(t):
                p = pa + t[:, None] * d
                qv = np.abs(p) - h
                return np.linalg.norm(np.maximum(qv, 0), axis=1) + np.minimum(qv.max(axis=1), 0)

            lo, hi = np.zeros(N), np.ones(N)
            g = 0.6180339887498949
            for _ in range(80):
                x1, x2 = hi - g * (hi - lo), lo + g * (hi - lo)
                left = sd(x1) < sd(x2)
                hi = np.where(left, x2, hi)
                lo = np.where(left, lo, x1)
            v = np.minimum(np.minimum(sd(lo), sd(np.zeros(N))), sd(np.ones(N))) - r
            out = np.minimum(out, v)
    return out


def bench_clearance(quick: bool = False) -> dict:
    """Clearance of demo_s6 (5 link capsules and a tool capsule) against 5 boxes, and with the
    floor and self-collision on; a plain numpy reference on the same poses."""
    from ..kinematics import load_arm
    from .cell import parse_cell_text
    from ..collision import clearance, geometry

    arm = load_arm(demo_arm_path())
    cell = parse_cell_text(FIVE_BOXES, "<bench>")
    rng = np.random.default_rng(5)
    N = 100_000 if quick else 1_000_000
    q = arm.random_q(N, rng)
    clearance(arm, q[:8], cell, self_collision=False)  # compile / load the cache outside the timing
    t_obs, d = best_time(lambda: clearance(arm, q, cell, self_collision=False))
    g = geometry(arm, cell, False)
    shapes = int(np.sum(g.body > 0))
    full_cell = parse_cell_text(FIVE_BOXES.replace("floor = false\n", ""), "<bench>")
    t_full, _ = best_time(lambda: clearance(arm, q, full_cell, self_collision=True))
    gf = geometry(arm, full_cell, True)
    n_ref = 5_000 if quick else 20_000
    t_ref, ref = best_time(lambda: _reference(arm, q[:n_ref], cell), repeat=1)
    err = float(np.max(np.abs(ref - d[:n_ref])))
    checks = N * 5 / t_obs
    ratio = (N / t_obs) / (n_ref / t_ref)
    return {
        "name": "clearance",
        "metrics": {"poses_per_s": N / t_obs, "pose_obstacle_checks_per_s": checks,
                    "shape_pairs_per_s": N * shapes * 5 / t_obs,
                    "full_poses_per_s": N / t_full, "full_pairs_per_s": N * len(gf.pairs) / t_full,
                    "reference_poses_per_s": n_ref / t_ref, "max_abs_difference_m": err},
        "ratios": {"kernel_vs_numpy": ratio},
        "bars": {"pose-obstacle checks/s (6-shape arm, 5 boxes) >= 1e6": [checks, 1e6, checks >= 1e6],
                 "agrees with the numpy reference to 1e-6 m": [err, 1e-6, err <= 1e-6]},
        "notes": [f"{N} random in-limit poses of demo_s6, {shapes} shapes vs 5 boxes ({len(g.pairs)} pairs per pose); "
                  f"full: floor and {len(gf.pairs) - len(g.pairs)} self pairs too",
                  "reference: plain numpy golden-section search along each capsule axis, all pairs at once"],
    }
