"""A direct FE search for the design with the least material that meets every requirement.

``tiltfe size DESIGN.toml --vary PATH=LOW:HIGH [--vary ...] --minimize QUANTITY --budget N``

**The method: a feasibility-boundary search.** Each evaluation is a full nonlinear run (both
pushovers, the dynamic stiffness), so the search must spend few of them, and the coarse model
it runs on has a little numerical noise. Two facts of the problem make a direct search cheap:

* the quantity to minimise (pile concrete, pile length, cap concrete, the cost index) is
  known *before* a run, from the geometry alone;
* feasibility is monotone in each varied parameter: more or longer piles, wider rings, a
  bigger cap only help (the assumption of the method: vary parameters that help the
  foundation as they grow).

So the least-material feasible design lies on the feasibility boundary. One varied parameter
(the first real-valued one; else the first) is the *boundary parameter* b; the others span a
grid (every integer of an integer parameter where the budget allows, else evenly spaced
values), visited from the most to the least resources. At each grid point the smallest
feasible b is found by bisection, with three savings that keep most grid points at one to
three runs:

* b above the value where the quantity would reach the best found so far is never run;
* a grid point with at least the resources of another inherits its boundary as an upper
  bound (feasible there, so feasible here) and the other way round a lower bound;
* bisection stops at a tolerance of 2 % of b's range (one step for an integer).

A surrogate model (e.g. a Gaussian process with expected improvement) would need tens of
runs to learn a boundary that monotone bisection finds directly, and it smooths over the
coarse model's noise in ways that are hard to check; a plain grid would spend the whole
budget on designs that are either clearly feasible or clearly not.

Runs of the search use the coarse model (T6, coarse mesh) and a minimum margin on every
check (``min_margin``, default 5 %, about the coarse model's stiffness bias against the
standard T15 mesh); the winner is then re-checked with the design's own analysis settings
(margin 0). Should it fail there, the next-best feasible designs of the search are
re-checked (at most two more) and the first that passes is the result.
"""

from __future__ import annotations

import copy
import itertools
import json
import math
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from femcore.foundation.design import Design, DesignError, design_from_dict
from femcore.foundation.quantities import QUANTITY_UNITS, quantities
from femcore.workflows.campaign.paths import SpaceError, get_path, path_problem, set_path
from femcore.workflows.campaign.select import feasibility

__all__ = ["Vary", "parse_vary", "size_design", "SIZE_QUANTITIES"]

SIZE_QUANTITIES = tuple(QUANTITY_UNITS)
TOLERANCE = 0.02  # of the boundary parameter's range
RECHECKS = 3  # standard-mesh re-checks at most (the winner and two next-best)


@dataclass(frozen=True)
class Vary:
    """One varied design value: ``path`` between ``low`` and ``high``; ``integer`` where the
    design holds a whole number there."""

    path: str
    low: float
    high: float
    integer: bool


def parse_vary(text: str, data: dict) -> Vary:
    """``PATH=LOW:HIGH`` against the design's values ``data``; SpaceError with the reason."""
    if "=" not in text or ":" not in text.split("=", 1)[1]:
        raise SpaceError(f"--vary {text!r}: write PATH=LOW:HIGH, e.g. piles.length=16:24")
    path, rng = text.split("=", 1)
    path = path.strip()
    problem = path_problem(data, path)
    if problem:
        raise SpaceError(f"--vary {path}: no such design value ({problem})")
    current = get_path(data, path)
    if isinstance(current, bool) or not isinstance(current, (int, float)):
        raise SpaceError(f"--vary {path}: the design value there is {current!r}, not a number")
    lo_text, hi_text = rng.split(":", 1)
    try:
        low, high = float(lo_text), float(hi_text)
    except ValueError:
        raise SpaceError(f"--vary {path}={rng}: LOW and HIGH must be numbers") from None
    if not (math.isfinite(low) and math.isfinite(high)):
        raise SpaceError(f"--vary {path}={rng}: LOW and HIGH must be finite numbers")
    if low >= high:
        raise SpaceError(f"--vary {path}={rng}: LOW = {low:g} must be below HIGH = {high:g}")
    integer = isinstance(current, int)
    if integer and (low != int(low) or high != int(high)):
        raise SpaceError(f"--vary {path}={rng}: {path} is a whole number; give whole LOW and "
                         "HIGH")
    return Vary(path, low, high, integer)


class _Search:
    def __init__(self, data: dict, varies: list[Vary], minimize: str, budget: int,
                 min_margin: float, search_settings: dict, progress=None) -> None:
        self.data, self.varies, self.minimize = data, varies, minimize
        self.budget, self.min_margin, self.progress = budget, min_margin, progress
        self.search_settings = search_settings
        self.runs: list[dict] = []
        self.best: dict | None = None

    # -- designs ---------------------------------------------------------------------------
    def design(self, values: tuple, settings: dict | None) -> Design | str:
        d = copy.deepcopy(self.data)
        for v, x in zip(self.varies, values, strict=True):
            set_path(d, v.path, int(round(x)) if v.integer else float(x))
        if settings:
            d.setdefault("analysis", {}).update(settings)
        try:
            return design_from_dict(d)
        except DesignError as exc:
            return "; ".join(exc.problems)

    def quantity(self, values: tuple) -> float:
        des = self.design(values, self.search_settings)
        if isinstance(des, str):
            return math.inf
        q = quantities(des)[self.minimize]
        return math.inf if q is None else float(q)

    # -- runs ------------------------------------------------------------------------------
    def evaluate(self, values: tuple, settings: dict | None, margin: float,
                 phase: str) -> dict:
        from femcore.foundation.run import run_design

        t0 = time.perf_counter()
        des = self.design(values, settings)
        rec = {"phase": phase, "values": {v.path: (int(round(x)) if v.integer else float(x))
                                          for v, x in zip(self.varies, values, strict=True)}}
        if isinstance(des, str):
            rec.update(status="invalid_input", feasible=False, reason=des, quantity=None,
                       seconds=0.0)
        else:
            try:
                res = run_design(des)
            except (KeyboardInterrupt, SystemExit):
                raise
            except Exception as exc:  # a failed run is a result of the search, not its end
                rec.update(status="error", feasible=False, quantity=None, seconds=0.0,
                           reason=f"{type(exc).__name__}: {exc}")
            else:
                checks = {k: c.as_dict() for k, c in res.requirements.items()}
                feasible, why = feasibility(res.status, checks, margin)
                margins = [c["margin"] for c in checks.values() if c["margin"] is not None]
                rec.update(status=res.status, feasible=feasible, reason=why,
                           quantity=res.quantities[self.minimize], quantities=res.quantities,
                           least_margin=min(margins) if margins else None,
                           keypoints={k: kp.value for k, kp in res.keypoints.items()},
                           requirements=checks, seconds=time.perf_counter() - t0)
        self.runs.append(rec)
        if self.progress:
            self.progress(rec)
        return rec

    def run_point(self, values: tuple) -> bool:
        rec = self.evaluate(values, self.search_settings, self.min_margin, "search")
        if rec["feasible"] and (self.best is None or rec["quantity"] < self.best["quantity"]):
            self.best = rec
        return rec["feasible"]

    def evaluated(self, values: tuple) -> bool:
        want = {v.path: (int(round(x)) if v.integer else float(x))
                for v, x in zip(self.varies, values, strict=True)}
        return any(r["values"] == want and r["phase"] == "search" for r in self.runs)

    @property
    def left(self) -> int:
        return self.budget - sum(r["phase"] == "search" for r in self.runs)


def _grid(v: Vary, n: int) -> list[float]:
    if v.integer:
        vals = np.arange(int(v.low), int(v.high) + 1)
        if vals.size > n:
            vals = np.unique(np.round(np.linspace(v.low, v.high, n)).astype(int))
        return [float(x) for x in vals]
    return [float(x) for x in np.linspace(v.low, v.high, max(n, 2))]


def _boundary_index(varies: list[Vary]) -> int:
    return next((i for i, v in enumerate(varies) if not v.integer), 0)


def size_design(design_path: str | Path, vary: list[str], minimize: str, budget: int,
                min_margin: float = 0.05, search_settings: dict | None = None,
                recheck: bool = True, progress=None) -> dict:
    """Search (see the module docstring); the sizing record ``{"best", "runs", "recheck",
    "settings", "baseline"}``."""
    from femcore.foundation.design import load_design

    base = load_design(design_path)
    data = base.model_dump(mode="json")
    if minimize not in SIZE_QUANTITIES:
        raise SpaceError(f"--minimize {minimize!r}: not a quantity; use one of "
                         f"{', '.join(SIZE_QUANTITIES)}")
    if minimize == "cost_index" and base.unit_rates is None:
        raise SpaceError("--minimize cost_index: the design has no [unit_rates] table")
    if not vary:
        raise SpaceError("--vary: give at least one PATH=LOW:HIGH")
    varies = [parse_vary(t, data) for t in vary]
    paths = [v.path for v in varies]
    if len(set(paths)) != len(paths):
        raise SpaceError(f"--vary: a path is given twice ({', '.join(paths)})")
    if not isinstance(budget, int) or budget < len(varies) + 1:
        raise SpaceError(f"--budget {budget}: at least the number of varied values + 1 "
                         f"({len(varies) + 1})")
    if not (math.isfinite(min_margin) and 0.0 <= min_margin <= 2.0):
        raise SpaceError(f"--min-margin {min_margin:g}: a fraction from 0 to 2 (0.05 for 5 %)")
    settings = {"mesh": "coarse", "element": "T6"} if search_settings is None \
        else search_settings
    s = _Search(data, varies, minimize, budget, min_margin, settings, progress)
    t0 = time.perf_counter()
    bi = _boundary_index(varies)
    vb = varies[bi]
    others = [v for i, v in enumerate(varies) if i != bi]
    per_point = 2
    n_grid = max(2, (budget - 1) // per_point)
    side = max(2, int(round(n_grid ** (1.0 / max(len(others), 1)))))
    grids = [_grid(v, side) for v in others]
    points = sorted(itertools.product(*grids), key=lambda p: tuple(-x for x in p)) \
        if others else [()]
    tol = (1.0 if vb.integer else TOLERANCE * (vb.high - vb.low))
    interrupted = False
    try:
        _boundary_search(s, varies, bi, points, tol)
    except KeyboardInterrupt:  # keep every finished run; no re-check
        interrupted = True
    search_s = time.perf_counter() - t0
    result: dict = {"settings": {"design": str(design_path),
                                 "vary": [v.__dict__ for v in varies],
                                 "minimize": minimize, "unit": QUANTITY_UNITS[minimize],
                                 "budget": budget, "min_margin": min_margin,
                                 "search_model": settings, "boundary_parameter": vb.path,
                                 "tolerance": tol},
                    "baseline": {"values": {v.path: get_path(data, v.path) for v in varies},
                                 "quantity": quantities(base)[minimize]},
                    "search_seconds": search_s, "interrupted": interrupted}
    feasible = sorted((r for r in s.runs if r["feasible"]), key=lambda r: r["quantity"])
    result["recheck"] = []
    best = None
    if recheck and not interrupted:
        seen = []
        for cand in feasible:
            if len(result["recheck"]) >= RECHECKS:
                break
            vals = tuple(cand["values"][v.path] for v in varies)
            if vals in seen:
                continue
            seen.append(vals)
            try:
                rec = s.evaluate(vals, None, 0.0, "recheck")
            except KeyboardInterrupt:
                result["interrupted"] = True
                break
            result["recheck"].append(rec)
            if rec["feasible"]:
                best = rec
                break
    elif feasible and not recheck:
        best = feasible[0]
    result["best"] = best
    result["runs"] = [r for r in s.runs if r["phase"] == "search"]
    result["search_runs"] = len(result["runs"])
    return result


def _boundary_search(s: _Search, varies: list[Vary], bi: int, points: list[tuple],
                     tol: float) -> None:
    """The grid of the non-boundary values, bisection of the boundary value at each point
    (module docstring); the runs go to ``s``."""
    vb = varies[bi]
    found: dict[tuple, tuple[float | None, float | None]] = {}  # o -> (infeasible b, feasible b)

    def full(o: tuple, b: float) -> tuple:
        vals = list(o)
        vals.insert(bi, b)
        return tuple(vals)

    def snap(b: float) -> float:
        return float(round(b)) if vb.integer else b

    baseline = tuple(float(get_path(s.data, v.path)) for v in varies)
    if all(v.low <= x <= v.high for v, x in zip(varies, baseline, strict=True)):
        s.run_point(baseline)  # the design as given: the first incumbent
    for o in points:
        if s.left <= 0:
            break
        lo, hi, hi_known, lo_known = vb.low, vb.high, False, False
        for o2, (bad, good) in found.items():
            if all(a >= c for a, c in zip(o2, o, strict=True)) and bad is not None:
                lo, lo_known = max(lo, bad), True  # infeasible with more resources
            if all(a <= c for a, c in zip(o2, o, strict=True)) and good is not None \
                    and good <= hi:
                hi, hi_known = good, True  # feasible with fewer resources
        if lo_known and lo >= hi:  # the model's noise broke monotonicity here
            lo, lo_known = vb.low, False
        virtual = False  # hi: where the quantity reaches the best so far (never run)
        if s.best is not None:
            q_best = s.best["quantity"]
            if s.quantity(full(o, lo)) >= q_best:
                continue
            if s.quantity(full(o, hi)) >= q_best:
                a, c = lo, hi
                for _ in range(40):
                    m = 0.5 * (a + c)
                    a, c = (m, c) if s.quantity(full(o, m)) < q_best else (a, m)
                hi, hi_known, virtual = c, False, True
        if not hi_known and not virtual:
            if not s.run_point(full(o, snap(hi))):
                found[o] = (hi, None)
                continue
        bad, good = (lo if lo_known else None), hi
        a = lo
        if virtual and s.left > 0:  # just below the bound: else nothing to gain here
            probe = snap(hi - tol) if not vb.integer else hi - 1.0
            if probe <= lo:
                continue
            if not s.run_point(full(o, probe)):
                found[o] = (probe, None)
                continue
            good, virtual = probe, False
        if not lo_known and s.left > 0 and snap(vb.low) < good:
            if s.run_point(full(o, snap(vb.low))):  # the bottom of the range already works
                found[o] = (None, vb.low)
                continue
            bad = a = vb.low
        while good - a > tol and s.left > 0:
            m = snap(0.5 * (a + good))
            if m <= a or m >= good:
                break
            if s.run_point(full(o, m)):
                good, virtual = m, False
            else:
                bad = a = m
        found[o] = (bad, None if virtual else good)
        point = full(o, snap(good))
        if not virtual and s.left > 0 and not s.evaluated(point) and (
                s.best is None or s.quantity(point) < s.best["quantity"]):
            s.run_point(point)  # feasible by inheritance: run it for its checks


def write_sizing(result: dict, out: Path) -> list[Path]:
    """``out/sizing.json`` and ``out/sizing.pdf`` (settings, the result and its checks, the
    trail of every run with a figure); the files written."""
    out.mkdir(parents=True, exist_ok=True)
    js = out / "sizing.json"
    js.write_text(json.dumps(result, indent=1, default=float), encoding="utf-8")
    return [js, _sizing_pdf(result, out / "sizing.pdf")]


def _sizing_pdf(result: dict, path: Path) -> Path:
    import datetime as _dt

    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.backends.backend_pdf import PdfPages

    from femcore.foundation.records import CAUTION

    from . import summary as sm
    from .notepage import BAD, GOOD, MUTED, Column, NoteDocument

    st = result["settings"]
    varies = [v["path"] for v in st["vary"]]
    doc = NoteDocument(plt, "tiltfe sizing search", _dt.date.today().isoformat())
    doc.title("Sizing search", Path(st["design"]).name)
    unit = "" if st["unit"] == "-" else f" {st['unit']}"
    doc.pairs([("Minimise", f"{st['minimize']}{unit}"),
               ("Varied", ", ".join(f"{v['path']} {v['low']:g} to {v['high']:g}"
                                    for v in st["vary"])),
               ("Search model", f"{st['search_model'].get('element', '')} "
                                f"{st['search_model'].get('mesh', '')}, every check with a "
                                f"margin of at least {100 * st['min_margin']:g} %"),
               ("Runs", f"{result['search_runs']} of a budget of {st['budget']} "
                        f"({result['search_seconds']:.0f} s), then "
                        f"{len(result['recheck'])} re-check(s) with the design's own "
                        "analysis settings"),
               ("Baseline", ", ".join(f"{k} = {v:g}" for k, v in
                                      result["baseline"]["values"].items())
                + f": {sm.num(result['baseline']['quantity'])}{unit}")], key_width=0.2)
    best = result["best"]
    doc.heading("Result")
    if result.get("interrupted"):
        doc.text(f"The search was stopped (Ctrl-C) after {result['search_runs']} runs; no "
                 "re-check was made. The trail below holds every finished run.", colour=BAD)
    elif best is None:
        doc.text("No design in the box passed every check (or the re-checks failed): widen "
                 "the ranges, raise the budget or the search margin.", colour=BAD)
    else:
        saving = 1 - best["quantity"] / result["baseline"]["quantity"] \
            if result["baseline"]["quantity"] else None
        change = "" if saving is None else (
            f" ({100 * saving:.1f} % less than the baseline)" if saving >= 0 else
            f" ({-100 * saving:.1f} % more than the baseline)")
        doc.text(", ".join(f"{k} = {v:g}" for k, v in best["values"].items())
                 + f": {sm.num(best['quantity'])}{unit}{change}", weight="bold")
        from femcore.foundation.records import RequirementCheck

        checks = {k: RequirementCheck(**{f: c.get(f) for f in ("name", "value", "required",
                                                               "unit", "passed", "margin",
                                                               "detail", "extra")})
                  for k, c in best["requirements"].items()}
        rows = sm.requirement_rows(checks)
        doc.table([Column("Requirement (re-check)", 0.4), Column("Required", 0.2, "r"),
                   Column("Computed", 0.18, "r"), Column("Margin", 0.1, "r"),
                   Column("Result", 0.12, "r")], rows,
                  colours={(r, 4): GOOD if row[4] == "PASS" else BAD
                           for r, row in enumerate(rows)})
    doc.heading("Trail")
    rows = []
    for i, r in enumerate(result["runs"] + result["recheck"], start=1):
        rows.append((str(i), r["phase"], *[f"{r['values'][p]:g}" for p in varies],
                     sm.num(r["quantity"]), "-" if r.get("least_margin") is None
                     else f"{100 * r['least_margin']:+.1f} %",
                     "feasible" if r["feasible"] else r.get("reason", "")))
    w = 0.36 / max(len(varies), 1)
    doc.text("Every run in order: " + ", ".join(f"v{i} = {p}" for i, p in
                                                enumerate(varies, start=1))
             + f"; quantity = {st['minimize']}{unit}; least margin over the checks.",
             size=8.0)
    doc.table([Column("#", 0.05, "r"), Column("phase", 0.1),
               *[Column(f"v{i}", w, "r") for i in range(1, len(varies) + 1)],
               Column("quantity", 0.12, "r"), Column("least margin", 0.13, "r"),
               Column("verdict", 0.34)], rows, size=7.2)
    if len(varies) >= 1:
        rect = doc.figure_area(0.32)
        ax = doc.fig.add_axes((rect[0] + 0.08 * rect[2], rect[1] + 0.14 * rect[3],
                               0.88 * rect[2], 0.82 * rect[3]))
        xs = varies[1] if len(varies) > 1 else varies[0]
        ys = varies[0] if len(varies) > 1 else st["minimize"]

        def val(r, k):
            return r["values"][k] if k in r["values"] else r["quantity"]

        for ok, colour, label in ((True, GOOD, "feasible"), (False, MUTED, "not feasible")):
            pts = [r for r in result["runs"] if r["feasible"] == ok]
            ax.scatter([val(r, xs) for r in pts], [val(r, ys) for r in pts], color=colour,
                       s=22, label=label)
        if best is not None:
            ax.scatter([val(best, xs)], [val(best, ys)], s=120, facecolors="none",
                       edgecolors=BAD, lw=1.5, label="result (re-checked)")
        ax.set_xlabel(xs)
        ax.set_ylabel(ys)
        ax.legend(fontsize=7, frameon=False)
        doc.caption(1, "The runs of the search", "Every run of the search in the varied "
                    "parameters, feasible (every check passed with the search margin) or not; "
                    "the circle marks the result after its re-check.")
    doc.boxed("Caution. " + CAUTION)
    with PdfPages(path) as pdf:
        for fig in doc.finish("tiltfe sizing search: indicative model results"):
            pdf.savefig(fig)
            plt.close(fig)
    return path
