"""Study runs from the window: a study session (spec -> plan -> the result arrays the views show)
and the worker that runs it off the event loop.

The session is plain Python (no Qt). :class:`StudyWorker` lives in a ``QThread`` and calls
:func:`workbench.runner.run_study` (which streams the results to an HDF5 file written under a
temporary name and renamed when closed); it talks to the window only through signals and never
touches a widget. Cancel is the runner's cooperative cancel: it stops between chunks and keeps
the chunks already finished (the file is closed and marked incomplete).
"""
from __future__ import annotations

import os
import threading
import tomllib

import numpy as np
from PySide6 import QtCore

from ..errors import WorkbenchError
from ..studies import calibrate, get_kind, load_context
from .resultdata import ResultData

__all__ = ["StudySession", "StudyWorker", "session_from_spec", "session_from_results",
           "GUI_CHUNK_SECONDS"]

#: the runner sizes chunks to about this many seconds when the window runs a study in-process:
#: a compiled kernel holds the interpreter lock for one chunk, so short chunks keep the event loop
#: responsive (DESIGN §8: no stall over 100 ms) and results show up often
GUI_CHUNK_SECONDS = 0.03


def _axis_label(ax):
    unit = ax.display_unit
    return f"{ax.label} ({unit})" if unit else ax.label


class StudySession:
    """One study: kind, plan, arm, cell and the flat arrays the views show.

    Parameters
    ----------
    kind : StudyKind
    plan : Plan
    arm : workbench.kinematics.Arm
    cell : object or None
    arrays : dict, optional
        ``{field: (cells, *shape)}`` already computed (a results file); empty arrays otherwise.
    done : (cells,) bool, optional
    """

    def __init__(self, kind, plan, arm, cell=None, arrays=None, done=None):
        self.kind, self.plan, self.arm, self.cell = kind, plan, arm, cell
        self.spec = plan.spec
        if arrays is None:
            arrays = {f.name: f.empty(plan.cells) for f in plan.fields}
        self.arrays = {k: np.asarray(v).reshape((plan.cells,) + np.asarray(v).shape[len(plan.shape):])
                       for k, v in arrays.items()}
        self.data = self._result_data()
        if done is not None:
            self.data.done[:] = np.asarray(done, bool).reshape(-1)

    def estimate(self):
        """:class:`workbench.studies.Estimate` (times a few cells)."""
        return calibrate(self.kind, self.plan, self.arm, self.cell, sample_cells=512, budget_s=0.2)

    # ---- the view of the result ----------------------------------------------------------
    def _result_data(self) -> ResultData:
        plan, arm = self.plan, self.arm
        axes = plan.axes
        if len(axes) == 2:
            shape = (axes[0].size, axes[1].size)
            x, y = axes[1].display_values(), axes[0].display_values()
            xl, yl = _axis_label(axes[1]), _axis_label(axes[0])
        else:
            shape = (plan.cells,)
            if len(axes) == 1:
                x, xl = axes[0].display_values(), _axis_label(axes[0])
            else:
                x, xl = np.arange(plan.cells, dtype=float), "cell"
            y, yl = None, ""
        measures = {f.name: self.arrays[f.name] for f in plan.fields
                    if f.kind == "measure" and f.shape == () and np.dtype(f.dtype).kind == "f"}
        if not measures:
            raise WorkbenchError(f"study kind {plan.kind!r} has no scalar measure to show")
        q = None
        poses = {f.name: f for f in plan.fields if f.kind == "pose"}
        for name in ("q", "best_q", "worst_q", *poses):
            if name in poses and poses[name].shape == (arm.n,):
                q = self.arrays[name]
                break
        pose_fn = None
        if q is None and hasattr(self.kind, "cell_poses"):
            kind, arrays = self.kind, self.arrays
            pose_fn = lambda idx: kind.cell_poses(plan, idx, arrays)  # noqa: E731
        thr = "inverse_condition" if "inverse_condition" in measures else \
            next((m for m in measures if m.startswith("inverse_condition")), next(iter(measures)))
        data = ResultData(kind=self.kind.title or plan.kind, shape=shape, x=x, y=y, x_label=xl, y_label=yl,
                          measures=measures, q=q, pose_fn=pose_fn, joint_names=tuple(arm.names),
                          joint_kinds=tuple(j.kind for j in arm.model.joints),
                          title=(self.spec.name if self.spec is not None else "") or self.kind.title,
                          threshold_measure=thr)
        if "tcp" in self.arrays and self.arrays["tcp"].shape[1:] == (3,):
            data.tcp = self.arrays["tcp"]
        return data

    def store(self, start, stop, arrays) -> None:
        """Keep one finished chunk's arrays (``{field: (stop - start, *shape)}``)."""
        for name, v in arrays.items():
            if name in self.arrays:
                self.arrays[name][start:stop] = np.asarray(v).reshape((stop - start,) + self.arrays[name].shape[1:])
        self.data.done[start:stop] = True

    @property
    def complete(self) -> bool:
        return bool(self.data.done.all())


def session_from_spec(spec, arm=None, cell=None) -> StudySession:
    """Plan ``spec`` (loading its arm and cell files unless given)."""
    if arm is None:
        arm, cell, _, _ = load_context(spec)
    kind = get_kind(spec.kind)
    return StudySession(kind, kind.plan(spec, arm, cell), arm, cell)


def session_from_results(res) -> StudySession:
    """A session over a :class:`workbench.results.Results` read from a file: the arm and cell come
    from the texts stored in the file, the plan from the stored study."""
    from ..arm.files import parse_arm_dict
    from ..kinematics import Arm
    from ..studies.cell import parse_cell_text

    where = res.path or "results"
    if not res.arm_text:
        raise WorkbenchError(f"{where}: the results file holds no arm file text")
    try:
        arm = Arm(parse_arm_dict(tomllib.loads(res.arm_text), source_name=f"{where}: /inputs/arm",
                                 text=res.arm_text))
    except tomllib.TOMLDecodeError:
        spec = res.spec()
        arm, _, _, _ = load_context(spec)   # the arm was a URDF: read it from its file
    cell = parse_cell_text(res.cell_text, f"{where}: /inputs/cell") if res.cell_text else None
    spec = res.spec()
    kind = get_kind(res.kind, where=f"{where}: kind")
    plan = kind.plan(spec, arm, cell)
    if plan.shape != res.shape:
        raise WorkbenchError(f"{where}: the stored study gives a grid {plan.shape}, the file holds {res.shape}")
    arrays = {f.name: res.flat(f.name) for f in res.fields}
    done = res.done_mask().reshape(-1)
    s = StudySession(kind, plan, arm, cell, arrays=arrays, done=done)
    s.tables = dict(res.tables)
    return s


class StudyWorker(QtCore.QObject):
    """Runs a study with :func:`workbench.runner.run_study` in a worker thread; signals only.

    Signals
    -------
    chunk_finished(int, int, object)
        start, stop, ``{field: array}`` of a finished chunk.
    progress(int, int, float)
        cells done, cells total, seconds left (NaN while unknown).
    finished(str, object)
        "done", "cancelled" or "failed: <message>", and the results file path (or None).
    """

    chunk_finished = QtCore.Signal(int, int, object)
    progress = QtCore.Signal(int, int, float)
    finished = QtCore.Signal(str, object)

    def __init__(self, spec, out_path, executor="inprocess", chunk_seconds=GUI_CHUNK_SECONDS):
        super().__init__()
        self.spec = spec
        self.out_path = out_path
        self.executor = executor
        self.chunk_seconds = chunk_seconds
        self._cancel = threading.Event()

    def cancel(self):
        """Ask the runner to stop after the current chunk (thread-safe)."""
        self._cancel.set()

    @property
    def cancelled(self) -> bool:
        return self._cancel.is_set()

    @QtCore.Slot()
    def run(self):
        from ..runner import run_study

        def on_chunk(chunk, arrays):
            self.chunk_finished.emit(chunk.start, chunk.stop, {k: np.array(v) for k, v in arrays.items()})

        def progress(done, total, eta):
            self.progress.emit(int(done), int(total), float(eta))

        try:
            res = run_study(self.spec, out=self.out_path, executor=self.executor, progress=progress,
                            cancel=self._cancel, on_chunk=on_chunk, chunk_seconds=self.chunk_seconds)
            status = "cancelled" if (self._cancel.is_set() and res.incomplete) else "done"
            self.finished.emit(status, self.out_path if os.path.exists(self.out_path) else None)
        except WorkbenchError as exc:
            self.finished.emit(f"failed: {exc}", None)
        except Exception as exc:  # a bug in a kind: report it, never take the window down
            self.finished.emit(f"failed: {exc.__class__.__name__}: {exc}", None)
