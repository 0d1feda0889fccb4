"""The nonlinear pushover of a design in the harmonic model: 3D moment-rotation curves.

The design's harmonic model (:func:`~femcore.foundation.elastic3d.build_harmonic`: the
axisymmetric mesh, smeared ring beams and springs) with every harmonic ``0..N`` in one system
(:mod:`femcore.harmonic_coupled`): Mohr-Coulomb / Tresca soil and the elastic-perfectly
plastic t-z, p-y and q-z springs of every ring evaluated on ``M`` circumferential planes.
The stages are those of the slice (:mod:`.stages`) with the loads where they belong:

1. at-rest (K0) stresses: the n = 0 stress field, the same on every plane;
2. weights (soil profile, pore pressure of drained layers, the cap, the backfill on a
   contact-free cap and the greenfield tractions on the faces it frees): n = 0;
3. the vertical load V (n = 0) and a held H (n = 1) at the tower base;
4. the pushover: the rotation of the tower base (n = 1), with H = M / h (``lever``, a
   proportional load) or H held (``rotation``), on the rotation grid of the slice and with
   its plateau stop.

Forces and moments are 3D totals (no slice length). A ``frictional`` cap contact is a
no-tension Coulomb contact on the planes (:class:`~femcore.harmonic_coupled.PlaneContact`):
the cap lifts off and slides where the planes say so.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field, replace

import numpy as np
from numpy.typing import NDArray

from materials import Tresca

from ..beams import BeamBlock
from ..harmonic import HarmonicError, HarmonicSolidBlock, harmonic_factor
from ..harmonic_coupled import (
    CombinedMap,
    CoupledModel,
    PlaneSprings,
    combine_maps,
    coupled_residual,
)
from ..harmonic_planes import CircumferentialPlanes, min_planes
from ..harmonic_plastic import HarmonicMohrCoulomb
from ..harmonic_rings import hermite_bending
from ..initial_stress import k0_stresses
from ..stepping import Stepper, StepSettings
from .build import _pile_section, _soil_material, soil_profile
from .design import Design
from .elastic3d import HarmonicFoundation, build_harmonic, check_harmonic_layout
from .records import PileEnvelope
from .resistance import lateral_limit, shaft_limit, tip_limit
from .stages import (
    LOAD_RAMP,
    PUSHOVER_RELATIVE,
    PUSHOVER_RELATIVE_FROM,
    SPRING_RESIDUAL_TANGENT,
    StageState,
    plateau_stop,
    pushover_steps,
    rotation_grid,
)

__all__ = ["HarmonicBuilt", "build_coupled", "harmonic_stages", "default_planes",
           "ring_envelopes", "SOLVER"]

#: the linear solver of the coupled Newton iterations (see :mod:`femcore.harmonic_coupled`):
#: "direct" measured faster than "krylov" on the coarse T6 demo at N = 2 and 4
#: (docs/harmonic.md)
SOLVER = "direct"


#: Broyden updates of a coupled factorization before a new one (quasi-Newton: a
#: factorization of the coupled tangent costs many residual evaluations; docs/harmonic.md)
BROYDEN = 12


def _quasi(settings: StepSettings) -> StepSettings:
    return replace(settings, broyden=BROYDEN)


def default_planes(n_max: int) -> int:
    """Planes over [0, pi] for harmonics up to ``n_max`` when the design gives none: 2N + 1
    (on the demo, N = 4: the ultimate moment within 0.3 % of 33 planes; docs/harmonic.md)."""
    return 2 * int(n_max) + 1


@dataclass(eq=False)
class HarmonicBuilt:
    """A design's coupled harmonic model, ready for the stages."""

    design: Design
    hf: HarmonicFoundation
    model: CoupledModel
    profile: object
    planes: CircumferentialPlanes
    soil: list[int]  # indices into model.blocks of the soil blocks (K0 stresses)
    springs: list[tuple[int, PlaneSprings, PlaneSprings | None]]  # ring, shaft, tip
    solver: str = SOLVER
    meta: dict = field(default_factory=dict)
    _free: CombinedMap | None = None

    @property
    def ref(self) -> str:
        return self.hf.ref

    @property
    def harmonics(self) -> list[int]:
        return self.model.harmonics

    def dof(self, n: int, local: int) -> int:
        """The coupled DOF of harmonic ``n``'s DOF ``local``."""
        return self.harmonics.index(n) * self.model.n1 + int(local)

    def ref_dof(self, n: int, component: int) -> int:
        return self.dof(n, self.hf.model.dofmap.ref_dof(self.ref, component))

    @property
    def lever_height(self) -> float:
        lo = self.design.loading
        return float(lo.lever_arm) if lo.control == "lever" else 0.0

    def constraint_map(self, extra: dict[tuple[int, int], float] | None = None) -> CombinedMap:
        """Supports and ties of every harmonic, plus ``extra`` prescribed ``{(n, local DOF):
        value}``."""
        maps = []
        for n in self.harmonics:
            cons = self.hf.constraints(n)
            for (nn, d), v in (extra or {}).items():
                if nn == n:
                    cons.fix([d], v)
            maps.append(cons.build())
        return combine_maps(maps)

    @property
    def free_map(self) -> CombinedMap:
        if self._free is None:
            self._free = self.constraint_map()
        return self._free

    def residual(self):
        return coupled_residual(self.model, self.solver)


def _plastic_soil(block: HarmonicSolidBlock, layer, top: float,
                  planes: CircumferentialPlanes) -> HarmonicMohrCoulomb | None:
    """The Mohr-Coulomb (Tresca) replacement of an elastic layer block; None for an elastic
    layer."""
    mat = _soil_material(layer, top)
    mc = mat._mc if isinstance(mat, Tresca) else mat
    if not hasattr(mc, "phi"):
        return None
    dz = np.maximum(-block.ring.x[..., 1] - mc.depth_ref, 0.0)  # (c, q)
    c = mc.c + mc.c_gradient * dz
    cutoff = None
    if mc.tension_cutoff is not None:
        cutoff = np.full_like(c, float(mc.tension_cutoff))
        if mc.phi > 0.0:
            cutoff = np.minimum(cutoff, c * np.cos(np.radians(mc.phi))
                                / np.sin(np.radians(mc.phi)))
    return HarmonicMohrCoulomb(block.ring, block.element_dofs, planes, block.E, block.nu,
                               c, float(mc.phi), float(mc.psi), cutoff)


def _ring_springs(design: Design, hf: HarmonicFoundation, info: dict,
                  planes: CircumferentialPlanes, divisor: float):
    """The shaft (t-z, p-y) and tip (q-z) springs of one ring on the planes; the limits of
    the slice's springs per pile, divided by ``divisor`` (a partial factor)."""
    piles = design.piles
    A, _, perimeter, _ = _pile_section(design)
    line, s, trib = info["line"], info["soil"], info["trib"]
    shaft_blk = hf.model.blocks[info["shaft_block"]]
    xy = line.xy
    below_head = np.hypot(*(xy - xy[0]).T)
    t_lim = shaft_limit(s["undrained"], s["su"], s["phi"], s["sigma_v_eff"], perimeter,
                        piles.alpha, piles.beta) * trib / divisor
    p_lim = lateral_limit(s["undrained"], s["su"], s["phi"], s["sigma_v_eff"], below_head,
                          piles.width, piles.lateral_factor) * trib / divisor
    soil = shaft_blk.element_dofs[:, 3:]
    k = info["k"]
    shaft = PlaneSprings(f"ring_{info['ring']}_shaft", line.count, line.tangent, line.trans,
                         soil, k[:, 0], k[:, 1], -t_lim, t_lim, p_lim, planes)
    tip = None
    if info["tip_block"] is not None:
        st = {key: v[-1:] for key, v in s.items()}
        qb = tip_limit(st["undrained"], st["su"], st["phi"], st["sigma_v_eff"], A) / divisor
        tip = PlaneSprings(f"ring_{info['ring']}_tip", line.count, line.tangent,
                           line.trans[-1:], soil[-1:], np.array([info["k_tip"]]),
                           np.zeros(1), np.zeros(1), np.asarray(qb, float).reshape(1),
                           np.full(1, np.inf), planes)
    return shaft, tip


def build_coupled(design: Design, pile_resistance: float = 1.0,
                  solver: str = SOLVER) -> HarmonicBuilt:
    """The coupled harmonic model of a design with ``analysis.geometry = "harmonic"``."""
    problems = check_harmonic_layout(design)
    if problems:
        raise HarmonicError("\n".join(problems))
    t0 = time.perf_counter()
    an = design.analysis
    N = int(an.harmonics)
    M = int(an.planes) if an.planes is not None else default_planes(N)
    if M < min_planes(N):
        raise HarmonicError(f"analysis.planes = {M}: too few for harmonics up to {N} "
                            f"(need >= {min_planes(N)}, N + 2)")
    planes = CircumferentialPlanes(range(N + 1), M)
    hf = build_harmonic(design, n_max=N, contact=True)
    base = hf.model
    tops = np.cumsum([0.0] + [ly.thickness for ly in design.soil.layers])
    nonlinear: dict[int, object] = {}
    for bi, li in hf.meta["layer_blocks"]:
        ly = design.soil.layers[li]
        blk = _plastic_soil(base.blocks[bi], ly, float(tops[li]), planes)
        if blk is not None:
            nonlinear[bi] = blk
    springs = []
    for info in hf.meta["springs"]:
        shaft, tip = _ring_springs(design, hf, info, planes, pile_resistance)
        nonlinear[info["shaft_block"]] = shaft
        if tip is not None:
            nonlinear[info["tip_block"]] = tip
        springs.append((info["ring"], shaft, tip))
    cb = hf.meta["contact_block"]
    if cb is not None:  # the frictional cap contact, on the planes of this run
        nonlinear[cb] = replace(base.blocks[cb], planes=planes)
    model = CoupledModel(base, planes, nonlinear)
    soil = [k for k, i in enumerate(sorted(nonlinear))
            if isinstance(nonlinear[i], HarmonicMohrCoulomb)]
    meta = {"build_s": time.perf_counter() - t0, "harmonics": N, "planes": M,
            "dofs_per_harmonic": base.n_dofs, "dofs": model.n_dofs,
            "nodes": base.mesh.n_nodes, "cells": base.mesh.n_cells,
            "near_field": hf.meta["near_field"], "pile_resistance_factor": pile_resistance}
    return HarmonicBuilt(design, hf, model, soil_profile(design), planes, soil, springs,
                         solver, meta)


# --------------------------------------------------------------------------- loads
def _body_force(block, bq: NDArray[np.float64], n1: int) -> NDArray[np.float64]:
    """n = 0 load of a body force ``bq (c, q, 3)`` on a solid block (c_0 included)."""
    ring = block.ring
    f_e = np.einsum("qa,cqd,cq->cad", ring.N, bq, ring.dV)  # (c, a, 3)
    return harmonic_factor(0) * np.bincount(block.element_dofs.ravel(),
                                            weights=f_e.reshape(-1), minlength=n1)


def _stress_force(block, stress: NDArray[np.float64], n1: int) -> NDArray[np.float64]:
    """n = 0 nodal forces of a stress field ``(c, q, 6)`` on a solid block (c_0 included)."""
    f_e = block.geometry(0).internal_force(stress)
    return harmonic_factor(0) * np.bincount(block.element_dofs.ravel(), weights=f_e.ravel(),
                                            minlength=n1)


def _k0(profile, x: NDArray[np.float64]) -> NDArray[np.float64]:
    """The at-rest stress at points ``x (c, q, 2)`` as ``(c, q, 6)`` (rr, zz, tt, rz, 0, 0)."""
    s4 = k0_stresses(profile, x)
    s6 = np.zeros((*s4.shape[:-1], 6))
    s6[..., :4] = s4
    return s6


def _edge_normals(mesh, edges) -> NDArray[np.float64]:
    """Unit normals ``(e, 2)`` of straight edges, any orientation (nodes 0 and 1 of an edge
    are its ends at every order)."""
    d = mesh.points[edges[:, 1]] - mesh.points[edges[:, 0]]
    n = np.stack([-d[:, 1], d[:, 0]], axis=1)
    return n / np.linalg.norm(n, axis=1, keepdims=True)


def weight_loads(hb: HarmonicBuilt) -> NDArray[np.float64]:
    """The weights as coupled external forces (all n = 0): the soil profile's unit weights
    and the pore pressure of drained layers, the cap, the removed backfill on a contact-free
    cap and the greenfield tractions of the faces it frees (as in the slice)."""
    base, prof, design = hb.hf.model, hb.profile, hb.design
    n1 = base.n_dofs
    f = np.zeros(n1)
    soil_idx = [bi for bi, _ in hb.hf.meta["layer_blocks"]]
    col = hb.hf.meta["column_block"]
    for bi in soil_idx + ([col] if col is not None else []):
        blk = base.blocks[bi]
        ring = blk.ring
        depth = np.maximum(-ring.x[..., 1], 0.0)
        bq = np.zeros((*depth.shape, 3))
        bq[..., 1] = -prof.unit_weight(depth)
        f += _body_force(blk, bq, n1)
        if bi == col:
            continue
        drained = np.array([ly.drained for ly in prof.layers])[prof.layer_index(depth)]
        u = np.where(drained, prof.pore_pressure(depth), 0.0)
        if np.any(u):
            sig = np.zeros((*depth.shape, 6))
            sig[..., :3] = u[..., None]
            f += _stress_force(blk, sig, n1)
    cap = base.blocks[hb.hf.meta["cap_block"]]
    bq = np.zeros((*cap.ring.dV.shape, 3))
    bq[..., 1] = -design.cap.gamma
    f += _body_force(cap, bq, n1)
    mesh = base.mesh
    top = hb.hf.meta["backfill_edges"]
    if len(top):
        ny = np.abs(_edge_normals(mesh, top)[:, 1])

        def backfill(x):
            t = np.zeros((*x.shape[:2], 3))
            t[..., 1] = -prof.total_vertical(np.maximum(-x[..., 1], 0.0)) * ny[:, None]
            return t

        f += base.edge_traction(0, top, backfill)
    freed = hb.hf.meta["freed_edges"]
    if len(freed):
        R = design.cap.diameter / 2
        mid = mesh.points[freed].mean(axis=1)
        vertical = np.abs(mid[:, 0]) >= R - 1e-6 * max(1.0, R)

        def greenfield(x):
            depth = np.maximum(-x[..., 1], 0.0)
            sv, u = prof.total_vertical(depth), prof.pore_pressure(depth)
            K0 = np.array([ly.K0 for ly in prof.layers])[prof.layer_index(depth)]
            sh = K0 * (sv - u) + u
            t = np.zeros((*x.shape[:2], 3))
            t[..., 0] = np.where(vertical[:, None], sh, 0.0)
            t[..., 1] = np.where(vertical[:, None], 0.0, -sv)
            return t

        f += base.edge_traction(0, freed, greenfield)
    out = np.zeros(hb.model.n_dofs)
    out[hb.dof(0, 0):hb.dof(0, 0) + n1] = f
    return out


# --------------------------------------------------------------------------- stages
def _ramp(hb: HarmonicBuilt, state: StageState, f_end, settings: StepSettings):
    return Stepper(hb.model, hb.free_map, state.f_ext, [], [], f_ext_end=f_end,
                   settings=_quasi(settings), residual_factory=hb.residual()).run(
        u0=state.u, states0=state.states)


@dataclass(frozen=True)
class AtRest:
    """K0 stresses (the n = 0 field on every plane) in the soil; the external force becomes
    the internal force of that state."""

    name: str = "at-rest stresses"

    def run(self, hb: HarmonicBuilt, state: StageState, progress=None):
        states = list(state.states)
        for k in hb.soil:
            blk = hb.model.blocks[k]
            states[k] = blk.initial_state(_k0(hb.profile, blk.ring.x))
        f0 = np.zeros(hb.model.n_dofs)
        n1 = hb.model.n1
        for bi, _ in hb.hf.meta["layer_blocks"]:  # elastic layers: the K0 stress as a
            if bi not in hb.model.nonlinear:  # constant internal force
                blk = hb.hf.model.blocks[bi]
                f0[:n1] += _stress_force(blk, _k0(hb.profile, blk.ring.x), n1)
        hb.model.initial_force = f0
        f_int, _, _ = hb.model.evaluate(state.u, states, tangent=False)
        return StageState(state.u, states, f_int), None


@dataclass(frozen=True)
class Weights:
    settings: StepSettings = LOAD_RAMP
    name: str = "self-weight"

    def run(self, hb: HarmonicBuilt, state: StageState, progress=None):
        f_w = weight_loads(hb)
        res = _ramp(hb, state, f_w, self.settings)
        return StageState(res.u, res.states, f_w), res


@dataclass(frozen=True)
class Vertical:
    settings: StepSettings = LOAD_RAMP
    name: str = "vertical load"

    def run(self, hb: HarmonicBuilt, state: StageState, progress=None):
        lo = hb.design.loading
        f = state.f_ext.copy()
        f[hb.ref_dof(0, 1)] -= lo.vertical
        if lo.control == "rotation" and lo.horizontal:
            f[hb.ref_dof(1, 0)] += lo.horizontal
        res = _ramp(hb, state, f, self.settings)
        return StageState(res.u, res.states, f), res


@dataclass(frozen=True)
class Push:
    """The pushover (see the module docstring)."""

    settings: StepSettings | None = None
    name: str = "pushover"

    def run(self, hb: HarmonicBuilt, state: StageState, progress=None):
        lo = hb.design.loading
        U, W, TH = hb.ref_dof(1, 0), hb.ref_dof(0, 1), hb.ref_dof(1, 2)
        target = lo.rotation_max
        theta0 = float(state.u[TH])
        h = hb.lever_height
        if lo.control == "rotation":
            cmap = hb.constraint_map({(1, hb.hf.model.dofmap.ref_dof(hb.ref, 2)): 0.0})
            f_ref = None
        else:
            cmap = hb.free_map
            f_ref = np.zeros(hb.model.n_dofs)
            f_ref[U], f_ref[TH] = 1.0, h
        grid = rotation_grid(hb.design) / target
        rule = plateau_stop()

        def stop(rec) -> bool:
            m = rec.force[0] if lo.control == "rotation" else rec.force[0] * h
            return rule(rec, float(rec.monitor[2] - theta0), float(m))

        for _, shaft, tip in hb.springs:
            for b in (shaft, tip):
                if b is not None:
                    b.residual_tangent = SPRING_RESIDUAL_TANGENT
        try:
            res = Stepper(hb.model, cmap, state.f_ext, [TH], [target], monitor_dofs=[U, W, TH],
                          settings=_quasi(self.settings or pushover_steps(
                              lo.initial_increment / target)),
                          observer=ring_observer(hb),
                          stop_when=stop if lo.stop_at_plateau else None, grid=grid,
                          max_relative=PUSHOVER_RELATIVE,
                          relative_from=PUSHOVER_RELATIVE_FROM / target, proportional=f_ref,
                          residual_factory=hb.residual()).run(
                u0=state.u, states0=state.states, callback=progress)
        finally:
            for _, shaft, tip in hb.springs:
                for b in (shaft, tip):
                    if b is not None:
                        b.residual_tangent = 0.0
        if res.message == "stopping criterion met":
            res.message = "capacity reached: the moment-rotation curve holds its plateau"
        return StageState(res.u, res.states, state.f_ext), res


def harmonic_stages(hb: HarmonicBuilt, settings: StepSettings | None = None) -> list:
    lo = hb.design.loading
    held_h = lo.control == "rotation" and lo.horizontal != 0.0
    return [AtRest(), Weights(),
            Vertical(name="vertical and horizontal load") if held_h else Vertical(),
            Push(settings)]


# --------------------------------------------------------------------------- piles
def _positions(count: float, offset_deg: float) -> NDArray[np.float64]:
    """Distinct pile angles of a ring folded into [0, pi] (the model is symmetric about
    theta = 0)."""
    th = np.radians(offset_deg) + 2 * np.pi * np.arange(int(count)) / count
    th = np.abs((th + np.pi) % (2 * np.pi) - np.pi)
    return np.unique(np.round(th, 12))


def ring_observer(hb: HarmonicBuilt, per_pile: bool = False):
    """Per ring and committed state, over its pile positions (harmonic sums at their
    angles): head, least and largest axial compression (kN per pile), the largest |bending
    moment| (kNm per pile, the resultant of the in-plane and out-of-plane moments) and the
    envelopes along the pile of the compression and of the in-plane moment."""
    design = hb.design
    A, I, _, _ = _pile_section(design)
    rings = []
    for line, spec in zip(hb.hf.rings, [r for r in design.piles.rings if r.radius > 0],
                          strict=True):
        e = len(line.xy) - 1
        one = BeamBlock(line.name, line.xy, np.zeros((e, 6), dtype=np.int64),
                        np.full(e, design.piles.E * A), np.full(e, design.piles.E * I))
        k_out = hermite_bending(one.EI, one.length)  # (e, 4, 4)
        rings.append((line, _positions(spec.count, spec.angle_offset), one, k_out))
    n1 = hb.model.n1
    harmonics = np.array(hb.harmonics)

    def in_plane(U, line, one, th):
        """End forces ``(p, e, 6)`` (local N, V, M) of one pile at the angles ``th``."""
        c = np.cos(np.outer(th, harmonics))  # (p, h)
        tr = np.einsum("ph,hmk->pmk", c, U[:, line.trans[:, :2]])  # (p, m, 2) U, W
        psi = np.einsum("ph,hm->pm", c, U[:, line.rot[:, 0]])
        node = np.concatenate([tr, psi[..., None]], axis=-1)  # (p, m, 3)
        u_in = np.concatenate([node[:, :-1], node[:, 1:]], axis=-1)  # (p, e, 6)
        return np.einsum("eij,ejk,pek->pei", one.k_local, one.T, u_in)

    def each_pile(u, states) -> list:
        """Per ring: every pile's angle (the full circle) and axial compression ``(e,)``."""
        U = np.asarray(u).reshape(-1, n1)
        out = []
        for line, _, one, _ in rings:
            spec = specs[line.name]
            th = np.radians(spec.angle_offset) + 2 * np.pi * np.arange(int(spec.count)) \
                / spec.count
            out.append((th, -in_plane(U, line, one, th)[..., 3]))
        return out

    specs = {line.name: spec for line, spec in zip(
        hb.hf.rings, [r for r in design.piles.rings if r.radius > 0], strict=True)}
    if per_pile:
        return each_pile

    def observe(u, states) -> dict:
        U = np.asarray(u).reshape(-1, n1)  # (h, n1)
        out = []
        for line, th, one, k_out in rings:
            s = np.sin(np.outer(th, harmonics))  # (p, h)
            v = np.einsum("ph,hm->pm", s, U[:, line.trans[:, 2]])
            chi = np.einsum("ph,hm->pm", s, U[:, line.rot[:, 1]])
            f_in = in_plane(U, line, one, th)
            m_in = np.stack([-f_in[..., 2], f_in[..., 5]], axis=-1)  # (p, e, 2) sagging +
            q_out = np.stack([v[:, :-1], chi[:, :-1], v[:, 1:], chi[:, 1:]], axis=-1)
            f_out = np.einsum("eij,pej->pei", k_out, q_out)
            m_out = np.stack([-f_out[..., 1], f_out[..., 3]], axis=-1)
            comp = -f_in[..., 3]  # (p, e) compression positive
            m_el = m_in.mean(axis=-1)  # (p, e)
            out.append({"head_compression": float(comp[:, 0].max()),
                        "max_compression": float(comp.max()),
                        "min_compression": float(comp.min()),
                        "max_abs_moment": float(np.hypot(m_in, m_out).max()),
                        "compression_max": comp.max(axis=0), "compression_min": comp.min(axis=0),
                        "moment_max": m_el.max(axis=0), "moment_min": m_el.min(axis=0)})
        return {"piles": out}

    return observe


def ring_envelopes(hb: HarmonicBuilt, res) -> list[PileEnvelope]:
    """One envelope per ring over its pile positions and the pushover."""
    out: list[PileEnvelope] = []
    if res is None:
        return out
    specs = [r for r in hb.design.piles.rings if r.radius > 0]
    for k, (line, spec) in enumerate(zip(hb.hf.rings, specs, strict=True)):
        series = [r.extra["piles"][k] for r in res.records if r.extra]
        if not series:
            continue
        depth = -0.5 * (line.xy[1:, 1] + line.xy[:-1, 1])
        out.append(PileEnvelope(
            k + 1, float(line.radius), float(spec.count), float(spec.rake),
            max(s["max_compression"] for s in series),
            max(0.0, -min(s["min_compression"] for s in series)),
            max(s["max_abs_moment"] for s in series), depth.tolist(),
            np.max([s["compression_max"] for s in series], axis=0).tolist(),
            np.min([s["compression_min"] for s in series], axis=0).tolist(),
            np.max([s["moment_max"] for s in series], axis=0).tolist(),
            np.min([s["moment_min"] for s in series], axis=0).tolist()))
    return out

