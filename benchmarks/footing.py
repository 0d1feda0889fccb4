"""Rigid footing problems shared by the collapse benchmarks and their tests.

A rigid footing of width (or diameter) B on the ground surface, its nodes tied to a reference
point at the footing centre: both displacement components (rough) or only the vertical one
(smooth). Plane strain uses the symmetric half (x >= 0) for vertical loading and the full width
for moment; axisymmetric models are always x = r >= 0. The load is driven by the reference
point's settlement (or rotation); the collapse load is the plateau of the reaction.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from femcore import Model
from femcore.initial_stress import Layer, Profile, apply_k0, profile_loads
from femcore.interfaces import ContactBlock, contact_pairs
from femcore.loads import edge_traction
from femcore.stepping import Stepper, StepResult, StepSettings
from materials.base import MaterialModel
from meshing import layered_domain

__all__ = ["Footing", "FootingResult", "run_footing", "plateau"]


@dataclass
class Footing:
    """Geometry, soil and loading of a footing problem.

    ``width_factor`` / ``depth_factor``: domain half-width (or radius) and depth in units of B.
    ``h_near``: element size at the footing edge in units of B; ``h_far`` in units of B.
    ``surcharge``: pressure on the ground beside the footing (kPa), also the initial isotropic
    stress of a weightless soil. ``gamma``: unit weight (K0 initial stresses when > 0).
    """

    material: MaterialModel
    B: float = 2.0
    analysis: str = "plane_strain"
    rough: bool = True
    control: str = "settlement"  # or "rotation"
    element: str = "T15"
    width_factor: float = 3.0
    depth_factor: float = 2.0
    h_near: float = 0.05
    h_far: float = 0.5
    refine_radius: float = 1.0
    surcharge: float = 0.0
    gamma: float = 0.0
    K0: float = 1.0
    target: float = 0.05  # settlement / B, or rotation in rad
    settings: StepSettings = field(default_factory=StepSettings)
    vertical: float = 0.0  # kN/m held during a rotation-controlled run
    contact: bool = False  # a no-tension contact interface under the footing
    contact_cohesion: float = 0.0  # kPa, shear strength of the contact while closed
    contact_stiffness: float = 1e5  # kPa/m


@dataclass
class FootingResult:
    load: np.ndarray  # mean pressure (kPa) or moment per metre (kNm/m) along the curve
    displacement: np.ndarray  # settlement (m) or rotation (rad)
    collapse: float  # plateau value (last point)
    plateau_change: float  # relative change over the last 15 % of the imposed displacement
    pushover: StepResult
    n_dofs: int


def plateau(displacement: np.ndarray, load: np.ndarray, fraction: float = 0.15) -> float:
    """Relative load change over the last ``fraction`` of the imposed displacement."""
    d_end = displacement[-1]
    k = int(np.searchsorted(np.abs(displacement), abs(d_end) * (1 - fraction)))
    k = min(k, len(load) - 2)
    return float(abs(load[-1] - load[k]) / max(abs(load[-1]), 1e-300))


def run_footing(f: Footing) -> FootingResult:
    B = f.B
    half = f.control == "settlement" or f.analysis == "axisymmetric"
    x_min = 0.0 if half else -f.width_factor * B
    width = f.width_factor * B * (1 if half else 2)
    fx = (0.0, B / 2) if half else (-B / 2, B / 2)
    mesh = layered_domain(width, f.depth_factor * B, x_min=x_min, footing=fx, h=f.h_far * B,
                          h_near=f.h_near * B, refine_radius=f.refine_radius * B,
                          element=f.element)
    contact = None
    if f.contact:  # the footing gets its own copies of the surface nodes, joined by contact
        mesh, new_index = mesh.split_nodes(mesh.nodes_of("footing"), np.zeros(0, np.int64))
        a, b, t, n, w = contact_pairs(mesh, mesh.edge_sets["footing"], new_index, (0.0, 1.0),
                                      f.analysis)
        m = a.size
        contact = ContactBlock("contact", np.stack([2 * a, 2 * a + 1], 1),
                               np.stack([2 * b, 2 * b + 1], 1), t, n, w,
                               np.full(m, f.contact_stiffness), np.full(m, f.contact_stiffness),
                               np.full(m, f.contact_cohesion), np.zeros(m), np.zeros(m))
    model = Model(mesh, f.analysis)
    model.add_block("soil", "soil", f.material)
    if contact is not None:
        model.add_element_block(contact)
    model.add_reference_point("footing", (0.0, 0.0))
    cons = model.constraints()
    cons.support_box(mesh)
    nodes = mesh.nodes_of("footing") if contact is None else contact.b_dofs[:, 0] // 2
    comps = (0, 1) if f.rough or contact is not None else (1,)
    if half and f.rough:
        nodes = nodes[mesh.points[nodes, 0] > 1e-9 * B]  # the symmetry node keeps u = 0
    cons.tie_rigid(nodes, "footing", comps)
    dm = model.dofmap
    U, W, TH = (dm.ref_dof("footing", k) for k in range(3))
    # settlement: the reference point moves only vertically; rotation: V = H = 0 (free U, W)
    cons.fix([U, W, TH] if f.control == "settlement" else [TH], 0.0)
    cmap = cons.build()

    states = model.initial_states()
    f_ext = np.zeros(model.n_dofs)
    if f.gamma > 0 or f.surcharge > 0:
        profile = Profile((Layer(0.0, f.depth_factor * B, f.gamma, K0=f.K0),),
                          surcharge=f.surcharge)
        states = apply_k0(model, profile, states)
        f_ext = profile_loads(model, profile)
        if f.surcharge > 0:
            f_ext += edge_traction(mesh, dm, mesh.edge_sets["ground"],
                                   np.array([0.0, -f.surcharge]), model.analysis)
    if f.control == "settlement":
        ctrl, inc = W, -f.target * B
    else:
        ctrl, inc = TH, f.target
    u0 = None
    if f.vertical:
        f_v = f_ext.copy()
        f_v[W] -= f.vertical
        res_v = Stepper(model, cons.build(extra_fixed={TH: 0.0}), f_ext, [], [],
                         f_ext_end=f_v, settings=StepSettings(initial_step=0.25,
                                                                  max_step=0.25)).run(
            states0=states)
        if res_v.status != "ok":
            raise RuntimeError(f"vertical load stage failed: {res_v.message}")
        f_ext, u0, states = f_v, res_v.u, res_v.states
    po = Stepper(model, cmap, f_ext, [ctrl], [inc], settings=f.settings)
    res = po.run(u0=u0, states0=states)
    force = res.force[:, 0]
    disp = np.abs(res.displacement[:, 0])
    if f.control == "settlement":
        area = np.pi * (B / 2) ** 2 if f.analysis == "axisymmetric" else B / 2
        load = -force / area
    else:
        load = force  # moment per metre
    return FootingResult(load, disp, float(load[-1]), plateau(disp, load), res, model.n_dofs)


@dataclass
class HarmonicFooting:
    """A rigid circular footing of diameter ``B`` on the surface of a uniform Tresca soil in
    the coupled harmonic model (harmonics ``0..harmonics`` on ``planes`` planes).

    ``control``: ``"settlement"`` (n = 0), ``"rotation"`` (n = 1, no horizontal load) or
    ``"horizontal"`` (n = 1, no moment); ``rough`` False ties only the vertical motion;
    ``cutoff`` a tension cut-off of the soil (kPa; 0: no tension in the soil below the
    footing), None for none. ``contact``: the footing gets its own copies of the surface
    nodes, joined to the soil by the no-tension Coulomb contact of the cap
    (:class:`~femcore.harmonic_coupled.PlaneContact`, shear strength ``su`` while closed);
    ``pressure`` (kPa): a mean vertical pressure applied first and held while the footing
    is rotated or pushed."""

    su: float = 10.0
    E: float = 3000.0
    nu: float = 0.49
    B: float = 2.0
    harmonics: int = 0
    planes: int | None = None
    control: str = "settlement"
    rough: bool = True
    element: str = "T15"
    h_near: float = 0.1
    h_far: float = 0.5
    width_factor: float = 2.5
    depth_factor: float = 2.0
    target: float = 0.05  # settlement / B, rotation in rad, or sliding / B
    cutoff: float | None = None
    solver: str = "direct"
    contact: bool = False
    contact_stiffness: float = 1e5  # kPa/m
    pressure: float = 0.0
    settings: StepSettings = field(default_factory=lambda: StepSettings(initial_step=0.02,
                                                                        max_step=0.1))


def run_harmonic_footing(f: HarmonicFooting) -> FootingResult:
    """The footing's load-displacement curve: mean pressure (kPa), horizontal force over the
    area (kPa) or the moment (kNm), against settlement, sliding (m) or rotation (rad)."""
    from femcore.harmonic import HarmonicModel
    from femcore.harmonic_coupled import CoupledModel, PlaneContact, combine_maps, coupled_residual
    from femcore.harmonic_planes import CircumferentialPlanes, min_planes
    from femcore.harmonic_plastic import HarmonicMohrCoulomb
    from femcore.kinematics import Kinematics

    B, N = f.B, int(f.harmonics)
    mesh = layered_domain(f.width_factor * B, f.depth_factor * B, x_min=0.0,
                          footing=(0.0, B / 2), h=f.h_far * B, h_near=f.h_near * B,
                          refine_radius=B, element=f.element)
    footing = mesh.nodes_of("footing")
    if f.contact:
        mesh, new_index = mesh.split_nodes(footing, np.zeros(0, np.int64))
        pairs = contact_pairs(mesh, mesh.edge_sets["footing"], new_index, (0.0, 1.0),
                              Kinematics.AXISYMMETRIC)
        footing = new_index[footing]
    base = HarmonicModel(mesh, max(N, 1))
    soil = base.add_block("soil", "soil", E=f.E, nu=f.nu)
    base.add_reference_point("footing", 0.0)
    planes = CircumferentialPlanes(range(N + 1), f.planes or max(2 * N + 3, min_planes(N)))
    if f.contact:
        a, b, t, nrm, w = pairs
        m = a.size
        base.add_element_block(PlaneContact(
            "contact", np.stack([3 * a, 3 * a + 1, 3 * a + 2], 1),
            np.stack([3 * b, 3 * b + 1, 3 * b + 2], 1), t, nrm, w / (2 * np.pi),
            np.full(m, f.contact_stiffness), np.full(m, f.contact_stiffness),
            np.full(m, f.su), np.zeros(m), planes))
    c = np.full_like(soil.E, f.su)
    cut = None if f.cutoff is None else np.full_like(soil.E, f.cutoff)
    block = HarmonicMohrCoulomb(soil.ring, soil.element_dofs, planes, soil.E, soil.nu, c,
                                cutoff=cut)
    model = CoupledModel(base, planes, {0: block})
    dm = base.dofmap
    U, W, TH = (dm.ref_dof("footing", k) for k in range(3))
    ctrl_n, ctrl = {"settlement": (0, W), "rotation": (1, TH), "horizontal": (1, U)}[f.control]
    maps = []
    for n in planes.harmonics:
        cons = base.constraints(n)
        cons.fix_nodes(mesh.nodes_of("base"))
        cons.fix_nodes(np.setdiff1d(mesh.nodes_of("right"), mesh.nodes_of("base")), (0, 2))
        cons.tie_rigid(footing, "footing", "bonded" if f.rough or f.contact else "smooth")
        if n == ctrl_n:
            cons.fix([ctrl], 0.0)
        maps.append(cons.build())
    cmap = combine_maps(maps)
    a = planes.harmonics.index(ctrl_n)
    dof = a * base.n_dofs + ctrl
    inc = {"settlement": -f.target * B, "rotation": f.target,
           "horizontal": f.target * B}[f.control]
    factory = coupled_residual(model, f.solver)
    u0 = states0 = None
    f_ext = np.zeros(model.n_dofs)
    if f.pressure:  # the vertical load first (n = 0), the controlled DOF held
        f_ext[W] = -f.pressure * np.pi * (B / 2) ** 2
        held = Stepper(model, cmap, np.zeros(model.n_dofs), [dof], [0.0], settings=f.settings,
                       f_ext_end=f_ext, residual_factory=factory).run()
        if held.status != "ok":
            raise RuntimeError(f"the vertical pressure {f.pressure} kPa: {held.message}")
        u0, states0 = held.u, held.states
    res = Stepper(model, cmap, f_ext, [dof], [inc], settings=f.settings,
                  residual_factory=factory).run(u0, states0)
    force = res.force[:, 0]
    disp = np.abs(res.displacement[:, 0])
    area = np.pi * (B / 2) ** 2
    load = {"settlement": -force / area, "rotation": force,
            "horizontal": force / area}[f.control]
    return FootingResult(load, disp, float(load[-1]), plateau(disp, load), res, model.n_dofs)
