"""The workbench's document: the arm, the cell, the study, its results and the selection, with
declared events (plain Python + numpy, no Qt).

The desktop window (``workbench.gui.main_window``) keeps its state here and redraws from the
events; anything else (tests, scripts) can load arms, cells, studies and results files through
the same object without a display.

Events
------
Listeners are called as ``fn(event, payload)``; ``payload`` is a dict whose keys are exactly the
ones declared in :data:`EVENTS` (checked when the event fires). Listeners run in the order they
subscribed, on the thread that changed the document.

======================  ==============================  ===============================================
event                   payload keys                    fired when
======================  ==============================  ===============================================
``arm``                 ``arm``, ``path``               the arm changed (file opened, placed on a mount)
``cell``                ``cell``, ``path``              the cell changed (``cell`` None: no cell)
``study``               ``spec``, ``path``              a study file was loaded (the form shows it)
``results``             ``session``, ``path``           results behind the views changed: a run started
                                                        (``path`` None), a results file was opened, or
                                                        they were cleared (``session`` None)
``chunk``               ``start``, ``stop``             a finished chunk was stored in the session
``results_file``        ``path``                        a run's results file became known (run ended)
``selection``           ``count``, ``source``           the brushed cells changed (``count`` None: none)
``picked``              ``cell``                        one result cell was picked (None: no pick)
======================  ==============================  ===============================================

One change may fire several events, always in the order of the table above for that change
(opening a results file: ``cell``, ``arm``, ``results``); nothing fires when a load fails (the
document stays as it was).
"""
from __future__ import annotations

import os
import tomllib
from typing import Callable

import numpy as np

from .errors import WorkbenchError

__all__ = ["EVENTS", "Document", "with_mount", "StudyResults", "results_from_spec", "results_from_file"]

#: event name -> (payload keys, what it means); the one list of what the document announces
EVENTS: dict[str, tuple[tuple[str, ...], str]] = {
    "arm": (("arm", "path"), "the arm changed; path: its file (None when only its mount moved)"),
    "cell": (("cell", "path"), "the cell changed; cell None: no cell"),
    "study": (("spec", "path"), "a study file was loaded"),
    "results": (("session", "path"), "the results behind the views changed (session None: cleared; "
                                     "path None: a run that has no file yet)"),
    "chunk": (("start", "stop"), "cells [start, stop) of the session were stored"),
    "results_file": (("path",), "the results file of the session became known (a run ended)"),
    "selection": (("count", "source"), "the brushed cells changed (count None: no brush)"),
    "picked": (("cell",), "a result cell was picked (None: no pick)"),
}


def with_mount(arm, mount):
    """The same arm standing on ``mount`` (4, 4)."""
    import dataclasses

    from .kinematics import Arm

    return Arm(dataclasses.replace(arm.model, mount=np.asarray(mount, float)))


class StudyResults:
    """One study's results as flat arrays: kind, plan, arm, cell and ``{field: (cells, *shape)}``.

    Parameters
    ----------
    kind : StudyKind
    plan : Plan
    arm : workbench.kinematics.Arm
    cell : object or None
    arrays : dict, optional
        ``{field: (cells, *shape)}`` already computed (a results file); fill values otherwise.
    done : (cells,) bool, optional
    """

    def __init__(self, kind, plan, arm, cell=None, arrays=None, done=None):
        self.kind, self.plan, self.arm, self.cell = kind, plan, arm, cell
        self.spec = plan.spec
        if arrays is None:
            arrays = {f.name: f.empty(plan.cells) for f in plan.fields}
        self.arrays = {k: np.asarray(v) for k, v in arrays.items()}   # each (cells, *field shape)
        #: (plan.cells,) which cells of the plan's grid are computed
        self.cells_done = np.zeros(plan.cells, bool) if done is None else \
            np.asarray(done, bool).reshape(-1).copy()
        #: summary tables ``{name: Table}`` (read from a results file)
        self.tables: dict = {}
        #: the results file read (None for a run)
        self.incomplete = False

    def estimate(self):
        """:class:`workbench.studies.Estimate` (times a few cells)."""
        from .studies import calibrate

        return calibrate(self.kind, self.plan, self.arm, self.cell, sample_cells=512)

    def store(self, start, stop, arrays) -> None:
        """Keep one finished chunk's arrays (``{field: (stop - start, *shape)}``)."""
        for name, v in arrays.items():
            if name in self.arrays:
                self.arrays[name][start:stop] = np.asarray(v).reshape((stop - start,) + self.arrays[name].shape[1:])
        self.cells_done[start:stop] = True

    @property
    def complete(self) -> bool:
        return bool(self.cells_done.all())

    @property
    def fraction_done(self) -> float:
        return float(self.cells_done.mean()) if self.cells_done.size else 0.0


def results_from_spec(spec, arm=None, cell=None, cls=StudyResults):
    """Plan ``spec`` (loading its arm and cell files unless given): empty results of class ``cls``."""
    from .studies import get_kind, load_context

    if arm is None:
        arm, cell, _, _ = load_context(spec)
    kind = get_kind(spec.kind)
    return cls(kind, kind.plan(spec, arm, cell), arm, cell)


def results_from_file(res, cls=StudyResults):
    """Results of class ``cls`` over a :class:`workbench.results.Results` (or a path): the arm and
    cell come from the texts stored in the file, the plan from the stored study."""
    from .arm.files import parse_arm_dict
    from .kinematics import Arm
    from .studies import get_kind, load_context
    from .studies.cell import parse_cell_text

    if isinstance(res, (str, os.PathLike)):
        from .results import read_results

        res = read_results(res)
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
    s = cls(kind, plan, arm, cell, arrays=arrays, done=done)
    s.tables = dict(res.tables)
    s.incomplete = bool(res.incomplete)
    return s


class Document:
    """What the workbench has open, and who wants to know when it changes.

    Attributes (read them freely; change them through the methods, which fire the events):
    ``arm`` (:class:`workbench.kinematics.Arm` or None), ``arm_path``, ``cell``, ``cell_path``,
    ``study`` (the :class:`~workbench.studies.StudySpec` loaded from a file, or None),
    ``study_file``, ``session`` (:class:`StudyResults` or a subclass, or None),
    ``results_file``, ``selection`` (sorted flat cell indices, or None), ``picked``.
    """

    def __init__(self):
        self.arm = None
        self.arm_path = None
        self.cell = None
        self.cell_path = None
        self.study = None
        self.study_file = None
        self.session = None
        self.results_file = None
        self.selection = None
        self.selection_source = None
        self.picked = None
        self._listeners: list[tuple[Callable, frozenset | None]] = []

    # ---- events ------------------------------------------------------------------------
    def subscribe(self, fn: Callable, events=None) -> Callable:
        """Call ``fn(event, payload)`` on every event (or only on those named in ``events``).
        Returns a function that unsubscribes."""
        names = None if events is None else frozenset([events] if isinstance(events, str) else events)
        if names is not None and not names <= set(EVENTS):
            raise ValueError(f"unknown document events {sorted(names - set(EVENTS))}; expected some of "
                             f"{', '.join(EVENTS)}")
        entry = (fn, names)
        self._listeners.append(entry)

        def unsubscribe():
            if entry in self._listeners:
                self._listeners.remove(entry)
        return unsubscribe

    def emit(self, event: str, **payload) -> None:
        """Tell the listeners; the payload must have exactly the declared keys."""
        keys, _ = EVENTS[event]
        if set(payload) != set(keys):
            raise ValueError(f"document event {event!r}: payload {sorted(payload)}, declared {list(keys)}")
        for fn, names in list(self._listeners):
            if names is None or event in names:
                fn(event, payload)

    # ---- arm and cell --------------------------------------------------------------------
    def set_arm(self, arm, path=None) -> None:
        """Use ``arm`` (``path``: its file; None keeps the file). In a cell that places the arm the
        arm stands at the cell's placement."""
        placement = getattr(self.cell, "placement", None)
        if placement is not None:
            arm = with_mount(arm, placement)
        self.arm = arm
        if path is not None:
            self.arm_path = os.path.abspath(os.fspath(path))
        self.emit("arm", arm=arm, path=self.arm_path)

    def move_arm(self, mount) -> None:
        """Stand the same arm on ``mount`` (4, 4) (a mount search candidate picked); fires ``arm``
        with ``path`` None."""
        self.arm = with_mount(self.arm, mount)
        self.emit("arm", arm=self.arm, path=None)

    def load_arm(self, path) -> None:
        """Read an arm file (TOML or URDF); a bad file raises and nothing changes."""
        from .arm import read_arm_model
        from .kinematics import Arm

        arm = Arm(read_arm_model(path))
        self.set_arm(arm, path)

    def set_cell(self, cell, path=None) -> None:
        self.cell = cell
        self.cell_path = None if cell is None or path is None else os.path.abspath(os.fspath(path))
        self.emit("cell", cell=cell, path=self.cell_path)

    def load_cell(self, path, place_arm=True) -> None:
        """Read a cell file (a bad file raises and nothing changes). With ``place_arm`` the arm then
        stands at the cell's placement, or at the origin when the cell places none (``cell``, then
        ``arm``)."""
        from .studies.cell import read_cell_file

        cell = read_cell_file(path)
        self.set_cell(cell, path)
        if place_arm and self.arm is not None:
            self.set_arm(self.arm if cell.placement is not None else with_mount(self.arm, np.eye(4)))

    # ---- study and results ---------------------------------------------------------------
    def load_study(self, path, cls=StudyResults):
        """Read a study file, load its arm and cell and plan it (bad settings raise before anything
        changes). Fires ``cell`` (if the study names one), ``arm``, ``study``, ``results`` (cleared).
        Returns the spec."""
        from .studies import load_context, read_study_file

        spec = read_study_file(path)
        arm, cell, _, _ = load_context(spec)
        results_from_spec(spec, arm, cell, cls=cls)   # plan now: bad settings fail here
        if cell is not None:
            self.set_cell(cell, spec.cell_path)
        self.set_arm(arm, spec.arm_path)
        self.study, self.study_file = spec, os.path.abspath(os.fspath(path))
        self.emit("study", spec=spec, path=self.study_file)
        self.clear_results()
        return spec

    def open_results(self, path, cls=StudyResults, build=None):
        """Read a results file (a bad file raises and nothing changes). Fires ``cell`` (if the file
        holds one), ``arm``, ``results``. ``build(res)`` makes the session (default:
        :func:`results_from_file` with ``cls``). Returns the session."""
        from .results import read_results

        res = read_results(path)
        session = build(res) if build is not None else results_from_file(res, cls=cls)
        if session.cell is not None:
            self.set_cell(session.cell, session.spec.cell_path)
        self.set_arm(session.arm, session.spec.arm_path)
        self.session, self.results_file = session, os.path.abspath(os.fspath(path))
        self._reset_selection()
        self.emit("results", session=session, path=self.results_file)
        return session

    def start_results(self, session) -> None:
        """A run begins: ``session`` (empty arrays) is behind the views; no file yet."""
        self.session, self.results_file = session, None
        self._reset_selection()
        self.emit("results", session=session, path=None)

    def store_chunk(self, start, stop, arrays) -> None:
        """A finished chunk of the running session."""
        if self.session is None:
            return
        self.session.store(int(start), int(stop), arrays)
        self.emit("chunk", start=int(start), stop=int(stop))

    def set_results_file(self, path) -> None:
        """The run's results file is written (or kept after a cancel)."""
        self.results_file = None if path is None else os.path.abspath(os.fspath(path))
        self.emit("results_file", path=self.results_file)

    def clear_results(self) -> None:
        """No results behind the views."""
        self.session, self.results_file = None, None
        self._reset_selection()
        self.emit("results", session=None, path=None)

    # ---- selection -----------------------------------------------------------------------
    def _reset_selection(self):
        self.selection, self.selection_source, self.picked = None, None, None

    def select(self, cells, source=None) -> None:
        """Brushed cells: flat indices (or a boolean mask over the session's cells); None: no brush."""
        if cells is None:
            self.selection = None
        else:
            a = np.asarray(cells)
            self.selection = np.flatnonzero(a) if a.dtype == bool else np.unique(a.astype(np.int64).reshape(-1))
        self.selection_source = source
        self.emit("selection", count=None if self.selection is None else int(self.selection.size), source=source)

    def pick(self, cell) -> None:
        """One result cell picked (None: none)."""
        self.picked = None if cell is None else int(cell)
        self.emit("picked", cell=self.picked)
