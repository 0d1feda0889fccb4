"""Slice (16 R / 3 pi), calibrated slice and harmonic 3D stiffness side by side.

``python -m benchmarks.slice_table [--quick] [--json FILE]`` runs the demo and six variants
(ring radius, pile count, pile length, a stiff base, cap size, cap contact) and prints, per
design: the harmonic elastic rotational stiffness under the load case (3D, n = 1), the
cap-rule slice's elastic value and its ratio to the harmonic one, both slice lengths, the
moment at 5 mrad of both slices' pushovers, and the wall times (harmonic solve, calibration,
pushover). All numbers are measured in the run.
"""

from __future__ import annotations

import argparse
import json
import time

from femcore.foundation.build import build_model
from femcore.foundation.design import PileRing, demo_design
from femcore.foundation.elastic3d import (
    calibrated_slice_length,
    harmonic_stiffness,
    slice_stiffness,
)
from femcore.foundation.keypoints import moment_at_rotation
from femcore.foundation.run import run_built


def variants(quick: bool) -> dict:
    base = demo_design(**({"element": "T6", "mesh": "coarse"} if quick else {}))
    p, c, s = base.piles, base.cap, base.soil

    def with_piles(**kw):
        return base.model_copy(update={"piles": p.model_copy(update=kw)})

    sand = s.layers[-1].model_copy(update={"E": 200000.0, "G0": 400000.0})
    return {
        "demo (28 + 16 piles)": base,
        "rings 9.9 + 4.5 m": with_piles(rings=[p.rings[0], PileRing(radius=4.5, count=12)]),
        "outer ring 40 piles": with_piles(rings=[PileRing(radius=9.9, count=40, rake=1 / 6),
                                                 p.rings[1]]),
        "piles 28 m long": with_piles(length=28.0),
        "stiff base (E x5)": base.model_copy(update={"soil": s.model_copy(update={
            "layers": [*s.layers[:-1], sand]})}),
        "cap 28 m, same piles": base.model_copy(update={"cap": c.model_copy(update={
            "diameter": 28.0})}),
        "cap bonded to soil": base.model_copy(update={"cap": c.model_copy(update={
            "contact": "bonded"})}),
    }


def row(name: str, design) -> dict:
    e = harmonic_stiffness(design, vertical=False)
    t1 = time.perf_counter()
    b = build_model(design, slice_length=None)
    b_rule = build_model(design.model_copy(update={"analysis": design.analysis.model_copy(
        update={"slice_length": "cap_rule"})}))
    k_rule = slice_stiffness(b_rule, [b_rule.slice_length])[0][0]
    L, _ = calibrated_slice_length(b, e.value)
    t2 = time.perf_counter()
    out = {"design": name, "harmonic_GNm_rad": e.value / 1e6,
           "slice_rule_GNm_rad": k_rule / 1e6, "rule_over_harmonic": k_rule / e.value,
           "L_rule_m": b_rule.slice_length, "L_calibrated_m": L,
           "harmonic_s": e.seconds["total_s"], "harmonic_n1_s": e.seconds["n1_s"],
           "calibration_s": t2 - t1, "dofs_harmonic": e.dofs}
    for label, built in (("rule", b_rule), ("calibrated", build_model(design, L))):
        r = run_built(built, dynamic=False, elastic=e)
        m5 = moment_at_rotation(r.curve["rotation"], r.curve["moment"], 0.005)
        out[f"M5mrad_{label}_MNm"] = None if m5 is None else m5 / 1e3
        out[f"pushover_{label}_s"] = r.timings["pushover_s"]
        out[f"slice_dofs_{label}"] = built.model.n_dofs
    return out


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(prog="python -m benchmarks.slice_table",
                                 description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="coarse T6 meshes")
    ap.add_argument("--json", help="write the rows to this file")
    args = ap.parse_args(argv)
    rows = []
    print(f"{'design':24s} {'harmonic':>9s} {'rule':>9s} {'ratio':>6s} {'L rule':>7s} "
          f"{'L cal':>7s} {'M5 rule':>8s} {'M5 cal':>8s} {'t harm':>7s} {'t cal':>6s} "
          f"{'t push':>7s}")
    for name, d in variants(args.quick).items():
        r = row(name, d)
        rows.append(r)
        print(f"{name:24s} {r['harmonic_GNm_rad']:9.2f} {r['slice_rule_GNm_rad']:9.2f} "
              f"{r['rule_over_harmonic']:6.3f} {r['L_rule_m']:7.2f} {r['L_calibrated_m']:7.2f} "
              f"{r['M5mrad_rule_MNm'] or float('nan'):8.1f} "
              f"{r['M5mrad_calibrated_MNm'] or float('nan'):8.1f} {r['harmonic_s']:7.2f} "
              f"{r['calibration_s']:6.2f} {r['pushover_calibrated_s']:7.1f}", flush=True)
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(rows, fh, indent=1)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
