"""Results files (HDF5 via h5py): write while a study runs, read back, CSV and PNG exports.

File layout (``SCHEMA_VERSION`` 1)::

    /                       attrs: schema_version, format ("manipulability-workbench results"),
                                   software, software_version, created, finished (ISO 8601 UTC),
                                   kind, name, cells, grid_shape, chunk_cells, incomplete (bool),
                                   chunks_done, chunks_total, elapsed_s, executor, study_path,
                                   arm_path, cell_path
    /inputs/study           the study file text (TOML; paths relative to study_path's folder)
    /inputs/arm             the arm file text
    /inputs/cell            the cell file text (only when the study has a cell file)
    /axes/<name>            one 1-D dataset per grid axis, SI values; attrs unit, display_unit,
                            label, order (position in the grid shape)
    /fields/<name>          one dataset per output field, shape (cells, *per-cell shape) in
                            flattened C order of the grid, chunked and compressed; attrs unit,
                            description, kind (measure/pose/point/status/other), fill, flags (JSON)
                            Cells of unfinished chunks hold the fill value (NaN for floats).
    /chunks/finished        bool (chunks_total,): which chunks of chunk_cells cells are written
    /tables/<name>/<column> summary tables (pose lists ...); attrs title, description, columns,
                            units (JSON)

The file is written under a hidden temporary name in the destination folder and renamed onto the
final name only when it is closed (``os.replace``), so a crash never leaves a half-written file
under the final name. A cancelled run is closed normally and says ``incomplete = True``.
"""
from __future__ import annotations

import json
import math
import sys
import os
import tempfile
import time
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from .errors import WorkbenchError
from .studies.base import Axis, Field, Plan, Table

__all__ = ["SCHEMA_VERSION", "Results", "ResultsWriter", "MemoryWriter", "OutputLock", "read_results",
           "check_output_path", "check_folder_takes_files", "export_csv", "export_png", "ResultsError"]

SCHEMA_VERSION = 1
#: HDF5 compression of the field datasets (``None``: none). "lz4" is Blosc's LZ4 codec after
#: Blosc's byte shuffle (HDF5 filter 32001, from hdf5plugin): about as small as LZF on measure
#: maps at a sixth of the CPU time. "lzf" is h5py's own filter; "gzip" (level 1, after the
#: shuffle filter) is the one any HDF5 tool reads without plugins.
COMPRESSIONS = ("lz4", "lzf", "gzip", None)
FORMAT = "manipulability-workbench results"
#: target size of one compressed HDF5 chunk (bytes, before compression)
H5_CHUNK_BYTES = 1 << 20
#: results up to this size are mirrored in memory while streaming to a file
MIRROR_BYTES = 256 << 20


class ResultsError(WorkbenchError):
    """A results file that cannot be written or read (one line naming the file)."""


def _h5py():
    """h5py with the compression filters of hdf5plugin registered (to write and read "lz4")."""
    import h5py
    import hdf5plugin  # noqa: F401  (registers the Blosc filter with the HDF5 library)

    return h5py


def _filter_kw(compression) -> dict:
    """create_dataset keywords of a compression name of :data:`COMPRESSIONS`."""
    if compression == "lz4":
        import hdf5plugin

        return dict(hdf5plugin.Blosc(cname="lz4", clevel=5, shuffle=hdf5plugin.Blosc.SHUFFLE))
    if compression == "gzip":
        return dict(compression="gzip", compression_opts=1, shuffle=True)
    if compression == "lzf":
        return dict(compression="lzf", shuffle=True)
    return {}


def _now() -> str:
    return time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())


# ----------------------------------------------------------------------------------------------
# in-memory results


@dataclass(eq=False)
class Results:
    """A study's results, in memory.

    Attributes
    ----------
    kind, name : str
    axes : tuple of Axis
        Grid axes (SI values; ``display_values()`` for degrees).
    fields : tuple of Field
    arrays : dict of ndarray
        ``{field: (*grid shape, *per-cell shape)}``; unfinished cells hold the field's fill value.
    finished : ndarray of bool, shape (n_chunks,)
    chunk_cells : int
    incomplete : bool
        True when some chunks were not computed (cancelled or failed run).
    tables : dict of Table
    study_text, arm_text, cell_text : str or None
        The input files as text.
    attrs : dict
        Everything else of the file's root attributes (software_version, created, elapsed_s ...).
    path : str or None
        The results file (None for in-memory results).
    plan : Plan or None
        The plan of the run (None when read from a file; see :meth:`spec`).
    """

    kind: str
    name: str
    axes: tuple
    fields: tuple
    arrays: dict
    finished: np.ndarray
    chunk_cells: int
    incomplete: bool
    tables: dict = field(default_factory=dict)
    study_text: str | None = None
    arm_text: str | None = None
    cell_text: str | None = None
    attrs: dict = field(default_factory=dict)
    path: str | None = None
    plan: Plan | None = None

    @property
    def shape(self) -> tuple:
        return tuple(a.size for a in self.axes)

    @property
    def cells(self) -> int:
        return int(np.prod(self.shape, dtype=np.int64))

    def field(self, name: str) -> Field:
        for f in self.fields:
            if f.name == name:
                return f
        raise ResultsError(f"{self.path or 'results'}: no field {name!r}; fields are "
                           f"{', '.join(f.name for f in self.fields)}")

    def done_mask(self) -> np.ndarray:
        """bool array of the grid shape: True where the cell's chunk finished."""
        flat = np.repeat(self.finished, self.chunk_cells)[: self.cells]
        return flat.reshape(self.shape)

    def flat(self, name: str) -> np.ndarray:
        """Field ``name`` as (cells, *per-cell shape), flattened grid order."""
        f = self.field(name)
        return self.arrays[name].reshape((self.cells,) + f.shape)

    def spec(self):
        """The study spec (:class:`workbench.studies.spec.StudySpec`) parsed from the stored text;
        relative paths refer to the original study file's folder."""
        from .studies.spec import parse_study_dict
        import tomllib

        if self.plan is not None:
            return self.plan.spec
        sp = self.attrs.get("study_path") or ""
        base = os.path.dirname(sp) if sp else "."
        return parse_study_dict(tomllib.loads(self.study_text or ""), source=sp or "study", base_dir=base)

    def context(self):
        """``(kind, plan, arm, cell)`` rebuilt from the texts stored in the file (the arm and cell
        files need not exist any more); ``plan`` has this file's chunking. Use it to turn cells
        into poses (``kind.cell_poses(plan, flat_index, arrays)``)."""
        from .kinematics import Arm
        from .studies.base import get_kind

        spec = self.spec()
        kind = get_kind(self.kind)
        where = self.path or "results"
        if not self.arm_text:
            raise ResultsError(f"{where}: holds no arm file text")
        arm_name = self.attrs.get("arm_path") or "arm"
        if arm_name.lower().endswith((".urdf", ".xml")):
            from .arm.urdf import parse_urdf_text

            model = parse_urdf_text(self.arm_text, arm_name, spec.base_link, spec.tip_link)
        else:
            from .arm import parse_arm_text

            model = parse_arm_text(self.arm_text, arm_name)
        arm = Arm(model)
        cell = None
        if self.cell_text:
            from .studies.cell import parse_cell_text

            cell = parse_cell_text(self.cell_text, self.attrs.get("cell_path") or "cell")
        plan = self.plan or kind.plan(spec, arm, cell, chunk_cells=self.chunk_cells)
        return kind, plan, arm, cell

    def measure_names(self) -> list[str]:
        """Scalar fields that can be drawn as maps."""
        return [f.name for f in self.fields if f.kind == "measure" and f.shape == ()]


# ----------------------------------------------------------------------------------------------
# writers


def check_output_path(path) -> str:
    """Check that ``path`` can take a results file: not a directory, its folder exists and is
    writable. Returns the absolute path; raises :class:`ResultsError` otherwise."""
    p = os.path.abspath(os.fspath(path))
    if os.path.isdir(p):
        raise ResultsError(f"--out {path}: is a directory; expected a results file name such as "
                           f"{os.path.join(os.fspath(path), 'results.h5')}")
    check_folder_takes_files(os.path.dirname(p), f"--out {path}")
    if os.path.exists(p) and not os.access(p, os.W_OK):
        raise ResultsError(f"--out {path}: file exists and is not writable")
    return p


def check_folder_takes_files(folder, label, error=ResultsError) -> None:
    """Raise ``error("<label>: ...")`` unless ``folder`` exists and new files can be created in it
    (tried for real with a probe file: access() says yes to root everywhere). Leaves nothing."""
    if not os.path.isdir(folder):
        raise error(f"{label}: folder {folder} does not exist")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise error(f"{label}: folder {folder} is not writable")
    try:
        fd, probe = tempfile.mkstemp(prefix=".~probe", dir=folder)
        os.close(fd)
        os.unlink(probe)
    except OSError as exc:
        raise error(f"{label}: cannot create files in {folder} ({exc.strerror})") from None


def _largest_divisor_at_most(n: int, cap: int) -> int:
    cap = max(1, min(n, cap))
    for d in range(cap, 0, -1):
        if n % d == 0:
            return d
    return 1


def _texts(texts):
    texts = dict(texts or {})
    return texts.get("study"), texts.get("arm"), texts.get("cell")


class _WriterBase:
    def __init__(self, plan: Plan, texts=None, attrs=None):
        self.plan = plan
        self.study_text, self.arm_text, self.cell_text = _texts(texts)
        self.finished = np.zeros(plan.n_chunks, dtype=bool)
        self.attrs = dict(attrs or {})
        self.attrs.setdefault("created", _now())

    def _root_attrs(self, incomplete, extra):
        from . import __version__

        p = self.plan
        a = {"schema_version": SCHEMA_VERSION, "format": FORMAT, "software": "manipulability-workbench",
             "software_version": __version__, "kind": p.kind, "name": getattr(p.spec, "name", "") or p.kind,
             "cells": p.cells, "grid_shape": np.asarray(p.shape, dtype=np.int64), "chunk_cells": p.chunk_cells,
             "incomplete": bool(incomplete), "chunks_done": int(self.finished.sum()),
             "chunks_total": int(p.n_chunks), "finished": _now()}
        src = getattr(p.spec, "source", None)
        a["study_path"] = os.path.abspath(src) if src else ""
        a["arm_path"] = getattr(p.spec, "arm_path", "") or ""
        a["cell_path"] = getattr(p.spec, "cell_path", "") or ""
        a.update(self.attrs)
        a.update(extra or {})
        return a


    def _results(self, flat_arrays, incomplete, tables, attrs, path=None) -> Results:
        p = self.plan
        arrays = {f.name: flat_arrays[f.name].reshape(p.shape + f.shape) for f in p.fields}
        return Results(kind=p.kind, name=attrs["name"], axes=p.axes, fields=p.fields, arrays=arrays,
                       finished=self.finished.copy(), chunk_cells=p.chunk_cells, incomplete=bool(incomplete),
                       tables=dict(tables or {}), study_text=self.study_text, arm_text=self.arm_text,
                       cell_text=self.cell_text, attrs=attrs, path=path, plan=p)


def _remove_stale_partials(folder: str, base: str) -> None:
    """Delete ``.BASE.PID.partial`` files left by killed runs (their process no longer exists)."""
    prefix, suffix = f".{base}.", ".partial"
    try:
        names = os.listdir(folder)
    except OSError:
        return
    for name in names:
        if not (name.startswith(prefix) and name.endswith(suffix)):
            continue
        pid = name[len(prefix):-len(suffix)]
        if not pid.isdigit() or int(pid) == os.getpid():
            continue
        try:
            os.kill(int(pid), 0)
            continue  # still running: not ours to touch
        except ProcessLookupError:
            pass
        except (PermissionError, OSError):
            continue
        try:
            os.unlink(os.path.join(folder, name))
        except OSError:
            pass


def _fill_unfinished(plan, finished, arrays):
    """Set the cells of unfinished chunks to each field's fill value (arrays are allocated empty)."""
    if finished.all():
        return
    for i in np.flatnonzero(~finished):
        c = plan.chunk(int(i))
        for f in plan.fields:
            arrays[f.name][c.start:c.stop] = f.fill


class MemoryWriter(_WriterBase):
    """Collects chunks in memory; :meth:`close` returns :class:`Results`."""

    def __init__(self, plan: Plan, texts=None, attrs=None):
        super().__init__(plan, texts, attrs)
        self.arrays = {f.name: f.empty(plan.cells) for f in plan.fields}

    def write_chunk(self, chunk, arrays) -> None:
        for f in self.plan.fields:
            self.arrays[f.name][chunk.start:chunk.stop] = arrays[f.name]
        self.finished[chunk.index] = True

    def close(self, incomplete: bool, tables=None, attrs=None) -> Results:
        return self._results(self.arrays, incomplete, tables, self._root_attrs(incomplete, attrs))

    def abort(self) -> None:
        self.arrays = {}

    def full_arrays(self) -> dict:
        return self.arrays


class ResultsWriter(_WriterBase):
    """Streams chunks into an HDF5 file under a temporary name; :meth:`close` renames it.

    Parameters
    ----------
    path : str
        Final file name.
    plan : Plan
    texts : dict
        ``{"study": str, "arm": str, "cell": str or None}`` input file texts.
    compression : str or None
        One of :data:`COMPRESSIONS`: "lz4" (Blosc LZ4 + byte shuffle; fast, default), "lzf"
        (h5py's filter, after shuffle), "gzip" (level 1 after shuffle; readable by any HDF5 tool)
        or None.
    mirror_bytes : int
        Keep a copy of the arrays in memory when the results are at most this big.
    """

    def __init__(self, path, plan: Plan, texts=None, attrs=None, compression="lz4", mirror_bytes=MIRROR_BYTES):
        h5py = _h5py()

        super().__init__(plan, texts, attrs)
        if compression not in COMPRESSIONS:
            raise ResultsError(f"compression: expected one of 'lz4', 'lzf', 'gzip' or none, got {compression!r}")
        # small results are also kept in memory: summaries and the returned Results need no re-read
        self.mirror = ({f.name: np.empty((plan.cells,) + f.shape, f.dtype) for f in plan.fields}
                       if plan.result_bytes <= mirror_bytes else None)
        self.path = check_output_path(path)
        folder, base = os.path.split(self.path)
        _remove_stale_partials(folder, base)
        self.tmp = os.path.join(folder, f".{base}.{os.getpid()}.partial")
        self.h5 = None
        self.chunks_written = 0
        try:
            # no chunk cache: every finished chunk is compressed and written at once by the writer
            # thread (overlapping compute) instead of piling up for a long flush at close
            self.h5 = h5py.File(self.tmp, "w", rdcc_nbytes=0)
            self._fd = _vfd_handle(self.h5)
        except OSError as exc:
            self.abort()  # HDF5 may have created the file before failing
            raise ResultsError(f"--out {path}: cannot create a file in {folder or '.'} ({_os_reason(exc)})") from None
        # the disk space of the whole file is reserved before anything is written, so a disk that
        # fills up during the run (another program writing) cannot make HDF5 fail half-way
        self.reserved = reserve_bytes(plan) + sum(len(t.encode('utf-8')) for t in (self.study_text, self.arm_text, self.cell_text)
                                                  if isinstance(t, str))
        err = _reserve(self._fd, self.reserved)
        if err:
            self.abort()
            raise ResultsError(f"--out {path}: the disk is full ({os.strerror(err)} in {folder or '.'}): "
                               f"the results need up to {_fmt_mb(self.reserved)} and that much could not be "
                               f"reserved; free some space or choose another folder, then run again")
        try:
            self._layout(compression)
        except OSError as exc:
            self.abort()
            raise self._write_error(exc, "creating the file") from None
        except BaseException:
            self.abort()
            raise

    def _write_error(self, exc, when) -> ResultsError:
        """One line for a failed write: the disk filling up mid-run is the usual cause."""
        folder = os.path.dirname(self.path) or "."
        reason = _os_reason(exc)
        if _is_disk_full(exc):
            return ResultsError(f"--out {self.path}: the disk is full ({reason} in {folder}) while {when}; "
                                f"nothing was kept; free some space or choose another folder, then run again")
        return ResultsError(f"--out {self.path}: writing failed ({reason}) while {when}; nothing was kept")

    def _layout(self, compression):
        p, h = self.plan, self.h5
        str_dt = __import__("h5py").string_dtype("utf-8")
        g = h.create_group("inputs")
        for key, text in (("study", self.study_text), ("arm", self.arm_text), ("cell", self.cell_text)):
            if text is not None:
                g.create_dataset(key, data=text, dtype=str_dt)
        ga = h.create_group("axes")
        ga.attrs["order"] = json.dumps([a.name for a in p.axes])
        for i, a in enumerate(p.axes):
            ds = ga.create_dataset(a.name, data=a.values)
            ds.attrs.update(unit=a.unit, display_unit=a.display_unit, label=a.label, order=i)
        gf = h.create_group("fields")
        gf.attrs["order"] = json.dumps([f.name for f in p.fields])
        cells = max(1, p.cells)
        kw = _filter_kw(compression)
        self.ds = {}
        for f in p.fields:
            per = max(1, f.cell_bytes)
            cap = max(1, H5_CHUNK_BYTES // per)
            c = _largest_divisor_at_most(p.chunk_cells, cap) if p.chunk_cells > cap else p.chunk_cells
            c = max(1, min(c, cells))
            ds = gf.create_dataset(f.name, shape=(p.cells,) + f.shape, dtype=f.dtype, chunks=(c,) + f.shape,
                                   fillvalue=f.fill, **kw)
            ds.attrs.update(unit=f.unit, description=f.description, kind=f.kind,
                            flags=json.dumps({str(k): v for k, v in f.flags.items()}))
            ds.attrs["fill"] = np.asarray(f.fill, dtype=f.dtype)
            self.ds[f.name] = ds
        self.fin = h.create_group("chunks").create_dataset("finished", data=self.finished)
        for k, v in self._root_attrs(True, None).items():
            h.attrs[k] = v

    def write_chunk(self, chunk, arrays) -> None:
        """Write one chunk's arrays ``{field: (chunk.size, *shape)}`` and mark it finished."""
        try:
            for f in self.plan.fields:
                self.ds[f.name][chunk.start:chunk.stop] = arrays[f.name]
                if self.mirror is not None:
                    self.mirror[f.name][chunk.start:chunk.stop] = arrays[f.name]
            self.fin[chunk.index] = True
        except OSError as exc:
            raise self._write_error(exc, f"writing chunk {chunk.index + 1} of {self.plan.n_chunks} "
                                         f"({self.chunks_written} written)") from None
        self.finished[chunk.index] = True
        self.chunks_written += 1

    def full_arrays(self):
        """The arrays written so far (flattened) when they are kept in memory; None otherwise.
        Cells of unfinished chunks hold the fill value."""
        if self.mirror is not None:
            _fill_unfinished(self.plan, self.finished, self.mirror)
        return self.mirror

    def close(self, incomplete: bool, tables=None, attrs=None):
        """Write tables and attributes, close and rename onto the final name.

        Returns :class:`Results` (arrays from memory) when the arrays were kept in memory, else
        the path (read it with :func:`read_results`)."""
        h = self.h5
        root = self._root_attrs(incomplete, attrs)
        try:
            if tables:
                gt = h.create_group("tables")
                for name, t in tables.items():
                    g = gt.create_group(name)
                    g.attrs.update(title=t.title, description=t.description,
                                   columns=json.dumps(list(t.columns)), units=json.dumps(t.units))
                    for col, v in t.columns.items():
                        a = np.asarray(v)
                        if a.dtype.kind in "OUS":  # text columns
                            a = np.array(["" if x is None else (x.decode("utf-8") if isinstance(x, bytes)
                                                                  else str(x)) for x in a.reshape(-1)],
                                         dtype=object)
                            g.create_dataset(col, data=a, dtype=__import__("h5py").string_dtype("utf-8"))
                        else:
                            g.create_dataset(col, data=a)
            for k, v in root.items():
                h.attrs[k] = v
            h.close()
            self._fd = None  # closed: the descriptor number may now belong to another file
            if self.reserved:  # give back the reserved space the file did not use
                os.truncate(self.tmp, os.stat(self.tmp).st_size)
        except OSError as exc:
            self.abort()
            raise self._write_error(exc, "closing the file (summary tables and attributes)") from None
        except BaseException:
            self.abort()
            raise
        try:
            os.replace(self.tmp, self.path)
        except OSError as exc:
            self.abort()
            raise self._write_error(exc, f"renaming {os.path.basename(self.tmp)} onto the final name") from None
        if self.mirror is None:
            return self.path
        _fill_unfinished(self.plan, self.finished, self.mirror)
        return self._results(self.mirror, incomplete, tables, root, path=self.path)

    def abort(self) -> None:
        """Delete the temporary file and close it (nothing appears under the final name).

        Safe when the disk is full: the name goes first, then the open file's descriptor is pointed
        at an in-memory file, so whatever HDF5 still flushes on close lands there and the close
        succeeds (a close that fails leaves HDF5 objects open, and h5py's clean-up of them at exit
        has ended the process with a segmentation fault)."""
        try:
            os.unlink(self.tmp)
        except OSError:
            pass
        h5, self.h5 = getattr(self, "h5", None), None
        if h5 is None:
            return
        # the descriptor was taken when the file was opened: after a failed close h5py can no longer
        # give it, but the HDF5 objects still open (datasets, groups) flush through it when freed
        _discard_writes(getattr(self, "_fd", None))
        self.ds, self.fin = {}, None
        try:
            h5.close()
        except Exception:
            pass
        del h5
        import gc

        gc.collect()  # free the remaining HDF5 objects now, while the descriptor points at memory


_HELD_LOCKS: dict = {}


class OutputLock:
    """One run at a time per results file: ``.NAME.lock`` beside it holds the owner's pid, start
    time, host and start of the run (JSON). A second run on the same file is refused with one
    line while the owner runs; a lock whose owner is gone (killed, crashed) is stale and taken
    over. Re-entrant within a process (the command line takes it before calibrating, the runner
    again around the run). Use as a context manager or :meth:`acquire` / :meth:`release`."""

    def __init__(self, path):
        self.path = os.path.abspath(os.fspath(path))
        folder, base = os.path.split(self.path)
        self.lock = os.path.join(folder, f".{base}.lock")

    def __enter__(self):
        return self.acquire()

    def __exit__(self, *exc):
        self.release()
        return False

    def acquire(self) -> "OutputLock":
        from .procs import is_alive, process_identity

        if self.lock in _HELD_LOCKS:
            _HELD_LOCKS[self.lock] += 1
            return self
        pid, started = process_identity()
        me = {"pid": pid, "started": started, "host": _hostname(), "since": _now()}
        for _ in range(5):
            try:
                fd = os.open(self.lock, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
            except FileExistsError:
                other = _read_lock(self.lock)
                if other is None:  # being written by its owner right now, or unreadable
                    time.sleep(0.05)
                    other = _read_lock(self.lock)
                if other is not None and other.get("host") not in (None, me["host"]):
                    raise ResultsError(f"--out {self.path}: another run on host {other.get('host')} "
                                       f"(pid {other.get('pid')}, since {other.get('since')}) writes this file; "
                                       f"wait for it or choose another --out (if that run is gone, "
                                       f"delete {self.lock})") from None
                if other is not None and is_alive(other.get("pid", -1), other.get("started")):
                    raise ResultsError(f"--out {self.path}: another run (pid {other.get('pid')}, since "
                                       f"{other.get('since')}) is writing this file; wait for it to finish "
                                       f"or choose another --out") from None
                try:  # stale: its owner is gone
                    os.unlink(self.lock)
                except FileNotFoundError:
                    pass
                except OSError as exc:
                    raise ResultsError(f"--out {self.path}: cannot remove the stale lock {self.lock} "
                                       f"({_os_reason(exc)})") from None
                continue
            except OSError as exc:
                if _is_disk_full(exc):
                    raise ResultsError(f"--out {self.path}: the disk is full ({_os_reason(exc)} in "
                                       f"{os.path.dirname(self.path)}); nothing was written") from None
                raise ResultsError(f"--out {self.path}: cannot create a file in {os.path.dirname(self.path)} "
                                   f"({_os_reason(exc)})") from None
            try:
                os.write(fd, json.dumps(me).encode("utf-8"))
            except OSError as exc:
                os.close(fd)
                try:
                    os.unlink(self.lock)
                except OSError:
                    pass
                raise ResultsError(f"--out {self.path}: cannot write the lock file {self.lock} "
                                   f"({_os_reason(exc)})") from None
            os.close(fd)
            _HELD_LOCKS[self.lock] = 1
            return self
        raise ResultsError(f"--out {self.path}: the lock file {self.lock} keeps changing; another run "
                           f"is starting on this file")

    def release(self) -> None:
        n = _HELD_LOCKS.get(self.lock, 0)
        if n > 1:
            _HELD_LOCKS[self.lock] = n - 1
            return
        _HELD_LOCKS.pop(self.lock, None)
        if n == 1:
            info = _read_lock(self.lock)
            if info is not None and info.get("pid") == os.getpid():
                try:
                    os.unlink(self.lock)
                except OSError:
                    pass


def _hostname() -> str:
    import socket

    try:
        return socket.gethostname()
    except OSError:  # pragma: no cover
        return ""


def _read_lock(path):
    try:
        with open(path, encoding="utf-8") as fh:
            info = json.loads(fh.read())
        return info if isinstance(info, dict) else None
    except (OSError, ValueError):
        return None


def _os_reason(exc: BaseException) -> str:
    """The system's one-line reason for an OSError (HDF5's messages span several lines)."""
    no = getattr(exc, "errno", None)
    if isinstance(no, int) and no > 0:
        return os.strerror(no)
    text = " ".join(str(exc).split())
    return text[:200] if text else type(exc).__name__


def _is_disk_full(exc: BaseException) -> bool:
    import errno

    no = getattr(exc, "errno", None)
    return no in (errno.ENOSPC, errno.EDQUOT) or "No space left" in str(exc)


#: disk space reserved on top of the raw size of the results (metadata, summary tables, the
#: few bytes a compressor adds to data it cannot shrink)
RESERVE_EXTRA_BYTES = 2 << 20
RESERVE_EXTRA_FRACTION = 0.02


def reserve_bytes(plan) -> int:
    """Disk space (bytes) reserved for a results file of ``plan``: its raw (uncompressed) arrays,
    the texts it keeps, 2 % and 2 MiB more."""
    raw = int(getattr(plan, "result_bytes", 0) or 0)
    return int(raw * (1 + RESERVE_EXTRA_FRACTION)) + RESERVE_EXTRA_BYTES


def _fmt_mb(n) -> str:
    from .studies.base import _fmt_bytes

    return _fmt_bytes(n)


def _reserve(fd, nbytes) -> int:
    """Reserve ``nbytes`` of disk for the open file ``fd`` without changing its size (Linux
    ``fallocate`` with FALLOC_FL_KEEP_SIZE). Returns 0, or the errno of a full disk or quota;
    file systems or systems that cannot reserve are left as they are (0)."""
    import errno

    if fd is None or nbytes <= 0 or not sys.platform.startswith("linux"):
        return 0
    try:
        import ctypes
        import ctypes.util

        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6", use_errno=True)
        fallocate = libc.fallocate
        fallocate.argtypes = [ctypes.c_int, ctypes.c_int, ctypes.c_longlong, ctypes.c_longlong]
        fallocate.restype = ctypes.c_int
    except (OSError, AttributeError):  # pragma: no cover - no libc fallocate
        return 0
    if fallocate(int(fd), 1, 0, int(nbytes)) == 0:  # 1 = FALLOC_FL_KEEP_SIZE
        return 0
    err = ctypes.get_errno()
    return err if err in (errno.ENOSPC, errno.EDQUOT) else 0


def _vfd_handle(h5):
    """The operating-system descriptor under an open HDF5 file (None when the driver has none)."""
    try:
        fd = h5.id.get_vfd_handle()
    except Exception:
        return None
    return fd if isinstance(fd, int) and fd >= 0 else None


def _discard_writes(fd) -> None:
    """Point the descriptor ``fd`` of an open HDF5 file at an anonymous in-memory file (Linux
    ``memfd``; a temporary file elsewhere) so that closing it writes nowhere on the full disk."""
    try:
        if not isinstance(fd, int) or fd < 0:
            return
        if hasattr(os, "memfd_create"):
            spare = os.memfd_create("workbench-discard")
        else:  # pragma: no cover - not Linux
            spare, name = tempfile.mkstemp()
            os.unlink(name)
        try:
            os.dup2(spare, fd)
        finally:
            os.close(spare)
    except Exception:
        pass


# ----------------------------------------------------------------------------------------------
# reading


def _attr(v):
    if isinstance(v, bytes):
        return v.decode("utf-8")
    if isinstance(v, np.generic):
        return v.item()
    return v


class LazyArrays(Mapping):
    """``{field: array}`` read from a results file on first access (and kept), for results too big
    to load at once; each array is (*grid shape, *per-cell shape) like :attr:`Results.arrays`."""

    def __init__(self, path: str, shape: tuple, fields: tuple):
        self.path = path
        self.shape = tuple(shape)
        self.fields = {f.name: f for f in fields}
        self._cache: dict = {}

    def __getitem__(self, name):
        if name not in self.fields:
            raise KeyError(name)
        if name not in self._cache:
            with _h5py().File(self.path, "r") as h:
                self._cache[name] = h["fields"][name][...].reshape(self.shape + self.fields[name].shape)
        return self._cache[name]

    def __iter__(self):
        return iter(self.fields)

    def __len__(self):
        return len(self.fields)


def read_results(path, load: bool = True) -> Results:
    """Read a results file back into :class:`Results` (arrays in the grid shape; with
    ``load=False`` each array is read from the file when first used).

    Raises
    ------
    ResultsError
        Missing file, not HDF5, not a results file, or a newer schema version.
    """
    h5py = _h5py()

    if not isinstance(path, (str, os.PathLike)):
        raise ResultsError(f"path: expected a results file path (.h5), got {type(path).__name__} {path!r}")
    path = os.fspath(path)
    if not os.path.exists(path):
        raise ResultsError(f"{path}: no such file")
    if os.path.isdir(path):
        raise ResultsError(f"{path}: is a directory, expected a results file (.h5)")
    try:
        h = h5py.File(path, "r")
    except OSError:
        raise ResultsError(f"{path}: not an HDF5 results file") from None
    try:
        return _read_open(h, path, load)
    except ResultsError:
        raise
    except (KeyError, ValueError, TypeError, IndexError, AttributeError, OSError) as exc:
        detail = " ".join(str(exc.args[0] if isinstance(exc, KeyError) and exc.args else exc).split())
        raise ResultsError(f"{path}: damaged results file ({detail}); expected the layout of results schema "
                           f"version {SCHEMA_VERSION}; run the study again") from None


def _read_open(h, path, load):
    import h5py

    with h:
        if _attr(h.attrs.get("format")) != FORMAT:
            raise ResultsError(f"{path}: not a workbench results file (no format attribute {FORMAT!r})")
        ver = int(h.attrs.get("schema_version", 0))
        if ver > SCHEMA_VERSION:
            raise ResultsError(f"{path}: schema version {ver} is newer than this software reads "
                               f"({SCHEMA_VERSION}); update the workbench")
        attrs = {k: _attr(v) for k, v in h.attrs.items()}
        shape = tuple(int(s) for s in np.asarray(h.attrs["grid_shape"]).reshape(-1))
        order = json.loads(_attr(h["axes"].attrs["order"]))
        axes = []
        for name in order:
            ds = h["axes"][name]
            axes.append(Axis(name, ds[...], _attr(ds.attrs["unit"]), _attr(ds.attrs["label"]),
                             _attr(ds.attrs["display_unit"])))
        fields, arrays = [], {}
        for name in json.loads(_attr(h["fields"].attrs["order"])):
            ds = h["fields"][name]
            flags = {int(k): v for k, v in json.loads(_attr(ds.attrs["flags"])).items()}
            f = Field(name, ds.shape[1:], ds.dtype.name, _attr(ds.attrs["unit"]), _attr(ds.attrs["description"]),
                      fill=_attr(ds.attrs["fill"]), kind=_attr(ds.attrs["kind"]), flags=flags)
            fields.append(f)
            if load:
                arrays[name] = ds[...].reshape(shape + f.shape)
        if not load:
            arrays = LazyArrays(os.path.abspath(path), shape, tuple(fields))
        texts = {}
        for key in ("study", "arm", "cell"):
            if key in h["inputs"]:
                v = h["inputs"][key][()]
                texts[key] = v.decode("utf-8") if isinstance(v, bytes) else str(v)
        tables = {}
        if "tables" in h:
            for name, g in h["tables"].items():
                cols = {c: (g[c].asstr()[...] if h5py.check_string_dtype(g[c].dtype) else g[c][...])
                        for c in json.loads(_attr(g.attrs["columns"]))}
                tables[name] = Table(_attr(g.attrs["title"]), cols, json.loads(_attr(g.attrs["units"])),
                                     _attr(g.attrs.get("description", "")))
        finished = h["chunks"]["finished"][...].astype(bool)
    return Results(kind=attrs["kind"], name=attrs["name"], axes=tuple(axes), fields=tuple(fields), arrays=arrays,
                   finished=finished, chunk_cells=int(attrs["chunk_cells"]), incomplete=bool(attrs["incomplete"]),
                   tables=tables, study_text=texts.get("study"), arm_text=texts.get("arm"),
                   cell_text=texts.get("cell"), attrs=attrs, path=os.path.abspath(path))


# ----------------------------------------------------------------------------------------------
# exports


# file name endings the exports accept (the content is always PNG / CSV)
EXPORT_EXTENSIONS = {"--png": (".png",), "--csv": (".csv",)}


def check_export_target(path, what, source=None) -> str:
    """Check that an export (``what`` = "--png" or "--csv") can be written at ``path``: the name
    ends in the right extension, it is not a directory nor the results file ``source`` itself, and
    its folder exists and takes new files. Returns the absolute path; raises
    :class:`ResultsError` naming the option, the path and what is expected. Writes nothing."""
    p = os.path.abspath(os.fspath(path))
    if os.path.isdir(p):
        raise ResultsError(f"{what} {path}: is a directory; expected a file name")
    exts = EXPORT_EXTENSIONS.get(what)
    if exts and os.path.splitext(p)[1].lower() not in exts:
        raise ResultsError(f"{what} {path}: expected a file name ending in {' or '.join(exts)}, got "
                           f"{os.path.splitext(p)[1] or 'no extension'}")
    if source is not None and os.path.realpath(p) == os.path.realpath(os.fspath(source)):
        raise ResultsError(f"{what} {path}: is the results file being exported; expected another file name")
    check_folder_takes_files(os.path.dirname(p), f"{what} {path}")
    return p


def _atomic_target(path, what, source=None):
    p = check_export_target(path, what, source)
    return p, os.path.join(os.path.dirname(p), f".{os.path.basename(p)}.{os.getpid()}.partial")


def _replace_or_clean(tmp, final):
    try:
        os.replace(tmp, final)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


#: the table ``export_csv`` writes when none is named, first present wins: the near-singular poses
#: (joint sweep, path audit), the mount ranking, the reached points closest to a singularity (reach slice)
DEFAULT_TABLES = ("near_singular", "ranking", "worst")


def export_csv(results: Results, path, table: str | None = None, max_rows: int = 1_000_000) -> int:
    """Write a pose list as CSV (joint values in degrees / mm, measures); returns the row count.

    ``table`` names a summary table (default: the first of ``DEFAULT_TABLES`` present, else the
    first one);
    ``table="cells"`` (or a study without tables) writes every finished cell: the axis values in
    display units and every scalar field (up to ``max_rows`` rows).
    """
    final, tmp = _atomic_target(path, "--csv", results.path)
    if table is None:  # the study's main pose list, not whichever table sorts first
        table = next((t for t in DEFAULT_TABLES if t in results.tables), next(iter(results.tables), "cells"))
    if table == "cells":
        cols, units = _cell_columns(results, max_rows)
    else:
        if table not in results.tables:
            raise ResultsError(f"--table {table}: no such table in {results.path or 'the results'}; tables are "
                               f"{', '.join(list(results.tables) + ['cells'])}")
        t = results.tables[table]
        cols, units = t.columns, t.units
    names = list(cols)
    header = [f"{c} [{units.get(c)}]" if units.get(c) else c for c in names]
    n = len(cols[names[0]]) if names else 0
    fmts = [_csv_formatter(np.asarray(cols[c])) for c in names]
    try:
        import csv

        with open(tmp, "w", encoding="utf-8", newline="") as fh:
            w = csv.writer(fh, lineterminator="\n")
            w.writerow(header)
            arrays = [np.asarray(cols[c]) for c in names]
            for i in range(n):
                w.writerow([f(a[i]) for f, a in zip(fmts, arrays)])
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    _replace_or_clean(tmp, final)
    return n


def _csv_formatter(a: np.ndarray):
    if a.dtype.kind in "iub":
        return lambda v: str(int(v))
    if a.dtype.kind == "f":
        return lambda v: "%.10g" % v
    return lambda v: v.decode("utf-8") if isinstance(v, bytes) else str(v)


def _cell_columns(results, max_rows):
    done = results.done_mask().reshape(-1)
    idx = np.flatnonzero(done)
    if idx.size > max_rows:
        raise ResultsError(f"--csv: {idx.size:,} cells is more than {max_rows:,} rows; export a table instead")
    cols, units = {"cell": idx}, {"cell": ""}
    if results.shape and len(results.axes) >= 1 and results.axes[0].name != "sample":
        sub = np.unravel_index(idx, results.shape)
        for a, i in zip(results.axes, sub):
            cols[a.name] = a.display_values()[i]
            units[a.name] = a.display_unit
    for f in results.fields:
        if f.shape == () and f.kind in ("measure", "status"):
            cols[f.name] = results.flat(f.name)[idx]
            units[f.name] = f.unit
        elif f.kind == "point" and f.shape == (3,):
            v = results.flat(f.name)[idx]
            for j, c in enumerate("xyz"):
                cols[f"{f.name}_{c}"] = v[:, j]
                units[f"{f.name}_{c}"] = "m"
    return cols, units


def recommended_mount(results: Results) -> dict | None:
    """The mount search's recommended mount as stored (table ``recommended``), or None.

    Returns
    -------
    dict with ``x``, ``y``, ``height`` (m), ``yaw``, ``tilt`` (rad) in the cell frame, ``style``,
    ``rank_value``, ``score`` (quality), ``served``, ``points``, ``source`` ("refined" or "grid"),
    ``grid_x``, ``grid_y`` (m), ``grid_yaw`` (rad), ``grid_rank_value``, ``map_best`` (bool: the grid
    cell it comes from is the map's best).
    """
    t = results.tables.get("recommended")
    if t is None or not t.rows:
        return None

    def val(k, scale=1.0):
        v = t.columns[k][0]
        if isinstance(v, bytes):
            return v.decode()
        if isinstance(v, str):
            return v
        return float(v) * scale

    out = {k: val(k, 1e-3) for k in ("x", "y", "height", "grid_x", "grid_y") if k in t.columns}
    out.update({k: val(k, math.pi / 180) for k in ("yaw", "tilt", "grid_yaw") if k in t.columns})
    out.update({k: val(k) for k in ("style", "rank_value", "score", "served", "points", "source", "grid_rank_value")
                if k in t.columns})
    out["map_best"] = bool(val("map_best")) if "map_best" in t.columns else True
    return out


def _mark_recommended(ax, results, ax_x) -> None:
    """Star and label the recommended mount on a floor map (x, y axes), and the grid cell it was
    refined from when that differs."""
    rec = recommended_mount(results)
    if rec is None:
        return
    from .studies.base import display_factor

    k = display_factor(ax_x.unit, ax_x.display_unit)
    unit = ax_x.display_unit or "m"
    u = 1000.0 if unit == "m" else 1.0  # label in mm
    ax.plot([rec["x"] * k], [rec["y"] * k], marker="*", ms=16, mec="k", mfc="white", ls="none", zorder=9,
            label=f"recommended mount ({rec['x'] * k * u:.0f}, {rec['y'] * k * u:.0f} mm)")
    if rec.get("source") == "refined" and "grid_x" in rec:
        ax.plot([rec["grid_x"] * k], [rec["grid_y"] * k], marker="s", ms=9, mec="k", mfc="none", mew=1.5, ls="none",
                zorder=8, label="grid cell it was refined from" + ("" if rec["map_best"] else " (not the map's best)"))
    rk = results.tables.get("ranking")
    if rk is not None and rk.rows and not rec["map_best"]:
        ax.plot([float(rk.columns["x"][0]) / 1000 * k], [float(rk.columns["y"][0]) / 1000 * k], marker="D", ms=8,
                mec="k", mfc="none", mew=1.5, ls="none", zorder=8, label="map's best cell (grid rank 1)")
    ax.legend(loc="upper right", fontsize=8, framealpha=0.85)


def export_png(results: Results, path, measure: str | None = None, dpi: int = 120) -> str:
    """Draw a map of ``measure`` as a PNG with a colour bar and axes in degrees or metres.

    Default measure: the inverse condition (or its mean over reduced joints), else the first map.
    Axes with one value are dropped; two or more axes give a heat map of the last two (further
    axes are reduced to the best value over them: the maximum, or the minimum for a condition
    number, as the title says); one axis gives a line plot; random samples and path samples a
    scatter of their positions (x, y) coloured by the measure, or a histogram without positions.
    Returns the written path."""
    final, tmp = _atomic_target(path, "--png", results.path)
    names = results.measure_names()
    if measure is None:
        for cand in ("inverse_condition", "inverse_condition_mean", "inverse_condition_min"):
            if cand in names:
                measure = cand
                break
        else:
            measure = names[0] if names else None
    if measure not in names:
        raise ResultsError(f"--measure {measure}: not a map of these results; expected one of {', '.join(names)}")
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    v = np.asarray(results.arrays[measure], dtype=float)
    fig = Figure(figsize=(7, 5.5), dpi=dpi)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot(1, 1, 1)
    title = f"{results.name}: {measure}"
    if results.incomplete:
        title += " (incomplete run)"

    def lab(a):
        return f"{a.label} [{a.display_unit}]" if a.display_unit else a.label

    finite = v[np.isfinite(v)]
    # label, unit and which way is better: the quantity registry (workbench/quantities.py)
    from . import quantities

    fld = next((f for f in results.fields if f.name == measure), None)
    mlabel = quantities.axis_label(measure, unit=fld.unit if fld is not None else None, log=False)
    worse_high = quantities.better(measure) == "lower"
    vmax = float(np.percentile(finite, 99.5)) if finite.size and worse_high else None
    axes = list(results.axes)
    if axes and axes[0].name == "sample" and len(axes) == 1:
        pts = next((results.flat(f.name) for f in results.fields if f.kind == "point" and f.shape == (3,)), None)
        if pts is not None:
            ok = np.isfinite(v)
            sc = ax.scatter(pts[ok, 0], pts[ok, 1], c=v[ok], s=2, cmap="viridis", vmax=vmax)
            ax.set_xlabel("x [m]")
            ax.set_ylabel("y [m]")
            ax.set_aspect("equal", adjustable="datalim")
            fig.colorbar(sc, ax=ax, label=mlabel)
        else:
            ax.hist(finite, bins=100)
            ax.set_xlabel(mlabel)
            ax.set_ylabel("samples")
    else:
        keep = [i for i, a in enumerate(axes) if a.size > 1]
        fixed = [f"{a.label} = {a.display_values()[0]:.4g} {a.display_unit}".rstrip()
                 for a in axes if a.size == 1]
        v = v.reshape([a.size for a in axes if a.size > 1]) if keep else v.reshape(1)
        axes = [axes[i] for i in keep]
        if len(axes) > 2:
            extra = tuple(range(len(axes) - 2))
            with np.errstate(all="ignore"), __import__("warnings").catch_warnings():
                __import__("warnings").simplefilter("ignore", RuntimeWarning)
                v = np.nanmin(v, axis=extra) if worse_high else np.nanmax(v, axis=extra)
            fixed.append(f"best ({'min' if worse_high else 'max'}) over "
                         + ", ".join(a.label for a in axes[:-2]))
            axes = axes[-2:]
        if fixed:
            title += "\n" + "; ".join(fixed)
        if len(axes) == 0:
            ax.bar([0], [float(v.reshape(-1)[0])])
            ax.set_ylabel(mlabel)
        elif len(axes) == 1:
            ax.plot(axes[0].display_values(), v)
            ax.set_xlabel(lab(axes[0]))
            ax.set_ylabel(mlabel)
        else:
            a0, a1 = axes
            x, y = a0.display_values(), a1.display_values()
            dy, dx = (y[-1] - y[0]) / (y.size - 1), (x[-1] - x[0]) / (x.size - 1)  # cell centres on the values
            ext = [y[0] - dy / 2, y[-1] + dy / 2, x[0] - dx / 2, x[-1] + dx / 2]
            cmap, vmin, extend, cblabel = "viridis", None, "neither", mlabel
            fin = np.isfinite(v)
            if measure == "rank_value" and fin.any():
                # the colours span the candidates serving the most work points; fewer: grey
                import matplotlib

                top = math.floor(float(np.nanmax(v)))
                if (v[fin] < top).any() and float(np.nanmax(v)) > top:
                    cmap = matplotlib.colormaps["viridis"].with_extremes(under="#d9d9d9")
                    vmin, extend = float(top), "min"
                    cblabel = f"rank_value = {top} + Q / (1 + Q) (grey: fewer than {top} work points served)"
            im = ax.imshow(v, origin="lower", aspect="auto", extent=ext, cmap=cmap, vmin=vmin, vmax=vmax,
                           interpolation="nearest")
            ax.set_xlabel(lab(a1))
            ax.set_ylabel(lab(a0))
            fig.colorbar(im, ax=ax, label=cblabel, extend=extend)
            if (a0.name, a1.name) == ("y", "x"):
                _mark_recommended(ax, results, a1)
    ax.set_title(title, fontsize=10)
    fig.tight_layout()
    try:
        fig.savefig(tmp, format="png")
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    _replace_or_clean(tmp, final)
    return final
