"""Run one heavy benchmark case in a fresh interpreter with a time and a memory limit.

Used by the scripts that build stored 3D tables (:mod:`benchmarks.ring3d_table`,
:mod:`benchmarks.raked3d`): a case that runs out of time or memory is recorded as
``{"skipped": reason}`` and the table goes on. The script's ``main`` calls
:func:`add_arguments` and, when started as a child (``--child SPEC``), :func:`child_main`.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable

__all__ = ["add_arguments", "child_main", "run_in_child"]


def add_arguments(ap) -> None:
    """The ``--timeout`` and ``--mem-gb`` options and the hidden child options."""
    ap.add_argument("--timeout", type=float, default=360.0,
                    help="seconds allowed per case before it is dropped (default 360)")
    ap.add_argument("--mem-gb", type=float, default=12.0,
                    help="address-space limit per case in GiB, 0 for none (default 12)")
    ap.add_argument("--child", help=argparse.SUPPRESS)
    ap.add_argument("--child-out", help=argparse.SUPPRESS)


def child_main(spec: str, out: str, run: Callable[[str], dict]) -> int:
    """Child entry: ``run(spec)`` and write its row (or an out-of-memory note) to ``out``."""
    try:
        row = run(spec)
    except MemoryError:
        row = {"skipped": "out of memory (MemoryError)"}
    with open(out, "w") as fh:
        json.dump(row, fh)
    return 0


def _limit_memory(gb: float):
    def set_limit():
        import resource

        b = int(gb * 2**30)
        resource.setrlimit(resource.RLIMIT_AS, (b, b))
    return set_limit


def run_in_child(module: str, spec: str, timeout: float, mem_gb: float) -> dict:
    """``python -m module --child spec`` under the limits; its row plus ``wall_seconds``."""
    fd, out = tempfile.mkstemp(suffix=".json")
    os.close(fd)
    cmd = [sys.executable, "-m", module, "--child", spec, "--child-out", out]
    t0 = time.perf_counter()
    try:
        proc = subprocess.run(cmd, timeout=timeout, capture_output=True, text=True,
                              preexec_fn=_limit_memory(mem_gb) if mem_gb > 0 else None)
        try:
            with open(out) as fh:
                row = json.load(fh)
        except (OSError, json.JSONDecodeError):
            tail = (proc.stderr or "").strip().splitlines()[-3:]
            reason = f"child failed (exit code {proc.returncode})"
            if any("MemoryError" in s or "bad_alloc" in s for s in tail) or proc.returncode < 0:
                reason += f"; probably out of memory (limit {mem_gb:g} GiB)"
            row = {"skipped": reason + (": " + " | ".join(tail) if tail else "")}
    except subprocess.TimeoutExpired:
        row = {"skipped": f"exceeded the time limit of {timeout:g} s; dropped"}
    finally:
        if os.path.exists(out):
            os.remove(out)
    row["wall_seconds"] = time.perf_counter() - t0
    return row
