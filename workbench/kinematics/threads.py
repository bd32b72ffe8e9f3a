"""How the compiled kernels' threads are run and how they wait: chosen here, once, on purpose.

Imported by :mod:`workbench.kinematics` (so before any numba parallel kernel runs, in the main
process, in local worker processes and in Dask workers alike), :func:`apply` does two things:

1. **Threading layer**: numba's OpenMP layer first (``omp``: GNU libgomp on Linux), then TBB, then
   numba's own ``workqueue``. OpenMP and TBB accept parallel kernels launched from several threads
   of one process at once (the desktop window computes a picked pose on its own thread while a
   study runs in a worker thread); ``workqueue`` does not (numba aborts the process), so it is only
   the last resort. A layer named in ``NUMBA_THREADING_LAYER`` is the user's choice and is kept.
2. **Wait policy: passive.** Between two parallel regions, and at the end of a region while the
   slowest thread finishes its block, libgomp's threads by default spin on the core for a while
   (``GOMP_SPINCOUNT``, 300 000 pause instructions: several milliseconds on current cores) before
   they sleep. On an idle machine that is free; on a machine whose cores are shared (other studies,
   other programs), every spin is time taken from the thread that has real work, and a run made of
   many short kernel calls can spend most of its time spinning (a 1000 x 1000 sweep went from 3 s to
   148 s beside two busy processes). ``OMP_WAIT_POLICY=PASSIVE`` makes waiting threads sleep at
   once (a futex): a region start costs a wake-up of some microseconds, nothing next to a kernel
   call on thousands of poses. ``KMP_BLOCKTIME=0`` does the same for Intel's OpenMP runtime, which
   some numba builds use. Values the user set in the environment are kept.

libgomp reads its environment once, when it is loaded (numba loads it at the first parallel
kernel launch or the first ``numba.set_num_threads``), so the variables are set at import time
here, before that. :func:`describe` tells which layer and policy are in force and whether the
OpenMP runtime was already loaded by something else before this module ran (then its policy is
whatever that left).
"""
from __future__ import annotations

import os

__all__ = ["LAYER_PRIORITY", "WAIT_POLICY", "apply", "describe", "runtime_loaded_before"]

#: numba threading layers, most preferred first (see the module text for why)
LAYER_PRIORITY = ("omp", "tbb", "workqueue")
#: environment read by the OpenMP runtimes when they load: sleep at once when there is no work
WAIT_POLICY = {"OMP_WAIT_POLICY": "PASSIVE", "KMP_BLOCKTIME": "0"}

_STATE: dict = {}


def _openmp_runtime_mapped() -> bool:
    """True when an OpenMP runtime (libgomp / libiomp / libomp) is already mapped in this process."""
    try:
        with open("/proc/self/maps", encoding="ascii", errors="replace") as fh:
            text = fh.read()
    except OSError:  # not Linux: cannot tell
        return False
    return any(name in text for name in ("libgomp", "libiomp", "libomp."))


def apply() -> dict:
    """Set the threading layer order and the passive wait policy (idempotent). Returns what was set."""
    if _STATE:
        return dict(_STATE)
    _STATE["runtime_loaded_before"] = _openmp_runtime_mapped()
    kept = {}
    for key, value in WAIT_POLICY.items():
        if key in os.environ:
            kept[key] = os.environ[key]
        else:
            os.environ[key] = value
    _STATE["user_environment"] = kept
    import numba

    if os.environ.get("NUMBA_THREADING_LAYER", "default") in ("", "default"):
        numba.config.THREADING_LAYER_PRIORITY = list(LAYER_PRIORITY)
        _STATE["layer_choice"] = "priority " + ", ".join(LAYER_PRIORITY)
    else:
        _STATE["layer_choice"] = f"NUMBA_THREADING_LAYER={os.environ['NUMBA_THREADING_LAYER']} (user's choice)"
    return dict(_STATE)


def runtime_loaded_before() -> bool:
    """True when an OpenMP runtime was loaded before :func:`apply` set its wait policy."""
    return bool(apply()["runtime_loaded_before"])


def describe() -> str:
    """One line: the layer in force (or the order it will be chosen in) and the wait policy."""
    state = apply()
    import numba

    try:
        layer = numba.threading_layer()
    except ValueError:  # no parallel kernel has run yet
        layer = f"not started yet ({state['layer_choice']})"
    policy = ", ".join(f"{k}={os.environ.get(k, '')}" for k in WAIT_POLICY)
    line = f"threading layer {layer}; {policy}; {numba.get_num_threads()} thread(s)"
    if state["runtime_loaded_before"]:
        line += "; note: an OpenMP runtime was loaded before the policy was set (it may spin)"
    return line


apply()
