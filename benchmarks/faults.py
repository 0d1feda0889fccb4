"""Campaign faults: how long a stop takes and whether anything is left behind.

Runs the example space (coarse T6, ``[run] design_strength = false``) as ``tiltfe campaign
run`` in a child process with 2 workers and measures, on this machine:

* ``sigint_stop_s``: from SIGINT to the coordinator's exit (the requirement: at most 10 s),
  with the exit code, the rows kept and how long after the exit the last child process
  (the workers and multiprocessing's resource tracker) is gone (None: not within 10 s);
* ``lock_refusal_s``: how long a second coordinator on the same store takes to be refused;
* ``orphan_exit_s``: after SIGKILL of the coordinator, until its last worker has left;
* ``sigint_in_process_s``: the same stop with one worker running in the coordinator.

Linux only (worker processes are found in /proc). Run:
``python -m benchmarks.faults [--json FILE]`` (``--quick`` is the same; about 1 minute).
"""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from ._script import script_main

ROOT = Path(__file__).resolve().parents[1]
SPACE = ROOT / "examples" / "fennwick_space.toml"


def _space(folder: Path) -> Path:
    base = (SPACE.parent / "fennwick_fw07.toml").as_posix()
    text = SPACE.read_text(encoding="utf-8").replace('base = "fennwick_fw07.toml"',
                                                     f'base = "{base}"')
    text = text.replace("design_strength = true", "design_strength = false")
    out = folder / "space.toml"
    out.write_text(text, encoding="utf-8")
    return out


def children_of(pid: int) -> set[int]:
    """Live child processes of ``pid`` (from /proc; Linux)."""
    out = set()
    for d in Path("/proc").iterdir():
        if d.name.isdigit():
            try:
                fields = (d / "stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if int(fields[1]) == pid and fields[0] != "Z":
                out.add(int(d.name))
    return out


def alive_of(pids: set[int]) -> set[int]:
    """The processes of ``pids`` still running (zombies count as gone)."""
    out = set()
    for p in pids:
        try:
            if (Path(f"/proc/{p}/stat").read_text().rsplit(")", 1)[1].split()[0]) != "Z":
                out.add(p)
        except OSError:
            pass
    return out


def store_rows(store: Path) -> int:
    """Rows in a campaign store (0 while it does not exist yet)."""
    try:
        return sqlite3.connect(store).execute("SELECT COUNT(*) FROM runs").fetchone()[0]
    except sqlite3.Error:
        return 0


def _wait(cond, timeout: float) -> float | None:
    t = time.monotonic()
    while time.monotonic() - t < timeout:
        if cond():
            return time.monotonic() - t
        time.sleep(0.02)
    return None


def _stop_case(space: Path, store: Path, workers: int) -> dict:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    cmd = [sys.executable, "-m", "femcore", "campaign", "run", str(space), "--store",
           str(store), "--workers", str(workers), "--quiet"]
    proc = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                            text=True)
    out: dict = {}
    try:
        _wait(lambda: store_rows(store) >= 1, 180)
        kids = children_of(proc.pid)
        if workers > 1:
            t = time.monotonic()
            second = subprocess.run(cmd + ["--limit", "1"], env=env, capture_output=True,
                                    text=True)
            out["lock_refusal_s"] = time.monotonic() - t
            out["lock_refusal_exit_code"] = second.returncode
        kept = store_rows(store)
        t = time.monotonic()
        proc.send_signal(signal.SIGINT)
        _, err = proc.communicate(timeout=60)
        out["stop_s"] = time.monotonic() - t
        out["exit_code"] = proc.returncode
        out["rows_before_signal"] = kept
        out["rows_after"] = store_rows(store)
        gone = _wait(lambda: not alive_of(kids), 10.0) if workers > 1 else 0.0
        out["children_gone_s"] = gone  # workers and multiprocessing's resource tracker
        out["summary_line"] = err.strip().splitlines()[-1] if err.strip() else ""
    finally:
        if proc.poll() is None:
            proc.kill()
    return out


def _orphan_case(space: Path, store: Path) -> float | None:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    cmd = [sys.executable, "-m", "femcore", "campaign", "run", str(space), "--store",
           str(store), "--workers", "2", "--quiet"]
    proc = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    try:
        _wait(lambda: len(children_of(proc.pid)) >= 2, 60)
        kids = children_of(proc.pid)
        proc.kill()
        proc.wait()
        return _wait(lambda: not alive_of(kids), 30)
    finally:
        if proc.poll() is None:
            proc.kill()


def run(quick: bool = False) -> dict:
    if not Path("/proc/self/stat").exists():
        return {"case": "faults", "skipped": "needs Linux /proc"}
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        space = _space(folder)
        two = _stop_case(space, folder / "two.sqlite", 2)
        one = _stop_case(space, folder / "one.sqlite", 1)
        orphan = _orphan_case(space, folder / "two.sqlite")
    return {"case": "faults", "sigint_stop_s": two["stop_s"],
            "sigint_exit_code": two["exit_code"],
            "rows_kept": f"{two['rows_after']} (>= {two['rows_before_signal']} before the "
                         "signal)",
            "children_gone_after_exit_s": two["children_gone_s"],
            "lock_refusal_s": two["lock_refusal_s"],
            "lock_refusal_exit_code": two["lock_refusal_exit_code"],
            "sigint_in_process_s": one["stop_s"], "sigint_in_process_exit_code":
            one["exit_code"], "orphan_exit_s": orphan, "summary_line": two["summary_line"]}


def main(argv: list[str] | None = None) -> int:
    return script_main(__doc__, run, argv)


if __name__ == "__main__":
    raise SystemExit(main())
