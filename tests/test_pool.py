"""The worker pool behind ``executor="processes"``: answers, errors, dead workers and cancels.

The cancel case is the one that hung a cancelled command-line run for ever with the standard
library's process pool: workers terminated while one of them was in the middle of sending a large
result (the same script with ``concurrent.futures.ProcessPoolExecutor``, its workers terminated
after the first answer, printed its last line and then did not exit within 60 s on this 2-core
machine). Here every outcome is asserted on what happened (answers, exceptions, processes left), with
timeouts that only catch a hang.
"""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import psutil
import pytest

from workbench.pool import WorkerDied, WorkerPool

ROOT = Path(__file__).resolve().parents[1]


def square(offset, x):
    return offset + x * x


def fail_on_three(x):
    if x == 3:
        raise ValueError(f"item {x} is bad")
    return x


def die_on_two(x):
    if x == 2:
        os._exit(7)
    return x


def pid_of_worker(_):
    return os.getpid()


def test_answers_are_those_of_a_plain_loop_and_the_pool_is_reused():
    with WorkerPool(2) as pool:
        got = []
        assert pool.run(square, (10,), range(25), got.append) is True
        assert sorted(got) == [10 + x * x for x in range(25)]
        pids = set(pool.pids)
        assert len(pids) == 2
        assert sorted(pool.map(pid_of_worker, range(8))) and set(pool.map(pid_of_worker, range(8))) <= pids
    assert pool.pids == []


def test_a_worker_exception_is_raised_in_the_caller_and_no_worker_is_left():
    pool = WorkerPool(2)
    with pytest.raises(ValueError, match="item 3 is bad"):
        pool.map(fail_on_three, range(10))
    assert pool.pids == []
    assert sorted(pool.map(fail_on_three, [0, 1, 2])) == [0, 1, 2]  # new workers start on demand
    pool.close()


def test_a_worker_that_dies_raises_worker_died_naming_its_exit_code():
    pool = WorkerPool(2)
    started = set(pool.map(pid_of_worker, range(4)))
    with pytest.raises(WorkerDied, match="exit code 7"):
        pool.map(die_on_two, range(6))
    assert pool.pids == []
    assert [pid for pid in started if psutil.pid_exists(pid)
            and psutil.Process(pid).status() != psutil.STATUS_ZOMBIE] == []


def test_bad_settings_are_refused():
    with pytest.raises(ValueError, match="n_workers"):
        WorkerPool(0)


CANCEL_WHILE_SENDING = textwrap.dedent("""
    import sys
    sys.path.insert(0, {root!r})
    from tests.test_pool import big_answer
    from workbench.pool import WorkerPool

    if __name__ == "__main__":
        pool = WorkerPool(2)
        got = []
        # 64 MB answers: the socket holds a few hundred kB, so when the first answer has been read
        # the other worker is blocked half-way through writing its own; the cancel terminates it there
        done = pool.run(big_answer, (), range(8), got.append, is_cancelled=lambda: len(got) >= 1)
        print(done, len(got), pool.pids, flush=True)
""")


def big_answer(i):
    return bytes(64 * 1024 * 1024)


def test_a_cancel_while_a_worker_is_half_way_through_sending_ends_at_once_and_the_interpreter_exits():
    proc = subprocess.Popen([sys.executable, "-c", CANCEL_WHILE_SENDING.format(root=str(ROOT))],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT)
    try:
        out, err = proc.communicate(timeout=300)  # a hang fails here
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.communicate()
    assert proc.returncode == 0, err
    assert out.split() == ["False", "1", "[]"]
    assert "Traceback" not in err


def test_a_cancelled_run_leaves_no_worker_behind():
    pool = WorkerPool(2)
    started = set(pool.map(pid_of_worker, range(4)))
    seen = []
    assert pool.run(square, (0,), range(1000), seen.append, is_cancelled=lambda: len(seen) >= 3) is False
    assert 3 <= len(seen) < 1000
    assert pool.pids == []
    assert [pid for pid in started if psutil.pid_exists(pid)
            and psutil.Process(pid).status() != psutil.STATUS_ZOMBIE] == []


def test_ctrl_c_is_the_callers_business_a_worker_ignores_it():
    # the runner's guard ignores SIGINT while workers start; a worker started by a bare pool keeps
    # Python's default handler (the runner's initializer then ignores it)
    from workbench.runner import worker_pool

    pool = worker_pool(1)
    try:
        pool.map(pid_of_worker, [0])
        (pid,) = pool.pids
        with open(f"/proc/{pid}/status") as f:
            ignored = int(next(line for line in f if line.startswith("SigIgn:")).split()[1], 16)
        assert ignored & (1 << (signal.SIGINT - 1))
        assert signal.getsignal(signal.SIGINT) is signal.default_int_handler  # the caller's is back
    finally:
        pool.close()
