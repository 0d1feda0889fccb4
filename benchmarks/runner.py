"""`tiltfe bench`: every validation and performance case, compared with a baseline.

Validation cases (``benchmarks.collapse.CASES``, ``benchmarks.validation.CASES``) carry a
reference, its source and a band on the relative error; performance cases report ratios or
seconds measured in this run. Cases run in parallel processes. A validation case is a
regression when it newly fails or when its error moved by more than half its band width from
the baseline; a performance case is a regression when a speed-up ratio fell below half the
baseline's (timings are machine-dependent, so only gross changes count). Exit code 1 on any
failure or regression; ``--update-baseline`` writes the baseline deliberately.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

__all__ = ["main", "run_cases", "compare", "DEFAULT_BASELINE"]

DEFAULT_BASELINE = Path(__file__).with_name("baseline.json")


def _validation_cases() -> dict:
    from . import collapse, harmonic_cases, validation

    return {**collapse.CASES, **validation.CASES, **harmonic_cases.CASES}


def _perf_assembly(quick: bool) -> tuple[float, dict]:
    from .perf_elastic_assembly import run

    r = run(quick)
    return r.get("assembly_speedup", float("nan")), {"n_dofs": r["n_dofs"], "kind": "ratio",
                                                      "unit": "x faster than scikit-fem"}


def _perf_solver(quick: bool) -> tuple[float, dict]:
    from .perf_elastic_assembly import run

    r = run(quick)
    return r["solve_speedup"], {"n_dofs": r["n_dofs"], "kind": "ratio",
                                "unit": "x faster than spsolve"}


def _perf_demo(config: str):
    def run(quick: bool) -> tuple[float, dict]:
        from femcore import linsolve
        from femcore.foundation.design import demo_design
        from femcore.foundation.run import run_design

        cfg = {"springs": dict(support="springs"),
               "coarse_T6": dict(mesh="coarse", element="T6"),
               "standard_T15": dict()}[config]
        linsolve.reset_stats()
        t = time.perf_counter()
        r = run_design(demo_design(**cfg))
        sec = time.perf_counter() - t
        return sec, {"n_dofs": r.model["dofs"], "kind": "seconds", "unit": "s",
                     "increments": r.timings["increments"],
                     "iterations": r.timings["iterations"],
                     "solver_share": linsolve.STATS["seconds"] / sec}
    return run


def _perf_campaign(quick: bool) -> tuple[float, dict]:
    from .perf_campaign import run

    r = run(quick=True)
    return r["samples_per_hour"], {"kind": "ratio", "unit": "samples/hour (2 workers)",
                                   "overhead_share": r["overhead_share"]}


def _perf_harmonic(quick: bool) -> tuple[float, dict]:
    """Slice pushover time over one harmonic n = 1 elastic solve of the demo (standard T15
    mesh; both measured here, in this process)."""
    from femcore.foundation.build import build_model
    from femcore.foundation.design import demo_design
    from femcore.foundation.elastic3d import harmonic_stiffness
    from femcore.foundation.run import run_built

    d = demo_design(**({"mesh": "coarse", "element": "T6"} if quick else {}))
    e = harmonic_stiffness(d, vertical=False)
    r = run_built(build_model(d, slice_length=18.67), dynamic=False, elastic=e)
    return r.timings["pushover_s"] / e.seconds["n1_s"], {
        "kind": "ratio", "unit": "x (slice pushover / harmonic n = 1 solve)",
        "harmonic_n1_s": e.seconds["n1_s"], "pushover_s": r.timings["pushover_s"],
        "harmonic_dofs": e.dofs}


def _perf_harmonic_pushover(quick: bool) -> tuple[float, dict]:
    """The demo's harmonic pushover (default N) over the slice pushover of the same design
    on the same mesh (T6 coarse quick, T15 standard), both measured here; the split of the
    harmonic one between return maps and linear solves."""
    from femcore.foundation.design import demo_design
    from femcore.foundation.run import prepare, run_built, run_harmonic

    cfg = {"mesh": "coarse", "element": "T6"} if quick else {}
    d = demo_design(**cfg).model_copy(update={"design_strength": None})
    built, elastic = prepare(d)
    s = run_built(built, dynamic=False, elastic=elastic)
    h = run_harmonic(d.model_copy(update={"analysis": d.analysis.model_copy(
        update={"geometry": "harmonic"})}), dynamic=False)
    tm = h.timings
    return tm["pushover_s"] / s.timings["pushover_s"], {
        "kind": "seconds", "unit": "x (harmonic / slice pushover)",
        "harmonic_pushover_s": tm["pushover_s"], "slice_pushover_s": s.timings["pushover_s"],
        "return_map_s": tm["return_map_s"], "solve_s": tm["solve_s"],
        "harmonics": h.model["harmonics"], "harmonic_dofs": h.model["dofs"]}


PERF = {
    "perf_pushover_vs_harmonic_solve": _perf_harmonic,
    "perf_assembly_vs_scikit_fem": _perf_assembly,
    "perf_superlu_vs_spsolve": _perf_solver,
    "perf_demo_springs": _perf_demo("springs"),
    "perf_demo_coarse_T6": _perf_demo("coarse_T6"),
    "perf_demo_standard_T15": _perf_demo("standard_T15"),
    "perf_campaign_throughput": _perf_campaign,
    "perf_harmonic_pushover_vs_slice": _perf_harmonic_pushover,
}
QUICK_SKIP = {"perf_demo_standard_T15", "harmonic_pushover_circle_moment_no_tension"}


def _run_one(name: str, quick: bool) -> dict:
    t = time.perf_counter()
    cases = _validation_cases()
    try:
        if name in cases:
            case = cases[name]
            value, info = case.run(quick)
            err = value / case.reference - 1
            row = {"case": name, "kind": "validation", "reference": case.reference,
                   "source": case.source, "computed": value, "error": err,
                   "band": list(case.band),
                   "passed": bool(case.band[0] <= err <= case.band[1]), **info}
        else:
            value, info = PERF[name](quick)
            row = {"case": name, "kind": info.pop("kind"), "computed": value, "passed": True,
                   **info}
    except Exception as exc:  # a crashing case is a failure, reported with its message
        row = {"case": name, "kind": "validation", "computed": None, "passed": False,
               "message": f"{type(exc).__name__}: {exc}"}
    row["seconds"] = time.perf_counter() - t
    return row


def run_cases(names: list[str], quick: bool, workers: int) -> list[dict]:
    if workers <= 1:
        return [_run_one(n, quick) for n in names]
    with ProcessPoolExecutor(max_workers=workers) as pool:
        return list(pool.map(_run_one, names, [quick] * len(names)))


def compare(rows: list[dict], baseline: dict, perf: bool = True) -> list[str]:
    """Regression messages against a baseline ``{case: row}``; ``perf=False`` leaves the
    timing cases out (the quick suite runs inside the tests, where timings are no verdict)."""
    out = []
    for r in rows:
        b = baseline.get(r["case"])
        if b is None:
            continue
        if r["kind"] == "validation":
            if b.get("passed") and not r["passed"]:
                out.append(f"{r['case']}: passed in the baseline, fails now")
            elif r.get("error") is not None and b.get("error") is not None:
                lo, hi = r["band"]
                if abs(r["error"] - b["error"]) > 0.5 * (hi - lo):
                    out.append(f"{r['case']}: error moved from {100 * b['error']:+.3f} % to "
                               f"{100 * r['error']:+.3f} % (more than half the band)")
        elif not perf:
            continue
        elif r["kind"] == "ratio" and b.get("computed") and r.get("computed") is not None:
            if r["computed"] < 0.5 * b["computed"]:
                out.append(f"{r['case']}: {r['computed']:.3g} is below half the baseline "
                           f"{b['computed']:.3g}")
        elif r["kind"] == "seconds" and b.get("computed") and r.get("computed") is not None:
            if r["computed"] > 3.0 * b["computed"]:
                out.append(f"{r['case']}: {r['computed']:.3g} s is over 3x the baseline "
                           f"{b['computed']:.3g} s")
    return out


def _table(rows: list[dict]) -> str:
    lines = [f"{'case':30s} {'reference':>10s} {'computed':>11s} {'error':>9s} "
             f"{'band':>15s} {'ok':>4s} {'s':>6s}  source"]
    for r in rows:
        if r["kind"] == "validation" and r.get("computed") is not None:
            band = f"{100 * r['band'][0]:+.3g}..{100 * r['band'][1]:+.3g} %"
            lines.append(f"{r['case']:30s} {r['reference']:10.5g} {r['computed']:11.5g} "
                         f"{100 * r['error']:+8.3f}% {band:>15s} "
                         f"{'yes' if r['passed'] else 'NO':>4s} {r['seconds']:6.1f}  "
                         f"{r.get('source', '')}")
        elif r["kind"] == "validation":
            lines.append(f"{r['case']:30s} {'':>10s} {'FAILED':>11s} {'':>9s} {'':>15s} "
                         f"{'NO':>4s} {r['seconds']:6.1f}  {r.get('message', '')}")
        else:
            lines.append(f"{r['case']:30s} {'':>10s} {r['computed']:11.4g} "
                         f"{r.get('unit', ''):>25s} {r['seconds']:6.1f}")
    return "\n".join(lines)


def _plot(rows: list[dict], path: Path) -> Path | None:
    conv = [r for r in rows if r.get("convergence")]
    if not conv:
        return None
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(6, 4))
    for r in conv:
        c = r["convergence"]
        ax.loglog(c["h"], c["error"], "o-", label=f"{r['case']} (rate {r['computed']:.2f})")
    ax.set_xlabel("mesh size h (m)")
    ax.set_ylabel("relative energy-norm error")
    ax.set_title("Convergence (thick cylinder, Lame)", loc="left")
    ax.legend(fontsize=8, frameon=False)
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)
    return path


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(prog="tiltfe bench", description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="coarse meshes (the CI suite)")
    ap.add_argument("--only", help="run the cases whose name contains this text")
    ap.add_argument("--baseline", default=str(DEFAULT_BASELINE), help="baseline JSON file")
    ap.add_argument("--out", default="bench-out", help="folder for bench.json and plots")
    ap.add_argument("--update-baseline", action="store_true",
                    help="write this run into the baseline (deliberately)")
    ap.add_argument("--workers", type=int, default=min(2, os.cpu_count() or 1))
    args = ap.parse_args(argv)
    names = [*_validation_cases(), *PERF]
    if args.quick:
        names = [n for n in names if n not in QUICK_SKIP]
    if args.only:
        names = [n for n in names if args.only in n]
        if not names:
            print(f"tiltfe bench: no case matches --only {args.only!r} (case names: "
                  f"{', '.join([*_validation_cases(), *PERF][:4])}, ...)", file=sys.stderr)
            return 2
    mode = "quick" if args.quick else "full"
    base_path = Path(args.baseline)
    baseline_data: dict = {}
    if base_path.is_file():  # a bad baseline is found before the cases run, not after
        try:
            baseline_data = json.loads(base_path.read_text(encoding="utf-8"))
            if not isinstance(baseline_data, dict):
                raise ValueError("not a JSON object")
        except (ValueError, UnicodeDecodeError, OSError) as exc:
            print(f"tiltfe bench: --baseline {base_path}: not a baseline JSON file ({exc})",
                  file=sys.stderr)
            return 2
    elif base_path.exists():
        print(f"tiltfe bench: --baseline {base_path}: not a file", file=sys.stderr)
        return 2
    out = Path(args.out)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        print(f"tiltfe bench: --out {out}: cannot create the folder ({exc.strerror})",
              file=sys.stderr)
        return 2
    t = time.perf_counter()
    rows = run_cases(names, args.quick, args.workers)
    print(_table(rows))
    (out / "bench.json").write_text(json.dumps({"mode": mode, "rows": rows}, indent=1,
                                               default=float))
    _plot(rows, out / "convergence.png")
    baseline = baseline_data.get(mode, {})
    regressions = compare(rows, baseline, perf=not args.quick)
    failures = [r["case"] for r in rows if not r["passed"]]
    print(f"\n{len(rows)} cases in {time.perf_counter() - t:.0f} s ({mode}); "
          f"{len(failures)} failed, {len(regressions)} regression(s) against "
          f"{base_path.name if baseline else 'no baseline'}")
    for f in failures:
        print(f"  FAILED: {f}")
    for r in regressions:
        print(f"  REGRESSION: {r}")
    if args.update_baseline:
        data = baseline_data
        data.setdefault(mode, {}).update({r["case"]: {k: r.get(k) for k in (
            "kind", "computed", "error", "passed")} for r in rows})
        base_path.write_text(json.dumps(data, indent=1, sort_keys=True, default=float))
        print(f"baseline written: {base_path} ({mode})")
    return 1 if failures or regressions else 0


if __name__ == "__main__":
    raise SystemExit(main())
