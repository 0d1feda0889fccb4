"""One design, end to end: the one run path of the CLI, the campaigns, the bench and the API.

``run_design(design)`` = :func:`~femcore.foundation.build.build_model` + :func:`run_built`:
the stages (:mod:`.stages`), the moment-rotation curve (3D estimates = per metre of slice x L),
its key points, the dynamic (small-strain) stiffness, every requirement check and the pile
force envelopes, in one :class:`Result` whose ``to_dict()`` is exactly ``result.json``.
Nothing here prints or writes files.
"""

from __future__ import annotations

import platform
import time
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from .. import __version__
from ..stepping import StepRecord, StepResult, StepSettings
from .build import BuiltModel, build_model
from .design import SCHEMA_VERSION, Design, design_from_dict
from .dynamic import dynamic_stiffness
from .keypoints import KeyPoint, analyse_curve, moment_at_rotation, ultimate_plateau
from .records import CAUTION, DynamicStiffness, PileEnvelope, RequirementCheck, Status
from .requirements import check_requirements
from .stages import StageLog, run_stages, stages_for

__all__ = ["Result", "run_design", "run_built", "RESULT_SCHEMA_VERSION"]

RESULT_SCHEMA_VERSION = "2"


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


def versions() -> dict[str, str]:
    """Versions of tiltfe and the numerical libraries (provenance of every result)."""
    import scipy

    from meshing import gmsh_version

    return {"tiltfe": __version__, "python": platform.python_version(),
            "numpy": np.__version__, "scipy": scipy.__version__, "gmsh": gmsh_version()}


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
    built: BuiltModel | None = field(default=None, repr=False)
    pushover: StepResult | None = field(default=None, repr=False)

    def to_dict(self) -> dict:
        return _clean({
            "schema_version": RESULT_SCHEMA_VERSION, "design_schema_version": SCHEMA_VERSION,
            "status": self.status, "message": self.message, "design": self.design_name,
            "curve": {k: np.asarray(v).tolist() for k, v in self.curve.items()},
            "keypoints": {k: v.as_dict() for k, v in self.keypoints.items()},
            "dynamic": None if self.dynamic is None else self.dynamic.as_dict(),
            "requirements": {k: v.as_dict() for k, v in self.requirements.items()},
            "piles": [p.as_dict() for p in self.piles], "model": self.model,
            "stages": self.stages, "timings": self.timings, "caution": CAUTION})


def _model_info(built: BuiltModel) -> dict:
    m, an = built.model, built.design.analysis
    return {"nodes": m.mesh.n_nodes, "dofs": m.n_dofs, "cells": m.mesh.n_cells,
            "geometry": an.geometry, "element": an.element, "mesh": an.mesh,
            "support": an.support, "slice_length_m": built.slice_length,
            "slice_length_rule": "given" if an.slice_length is not None else "16 R / (3 pi)",
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


def run_built(built: BuiltModel, progress: Callable[[StepRecord], None] | None = None,
              settings: StepSettings | None = None, dynamic: bool = True) -> Result:
    """Run the stages of a built model and evaluate everything (see the module docstring).

    ``progress`` sees every converged pushover increment; ``settings`` overrides the pushover
    increments; ``dynamic`` False skips the small-strain analysis (its check is then
    reported as not decided).
    """
    t0 = time.perf_counter()
    design = built.design
    log = run_stages(built, stages_for(built, settings), progress)
    t1 = time.perf_counter()
    stage_rows = [{"name": o.name, "seconds": o.seconds,
                   "increments": 0 if o.result is None else len(o.result.records),
                   "iterations": 0 if o.result is None else int(o.result.iterations.sum()),
                   "status": "ok" if o.ok else "diverged"} for o in log.outcomes]
    failed = log.failed
    final = log.last
    info = _model_info(built)
    if failed is not None and failed is not final:  # an initial stage failed: no curve
        return Result("diverged", f"{failed.name} stage: {failed.result.message}", {}, {}, {},
                      [], info, {"total_s": t1 - t0, "build_s": built.meta.get("build_s", 0.0)},
                      design.name, None, stage_rows, built, failed.result)
    res = final.result
    dyn = None
    if design.loading.control == "settlement":
        curve, kp = _settlement_curve(built, log, res)
        status_kp = kp.get("ultimate_vertical")
        req: dict[str, RequirementCheck] = {}
    else:
        curve = _moment_curve(built, log, res)
        kp = analyse_curve(curve["rotation"], curve["moment"], design.keypoints.rotations,
                           design.keypoints.moments) if curve["rotation"].size >= 2 else {}
        status_kp = kp.get("ultimate")
        if dynamic:
            dyn = dynamic_stiffness(design)
        req = check_requirements(design, curve["rotation"], curve["moment"], kp,
                                 _least_compression(res), dyn)
    t2 = time.perf_counter()
    status: Status = "diverged" if res.status == "diverged" else \
        ("censored" if status_kp is not None and status_kp.extra["censored"] else "ok")
    stages_s = sum(o.seconds for o in log.outcomes[:-1])
    timings = {"build_s": built.meta.get("build_s", 0.0), "stages_s": stages_s,
               "pushover_s": final.seconds, "postprocess_s": t2 - t1,
               "total_s": t2 - t0 + built.meta.get("build_s", 0.0),
               "increments": len(res.records), "iterations": int(res.iterations.sum()),
               "cutbacks": res.cutbacks}
    return Result(status, res.message, curve, kp, req, _pile_envelopes(built, res), info,
                  timings, design.name, dyn, stage_rows, built, res)


def run_design(design: Design | dict, progress: Callable[[StepRecord], None] | None = None,
               dynamic: bool = True) -> Result:
    """Build and run one design (a :class:`Design` or a nested dict, validated first)."""
    if isinstance(design, dict):
        design = design_from_dict(design)
    t = time.perf_counter()
    built = build_model(design)
    built.meta["build_s"] = time.perf_counter() - t
    return run_built(built, progress, dynamic=dynamic)
