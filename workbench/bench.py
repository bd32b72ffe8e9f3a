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
    ("shared", "workbench.runner:bench_shared"),
    ("memory", "workbench.runner:bench_memory"),
    ("mount_search", "workbench.studies.mount_search:bench_mount_search"),
    ("path_audit", "workbench.studies.path_audit:bench_path_audit"),
    ("largest_force", "workbench.measures:bench_largest_force"),
    ("cycle_time", "workbench.studies.timing:bench_timing"),
    ("clearance", "workbench.studies.clearance_bench:bench_clearance"),
    ("gui", "workbench.gui.bench:bench_gui"),
]


from .benchutil import best_time as _best_time  # noqa: E402
from .benchutil import demo_arm_path  # noqa: E402,F401  (kept importable from here)


KERNEL_ARMS = ("demo_u6.urdf", "demo_s6.toml")  # a URDF import (fixed joints folded) and a TOML arm
KERNEL_BAR = 20.0  # issue 13 item 7: at least 20x the plain batched numpy reference, both paths


def bench_kernel(quick: bool = False) -> dict:
    """Measures of 6-joint arms (full rows) through both public paths vs plain references.

    Engine paths, per arm of ``KERNEL_ARMS``:
    * fused: ``pose_measures(arm, q)`` (FK -> Jacobian -> singular values -> measures, lane kernels);
    * unfused: ``measures(arm.jacobian(q))`` (a Jacobian stack, then its measures).
    References (same random in-limit poses, same process, timings interleaved with the engine's):
    * batched numpy: np.matmul chain over the arm's joints for FK and Jacobian, np.linalg.svd on the
      stack, then the same measures from the singular values;
    * per-pose loop (first arm only): central-difference Jacobian of a per-pose numpy FK + svd.
    Accuracy: max |s_engine - s_numpy| / s1 over random poses and poses with the wrist exactly or
    nearly singular (q5 in {0, 1e-12, 1e-8, 1e-4}) and the elbow at q3 = 0, both paths.
    """
    from .kinematics import load_arm
    from .kinematics.reference import fk_numpy, jacobian_numpy, numeric_jacobian
    from .measures import measures, measures_from_sv, pose_measures

    N = 30_000 if quick else 300_000
    repeat = 3 if quick else 5
    metrics = {"poses": N, "repeats": repeat, "threads": _threads()}
    ratios = {}
    bars = {}
    worst_acc = 0.0
    worst_same = 0.0
    for a_i, name in enumerate(KERNEL_ARMS):
        arm = load_arm(demo_arm_path(name))
        tag = name.split(".")[0]
        rng = np.random.default_rng(1)
        q = arm.random_q(N, rng)
        L = arm.nominal_reach()
        scale = np.array([1 / L] * 3 + [1.0] * 3)
        pose_measures(arm, q[:10], length=L)  # compile / load the cache outside the timing
        measures(arm.jacobian(q[:10]), length=L)

        def fused():
            return pose_measures(arm, q, rows="full", length=L)

        def unfused():
            return measures(arm.jacobian(q), rows="full", length=L)

        def numpy_ref():
            J = jacobian_numpy(arm.model, q) * scale[:, None]
            return measures_from_sv(np.linalg.svd(J, compute_uv=False))

        best = {"fused": np.inf, "unfused": np.inf, "numpy": np.inf}
        out = {}
        for _ in range(repeat):  # interleaved, so a pause of the machine hits all three alike
            for key, fn in (("numpy", numpy_ref), ("fused", fused), ("unfused", unfused)):
                t, out[key] = _best_time(fn, repeat=1)
                best[key] = min(best[key], t)
        rate = {k: N / v for k, v in best.items()}
        r_f = rate["fused"] / rate["numpy"]
        r_u = rate["unfused"] / rate["numpy"]
        metrics[f"{tag}_pose_measures_poses_per_s"] = rate["fused"]
        metrics[f"{tag}_measures_of_jacobian_poses_per_s"] = rate["unfused"]
        metrics[f"{tag}_numpy_batched_poses_per_s"] = rate["numpy"]
        ratios[f"{tag}_pose_measures_vs_numpy_batched"] = r_f
        ratios[f"{tag}_measures_of_jacobian_vs_numpy_batched"] = r_u
        bars[f"{tag}_pose_measures_vs_numpy>={KERNEL_BAR:g}"] = [r_f, KERNEL_BAR, r_f >= KERNEL_BAR]
        bars[f"{tag}_measures_of_jacobian_vs_numpy>={KERNEL_BAR:g}"] = [r_u, KERNEL_BAR, r_u >= KERNEL_BAR]
        for key in ("fused", "unfused"):
            worst_same = max(worst_same, float(np.max(np.abs(out[key]["inverse_condition"]
                                                             - out["numpy"]["inverse_condition"]))))

        # accuracy, including exactly and nearly singular wrists and a folded elbow
        qa = q[:20000].copy()
        qs = q[:4000].copy()
        qs[:, 4] = rng.choice([0.0, 1e-12, 1e-8, 1e-4], size=len(qs))
        qs[::3, 2] = 0.0
        qa = np.concatenate([qa, qs])
        s_ref = np.linalg.svd(jacobian_numpy(arm.model, qa) * scale[:, None], compute_uv=False)
        for s_eng in (pose_measures(arm, qa, rows="full", length=L)["sv"],
                      measures(arm.jacobian(qa), rows="full", length=L)["sv"]):
            worst_acc = max(worst_acc, float(np.max(np.abs(s_eng - s_ref) / s_ref[:, :1])))

        if a_i == 0:
            n_loop = 200 if quick else 1000
            model = arm.model

            def loop():
                res = np.empty((n_loop, 6))
                for i in range(n_loop):
                    Jn = numeric_jacobian(lambda x: fk_numpy(model, x), q[i])
                    res[i] = np.linalg.svd(Jn * scale[:, None], compute_uv=False)
                return res

            t_loop, _ = _best_time(loop, repeat=1)
            r2 = rate["fused"] / (n_loop / t_loop)
            metrics["per_pose_loop_poses_per_s"] = n_loop / t_loop
            ratios["vs_per_pose_loop"] = r2
            bars["kernel_vs_per_pose_loop>=500"] = [r2, 500.0, r2 >= 500.0]
            # kept under its old name: the fused path of the first arm
            ratios["vs_numpy_batched"] = r_f
            metrics["engine_poses_per_s"] = rate["fused"]
            metrics["numpy_batched_poses_per_s"] = rate["numpy"]
    metrics["max_sv_error_over_s1"] = worst_acc
    metrics["max_inverse_condition_difference"] = worst_same
    bars["sv_error<=1e-9*s1"] = [worst_acc, 1e-9, worst_acc <= 1e-9]
    notes = ["the numpy reference runs on one thread; the engine on the kernels' threads "
             f"({_threads()}); other work on the machine lowers the ratios"]
    return {"name": "kernel", "metrics": metrics, "ratios": ratios, "bars": bars, "notes": notes}


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
