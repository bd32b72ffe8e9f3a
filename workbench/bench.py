"""``workbench bench``: this machine's throughput against plain references, as ratios.

Every entry runs the engine and its reference on the same inputs in the same process and reports
poses (or targets, cells) per second and the ratio; bars from the issues are checked and printed
as PASS/FAIL. Entries live next to the code they measure and are listed in ``ENTRIES``; an entry
whose module is missing is skipped with a note.

Entry contract::

    def bench_xxx(quick: bool = False) -> dict:
        return {"name": str, "metrics": {key: number}, "ratios": {key: number},
                "bars": {bar_name: [value, threshold, passed]}, "notes": [str]}
"""
from __future__ import annotations

import importlib
import os
import time

import numpy as np


ENTRIES = [
    ("kernel", "workbench.bench:bench_kernel"),
    ("ik", "workbench.kinematics.ik:bench_ik"),
    ("reach_slice", "workbench.studies.reach_slice:bench_reach_slice"),
    ("sweep", "workbench.runner:bench_sweep"),
    ("scaling", "workbench.runner:bench_scaling"),
    ("memory", "workbench.runner:bench_memory"),
    ("mount_search", "workbench.studies.mount_search:bench_mount_search"),
    ("path_audit", "workbench.studies.path_audit:bench_path_audit"),
    ("largest_force", "workbench.measures:bench_largest_force"),
    ("cycle_time", "workbench.studies.timing:bench_timing"),
    ("clearance", "workbench.collision.benchmark:bench_clearance"),
    ("gui", "workbench.gui.bench:bench_gui"),
]


from .benchutil import best_time as _best_time  # noqa: E402
from .benchutil import demo_arm_path  # noqa: E402,F401  (kept importable from here)


def bench_kernel(quick: bool = False) -> dict:
    """Fused FK -> Jacobian -> singular values of demo_s6 (full rows) vs two plain references.

    References (same random in-limit poses, same process):
    * batched numpy: np.matmul chain for FK and Jacobian, then np.linalg.svd on the stack;
    * per-pose loop: central-difference Jacobian of a per-pose numpy FK, then np.linalg.svd.
    Accuracy: max |s_engine - s_numpy| / s1 over random poses and near-singular poses.
    """
    from .kinematics import load_arm
    from .kinematics.reference import fk_numpy, jacobian_numpy, numeric_jacobian
    from .measures import measures_from_sv

    arm = load_arm(demo_arm_path())
    rng = np.random.default_rng(1)
    N = 50_000 if quick else 400_000
    q = arm.random_q(N, rng)
    L = arm.nominal_reach()
    scale = np.array([1 / L] * 3 + [1.0] * 3)
    arm.singular_values(q[:10], length=L)  # compile / load cache outside the timing

    def engine():
        return measures_from_sv(arm.singular_values(q, rows="full", length=L))

    def numpy_ref():
        J = jacobian_numpy(arm.model, q) * scale[:, None]
        return measures_from_sv(np.linalg.svd(J, compute_uv=False))

    t_engine, m_engine = _best_time(engine)
    t_numpy, m_numpy = _best_time(numpy_ref, repeat=1 if not quick else 2)

    n_loop = 200 if quick else 1000
    model = arm.model

    def loop():
        out = np.empty((n_loop, 6))
        for i in range(n_loop):
            Jn = numeric_jacobian(lambda x: fk_numpy(model, x), q[i])
            out[i] = np.linalg.svd(Jn * scale[:, None], compute_uv=False)
        return out

    t_loop, _ = _best_time(loop, repeat=1)
    rate_engine = N / t_engine
    rate_numpy = N / t_numpy
    rate_loop = n_loop / t_loop

    # accuracy, including near-singular poses (wrist th5 ~ 0, stretched elbow)
    qa = q[:20000].copy()
    qs = q[:2000].copy()
    qs[:, 4] = rng.choice([0.0, 1e-8, -1e-6, 1e-4], size=len(qs))
    qa = np.concatenate([qa, qs])
    s_eng = arm.singular_values(qa, rows="full", length=L)
    s_ref = np.linalg.svd(jacobian_numpy(model, qa) * scale[:, None], compute_uv=False)
    acc = float(np.max(np.abs(s_eng - s_ref) / s_ref[:, :1]))
    same = float(np.max(np.abs(m_engine["inverse_condition"] - m_numpy["inverse_condition"])))

    r1 = rate_engine / rate_numpy
    r2 = rate_engine / rate_loop
    return {
        "name": "kernel",
        "metrics": {"poses": N, "engine_poses_per_s": rate_engine, "numpy_batched_poses_per_s": rate_numpy,
                    "per_pose_loop_poses_per_s": rate_loop, "max_sv_error_over_s1": acc,
                    "max_inverse_condition_difference": same, "threads": _threads()},
        "ratios": {"vs_numpy_batched": r1, "vs_per_pose_loop": r2},
        "bars": {"kernel_vs_numpy_batched>=5": [r1, 5.0, r1 >= 5.0],
                 "kernel_vs_per_pose_loop>=500": [r2, 500.0, r2 >= 500.0],
                 "sv_error<=1e-9*s1": [acc, 1e-9, acc <= 1e-9]},
        "notes": [],
    }


def _threads() -> int:
    try:
        import numba

        return int(numba.get_num_threads())
    except Exception:  # pragma: no cover
        return 1


def run_benches(names=None, quick=False, log=None) -> list[dict]:
    """Run the chosen entries (all by default) and return their result dicts."""
    results = []
    for name, target in ENTRIES:
        if names and name not in names:
            continue
        mod_name, fn_name = target.split(":")
        try:
            fn = getattr(importlib.import_module(mod_name), fn_name)
        except (ModuleNotFoundError, AttributeError) as exc:
            results.append({"name": name, "skipped": f"not available ({exc})"})
            continue
        if log:
            log(f"bench {name} ...")
        t = time.perf_counter()
        res = fn(quick=quick)
        res.setdefault("name", name)
        res["seconds"] = time.perf_counter() - t
        results.append(res)
    return results


def format_results(results) -> str:
    lines = [f"workbench bench on {os.cpu_count()} cores"]
    for r in results:
        if "skipped" in r:
            lines.append(f"\n[{r['name']}] skipped: {r['skipped']}")
            continue
        lines.append(f"\n[{r['name']}] ({r.get('seconds', 0):.1f} s)")
        for k, v in r.get("metrics", {}).items():
            lines.append(f"  {k:<38} {_fmt(v)}")
        for k, v in r.get("ratios", {}).items():
            lines.append(f"  ratio {k:<32} {_fmt(v)}x")
        for k, (val, thr, ok) in r.get("bars", {}).items():
            lines.append(f"  {'PASS' if ok else 'FAIL'} {k:<37} {_fmt(val)} (bar {_fmt(thr)})")
        for n in r.get("notes", []):
            lines.append(f"  note: {n}")
    return "\n".join(lines)


def _fmt(v) -> str:
    if isinstance(v, (bool, np.bool_)):
        return str(bool(v))
    if isinstance(v, (int, np.integer)):
        return f"{int(v):,}"
    if isinstance(v, (float, np.floating)):
        v = float(v)
        if v == 0 or 1e-3 <= abs(v) < 1e6:
            return f"{v:,.3f}" if abs(v) < 100 else f"{v:,.0f}"
        return f"{v:.3g}"
    return str(v)
