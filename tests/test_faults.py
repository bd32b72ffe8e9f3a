"""Faults during a run: the disk filling up, signals, a killed parent, two runs on one file.

Each test drives a real ``workbench run`` (or run_study) in a child process and sends it signals.
No assertion depends on how fast anything runs: waits are bounded by generous timeouts that only
catch a hang, and what is asserted is the outcome (exit status, one error line, the files left).
"""
from __future__ import annotations

import errno
import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import psutil
import pytest

from workbench.cli import main
from workbench.results import OutputLock, ResultsError, read_results
from workbench.runner import run_study, _sweep_spec

ROOT = Path(__file__).resolve().parents[1]
S6 = ROOT / "arms" / "demo_s6.toml"
ENV = dict(os.environ, PYTHONUNBUFFERED="1", PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))


def study(folder, steps=(1500, 1500), name="long.toml"):
    p = Path(folder) / name
    p.write_text(f'[study]\nkind = "joint_sweep"\narm = "{S6}"\n\n[settings]\njoints = ["j2", "j3"]\n'
                 f'steps = [{steps[0]}, {steps[1]}]\n')
    return p


#: long enough (9 M cells, several seconds at full speed) that a run signalled at its first
#: progress lines cannot have finished before the signal lands
LONG = (3000, 3000)


def start_run(folder, out, *extra, steps=LONG, session=False):
    s = study(folder, steps)
    return subprocess.Popen([sys.executable, "-m", "workbench", "run", str(s), "--out", str(out), *extra],
                            stderr=subprocess.PIPE, stdout=subprocess.DEVNULL, text=True, env=ENV, cwd=folder,
                            start_new_session=session)


def wait_for_line(proc, start, timeout=600):
    """Read the child's stderr until a line starting with ``start`` (progress lines: 'run: ')."""
    t0 = time.time()
    seen = []
    while time.time() - t0 < timeout:
        line = proc.stderr.readline()
        if not line:
            break
        seen.append(line)
        if line.startswith(start):
            return seen
    raise AssertionError(f"no line starting with {start!r}; got {seen[-5:]}")


def wait_for_progress(proc, percent=1):
    """Read the child's stderr until a progress line saying at least ``percent`` % is done."""
    while True:
        line = wait_for_line(proc, "run: ")[-1]
        if int(line[5:].split("%")[0]) >= percent:
            return line


def leftovers(folder):
    return sorted(p.name for p in Path(folder).iterdir() if p.name.endswith((".partial", ".lock")))


# ---------------------------------------------------------------------------------------------
# signals


@pytest.mark.slow
@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGHUP])
def test_sigterm_and_sighup_cancel_into_a_readable_incomplete_file_as_ctrl_c_does(tmp_path, sig):
    out = tmp_path / "r.h5"
    proc = start_run(tmp_path, out, "--in-process")
    wait_for_progress(proc)  # a chunk or more done
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=600)
    assert proc.returncode == 128 + sig, err  # 143 for SIGTERM, 129 for SIGHUP (as 130 for Ctrl-C)
    assert f"cancelling ({signal.Signals(sig).name})" in err and "marked incomplete" in err
    assert "Traceback" not in err
    r = read_results(out)
    assert r.incomplete and 0 < r.finished.sum() < r.finished.size
    assert leftovers(tmp_path) == []


@pytest.mark.slow
@pytest.mark.parametrize("delay", [0.0, 0.3, 1.0, 2.5])
def test_ctrl_c_at_any_moment_of_a_process_run_ends_without_hang_or_traceback(tmp_path, delay):
    # the Ctrl-C lands while the worker processes start, while they load the kernels, or while
    # they compute; the terminal sends it to the whole process group, workers included
    out = tmp_path / "r.h5"
    proc = start_run(tmp_path, out, "--workers", "2", session=True)  # its own group
    wait_for_line(proc, "study ")  # calibrated: the worker pool starts now
    time.sleep(delay)
    os.killpg(proc.pid, signal.SIGINT)  # as a terminal does: to the run and every worker
    _, err = proc.communicate(timeout=600)  # a hang fails here
    assert proc.returncode in (0, 130), err
    for word in ("Traceback", "InvalidStateError", "KeyboardInterrupt"):
        assert word not in err, err
    if proc.returncode == 130:
        assert "cancelled:" in err
        assert read_results(out).incomplete
    assert leftovers(tmp_path) == []


def _descendants(pid):
    try:
        return psutil.Process(pid).children(recursive=True)
    except psutil.NoSuchProcess:
        return []


@pytest.mark.slow
@pytest.mark.parametrize("how", ["kill -9", "SIGTERM"])
def test_worker_processes_end_when_the_run_ends_however_it_ends(tmp_path, how):
    out = tmp_path / "r.h5"
    proc = start_run(tmp_path, out, "--workers", "2")
    wait_for_progress(proc)
    kids = _descendants(proc.pid)
    assert len(kids) >= 2  # the two workers (and the resource tracker)
    proc.send_signal(signal.SIGKILL if how == "kill -9" else signal.SIGTERM)
    proc.communicate(timeout=300)  # a hang fails here (the conftest kills what is left)
    _, alive = psutil.wait_procs(kids, timeout=60)  # the watchdog polls twice a second
    assert alive == [], [(p.pid, p.cmdline()) for p in alive]
    if how == "SIGTERM":
        assert proc.returncode == 143 and read_results(out).incomplete


# ---------------------------------------------------------------------------------------------
# one run per results file


def _dead_pid():
    p = subprocess.Popen([sys.executable, "-c", "pass"])
    p.wait()
    return p.pid


@pytest.mark.slow
def test_a_second_run_on_the_same_out_is_refused_while_the_first_runs(tmp_path, capsys):
    out = tmp_path / "r.h5"
    proc = start_run(tmp_path, out, "--in-process")
    try:
        wait_for_line(proc, "run: ")
        small = study(tmp_path, (10, 10), name="small.toml")
        assert main(["run", str(small), "--out", str(out), "--quiet"]) == 2
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and err.startswith(f"error: --out {out}: another run (pid {proc.pid}, since ")
        assert "is writing this file" in err
        with pytest.raises(ResultsError, match="another run"):
            run_study(_sweep_spec((4, 4)), out=out)
    finally:
        proc.send_signal(signal.SIGINT)
        proc.communicate(timeout=600)
    assert proc.returncode == 130
    assert leftovers(tmp_path) == []  # the lock went with the run
    assert main(["run", str(small), "--out", str(out), "--quiet"]) == 0  # now free
    assert not read_results(out).incomplete


def test_a_stale_lock_of_a_dead_run_is_taken_over(tmp_path, capsys):
    out = tmp_path / "r.h5"
    lock = tmp_path / ".r.h5.lock"
    for info in ({"pid": _dead_pid(), "started": 1.0, "host": os.uname().nodename, "since": "then"},
                 # a live pid whose start time is not the lock's: the pid was reused by another process
                 {"pid": os.getppid(), "started": 12345.0, "host": os.uname().nodename, "since": "then"}):
        lock.write_text(json.dumps(info))
        r = run_study(_sweep_spec((4, 5)), out=out)
        assert not r.incomplete and r.shape == (4, 5)
        assert leftovers(tmp_path) == []
    # a live owner on this host refuses; the lock is re-entrant within one process
    with OutputLock(out):
        with OutputLock(out):
            assert lock.exists()
        assert lock.exists()
        info = json.loads(lock.read_text())
        assert info["pid"] == os.getpid()
        child = subprocess.run([sys.executable, "-c", textwrap.dedent(f"""
            from workbench.results import OutputLock, ResultsError
            try:
                OutputLock({str(out)!r}).acquire()
            except ResultsError as e:
                print("refused:", e)
            """)], capture_output=True, text=True, env=ENV, timeout=600)
        assert child.stdout.startswith(f"refused: --out {out}: another run (pid {os.getpid()}"), child.stderr
    assert not lock.exists()


# ---------------------------------------------------------------------------------------------
# the disk filling up


_DISK_FULL_CHILD = r"""
import os, sys
from workbench.cli import main
from workbench.errors import WorkbenchError
from workbench.results import read_results
from workbench.runner import run_study, _sweep_spec, prepare
from workbench.studies import base

folder = sys.argv[1]
filler = os.path.join(folder, "filler")
out = os.path.join(folder, "out.h5")


def fill(leave=0):
    try:
        with open(filler, "ab", buffering=0) as f:
            while True:
                f.write(b"\0" * 65536)
    except OSError:
        pass
    if leave:  # give back a hole of `leave` bytes
        os.truncate(filler, max(0, os.path.getsize(filler) - leave))


def free():
    for name in os.listdir(folder):
        os.unlink(os.path.join(folder, name))


# the disk fills up while the run goes on: after chunk k is handed to the writer, at the last
# chunk, during the summary. The whole file's space was reserved at the start: the run ends.
for moment in [1, 3, 8, "last", "summary"]:
    free()
    n = [0]

    def on_chunk(chunk, arrays, moment=moment):
        n[0] += 1
        if n[0] == moment or (moment == "last" and n[0] == chunk_total[0]):
            fill()

    kind = base.get_kind("joint_sweep")
    original = type(kind).summarise

    def summarise(self, plan, arrays, moment=moment):
        if moment == "summary":
            fill()
        return original(self, plan, arrays)

    type(kind).summarise = summarise
    chunk_total = [None]
    prep = prepare(_sweep_spec((200, 300)), chunk_cells=4096)
    chunk_total[0] = prep.plan.n_chunks
    try:
        run_study(prep, out=out, on_chunk=on_chunk, compression=None)
        r = read_results(out)
        ok = (not r.incomplete and r.shape == (200, 300) and bool(r.finished.all())
              and "near_singular" in r.tables and os.path.getsize(filler) > 0)
        print(f"{moment}: finished complete={ok}", flush=True)
    except WorkbenchError as e:
        print(f"{moment}: error: {e}", flush=True)
    finally:
        type(kind).summarise = original
    print(f"{moment}: files {sorted(os.listdir(folder))}", flush=True)

# the disk is full before the run: the file cannot be created
# and: room for the file to be created but not for its reserved space
# (the second calls the writer itself: the run's check of the free space before it starts would
# refuse first; this is the disk filling between that check and the file's creation)
from workbench.results import ResultsWriter

for moment, leave in (("create", 0), ("reserve", 4 << 20)):
    free()
    fill(leave)
    prep = prepare(_sweep_spec((200, 300)), chunk_cells=4096)
    try:
        if moment == "create":
            run_study(prep, out=out, compression=None)
        else:
            ResultsWriter(out, prep.plan, prep.texts, compression=None).abort()
        print(f"{moment}: finished", flush=True)
    except WorkbenchError as e:
        print(f"{moment}: error: {e}", flush=True)
    print(f"{moment}: files {sorted(os.listdir(folder))}", flush=True)

# the command line: one error line, exit status 2
free()
fill(1 << 20)
study = os.path.join(os.path.dirname(folder), "s.toml")
status = main(["run", study, "--out", os.path.join(folder, "cli.h5"), "--quiet", "--in-process"])
print(f"cli: status {status}", flush=True)
print(f"cli: files {sorted(os.listdir(folder))}", flush=True)
"""


@pytest.fixture
def small_disk(tmp_path):
    """A 6 MB tmpfs (root only): a disk that really fills up."""
    d = tmp_path / "disk"
    d.mkdir()
    if os.geteuid() != 0:
        pytest.skip("mounting a small tmpfs needs root")
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=6m", "tmpfs", str(d)], capture_output=True)
    if r.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here ({r.stderr.decode(errors='replace').strip()})")
    try:
        yield d
    finally:
        subprocess.run(["umount", "-l", str(d)], capture_output=True)


@pytest.mark.slow
def test_disk_full_at_any_moment_is_one_error_line_no_crash_nothing_left(small_disk, tmp_path):
    (tmp_path / "s.toml").write_text(study(tmp_path, (200, 300), name="s.toml").read_text())
    r = subprocess.run([sys.executable, "-c", _DISK_FULL_CHILD, str(small_disk)], capture_output=True,
                       text=True, env=ENV, timeout=600)
    # before: h5py tracebacks and a segmentation fault (exit 139) when the disk filled at the last
    # chunk or during the summary; now the file's space is reserved when it is created
    assert r.returncode == 0, (r.returncode, r.stderr[-2000:])
    assert "Traceback" not in r.stderr and "Exception ignored" not in r.stderr, r.stderr[-2000:]
    said = dict(line.split(": ", 1) for line in r.stdout.splitlines() if ": " in line and
                not line.split(": ", 1)[1].startswith("files"))
    files = {line.split(": ", 1)[0]: line.split(": files ", 1)[1] for line in r.stdout.splitlines() if ": files " in line}
    for moment in ["1", "3", "8", "last", "summary"]:  # filled during the run: the run ends, complete
        assert said[moment] == "finished complete=True", (moment, said[moment])
        assert files[moment] == "['filler', 'out.h5']", (moment, files[moment])  # no .partial, no lock
    # full before the run (nothing can be created) or without room for the reserved space
    # (the run's check before it starts refuses the first, with the size the file would reserve)
    assert said["create"].startswith("error: study: the results need up to 4.9 MB on disk") and "0 B free" in said["create"]
    assert said["reserve"].startswith("error: --out ") and "the disk is full" in said["reserve"], said["reserve"]
    assert "the results need up to 4.9 MB" in said["reserve"]  # 2.8 MiB raw + 2 % + 2 MiB (+ texts)
    for moment in ("create", "reserve"):
        assert files[moment] == "['filler']", (moment, files[moment])
    assert said["cli"] == "status 2"
    err = [ln for ln in r.stderr.splitlines() if ln.strip()]
    assert len(err) == 1 and err[0].startswith("error: ") and "the results need up to 4.9 MB on disk" in err[0], err
    assert files["cli"] == "['filler']"


def test_a_failing_write_is_one_error_and_no_partial_file_without_root(tmp_path, monkeypatch, capsys):
    # simulated ENOSPC (any machine): the third dataset write fails as a full disk makes it fail
    import h5py

    original = h5py.Dataset.__setitem__
    calls = [0]

    def setitem(self, key, value):
        calls[0] += 1
        if calls[0] == 3:
            raise OSError(errno.ENOSPC, "Can't write data (file write failed: ...\n, errno = 28, "
                                        "error message = 'No space left on device')")
        return original(self, key, value)

    monkeypatch.setattr(h5py.Dataset, "__setitem__", setitem)
    s = study(tmp_path, (100, 120), name="s.toml")
    assert main(["run", str(s), "--out", str(tmp_path / "r.h5"), "--quiet", "--in-process"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1, err
    assert err.startswith(f"error: --out {tmp_path / 'r.h5'}: the disk is full (No space left on device in ")
    assert "nothing was kept" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.toml"]
