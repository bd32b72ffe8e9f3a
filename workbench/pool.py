"""A small pool of worker processes that can always be stopped: one pipe per worker, no threads.

Why not ``concurrent.futures.ProcessPoolExecutor``: its workers share one result pipe that a
manager thread reads. A worker stopped while it writes a result (a cancel terminates the workers:
their chunks would be thrown away) leaves half a message in that pipe; the manager thread waits for
the rest forever (the parent holds the pipe's write end too, so no end-of-file comes), and the
interpreter's exit joins that thread: the cancelled run never ends. Here every worker has its own
pipe, the parent closes its copy of the worker's end, and everything is read in the caller's thread
with :func:`multiprocessing.connection.wait`: a worker that dies mid-message is an end-of-file on
its own pipe, seen at once, and stopping the pool is terminate + join, nothing else to wait for.

Standard library only. Used by :mod:`workbench.runner` for ``executor="processes"``.
"""
from __future__ import annotations

import multiprocessing as mp
import pickle
from collections import deque
from multiprocessing.connection import wait as _wait

__all__ = ["WorkerPool", "WorkerDied"]

_CONTEXT, _TASK, _STOP = b"C", b"T", b"S"


class WorkerDied(RuntimeError):
    """A worker process ended (killed, out of memory, failed start-up) before answering."""


def _worker_main(conn, initializer, initargs):
    """A worker: run ``initializer``, then answer tasks ``fn(*context, item)`` one by one until the
    parent says stop or its end of the pipe closes (the parent is gone)."""
    if initializer is not None:
        initializer(*initargs)
    fn = context = None
    context_error = None
    while True:
        try:
            raw = conn.recv_bytes()
        except (EOFError, OSError):
            return
        tag, body = raw[:1], raw[1:]
        if tag == _STOP:
            return
        if tag == _CONTEXT:
            try:
                fn, context = pickle.loads(body)
                context_error = None
            except BaseException as e:  # a class this process cannot import, say
                fn = context = None
                context_error = e
            continue
        key, item = pickle.loads(body)
        try:
            if context_error is not None:
                raise context_error
            answer = ("ok", key, fn(*context, item))
        except BaseException as e:
            answer = ("err", key, e)
        try:
            conn.send(answer)
        except Exception as e:  # an answer that does not pickle: say what it was instead
            conn.send(("err", key, RuntimeError(f"worker could not send its answer: {type(e).__name__}: {e}")))


class _Worker:
    __slots__ = ("process", "conn", "pending")

    def __init__(self, process, conn):
        self.process, self.conn, self.pending = process, conn, deque()


class WorkerPool:
    """``n_workers`` worker processes (started at the first :meth:`run`, restarted after a
    :meth:`terminate`), each with its own pipe.

    ``start_guard`` is a context manager entered while the processes start (the runner blocks
    SIGINT there, so a Ctrl-C at that moment cannot reach a worker before its initializer runs).
    """

    def __init__(self, n_workers: int, initializer=None, initargs=(), start_method: str = "spawn",
                 start_guard=None):
        if int(n_workers) < 1:
            raise ValueError(f"n_workers: expected >= 1, got {n_workers!r}")
        self.n_workers = int(n_workers)
        self._initializer, self._initargs = initializer, tuple(initargs)
        self._ctx = mp.get_context(start_method)
        self._guard = start_guard
        self._workers: list[_Worker] = []

    # -- life cycle ------------------------------------------------------------------------------
    @property
    def pids(self) -> list[int]:
        return [w.process.pid for w in self._workers if w.process.pid is not None]

    def _start(self):
        if self._workers:
            return
        guard = self._guard() if self._guard is not None else None
        if guard is not None:
            guard.__enter__()
        try:
            for _ in range(self.n_workers):
                parent_end, child_end = self._ctx.Pipe(duplex=True)
                p = self._ctx.Process(target=_worker_main, args=(child_end, self._initializer, self._initargs),
                                      name="workbench-worker", daemon=True)
                p.start()
                child_end.close()  # the worker's end lives only in the worker: its death is EOF here
                self._workers.append(_Worker(p, parent_end))
        except BaseException:
            self.terminate()
            raise
        finally:
            if guard is not None:
                guard.__exit__(None, None, None)

    def close(self, timeout: float = 5.0):
        """Ask idle workers to stop and wait for them (terminated after ``timeout`` seconds)."""
        for w in self._workers:
            try:
                w.conn.send_bytes(_STOP)
            except OSError:
                pass
        for w in self._workers:
            w.process.join(timeout)
        self.terminate()

    def terminate(self, timeout: float = 5.0):
        """Stop every worker now (SIGTERM, then SIGKILL after ``timeout`` s) and close the pipes.
        Nothing else waits: the pool can be used again (new workers start at the next run)."""
        workers, self._workers = self._workers, []
        for w in workers:
            if w.process.is_alive():
                try:
                    w.process.terminate()
                except OSError:
                    pass
        for w in workers:
            w.process.join(timeout)
            if w.process.is_alive():
                w.process.kill()
                w.process.join(timeout)
            try:
                w.conn.close()
            except OSError:
                pass
            try:
                w.process.close()
            except ValueError:
                pass

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        if exc[0] is None:
            self.close()
        else:
            self.terminate()
        return False

    # -- work ------------------------------------------------------------------------------------
    def run(self, fn, context: tuple, items, on_result, is_cancelled=lambda: False, per_worker: int = 2,
            poll_s: float = 0.1) -> bool:
        """Compute ``fn(*context, item)`` for every item on the workers, calling
        ``on_result(answer)`` in this thread as answers come (in completion order); at most
        ``per_worker`` items are queued on a worker at once. ``fn`` must be importable by
        reference (module level). Returns False when ``is_cancelled()`` became true (polled at
        least every ``poll_s`` seconds; the workers are then terminated, their work dropped), True
        when every item was answered. A worker's exception is raised here (the pool is terminated
        first); a worker that died raises :class:`WorkerDied`.
        """
        ok = False
        try:
            self._start()
            blob = _CONTEXT + pickle.dumps((fn, tuple(context)), protocol=pickle.HIGHEST_PROTOCOL)
            items = iter(items)
            key = 0
            for w in self._workers:
                self._send(w, blob)

            def feed(w):
                nonlocal key
                while len(w.pending) < per_worker:
                    item = next(items, _END)
                    if item is _END:
                        return
                    self._send(w, _TASK + pickle.dumps((key, item), protocol=pickle.HIGHEST_PROTOCOL))
                    w.pending.append(key)
                    key += 1

            for w in self._workers:
                feed(w)
            while any(w.pending for w in self._workers):
                if is_cancelled():
                    return False
                busy = [w for w in self._workers if w.pending]
                ready = _wait([w.conn for w in busy] + [w.process.sentinel for w in busy], timeout=poll_s)
                if not ready:
                    continue
                for w in busy:
                    if w.conn not in ready and w.process.sentinel not in ready:
                        continue
                    if not w.conn.poll():  # ended with nothing (more) to say
                        w.process.join(1.0)
                        raise WorkerDied(f"worker process {w.process.pid} ended (exit code "
                                         f"{w.process.exitcode}) before answering")
                    try:
                        status, k, value = w.conn.recv()
                    except (EOFError, OSError):
                        w.process.join(1.0)
                        raise WorkerDied(f"worker process {w.process.pid} ended (exit code "
                                         f"{w.process.exitcode}) in the middle of its answer") from None
                    w.pending.remove(k)
                    if status == "err":
                        raise value
                    on_result(value)
                    if is_cancelled():
                        return False
                    feed(w)
            ok = True
            return True
        finally:
            if not ok:
                self.terminate()

    def map(self, fn, items) -> list:
        """``[fn(item) for item in items]`` on the workers, in completion order."""
        out = []
        self.run(fn, (), items, out.append)
        return out

    def _send(self, w, data: bytes):
        try:
            w.conn.send_bytes(data)
        except OSError:
            w.process.join(1.0)
            raise WorkerDied(f"worker process {w.process.pid} ended (exit code {w.process.exitcode}) "
                             "before it took its work") from None


_END = object()
