"""One way to run long work off the event loop: a :class:`Worker` in its own ``QThread``.

A worker reports through four signals only (it never touches a widget): ``progress`` (fraction
in [0, 1] or NaN, text), ``partial`` (any object: a finished chunk), ``finished`` (status
"done", "cancelled" or "failed: <one line>", result). ``cancel()`` is thread-safe; the work
checks ``cancelled`` between steps. Studies (:class:`workbench.gui.runs.StudyWorker`) and
report exports (:class:`FunctionWorker`) both run this way.
"""
from __future__ import annotations

import threading

from PySide6 import QtCore

from ..errors import WorkbenchError

__all__ = ["Worker", "FunctionWorker", "start_worker"]


class Worker(QtCore.QObject):
    """Base class: subclasses implement :meth:`work` and return its result."""

    progress = QtCore.Signal(float, str)
    partial = QtCore.Signal(object)
    finished = QtCore.Signal(str, object)

    def __init__(self):
        super().__init__()
        self._cancel = threading.Event()

    def cancel(self):
        """Ask the work to stop at its next step (thread-safe)."""
        self._cancel.set()

    @property
    def cancelled(self) -> bool:
        return self._cancel.is_set()

    def work(self):                      # pragma: no cover - subclasses
        raise NotImplementedError

    def status_of(self, result) -> str:
        return "cancelled" if self.cancelled else "done"

    @QtCore.Slot()
    def run(self):
        try:
            result = self.work()
            self.finished.emit(self.status_of(result), result)
        except WorkbenchError as exc:
            self.finished.emit(f"failed: {exc}", None)
        except Exception as exc:  # a bug in the work: report it, never take the window down
            self.finished.emit(f"failed: {exc.__class__.__name__}: {exc}", None)


class FunctionWorker(Worker):
    """Runs ``fn(progress)``; ``progress(fraction, text)`` is forwarded as the signal."""

    def __init__(self, fn):
        super().__init__()
        self.fn = fn

    def work(self):
        return self.fn(lambda f, t="": self.progress.emit(float(f), str(t)))


def start_worker(worker: Worker, parent) -> QtCore.QThread:
    """Move ``worker`` to a new thread (a child of ``parent``), start it; the thread quits when
    the worker finishes. Returns the thread."""
    thread = QtCore.QThread(parent)
    worker.moveToThread(thread)
    thread.started.connect(worker.run)
    worker.finished.connect(lambda *_: thread.quit())
    thread.start()
    return thread
