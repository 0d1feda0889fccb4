"""One design, end to end: build, stages, pushover, key points, requirement checks.

Stages (DESIGN 4.4): (1) K0 initial stresses in the soil; (2) cap and piles wished in place,
the cap's self-weight and the out-of-balance of the K0 field around the cap ramped in;
(3) the turbine's vertical load V (and a held horizontal load H under rotation control) on
the reference node; (4) the pushover: the reference rotation (``rotation``) or the
horizontal displacement of the lever-arm tip (``lever``, so that H = M / h throughout).
"""

from __future__ import annotations

import logging
import time
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from .. import __version__
from ..initial_stress import apply_k0, profile_loads
from ..model import SolidBlock
from ..stepping import Stepper, StepRecord, StepResult, StepSettings
from .build import BuiltModel, build_model
from .design import Design, design_from_dict
from .keypoints import KeyPoint, analyse_curve, rotation_at_moment

__all__ = ["Result", "run_design", "run_built"]

log = logging.getLogger(__name__)


@dataclass
class Result:
    """Outcome of one design run (DESIGN 5.3)."""

    status: str  # ok | censored | diverged
    message: str
    curve: dict  # arrays: rotation, moment (3D), moment_per_m, vertical, horizontal, ...
    keypoints: dict[str, KeyPoint]
    requirements: dict
    piles: list[dict]
    model: dict
    timings: dict
    design_name: str = ""
    built: BuiltModel | None = field(default=None, repr=False)
    pushover: StepResult | None = field(default=None, repr=False)

    def to_dict(self) -> dict:
        return {"status": self.status, "message": self.message, "design": self.design_name,
                "curve": {k: np.asarray(v).tolist() for k, v in self.curve.items()},
                "keypoints": {k: v.as_dict() for k, v in self.keypoints.items()},
                "requirements": self.requirements, "piles": self.piles, "model": self.model,
                "timings": self.timings}


def _pile_observer(built: BuiltModel):
    """Per row: head axial force (compression positive), min/max axial, max |M| (3D per pile
    is value * L / n_row; reported per pile)."""
    L = built.slice_length

    def observe(u, states) -> dict:
        out = []
        for pr in built.rows:
            axial, moments = pr.beam.section_forces(u[pr.beam.element_dofs])
            per_pile = L / pr.row.count
            comp = -axial * per_pile
            out.append({"head_compression": float(comp[0]), "max_compression": float(comp.max()),
                        "min_compression": float(comp.min()),
                        "max_abs_moment": float(np.abs(moments).max() * per_pile),
                        "compression": comp, "moment": moments.mean(axis=1) * per_pile})
        return {"piles": out}

    return observe


def run_built(built: BuiltModel, progress: Callable[[StepRecord], None] | None = None,
              settings: StepSettings | None = None) -> Result:
    t0 = time.perf_counter()
    design, model = built.design, built.model
    loading = design.loading
    L = built.slice_length
    dm = model.dofmap
    U, W, TH = (dm.ref_dof(built.ref, k) for k in range(3))
    cmap_free = built.constraints.build()

    # ---- stage 1-2: K0, then weights ramped in from the K0 state's own internal forces
    states = model.initial_states()
    f_weight = np.zeros(model.n_dofs)
    if design.analysis.support == "continuum":
        soil = [i for i, b in enumerate(model.blocks)
                if isinstance(b, SolidBlock) and b.name != "cap"]
        states = apply_k0(model, built.profile, states, soil)
        f_weight = profile_loads(model, built.profile, soil) + model.gravity()
    else:
        f_weight[W] = -built.meta["cap_weight_kN_per_m"]
    f0, _, _ = model.evaluate(np.zeros(model.n_dofs), states, tangent=False)
    stage_cfg = StepSettings(initial_step=0.5, max_step=0.5, min_step=1e-3,
                                 max_iterations=12, reuse_factorization=True)
    t1 = time.perf_counter()
    res_w = Stepper(model, cmap_free, f0, [], [], f_ext_end=f_weight,
                     settings=stage_cfg).run(states0=states)
    if res_w.status != "ok":
        return _failed(built, "weight stage", res_w, t0)
    if loading.control == "settlement":  # axisymmetric: the settlement drives the load
        return _settlement_pushover(built, res_w, f_weight, t0, t1, progress, settings)
    # ---- stage 3: vertical load (and held horizontal load under rotation control)
    f_v = f_weight.copy()
    f_v[W] -= loading.vertical / L
    if loading.control == "rotation":
        f_v[U] += loading.horizontal / L
    res_v = Stepper(model, cmap_free, f_weight, [], [], f_ext_end=f_v,
                     settings=stage_cfg).run(u0=res_w.u, states0=res_w.states)
    if res_v.status != "ok":
        return _failed(built, "vertical load stage", res_v, t0)
    t2 = time.perf_counter()

    # ---- stage 4: pushover
    cons = built.constraints
    ctrl = TH if loading.control == "rotation" else U
    cmap = cons.build(extra_fixed={ctrl: 0.0})
    u_start = res_v.u
    theta0 = float(u_start[TH])
    h = built.ref_xy[1] - built.pedestal_top
    if loading.control == "rotation":
        target = loading.rotation_max
        first = loading.initial_increment / target
    else:
        target = 1.6 * loading.rotation_max * h  # tip travel; stops on the rotation
        first = loading.initial_increment * h / target
    cfg = settings or StepSettings(initial_step=first, min_step=min(first, 1e-4) / 8,
                                       max_step=0.04, grow=1.6, reuse_factorization=True)

    def stop(rec: StepRecord) -> bool:
        return rec.monitor[2] - theta0 >= loading.rotation_max * (1 - 1e-9)

    po = Stepper(model, cmap, f_v, [ctrl], [target], monitor_dofs=[U, W, TH], settings=cfg,
                  observer=_pile_observer(built),
                  stop_when=None if loading.control == "rotation" else stop)
    res = po.run(u0=u_start, states0=res_v.states, callback=progress)
    t3 = time.perf_counter()

    # ---- curve (3D estimates = per metre x L)
    mon = np.array([r.monitor for r in res.records]).reshape(-1, 3)
    rot = mon[:, 2] - theta0
    force = res.force[:, 0] if res.records else np.zeros(0)
    m2d = force if loading.control == "rotation" else force * h
    h2d = np.full_like(rot, loading.horizontal / L) if loading.control == "rotation" else force
    curve = {"rotation": rot, "moment": m2d * L, "moment_per_m": m2d,
             "vertical": np.full_like(rot, loading.vertical),
             "horizontal": h2d * L, "settlement": -(mon[:, 1] - u_start[W]),
             "horizontal_displacement": mon[:, 0] - u_start[U],
             "iterations": res.iterations}
    kp = analyse_curve(rot, m2d * L, design.keypoints.rotations, design.keypoints.moments) \
        if rot.size >= 2 else {}
    status = "diverged" if res.status == "diverged" else \
        ("censored" if kp and kp["ultimate"].extra["censored"] else "ok")
    piles = _pile_summary(built, res)
    req = _requirements(design, rot, m2d * L, kp, res)
    t4 = time.perf_counter()
    info = _model_info(built)
    timings = {"build_s": built.meta.get("build_s", 0.0), "stages_s": t2 - t1,
               "pushover_s": t3 - t2, "postprocess_s": t4 - t3, "total_s": t4 - t0,
               "increments": len(res.records), "iterations": int(res.iterations.sum()),
               "cutbacks": res.cutbacks}
    return Result(status, res.message, curve, kp, req, piles, info, timings, design.name,
                  built, res)


def _settlement_pushover(built, res_w, f_weight, t0, t1, progress, settings) -> Result:
    """Axisymmetric vertical loading: settlement of the tower base from the weight state."""
    design, model = built.design, built.model
    loading = design.loading
    W = model.dofmap.ref_dof(built.ref, 1)
    cmap = built.constraints.build(extra_fixed={W: 0.0})
    w0 = float(res_w.u[W])
    cfg = settings or StepSettings(initial_step=1e-3, min_step=1e-5, max_step=0.05)
    t2 = time.perf_counter()
    res = Stepper(model, cmap, f_weight, [W], [-loading.settlement_max], monitor_dofs=[W],
                   settings=cfg, observer=_pile_observer(built)).run(
        u0=res_w.u, states0=res_w.states, callback=progress)
    t3 = time.perf_counter()
    settle = -(res.displacement[:, 0] - w0) if res.records else np.zeros(0)
    V = -res.force[:, 0] if res.records else np.zeros(0)
    curve = {"settlement": settle, "vertical": V, "iterations": res.iterations}
    kp = {}
    if settle.size >= 2:
        from .keypoints import KeyPoint, moment_at_rotation, ultimate_plateau

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
        v_at = moment_at_rotation(settle, V, min(0.1 * design.piles.width, settle[-1]))
        kp["vertical_at_10pct_width"] = KeyPoint("vertical_at_10pct_width", v_at, "kN",
                                                 "load at a settlement of 10 % of the pile width",
                                                 {"settlement": 0.1 * design.piles.width})
    status = "diverged" if res.status == "diverged" else \
        ("censored" if kp and kp["ultimate_vertical"].extra["censored"] else "ok")
    timings = {"build_s": built.meta.get("build_s", 0.0), "stages_s": t2 - t1,
               "pushover_s": t3 - t2, "total_s": time.perf_counter() - t0,
               "increments": len(res.records), "iterations": int(res.iterations.sum()),
               "cutbacks": res.cutbacks}
    return Result(status, res.message, curve, kp, {}, _pile_summary(built, res),
                  _model_info(built), timings, design.name, built, res)


def _failed(built: BuiltModel, what: str, res: StepResult, t0: float) -> Result:
    return Result("diverged", f"{what}: {res.message}", {}, {}, {}, [], _model_info(built),
                  {"total_s": time.perf_counter() - t0}, built.design.name, built, res)


def _model_info(built: BuiltModel) -> dict:
    m = built.model
    return {"nodes": m.mesh.n_nodes, "dofs": m.n_dofs, "cells": m.mesh.n_cells,
            "element": built.design.analysis.element, "support": built.design.analysis.support,
            "slice_length_m": built.slice_length, "rows": built.meta["rows"],
            "version": __version__, "reference_point": built.ref_xy}


def _pile_summary(built: BuiltModel, res: StepResult) -> list[dict]:
    out = []
    for k, pr in enumerate(built.rows):
        series = [r.extra["piles"][k] for r in res.records if r.extra]
        if not series:
            continue
        comp = np.array([s["compression"] for s in series])  # (steps, elements)
        mom = np.array([s["moment"] for s in series])
        depth = -0.5 * (pr.beam.xy[1:, 1] + pr.beam.xy[:-1, 1])
        out.append({"row": k + 1, "x": pr.row.x, "count": pr.row.count, "rake": pr.row.rake,
                    "max_compression": max(s["max_compression"] for s in series),
                    "max_tension": max(0.0, -min(s["min_compression"] for s in series)),
                    "max_bending_moment": max(s["max_abs_moment"] for s in series),
                    "envelope": {"depth": depth.tolist(),
                                 "compression_max": comp.max(axis=0).tolist(),
                                 "compression_min": comp.min(axis=0).tolist(),
                                 "moment_max": mom.max(axis=0).tolist(),
                                 "moment_min": mom.min(axis=0).tolist()}})
    return out


def _requirements(design: Design, rot, moment, kp, res: StepResult) -> dict:
    req = design.requirements
    out: dict = {}
    if req.static_stiffness_min is not None and req.static_stiffness_moment is not None:
        t = rotation_at_moment(rot, moment, req.static_stiffness_moment)
        k = None if not t else req.static_stiffness_moment / t
        out["static_stiffness"] = {
            "required": req.static_stiffness_min, "value": k,
            "at_moment": req.static_stiffness_moment,
            "passed": None if k is None else bool(k >= req.static_stiffness_min),
            "margin": None if k is None else k / req.static_stiffness_min - 1}
    if req.design_moment is not None and kp:
        ult = kp["ultimate"]
        cap = ult.value / req.resistance_factor if ult.value is not None else None
        out["capacity"] = {"design_moment": req.design_moment, "resistance": cap,
                           "resistance_factor": req.resistance_factor,
                           "censored": ult.extra["censored"],
                           "passed": None if cap is None else bool(cap >= req.design_moment),
                           "margin": None if cap is None else cap / req.design_moment - 1}
    if req.no_tension_moment is not None and res.records:
        tension = []
        for r, m in zip(res.records, moment, strict=True):
            if m <= req.no_tension_moment and r.extra:
                tension.append(min(p["min_compression"] for p in r.extra["piles"]))
        worst = min(tension) if tension else None
        reached = bool(np.max(moment) >= req.no_tension_moment)
        out["no_pile_tension"] = {"up_to_moment": req.no_tension_moment,
                                  "min_axial_compression": worst,
                                  "passed": None if worst is None or not reached
                                  else bool(worst >= 0.0)}
    return out


def run_design(design: Design | dict, progress=None) -> Result:
    """Build and run one design (a :class:`Design` or a nested dict)."""
    if isinstance(design, dict):
        design = design_from_dict(design)
    t = time.perf_counter()
    built = build_model(design)
    built.meta["build_s"] = time.perf_counter() - t
    return run_built(built, progress)
