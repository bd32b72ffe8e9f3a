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
from dataclasses import dataclass

import numpy as np
from PySide6 import QtCore

from ..document import StudyResults, results_from_file, results_from_spec
from ..errors import WorkbenchError
from ..presenters import presenter
from .resultdata import ResultData
from .workers import Worker

__all__ = ["StudySession", "StudyWorker", "ChunkResult", "session_from_spec", "session_from_results",
           "GUI_CHUNK_SECONDS"]

#: the runner sizes chunks to about this many seconds: results show up four times a second, and a
#: cancel stops within about that time. (The compiled kernels release the interpreter lock, so the
#: chunk size does not decide how responsive the window is; per-chunk set-up of IK kinds makes
#: much shorter chunks slow.)
GUI_CHUNK_SECONDS = 0.25


def _axis_label(ax):
    unit = ax.display_unit
    return f"{ax.label} ({unit})" if unit else ax.label


class StudySession(StudyResults):
    """One study behind the window: the document's :class:`~workbench.document.StudyResults`
    (kind, plan, arm, cell, flat arrays) plus ``data``, the :class:`ResultData` the views show.

    Parameters as :class:`~workbench.document.StudyResults`.
    """

    def __init__(self, kind, plan, arm, cell=None, arrays=None, done=None):
        super().__init__(kind, plan, arm, cell, arrays=arrays, done=done)
        self.data = self._result_data()
        if done is not None and self.data.size == plan.cells:
            self.data.done[:] = self.cells_done

    # ---- the view of the result ----------------------------------------------------------
    def _result_data(self) -> ResultData:
        plan = self.plan
        view = presenter(plan.kind).view        # workbench/presenters.py: how the kind is shown
        if view == "floor" and len(plan.axes) == 5:
            return self._mount_view()
        data = self._grid_view()
        if view == "path" and "s" in plan.data:
            self._path_axis(data)
        mount = plan.data.get("mount")
        if isinstance(mount, np.ndarray) and mount.shape == (4, 4):
            data.mount_fn = lambda c, M=mount: M
        return data

    def _path_axis(self, data):
        """Path audit: the series axis is the distance along the paths (one after the other)."""
        d = self.plan.data
        s, idx = np.asarray(d["s"], float), np.asarray(d["path_index"], int)
        offsets = np.concatenate([[0.0], np.cumsum(d.get("lengths", [0.0] * (idx.max() + 1)))])[:-1]
        data.x = s + offsets[idx]
        data.x_label = "distance along the path" + ("s" if len(offsets) > 1 else "") + " (m)"
        data.extras["path_names"] = list(d.get("names", []))
        data.extras["path_starts"] = offsets

    def _mount_view(self) -> ResultData:
        """Mount search: the floor map holds, per base (x, y), the best candidate over styles,
        heights and yaws; picking a floor cell places the arm there at its best candidate."""
        plan, arm = self.plan, self.arm
        S, H, Y, ny, nx = plan.shape
        ax = {a.name: a for a in plan.axes}
        key = "rank_value" if "rank_value" in self.arrays else "score"   # the ranking's own value
        score = self.arrays[key].reshape(S * H * Y, ny * nx)
        best = np.argmax(np.where(np.isfinite(score), score, -np.inf), axis=0)   # (ny * nx,)
        self._mount_best = best
        cols = np.arange(ny * nx)
        full = best * (ny * nx) + cols
        names = ("rank_value", "served", "score", "reached_fraction", "worst_measure", "min_margin")
        measures = {m: self.arrays[m][full].astype(float) for m in names if m in self.arrays}
        data = ResultData(kind=self.kind.title or plan.kind, shape=(ny, nx), x=ax["x"].values, y=ax["y"].values,
                          x_label="base x (m)", y_label="base y (m)", measures=measures, q=None,
                          joint_names=tuple(arm.names), joint_kinds=tuple(j.kind for j in arm.model.joints),
                          title=(self.spec.name if self.spec is not None else "") or self.kind.title,
                          threshold_measure=key)
        data.units = {f.name: f.unit for f in plan.fields if f.name in measures}
        data.extras["mount_full_index"] = full
        data.pose_fn = self._mount_pose
        data.mount_fn = self._mount_of_cell
        data.done = np.isfinite(measures[key])
        return data

    def refresh_derived(self):
        """Recompute views that reduce the raw arrays (the mount search floor map) after new chunks."""
        if presenter(self.plan.kind).view != "floor" or len(self.plan.axes) != 5:
            return
        fresh = self._mount_view()
        for k, v in fresh.measures.items():
            self.data.measures[k][:] = v
        self.data.done[:] = fresh.done
        self.data.extras.update(fresh.extras)

    def _mount_full(self, c):
        return int(self.data.extras["mount_full_index"][int(c)])

    def _mount_of_cell(self, c):
        from ..studies.cell import mount_transforms

        plan = self.plan
        si, hi, yi, yyi, xi = np.unravel_index(self._mount_full(c), plan.shape)
        ax = {a.name: a.values for a in plan.axes}
        return mount_transforms(ax["x"][xi], ax["y"][yyi], ax["height"][hi], ax["yaw"][yi],
                                plan.data["tilts"][si])

    def _mount_pose(self, cells):
        """The arm at each floor cell's best candidate, posed at the first work point it reaches."""
        n = self.arm.n
        out = np.full((len(cells), n), np.nan)
        q = self.arrays.get("q")
        reached = self.arrays.get("point_reached")
        if q is None or reached is None:
            return out
        P = reached.shape[1]
        for k, c in enumerate(np.asarray(cells).reshape(-1)):
            full = self._mount_full(c)
            hit = np.flatnonzero(reached[full] > 0)
            if hit.size:
                out[k] = q[full].reshape(P, n)[hit[0]]
        return out

    def _grid_view(self) -> ResultData:
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
        data.units = {f.name: f.unit for f in plan.fields if f.name in measures}
        # which map axes are joints (their values are also the joint columns of the pose list)
        names = list(arm.names)
        ax_x = axes[1] if len(axes) == 2 else (axes[0] if len(axes) == 1 else None)
        ax_y = axes[0] if len(axes) == 2 else None
        data.extras["axis_joints"] = {k: names.index(a.name) for k, a in (("x", ax_x), ("y", ax_y))
                                      if a is not None and a.name in names and data.has_poses}
        if "tcp" in self.arrays and self.arrays["tcp"].shape[1:] == (3,):
            data.tcp = self.arrays["tcp"]
        if len(axes) == 1 and axes[0].name == "sample" and presenter(plan.kind).view != "path":
            data.extras["unordered"] = True    # random samples: the axis is only a count
        return data

    def store(self, start, stop, arrays) -> None:
        """Keep one finished chunk's arrays (``{field: (stop - start, *shape)}``)."""
        super().store(start, stop, arrays)
        if self.data.size == self.plan.cells:
            self.data.done[start:stop] = True


def session_from_spec(spec, arm=None, cell=None) -> StudySession:
    """Plan ``spec`` (loading its arm and cell files unless given)."""
    return results_from_spec(spec, arm, cell, cls=StudySession)


def session_from_results(res) -> StudySession:
    """A session over a :class:`workbench.results.Results` read from a file (see
    :func:`workbench.document.results_from_file`)."""
    return results_from_file(res, cls=StudySession)


@dataclass(frozen=True)
class ChunkResult:
    """A finished chunk of a study run: flat cells ``start``..``stop`` and ``{field: array}``."""
    start: int
    stop: int
    arrays: dict


class StudyWorker(Worker):
    """Runs a study with :func:`workbench.runner.run_study` in a worker thread; signals only
    (the :class:`~workbench.gui.workers.Worker` ones, and one of its own).

    Signals
    -------
    partial(object)
        a :class:`ChunkResult` per finished chunk (copies: the runner may reuse its buffers).
    progress(float, str)
        fraction of the cells done.
    cells(int, int, float)
        cells done, cells total, seconds left (NaN while unknown).
    finished(str, object)
        "done", "cancelled" or "failed: <message>", and the results file path (or None).
    """

    cells = QtCore.Signal(int, int, float)

    def __init__(self, spec, out_path, executor="inprocess", chunk_seconds=GUI_CHUNK_SECONDS):
        super().__init__()
        self.spec = spec
        self.out_path = out_path
        self.executor = executor
        self.chunk_seconds = chunk_seconds
        self._incomplete = False

    def status_of(self, result) -> str:
        return "cancelled" if (self.cancelled and self._incomplete) else "done"

    def work(self):
        from ..runner import prepare, run_study

        def on_chunk(chunk, arrays):
            self.partial.emit(ChunkResult(int(chunk.start), int(chunk.stop),
                                          {k: np.array(v) for k, v in arrays.items()}))

        def progress(done, total, eta):
            self.cells.emit(int(done), int(total), float(eta))
            self.progress.emit(done / max(total, 1), "")

        study = prepare(self.spec)
        if study.plan.n_chunks > 1:
            study = self.spec    # let the runner size the chunks (about chunk_seconds each)
        # else: the kind wants the whole grid in one chunk (a path audit tracks each path from
        # its start), so run its own plan as it is
        res = run_study(study, out=self.out_path, executor=self.executor, progress=progress,
                        cancel=self._cancel, on_chunk=on_chunk, chunk_seconds=self.chunk_seconds)
        self._incomplete = bool(res.incomplete)
        return self.out_path if os.path.exists(self.out_path) else None
