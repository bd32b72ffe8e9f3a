"""Small helpers shared by the bench entries that live next to the code they measure.

Imports nothing from the rest of the package, so any layer may use it.
"""
from __future__ import annotations

import time
from pathlib import Path

ARMS_DIR = Path(__file__).resolve().parent.parent / "arms"


def demo_arm_path(name: str = "demo_s6.toml") -> Path:
    """Path of a demo arm file shipped in ``arms/``."""
    return ARMS_DIR / name


def best_time(fn, repeat: int = 3):
    """(best wall time in s over ``repeat`` calls, last result)."""
    best = float("inf")
    out = None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out
