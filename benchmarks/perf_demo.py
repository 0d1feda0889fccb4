"""Performance: the demo design's pushover (Fennwick Polder FW-07, invented) end to end.

Reports for each configuration the DOFs, increments, Newton iterations, total time and the
share of time spent in the sparse factorization + solve. Targets of the piled-cap work: standard
mesh T15 within about 20 s, coarse within about 3 s, springs-only support under 1 s.

Run: ``python -m benchmarks.perf_demo [--quick] [--json FILE]``.
"""

from __future__ import annotations

import time

from femcore import linsolve
from femcore.foundation.design import demo_design
from femcore.foundation.run import run_design

from ._script import script_main

CONFIGS = {
    "springs": dict(support="springs"),
    "coarse_T6": dict(mesh="coarse", element="T6"),
    "coarse_T15": dict(mesh="coarse", element="T15"),
    "standard_T15": dict(mesh="standard", element="T15"),
}


def run(quick: bool = False) -> dict:
    out = {"case": "perf_demo", "quick": quick}
    for name, cfg in CONFIGS.items():
        if quick and name not in ("springs", "coarse_T6"):
            continue
        linsolve.reset_stats()
        t = time.perf_counter()
        r = run_design(demo_design(**cfg))
        total = time.perf_counter() - t
        out[name] = {"status": r.status, "dofs": r.model["dofs"],
                     "increments": r.timings["increments"],
                     "iterations": r.timings["iterations"], "seconds": total,
                     "pushover_s": r.timings["pushover_s"],
                     "solver_share": linsolve.STATS["seconds"] / total,
                     "initial_stiffness_GNm_per_rad":
                         r.keypoints["initial_stiffness"].value / 1e6,
                     "moment_at_5mrad_MNm": r.keypoints["moment_at@0.005"].value / 1e3}
    return out


def main(argv: list[str] | None = None) -> int:
    return script_main(__doc__, run, argv)


if __name__ == "__main__":
    raise SystemExit(main())
