"""The ``tiltfe`` command (``python -m femcore`` is the same).

Exit codes: 0 success; 1 analysis failed (diverged; status recorded in the results);
2 bad input or an unusable file or folder (one message per problem naming the field or path,
the value and what is allowed); 130 a campaign stopped by Ctrl-C or SIGTERM (finished runs
kept).
Numerical packages, gmsh and matplotlib are imported inside the commands, so ``--help``
starts fast.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

from femcore.foundation.records import CAUTION as _CAUTION

CAUTION = "Caution: " + _CAUTION[0].lower() + _CAUTION[1:]

EXIT_OK, EXIT_FAILED, EXIT_INPUT, EXIT_INTERRUPTED = 0, 1, 2, 130


class InputProblem(Exception):
    """A user mistake: reported without a traceback, exit code 2."""


def _load(path: str, element: str | None = None, mesh: str | None = None):
    from femcore.foundation.design import DesignError, load_design

    try:
        design = load_design(path)
    except DesignError as exc:
        raise InputProblem("\n".join(exc.problems)) from None
    over = {k: v for k, v in (("element", element), ("mesh", mesh)) if v}
    if over:
        design = design.model_copy(update={"analysis": design.analysis.model_copy(update=over)})
    return design


def _cmd_info(args: argparse.Namespace) -> int:
    import platform

    import numpy
    import scipy

    from femcore import __version__
    from femcore.linsolve import available_backends, pardiso_problem, preferred_backend
    from meshing import gmsh_version as _gmsh_version

    try:
        gmsh_version = _gmsh_version()
    except Exception as exc:  # pragma: no cover - depends on the machine
        gmsh_version = f"unavailable ({exc})"
    print(f"tiltfe {__version__}")
    print(f"python {platform.python_version()}, numpy {numpy.__version__}, "
          f"scipy {scipy.__version__}, gmsh {gmsh_version}")
    print(f"linear solver backends: {', '.join(available_backends())} "
          f"(in use: {preferred_backend()}; TILTFE_SOLVER picks one)")
    if pardiso_problem() is not None:
        print(f"  PARDISO: {pardiso_problem()}")
    print()
    print(CAUTION)
    return EXIT_OK


def _cmd_schema(args: argparse.Namespace) -> int:
    from femcore.foundation.design import Design

    print(json.dumps(Design.model_json_schema(), indent=1))
    return EXIT_OK


def _slice_note(built) -> str:
    from femcore.foundation.run import _slice_rule

    return _slice_rule(built)


def _harmonic_rows(design) -> list[str]:
    from femcore.foundation.harmonic_pushover import default_planes

    an, lo = design.analysis, design.loading
    planes = an.planes if an.planes is not None else default_planes(an.harmonics)
    rows = [f"design        {design.name}",
            f"analysis      harmonic 3D: harmonics 0-{an.harmonics} on {planes} planes, "
            f"{an.element}, mesh {an.mesh}",
            f"soil          {len(design.soil.layers)} layers, water table "
            f"{design.soil.water_table:g} m",
            f"cap           D = {design.cap.diameter:g} m, contact {design.cap.contact}",
            f"piles         {sum(r.count for r in design.piles.rings)} piles in "
            f"{len(design.piles.rings)} rings (smeared ring beams)"]
    stop = "until the plateau holds, at most" if lo.stop_at_plateau else "to"
    rows.append(f"pushover      {lo.control} control, {stop} {lo.rotation_max:g} rad")
    return rows


def _summary_rows(design, built) -> list[str]:
    rows = [f"design        {design.name}",
            f"analysis      {design.analysis.geometry}, {design.analysis.support} support, "
            f"{design.analysis.element}, mesh {design.analysis.mesh}",
            f"soil          {len(design.soil.layers)} layers, water table "
            f"{design.soil.water_table:g} m",
            f"cap           D = {design.cap.diameter:g} m, contact {design.cap.contact}",
            f"piles         {sum(r.count for r in design.piles.rings)} piles in "
            f"{len(design.piles.rings)} rings -> {len(built.rows)} rows",
            f"slice length  L = {built.slice_length:.3f} m ({_slice_note(built)})",
            f"model         {built.model.mesh.n_nodes} nodes, {built.model.n_dofs} DOFs"]
    lo = design.loading
    if lo.control != "settlement":
        stop = "until the plateau holds, at most" if lo.stop_at_plateau else "to"
        rows.append(f"pushover      {lo.control} control, {stop} {lo.rotation_max:g} rad")
    if design.design_strength is not None:
        f = design.design_strength
        rows.append(f"design str.   second pushover with s_u / {f.su:g}, c' / {f.c:g}, "
                    f"tan phi' / {f.tan_phi:g}, pile resistances / {f.pile_resistance:g}")
    for pr in built.rows:
        rows.append(f"  row x = {pr.row.x:7.3f} m   n = {pr.row.count:4.1f}   "
                    f"rake {pr.row.rake:.4f}")
    return rows


def _cmd_check(args: argparse.Namespace) -> int:
    from femcore.foundation.build import build_model

    design = _load(args.design)
    print(f"{args.design}: valid")
    if design.analysis.geometry == "harmonic":
        print("\n".join(_harmonic_rows(design)))
        return EXIT_OK
    built = build_model(design)
    print("\n".join(_summary_rows(design, built)))
    return EXIT_OK


def _print_summary(result, out: Path, t_total: float) -> None:
    """The run's summary in the report's units and layout (GNm/rad, MNm, mrad, kN):
    status, requirement table, key points, material quantities, timings."""
    from femcore.workflows import summary as sm

    print()
    print(f"status        {result.status}  ({result.message})")
    if result.requirements:
        print("requirement checks")
        print("\n".join(sm.text_table(sm.REQUIREMENT_HEADER,
                                      sm.requirement_rows(result.requirements, result.design,
                                                          plain=True),
                                      "lrrrr", wrap={0: 40, 1: 24, 2: 24})))
    rows = sm.keypoint_rows(result, plain=True)
    if rows:
        print("key points (3D estimates)" if result.model.get("geometry") == "plane_strain"
              else "key points")
        print("\n".join(sm.text_table(sm.KEYPOINT_HEADER, rows, "lrl", wrap={2: 52})))
    dyn = result.dynamic
    slice_rows = [(k, v.extra.get("slice")) for k, v in result.keypoints.items()
                  if k == "initial_stiffness"]
    slice_rows += [("dynamic_stiffness", dyn.slice_value)] if dyn is not None and \
        dyn.method != "plane-strain slice" else []
    slice_rows = [(k, v) for k, v in slice_rows if v]
    if slice_rows:
        print("  plane-strain slice values beside the harmonic ones: " + ", ".join(
            f"{k} {sm.num(v / 1e6)} GNm/rad" for k, v in slice_rows))
    if result.quantities:
        print("material quantities")
        print("\n".join(sm.text_table(sm.QUANTITY_HEADER,
                                      sm.quantity_rows(result.quantities, plain=True), "lrl")))
    tm = result.timings
    if result.model.get("geometry") == "harmonic":
        extra = (f", design-strength pushover {tm['design_strength_s']:.1f} s"
                 if "design_strength_s" in tm else "")
        print(f"timings       {t_total:.1f} s total (elastic harmonic solves "
              f"{tm.get('harmonic_s', 0):.1f} s, pushover {tm.get('pushover_s', 0):.1f} s: "
              f"return maps {tm.get('return_map_s', 0):.1f} s, linear solves "
              f"{tm.get('solve_s', 0):.1f} s{extra}; {result.model.get('dofs')} DOFs)")
    else:
        parts = [f"{label} {tm[key]:.1f} s" for key, label in
                 (("harmonic_s", "harmonic 3D solve"), ("calibration_s", "slice calibration"))
                 if tm.get(key, 0.0) >= 0.05]
        parts += [f"pushover {tm.get('pushover_s', 0):.1f} s"]
        parts += [f"design-strength pushover {tm['design_strength_s']:.1f} s"] \
            if tm.get("design_strength_s") else []
        parts += [
                  f"{tm.get('increments', 0)} increments",
                  f"{tm.get('iterations', 0)} Newton iterations"]
        print(f"timings       {t_total:.1f} s total ({', '.join(parts)})")
    solver = (result.model.get("versions") or {}).get("linear_solver")
    if solver:
        print(f"linear solver {solver}" + ("" if solver == "pardiso" else
                                           " (pip install -e \".[fast]\" for PARDISO)"))
    print(f"results       {out}/")
    print()
    print(CAUTION)


def _cmd_run(args: argparse.Namespace) -> int:
    from femcore.foundation.run import prepare, run_built, run_harmonic
    from femcore.workflows.report import write_report
    from femcore.workflows.results import (
        write_curve_csv,
        write_fields,
        write_harmonic_fields,
        write_result_json,
    )

    t0 = time.perf_counter()
    design = _load(args.design, args.element, args.mesh)
    out = Path(args.out or Path(args.design).with_suffix("").name + "-results")
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputProblem(f"--out {out}: cannot create the folder ({exc.strerror})") from None
    probe = out / ".tiltfe-write-test"
    try:  # find an unwritable folder before the analysis, not after it
        probe.write_bytes(b"")
        probe.unlink()
    except OSError as exc:
        raise InputProblem(f"--out {out}: the folder is not writable ({exc.strerror})") \
            from None
    harmonic = design.analysis.geometry == "harmonic"
    if harmonic:
        built, elastic = None, None
        lever = design.loading.lever_arm if design.loading.control == "lever" else None
        if not args.quiet:
            print("\n".join(_harmonic_rows(design)))
    else:
        built, elastic = prepare(design)
        lever = None
    vertical = design.loading.control == "settlement"
    if not args.quiet:
        if not harmonic:
            print("\n".join(_summary_rows(design, built)))
        print(f"{'settlement (mm)' if vertical else 'rotation (mrad)':>16s} "
              f"{'V (MN)' if vertical else 'moment (MNm)':>13s} {'iterations':>10s}")

    last = [float("-inf")]

    def progress(rec):
        if not args.quiet and rec.monitor.size:
            first = -rec.monitor[-1] if vertical else rec.monitor[-1]
            if first < last[0]:  # the next pushover (design strengths) starts
                print("design-strength pushover (factored soil strengths)")
            last[0] = first
            m = _moment(rec, built) if built is not None else \
                float(rec.force[0]) * (lever if lever else 1.0)
            print(f"{first * 1e3:16.4f} {m / 1e3:13.2f} {rec.iterations:10d}", flush=True)

    result = run_harmonic(design, progress=progress) if harmonic else \
        run_built(built, progress=progress, elastic=elastic)
    t_analysis = time.perf_counter() - t0
    result.source = _input_source(args.design)
    if result.curve:
        write_curve_csv(result, out / "curve.csv")
    if harmonic:
        write_harmonic_fields(result, out / "fields.vtu")
    else:
        write_fields(result, out / "fields.vtu")
    write_report(result, out)
    t_total = time.perf_counter() - t0
    result.timings["outputs_s"] = t_total - t_analysis
    write_result_json(result, out / "result.json")
    if not args.quiet:
        _print_summary(result, out, t_total)
    else:
        print(f"{design.name}: {result.status}; results in {out}/")
    return EXIT_FAILED if result.status == "diverged" else EXIT_OK


def _input_source(path: str) -> dict[str, str]:
    """The design file as run: its name and the SHA-256 of its bytes (provenance)."""
    import hashlib

    p = Path(path)
    return {"file": p.name, "sha256": hashlib.sha256(p.read_bytes()).hexdigest()}


def _moment(rec, built) -> float:
    """3D-estimate moment of a pushover record (for progress lines)."""
    loading = built.design.loading
    if loading.control == "settlement":
        return -float(rec.force[0]) if rec.force.size else 0.0
    h = built.lever_height
    m2d = rec.force[0] if loading.control == "rotation" else rec.force[0] * h
    return float(m2d * built.slice_length)


def _cmd_campaign_run(args: argparse.Namespace) -> int:
    from femcore.workflows.campaign import SpaceError, run_campaign

    try:  # run_campaign checks --workers and --limit before it reads anything
        summary = run_campaign(args.space, args.store, workers=args.workers,
                               scheduler=args.scheduler, quiet=args.quiet, limit=args.limit)
    except SpaceError as exc:
        raise InputProblem(str(exc)) from None
    if summary.get("interrupted"):
        print(f"stopped by {summary['interrupted']}: {summary['recorded']} runs recorded now "
              f"and kept ({summary['finished']} of {summary['planned']} in the store), "
              f"{summary['cancelled']} in flight cancelled; the same command resumes",
              file=sys.stderr)
        return EXIT_INTERRUPTED
    _print_status(summary)
    return EXIT_OK


def _print_status(summary: dict) -> None:
    print(f"finished {summary['finished']} of {summary['planned']} samples")
    for status, n in sorted(summary["counts"].items()):
        print(f"  {status:14s} {n}")
    print(f"failure rate   {100 * summary['failure_rate']:.1f} %")
    if summary["mean_run_seconds"] is not None:
        print(f"mean run time  {summary['mean_run_seconds']:.2f} s")
    if summary["remaining"] and summary["time_to_finish_s"] is not None:
        left = summary["time_to_finish_s"]
        when = f"{left / 3600:.1f} h" if left >= 5400 else \
            f"{left / 60:.0f} min" if left >= 90 else f"{left:.0f} s"
        print(f"time to finish about {when} ({summary['remaining']} remaining, all local "
              "cores)")


def _cmd_campaign_status(args: argparse.Namespace) -> int:
    from femcore.workflows.campaign import SpaceError, status_summary

    try:
        summary = status_summary(args.store)
    except SpaceError as exc:
        raise InputProblem(str(exc)) from None
    _print_status(summary)
    return EXIT_OK


def _cmd_campaign_export(args: argparse.Namespace) -> int:
    from femcore.workflows.campaign import SpaceError, export

    try:
        out = export(args.store, args.out)
    except SpaceError as exc:
        raise InputProblem(str(exc)) from None
    print(f"wrote {out}")
    return EXIT_OK


def _cmd_campaign_select(args: argparse.Namespace) -> int:
    from femcore.foundation.quantities import QUANTITY_UNITS
    from femcore.workflows import summary as sm
    from femcore.workflows.campaign import SpaceError
    from femcore.workflows.campaign.select import select, write_selection

    if args.top is not None and args.top < 1:
        raise InputProblem(f"--top {args.top}: show at least 1 row (1 or more)")
    try:
        columns, rows, summ = select(args.store, by=args.by, min_margin=args.min_margin,
                                     requirements=args.requirements)
        if args.out:
            write_selection(args.out, columns, rows)
    except SpaceError as exc:
        raise InputProblem(str(exc)) from None
    unit = QUANTITY_UNITS[args.by]
    print(f"{summ['feasible']} of {summ['runs']} runs meet every requirement "
          f"({summ['requirements']}"
          + (f", margin at least {100 * args.min_margin:g} %" if args.min_margin else "")
          + f"), ranked by {args.by}" + (f" ({unit})" if unit != "-" else "") + ":")
    if summ["reasons"]:
        print("  not feasible: " + ", ".join(f"{n} {why}" for why, n in
                                             sorted(summ["reasons"].items(),
                                                    key=lambda kv: -kv[1])))
    shown = rows[: args.top] if args.top else rows[:20]
    inputs = summ["parameters"]
    if shown:
        header = ("rank", "sample", args.by, *inputs, "least margin")
        table = [(str(i), str(r["sample_id"]),
                  str(r[args.by]) if args.by == "pile_count" else sm.num(r[args.by]),
                  *[sm.num(r[c]) if isinstance(r[c], float) else str(r[c]) for c in inputs],
                  "-" if r["least_margin"] is None else f"{100 * r['least_margin']:+.1f} %")
                 for i, r in enumerate(shown, start=1)]
        print("\n".join(sm.text_table(header, table, "rr" + "r" * (len(header) - 2))))
        if len(rows) > len(shown):
            print(f"  ... {len(rows) - len(shown)} more (--top N shows more; --out writes "
                  "them all)")
    if args.out:
        print(f"wrote {args.out} ({len(rows)} rows: inputs, quantities, key points, checks)")
    print()
    print(CAUTION)
    return EXIT_OK


def _cmd_campaign_explore(args: argparse.Namespace) -> int:
    from femcore.workflows.campaign import SpaceError
    from femcore.workflows.campaign.explore import write_explorer

    try:
        out = write_explorer(args.store, args.out)
    except SpaceError as exc:
        raise InputProblem(str(exc)) from None
    size = out.stat().st_size / 1e6
    print(f"wrote {out} ({size:.1f} MB, self-contained: open it in any browser, offline)")
    return EXIT_OK


def _cmd_size(args: argparse.Namespace) -> int:
    from femcore.foundation.design import DesignError
    from femcore.workflows import summary as sm
    from femcore.workflows.campaign import SpaceError
    from femcore.workflows.sizing import size_design, write_sizing

    out = Path(args.out)
    if out.exists() and not out.is_dir():
        raise InputProblem(f"--out {out}: exists and is not a folder")
    paths = [v.split("=", 1)[0].strip() for v in args.vary or []]
    if not args.quiet:
        print(f"{'phase':>8s} {'#':>3s}  " + "  ".join(f"{p:>22s}" for p in paths)
              + f"  {args.minimize:>22s}  verdict")
    count = [0]

    def progress(rec):
        count[0] += 1
        if args.quiet:
            return
        vals = "  ".join(f"{rec['values'][p]:22g}" for p in paths)
        verdict = "feasible" if rec["feasible"] else rec.get("reason", "")
        q = "-" if rec["quantity"] is None else sm.num(rec["quantity"])
        print(f"{rec['phase']:>8s} {count[0]:3d}  {vals}  {q:>22s}  {verdict}", flush=True)

    try:
        result = size_design(args.design, args.vary or [], args.minimize, args.budget,
                             min_margin=args.min_margin, recheck=not args.no_recheck,
                             progress=progress)
        write_sizing(result, out)
    except DesignError as exc:
        raise InputProblem("\n".join(exc.problems)) from None
    except SpaceError as exc:
        raise InputProblem(str(exc)) from None
    except OSError as exc:
        raise InputProblem(f"--out {out}: cannot write ({exc.strerror})") from None
    best, base = result["best"], result["baseline"]
    if result.get("interrupted"):
        print(f"stopped by Ctrl-C: the {result['search_runs']} finished runs are kept in "
              f"{out}/sizing.json (no re-check was made)", file=sys.stderr)
        return EXIT_INTERRUPTED
    unit = result["settings"]["unit"]
    unit = "" if unit == "-" else f" {unit}"
    print()
    print(f"{result['search_runs']} search runs ({result['search_seconds']:.0f} s), "
          f"{len(result['recheck'])} re-check(s) with the design's own settings")
    print("baseline      " + ", ".join(f"{k} = {v:g}" for k, v in base["values"].items())
          + f": {args.minimize} {sm.num(base['quantity'])}{unit}")
    if best is None:
        print("result        no design in the ranges passed every check (widen the ranges, "
              "raise --budget or --min-margin)")
    else:
        saving = 1 - best["quantity"] / base["quantity"] if base["quantity"] else 0.0
        print("result        " + ", ".join(f"{k} = {v:g}" for k, v in best["values"].items())
              + f": {args.minimize} {sm.num(best['quantity'])}{unit} "
              + (f"({100 * saving:.1f} % less than the baseline)" if saving >= 0 else
                 f"({-100 * saving:.1f} % more than the baseline)")
              + f", least margin {100 * best['least_margin']:+.1f} % (re-checked)"
              if best.get("least_margin") is not None else "")
    print(f"results       {out}/sizing.json, {out}/sizing.pdf")
    print()
    print(CAUTION)
    return EXIT_OK if best is not None else EXIT_FAILED


def build_parser() -> argparse.ArgumentParser:
    from femcore import __version__

    parser = argparse.ArgumentParser(
        prog="tiltfe",
        description="2D nonlinear finite elements for the moment-rotation response of piled "
                    "wind-turbine foundations.",
        epilog=CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"tiltfe {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    p = sub.add_parser("run", help="analyse one design file and write results and a report")
    p.add_argument("design", help="design file (TOML)")
    p.add_argument("--out", help="output folder (default: <design>-results)")
    p.add_argument("--element", choices=["T6", "T15"], help="override analysis.element")
    p.add_argument("--mesh", choices=["coarse", "standard", "fine"],
                   help="override analysis.mesh")
    p.add_argument("--quiet", action="store_true", help="no progress lines or summary table")
    p.set_defaults(func=_cmd_run)
    p = sub.add_parser("check", help="validate a design file and print the derived model")
    p.add_argument("design", help="design file (TOML)")
    p.set_defaults(func=_cmd_check)
    p = sub.add_parser("schema", help="print the JSON Schema of the design file")
    p.set_defaults(func=_cmd_schema)
    p = sub.add_parser("info", help="versions, solver backends and the caution text")
    p.set_defaults(func=_cmd_info)
    p = sub.add_parser("campaign", help="training-data campaigns over a design space")
    csub = p.add_subparsers(dest="campaign_command", metavar="ACTION", required=True)
    c = csub.add_parser("run", help="run or resume a campaign", epilog="Ctrl-C stops it "
                        "within seconds, keeping every finished run (exit code 130); the "
                        "same command resumes.")
    c.add_argument("space", help="space file (TOML)")
    c.add_argument("--store", required=True, help="SQLite store (created or resumed; locked "
                   "while the run goes on)")
    c.add_argument("--workers", type=int, help="local worker processes (default: all cores)")
    c.add_argument("--scheduler", help="Dask scheduler address (needs dask.distributed)")
    c.add_argument("--limit", type=int, help="run at most this many of the remaining samples "
                   "now (0 or more; the same command without it runs the rest)")
    c.add_argument("--quiet", action="store_true")
    c.set_defaults(func=_cmd_campaign_run)
    c = csub.add_parser("status", help="counts by status, failure rate, time to finish")
    c.add_argument("store")
    c.set_defaults(func=_cmd_campaign_status)
    c = csub.add_parser("export", help="one tidy row per sample: .csv or .parquet")
    c.add_argument("store")
    c.add_argument("--out", required=True, help="TABLE.csv or TABLE.parquet")
    c.set_defaults(func=_cmd_campaign_export)
    c = csub.add_parser("select", help="the runs that meet every requirement, ranked by a "
                        "material quantity (smallest first)")
    c.add_argument("store")
    c.add_argument("--by", default="pile_concrete_volume", metavar="QUANTITY",
                   help="rank by this quantity: cap_concrete_volume, pedestal_concrete_volume,"
                        " pile_total_length, pile_concrete_volume (default), cost_index, "
                        "pile_count")
    c.add_argument("--min-margin", type=float, default=0.0, metavar="FRACTION",
                   help="every check's margin at least this (0.1 for 10 %%; default 0)")
    c.add_argument("--requirements", metavar="FILE",
                   help="check against the [requirements] of this file instead of each "
                        "design's own")
    c.add_argument("--top", type=int, help="rows to print (default 20)")
    c.add_argument("--out", metavar="FILE.csv", help="write every feasible run as CSV")
    c.set_defaults(func=_cmd_campaign_select)
    c = csub.add_parser("explore", help="one self-contained HTML page to explore the runs "
                        "(scatter, thresholds, curves, Pareto plot)")
    c.add_argument("store")
    c.add_argument("--out", required=True, metavar="PAGE.html", help="the page to write")
    c.set_defaults(func=_cmd_campaign_explore)
    p = sub.add_parser("size", help="search for the design with the least material that "
                       "meets every requirement (direct FE runs)",
                       epilog="The search runs the coarse model (T6, coarse mesh) with a "
                       "margin on every check, then re-checks the winner with the design's "
                       "own analysis settings.")
    p.add_argument("design", help="design file (TOML) with its [requirements]")
    p.add_argument("--vary", action="append", metavar="PATH=LOW:HIGH", required=True,
                   help="a design value to vary, e.g. piles.length=16:24 or "
                        "piles.rings.0.count=20:28 (repeat for more)")
    p.add_argument("--minimize", default="pile_concrete_volume", metavar="QUANTITY",
                   help="cap_concrete_volume, pedestal_concrete_volume, pile_count, "
                        "pile_total_length, pile_concrete_volume (default), cost_index")
    p.add_argument("--budget", type=int, default=40, help="search runs at most (default 40)")
    p.add_argument("--min-margin", type=float, default=0.05, metavar="FRACTION",
                   help="margin every check needs in the search (default 0.05 = 5 %%)")
    p.add_argument("--no-recheck", action="store_true",
                   help="skip the re-check with the design's own analysis settings")
    p.add_argument("--out", required=True, help="output folder (sizing.json, sizing.pdf)")
    p.add_argument("--quiet", action="store_true")
    p.set_defaults(func=_cmd_size)
    sub.add_parser("bench", help="validation and performance suite against the baseline "
                   "(tiltfe bench --help)", add_help=False)
    return parser


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    from femcore.linsolve import environment_problem

    problem = environment_problem()
    if problem:
        print(f"tiltfe: invalid environment\n  {problem}", file=sys.stderr)
        return EXIT_INPUT
    if argv[:1] == ["bench"]:  # the benchmark runner has its own options
        from benchmarks.runner import main as bench_main

        return bench_main(argv[1:])
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_OK
    try:
        return int(args.func(args))
    except InputProblem as exc:
        print(f"tiltfe {args.command}: invalid input", file=sys.stderr)
        for line in str(exc).splitlines():
            print(f"  {line}", file=sys.stderr)
        return EXIT_INPUT


if __name__ == "__main__":
    sys.exit(main())
