"""The analysis stages of a foundation run, as data run by one loop.

A run is a list of stages; :func:`run_stages` carries the displacement, the material states and
the external forces from one to the next and stops at the first stage that fails. The stages:

1. :class:`AtRestStresses` -- at-rest (K0) initial stresses in the soil blocks, no solve; the
   external force becomes the internal force of that state, so the next stage starts in
   equilibrium whatever the cap and piles do to it.
2. :class:`SelfWeight` -- the cap and piles are in place from the start (wished in place); the
   loads go from the K0 state's internal force to the real weights (soil profile, pore
   pressure of drained layers, cap weight): the out-of-balance that the K0 field cannot carry
   around the cap is resolved gradually.
3. :class:`VerticalLoad` -- the turbine's vertical load V (and a held horizontal load H under
   rotation control) on the reference point.
4. :class:`Pushover` -- the overturning: the reference rotation (``rotation``), or the
   horizontal displacement of the lever-arm tip (``lever``: H = M / h throughout), until the
   target rotation; or :class:`SettlementPath` -- the tower-base settlement of axisymmetric
   vertical-loading runs.

Ramp settings are named module constants (:data:`LOAD_RAMP`, :data:`SETTLEMENT_STEPS`) and
:func:`pushover_steps`; every stage records its own increments, iterations and time.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from .. import linsolve
from ..initial_stress import apply_k0, profile_loads
from ..interfaces import SpringBlock
from ..model import SolidBlock
from ..stepping import Stepper, StepRecord, StepResult, StepSettings
from .build import BuiltModel, backfill_load, greenfield_traction
from .keypoints import INITIAL_ROTATION, plateau, secant_at_rotation

__all__ = ["StageState", "StageOutcome", "AtRestStresses", "SelfWeight", "VerticalLoad",
           "Pushover", "SettlementPath", "run_stages", "stages_for", "LOAD_RAMP",
           "SETTLEMENT_STEPS", "pushover_steps", "pile_observer", "rotation_grid",
           "plateau_stop", "PUSHOVER_RELATIVE", "PUSHOVER_RELATIVE_FROM", "STRENGTH_RELATIVE"]

#: Load ramps of the weight and vertical-load stages: the whole load in one increment, at most
#: 12 Newton iterations, halving down to 1/1000 on failure; the first iteration reuses the
#: last factorization (on the demo: 4 Newton iterations and 4 factorizations per stage, where
#: two halves took 5 iterations and as many factorizations).
LOAD_RAMP = StepSettings(initial_step=1.0, max_step=1.0, min_step=1e-3, max_iterations=12,
                         reuse_factorization=True)

#: Settlement path of axisymmetric runs: 1/1000 of the target settlement first, at most 1/20.
SETTLEMENT_STEPS = StepSettings(initial_step=1e-3, min_step=1e-5, max_step=0.05)


def pushover_steps(first: float) -> StepSettings:
    """Pushover increments: ``first`` (a fraction of the rotation cap) first, growing by 1.6
    after easy increments (bounded by :data:`PUSHOVER_RELATIVE` and the grid), halving on
    failure down to ``min(first, 1e-4) / 8``."""
    return StepSettings(initial_step=first, min_step=min(first, 1e-4) / 8, max_step=1.0,
                        grow=1.6, reuse_factorization=True)


@dataclass
class StageState:
    """What one stage hands to the next."""

    u: NDArray[np.float64]  # (n_dofs,)
    states: list
    f_ext: NDArray[np.float64]  # (n_dofs,) external forces in equilibrium with ``states``


@dataclass
class StageOutcome:
    name: str
    result: StepResult | None  # None for stages without a solve
    seconds: float
    factorizations: int = 0  # sparse factorizations during the stage (femcore.linsolve)
    solver_s: float = 0.0  # seconds in factorizations and solves during the stage

    @property
    def ok(self) -> bool:
        return self.result is None or self.result.status == "ok"


def _soil_blocks(built: BuiltModel) -> list[int]:
    return [i for i, b in enumerate(built.model.blocks)
            if isinstance(b, SolidBlock) and b.name != "cap"]


def pile_observer(built: BuiltModel):
    """Per row and committed state: head, least and largest axial compression (kN per pile)
    and the largest |bending moment| (kNm per pile), plus the distributions along the pile."""
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


@dataclass(frozen=True)
class AtRestStresses:
    """K0 stresses in the soil continuum (none for the springs-only support)."""

    name: str = "at-rest stresses"

    def run(self, built: BuiltModel, state: StageState, progress=None):
        states = state.states
        if built.design.analysis.support == "continuum":
            states = apply_k0(built.model, built.profile, states, _soil_blocks(built))
        f0, _, _ = built.model.evaluate(state.u, states, tangent=False)
        return StageState(state.u, states, f0), None


def weight_loads(built: BuiltModel) -> NDArray[np.float64]:
    """External forces of the real weights: soil profile and pore pressure of drained layers
    and the gravity of the other blocks (continuum), or the cap weight on the reference
    point (springs)."""
    model = built.model
    if built.design.analysis.support == "continuum":
        f = profile_loads(model, built.profile, _soil_blocks(built)) + model.gravity()
        edges = built.meta.get("backfill_edges")
        if edges is not None and len(edges):
            f += backfill_load(model, edges, built.profile)
        freed = built.meta.get("freed_edges")
        if freed is not None and len(freed):
            f += greenfield_traction(model, freed, built.design, built.profile)
        return f
    f = np.zeros(model.n_dofs)
    f[model.dofmap.ref_dof(built.ref, 1)] = -built.meta["cap_weight_kN_per_m"]
    return f


def _ramp(built: BuiltModel, state: StageState, f_end, settings: StepSettings) -> StepResult:
    return Stepper(built.model, built.free_map, state.f_ext, [], [],
                   f_ext_end=f_end, settings=settings).run(u0=state.u, states0=state.states)


@dataclass(frozen=True)
class SelfWeight:
    """Weights ramped in from the K0 state's own internal forces."""

    settings: StepSettings = LOAD_RAMP
    name: str = "self-weight"

    def run(self, built: BuiltModel, state: StageState, progress=None):
        f_w = weight_loads(built)
        res = _ramp(built, state, f_w, self.settings)
        return StageState(res.u, res.states, f_w), res


@dataclass(frozen=True)
class VerticalLoad:
    """The turbine's vertical load V (kN) and, under rotation control, the held horizontal
    load H (kN) on the reference point, per metre of slice."""

    settings: StepSettings = LOAD_RAMP
    name: str = "vertical load"

    def run(self, built: BuiltModel, state: StageState, progress=None):
        loading, L, dm = built.design.loading, built.slice_length, built.model.dofmap
        f_v = state.f_ext.copy()
        f_v[dm.ref_dof(built.ref, 1)] -= loading.vertical / L
        if loading.control == "rotation":
            f_v[dm.ref_dof(built.ref, 0)] += loading.horizontal / L
        res = _ramp(built, state, f_v, self.settings)
        return StageState(res.u, res.states, f_v), res


#: Increments of the pushover above this rotation stay below ``PUSHOVER_RELATIVE`` times the
#: rotation reached (rad): the curve keeps points through the knee and beyond.
PUSHOVER_RELATIVE_FROM = 5e-4
#: fraction of the elastic stiffness kept in the tangent of yielded pile springs during the
#: pushover (:class:`~femcore.interfaces.SpringBlock`); forces are unchanged
SPRING_RESIDUAL_TANGENT = 1e-6
PUSHOVER_RELATIVE = 0.2
#: the same bound for the design-strength pushover, whose curve serves only its ultimate
#: (on the coarse demo: 19 increments instead of 29, the factored ultimate +0.26 %)
STRENGTH_RELATIVE = 0.5


def rotation_grid(design, extra: Sequence[float] = (),
                  relative: float = PUSHOVER_RELATIVE) -> NDArray[np.float64]:
    """Rotations (rad, from the start of the pushover) on which pushover increments land:
    the initial-secant rotation, the key-point rotations and the rotation cap, and from
    ``PUSHOVER_RELATIVE_FROM`` on a geometric fill between consecutive ones with ratios
    of at most 1 + ``relative`` (so that a step of the largest allowed size goes
    from grid point to grid point, key points included)."""
    cap = design.loading.rotation_max
    keys = np.concatenate([[INITIAL_ROTATION], design.keypoints.rotations, extra, [cap]])
    keys = np.unique(keys[(keys > 0) & (keys <= cap)])
    anchors = np.unique(np.concatenate([keys[keys >= PUSHOVER_RELATIVE_FROM],
                                        [PUSHOVER_RELATIVE_FROM] if cap >
                                        PUSHOVER_RELATIVE_FROM else []]))
    pts = [keys]
    for lo, hi in zip(anchors[:-1], anchors[1:], strict=True):
        n = int(np.ceil(np.log(hi / lo) / np.log1p(relative) - 1e-9))
        pts.append(lo * (hi / lo) ** (np.arange(1, n + 1) / n))
    pts.append(anchors)
    return np.unique(np.concatenate(pts))


def plateau_stop(k_index: int = 0):
    """A stop rule for the pushover: the curve (rotation, moment per m) holds its plateau
    (:func:`~femcore.foundation.keypoints.plateau`)."""
    rot: list[float] = []
    mom: list[float] = []

    def stop(rec: StepRecord, rotation: float, moment: float) -> bool:
        rot.append(rotation)
        mom.append(moment)
        if len(rot) < 3 or rotation <= 0:
            return False
        k0 = secant_at_rotation(rot, mom, INITIAL_ROTATION)
        if k0 is None or k0 <= 0:
            return False
        return plateau(rot, mom, k0).confirmed

    return stop


@dataclass(frozen=True)
class Pushover:
    """Rotation of the tower base up to the rotation cap, V held, stopping once the
    moment-rotation curve holds its plateau (``loading.stop_at_plateau``). ``rotation``
    control: the rotation is prescribed, a horizontal load held; ``lever``: H = M / h
    throughout, the rotation still the controlled quantity (a proportional load with its
    factor solved with the displacements, Batoz & Dhatt 1979), so both controls land on the
    same rotation grid (:func:`rotation_grid`). ``settings`` None uses
    :func:`pushover_steps` with the design's first increment; ``relative`` bounds an
    increment relative to the rotation reached (:data:`PUSHOVER_RELATIVE`; the
    design-strength pushover uses :data:`STRENGTH_RELATIVE`)."""

    settings: StepSettings | None = None
    name: str = "pushover"
    relative: float = PUSHOVER_RELATIVE

    def run(self, built: BuiltModel, state: StageState, progress=None):
        loading, dm = built.design.loading, built.model.dofmap
        U, W, TH = (dm.ref_dof(built.ref, k) for k in range(3))
        target = loading.rotation_max
        theta0 = float(state.u[TH])
        h = built.lever_height
        if loading.control == "rotation":
            cmap = built.constraints.build(extra_fixed={TH: 0.0})
            f_ref = None
        else:
            cmap = built.free_map
            f_ref = np.zeros(built.model.n_dofs)
            f_ref[U] = 1.0
        grid = rotation_grid(built.design, relative=self.relative) / target
        rule = plateau_stop()

        def stop(rec: StepRecord) -> bool:
            m = rec.force[0] if loading.control == "rotation" else rec.force[0] * h
            return rule(rec, float(rec.monitor[2] - theta0), float(m))

        springs = [b for b in built.model.blocks if isinstance(b, SpringBlock)]
        for b in springs:  # regular tangents where yielded springs leave free local modes
            b.residual_tangent = SPRING_RESIDUAL_TANGENT
        try:
            res = self._push(built, state, cmap, f_ref, target, grid, stop, progress,
                             (U, W, TH))
        finally:
            for b in springs:
                b.residual_tangent = 0.0
        if res.message == "stopping criterion met":
            res.message = "capacity reached: the moment-rotation curve holds its plateau"
        return StageState(res.u, res.states, state.f_ext), res

    def _push(self, built, state, cmap, f_ref, target, grid, stop, progress, dofs):
        loading = built.design.loading
        U, W, TH = dofs
        return Stepper(built.model, cmap, state.f_ext, [TH], [target], monitor_dofs=[U, W, TH],
                      settings=self.settings or pushover_steps(loading.initial_increment
                                                               / target),
                      observer=pile_observer(built),
                      stop_when=stop if loading.stop_at_plateau else None, grid=grid,
                      max_relative=self.relative,
                      relative_from=PUSHOVER_RELATIVE_FROM / target,
                      proportional=f_ref).run(
            u0=state.u, states0=state.states, callback=progress)


@dataclass(frozen=True)
class SettlementPath:
    """Axisymmetric vertical loading: settlement of the tower base from the weight state."""

    settings: StepSettings = SETTLEMENT_STEPS
    name: str = "settlement"

    def run(self, built: BuiltModel, state: StageState, progress=None):
        W = built.model.dofmap.ref_dof(built.ref, 1)
        cmap = built.constraints.build(extra_fixed={W: 0.0})
        res = Stepper(built.model, cmap, state.f_ext, [W],
                      [-built.design.loading.settlement_max], monitor_dofs=[W],
                      settings=self.settings, observer=pile_observer(built)).run(
            u0=state.u, states0=state.states, callback=progress)
        return StageState(res.u, res.states, state.f_ext), res


def stages_for(built: BuiltModel, pushover_settings: StepSettings | None = None,
               relative: float = PUSHOVER_RELATIVE) -> list:
    """The stage list of a design: K0, weights, then V and the pushover (``relative``: see
    :class:`Pushover`), or the settlement path of axisymmetric runs (which skips the
    vertical-load stage: the settlement drives V)."""
    if built.design.loading.control == "settlement":
        return [AtRestStresses(), SelfWeight(),
                SettlementPath(pushover_settings or SETTLEMENT_STEPS)]
    lo = built.design.loading
    held_h = lo.control == "rotation" and lo.horizontal != 0.0
    return [AtRestStresses(), SelfWeight(),
            VerticalLoad(name="vertical and horizontal load") if held_h else VerticalLoad(),
            Pushover(pushover_settings, relative=relative)]


@dataclass
class StageLog:
    outcomes: list[StageOutcome] = field(default_factory=list)
    state: StageState | None = None
    start: StageState | None = None  # the state before the last stage

    @property
    def failed(self) -> StageOutcome | None:
        return next((o for o in self.outcomes if not o.ok), None)

    @property
    def last(self) -> StageOutcome:
        return self.outcomes[-1]


def run_stages(built: BuiltModel, stages: Sequence,
               progress: Callable[[StepRecord], None] | None = None) -> StageLog:
    """Run ``stages`` in order; the progress callback sees the increments of the last stage.
    Stops after the first stage whose solve fails (a failed last stage keeps its curve)."""
    model = built.model
    state = StageState(np.zeros(model.n_dofs), model.initial_states(), np.zeros(model.n_dofs))
    log = StageLog()
    for k, stage in enumerate(stages):
        t = time.perf_counter()
        f0, s0 = linsolve.STATS["factorizations"], linsolve.STATS["seconds"]
        log.start = state
        state, res = stage.run(built, state, progress if k == len(stages) - 1 else None)
        log.outcomes.append(StageOutcome(stage.name, res, time.perf_counter() - t,
                                         linsolve.STATS["factorizations"] - f0,
                                         linsolve.STATS["seconds"] - s0))
        if not log.outcomes[-1].ok:
            break
    log.state = state
    return log
