"""Local worker processes of a campaign, under the coordinator's full control.

The coordinator (the ``campaign run`` process) keeps at most one job per worker in flight, so
stopping means only the runs in flight are left; it can stop a worker at any time:

* a worker ignores SIGINT (a Ctrl-C in the terminal reaches the whole process group; only the
  coordinator decides what happens) and exits by itself within about a second when its
  coordinator is gone, however the coordinator ended (SIGKILL included);
* a worker that dies (killed, out of memory) yields an ``error`` record for its job and is
  replaced; a job that runs past its hard limit (the time limit plus a margin, for a hang in
  compiled code the cooperative limit cannot reach) is stopped and recorded ``timeout``;
* :meth:`WorkerPool.close` asks idle workers to leave, then terminates and finally kills any
  worker still running, so no process outlives the campaign.

Workers are started with the ``spawn`` method (no state inherited from the coordinator).
"""

from __future__ import annotations

import multiprocessing as mp
import os
import signal
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from multiprocessing.connection import Connection, wait
from typing import Any

from .store import RunRecord

__all__ = ["WorkerPool", "PARENT_POLL_S"]

PARENT_POLL_S = 0.5  # s between a worker's checks that its coordinator is alive


def _watch_parent(parent: int) -> None:
    while True:
        time.sleep(PARENT_POLL_S)
        if os.getppid() != parent:  # the coordinator is gone: leave at once
            os._exit(3)


def _worker_main(conn: Connection, parent: int, target: Callable[..., RunRecord],
                 threads: int = 1) -> None:
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    # the optional PARDISO solver (MKL, loaded at its first use) gets this worker's share of
    # the cores; n workers with all cores each would oversubscribe the machine
    os.environ.setdefault("MKL_NUM_THREADS", str(threads))
    threading.Thread(target=_watch_parent, args=(parent,), daemon=True).start()
    while True:
        try:
            msg = conn.recv()
        except (EOFError, OSError):
            return
        if msg is None:
            return
        key, args = msg
        conn.send((key, target(*args)))


@dataclass
class _Worker:
    process: Any
    conn: Connection
    job: Any = None  # key of the job in flight
    started: float = 0.0
    args: tuple = field(default_factory=tuple)


class WorkerPool:
    """``n`` worker processes running ``target(*args)`` (which returns a RunRecord)."""

    def __init__(self, n: int, target: Callable[..., RunRecord],
                 hard_limit: float | None = None) -> None:
        self._ctx = mp.get_context("spawn")
        self._target = target
        self.hard_limit = hard_limit
        self._threads = max(1, (os.cpu_count() or 1) // max(n, 1))
        self.workers: list[_Worker] = [self._start() for _ in range(n)]

    def _start(self) -> _Worker:
        mine, theirs = self._ctx.Pipe()
        p = self._ctx.Process(target=_worker_main,
                              args=(theirs, os.getpid(), self._target, self._threads),
                              daemon=True)
        p.start()
        theirs.close()
        return _Worker(p, mine)

    @property
    def idle(self) -> int:
        return sum(w.job is None for w in self.workers)

    @property
    def busy(self) -> int:
        return len(self.workers) - self.idle

    def submit(self, key: Any, args: tuple) -> None:
        w = next(w for w in self.workers if w.job is None)
        w.conn.send((key, args))
        w.job, w.started, w.args = key, time.monotonic(), args

    def poll(self, timeout: float) -> list[tuple[Any, RunRecord]]:
        """Finished jobs ``(key, record)``, waiting at most ``timeout`` s for the first."""
        busy = [w for w in self.workers if w.job is not None]
        if not busy:
            return []
        ready = wait([w.conn for w in busy] + [w.process.sentinel for w in busy], timeout)
        out = []
        now = time.monotonic()
        for w in busy:
            if w.conn in ready:
                try:
                    key, rec = w.conn.recv()
                except (EOFError, OSError):
                    out.append(self._replace(w, "error", "the worker process died "
                                             f"(exit code {w.process.exitcode})"))
                    continue
                w.job = None
                out.append((key, rec))
            elif w.process.sentinel in ready:
                w.process.join(1.0)
                out.append(self._replace(w, "error", "the worker process died (exit code "
                                         f"{w.process.exitcode}, e.g. out of memory)"))
            elif self.hard_limit is not None and now - w.started > self.hard_limit:
                out.append(self._replace(w, "timeout", "stopped by the coordinator after "
                                         f"{now - w.started:.0f} s (the run did not reach "
                                         "its own time check)"))
        return out

    def _replace(self, w: _Worker, status: str, message: str) -> tuple[Any, RunRecord]:
        key, seconds = w.job, time.monotonic() - w.started
        _stop(w)
        self.workers[self.workers.index(w)] = self._start()
        return key, RunRecord(status, message, 1, seconds)  # type: ignore[arg-type]

    def in_flight(self) -> list[Any]:
        return [w.job for w in self.workers if w.job is not None]

    def close(self, wait_s: float = 2.0) -> None:
        """Stop every worker: idle ones leave, busy ones are terminated (then killed)."""
        for w in self.workers:
            if w.job is None:
                try:
                    w.conn.send(None)
                except OSError:
                    pass
            else:
                w.process.terminate()
        deadline = time.monotonic() + wait_s
        for w in self.workers:
            w.process.join(max(deadline - time.monotonic(), 0.05))
        for w in self.workers:
            _stop(w)
        self.workers = []

    def __enter__(self) -> WorkerPool:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _stop(w: _Worker) -> None:
    if w.process.is_alive():
        w.process.terminate()
        w.process.join(1.0)
    if w.process.is_alive():
        w.process.kill()
        w.process.join(1.0)
    w.conn.close()
