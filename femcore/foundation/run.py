"""One design, end to end: the one run path of the CLI, the campaigns, the bench and the API.

``run_design(design)`` = :func:`~femcore.foundation.build.build_model` + :func:`run_built`:
the stages (:mod:`.stages`), the moment-rotation curve (3D estimates = per metre of slice x L),
its key points, the dynamic (small-strain) stiffness, every requirement check and the pile
force envelopes, in one :class:`Result` whose ``to_dict()`` is exactly ``result.json``.
Nothing here prints or writes files.
"""

from __future__ import annotations

import functools
import platform
import subprocess
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .. import __version__
from ..stepping import StepRecord, StepResult, StepSettings
from .build import BuiltModel, build_model, set_slice_length
from .design import SCHEMA_VERSION, Design, design_from_dict
from .dynamic import dynamic_stiffness
from .elastic3d import calibrated_slice_length, check_harmonic_layout, harmonic_stiffness
from .keypoints import (
    PLATEAU_TANGENT,
    KeyPoint,
    analyse_curve,
    moment_at_rotation,
    ultimate_plateau,
)
from .quantities import quantities
from .records import (
    CAUTION,
    DynamicStiffness,
    ElasticStiffness,
    PileEnvelope,
    RequirementCheck,
    Status,
)
from .requirements import check_requirements
from .stages import PUSHOVER_RELATIVE, STRENGTH_RELATIVE, StageLog, run_stages, stages_for
from .strength import factored_design

__all__ = ["Result", "run_design", "run_built", "run_harmonic", "prepare",
           "RESULT_SCHEMA_VERSION"]

RESULT_SCHEMA_VERSION = "5"


def _clean(obj):
    """JSON-safe copy: numpy to lists/floats, NaN/inf to None."""
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _clean(obj.tolist())
    if isinstance(obj, (np.floating, float)):
        v = float(obj)
        return v if np.isfinite(v) else None
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


@functools.lru_cache(maxsize=1)
def source_revision() -> str | None:
    """The git revision (short hash, ``+`` when the tree has uncommitted changes) of the
    tiltfe source in use; None outside a git checkout (an installed wheel)."""
    here = Path(__file__).resolve().parent
    try:
        rev = subprocess.run(["git", "rev-parse", "--short", "HEAD"], capture_output=True,
                             text=True, cwd=here, timeout=5)
        if rev.returncode != 0 or not rev.stdout.strip():
            return None
        dirty = subprocess.run(["git", "status", "--porcelain", "--untracked-files=no"],
                               capture_output=True, text=True, cwd=here, timeout=5)
        return rev.stdout.strip() + ("+" if dirty.stdout.strip() else "")
    except (OSError, subprocess.SubprocessError):
        return None


def versions() -> dict[str, str]:
    """Versions of tiltfe and the numerical libraries (provenance of every result)."""
    import scipy

    from meshing import gmsh_version

    from ..linsolve import preferred_backend

    return {"tiltfe": __version__, "source_revision": source_revision(),
            "python": platform.python_version(),
            "numpy": np.__version__, "scipy": scipy.__version__, "gmsh": gmsh_version(),
            "linear_solver": preferred_backend()}


@dataclass
class Result:
    """Outcome of one design run; ``to_dict()`` is the content of ``result.json``."""

    status: Status
    message: str
    curve: dict  # arrays: rotation, moment (3D), moment_per_m, vertical, horizontal, ...
    keypoints: dict[str, KeyPoint]
    requirements: dict[str, RequirementCheck]
    piles: list[PileEnvelope]
    model: dict
    timings: dict
    design_name: str = ""
    dynamic: DynamicStiffness | None = None
    stages: list[dict] = field(default_factory=list)
    elastic: ElasticStiffness | None = None
    design_strength: dict | None = None  # the factored pushover (see run_built)
    built: BuiltModel | None = field(default=None, repr=False)
    pushover: StepResult | None = field(default=None, repr=False)
    design: Design | None = field(default=None, repr=False)
    harmonic: object | None = field(default=None, repr=False)  # the HarmonicBuilt model
    quantities: dict | None = None  # material quantities (None: from the design)
    source: dict | None = None  # the input file: {"file", "sha256"} (set by the CLI)

    def __post_init__(self) -> None:
        if self.design is None and self.built is not None:
            self.design = self.built.design
        if self.quantities is None and self.design is not None:
            self.quantities = quantities(self.design)

    def to_dict(self) -> dict:
        return _clean({
            "schema_version": RESULT_SCHEMA_VERSION, "design_schema_version": SCHEMA_VERSION,
            "status": self.status, "message": self.message, "design": self.design_name,
            "curve": {k: np.asarray(v).tolist() for k, v in self.curve.items()},
            "keypoints": {k: v.as_dict() for k, v in self.keypoints.items()},
            "dynamic": None if self.dynamic is None else self.dynamic.as_dict(),
            "elastic": None if self.elastic is None else self.elastic.as_dict(),
            "design_strength": self.design_strength,
            "requirements": {k: v.as_dict() for k, v in self.requirements.items()},
            "piles": [p.as_dict() for p in self.piles], "model": self.model,
            "stages": self.stages, "timings": self.timings, "quantities": self.quantities,
            "input": self.source, "caution": CAUTION})


def _slice_rule(built: BuiltModel) -> str:
    L = built.design.analysis.slice_length
    if built.design.analysis.support == "springs":
        return "no effect with springs support"
    if L == "calibrated" and "slice_calibration" not in built.meta:
        return "16 R / (3 pi) as built; calibrated when the design is run"
    if L == "calibrated":
        return ("calibrated to the harmonic 3D stiffness" if built.meta.get("slice_calibration")
                else "16 R / (3 pi) (calibration needs rings of >= 3 piles)")
    return "16 R / (3 pi)" if L == "cap_rule" else "given"


def _model_info(built: BuiltModel) -> dict:
    m, an = built.model, built.design.analysis
    return {"nodes": m.mesh.n_nodes, "dofs": m.n_dofs, "cells": m.mesh.n_cells,
            "geometry": an.geometry, "element": an.element, "mesh": an.mesh,
            "support": an.support, "slice_length_m": built.slice_length,
            "slice_length_rule": _slice_rule(built),
            "slice_calibration": built.meta.get("slice_calibration"),
            "slip_stiffening": built.meta["slip_stiffening"], "rows": built.meta["rows"],
            "reference_point": built.ref_xy, "versions": versions()}


def _pile_envelopes(built: BuiltModel, res: StepResult | None) -> list[PileEnvelope]:
    out: list[PileEnvelope] = []
    if res is None:
        return out
    for k, pr in enumerate(built.rows):
        series = [r.extra["piles"][k] for r in res.records if r.extra]
        if not series:
            continue
        comp = np.array([s["compression"] for s in series])  # (steps, elements)
        mom = np.array([s["moment"] for s in series])  # (steps, elements)
        depth = -0.5 * (pr.beam.xy[1:, 1] + pr.beam.xy[:-1, 1])  # (elements,)
        out.append(PileEnvelope(
            k + 1, pr.row.x, pr.row.count, pr.row.rake,
            max(s["max_compression"] for s in series),
            max(0.0, -min(s["min_compression"] for s in series)),
            max(s["max_abs_moment"] for s in series), depth.tolist(),
            comp.max(axis=0).tolist(), comp.min(axis=0).tolist(), mom.max(axis=0).tolist(),
            mom.min(axis=0).tolist()))
    return out


def _least_compression(res: StepResult) -> list[float]:
    """Least pile axial compression of each step (kN per pile)."""
    return [min(p["min_compression"] for p in r.extra["piles"]) if r.extra and
            r.extra["piles"] else np.inf for r in res.records]


def _moment_curve(built: BuiltModel, log: StageLog, res: StepResult):
    loading, L, dm = built.design.loading, built.slice_length, built.model.dofmap
    U, W = dm.ref_dof(built.ref, 0), dm.ref_dof(built.ref, 1)
    u_start = log.start.u
    theta0 = float(u_start[dm.ref_dof(built.ref, 2)])
    mon = np.array([r.monitor for r in res.records]).reshape(-1, 3)  # (steps, 3)
    rot = mon[:, 2] - theta0
    force = res.force[:, 0] if res.records else np.zeros(0)
    h = built.lever_height
    m2d = force if loading.control == "rotation" else force * h
    h2d = np.full_like(rot, loading.horizontal / L) if loading.control == "rotation" else force
    return {"rotation": rot, "moment": m2d * L, "moment_per_m": m2d,
            "vertical": np.full_like(rot, loading.vertical),
            "horizontal": h2d * L, "settlement": -(mon[:, 1] - u_start[W]),
            "horizontal_displacement": mon[:, 0] - u_start[U],
            "iterations": res.iterations}


def _settlement_curve(built: BuiltModel, log: StageLog, res: StepResult):
    W = built.model.dofmap.ref_dof(built.ref, 1)
    w0 = float(log.start.u[W])
    settle = -(res.displacement[:, 0] - w0) if res.records else np.zeros(0)
    V = -res.force[:, 0] if res.records else np.zeros(0)
    curve = {"settlement": settle, "vertical": V, "iterations": res.iterations}
    kp: dict[str, KeyPoint] = {}
    if settle.size >= 2:
        k0 = V[0] / settle[0]
        kp["vertical_stiffness"] = KeyPoint("vertical_stiffness", float(k0), "kN/m",
                                            "secant V/w at the first increment",
                                            {"settlement": float(settle[0])})
        tu, vu, censored = ultimate_plateau(settle, V, k0)
        kp["ultimate_vertical"] = KeyPoint(
            "ultimate_vertical", vu, "kN",
            "maximum load (no plateau: censored)" if censored else
            "plateau: tangent below 2 % of the initial stiffness",
            {"tangent_ratio": 0.02}, {"settlement": tu, "censored": censored})
        width = built.design.piles.width
        v_at = moment_at_rotation(settle, V, min(0.1 * width, settle[-1]))
        kp["vertical_at_10pct_width"] = KeyPoint("vertical_at_10pct_width", v_at, "kN",
                                                 "load at a settlement of 10 % of the pile width",
                                                 {"settlement": 0.1 * width})
    return curve, kp


def _initial_from_harmonic(kp: dict[str, KeyPoint], elastic: ElasticStiffness) -> None:
    """The initial stiffness key point from the harmonic 3D solve; the slice's figure (the
    curve's first secant) stays beside it."""
    old = kp.get("initial_stiffness")
    lever = elastic.lever_arm
    kp["initial_stiffness"] = KeyPoint(
        "initial_stiffness", elastic.value, "kNm/rad",
        "harmonic 3D solve n = 1, operational E, "
        + (f"H = M/h, h = {lever:g} m" if lever else "moment only"),
        {"moduli": "operational"},
        {"slice": None if old is None else old.value,
         "slice_method": None if old is None else old.method})


def _pushover_outcome(built: BuiltModel, res: StepResult, curve: dict, kp: dict) -> tuple:
    """(status, message) of a finished pushover, and the ultimate key point fixed up for a
    mechanism. A failed increment is a mechanism (status ok, the curve kept, the ultimate
    its largest moment) when the tangent of the state reached was singular (in the first
    two iterations) or the last increment was already flat (tangent below 2 % of the
    initial stiffness); otherwise a divergence, with the stage, the rotation and moment
    reached, what was tried and what the residual did."""
    if res.status != "diverged":
        ult = kp.get("ultimate")
        if ult is not None and ult.extra.get("censored"):
            cap = built.design.loading.rotation_max
            return "censored", (f"no plateau up to the rotation cap {cap:g} rad: the ultimate "
                                "moment is a lower bound (raise loading.rotation_max)")
        return "ok", res.message
    rot, mom = curve.get("rotation", np.zeros(0)), curve.get("moment", np.zeros(0))
    fail = res.failure or {}
    k0 = kp["initial_stiffness"].extra.get("slice") if "initial_stiffness" in kp else None
    k0 = k0 or (kp["initial_stiffness"].value if "initial_stiffness" in kp else None)
    flat = False
    if rot.size >= 2 and k0:
        t_last = (mom[-1] - mom[-2]) / max(rot[-1] - rot[-2], 1e-30)
        flat = bool(t_last <= PLATEAU_TANGENT * k0)
    th = float(rot[-1]) if rot.size else 0.0
    m = float(mom[-1]) if mom.size else 0.0
    where = f"at rotation {th * 1e3:.3g} mrad, M = {m / 1e3:.4g} MNm"
    early_singular = bool(fail.get("singular")) and (fail.get("iteration") or 99) <= 2
    if early_singular or flat:
        why = ("the tangent stiffness of the state reached is singular" if early_singular
               else "no equilibrium beyond it, on a flat curve")
        k = int(np.argmax(mom)) if mom.size else 0
        kp["ultimate"] = KeyPoint(
            "ultimate", float(mom[k]) if mom.size else 0.0, "kNm",
            "mechanism: the largest moment before the foundation could carry no more "
            "(held vertical load and " + ("H = M/h)" if built.design.loading.control ==
                                          "lever" else "held H)"), {},
            {"rotation": float(rot[k]) if rot.size else 0.0, "censored": False,
             "confirmed": True, "end_rotation": th, "mechanism": True})
        return "ok", f"capacity reached: mechanism {where} ({why})"
    step = fail.get("step", 0.0) * built.design.loading.rotation_max
    return "diverged", (f"pushover stage: no convergence {where}, the curve still rising "
                        f"(not a mechanism), after {res.cutbacks} cut-back(s) down to an "
                        f"increment of {step * 1e3:.2g} mrad; tried: halving the increment, "
                        "up to 25 Newton iterations each from a linear extrapolation, a "
                        "backtracking line search on the retries; "
                        + _residual_pattern(fail.get("history") or [], fail))


def _residual_pattern(history: list[float], fail: dict) -> str:
    """What the last Newton attempt did, in words."""
    if not history:
        return "no iterations recorded"
    low = min(history)
    if fail.get("singular"):
        return (f"the last attempt reached an iterate with a singular tangent at iteration "
                f"{fail.get('iteration')} (lowest relative residual {low:.1e})")
    if low < 10 * 1e-6 and history[-1] > 10 * low:
        return (f"the residual came down to {low:.1e} (tolerance 1e-6) and jumped back to "
                f"{history[-1]:.1e}: points flip between states (contact, slip or yield)")
    return (f"the residual stalled between {low:.1e} and {max(history):.1e} "
            "(tolerance 1e-6)")


def _initial_stage_failure(built: BuiltModel, failed) -> tuple[str, str]:
    """(status, message) of a weight or vertical-load stage that did not converge: under
    load control a singular tangent is a mechanism under that load (status ok, no moment
    capacity)."""
    fail = failed.result.failure or {}
    lam = fail.get("lam", 0.0)
    if fail.get("singular") and failed.name.startswith("vertical"):
        lo = built.design.loading
        what = (f"V = {lo.vertical:g} kN" + (f" and H = {lo.horizontal:g} kN"
                                            if "horizontal" in failed.name else ""))
        return "ok", (f"capacity reached: mechanism under the {failed.name} alone at "
                      f"{lam:.0%} of {what} (no moment capacity)")
    if fail.get("singular") and failed.name == "self-weight":
        return "ok", (f"capacity reached: mechanism under the weights alone at {lam:.0%} of "
                      "them (the piles and soil cannot carry the cap, the backfill and the "
                      "soil's own weight; no moment capacity)")
    return "diverged", (f"{failed.name} stage: no convergence at {lam:.0%} of the load after "
                        f"{failed.result.cutbacks} cut-back(s) ({failed.result.message})")


def _stopped_checks(design: Design, kp: dict[str, KeyPoint],
                    stage: str) -> dict[str, RequirementCheck]:
    """The requirement checks of a run that stopped in an initial stage: a mechanism there
    fails the capacity check (no moment capacity); every other check is not decided."""
    return check_requirements(design, np.zeros(0), np.zeros(0), kp, [], None,
                              stopped=f"the run stopped in the {stage} stage")


def run_built(built: BuiltModel, progress: Callable[[StepRecord], None] | None = None,
              settings: StepSettings | None = None, dynamic: bool = True,
              elastic: ElasticStiffness | None = None, factored: bool = True,
              relative: float = PUSHOVER_RELATIVE) -> Result:
    """Run the stages of a built model and evaluate everything (see the module docstring).

    ``progress`` sees every converged pushover increment; ``settings`` overrides the pushover
    increments; ``dynamic`` False skips the small-strain analysis (its check is then
    reported as not decided); ``elastic`` (the harmonic operational stiffness, computed
    here when None and the design allows it) gives the initial stiffness; ``factored``
    False skips the design-strength pushover of a design with ``[design_strength]``;
    ``relative`` bounds pushover increments relative to the rotation reached (the
    design-strength pushover runs with the coarser :data:`~.stages.STRENGTH_RELATIVE`).
    """
    t0 = time.perf_counter()
    design = built.design
    stages = stages_for(built, settings, relative)
    log = run_stages(built, stages, progress)
    t1 = time.perf_counter()
    stage_rows = _stage_rows(log)
    failed = log.failed
    final = log.last
    info = _model_info(built)
    if failed is not None and len(log.outcomes) < len(stages) or \
            failed is not None and failed is not final:  # an initial stage failed: no curve
        status, message = _initial_stage_failure(built, failed)
        kp0 = {} if status != "ok" else {"ultimate": KeyPoint(
            "ultimate", 0.0, "kNm", f"mechanism under the {failed.name} stage's load", {},
            {"rotation": 0.0, "censored": False, "mechanism": True})}
        return Result(status, message, {}, kp0, _stopped_checks(design, kp0, failed.name),
                      [], info,
                      {"total_s": t1 - t0, "build_s": built.meta.get("build_s", 0.0)},
                      design.name, None, stage_rows, built=built, pushover=failed.result)
    res = final.result
    dyn = None
    if design.loading.control == "settlement":
        curve, kp = _settlement_curve(built, log, res)
        status_kp = kp.get("ultimate_vertical")
        req: dict[str, RequirementCheck] = {}
        status: Status = "diverged" if res.status == "diverged" else \
            ("censored" if status_kp is not None and status_kp.extra["censored"] else "ok")
        message = res.message
        strength = None
    else:
        curve = _moment_curve(built, log, res)
        kp = analyse_curve(curve["rotation"], curve["moment"], design.keypoints.rotations,
                           design.keypoints.moments, require_confirmed=True) \
            if curve["rotation"].size >= 2 else {}
        if elastic is None and design.analysis.geometry == "plane_strain" \
                and not check_harmonic_layout(design):
            elastic = harmonic_stiffness(design, vertical=False)
        if elastic is not None:
            _initial_from_harmonic(kp, elastic)
        status, message = _pushover_outcome(built, res, curve, kp)
        strength = None
        if factored and design.design_strength is not None:
            strength = _design_strength_run(built, elastic, settings, progress)
        if dynamic:
            dyn = dynamic_stiffness(design, slice_length=built.slice_length)
        req = check_requirements(design, curve["rotation"], curve["moment"], kp,
                                 _least_compression(res), dyn,
                                 None if strength is None else strength.get("ultimate"))
    t2 = time.perf_counter()
    stages_s = sum(o.seconds for o in log.outcomes[:-1])
    pre = built.meta.get("build_s", 0.0) + built.meta.get("harmonic_s", 0.0)
    cal = built.meta.get("slice_calibration") or {}
    timings = {"harmonic_s": built.meta.get("harmonic_s", 0.0),
               "calibration_s": cal.get("seconds", 0.0),
               "build_s": built.meta.get("build_s", 0.0), "stages_s": stages_s,
               "pushover_s": final.seconds, "pushover_solver_s": final.solver_s,
               "pushover_factorizations": final.factorizations, "postprocess_s": t2 - t1,
               "total_s": t2 - t0 + pre,
               "increments": len(res.records), "iterations": int(res.iterations.sum()),
               "cutbacks": res.cutbacks}
    if strength is not None:
        timings["design_strength_s"] = strength["seconds"]
        timings["postprocess_s"] -= strength["seconds"]
    out = Result(status, message, curve, kp, req, _pile_envelopes(built, res), info,
                 timings, design.name, dyn, stage_rows, elastic=elastic, built=built,
                 pushover=res)
    out.design_strength = None if strength is None else strength["record"]
    return out


def _design_strength_run(built: BuiltModel, elastic, settings, progress=None) -> dict:
    """The factored pushover of a design with ``[design_strength]``: the same mesh and
    slice length, the soil strengths divided by the factors (:func:`factored_design`)."""
    t = time.perf_counter()
    design = built.design
    fd = factored_design(design)
    fb = build_model(fd, slice_length=built.slice_length,
                     pile_resistance=design.design_strength.pile_resistance)
    fb.meta.update(slice_calibration=built.meta.get("slice_calibration"))
    sub = run_built(fb, progress, settings=settings, dynamic=False, elastic=elastic,
                    factored=False, relative=STRENGTH_RELATIVE)
    ult = sub.keypoints.get("ultimate")
    keep = ("ultimate", "yield_equal_energy", "yield_tangents", "ultimate_hyperbolic")
    record = {"factors": design.design_strength.model_dump(), "status": sub.status,
              "message": sub.message,
              "keypoints": {k: sub.keypoints[k].as_dict() for k in keep if k in sub.keypoints},
              "curve": {k: np.asarray(sub.curve[k]).tolist() for k in ("rotation", "moment")
                        if k in sub.curve},
              "increments": sub.timings.get("increments"),
              "seconds": time.perf_counter() - t}
    return {"ultimate": ult, "record": record, "seconds": record["seconds"]}


def prepare(design: Design) -> tuple[BuiltModel, ElasticStiffness | None]:
    """The 2D model of a plane-strain or axisymmetric design, ready for :func:`run_built`,
    and the harmonic 3D elastic stiffness (plane strain with rings of >= 3 piles in the
    continuum; else None). A calibrated slice length is found here (one assembly of the
    slice, a few factorisations; the mesh is reused)."""
    t = time.perf_counter()
    elastic = None
    if design.analysis.geometry == "plane_strain" and not check_harmonic_layout(design):
        elastic = harmonic_stiffness(design, vertical=False)
    t_h = time.perf_counter()
    built = build_model(design)
    calibration = None
    t_c = time.perf_counter()
    if design.analysis.slice_length == "calibrated" and elastic is not None:
        L, calibration = calibrated_slice_length(built, elastic.value)
        set_slice_length(built, L)
        calibration["seconds"] = time.perf_counter() - t_c
    built.meta.update(build_s=time.perf_counter() - t_h, harmonic_s=t_h - t,
                      slice_calibration=calibration)
    return built, elastic


def run_design(design: Design | dict, progress: Callable[[StepRecord], None] | None = None,
               dynamic: bool = True) -> Result:
    """Build and run one design (a :class:`Design` or a nested dict, validated first).

    Plane strain with the continuum: the harmonic 3D elastic solve first (initial
    stiffness; the target of a calibrated slice length), then the slice pushover
    (:func:`prepare`, :func:`run_built`). Harmonic geometry: the elastic 3D solves and the
    nonlinear pushover of the coupled harmonics (:func:`run_harmonic`)."""
    if isinstance(design, dict):
        design = design_from_dict(design)
    if design.analysis.geometry == "harmonic":
        return run_harmonic(design, dynamic, progress)
    built, elastic = prepare(design)
    return run_built(built, progress, dynamic=dynamic, elastic=elastic)


def _harmonic_curve(hb, log: StageLog, res: StepResult) -> dict:
    lo = hb.design.loading
    U, W, TH = hb.ref_dof(1, 0), hb.ref_dof(0, 1), hb.ref_dof(1, 2)
    u0 = log.start.u
    mon = np.array([r.monitor for r in res.records]).reshape(-1, 3)
    rot = mon[:, 2] - float(u0[TH])
    force = res.force[:, 0] if res.records else np.zeros(0)
    m = force if lo.control == "rotation" else force * hb.lever_height
    hz = np.full_like(rot, lo.horizontal) if lo.control == "rotation" else force
    return {"rotation": rot, "moment": m, "moment_per_m": m,
            "vertical": np.full_like(rot, lo.vertical), "horizontal": hz,
            "settlement": -(mon[:, 1] - u0[W]), "horizontal_displacement": mon[:, 0] - u0[U],
            "iterations": res.iterations}


def _harmonic_pushover(design: Design, progress=None, settings: StepSettings | None = None,
                       pile_resistance: float = 1.0):
    """Build the coupled harmonic model of a design and run its stages."""
    from .harmonic_pushover import build_coupled, harmonic_stages

    hb = build_coupled(design, pile_resistance=pile_resistance)
    return hb, run_stages(hb, harmonic_stages(hb, settings), progress)


def _stage_rows(log: StageLog) -> list[dict]:
    return [{"name": o.name, "seconds": o.seconds,
             "increments": 0 if o.result is None else len(o.result.records),
             "iterations": 0 if o.result is None else int(o.result.iterations.sum()),
             "factorizations": o.factorizations, "solver_s": o.solver_s,
             "status": "ok" if o.ok else "diverged"} for o in log.outcomes]


def run_harmonic(design: Design, dynamic: bool = True,
                 progress: Callable[[StepRecord], None] | None = None,
                 settings: StepSettings | None = None, factored: bool = True) -> Result:
    """The harmonic analysis of a design: the 3D elastic stiffnesses at the tower base
    (n = 0 and 1) and the nonlinear pushover of every harmonic up to
    ``analysis.harmonics`` (:mod:`.harmonic_pushover`), with the key points, requirement
    checks, ring envelopes and the design-strength pushover of the slice path."""
    from ..harmonic_coupled import SOLVER_STATS
    from .harmonic_pushover import ring_envelopes

    t0 = time.perf_counter()
    for k in SOLVER_STATS:
        SOLVER_STATS[k] = 0 if isinstance(SOLVER_STATS[k], int) else 0.0
    el = harmonic_stiffness(design)
    hb, log = _harmonic_pushover(design, progress, settings)
    t2 = time.perf_counter()
    split = dict(SOLVER_STATS)
    stage_rows = _stage_rows(log)
    failed, final = log.failed, log.last
    an = design.analysis
    info = {"dofs": hb.model.n_dofs, "dofs_per_harmonic": hb.model.n1,
            "nodes": hb.meta["nodes"], "cells": hb.meta["cells"], "geometry": "harmonic",
            "harmonics": an.harmonics, "planes": hb.meta["planes"],
            "solver": hb.solver, "element": an.element, "mesh": an.mesh,
            "support": an.support, "near_field": el.near_field,
            "slip_stiffening": design.piles.slip_stiffening, "versions": versions()}
    base_t = {"harmonic_s": el.seconds["total_s"], "build_s": hb.meta["build_s"]}
    if failed is not None and failed is not final:
        status, message = _initial_stage_failure(hb, failed)
        kp0 = {} if status != "ok" else {"ultimate": KeyPoint(
            "ultimate", 0.0, "kNm", f"mechanism under the {failed.name} stage's load", {},
            {"rotation": 0.0, "censored": False, "mechanism": True})}
        return Result(status, message, {}, kp0, _stopped_checks(design, kp0, failed.name), [],
                      info, {**base_t, "total_s": time.perf_counter() - t0}, design.name,
                      None, stage_rows, elastic=el, pushover=failed.result, design=design)
    res = final.result
    curve = _harmonic_curve(hb, log, res)
    kp = analyse_curve(curve["rotation"], curve["moment"], design.keypoints.rotations,
                       design.keypoints.moments, require_confirmed=True) \
        if curve["rotation"].size >= 2 else {}
    own = kp.get("initial_stiffness")
    _initial_from_harmonic(kp, el)
    kp["initial_stiffness"].extra = {"curve": None if own is None else own.value,
                                     "curve_method": None if own is None else own.method}
    kp["vertical_stiffness"] = KeyPoint("vertical_stiffness", el.K_V, "kN/m",
                                        "harmonic 3D elastic solve (n = 0)", {})
    kp["horizontal_stiffness"] = KeyPoint("horizontal_stiffness", el.K_H, "kN/m",
                                          "harmonic 3D elastic solve (n = 1), rotation held",
                                          {})
    status, message = _pushover_outcome(hb, res, curve, kp)
    strength = None
    if factored and design.design_strength is not None:
        ts = time.perf_counter()
        fd = factored_design(design)
        _, flog = _harmonic_pushover(fd, progress, settings,
                                     design.design_strength.pile_resistance)
        fres = flog.last.result
        fcurve = _harmonic_curve(hb, flog, fres) if flog.failed in (None, flog.last) else {}
        fkp = analyse_curve(fcurve["rotation"], fcurve["moment"], (), (),
                            require_confirmed=True) \
            if fcurve and fcurve["rotation"].size >= 2 else {}
        keep = ("ultimate", "yield_equal_energy", "yield_tangents", "ultimate_hyperbolic")
        strength = {"ultimate": fkp.get("ultimate"), "seconds": time.perf_counter() - ts,
                    "record": {"factors": design.design_strength.model_dump(),
                               "status": "diverged" if flog.failed is not None else
                               ("censored" if fkp.get("ultimate") is not None and
                                fkp["ultimate"].extra.get("censored") else "ok"),
                               "increments": None if fres is None else len(fres.records),
                               "message": flog.last.result.message if flog.last.result
                               else "", "keypoints": {k: fkp[k].as_dict() for k in keep
                                                      if k in fkp},
                               "curve": {k: np.asarray(fcurve[k]).tolist()
                                         for k in ("rotation", "moment") if k in fcurve}}}
        strength["record"]["seconds"] = strength["seconds"]
    dyn = dynamic_stiffness(design) if dynamic else None
    req = check_requirements(design, curve["rotation"], curve["moment"], kp,
                             _least_compression(res), dyn,
                             None if strength is None else strength.get("ultimate"))
    t3 = time.perf_counter()
    timings = {**base_t, "stages_s": sum(o.seconds for o in log.outcomes[:-1]),
               "pushover_s": final.seconds, "return_map_s": split["material_s"],
               "solve_s": split["factor_s"] + split["solve_s"],
               "gmres_iterations": split["gmres_iterations"],
               "block_factorizations": split["block_factorizations"],
               "postprocess_s": t3 - t2, "total_s": t3 - t0,
               "increments": len(res.records), "iterations": int(res.iterations.sum()),
               "cutbacks": res.cutbacks}
    if strength is not None:
        timings["design_strength_s"] = strength["seconds"]
        timings["postprocess_s"] -= strength["seconds"]
    out = Result(status, message, curve, kp, req, ring_envelopes(hb, res), info, timings,
                 design.name, dyn, stage_rows, elastic=el, pushover=res, design=design,
                 harmonic=hb)
    out.design_strength = None if strength is None else strength["record"]
    return out
