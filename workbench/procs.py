"""Processes: who is alive, and a watchdog that ends a process whose parent is gone.

Standard library and psutil only, so any layer may use it (the runner's worker processes, the
results file lock).
"""
from __future__ import annotations

import os
import threading
import time

__all__ = ["process_identity", "is_alive", "start_watchdog"]


def _start_ticks(pid: int):
    """Start of process ``pid`` in clock ticks after boot (Linux /proc), or None. Unlike a Unix
    start time it does not move when the system clock is corrected."""
    try:
        with open(f"/proc/{int(pid)}/stat", "rb") as f:
            raw = f.read().decode("ascii", "replace")
        # the command name (field 2) may hold spaces and parentheses: split after its last ')'
        return int(raw[raw.rindex(")") + 2:].split()[19])
    except (OSError, ValueError, IndexError):
        return None


def process_identity(pid: int | None = None) -> tuple:
    """(pid, start) of a process (this one by default): start is ``"ticks:N"`` (clock ticks after
    boot, Linux) or a Unix start time. With it a pid that the system has since given to another
    process is not taken for the one meant."""
    pid = os.getpid() if pid is None else int(pid)
    ticks = _start_ticks(pid)
    if ticks is not None:
        return pid, f"ticks:{ticks}"
    try:
        import psutil

        return pid, float(psutil.Process(pid).create_time())
    except Exception:
        return pid, None


def is_alive(pid: int, started=None) -> bool:
    """True while process ``pid`` runs (not a zombie) and, when ``started`` is given (from
    :func:`process_identity`), is the process that started then."""
    import psutil

    try:
        p = psutil.Process(int(pid))
        if isinstance(started, str) and started.startswith("ticks:"):
            now = _start_ticks(pid)
            if now is not None and f"ticks:{now}" != started:
                return False  # the pid was reused
        elif started is not None:
            # psutil's start time is boot time + ticks, and the boot time it reads moves when the
            # clock is corrected (a second or so on a virtual machine): allow for it
            if abs(p.create_time() - float(started)) > 2.0:
                return False
        return p.status() != psutil.STATUS_ZOMBIE
    except psutil.NoSuchProcess:
        return False
    except (psutil.Error, ValueError, TypeError):  # access denied and the like: it exists
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
