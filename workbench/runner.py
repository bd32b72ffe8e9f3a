"""Chunk scheduling of studies: in-process, local processes or Dask; progress, cancel, streaming.

The runner holds no maths: it plans a study with its kind (:mod:`workbench.studies`), calibrates
the time per cell on a few cells, cuts the grid into chunks of about ``chunk_seconds``, sends the
chunks to an executor and streams each finished chunk to a writer (:mod:`workbench.results`), so
memory stays bounded whatever the grid size.

Executors
---------
``"inprocess"``  chunks computed one after another in the calling thread; the compiled kernels use
                 all numba threads.
``"processes"``  a :class:`~workbench.pool.WorkerPool` (spawn context, never fork: numba's
                 thread pool does not survive a fork); each worker process uses 1 numba
                 thread so processes do not oversubscribe the cores. Default: one per core.
``"dask"``       a ``dask.distributed`` Client: ``scheduler="local"`` starts a LocalCluster (one
                 single-threaded worker process per core, or ``workers``) and closes it at the end;
                 ``scheduler="tcp://host:port"`` connects to a running scheduler.

Cancel is cooperative: ``cancel`` (a ``threading.Event`` or a callable returning True) is polled at
least every 0.1 s between chunk completions; the run stops within about one chunk time (chunks are
sized to ~0.25 s), keeps every finished chunk and closes the file marked incomplete.
"""
from __future__ import annotations

import math
import os
import shutil
import time
from dataclasses import dataclass

import numpy as np

from .errors import WorkbenchError
from .procs import process_identity, start_watchdog
from .results import MemoryWriter, OutputLock, Results, ResultsWriter, check_output_path, read_results
from .studies.base import RNG_BLOCK, Plan, StudyKind, calibrate, get_kind, length_attrs
from .studies.spec import StudySpec, dumps_study, load_context, read_study_file

__all__ = ["run_study", "prepare", "Prepared", "RunError", "EXECUTORS", "bench_sweep", "bench_scaling",
           "bench_memory", "bench_shared", "chunk_cells_for"]

EXECUTORS = ("inprocess", "processes", "dask")
#: with executor="auto", runs estimated below this many seconds stay in-process
AUTO_INPROCESS_S = 3.0
#: at most this many local worker processes per core (more only add memory and start-up time)
MAX_WORKERS_PER_CORE = 4
_SCHEMES = ("tcp://", "tls://", "inproc://", "ws://", "wss://", "ucx://")
#: results larger than this are not read back into memory after a streamed run (lazy instead)
READ_BACK_BYTES = 512 << 20
#: the biggest chunk of result arrays a worker holds at once
MAX_CHUNK_BYTES = 48 << 20
#: calibrated chunk sizes: floor and ceiling in cells (see :func:`chunk_cells_for`)
MIN_CHUNK_CELLS = 512
MIN_SLOW_CHUNK_CELLS = 16
SLOW_CHUNK_SECONDS = 2.0
MAX_CHUNK_CELLS = 1 << 20
MAX_CHUNKS = 20_000


class RunError(WorkbenchError):
    """A run that cannot start (too big for memory or disk, bad executor settings)."""


@dataclass(eq=False)
class Prepared:
    """A study ready to run: kind, plan, arm, cell, input texts and the calibrated estimate."""

    kind: StudyKind
    plan: Plan
    arm: object
    cell: object
    texts: dict
    estimate: object = None
    fixed_chunks: bool = False


def prepare(study, arm=None, cell=None, texts=None, chunk_cells=None) -> Prepared:
    """Read and plan a study without running it.

    Parameters
    ----------
    study : str, os.PathLike, StudySpec or Plan
        A study file, a spec, or a ready plan.
    arm, cell : optional
        Already loaded arm (``workbench.kinematics.Arm``) and cell; loaded from the spec otherwise.
    texts : dict, optional
        ``{"study", "arm", "cell"}`` file texts for the results file.
    chunk_cells : int, optional
        Override the kind's chunk size.
    """
    plan = None
    if isinstance(study, Plan):
        plan, spec = study, study.spec
    elif isinstance(study, StudySpec):
        spec = study
    elif isinstance(study, (str, os.PathLike)):
        spec = read_study_file(study)
    else:
        raise TypeError(f"run_study: expected a study file, StudySpec or Plan, got {type(study).__name__}")
    kind = get_kind(spec.kind, where=f"{spec.where}: [study] kind")
    texts = dict(texts or {})
    if arm is None:
        arm, cell_loaded, arm_text, cell_text = load_context(spec)
        cell = cell if cell is not None else cell_loaded
        texts.setdefault("arm", arm_text)
        texts.setdefault("cell", cell_text)
    elif texts.get("arm") is None and os.path.isfile(spec.arm_path):
        with open(spec.arm_path, encoding="utf-8", errors="replace") as fh:
            texts["arm"] = fh.read()
    if "study" not in texts or texts["study"] is None:
        texts["study"] = dumps_study(spec)
    if plan is None:
        plan = kind.plan(spec, arm, cell, chunk_cells=chunk_cells)
    elif chunk_cells is not None:
        plan = plan.with_chunk_cells(chunk_cells)
    return Prepared(kind=kind, plan=plan, arm=arm, cell=cell, texts=texts,
                    fixed_chunks=chunk_cells is not None or isinstance(study, Plan))


def _is_cancelled(cancel):
    if cancel is None:
        return lambda: False
    if hasattr(cancel, "is_set"):
        return cancel.is_set
    if callable(cancel):
        return lambda: bool(cancel())
    raise TypeError("cancel: expected a threading.Event or a callable returning True to stop")


def chunk_cells_for(seconds_per_cell: float, cells: int, cell_bytes: int, chunk_seconds: float = 0.25) -> float:
    """Cells per chunk for about ``chunk_seconds`` of compute, within a floor and a ceiling.

    Ceiling: ``MAX_CHUNK_CELLS`` and ``MAX_CHUNK_BYTES`` of result arrays (what a worker holds at
    once). Floor: ``MIN_CHUNK_CELLS`` (one kernel block; fewer cells per call make the per-chunk
    overhead of the runner and writer, about a millisecond, larger than the compute of fast kinds),
    lowered for kinds so slow that such a chunk would take over ``SLOW_CHUNK_SECONDS`` (never below
    ``MIN_SLOW_CHUNK_CELLS``), and raised so a grid has at most ``MAX_CHUNKS`` chunks. The memory
    ceiling wins over the floor."""
    spc = max(float(seconds_per_cell), 1e-12)
    target = chunk_seconds / spc
    floor = max(MIN_SLOW_CHUNK_CELLS, min(MIN_CHUNK_CELLS, SLOW_CHUNK_SECONDS / spc))
    floor = max(floor, math.ceil(cells / MAX_CHUNKS))
    target = max(target, floor)
    target = min(target, MAX_CHUNK_CELLS, MAX_CHUNK_BYTES / max(1, cell_bytes))
    return float(max(1.0, min(target, cells)))


def _nice_chunk(cells_per_chunk: float, cells: int) -> int:
    c = int(max(1, min(cells, cells_per_chunk)))
    if c >= 2 * RNG_BLOCK:
        c -= c % RNG_BLOCK
    elif c >= 64:
        c = 1 << int(math.log2(c))
    return max(1, c)


def _available_memory() -> int:
    try:
        import psutil

        return int(psutil.virtual_memory().available)
    except Exception:  # pragma: no cover - psutil is a declared dependency
        return 1 << 34


def _fmt_bytes(b):
    from .studies.base import _fmt_bytes as f

    return f(b)


def check_workers(workers, scheduler=None, pool=None) -> None:
    """Refuse a worker count that is not a whole number >= 1, or more local worker processes than
    ``MAX_WORKERS_PER_CORE`` per core (each is a process with its own memory). A remote Dask
    scheduler or a given ``pool`` decides its own size."""
    if workers is None:
        return
    if isinstance(workers, bool) or not isinstance(workers, (int, np.integer)) or workers < 1:
        raise RunError(f"--workers: expected a whole number >= 1, got {workers!r}")
    if pool is None and scheduler in (None, "local") and workers > MAX_WORKERS_PER_CORE * _cores():
        raise RunError(f"--workers: {workers} local worker processes on {_cores()} core(s); expected at most "
                       f"{MAX_WORKERS_PER_CORE * _cores()} ({MAX_WORKERS_PER_CORE} per core)")


def check_out_is_not_an_input(out, spec) -> None:
    """Refuse a results path that is one of the study's own input files (study, arm or cell file):
    writing the results there would destroy the input.

    Parameters
    ----------
    out : str or os.PathLike
        The results file path.
    spec : StudySpec
        The study (its ``source``, ``arm_path`` and ``cell_path`` are compared with ``out``).
    """
    target = os.path.realpath(os.fspath(out))
    for what, p in (("study file", getattr(spec, "source", None)), ("arm file", getattr(spec, "arm_path", None)),
                    ("cell file", getattr(spec, "cell_path", None))):
        if p and os.path.realpath(os.fspath(p)) == target:
            raise RunError(f"--out {out}: is the study's {what}; writing the results there would destroy it; "
                           f"expected a new results file name such as "
                           f"{os.path.splitext(os.fspath(out))[0]}.h5")


def check_resources(plan: Plan, out) -> None:
    """Refuse a run whose results would not fit: in memory when ``out`` is None, on disk
    (the space the results file reserves: uncompressed size and a margin) otherwise."""
    need = plan.result_bytes
    if out is None:
        avail = _available_memory()
        if need > 0.6 * avail:
            raise RunError(f"{plan.spec.where}: the results need {_fmt_bytes(need)} of memory but only "
                           f"{_fmt_bytes(avail)} is free; stream them to a file with --out FILE")
    else:  # the space a results file reserves when it is created (raw arrays and a margin)
        from .results import reserve_bytes

        need = reserve_bytes(plan)
        folder = os.path.dirname(os.path.abspath(os.fspath(out)))
        free = shutil.disk_usage(folder).free
        if need > free:
            raise RunError(f"{plan.spec.where}: the results need up to {_fmt_bytes(need)} on disk but "
                           f"{folder} has {_fmt_bytes(free)} free; use fewer cells or another --out folder")


# ----------------------------------------------------------------------------------------------
# worker side


def _compute(kind_name, plan, arm, cell, chunk, threads=None):
    """Worker entry: compute one chunk (module-level so it pickles by reference)."""
    from .kinematics import kernels

    if threads is not None:
        kernels.set_threads(threads)
    kind = _worker_kind(kind_name)
    return chunk, kind.compute_chunk(plan, arm, cell, chunk)


def _kind_ref(kind: StudyKind):
    """What a worker needs to find ``kind``: its name when the registry entry is a dotted path
    (every process knows it), else ``(name, target)`` with the class or instance given to
    :func:`~workbench.studies.base.register_kind` (pickled by reference to its module), so a kind
    registered at run time works in worker processes and on Dask workers too."""
    from .studies.base import KINDS

    target = KINDS.get(kind.name)
    if isinstance(target, str):
        return kind.name
    return (kind.name, target if target is not None else type(kind))


def _worker_kind(ref) -> StudyKind:
    from .studies.base import KINDS, register_kind

    if isinstance(ref, tuple):
        name, target = ref
        if KINDS.get(name) is not target:
            register_kind(name, target)
        return get_kind(name)
    return get_kind(ref)


#: how often a worker process checks that the process that started it still runs (seconds)
WATCHDOG_S = 0.5


def _worker_init(parent=None):
    """Worker process set-up: ignore Ctrl-C (the parent's cancel decides; the pool is also started
    with SIGINT blocked so a Ctrl-C during start-up does not reach it), 1 numba thread, and a
    watchdog that ends the process when ``parent`` = (pid, start time) is gone, however it went
    (kill -9 included): a worker waiting for its next chunk would otherwise wait forever."""
    import signal

    from .kinematics import kernels

    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C is the parent's business (cancel)
    for sig in ("SIGHUP",):  # a closed terminal: the parent cancels and shuts the pool down
        if hasattr(signal, sig):
            signal.signal(getattr(signal, sig), signal.SIG_IGN)
    kernels.set_threads(1)
    if parent is not None:
        start_watchdog(*parent, period=WATCHDOG_S)


class _SigintBlocked:
    """While worker processes start: SIGINT blocked in this thread and, in the main thread, set to
    ignored. A spawned child starts with an empty signal mask but keeps an ignored disposition
    across exec, and Python installs its KeyboardInterrupt handler only where SIGINT is not
    ignored: a Ctrl-C to the process group while a worker imports the engine (before
    :func:`_worker_init` runs) cannot print a traceback or kill it. A Ctrl-C that reached this
    process meanwhile stays pending (Linux never drops a blocked signal, ignored or not) and is
    delivered to the restored handler when the block ends: the cancel is not lost."""

    def __enter__(self):
        import signal
        import threading

        self.old_mask = self.old_handler = None
        self.swapped = False
        if hasattr(signal, "pthread_sigmask"):
            self.old_mask = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
            # a handler set outside Python (getsignal None) could not be put back: leave it
            if threading.current_thread() is threading.main_thread() and signal.getsignal(signal.SIGINT) is not None:
                self.old_handler = signal.signal(signal.SIGINT, signal.SIG_IGN)
                self.swapped = True
        return self

    def __exit__(self, *exc):
        import signal

        if self.swapped:
            signal.signal(signal.SIGINT, self.old_handler)
        if self.old_mask is not None:
            signal.pthread_sigmask(signal.SIG_SETMASK, self.old_mask)
        return False


def worker_pool(n_workers):
    """A :class:`~workbench.pool.WorkerPool` of ``n_workers`` workers for studies: spawn context
    (never fork: numba's thread pool does not survive a fork; spawn, not forkserver, so every
    worker is a child of this process and no server process outlives it), :func:`_worker_init`
    with this process as the parent to watch, SIGINT blocked while the workers start."""
    from .pool import WorkerPool

    return WorkerPool(n_workers, initializer=_worker_init, initargs=(process_identity(),),
                      start_method="spawn", start_guard=_SigintBlocked)


# ----------------------------------------------------------------------------------------------


def run_study(study, out=None, executor="inprocess", workers=None, scheduler=None, progress=None,
              cancel=None, on_chunk=None, arm=None, cell=None, texts=None, chunk_cells=None,
              chunk_seconds=0.25, compression="lz4", pool=None, summary=True) -> Results:
    """Run a study and return its results.

    Parameters
    ----------
    study : str, os.PathLike, StudySpec, Plan or Prepared
        What to run (a study file, a spec, a plan, or the output of :func:`prepare`).
    out : str or None
        Results file to stream to (HDF5, written under a temporary name and renamed when closed);
        None keeps the results in memory (refused when they would not fit).
    executor : {"inprocess", "processes", "dask", "auto"}
        "auto" runs in-process when the calibrated estimate is under 3 s, else local processes.
    workers : int or None
        Worker processes (default: one per core).
    scheduler : str or None
        For Dask: "local" (start a LocalCluster) or "tcp://host:port". Giving a scheduler implies
        ``executor="dask"``.
    progress : callable(done, total, eta_seconds), optional
        Called after calibration (done = 0) and after every chunk; counts are grid cells, the ETA
        is in seconds (NaN until known).
    cancel : threading.Event or callable, optional
        Cooperative cancel; finished chunks are kept and the results are marked incomplete.
    on_chunk : callable(chunk, arrays), optional
        Called in the runner's thread after each chunk is written (for live views).
    chunk_cells : int, optional
        Fixed chunk size (cells); default: calibrated to about ``chunk_seconds`` per chunk (a
        ``Plan`` given as ``study``, a kind with ``calibrated_chunks = False`` and a single-chunk
        plan keep their chunks).
    compression : {"lz4", "lzf", "gzip", None}
        HDF5 compression of the field datasets (see :data:`workbench.results.COMPRESSIONS`):
        Blosc LZ4 after byte shuffle (default; fast), LZF, or gzip level 1 (readable by any HDF5
        tool without plugins, slowest to write).
    pool : workbench.pool.WorkerPool or distributed.Client, optional
        Reuse a running pool of workers (its workers should use 1 numba thread each).
    summary : bool
        Compute the kind's summary tables when the results fit in memory.

    Returns
    -------
    Results
        In memory, or read back from ``out`` (arrays loaded lazily when larger than 512 MB).

    Raises
    ------
    WorkbenchError
        Bad study, output path, executor settings, or a run too large for memory / disk.
    """
    t_start = time.perf_counter()
    if scheduler is not None and executor in ("inprocess", "processes", None):
        executor = "dask"
    if executor not in EXECUTORS + ("auto",):
        raise RunError(f"executor: expected one of {', '.join(EXECUTORS)}, got {executor!r}")
    check_workers(workers, scheduler, pool)
    if scheduler is not None and scheduler != "local" and not str(scheduler).startswith(_SCHEMES):
        raise RunError(f"--scheduler {scheduler}: expected 'local' or an address like tcp://host:8786")
    if out is not None:
        out = check_output_path(out)
    prep = study if isinstance(study, Prepared) else prepare(study, arm, cell, texts, chunk_cells)
    kind, plan, arm, cell = prep.kind, prep.plan, prep.arm, prep.cell
    if out is not None:
        check_out_is_not_an_input(out, plan.spec)
    check_resources(plan, out)
    lock = OutputLock(out) if out is not None else None  # one run per results file at a time
    if lock is not None:
        lock.acquire()
    try:
        is_cancelled = _is_cancelled(cancel)
        n_workers = int(workers or _cores())

        # calibrate on a few cells (all threads) and size the chunks
        from .kinematics import kernels

        kernels.set_threads(None)
        est = prep.estimate if prep.estimate is not None else calibrate(kind, plan, arm, cell)
        prep.estimate = est
        if executor == "auto":  # processes cost a second or two to start: not worth it for short runs
            executor = "inprocess" if est.seconds < AUTO_INPROCESS_S or n_workers == 1 else "processes"
        if (chunk_cells is None and not prep.fixed_chunks and plan.n_chunks > 1
                and getattr(kind, "calibrated_chunks", True)):
            per_thread = est.seconds_per_cell * (1 if executor == "inprocess" else max(1, _threads()))
            target = chunk_cells_for(per_thread, plan.cells, plan.cell_bytes, chunk_seconds)
            if executor != "inprocess":  # at least ~4 chunks per worker for balance
                target = min(target, max(1.0, plan.cells / (4 * n_workers)))
            plan = plan.with_chunk_cells(_nice_chunk(target, plan.cells))
        total = plan.cells
        if progress is not None:
            progress(0, total, est.seconds / (1 if executor == "inprocess" else n_workers) if total else 0.0)

        attrs = {"executor": executor, "workers": n_workers if executor != "inprocess" else 1,
                 "estimate_s": float(est.seconds), **length_attrs(plan, arm)}
        attrs.update((plan.data or {}).get("result_attrs", {}) if isinstance(plan.data, dict) else {})
        writer = (ResultsWriter(out, plan, prep.texts, attrs, compression=compression) if out is not None
                  else MemoryWriter(plan, prep.texts, attrs))
        done_cells = 0
        first = [None, 0]
        t_run = time.perf_counter()

        sink = _WriterThread(writer) if out is not None else None

        def finished(chunk, arrays):
            nonlocal done_cells
            if sink is not None:
                sink.put(chunk, arrays)
            else:
                writer.write_chunk(chunk, arrays)
            done_cells += chunk.size
            if on_chunk is not None:
                on_chunk(chunk, arrays)
            if progress is not None:
                now = time.perf_counter()
                if first[0] is None:  # the first chunk also pays the workers' start-up
                    first[0], first[1] = now, done_cells
                if done_cells > first[1]:
                    eta = (now - first[0]) * (total - done_cells) / (done_cells - first[1])
                else:
                    eta = (now - t_run) * (total - done_cells) / max(done_cells, 1)
                progress(done_cells, total, eta)

        try:
            if executor == "inprocess":
                _run_inprocess(kind, plan, arm, cell, finished, is_cancelled, _reusable_sample(kind, plan, est))
            elif executor == "processes":
                _run_processes(kind, plan, arm, cell, finished, is_cancelled, n_workers, pool)
            else:
                _run_dask(kind, plan, arm, cell, finished, is_cancelled, n_workers, scheduler, pool)
            if sink is not None:
                sink.finish()
        except BaseException:
            if sink is not None:
                sink.stop()
            writer.abort()
            raise
        incomplete = not bool(writer.finished.all())
        tables = {}
        try:
            if summary:
                full = writer.full_arrays()
                if full is not None:
                    tables = kind.summarise(plan, full)
            elapsed = time.perf_counter() - t_start
            res = writer.close(incomplete, tables, {"elapsed_s": float(elapsed)})
        except BaseException:  # no temporary file left open behind a failed summary
            writer.abort()
            raise
        if isinstance(res, Results):
            return res
        r = read_results(res, load=plan.result_bytes <= READ_BACK_BYTES)
        r.plan = plan
        return r
    finally:
        if lock is not None:
            lock.release()


def _cores() -> int:
    """Cores this process may use (its CPU affinity where the OS tells it)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def _threads() -> int:
    try:
        import numba

        return int(numba.get_num_threads())
    except Exception:  # pragma: no cover
        return 1


class _WriterThread:
    """Writes chunks to the results writer from a background thread (bounded queue), so file
    compression overlaps the compute: the compiled kernels release the GIL while they run."""

    def __init__(self, writer, depth: int = 4):
        import queue
        import threading

        self.writer = writer
        self.q = queue.Queue(maxsize=depth)
        self.error = None
        self.t = threading.Thread(target=self._loop, name="results-writer", daemon=True)
        self.t.start()

    def _loop(self):
        while True:
            item = self.q.get()
            if item is None:
                return
            if self.error is None:
                try:
                    self.writer.write_chunk(*item)
                except BaseException as exc:  # handed to the runner's thread
                    self.error = exc

    def put(self, chunk, arrays):
        if self.error is not None:
            raise self.error
        self.q.put((chunk, arrays))

    def finish(self):
        self.q.put(None)
        self.t.join()
        if self.error is not None:
            raise self.error

    def stop(self):
        self.error = self.error or RuntimeError("stopped")
        self.q.put(None)
        self.t.join(5)


def _reusable_sample(kind, plan, est):
    """The calibration's output on cells [0, n) when the run may use it instead of computing those
    cells again: kinds whose chunks may be cut anywhere (``calibrated_chunks``; their cells do not
    depend on the chunking), or a sample that is exactly the first chunk."""
    sample = getattr(est, "sample", None)
    if sample is None or plan.cells == 0:
        return None
    c, arrays = sample
    if c.start != 0 or c.stop > plan.cells or not all(f.name in arrays for f in plan.fields):
        return None
    if getattr(kind, "calibrated_chunks", True) or c.stop == plan.chunk(0).stop:
        return sample
    return None


def _run_inprocess(kind, plan, arm, cell, finished, is_cancelled, sample=None):
    """Compute the chunks in order in this process (the compiled kernels use all its threads).
    ``sample`` = (Chunk(0, 0, n), arrays) from calibration: cells below n are taken from it."""
    n = sample[0].stop if sample is not None else 0
    for chunk in plan.chunks:
        if is_cancelled():
            return
        if chunk.start >= n:
            arrays = kind.compute_chunk(plan, arm, cell, chunk)
        elif chunk.stop <= n:
            arrays = {k: v[chunk.start:chunk.stop] for k, v in sample[1].items()}
        else:  # the rest of a chunk the sample covers in part
            rest = kind.compute_chunk(plan, arm, cell, type(chunk)(chunk.index, n, chunk.stop))
            arrays = {k: np.concatenate([sample[1][k][chunk.start:], rest[k]]) for k in rest}
        finished(chunk, arrays)


def _run_processes(kind, plan, arm, cell, finished, is_cancelled, n_workers, pool):
    """Chunks on local worker processes (:mod:`workbench.pool`): two queued per worker, answers
    written in this thread as they come; a cancel terminates the workers at once (their chunks
    would be thrown away), which cannot leave anything waiting."""
    from .pool import WorkerDied

    own = pool is None
    if own:
        pool = worker_pool(n_workers)
    try:
        pool.run(_compute, (_kind_ref(kind), plan, arm, cell), iter(plan.chunks),
                 on_result=lambda answer: finished(*answer), is_cancelled=is_cancelled)
    except WorkerDied:
        if is_cancelled():
            return
        raise RunError("worker processes: a worker stopped before finishing its chunk (killed, out "
                       "of memory, or a script that starts processes without "
                       "'if __name__ == \"__main__\":'); nothing was kept; run again, or "
                       "in-process (--in-process, executor=\"inprocess\")") from None
    except Exception:
        if is_cancelled():  # workers hit by the same Ctrl-C: the run is over anyway
            return
        raise
    finally:
        if own:
            pool.close()


def _connect(Client, addr, timeout=None):
    """A Client of the scheduler at ``addr``, or a RunError after ``timeout`` seconds (default
    :data:`workbench.limits.SCHEDULER_TIMEOUT_S`) when it does not answer: a port that accepts the
    connection but never replies would otherwise keep the run waiting for ever. The attempt runs in a
    daemon thread so a stuck handshake cannot hold the caller."""
    import threading

    from .limits import SCHEDULER_TIMEOUT_S

    timeout = SCHEDULER_TIMEOUT_S if timeout is None else float(timeout)
    box: dict = {}

    def attempt():
        try:
            box["client"] = Client(addr, timeout=f"{max(1, int(timeout))}s")
        except BaseException as exc:  # noqa: BLE001 - handed to the caller
            box["error"] = exc

    t = threading.Thread(target=attempt, name="workbench-dask-connect", daemon=True)
    t.start()
    t.join(timeout + 1.0)
    if "client" in box:
        return box["client"]
    if "error" in box:
        raise box["error"]
    raise RunError(f"--scheduler {addr}: no answer within {timeout:g} s (the port accepts connections but no Dask "
                   f"scheduler replies); expected the address of a running dask scheduler")


def _run_dask(kind, plan, arm, cell, finished, is_cancelled, n_workers, scheduler, pool):
    try:
        from distributed import Client, LocalCluster, wait
    except ImportError:  # pragma: no cover - declared dependency
        raise RunError("--scheduler: dask.distributed is not installed") from None
    cluster = None
    client = pool
    if client is None:
        addr = scheduler or "local"
        try:
            if addr == "local":
                import logging

                cluster = LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=True,
                                       dashboard_address=None, silence_logs=logging.ERROR)
                client = Client(cluster)
            else:
                client = _connect(Client, addr)
        except RunError:
            raise
        except Exception as exc:
            if cluster is not None:
                cluster.close()
            raise RunError(f"--scheduler {addr}: cannot connect ({str(exc).splitlines()[0]})") from None
    try:
        ctx = client.scatter([_kind_ref(kind), plan, arm, cell], broadcast=True)
        n_slots = max(1, sum(client.nthreads().values())) if hasattr(client, "nthreads") else n_workers
        chunks = iter(plan.chunks)
        pending = set()

        def submit():
            c = next(chunks, None)
            if c is not None:
                pending.add(client.submit(_compute, *ctx, c, 1, pure=False))
            return c is not None

        for _ in range(2 * n_slots):
            if not submit():
                break
        while pending:
            if is_cancelled():
                break
            try:
                done, _ = wait(list(pending), timeout=0.1, return_when="FIRST_COMPLETED")
            except Exception:  # distributed raises TimeoutError when nothing finished in time
                continue
            for fut in done:
                pending.discard(fut)
                try:
                    chunk, arrays = fut.result()
                except Exception:
                    if is_cancelled():
                        break
                    raise
                finished(chunk, arrays)
                if not is_cancelled():
                    submit()
        if pending:
            client.cancel(list(pending))
    finally:
        if pool is None:  # our own client (and cluster): close them
            client.close()
            if cluster is not None:
                cluster.close()


# ----------------------------------------------------------------------------------------------
# benchmarks (see workbench.bench)


def _demo_arm():
    from pathlib import Path

    return str(Path(__file__).resolve().parent.parent / "arms" / "demo_s6.toml")


def _sweep_spec(steps, **extra):
    settings = {"joints": ["j2", "j3"], "ranges": [[-140, 90], [-120, 160]], "steps": list(steps)}
    settings.update(extra)
    return StudySpec(kind="joint_sweep", arm=_demo_arm(), settings=settings, name="bench sweep")


def bench_sweep(quick: bool = False) -> dict:
    """A 2-joint sweep (1000 x 1000 cells; 300 x 300 quick) of demo_s6 with every measure, run
    in-process and streamed to an HDF5 file as ``workbench run --in-process`` runs a study file
    (``run_study`` on a freshly prepared study: calibration, chunks re-cut to about 0.25 s, writer
    thread, summary tables), against the pure compute of the same chunks (a plain loop of
    ``compute_chunk``: no runner, no writer). Reading the study file is not timed, and every run
    writes a new file (the previous one is deleted between the timings).

    Runs come in pairs, 11 of them (2 quick), alternating which of the two goes first. The bar is
    on the median over the pairs of (run - compute) / compute: each pair shares the machine's state
    of the moment, which on a shared virtual machine swings single timings by +-20 %. The best-of
    ratio, the spread of the pairs and the CPU-time overhead (all threads of this process) are
    reported too."""
    import tempfile

    k = 300 if quick else 1000
    reps = 2 if quick else 11
    spec = _sweep_spec((k, k))
    warm = prepare(spec)
    from .kinematics import kernels

    kernels.set_threads(None)
    calibrate(warm.kind, warm.plan, warm.arm, warm.cell)  # compile / warm outside the timings
    wall = {"run": [], "compute": []}
    cpu = {"run": [], "compute": []}
    with tempfile.TemporaryDirectory() as d:
        out = os.path.join(d, "sweep.h5")
        chunks = run_study(prepare(spec), out=out, executor="inprocess").chunk_cells  # the runner's cut
        plan = warm.plan.with_chunk_cells(chunks)
        todo = {}

        def run():
            run_study(todo.pop("prep"), out=out, executor="inprocess")
            todo["size"] = os.path.getsize(out)

        def compute():
            for c in plan.chunks:
                warm.kind.compute_chunk(plan, warm.arm, None, c)

        for i in range(reps):
            todo["prep"] = prepare(spec)
            order = (("compute", compute), ("run", run))
            for name, fn in (order if i % 2 == 0 else order[::-1]):
                t0, c0 = time.perf_counter(), time.process_time()
                fn()
                wall[name].append(time.perf_counter() - t0)
                cpu[name].append(time.process_time() - c0)
                if name == "run":  # a new file each time: freeing an old one is the file system's
                    os.remove(out)  # work (about 10 ms for 17 MB here), not the runner's
        size = todo["size"]
    pairs = [(r - c) / c for r, c in zip(wall["run"], wall["compute"])]
    over = float(np.median(pairs))
    best = (min(wall["run"]) - min(wall["compute"])) / min(wall["compute"])
    over_cpu = float(np.median([(r - c) / c for r, c in zip(cpu["run"], cpu["compute"])]))
    cells = plan.cells
    run_s, compute_s = float(np.median(wall["run"])), float(np.median(wall["compute"]))
    return {"name": "sweep",
            "metrics": {"cells": cells, "run_s": run_s, "compute_s": compute_s,
                        "run_best_s": min(wall["run"]), "compute_best_s": min(wall["compute"]),
                        "run_cpu_s": float(np.median(cpu["run"])), "compute_cpu_s": float(np.median(cpu["compute"])),
                        "cells_per_s": cells / run_s, "chunks": plan.n_chunks, "chunk_cells": plan.chunk_cells,
                        "file_mb": size / 1e6},
            "ratios": {"overhead_vs_compute": over, "overhead_best_of": best,
                       "overhead_pair_min": min(pairs), "overhead_pair_max": max(pairs),
                       "cpu_overhead_vs_compute": over_cpu},
            "bars": {"runner+writer overhead<20%": [over, 0.20, bool(over < 0.20)]},
            "notes": [f"{k} x {k} j2 x j3 sweep of demo_s6 (7 fields per cell), in-process, chunks cut by the "
                      f"runner, Blosc LZ4 + shuffle HDF5 written from a background thread; median of {reps} "
                      f"pairs in alternating order (times: medians)"]}


#: a plain busy loop (the shared-machine bench's neighbours); it ends when its parent goes
_BUSY_CHILD = "import os\np = os.getppid()\nwhile os.getppid() == p:\n    for _ in range(200000):\n        pass\n"


def bench_shared(quick: bool = False) -> dict:
    """The 1000 x 1000 sweep (600 x 600 quick) as ``workbench run --in-process`` runs it (calibration,
    chunks, writer thread, HDF5 file), on the machine as it is and then beside two plain busy-loop
    Python processes that this entry starts itself (one per core of a 2-core machine). Runs come in
    pairs (without, then with the busy processes; 3 pairs, 2 quick) and the bar is on the median
    over the pairs of the ratio, so other work on the machine that comes and goes affects both runs
    of a pair alike. Bar: at most 3x (the fair share of two cores among four busy threads is about
    2x). The CPU time of this process is reported too: threads that spin instead of sleeping show up
    there as CPU time that grows beside the busy processes."""
    import subprocess
    import sys
    import tempfile

    k = 600 if quick else 1000
    reps = 2 if quick else 3
    spec = _sweep_spec((k, k))
    from .kinematics import kernels, threads

    kernels.set_threads(None)
    warm = prepare(spec)
    calibrate(warm.kind, warm.plan, warm.arm, warm.cell)  # compile / load outside the timings
    times = {"idle": [], "busy": []}
    cpu = {"idle": [], "busy": []}
    with tempfile.TemporaryDirectory() as d:
        out = os.path.join(d, "shared.h5")

        def timed(label):
            prep = prepare(spec)
            t0, c0 = time.perf_counter(), time.process_time()
            run_study(prep, out=out, executor="inprocess")
            times[label].append(time.perf_counter() - t0)
            cpu[label].append(time.process_time() - c0)
            os.remove(out)

        for _ in range(reps):
            timed("idle")
            busy = [subprocess.Popen([sys.executable, "-c", _BUSY_CHILD], stdin=subprocess.DEVNULL)
                    for _ in range(2)]
            try:
                time.sleep(0.3)  # both loops running before the timing
                timed("busy")
            finally:
                for b in busy:
                    b.kill()
                for b in busy:
                    b.wait(10)
    pairs = [b / i for i, b in zip(times["idle"], times["busy"])]
    ratio = float(np.median(pairs))
    cpu_ratio = float(np.median([b / i for i, b in zip(cpu["idle"], cpu["busy"])]))
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    return {"name": "shared",
            "metrics": {"cells": k * k, "idle_s": float(np.median(times["idle"])),
                        "beside_two_busy_s": float(np.median(times["busy"])),
                        "idle_cpu_s": float(np.median(cpu["idle"])), "beside_two_busy_cpu_s": float(np.median(cpu["busy"])),
                        "cores": _cores(), "load_average_1min": load},
            "ratios": {"beside_two_busy_vs_idle": ratio, "pair_min": min(pairs), "pair_max": max(pairs),
                       "cpu_time_beside_two_busy_vs_idle": cpu_ratio},
            "bars": {"beside 2 busy processes<=3x idle": [ratio, 3.0, bool(ratio <= 3.0)]},
            "notes": [f"{k} x {k} sweep in-process streamed to HDF5, median of {reps} pairs (times: medians); "
                      f"{threads.describe()}; the machine's load average was {load:.1f} over {_cores()} "
                      f"cores: other work beside the two busy processes raises the ratio"]}


def _burn(n: int) -> float:
    """Plain Python arithmetic (the scaling bench's control)."""
    x = 0.0
    for i in range(n):
        x += i * 0.5
    return x


def bench_scaling(quick: bool = False) -> dict:
    """Local processes: the same sweep (1000 x 1000; 500 x 500 quick) with 2 workers vs 1 worker.
    Both pools are started and warmed before timing; runs alternate, best of 3 (2 quick). A
    control runs plain Python arithmetic on the same pools: it shows how much of a second core the
    machine actually gives. Bar: 2 workers at least 1.7x one worker."""
    k = 500 if quick else 1000
    reps = 2 if quick else 3
    prep = prepare(_sweep_spec((k, k)))
    plan = prep.plan.with_chunk_cells(max(4096, prep.plan.cells // 32))
    pools = {w: worker_pool(w) for w in (1, 2)}
    times = {1: math.inf, 2: math.inf}
    try:
        for w, pool in pools.items():  # start the workers and load the compiled kernels
            run_study(prepare(_sweep_spec((64, 64))), executor="processes", workers=w, pool=pool, summary=False)
        for _ in range(reps):
            for w, pool in pools.items():
                t0 = time.perf_counter()
                run_study(plan, executor="processes", workers=w, pool=pool, arm=prep.arm, texts=prep.texts,
                          summary=False)
                times[w] = min(times[w], time.perf_counter() - t0)
        # control: the same pools on plain Python arithmetic (no workbench code at all); when
        # this is also far below 2x, the machine has no second core free for us right now
        control = {1: math.inf, 2: math.inf}
        for _ in range(reps):
            for w, pool in pools.items():
                t0 = time.perf_counter()
                list(pool.map(_burn, [1_000_000 if quick else 3_000_000] * 8))
                control[w] = min(control[w], time.perf_counter() - t0)
    finally:
        for pool in pools.values():
            pool.close()
    speedup = times[1] / times[2]
    control_ratio = control[1] / control[2]
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    return {"name": "scaling",
            "metrics": {"cells": plan.cells, "one_worker_s": times[1], "two_workers_s": times[2],
                        "cores": os.cpu_count(), "load_average_1min": load},
            "ratios": {"two_vs_one_worker": speedup, "control_plain_python_two_vs_one": control_ratio},
            "bars": {"2 workers>=1.7x 1 worker": [speedup, 1.7, bool(speedup >= 1.7)]},
            "notes": [f"local processes, 1 numba thread per worker, best of {reps} alternating; other work on "
                      f"the machine (load average {load:.1f} over {os.cpu_count()} cores) lowers this"]}


_MEMORY_CHILD = r"""
import json, os, resource, sys, time
from workbench.runner import run_study, _sweep_spec
k = int(sys.argv[1]); out = sys.argv[2]
t0 = time.perf_counter()
res = run_study(_sweep_spec((k, k)), out=out, executor="inprocess", summary=False)
dt = time.perf_counter() - t0
# the peak of this process's own memory: on Linux /proc's VmHWM; ru_maxrss would also count the
# bench process's memory at the fork that started this one (Linux keeps it across exec)
try:
    with open("/proc/self/status") as f:
        peak = next(int(l.split()[1]) * 1024 for l in f if l.startswith("VmHWM:"))
except (OSError, StopIteration):
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
print(json.dumps({"cells": res.cells, "seconds": dt, "peak_bytes": peak, "file_bytes": os.path.getsize(out),
                  "incomplete": res.incomplete}))
"""


def bench_memory(quick: bool = False) -> dict:
    """Peak resident memory of a 20-million-cell joint sweep (4472 x 4472; 1000 x 1000 quick)
    streamed to an HDF5 file, measured in a fresh subprocess (its peak resident set, VmHWM of
    /proc/self/status; ``ru_maxrss`` where there is no /proc). Bar: < 1.5 GB."""
    import json
    import subprocess
    import sys
    import tempfile

    k = 1000 if quick else 4472
    with tempfile.TemporaryDirectory() as d:
        out = os.path.join(d, "big.h5")
        r = subprocess.run([sys.executable, "-c", _MEMORY_CHILD, str(k), out], capture_output=True, text=True)
        if r.returncode != 0:
            raise RuntimeError(f"memory bench child failed: {r.stderr.strip().splitlines()[-1:]}")
        m = json.loads(r.stdout.strip().splitlines()[-1])
    gb = m["peak_bytes"] / 1e9
    return {"name": "memory",
            "metrics": {"cells": m["cells"], "seconds": m["seconds"], "peak_rss_gb": gb,
                        "file_gb": m["file_bytes"] / 1e9, "cells_per_s": m["cells"] / m["seconds"]},
            "ratios": {"peak_rss_vs_limit": gb / 1.5},
            "bars": {"peak RSS<1.5GB": [gb, 1.5, bool(gb < 1.5)]},
            "notes": [f"{k} x {k} sweep streamed to disk in a subprocess"]}

