"""Slice, calibrated slice and harmonic pushover side by side, key point by key point.

``python -m benchmarks.harmonic_table [--quick] [--json FILE] [--harmonics N]`` runs the demo
and the six variants of :mod:`benchmarks.slice_table` three ways: the plane-strain slice with
L = 16 R / (3 pi), the slice with L calibrated to the harmonic elastic stiffness, and the
nonlinear harmonic pushover (3D, harmonics 0..N). Per design and model it prints the
moments at 1, 3 and 5 mrad, the ultimate moment and the pushover wall time, all measured in
this run (``--quick``: T6 on the coarse mesh; default: the designs' T15 standard mesh).
"""

from __future__ import annotations

import argparse
import json
import time

import numpy as np

from femcore.foundation.design import Design
from femcore.foundation.keypoints import moment_at_rotation
from femcore.foundation.run import prepare, run_built, run_harmonic

from .slice_table import variants

ROTATIONS = (0.001, 0.003, 0.005)


def _points(curve: dict, kp: dict) -> dict:
    rot, mom = np.asarray(curve["rotation"]), np.asarray(curve["moment"])
    out = {f"M{int(r * 1e3)}_MNm": moment_at_rotation(rot, mom, r) / 1e3 for r in ROTATIONS}
    ult = kp.get("ultimate")
    out["ultimate_MNm"] = None if ult is None else ult.value / 1e3
    out["censored"] = None if ult is None else bool(ult.extra.get("censored"))
    return out


def _no_strength(design: Design) -> Design:
    return design.model_copy(update={"design_strength": None})


def row(name: str, design: Design, harmonics: int) -> dict:
    design = _no_strength(design)
    out: dict = {"design": name}
    for label, rule in (("slice", "cap_rule"), ("calibrated", "calibrated")):
        d = design.model_copy(update={"analysis": design.analysis.model_copy(
            update={"slice_length": rule})})
        built, elastic = prepare(d)
        r = run_built(built, dynamic=False, elastic=elastic)
        out[label] = {**_points(r.curve, r.keypoints), "pushover_s": r.timings["pushover_s"],
                      "status": r.status, "L_m": built.slice_length}
    d = design.model_copy(update={"analysis": design.analysis.model_copy(
        update={"geometry": "harmonic", "harmonics": harmonics})})
    t = time.perf_counter()
    r = run_harmonic(d, dynamic=False)
    out["harmonic"] = {**_points(r.curve, r.keypoints), "pushover_s": r.timings["pushover_s"],
                       "status": r.status, "wall_s": time.perf_counter() - t,
                       "return_map_s": r.timings["return_map_s"],
                       "solve_s": r.timings["solve_s"]}
    return out


def table(rows: list[dict]) -> str:
    head = ("| design | model | M1 | M3 | M5 | ultimate | vs harmonic | pushover (s) |\n"
            "|---|---|---|---|---|---|---|---|")
    lines = [head]
    for r in rows:
        h = r["harmonic"]["ultimate_MNm"]
        for label in ("slice", "calibrated", "harmonic"):
            m = r[label]
            ult = m["ultimate_MNm"]
            ratio = "" if ult is None or h is None else f"{ult / h:.3f}"
            lines.append(f"| {r['design'] if label == 'slice' else ''} | {label} | "
                         f"{m['M1_MNm']:.0f} | {m['M3_MNm']:.0f} | {m['M5_MNm']:.0f} | "
                         f"{'-' if ult is None else f'{ult:.0f}'}"
                         f"{' (c)' if m['censored'] else ''} | {ratio} | "
                         f"{m['pushover_s']:.1f} |")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="T6 on the coarse mesh")
    ap.add_argument("--json", help="write the rows to this file")
    ap.add_argument("--harmonics", type=int, default=4, help="highest harmonic (default 4)")
    args = ap.parse_args(argv)
    rows = []
    for name, design in variants(args.quick).items():
        rows.append(row(name, design, args.harmonics))
        print(rows[-1], flush=True)
    print(table(rows))
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(rows, fh, indent=1)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
