"""``workbench run STUDY``: run a study headless and write a results file.

Progress goes to stderr (a bar on a terminal, a line every 10 % otherwise). Ctrl-C, SIGTERM and
SIGHUP cancel cooperatively: finished chunks are kept and the results file is closed, readable and
marked incomplete (exit status 130, 143, 129); a second one stops at once and keeps nothing. A
second run on the same ``--out`` is refused while the first runs (``.NAME.lock`` beside the file). Bad study files and settings print one ``error:`` line (exit 2) and
write nothing.
"""
from __future__ import annotations

import os
import signal
import sys
import threading
import time

#: signals that cancel a run as Ctrl-C does (exit status 128 + the signal's number: 130, 143, 129)
CANCEL_SIGNALS = tuple(getattr(signal, n) for n in ("SIGINT", "SIGTERM", "SIGHUP") if hasattr(signal, n))
# results file names ``workbench run --out`` accepts (anything else is refused before running)
RESULTS_EXTENSIONS = (".h5", ".hdf5", ".hdf")


def add_parser(subparsers):
    p = subparsers.add_parser("run", help="run a study file headless and write a results file (HDF5)",
                              description="Run a study (joint sweep, reach slice, ...) described by a study "
                                          "file and stream its results to an HDF5 file.")
    p.add_argument("study", metavar="STUDY", help="study file (.toml)")
    p.add_argument("--out", metavar="FILE", default=None,
                   help="results file (default: the study file's name with .h5, in the current folder)")
    p.add_argument("--workers", metavar="N", type=int, default=None,
                   help="worker processes (default: one per core)")
    p.add_argument("--scheduler", metavar="ADDR", default=None,
                   help="run on Dask: 'local' starts a local cluster, or tcp://host:port of a running scheduler")
    p.add_argument("--in-process", action="store_true",
                   help="compute in this process (all threads) instead of worker processes")
    p.add_argument("--compression", choices=("lz4", "lzf", "gzip", "none"), default="lz4",
                   help="HDF5 compression of the result arrays: lz4 (Blosc LZ4 + shuffle, fast, default; other "
                        "HDF5 tools need the Blosc filter plugin), lzf, gzip (any HDF5 tool) or none")
    p.add_argument("--quiet", action="store_true", help="no progress on stderr")
    from .info import add_package_path_argument

    add_package_path_argument(p)
    return p


def _fmt_time(s: float) -> str:
    if s != s or s == float("inf"):
        return "--"
    s = int(round(s))
    if s < 60:
        return f"{s} s"
    if s < 3600:
        return f"{s // 60} min {s % 60:02d} s"
    return f"{s // 3600} h {(s % 3600) // 60:02d} min"


class _Progress:
    """Progress on stderr: a redrawn bar on a terminal, a line per 10 % otherwise."""

    def __init__(self, stream=None, quiet=False):
        self.stream = stream = stream if stream is not None else sys.stderr
        self.quiet = quiet
        self.tty = hasattr(stream, "isatty") and stream.isatty()
        self.last = 0.0
        self.step = -1

    def __call__(self, done, total, eta):
        if self.quiet:
            return
        frac = done / total if total else 1.0
        if self.tty:
            now = time.monotonic()
            if now - self.last < 0.1 and done < total:
                return
            self.last = now
            width = 30
            fill = int(width * frac)
            self.stream.write(f"\r[{'#' * fill}{'.' * (width - fill)}] {100 * frac:5.1f}%  "
                              f"{done:,}/{total:,} cells  {_fmt_time(eta)} left ")
            if done >= total:
                self.stream.write("\n")
        else:
            step = int(frac * 10)
            if step == self.step:
                return
            self.step = step
            self.stream.write(f"run: {100 * frac:.0f}% ({done:,} of {total:,} cells), {_fmt_time(eta)} left\n")
        self.stream.flush()

    def end(self):
        if self.tty and not self.quiet:
            self.stream.write("\n")


def run(args) -> int:
    from ..errors import WorkbenchError
    from ..results import check_output_path
    from ..runner import _SCHEMES, check_out_is_not_an_input, check_workers, prepare, run_study

    check_workers(args.workers, args.scheduler)
    if args.in_process and args.scheduler:
        raise WorkbenchError("--in-process and --scheduler: choose one")
    if args.scheduler and args.scheduler != "local" and not str(args.scheduler).startswith(_SCHEMES):
        raise WorkbenchError(f"--scheduler {args.scheduler}: expected 'local' or an address like tcp://host:8786")
    out = args.out
    if out is None:
        out = os.path.splitext(os.path.basename(args.study))[0] + ".h5"
    if os.path.splitext(out)[1].lower() not in RESULTS_EXTENSIONS:
        raise WorkbenchError(f"--out {out}: a results file is HDF5; expected a name ending in .h5 "
                             f"(or .hdf5), got {os.path.splitext(out)[1] or 'no extension'}")
    out = check_output_path(out)
    from .info import package_paths

    package_paths(args)  # package:// folders for URDF meshes named by the study's arm
    prep = prepare(args.study)  # reads and checks the study, arm and cell files
    check_out_is_not_an_input(out, prep.plan.spec)
    from ..studies.base import unused_note

    note = unused_note(prep.kind, prep.plan.spec.settings)
    if note:
        sys.stderr.write(f"note: {prep.plan.spec.where}: [settings] not used, ignored: {note}\n")
    from ..studies.plausibility import result_warnings, study_warnings

    for w in study_warnings(prep):  # units, angles, a placement out of reach: the run goes on
        sys.stderr.write(f"warning: {w}\n")
    if args.scheduler:
        executor = "dask"
    elif args.in_process:
        executor = "inprocess"
    elif args.workers:
        executor = "processes"
    else:
        executor = "auto"

    cancel = threading.Event()
    why = {}

    def on_signal(signum, frame):
        if cancel.is_set():  # a second signal: stop hard (the temporary file is deleted, never the final name)
            raise KeyboardInterrupt
        why["signal"] = signum
        cancel.set()
        name = "Ctrl-C" if signum == signal.SIGINT else signal.Signals(signum).name
        sys.stderr.write(f"\ncancelling ({name}): keeping the finished chunks ...\n")

    from ..results import OutputLock

    lock = OutputLock(out)
    lock.acquire()  # a second run on the same --out stops here, before calibrating
    old = {}
    try:
        if threading.current_thread() is threading.main_thread():
            # SIGTERM (kill, a shutdown) and SIGHUP (the terminal closed) end the run as Ctrl-C does:
            # the finished chunks are kept in a readable file marked incomplete
            for sig in CANCEL_SIGNALS:
                old[sig] = signal.signal(sig, on_signal)
        bar = _Progress(quiet=args.quiet)
        if not args.quiet:
            from ..studies.base import calibrate

            est = prep.estimate = calibrate(prep.kind, prep.plan, prep.arm, prep.cell)
            sys.stderr.write(f"study {prep.plan.spec.name!r} ({prep.kind.title}): {est.describe()}\n")
        res = run_study(prep, out=out, executor=executor, workers=args.workers, scheduler=args.scheduler,
                        progress=bar, cancel=cancel, compression=None if args.compression == "none" else args.compression)
    finally:
        for sig, handler in old.items():
            signal.signal(sig, handler)
        lock.release()
    done = int(res.finished.sum())
    if res.incomplete:
        bar.end()
        sys.stderr.write(f"cancelled: {done} of {res.finished.size} chunks kept in {out} (marked incomplete)\n")
        return 128 + int(why.get("signal", signal.SIGINT))
    for w in result_warnings(prep.kind.name, res.arrays, prep.plan.spec.where):
        sys.stderr.write(f"warning: {w}\n")
    if not args.quiet:
        sys.stderr.write(f"wrote {out} ({res.attrs.get('elapsed_s', 0):.1f} s, {res.attrs.get('executor')})\n")
    return 0
