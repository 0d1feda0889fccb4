"""Running a campaign: one sample at a time in workers, every outcome stored as a record.

:func:`run_sample` runs one design in a worker and never raises: a design the schema refuses
is ``invalid_input``, a run over the time limit is ``timeout`` (the limit is cooperative: it
is checked after every converged pushover increment, so it works alike in a local process
and on a Dask worker), any other exception is ``error`` with its type and text, and a
``diverged`` run is retried (``[run] retries`` times) with a first increment 4x smaller each
time. The record follows the run's ``result.json`` content (``Result.to_dict()``): key point
values, requirement checks, the dynamic stiffness, the moment on the fixed rotation grid,
pile force envelopes, timings and a model summary.

:func:`run_campaign` samples the space, skips the sample ids already in the store (resume),
records samples whose derived values cannot be computed as ``invalid_input`` without running
them, and sends the rest to a local process pool (``workers``, all cores by default; one
worker runs in this process) or a Dask scheduler (``scheduler`` address). Workers only return
records; this process commits each one as it arrives and prints a progress line.
"""

from __future__ import annotations

import functools
import os
import subprocess
import sys
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np

from .paths import SpaceError
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


class _Timeout(Exception):
    pass


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
        model=_model_summary(d.get("model") or {}))


def run_sample(design_data: dict, time_limit: float, retries: int,
               dynamic: bool = True, design_strength: bool = True) -> RunRecord:
    """Run one design (in a worker). Never raises: every outcome is a :class:`RunRecord`."""
    t0 = time.perf_counter()
    attempts = 0
    try:
        from femcore.foundation.design import DesignError, design_from_dict
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
                return RunRecord("timeout", f"over the time limit of {time_limit:g} s "
                                 f"(attempt {attempts})", attempts, time.perf_counter() - t0)
            except DesignError as exc:
                return RunRecord("invalid_input", "; ".join(exc.problems), attempts,
                                 time.perf_counter() - t0)
            if result.get("status") != "diverged":
                break
        return record_from_result(result, attempts, time.perf_counter() - t0,
                                  design.loading.rotation_max)
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
    try:
        git = subprocess.run(["git", "rev-parse", "--short", "HEAD"], capture_output=True,
                             text=True, cwd=Path(__file__).parent, timeout=5).stdout.strip()
    except Exception:  # pragma: no cover - no git
        git = ""
    return __version__, git or None, gmsh


def _provenance(design_data: dict) -> dict:
    version, git, gmsh = _versions()
    an = design_data.get("analysis", {})
    return {"tiltfe": version, "git": git, "gmsh": gmsh, "mesh": an.get("mesh", "standard"),
            "element": an.get("element", "T15"), "support": an.get("support", "continuum")}


def _dispatch(jobs: list[tuple[dict, dict]], args: tuple, workers: int | None,
              scheduler: str | None) -> Iterator[tuple[dict, dict, RunRecord]]:
    """``(sample, design, record)`` of every job, in order of completion."""
    if scheduler:
        from dask.distributed import Client, as_completed

        client = Client(scheduler)
        try:
            futures = {client.submit(run_sample, data, *args, pure=False): (s, data)
                       for s, data in jobs}
            for fut in as_completed(futures):
                s, data = futures[fut]
                yield s, data, fut.result()
        finally:
            client.close()
        return
    n = min(workers or os.cpu_count() or 1, len(jobs))
    if n <= 1:
        for s, data in jobs:
            yield s, data, run_sample(data, *args)
        return
    import multiprocessing as mp
    from concurrent.futures import ProcessPoolExecutor, as_completed

    with ProcessPoolExecutor(max_workers=n, mp_context=mp.get_context("spawn")) as pool:
        futures = {pool.submit(run_sample, data, *args): (s, data) for s, data in jobs}
        try:
            for fut in as_completed(futures):
                s, data = futures[fut]
                yield s, data, fut.result()
        finally:
            for fut in futures:
                fut.cancel()


def _progress_line(done: int, total: int, failed: int, t0: float, stream: Any) -> None:
    rate = done / max(time.perf_counter() - t0, 1e-9) * 3600
    stream.write(f"\r  {done}/{total} done, {failed} failed, {rate:.0f} runs/hour   ")
    stream.flush()


def run_campaign(space_path: str | Path, store_path: str | Path, workers: int | None = None,
                 scheduler: str | None = None, quiet: bool = False,
                 limit: int | None = None) -> dict:
    """Run (or resume) the campaign of a space file into a store; returns
    :func:`~femcore.workflows.campaign.store.status_summary`.

    ``limit`` runs at most that many of the remaining samples (in id order).
    """
    space = load_space(space_path)
    samples = sample_space(space)
    with Store(store_path) as store:
        store.claim(space.digest(), space.source, space.base_digest(), len(samples))
        done = store.finished_ids()
        todo = [s for s in samples if s["id"] not in done]
        if limit is not None:
            todo = todo[:limit]
        jobs = []
        for s in todo:
            try:
                data = design_dict(space, s)
            except SpaceError as exc:  # stored with its sampled values, never run
                store.add(s, design_dict(space, s, upto=0),
                          RunRecord("invalid_input", f"derived value: {exc}"), {})
                continue
            jobs.append((s, data))
        stream = sys.stderr
        t0 = time.perf_counter()
        n_done = n_failed = 0
        args = (space.time_limit, space.retries, space.dynamic, space.design_strength)
        for s, data, rec in _dispatch(jobs, args, workers, scheduler):
            store.add(s, data, rec, _provenance(data))
            n_done += 1
            n_failed += rec.status not in ("ok", "censored")
            if not quiet:
                _progress_line(n_done, len(jobs), n_failed, t0, stream)
        if not quiet and jobs:
            stream.write("\n")
        return status_summary(store)
