"""Robustness set: twelve varied valid designs pushed to their capacity.

Each case is the demo (coarse T6 mesh, the fast campaign model) with a few changes: soft
and stiff clays, sand, frictional and bonded contact, pinned heads, one to three rings,
springs support, rotation control, a rigid cap on springs at its vertical capacity. The
table says, per case: status, why the run ended, the capacity and whether it is censored,
increments, cut-backs and time. A case that takes longer than ``--timeout`` seconds is
recorded as such (it runs in a child process).

    python -m benchmarks.robustness [--cases NAME,...] [--json FILE]
"""

from __future__ import annotations

import argparse
import json
import sys
import time

from benchmarks.isolated import add_arguments, child_main, run_in_child

CASES: dict[str, dict] = {
    "demo": {},
    "springs": {"analysis.support": "springs"},
    "soft_frictional_pinned_3rings": {
        "cap.contact": "frictional", "soil.layers.2.su": 5.0, "soil.layers.1.su": 5.0,
        "piles.head": "pinned",
        "piles.rings": [{"radius": 9.9, "count": 28, "rake": 1 / 6},
                        {"radius": 7.0, "count": 18}, {"radius": 4.0, "count": 10}]},
    "stiff_clay_bonded": {"cap.contact": "bonded", "soil.layers.2.su": 60.0,
                          "soil.layers.2.E": 12000.0, "soil.layers.1.su": 40.0},
    "rotation_control": {"loading.control": "rotation", "loading.horizontal": 1500.0},
    "sand_site": {"soil.layers": [
        {"name": "medium sand", "thickness": 10.0, "model": "mohr_coulomb", "gamma": 18.0,
         "gamma_sat": 20.0, "E": 25000.0, "E_gradient": 1500.0, "nu": 0.3, "c": 1.0,
         "phi": 32.0, "psi": 2.0, "G0": 60000.0},
        {"name": "dense sand", "thickness": 50.0, "model": "mohr_coulomb", "gamma": 19.0,
         "gamma_sat": 20.5, "E": 60000.0, "nu": 0.3, "c": 1.0, "phi": 36.0, "psi": 6.0,
         "G0": 120000.0}]},
    "small_cap_one_ring": {"cap.diameter": 16.0, "cap.pedestal_diameter": 5.5,
                           "piles.rings": [{"radius": 6.9, "count": 20}]},
    "large_cap_3rings": {"cap.diameter": 28.0, "soil.layers.4.thickness": 45.0,
                         "piles.rings": [{"radius": 12.9, "count": 32, "rake": 1 / 6},
                                         {"radius": 9.0, "count": 20},
                                         {"radius": 5.0, "count": 10}]},
    "springs_at_vertical_capacity": {"analysis.support": "springs",
                                     "loading.vertical": 97000.0},
    "high_water_heavy": {"soil.water_table": 0.0, "loading.vertical": 11000.0},
    "long_raked": {"piles.length": 26.0, "piles.rings.0.rake": 0.25,
                   "soil.layers.4.thickness": 40.0},
    "short_piles_soft": {"piles.length": 12.0, "soil.layers.2.su": 8.0,
                         "soil.layers.2.E": 1500.0},
}


def _set(d: dict, path: str, value) -> None:
    keys = path.split(".")
    for k in keys[:-1]:
        d = d[int(k)] if isinstance(d, list) else d[k]
    last = keys[-1]
    if isinstance(d, list):
        d[int(last)] = value
    else:
        d[last] = value


def case_design(name: str) -> dict:
    from femcore.foundation.design import demo_design

    d = demo_design(element="T6", mesh="coarse").model_dump()
    for path, value in CASES[name].items():
        _set(d, path, value)
    return d


def run_case(name: str) -> dict:
    from femcore.foundation.run import run_design

    t = time.perf_counter()
    r = run_design(case_design(name), dynamic=False)
    ult = r.keypoints.get("ultimate")
    return {"case": name, "status": r.status, "message": r.message,
            "ultimate_MNm": None if ult is None or ult.value is None else ult.value / 1e3,
            "censored": None if ult is None else ult.extra.get("censored"),
            "rotation_mrad": None if ult is None else 1e3 * (ult.extra.get("rotation") or 0),
            "increments": r.timings.get("increments"), "cutbacks": r.timings.get("cutbacks"),
            "seconds": time.perf_counter() - t}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", help="comma-separated case names (default: all)")
    ap.add_argument("--json", help="write the rows to this JSON file")
    add_arguments(ap)
    args = ap.parse_args(argv)
    if args.child:
        return child_main(args.child, args.child_out, run_case)
    names = args.cases.split(",") if args.cases else list(CASES)
    rows = []
    for name in names:
        row = run_in_child("benchmarks.robustness", name, args.timeout, args.mem_gb)
        row.setdefault("case", name)
        rows.append(row)
        if "skipped" in row:
            print(f"{name:32s} skipped: {row['skipped']}", flush=True)
            continue
        ult = "-" if row["ultimate_MNm"] is None else f"{row['ultimate_MNm']:.1f}"
        print(f"{name:32s} {row['status']:9s} M_u {ult:>8s} MNm at "
              f"{row['rotation_mrad'] or 0:5.1f} mrad censored={row['censored']} "
              f"{row['increments'] or 0:3d} incr {row['cutbacks'] or 0:2d} cut "
              f"{row['seconds']:6.1f} s  {row['message']}", flush=True)
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(rows, fh, indent=1)
    return 0


if __name__ == "__main__":
    sys.exit(main())
