"""Performance: where the time of one ``tiltfe run`` goes (the demo design, invented).

Runs ``tiltfe run`` on the demo in a fresh process (standard T15 mesh; ``--quick``: coarse
T6) and reports, from that one run, the process wall time and its split: start-up (Python
and imports, the wall time not inside the analysis or the outputs), the elastic 3D solves
and slice calibration, the build, the initial stages (with their factorizations), the
pushover, the design-strength pushover, the dynamic analysis and checks (post-processing),
and the outputs (figures, PDF, VTU). Ratios: wall over the pushover, wall over both
pushovers, and the linear solver's share of the pushover (factorizations and solves).

Run: ``python -m benchmarks.perf_run [--quick] [--json FILE]``.
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from ._script import script_main

DEMO = Path(__file__).resolve().parents[1] / "examples" / "fennwick_fw07.toml"


def run(quick: bool = False) -> dict:
    with tempfile.TemporaryDirectory() as tmp:
        out_dir = Path(tmp) / "out"
        cmd = [sys.executable, "-m", "femcore.workflows.cli", "run", str(DEMO), "--out",
               str(out_dir), "--quiet"]
        if quick:
            cmd += ["--mesh", "coarse", "--element", "T6"]
        t = time.perf_counter()
        proc = subprocess.run(cmd, capture_output=True, text=True, check=False)
        wall = time.perf_counter() - t
        if proc.returncode != 0:
            raise RuntimeError(f"tiltfe run failed ({proc.returncode}): {proc.stderr[-2000:]}")
        res = json.loads((out_dir / "result.json").read_text(encoding="utf-8"))
    tm = res["timings"]
    stages = res.get("stages", [])
    push = tm["pushover_s"]
    strength = tm.get("design_strength_s", 0.0)
    inside = tm["total_s"] + tm.get("outputs_s", 0.0)
    split = {"startup_s": wall - inside, "elastic_3d_s": tm.get("harmonic_s", 0.0),
             "calibration_s": tm.get("calibration_s", 0.0),
             "build_s": tm.get("build_s", 0.0) - tm.get("calibration_s", 0.0),  # it holds it
             "stages_s": tm.get("stages_s", 0.0), "pushover_s": push,
             "design_strength_s": strength, "postprocess_s": tm.get("postprocess_s", 0.0),
             "outputs_s": tm.get("outputs_s", 0.0)}
    # what the run's own total holds beyond its named parts (bookkeeping between them)
    split["other_s"] = inside - sum(v for k, v in split.items() if k != "startup_s")
    return {"case": "perf_run", "mesh": "coarse T6" if quick else "standard T15",
            "wall_s": wall, **split,
            "stage_factorizations": {s["name"]: s.get("factorizations", 0) for s in stages},
            "wall_over_pushover": wall / push,
            "wall_over_both_pushovers": wall / (push + strength),
            "pushover_solver_share": tm.get("pushover_solver_s", 0.0) / push,
            "increments": tm["increments"], "iterations": tm["iterations"]}


def main(argv: list[str] | None = None) -> int:
    return script_main(__doc__, run, argv)


if __name__ == "__main__":
    raise SystemExit(main())
