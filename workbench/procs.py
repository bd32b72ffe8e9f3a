"""Processes: who is alive, and a watchdog that ends a process whose parent is gone.

Standard library and psutil only, so any layer may use it (the runner's worker processes, the
results file lock).
"""
from __future__ import annotations

import os
import threading
import time

__all__ = ["process_identity", "is_alive", "start_watchdog"]


def process_identity(pid: int | None = None) -> tuple:
    """(pid, start time as a Unix time) of a process (this one by default). With the start time a
    pid that the system has since given to another process is not taken for the one meant."""
    pid = os.getpid() if pid is None else int(pid)
    try:
        import psutil

        return pid, float(psutil.Process(pid).create_time())
    except Exception:
        return pid, None


def is_alive(pid: int, started: float | None = None) -> bool:
    """True while process ``pid`` runs (not a zombie) and, when ``started`` is given, is the
    process that started then."""
    import psutil

    try:
        p = psutil.Process(int(pid))
        if started is not None and abs(p.create_time() - float(started)) > 0.01:
            return False  # the pid was reused
        return p.status() != psutil.STATUS_ZOMBIE
    except psutil.NoSuchProcess:
        return False
    except psutil.Error:  # access denied and the like: it exists
        return True


def start_watchdog(pid: int, started: float | None = None, period: float = 0.5) -> threading.Thread:
    """A daemon thread that ends this process (``os._exit(3)``, no clean-up: its work is the dead
    parent's) once process ``pid`` (started at ``started``) no longer runs; checked every
    ``period`` seconds."""

    def watch():
        while True:
            time.sleep(period)
            if not is_alive(pid, started):
                os._exit(3)

    t = threading.Thread(target=watch, name="parent-watchdog", daemon=True)
    t.start()
    return t
