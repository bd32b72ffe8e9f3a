"""A guard against a reference-count leak in some PySide6 builds on Python < 3.12.

Seen with PySide6 6.12.0 on Python 3.11: every call of a Qt method that returns nothing takes one
reference from ``None`` without having added it, and emitting a signal with a bool argument does
the same to ``True``/``False`` (builds made for 3.12+, where these objects are immortal, skip the
reference counting for them). ``None`` starts with about 5 000 references here, so a few thousand
slider moves later the interpreter aborts with "deallocating None".

:func:`guard` measures the leak once and, only where it exists, adds a large fixed number of
references to ``None``, ``True`` and ``False`` (never given back: these objects live for the whole
process anyway), and tops them up if they ever run low. On Python 3.12+ it does nothing.
"""
from __future__ import annotations

import ctypes
import sys

__all__ = ["guard", "leaks"]

BUMP = 1 << 30          # references added per object: a billion leaked calls of headroom
LOW = 1 << 29
_state = {"checked": False, "leaks": False}


def leaks() -> bool:
    """True when void Qt calls or bool signal emits lose references to None/True (measured)."""
    if sys.version_info >= (3, 12):
        return False
    if not _state["checked"]:
        from PySide6 import QtCore

        class _Probe(QtCore.QObject):
            sig = QtCore.Signal(bool)

        o = _Probe()
        a = sys.getrefcount(None), sys.getrefcount(True)
        for _ in range(20):
            o.setObjectName("probe")
            o.sig.emit(True)
        b = sys.getrefcount(None), sys.getrefcount(True)
        _state["leaks"] = (b[0] < a[0] - 10) or (b[1] < a[1] - 10)
        _state["checked"] = True
    return _state["leaks"]


def guard() -> bool:
    """Add headroom to the reference counts of None, True and False where the leak exists;
    returns whether it did anything. Cheap to call often (the window calls it on a timer)."""
    if not leaks():
        return False
    for obj in (None, True, False):
        if sys.getrefcount(obj) < LOW:
            ctypes.c_ssize_t.from_address(id(obj)).value += BUMP
    return True
