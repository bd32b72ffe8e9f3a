"""The study framework: plans, chunks, output fields and the registry of study kinds.

A study is a pure description (:class:`workbench.studies.spec.StudySpec`: kind, arm file, optional
cell file, settings, name; read from / written to a TOML study file) plus a **study kind** object
with pure functions. The runner (:mod:`workbench.runner`), the CLI and the GUI only schedule and
display; they hold no maths.

Life of a study::

    spec  = read_study_file("arms/cells/demo_s6_sweep.toml")     # StudySpec (studies.spec)
    arm, cell = load_context(spec)                                # Arm, cell object or None
    kind  = get_kind(spec.kind)                                   # StudyKind instance
    plan  = kind.plan(spec, arm, cell)                            # Plan: axes, fields, chunks
    for chunk in plan.chunks:                                     # (the runner does this part)
        arrays = kind.compute_chunk(plan, arm, cell, chunk)       # {field: (stop-start, *shape)}
    tables = kind.summarise(plan, full_arrays)                    # {table name: Table}

Writing a new study kind
------------------------
Subclass :class:`StudyKind`, set ``name`` and ``title``, implement ``validate``, ``plan`` and
``compute_chunk`` (and ``summarise`` if the kind has tables), in a module
``workbench/studies/<name>.py``. The kinds below are pre-registered by dotted path, so a module
``workbench/studies/reach_slice.py`` defining ``class ReachSlice(StudyKind)`` is found without any
edit here; a kind with another module or class name adds one line to :data:`KINDS` (or calls
:func:`register_kind`).

Rules for kinds
~~~~~~~~~~~~~~~
* ``compute_chunk`` is pure and deterministic: the same (plan, arm, cell, chunk) gives the same
  arrays in any process, on any executor, whatever the chunk size (random kinds seed from the
  *cell index*, see :func:`block_rng`). It must not read or write files.
* ``plan`` is cheap (no heavy compute, no timing); the runner calibrates time itself
  (:func:`calibrate`).
* Plans, settings, arms and cells are pickled to worker processes / Dask workers: keep them plain
  (dataclasses of numpy arrays, tuples, dicts; no open files, no lambdas).
* Internal units are SI; :class:`Axis` carries a display unit so files, maps and CSVs show degrees.
* Errors in settings raise :class:`StudyError` naming the study file, the key, the value received and
  what is expected (one line).
"""
from __future__ import annotations

import importlib
import math
import time
from dataclasses import dataclass, field, replace
from typing import Any, Mapping

import numpy as np

from ..errors import WorkbenchError

__all__ = [
    "StudyError", "Axis", "Field", "Chunk", "Plan", "Table", "Estimate", "StudyKind",
    "KINDS", "register_kind", "get_kind", "kind_names", "split_chunks", "block_rng",
    "calibrate", "length_attrs", "DEFAULT_CHUNK_CELLS", "RNG_BLOCK", "MAX_SEEDS",
]

#: default number of grid cells per chunk before the runner calibrates (it re-chunks to ~0.25 s)
DEFAULT_CHUNK_CELLS = 16384
#: random kinds draw their samples in blocks of this many cells, each block from its own generator
#: seeded by (seed, block index), so the values do not depend on how the grid is chunked
RNG_BLOCK = 4096
#: IK seeds per target that a study setting may ask for (every kind: more only multiplies the run
#: time; a million seeds would run for hours before anything is written)
MAX_SEEDS = 64


class StudyError(WorkbenchError):
    """A bad study file or study setting (one line naming file, key, value and what is expected)."""


# ----------------------------------------------------------------------------------------------
# plan pieces


@dataclass(frozen=True, eq=False)
class Axis:
    """One axis of a study grid.

    Parameters
    ----------
    name : str
        Short name ("j2", "x", "sample").
    values : ndarray, shape (k,)
        Grid values in SI units (rad, m) or plain indices.
    unit : str
        SI unit of ``values``: "rad", "m" or "" (a count / index).
    label : str
        Text for plots and tables ("joint j2").
    display_unit : str
        Unit shown to people: "deg" for "rad", "m" or "mm" for "m", "" otherwise.
    """

    name: str
    values: np.ndarray
    unit: str = ""
    label: str = ""
    display_unit: str = ""

    def __post_init__(self):
        object.__setattr__(self, "values", np.asarray(self.values, dtype=float).reshape(-1))
        if not self.display_unit:
            object.__setattr__(self, "display_unit", {"rad": "deg"}.get(self.unit, self.unit))
        if not self.label:
            object.__setattr__(self, "label", self.name)

    @property
    def size(self) -> int:
        return int(self.values.size)

    def display_values(self) -> np.ndarray:
        """Values in ``display_unit`` (degrees for radians, mm for metres when asked)."""
        return self.values * display_factor(self.unit, self.display_unit)


def display_factor(unit: str, display_unit: str) -> float:
    """Factor turning a value in SI ``unit`` into ``display_unit`` (rad->deg, m->mm, else 1)."""
    if unit == "rad" and display_unit == "deg":
        return 180.0 / math.pi
    if unit == "m" and display_unit == "mm":
        return 1000.0
    return 1.0


@dataclass(frozen=True, eq=False)
class Field:
    """One output of a study: a value (or small array) per grid cell.

    Parameters
    ----------
    name : str
        Dataset name ("manipulability", "tcp", "status").
    shape : tuple of int
        Trailing per-cell shape: () for a scalar, (3,) for a point, (n,) for joint values.
    dtype : str
        numpy dtype name ("float64", "float32", "uint8", "bool").
    unit : str
        SI unit of the values ("m", "rad", "" for dimensionless); a Jacobian measure of mixed rows
        is dimensionless after the characteristic-length scaling.
    description : str
        One line for tooltips, the README and the results file.
    fill : float or int
        Value of cells not computed yet (NaN for floats, 0 for integers/bools).
    kind : str
        "measure" (mappable scalar), "pose" (joint values, rad/m), "point" (positions, m),
        "status" (integer flags, see ``flags``) or "other".
    flags : dict
        For status fields: {bit value: meaning}.
    """

    name: str
    shape: tuple = ()
    dtype: str = "float64"
    unit: str = ""
    description: str = ""
    fill: Any = None
    kind: str = "measure"
    flags: dict = field(default_factory=dict)

    def __post_init__(self):
        object.__setattr__(self, "shape", tuple(int(s) for s in self.shape))
        if self.fill is None:
            dt = np.dtype(self.dtype)
            object.__setattr__(self, "fill", np.nan if dt.kind == "f" else 0)

    @property
    def cell_bytes(self) -> int:
        """Bytes per grid cell."""
        return int(np.dtype(self.dtype).itemsize * int(np.prod(self.shape, dtype=np.int64)))

    def empty(self, count: int) -> np.ndarray:
        """A (count, *shape) array filled with ``fill``."""
        return np.full((int(count),) + self.shape, self.fill, dtype=self.dtype)


@dataclass(frozen=True)
class Chunk:
    """A slice [start, stop) of the flattened (C-order) study grid; ``index`` is its position in
    :attr:`Plan.chunks`."""

    index: int
    start: int
    stop: int

    @property
    def size(self) -> int:
        return self.stop - self.start


@dataclass(frozen=True, eq=False)
class Table:
    """A summary table (ranked list, near-singular pose list ...).

    ``columns`` maps column name -> 1-D array (all the same length); ``units`` maps column name ->
    display unit ("deg", "mm", "m", ""), the values are already in that display unit.
    """

    title: str
    columns: dict
    units: dict = field(default_factory=dict)
    description: str = ""

    @property
    def rows(self) -> int:
        return len(next(iter(self.columns.values()))) if self.columns else 0


@dataclass(frozen=True, eq=False)
class Estimate:
    """What a run will cost, measured before it starts (see :func:`calibrate`).

    ``seconds`` is at the speed measured in the calibrating process (all its threads);
    ``result_bytes`` the raw size of every output
    array; ``chunk_bytes`` the largest chunk's arrays (what a worker holds at once).
    ``sample`` is the last timed call's output ``(Chunk, arrays)`` on the first cells of the grid
    (None when over :data:`SAMPLE_KEEP_BYTES`): the runner uses it instead of computing those
    cells again.
    """

    cells: int
    result_bytes: int
    chunk_bytes: int
    seconds_per_cell: float
    seconds: float
    sample: tuple | None = field(default=None, repr=False)

    def describe(self) -> str:
        return (f"{self.cells:,} cells, about {_fmt_bytes(self.result_bytes)} of results, "
                f"about {_fmt_seconds(self.seconds)} of compute at the speed measured in this process")


@dataclass(frozen=True, eq=False)
class Plan:
    """Everything a run needs, worked out from a spec without heavy compute.

    Parameters
    ----------
    kind : str
        Registered kind name.
    spec : StudySpec
        The study spec the plan came from (its settings mapping as written in the file).
    settings : object
        The validated settings object of the kind (a frozen dataclass in SI units).
    axes : tuple of Axis
        Grid axes; the grid shape is ``tuple(a.size for a in axes)`` (a single "sample" axis for
        random-sample studies).
    fields : tuple of Field
        Output fields, in the order they are written.
    chunk_cells : int
        Cells per chunk (the last chunk may be shorter).
    data : dict
        Kind-private precomputed plain data (arrays, floats) that ``compute_chunk`` needs.
    """

    kind: str
    spec: Any
    settings: Any
    axes: tuple
    fields: tuple
    chunk_cells: int = DEFAULT_CHUNK_CELLS
    data: dict = field(default_factory=dict)

    @property
    def shape(self) -> tuple:
        """Grid shape (one entry per axis)."""
        return tuple(a.size for a in self.axes)

    @property
    def cells(self) -> int:
        return int(np.prod(self.shape, dtype=np.int64)) if self.axes else 0

    @property
    def n_chunks(self) -> int:
        return -(-self.cells // self.chunk_cells) if self.cells else 0

    @property
    def chunks(self) -> tuple:
        """Tuple of :class:`Chunk` covering the flattened grid in order."""
        return split_chunks(self.cells, self.chunk_cells)

    def chunk(self, index: int) -> Chunk:
        start = index * self.chunk_cells
        return Chunk(index, start, min(self.cells, start + self.chunk_cells))

    def field(self, name: str) -> Field:
        for f in self.fields:
            if f.name == name:
                return f
        raise KeyError(f"study {self.kind!r} has no output field {name!r}; fields are "
                       f"{', '.join(f.name for f in self.fields)}")

    @property
    def cell_bytes(self) -> int:
        return sum(f.cell_bytes for f in self.fields)

    @property
    def result_bytes(self) -> int:
        return self.cells * self.cell_bytes

    def with_chunk_cells(self, chunk_cells: int) -> "Plan":
        """The same plan cut into chunks of ``chunk_cells`` cells."""
        return replace(self, chunk_cells=max(1, int(chunk_cells)))


def split_chunks(cells: int, chunk_cells: int) -> tuple:
    """Chunks of ``chunk_cells`` covering ``range(cells)``."""
    chunk_cells = max(1, int(chunk_cells))
    return tuple(Chunk(i, s, min(cells, s + chunk_cells)) for i, s in enumerate(range(0, cells, chunk_cells)))


def block_rng(seed: int, start: int, stop: int, draw) -> np.ndarray:
    """Random values for cells [start, stop) that do not depend on chunking.

    ``draw(rng, count)`` returns an array of ``count`` rows; the cells are grouped in blocks of
    :data:`RNG_BLOCK`, each drawn in full from ``numpy.random.default_rng([seed, block])``, and the
    requested rows are cut out.
    """
    parts = []
    b0, b1 = start // RNG_BLOCK, (stop - 1) // RNG_BLOCK
    for b in range(b0, b1 + 1):
        rows = draw(np.random.default_rng([int(seed), int(b)]), RNG_BLOCK)
        lo = max(start, b * RNG_BLOCK) - b * RNG_BLOCK
        hi = min(stop, (b + 1) * RNG_BLOCK) - b * RNG_BLOCK
        parts.append(rows[lo:hi])
    return np.concatenate(parts, axis=0) if parts else np.empty((0,))


# ----------------------------------------------------------------------------------------------
# study kinds


class StudyKind:
    """Base class of a study kind; instances are stateless (one per kind, see :func:`get_kind`).

    Subclasses set ``name`` (the registry key, used in study files as ``kind = "..."``) and
    ``title`` (shown to people), and implement the methods below.
    """

    name: str = ""
    title: str = ""
    #: whether the kind needs a cell file (mount search, path audit ...)
    needs_cell: bool = False
    #: whether the runner may re-cut the plan's chunks to about 0.25 s each (after calibrating).
    #: Set False to keep the kind's own chunking; a plan of a single chunk is always kept as it is
    #: (e.g. sequential work such as tracking along a path).
    calibrated_chunks: bool = True

    def default_settings(self, arm) -> dict:
        """Settings as they would appear in a study file (degrees, mm where the file says so) for
        a new study of this kind on ``arm``; used by the GUI to fill its form."""
        return {}

    def validate(self, settings: Mapping, arm, cell, where: str = "settings"):
        """Check the file-level ``settings`` mapping and return the kind's settings object (SI).

        Parameters
        ----------
        settings : mapping
            The ``[settings]`` table of the study file (file units, e.g. degrees).
        arm : workbench.kinematics.Arm
        cell : object or None
            The loaded cell (if the study names a cell file).
        where : str
            Prefix for error messages, e.g. ``"study.toml: [settings]"``.

        Raises
        ------
        StudyError
            Naming ``where``, the key, the value received and what is expected.
        """
        raise NotImplementedError

    def unused_settings(self, settings: Mapping) -> dict:
        """``{key: why}`` for keys of a valid ``settings`` mapping that these settings do not read
        (e.g. ``seed`` of a grid sweep): they are ignored, and the CLI and the GUI say so. Call
        after :meth:`validate` succeeded. Default: none."""
        return {}

    def plan(self, spec, arm, cell, chunk_cells: int | None = None) -> Plan:
        """Validate ``spec.settings`` and lay out the grid, the output fields and the chunks."""
        raise NotImplementedError

    def compute_chunk(self, plan: Plan, arm, cell, chunk: Chunk) -> dict:
        """Compute one chunk: ``{field name: array (chunk.size, *field.shape)}`` for every field of
        ``plan.fields``. Pure and deterministic; no files, no globals."""
        raise NotImplementedError

    def cell_poses(self, plan: Plan, flat_index, arrays: Mapping | None = None):
        """Joint values (k, n) (rad / m) behind the cells ``flat_index`` (flattened grid order), for
        pose lists and for showing a picked cell in the scene; ``arrays`` are the results (flat or
        grid-shaped). Default: the first "pose" field of the results (e.g. a best IK solution);
        None when the kind has no pose per cell."""
        if arrays is None:
            return None
        for f in plan.fields:
            if f.kind == "pose" and f.name in arrays:
                a = np.asarray(arrays[f.name]).reshape((plan.cells,) + f.shape)
                return a[np.asarray(flat_index, dtype=np.int64).reshape(-1)]
        return None

    def summarise(self, plan: Plan, arrays: Mapping) -> dict:
        """Summary tables ``{name: Table}`` from the full arrays ``{field: (cells, *shape)}``
        (flattened grid order; cells of unfinished chunks hold the field's fill value)."""
        return {}

    def __repr__(self):
        return f"<study kind {self.name}>"


#: kind name -> "module:Class" (imported on first use). Kinds whose module is missing from this
#: build report so when a study file asks for them.
KINDS: dict[str, str] = {
    "joint_sweep": "workbench.studies.joint_sweep:JointSweep",
    "reach_slice": "workbench.studies.reach_slice:ReachSlice",
    "mount_search": "workbench.studies.mount_search:MountSearch",
    "path_audit": "workbench.studies.path_audit:PathAudit",
    "load_map": "workbench.studies.load_map:LoadMap",
}

_INSTANCES: dict[str, StudyKind] = {}


def register_kind(name: str, target) -> None:
    """Register a kind: ``target`` is a ``"module:Class"`` string, a StudyKind subclass or an
    instance."""
    KINDS[name] = target
    _INSTANCES.pop(name, None)


def kind_names(available_only: bool = True) -> list[str]:
    """Registered kind names (only those whose module imports, by default)."""
    out = []
    for name in KINDS:
        if not available_only:
            out.append(name)
            continue
        try:
            get_kind(name)
        except StudyError:
            continue
        out.append(name)
    return out


def get_kind(name: str, where: str = "kind") -> StudyKind:
    """The StudyKind instance registered as ``name``.

    Raises
    ------
    StudyError
        For an unknown name or a kind not available in this build (message starts with ``where``).
    """
    hit = _INSTANCES.get(name)
    if hit is not None:
        return hit
    target = KINDS.get(name)
    if target is None:
        raise StudyError(f"{where}: unknown study kind {name!r}; expected one of {', '.join(KINDS)}")
    if isinstance(target, str):
        mod_name, _, cls_name = target.partition(":")
        try:
            mod = importlib.import_module(mod_name)
        except ModuleNotFoundError as exc:
            if exc.name == mod_name:
                raise StudyError(f"{where}: study kind {name!r} is not available in this build") from None
            raise
        target = getattr(mod, cls_name)
    inst = target() if isinstance(target, type) else target
    _INSTANCES[name] = inst
    return inst


def length_attrs(plan: "Plan", arm) -> dict:
    """Results-file attributes naming the characteristic length the measures used (m) and where
    it came from: the study's ``length`` setting, the arm file's ``characteristic_length``, or
    the arm's axis chain (:func:`workbench.arm.model.axis_chain_length`)."""
    if arm is None:
        return {}
    model = getattr(arm, "model", arm)
    written = getattr(plan.spec, "settings", None) or {}
    given = getattr(plan.settings, "length", None)
    if given is not None and "length" in written:
        used, source = float(given), "study setting 'length'"
    elif getattr(model, "stated_length", None) is not None:
        used, source = float(model.stated_length), "arm file 'characteristic_length'"
    else:
        used, source = float(model.axis_chain_length), "axis chain of the arm (default)"
    return {"characteristic_length_m": used, "characteristic_length_source": source,
            "arm_axis_chain_length_m": float(model.axis_chain_length)}


def check_rows(value, where: str):
    """The task rows ``value`` of a study's settings parsed (:func:`workbench.kinematics.rows.parse_rows`),
    or a :class:`StudyError` ``"<where> rows: <what is wrong>"``."""
    from ..kinematics.rows import parse_rows

    try:
        return parse_rows(value)
    except Exception as exc:
        msg = str(exc)  # parse_rows's messages start with "rows: " already
        raise StudyError(f"{where} rows: {msg[len('rows: '):] if msg.startswith('rows: ') else msg}") from None


def unused_note(kind: StudyKind, settings: Mapping) -> str:
    """The settings a study ignores, grouped by reason (see :meth:`StudyKind.unused_settings`),
    e.g. ``"samples, seed (mode is 'grid')"``; "" when it reads them all."""
    by_reason: dict = {}
    for key, why in kind.unused_settings(settings or {}).items():
        by_reason.setdefault(why, []).append(key)
    return "; ".join(f"{', '.join(keys)} ({why})" for why, keys in by_reason.items())


#: calibration output kept for the run to reuse when at most this big
SAMPLE_KEEP_BYTES = 64 << 20


def calibrate(kind: StudyKind, plan: Plan, arm, cell, sample_cells: int = 65536,
              min_seconds: float = 0.03, repeats: int = 3, max_seconds: float = 1.5,
              clock=time.perf_counter) -> Estimate:
    """Time ``compute_chunk`` on the first cells of the grid and extrapolate.

    A first call on 8 cells pays any compile / warm-up cost and is not used. Then the sample grows
    from 8 cells (by the factor that should bring one call to about twice ``min_seconds``, between
    2x and 8x) until one call takes ``min_seconds`` or the sample reaches ``sample_cells`` or the
    grid. A single slow call cannot decide: the size where growth stops is timed ``repeats`` times
    (fewer once the calls there have taken ``max_seconds``) and the **median** is used; when that
    median is under ``min_seconds`` after all (the slow call was a pause of the machine, not the
    work), the sample keeps growing. Pauses only ever lengthen a timing, so the median of three
    is off only when two of three calls were paused.

    Returns an :class:`Estimate` at the speed of the calling process (all its threads), with the
    last call's output as ``sample`` (cells [0, n) of the grid; the runner does not compute them
    again). ``clock`` is the timer (tests give a simulated one).
    """
    cells = plan.cells
    if cells == 0:
        return Estimate(0, 0, 0, 0.0, 0.0)
    kind.compute_chunk(plan, arm, cell, Chunk(0, 0, min(cells, 8)))  # warm (compile / caches)
    cap = min(cells, sample_cells)
    n = min(cells, 8)

    def timed(k):
        t0 = clock()
        out = kind.compute_chunk(plan, arm, cell, Chunk(0, 0, k))
        return clock() - t0, out

    while True:
        dt, arrays = timed(n)
        if dt < min_seconds and n < cap:  # clearly too short to time: grow (a pause only lengthens)
            n = _grow(n, dt, min_seconds, cap)
            continue
        times = [dt]
        while len(times) < max(1, repeats) and sum(times) < max_seconds:
            dt, arrays = timed(n)
            times.append(dt)
        dt = float(np.median(times))
        if dt < min_seconds and n < cap:  # the slow call was a pause: keep growing
            n = _grow(n, dt, min_seconds, cap)
            continue
        break
    spc = dt / n
    keep = n * plan.cell_bytes <= SAMPLE_KEEP_BYTES
    return Estimate(cells=cells, result_bytes=plan.result_bytes,
                    chunk_bytes=min(cells, plan.chunk_cells) * plan.cell_bytes,
                    seconds_per_cell=spc, seconds=spc * cells,
                    sample=(Chunk(0, 0, n), arrays) if keep else None)


def _grow(n: int, dt: float, min_seconds: float, cap: int) -> int:
    """The next calibration sample size: about 2 * min_seconds per call, 2x to 8x the last."""
    factor = 8.0 if dt <= 0 else min(8.0, max(2.0, 2.0 * min_seconds / dt))
    return int(min(cap, max(n + 1, round(n * factor))))


def _fmt_bytes(b: float) -> str:
    for unit in ("B", "KB", "MB", "GB", "TB"):
        if abs(b) < 1024 or unit == "TB":
            return f"{b:.0f} {unit}" if unit == "B" else f"{b:.1f} {unit}"
        b /= 1024.0
    return f"{b:.1f} TB"


def _fmt_seconds(s: float) -> str:
    if not np.isfinite(s):
        return "unknown time"
    if s < 60:
        return f"{s:.1f} s"
    if s < 3600:
        return f"{s / 60:.1f} min"
    if s < 86400 * 2:
        return f"{s / 3600:.1f} h"
    return f"{s / 86400:.0f} days"
