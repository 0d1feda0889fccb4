"""Running a campaign: one sample at a time in workers, every outcome stored as a record.

:func:`run_sample` runs one design in a worker and never raises: a design the schema refuses
is ``invalid_input``; a run over the time limit is ``timeout`` (the limit bounds the whole
run: an interval timer in a worker process, a check after every pushover increment on a Dask
worker thread, and the coordinator stops a local worker that overruns it by a margin); any
other exception is ``error`` with its type and text. A run that ``diverged`` in its pushover
is retried (``[run] retries`` times) with a first increment 4x smaller each time; a failure
in a weight or vertical-load stage is not retried (the retry changes nothing there). The
record follows the run's ``result.json`` content (``Result.to_dict()``): key point values,
requirement checks, the dynamic stiffness, the moment on the fixed rotation grid, pile force
envelopes, timings and a model summary.

:func:`run_campaign` locks the store, binds it to the space and its base design, samples
the space, skips the sample ids already in the store (resume), records samples whose derived
values cannot be computed as ``invalid_input`` without running them, and sends the rest to
local worker processes (:mod:`.pool`; ``workers``, all cores by default; one worker runs in
this process) or a Dask scheduler (``scheduler`` address). Only one job per worker is in
flight. Workers only return records; this process commits each one as it arrives (one
transaction) and prints a progress line. SIGINT or SIGTERM stops the dispatch at once: runs
that finish within :data:`GRACE_S` are stored, the others are cancelled (they run again on
resume) and every worker is stopped.
"""

from __future__ import annotations

import functools
import os
import signal
import sys
import threading
import time
from collections import deque
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .paths import SpaceError
from .pool import WorkerPool
from .sampling import sample_space
from .space import design_dict, load_space
from .store import FINISHED, RunRecord, Store, status_summary

__all__ = ["ROTATION_GRID_POINTS", "rotation_grid", "run_sample", "run_campaign",
           "record_from_result"]

ROTATION_GRID_POINTS = 40
ROTATION_GRID_START = 1e-6  # rad
_MIN_INCREMENT = 2e-9  # rad: retries never go below (the design schema needs > 1e-9)
_REQUIREMENT_FIELDS = ("value", "required", "unit", "passed", "margin", "detail")


def rotation_grid(theta_max: float) -> np.ndarray:
    """The fixed log-spaced rotation grid of the stored curves: 40 points, 1e-6 rad to
    ``theta_max``."""
    return np.geomspace(ROTATION_GRID_START, theta_max, ROTATION_GRID_POINTS)


class _Timeout(BaseException):
    """The run's time is up (a BaseException: no ``except Exception`` in the solver may
    swallow it)."""


def _curve_on_grid(curve: dict, rotation_max: float) -> dict | None:
    rot = np.asarray(curve.get("rotation") or [], dtype=float)
    mom = np.asarray(curve.get("moment") or [], dtype=float)
    if rot.size == 0 or rot.size != mom.size:
        return None
    grid = rotation_grid(rotation_max)
    m = np.interp(grid, np.concatenate([[0.0], rot]), np.concatenate([[0.0], mom]),
                  right=np.nan)
    return {"rotation": grid.tolist(),
            "moment": [float(v) if np.isfinite(v) else None for v in m]}


def _model_summary(model: dict) -> dict:
    keys = ("dofs", "nodes", "cells", "element", "mesh", "support", "slice_length_m")
    out = {k: model.get(k) for k in keys if k in model}
    if "rows" in model:
        out["rows"] = len(model["rows"])
    solver = (model.get("versions") or {}).get("linear_solver")
    if solver is not None:
        out["linear_solver"] = solver
    return out


def record_from_result(d: dict, attempts: int, seconds: float,
                       rotation_max: float) -> RunRecord:
    """The record of a run from its ``Result.to_dict()`` (keys it lacks are left None)."""
    status = d.get("status")
    if status not in FINISHED:
        return RunRecord("error", f"unknown run status {status!r}", attempts, seconds)
    reqs = d.get("requirements")
    kps = {k: (v or {}).get("value") for k, v in (d.get("keypoints") or {}).items()}
    labels = [("", d.get("keypoints") or {})]
    ds = d.get("design_strength")
    if ds:
        kps["design_strength.ultimate"] = ((ds.get("keypoints") or {}).get("ultimate")
                                           or {}).get("value")
        labels.append(("design_strength.", ds.get("keypoints") or {}))
    for prefix, kp in labels:  # where the capacity was read, and whether it is a bound
        extra = (kp.get("ultimate") or {}).get("extra") or {}
        if "censored" in extra:
            kps[prefix + "ultimate_rotation"] = extra.get("rotation")
            kps[prefix + "ultimate_censored"] = float(bool(extra["censored"]))
    return RunRecord(
        status, d.get("message") or "", attempts, seconds,
        keypoints=kps,
        requirements=None if reqs is None else
        {k: {f: (v or {}).get(f) for f in _REQUIREMENT_FIELDS} for k, v in reqs.items()},
        dynamic=d.get("dynamic"),
        curve=_curve_on_grid(d.get("curve") or {}, rotation_max),
        piles=d.get("piles"), timings=d.get("timings"),
        model=_model_summary(d.get("model") or {}), quantities=d.get("quantities"))


def _retry_helps(result: dict) -> bool:
    """A retry shrinks the first increment of the last stage (the pushover or settlement
    run): it helps only a run that diverged there (a weight or vertical-load stage that
    failed would fail again alike)."""
    stages = result.get("stages") or []
    return bool(stages) and stages[-1].get("status") == "diverged" and \
        stages[-1].get("name") in ("pushover", "settlement") and \
        all(st.get("status") == "ok" for st in stages[:-1])


def _raise_timeout(signum: int, frame: Any) -> None:
    raise _Timeout


def run_sample(design_data: dict, time_limit: float, retries: int,
               dynamic: bool = True, design_strength: bool = True) -> RunRecord:
    """Run one design (in a worker). Never raises: every outcome is a :class:`RunRecord`.

    The time limit bounds the whole run (build, every stage, both pushovers, the dynamic
    stiffness): an interval timer (SIGALRM) where the run is in a process's main thread,
    and a check after every converged pushover increment everywhere (a Dask worker thread).
    """
    t0 = time.perf_counter()
    alarm = hasattr(signal, "setitimer") and \
        threading.current_thread() is threading.main_thread()
    old_handler = None
    if alarm:
        old_handler = signal.signal(signal.SIGALRM, _raise_timeout)
        signal.setitimer(signal.ITIMER_REAL, time_limit)
    try:
        return _run_sample(design_data, time_limit, retries, dynamic, design_strength, t0)
    except _Timeout:  # outside a pushover attempt (those record their attempt number)
        return RunRecord("timeout", f"over the time limit of {time_limit:g} s (the whole "
                         "run: build, stages and pushovers)", 1, time.perf_counter() - t0)
    finally:
        if alarm:
            signal.setitimer(signal.ITIMER_REAL, 0.0)
            signal.signal(signal.SIGALRM, old_handler)


def _run_sample(design_data: dict, time_limit: float, retries: int, dynamic: bool,
                design_strength: bool, t0: float) -> RunRecord:
    attempts = 0
    try:
        from femcore.foundation.design import DesignError, design_from_dict
        from femcore.foundation.quantities import quantities
        from femcore.foundation.run import run_design

        try:
            design = design_from_dict(design_data)
        except DesignError as exc:
            return RunRecord("invalid_input", "; ".join(exc.problems), 0,
                             time.perf_counter() - t0)
        if not design_strength:
            design = design.model_copy(update={"design_strength": None})

        def guard(_rec: Any) -> None:
            if time.perf_counter() - t0 > time_limit:
                raise _Timeout

        q = quantities(design)  # from the geometry: kept whatever the run's outcome

        def with_q(rec: RunRecord) -> RunRecord:
            if rec.quantities is None:
                rec.quantities = q
            return rec

        first = design.loading.initial_increment
        floor = min(first, _MIN_INCREMENT)
        result: dict = {}
        previous = None
        while attempts <= retries:
            step = max(first / 4**attempts, floor)
            if previous is not None and step >= previous:
                break  # the first increment cannot shrink further
            previous = step
            attempts += 1
            d = design.model_copy(update={"loading": design.loading.model_copy(
                update={"initial_increment": step})})
            try:
                result = run_design(d, progress=guard, dynamic=dynamic).to_dict()
            except _Timeout:
                return with_q(RunRecord("timeout", f"over the time limit of {time_limit:g} s "
                                 f"(attempt {attempts})", attempts,
                                 time.perf_counter() - t0))
            except DesignError as exc:
                return RunRecord("invalid_input", "; ".join(exc.problems), attempts,
                                 time.perf_counter() - t0)
            if result.get("status") != "diverged" or not _retry_helps(result):
                break
        return with_q(record_from_result(result, attempts, time.perf_counter() - t0,
                                         design.loading.rotation_max))
    except Exception as exc:  # recorded, never lost: the campaign goes on
        return RunRecord("error", f"{type(exc).__name__}: {exc}", attempts,
                         time.perf_counter() - t0)


@functools.lru_cache(maxsize=1)
def _versions() -> tuple[str, str | None, str]:
    """tiltfe version, git hash of the source tree (None outside a checkout), gmsh version."""
    from femcore import __version__

    try:
        from meshing import gmsh_version

        gmsh = gmsh_version()
    except Exception as exc:  # provenance only: a missing gmsh does not stop a campaign
        gmsh = f"unavailable ({type(exc).__name__})"
    from femcore.foundation.run import source_revision

    git = source_revision()
    return __version__, git or None, gmsh


def _provenance(design_data: dict) -> dict:
    version, git, gmsh = _versions()
    an = design_data.get("analysis", {})
    return {"tiltfe": version, "git": git, "gmsh": gmsh, "mesh": an.get("mesh", "standard"),
            "element": an.get("element", "T15"), "support": an.get("support", "continuum")}


LOG_EVERY_S = 30.0  # s between progress lines when stderr is not a terminal
GRACE_S = 3.0  # s: after a stop request, runs finishing within this are still stored
SCHEDULER_TIMEOUT_S = 5.0


class _Stop:
    """SIGINT / SIGTERM handling of the coordinator (main thread only).

    The first signal sets :attr:`signal` (the dispatch loop stops sending work, stores what
    finishes within :data:`GRACE_S` and cancels the rest); with ``immediate`` (one worker in
    this process, or Dask) or on a second signal it raises KeyboardInterrupt at once.
    """

    def __init__(self, immediate: bool) -> None:
        self.immediate = immediate
        self.signal: int | None = None
        self._old: dict[int, Any] = {}

    def _handle(self, signum: int, frame: Any) -> None:
        first = self.signal is None
        self.signal = self.signal or signum
        if self.immediate or not first:
            raise KeyboardInterrupt

    def __enter__(self) -> _Stop:
        if threading.current_thread() is threading.main_thread():
            for sig in (signal.SIGINT, signal.SIGTERM):
                self._old[sig] = signal.signal(sig, self._handle)
        return self

    def __exit__(self, *exc: object) -> None:
        for sig, old in self._old.items():
            signal.signal(sig, old)


@dataclass
class _Tally:
    """What a dispatch did: runs cancelled in flight when it was stopped."""

    cancelled: int = 0


def _connect(address: str):
    """A Dask client of ``address``; SpaceError within a few seconds when unreachable."""
    try:
        from dask.distributed import Client
    except ImportError:
        raise SpaceError(f"--scheduler {address}: Dask is not installed (pip install "
                         "'dask[distributed]')") from None
    try:
        return Client(address, timeout=SCHEDULER_TIMEOUT_S)
    except Exception as exc:  # unreachable, refused, a bad address: all the user's to fix
        raise SpaceError(f"--scheduler {address}: cannot reach the Dask scheduler within "
                         f"{SCHEDULER_TIMEOUT_S:g} s ({type(exc).__name__}: {exc}); check "
                         "the address (tcp://host:8786) and that the scheduler runs") from None


def _dispatch(jobs: list[tuple[dict, dict]], args: tuple, workers: int, client: Any,
              stop: _Stop, tally: _Tally,
              hard_limit: float) -> Iterator[tuple[dict, dict, RunRecord]]:
    """``(sample, design, record)`` of every job, in order of completion."""
    if client is not None:
        from dask.distributed import as_completed

        futures = {client.submit(run_sample, data, *args, pure=False): (s, data)
                   for s, data in jobs}
        try:
            for fut in as_completed(futures):
                s, data = futures.pop(fut)
                try:
                    rec = fut.result()
                except Exception as exc:  # a lost Dask worker: recorded, the campaign goes on
                    rec = RunRecord("error", f"Dask: {type(exc).__name__}: {exc}")
                yield s, data, rec
        finally:
            tally.cancelled = len(futures)
            client.cancel(list(futures))
            client.close()
        return
    if workers <= 1:
        for s, data in jobs:
            yield s, data, run_sample(data, *args)
        return
    queue = deque(jobs)
    sent: dict[int, tuple[dict, dict]] = {}
    pool = WorkerPool(workers, run_sample, hard_limit=hard_limit)
    try:
        grace_end = None
        while queue or pool.busy:
            if stop.signal is not None:
                if grace_end is None:
                    grace_end = time.monotonic() + GRACE_S
                    queue.clear()
                if time.monotonic() > grace_end:
                    break
            while queue and pool.idle:
                s, data = queue.popleft()
                sent[s["id"]] = (s, data)
                pool.submit(s["id"], (data, *args))
            for key, rec in pool.poll(0.2):
                s, data = sent.pop(key)
                yield s, data, rec
    finally:
        tally.cancelled = len(pool.in_flight())
        pool.close()


class _Progress:
    """The one-line progress counter on stderr."""

    def __init__(self, total: int, quiet: bool) -> None:
        self.total, self.quiet = total, quiet
        self.done = self.failed = self.ran = 0
        self.t0 = time.perf_counter()
        self.stream = sys.stderr
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.last = float("-inf")

    def add(self, rec: RunRecord, ran: bool = True) -> None:
        self.done += 1
        self.ran += ran
        self.failed += rec.status not in ("ok", "censored")
        if self.quiet:
            return
        elapsed = time.perf_counter() - self.t0
        rate = self.ran / max(elapsed, 1e-9)
        left = (self.total - self.done) / rate if self.ran and rate > 0 else None
        eta = "" if left is None or self.done >= self.total else \
            f", about {left / 60:.0f} min left" if left >= 90 else f", about {left:.0f} s left"
        line = (f"  {self.done}/{self.total} recorded, {self.failed} failed, "
                f"{rate * 3600:.0f} runs/hour{eta}")
        if self.tty:  # one line, rewritten in place
            self.stream.write(f"\r{line}   ")
        elif elapsed - self.last >= LOG_EVERY_S or self.done == self.total:
            self.stream.write(line + "\n")  # a log file: a line now and then
            self.last = elapsed
        self.stream.flush()

    def end(self) -> None:
        if not self.quiet and self.done and self.tty:
            self.stream.write("\n")
            self.stream.flush()


def run_campaign(space_path: str | Path, store_path: str | Path, workers: int | None = None,
                 scheduler: str | None = None, quiet: bool = False,
                 limit: int | None = None) -> dict:
    """Run (or resume) the campaign of a space file into a store; returns
    :func:`~femcore.workflows.campaign.store.status_summary` with ``interrupted`` (the
    signal's name, or None), ``cancelled`` (runs in flight when stopped) and ``recorded``
    (rows added now).

    ``limit`` runs at most that many of the remaining samples (in id order). The store is
    locked for the whole run (a second coordinator is refused) and bound to the space and
    its base design (a changed input is refused, naming what changed). SIGINT or SIGTERM
    stops the dispatch at once, keeps what finishes within a few seconds and stops every
    worker.
    """
    if limit is not None and limit < 0:
        raise SpaceError(f"--limit {limit}: must be 0 or more (the number of samples to run "
                         "now; leave it out to run every remaining sample)")
    if workers is not None and workers < 1:
        raise SpaceError(f"--workers {workers}: must be 1 or more (local worker processes)")
    space = load_space(space_path)
    samples = sample_space(space)
    client = _connect(scheduler) if scheduler else None
    try:
        store = Store(store_path)
    except Exception:
        if client is not None:
            client.close()
        raise
    with store:
        try:
            store.lock()
            store.claim(space.digest(), space.source, space.base_digest(), len(samples),
                        base=space.base)
        except Exception:
            if client is not None:
                client.close()
            raise
        done = store.finished_ids()
        todo = [s for s in samples if s["id"] not in done]
        if limit is not None:
            todo = todo[:limit]
        progress = _Progress(len(todo), quiet)
        jobs = []
        for s in todo:
            try:
                data = design_dict(space, s)
            except SpaceError as exc:  # stored with its sampled values, never run
                rec = RunRecord("invalid_input", f"derived value: {exc}")
                store.add(s, design_dict(space, s, upto=0), rec, {})
                progress.add(rec, ran=False)
                continue
            jobs.append((s, data))
        n = 0 if client is not None else min(workers or os.cpu_count() or 1, len(jobs))
        args = (space.time_limit, space.retries, space.dynamic, space.design_strength)
        tally = _Tally()
        hard = space.time_limit + max(30.0, 0.2 * space.time_limit)
        in_process = client is None and n <= 1
        with _Stop(immediate=not (client is None and n > 1)) as stop:
            results = _dispatch(jobs, args, n, client, stop, tally, hard)
            try:
                for s, data, rec in results:
                    store.add(s, data, rec, _provenance(data))
                    progress.add(rec)
            except KeyboardInterrupt:
                stop.signal = stop.signal or signal.SIGINT
                if in_process and progress.ran < len(jobs):
                    tally.cancelled = 1  # the run that was going on in this process
            finally:
                results.close()  # stops the workers
        progress.end()
        summary = status_summary(store)
    summary["interrupted"] = None if stop.signal is None else signal.Signals(stop.signal).name
    summary["cancelled"] = tally.cancelled
    summary["recorded"] = progress.done
    return summary
