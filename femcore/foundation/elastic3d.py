"""3D elastic stiffness of a design from the harmonic (Fourier) model, and the calibrated slice.

The foundation is a body of revolution except for its piles: soil layers, the circular cap
and its pedestal are meshed in the (r, z) half-plane (the axisymmetric mesh of the design),
and every pile ring is a smeared ring beam along its pile line (:mod:`femcore.harmonic_rings`)
tied to the soil by smeared slip springs. Linear elasticity decouples the circumferential
harmonics: the vertical stiffness is the n = 0 solve, the horizontal, rocking and coupling
stiffnesses the n = 1 solve of the real 3D geometry (no slice, no out-of-plane length).

Springs per pile, in series:

* the slip springs of the continuum model (``piles.slip_stiffening`` times the subgrade
  values of :mod:`.resistance`; the tip spring at the last node), and
* the near-field correction for discreteness: the smeared ring is a continuous wall, the
  soil around N discrete piles of width d at spacing s = 2 pi R / N is softer. For s > pi d
  a series spring per unit pile length ``2 pi G / ln(s / (pi d))`` axially and
  ``8 pi G (1 - nu) / ((3 - 4 nu) ln(s / (pi d)))`` laterally (both lateral directions)
  restores the difference between the displacement of a pile wall and the mean displacement
  of the wall of its row (derivation in ``docs/harmonic.md``).

The rigid-body reference point is the tower base (pedestal top, on the axis); the pedestal
top is tied rigidly to it. Cap contact ``none``: the cap touches no soil (as in the slice:
underside and edge split, no backfill); ``bonded`` and ``frictional`` (closed at small
loads, no slip) share the nodes.

:func:`calibrated_slice_length` picks the out-of-plane length L of the plane-strain slice so
that its elastic rotational stiffness under the load case equals the harmonic value.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from materials import LinearElastic
from meshing import regions

from ..harmonic import HarmonicConstraints, HarmonicError, HarmonicModel, prescribed_cases
from ..harmonic_coupled import PlaneContact
from ..harmonic_planes import CircumferentialPlanes, min_planes
from ..harmonic_rings import RingLine, RingSpringBlock, add_ring, ring_support, tie_head_to_solid
from ..interfaces import contact_pairs
from ..kinematics import Kinematics
from ..linsolve import factorize
from .build import (
    BuiltModel,
    _cap_polygon,
    _pile_section,
    _row_line,
    _soil_material,
    _SoilAtDepth,
    _split_underside,
    backfill_lines,
    cap_contact_law,
    domain_mesh,
    free_cap,
    freed_soil_edges,
    soil_profile,
)
from .design import Design
from .layout import Row
from .records import ElasticStiffness
from .resistance import lateral_stiffness, shaft_stiffness, tip_stiffness

__all__ = ["HarmonicFoundation", "build_harmonic", "harmonic_stiffness", "near_field_springs",
           "small_strain_design", "slice_stiffness", "calibrated_slice_length",
           "check_harmonic_layout"]


def check_harmonic_layout(design: Design) -> list[str]:
    """Why the harmonic model cannot represent this design (empty when it can)."""
    problems = []
    if design.analysis.support != "continuum":
        problems.append("analysis.support = 'springs': the harmonic model needs the soil "
                        "continuum (support = 'continuum')")
    for i, ring in enumerate(design.piles.rings):
        if ring.count < 3 and ring.radius > 0:
            problems.append(f"piles.rings.{i}.count = {ring.count}: a ring of the harmonic "
                            "model needs at least 3 piles (allowed: 3-200, or radius 0 with "
                            "one centre pile)")
    return problems


def small_strain_design(design: Design) -> Design:
    """The design with every soil layer linear elastic at E = 2 G0 (1 + nu) (constant over
    the layer) and a frictional cap contact taken as bonded. Raises ValueError naming the
    layers without G0."""
    layers = design.soil.layers
    missing = [ly.name for ly in layers if ly.G0 is None]
    if missing:
        raise ValueError(f"no G0 given for layer(s) {missing}")
    new_layers = []
    for ly in layers:
        nu = ly.poisson
        new_layers.append(ly.model_copy(update={
            "model": "elastic", "E": 2 * ly.G0 * (1 + nu), "E_gradient": 0.0, "nu": nu}))
    cap = design.cap.model_copy(update={"contact": "bonded"}) \
        if design.cap.contact == "frictional" else design.cap
    return design.model_copy(update={
        "soil": design.soil.model_copy(update={"layers": new_layers}), "cap": cap})


def near_field_springs(G, nu, spacing, width: float):
    """Near-field series springs per unit pile length (kN/m per m) of a ring of discrete
    piles, axial and lateral; inf where ``spacing <= pi * width`` (no correction).
    ``spacing`` may vary along the pile (a raked ring widens with depth)."""
    G, nu = np.asarray(G, dtype=np.float64), np.asarray(nu, dtype=np.float64)
    s = np.broadcast_to(np.asarray(spacing, dtype=np.float64), G.shape)
    lnr = np.log(np.maximum(s, 1e-300) / (np.pi * width))
    ok = lnr > 0.0
    safe = np.where(ok, lnr, 1.0)
    ka = np.where(ok, 2 * np.pi * G / safe, np.inf)
    kl = np.where(ok, 8 * np.pi * G * (1 - nu) / ((3 - 4 * nu) * safe), np.inf)
    return ka, kl


def _series(*ks):
    return 1.0 / sum(1.0 / np.asarray(k, dtype=np.float64) for k in ks)


@dataclass
class HarmonicFoundation:
    """The harmonic model of a design and how to constrain it."""

    design: Design
    model: HarmonicModel
    rings: list[RingLine]
    heads: list[tuple[int, NDArray[np.int64]]]  # (cap node, cap cells at it) per ring
    top_nodes: NDArray[np.int64]
    base_nodes: NDArray[np.int64]
    side_nodes: NDArray[np.int64]
    fixed_head: bool
    ref: str = "ref"
    meta: dict = field(default_factory=dict)
    column_ties: list = field(default_factory=list)  # (column top nodes, cap copies)
    tower_base: str = "bonded"  # "smooth" ties only W of the pedestal top at n = 0

    def constraints(self, n: int) -> HarmonicConstraints:
        cons = self.model.constraints(n)
        cons.fix_nodes(self.base_nodes)
        cons.fix_nodes(np.setdiff1d(self.side_nodes, self.base_nodes), (0, 2))
        for line, (node, cells) in zip(self.rings, self.heads, strict=True):
            ring_support(cons, line)
            tie_head_to_solid(cons, line, node, cells, self.fixed_head)
        for col, copies in self.column_ties:  # a centre pile's top follows the cap
            off = self.model.mesh.points[col, 0] > 0  # on the axis V follows U there
            for c in (0, 1) if n == 0 else (0, 1, 2):  # V_0 is the (fixed) torsion
                sel = off if c == 2 else np.ones(col.size, dtype=bool)
                cons.tie(3 * col[sel] + c, (3 * copies[sel] + c)[:, None],
                         np.ones((int(sel.sum()), 1)))
        cons.tie_rigid(self.top_nodes, self.ref, self.tower_base if n == 0 else "bonded")
        return cons


def build_harmonic(design: Design, near_field: bool = True,
                   slip: bool = True, n_max: int = 1,
                   contact: bool = False) -> HarmonicFoundation:
    """The harmonic model of a design with the moduli of its layers (see module docstring).

    ``near_field`` False leaves out the discreteness correction, ``slip`` False the slip
    springs (the beams then follow the soil through the near-field springs alone, or rigid
    ties when both are off); both for measuring what they change. ``n_max``: the highest
    harmonic the model may solve. ``contact`` True gives a frictional cap its own underside
    nodes joined to the soil by a :class:`~femcore.harmonic_coupled.PlaneContact` (closed
    and sticking in the elastic model; the harmonic pushover lets it open and slide).
    ``meta["springs"]`` keeps, per ring, what the nonlinear springs of the harmonic pushover
    need (block indices, nodes, tributary lengths).
    """
    problems = check_harmonic_layout(design)
    if problems:
        raise HarmonicError("; ".join(problems))
    t0 = time.perf_counter()
    cap, piles = design.cap, design.piles
    head_y = -cap.underside_depth
    rows = [Row(r.radius, float(r.count), r.rake, i) for i, r in enumerate(piles.rings)]
    A, I, perimeter, r0 = _pile_section(design)
    lines = [_row_line(r, head_y, piles.length) for r in rows]
    tip_y = head_y - piles.length
    centre = [k for k, r in enumerate(piles.rings) if r.radius == 0]
    extra = []
    for k in centre:  # a centre pile is a solid column r <= r0 (equal area) on the axis
        lines[k] = ((r0, head_y), (r0, tip_y))
        extra.append(((0.0, tip_y), (r0, tip_y)))
    first_backfill = len(lines) + len(extra) + 1
    extra += backfill_lines(design, True) if cap.contact == "none" else []
    mesh = domain_mesh(design, lines + extra, half=True)
    new_index = None
    top_edges = freed = np.zeros((0, mesh.element.order + 1), dtype=np.int64)
    if cap.contact == "none":  # the cap touches no soil (no backfill, edge and base free)
        mesh, _, new_index, top_edges = free_cap(mesh, design)
        freed = freed_soil_edges(mesh, design, first_backfill)
    underside = None
    if cap.contact == "frictional" and contact:
        mesh, _, new_index, underside = _split_underside(mesh, head_y, cap.diameter / 2)
    _, ped_top = _cap_polygon(design, half=True)
    model = HarmonicModel(mesh, n_max)
    column = np.zeros(0, dtype=np.int64)
    if centre:
        c = mesh.points[mesh.cells[:, :3]].mean(axis=1)  # (cells, 2)
        not_cap = np.ones(mesh.n_cells, dtype=bool)
        not_cap[mesh.cell_sets[regions.CAP]] = False
        column = np.flatnonzero(not_cap & (c[:, 0] < r0) & (c[:, 1] < head_y)
                                & (c[:, 1] > tip_y))
    tops = np.cumsum([0.0] + [ly.thickness for ly in design.soil.layers])
    layer_blocks = []  # (block index, layer index)
    for k, ly in enumerate(design.soil.layers, start=1):
        name = regions.layer(k)
        if name in mesh.cell_sets and len(mesh.cell_sets[name]):
            cells = np.setdiff1d(mesh.cell_sets[name], column)
            mat = _soil_material(ly, tops[k - 1])
            model.add_block(ly.name, cells, material=LinearElastic(
                mat.E, mat.nu, E_gradient=mat.E_gradient, depth_ref=mat.depth_ref))
            layer_blocks.append((len(model.blocks) - 1, k - 1))
    model.add_block("cap", regions.CAP, E=cap.E, nu=cap.nu)
    cap_block = len(model.blocks) - 1
    column_ties = []
    column_block = None
    if column.size:
        model.add_block("centre_pile", column, E=piles.E, nu=0.2)
        column_block = len(model.blocks) - 1
        col_nodes = np.unique(mesh.cells[column])
        at_top = col_nodes[np.abs(mesh.points[col_nodes, 1] - head_y) < 1e-6 * cap.diameter]
        if new_index is not None:
            at_top = at_top[new_index[at_top] >= 0]
            column_ties.append((at_top, new_index[at_top]))
    model.add_reference_point("ref", ped_top)

    soil_at = _SoilAtDepth(design, soil_profile(design))
    contact_block = None
    if underside is not None:
        a, b, t, nrm, w = contact_pairs(mesh, underside, new_index, (0.0, 1.0),
                                        Kinematics.AXISYMMETRIC)
        k, c, tand = cap_contact_law(design, soil_at, a.size)
        model.add_element_block(PlaneContact(
            "cap_contact", np.stack([3 * a, 3 * a + 1, 3 * a + 2], 1),
            np.stack([3 * b, 3 * b + 1, 3 * b + 2], 1), t, nrm, w / (2 * np.pi), k, k.copy(),
            c, tand, CircumferentialPlanes(range(n_max + 1), min_planes(n_max))))
        contact_block = len(model.blocks) - 1
    cap_cells = mesh.cell_sets[regions.CAP]
    rings, heads, nf_info, spring_info = [], [], [], []
    for k, ring in enumerate(piles.rings, start=1):
        if ring.radius == 0:
            continue
        nodes = np.unique(mesh.edge_sets[regions.line(k)])
        head = np.array(lines[k - 1][0])
        nodes = nodes[np.argsort(np.hypot(*(mesh.points[nodes] - head).T))]
        xy = mesh.points[nodes]
        line, _ = add_ring(model, f"ring_{k}", ring.count, xy, piles.E * A, piles.E * I)
        seg = np.hypot(*np.diff(xy, axis=0).T)
        trib = np.zeros(len(xy))
        trib[:-1] += seg / 2
        trib[1:] += seg / 2
        s = soil_at(-xy[:, 1])
        ks = piles.slip_stiffening if slip else np.inf
        k_ax = shaft_stiffness(s["G"], s["nu"], r0, piles.length) * ks
        k_lat = lateral_stiffness(s["G"]) * ks
        spacing = 2 * np.pi * ring.radius / ring.count  # at the head
        if near_field:  # local spacing: a raked ring widens with depth
            nf_ax, nf_lat = near_field_springs(s["G"], s["nu"], 2 * np.pi * xy[:, 0] / ring.count,
                                               piles.width)
            k_ax, k_lat = _series(k_ax, nf_ax), _series(k_lat, nf_lat)
        if not np.all(np.isfinite(k_ax)):  # neither slip nor near field: stiff ties
            k_ax = np.full_like(k_ax, 1e4) * s["G"]
            k_lat = np.full_like(k_lat, 1e4) * s["G"]
        k_nodes = np.stack([k_ax * trib, k_lat * trib, k_lat * trib], axis=1)  # (m, 3)
        soil = np.stack([3 * nodes, 3 * nodes + 1, 3 * nodes + 2], axis=1)
        model.add_element_block(RingSpringBlock(f"ring_{k}_springs", line, line.trans, soil,
                                                k_nodes))
        info = {"ring": k, "line": line, "nodes": nodes, "trib": trib, "soil": s,
                "k": k_nodes, "shaft_block": len(model.blocks) - 1, "tip_block": None}
        if slip:  # tip (q-z) spring in parallel with the shaft spring at the last node
            st = {key: v[-1:] for key, v in s.items()}
            k_tip = float(tip_stiffness(st["G"], st["nu"], r0)[0]) * piles.slip_stiffening
            model.add_element_block(RingSpringBlock(
                f"ring_{k}_tip", line, line.trans[-1:], soil[-1:],
                np.array([[k_tip, 0.0, 0.0]])))
            info.update(tip_block=len(model.blocks) - 1, k_tip=k_tip)
        spring_info.append(info)
        cap_node = int(nodes[0]) if new_index is None or new_index[nodes[0]] < 0 \
            else int(new_index[nodes[0]])
        cells = cap_cells[np.any(mesh.cells[cap_cells] == cap_node, axis=1)]
        rings.append(line)
        heads.append((cap_node, cells))
        nf_info.append({"ring": k, "spacing_m": spacing,
                        "spacing_over_pi_d": spacing / (np.pi * piles.width),
                        "corrected": bool(near_field and spacing > np.pi * piles.width)})
    pts = mesh.points
    cap_nodes = np.unique(mesh.cells[cap_cells])
    tol = 1e-6 * cap.diameter
    top = cap_nodes[(np.abs(pts[cap_nodes, 1] - ped_top) < tol)
                    & (pts[cap_nodes, 0] <= cap.pedestal_diameter / 2 + tol)]
    meta = {"nodes": mesh.n_nodes, "dofs": model.n_dofs, "near_field": nf_info,
            "build_s": time.perf_counter() - t0, "springs": spring_info,
            "backfill_edges": top_edges, "freed_edges": freed, "column": column,
            "pedestal_top": ped_top, "layer_blocks": layer_blocks,
            "column_block": column_block, "cap_block": cap_block,
            "contact_block": contact_block}
    return HarmonicFoundation(design, model, rings, heads, top, mesh.nodes_of("base"),
                              mesh.nodes_of("right"), piles.head == "fixed", "ref", meta,
                              column_ties)


def _lever(loading) -> float | None:
    return loading.lever_arm if loading.control == "lever" else None


def _rotational(K_H: float, K_R: float, K_HR: float, lever: float | None):
    """(M / alpha under the load case, M / alpha under a pure moment) from the 2 x 2
    stiffness (Delta, alpha) at the tower base; the load case of a lever is H = M / h."""
    K = np.array([[K_H, K_HR], [K_HR, K_R]])
    C = np.linalg.inv(K)
    k_moment = 1.0 / C[1, 1]
    if lever is None:
        return k_moment, k_moment
    return 1.0 / (C[1, 1] + C[1, 0] / lever), k_moment


def harmonic_stiffness(design: Design, moduli: str = "operational", near_field: bool = True,
                       slip: bool = True, vertical: bool = True) -> ElasticStiffness:
    """K_V (n = 0), K_H, K_R, K_HR (n = 1) at the tower base and the rotational stiffness
    under the load case, from the harmonic model. ``moduli``: "operational" (the layers' E)
    or "small_strain" (G0)."""
    t0 = time.perf_counter()
    d = small_strain_design(design) if moduli == "small_strain" else design
    hf = build_harmonic(d, near_field=near_field, slip=slip)
    model, dm = hf.model, hf.model.dofmap
    h, w, rot = (dm.ref_dof(hf.ref, c) for c in range(3))
    t1 = time.perf_counter()
    K_V = None
    if vertical:
        cons = hf.constraints(0)
        cons.fix([w], 1.0)
        cmap = cons.build()
        K_V = float(cmap.generalized_at(model.solve(0, cmap).reactions, w))
    t2 = time.perf_counter()
    cons = hf.constraints(1)
    cons.fix([h, rot], 0.0)
    cmap = cons.build()
    sol = model.solve(1, cmap, prescribed=prescribed_cases(cmap, [{h: 1.0}, {rot: 1.0}]))
    R = sol.reactions
    K_H, K_HR = cmap.generalized_at(R[0], h), cmap.generalized_at(R[1], h)
    K_R = cmap.generalized_at(R[1], rot)
    t3 = time.perf_counter()
    lever = _lever(design.loading)
    k_case, k_moment = _rotational(K_H, K_R, K_HR, lever)
    return ElasticStiffness(
        float(k_case), float(k_moment), float(K_R), float(K_H), float(K_HR), K_V, moduli,
        lever, int(model.n_dofs),
        {"build_s": t1 - t0, "n0_s": t2 - t1, "n1_s": t3 - t2, "total_s": t3 - t0},
        hf.meta["near_field"])


# --------------------------------------------------------------------------- the slice
def _pile_blocks(built: BuiltModel) -> set[int]:
    ids = set()
    for pr in built.rows:
        ids.update({id(pr.beam), id(pr.springs), id(pr.tip)})
    return ids


class _SliceStiffness:
    """K(L) of a built slice from one evaluation of its stress-free element tangents."""

    def __init__(self, built: BuiltModel) -> None:
        model = built.model
        _, elements, _ = model.evaluate(np.zeros(model.n_dofs), model.initial_states(),
                                        "elements")
        self.built, self.Ke = built, elements()
        piles = _pile_blocks(built)
        self.is_pile = [id(b) in piles for b in model.blocks] + [False]

    def __call__(self, L: float) -> tuple[float, float]:
        built, model = self.built, self.built.model
        scale = built.slice_length / L
        Kl = [k * scale if p else k for k, p in zip(self.Ke, self.is_pile, strict=True)]
        cmap = built.free_map
        lu = factorize(cmap.reduced_from_elements(model.pattern, Kl))
        dm = model.dofmap
        U, TH = dm.ref_dof(built.ref, 0), dm.ref_dof(built.ref, 2)
        F = np.zeros((2, model.n_dofs))
        F[0, U], F[1, TH] = 1.0, 1.0
        C = np.empty((2, 2))
        for j in range(2):  # C[j] = (u, theta) at the reference point under a unit force / moment
            u = cmap.expand(lu.solve(cmap.reduce_vector(F[j])))
            C[j] = u[U], u[TH]
        h = built.lever_height
        k_moment = 1.0 / C[1, 1]
        k_case = h / C[0, 1] if h > 0 else k_moment
        return float(L * k_case), float(L * k_moment)


def slice_stiffness(built: BuiltModel, lengths) -> list[tuple[float, float]]:
    """Elastic rotational stiffness (kNm/rad, 3D = per metre x L) of the plane-strain slice
    of ``built`` for other out-of-plane lengths L, under the load case and under a pure
    moment, from the stress-free tangent.

    The piles of a slice carry n_row / L of their stiffness, the soil and cap are per metre,
    so K(L) = L k(K_soil + (L_built / L) K_piles): one assembly, one factorisation per L.
    """
    k = _SliceStiffness(built)
    return [k(L) for L in lengths]


def calibrated_slice_length(built: BuiltModel, target: float, rtol: float = 2e-3,
                            max_iter: int = 8) -> tuple[float, dict]:
    """The out-of-plane length L at which the slice's elastic rotational stiffness under
    the load case equals ``target`` (kNm/rad, the harmonic value). Secant iterations on
    log K(log L); K grows monotonically with L (more soil per pile)."""
    L0 = built.slice_length
    k_of = _SliceStiffness(built)
    Ls, Ks = [L0], [k_of(L0)[0]]
    L1 = L0 * target / Ks[0]
    for _ in range(max_iter):
        Ls.append(L1)
        Ks.append(k_of(L1)[0])
        if abs(Ks[-1] / target - 1.0) < rtol:
            break
        p = np.log(Ks[-1] / Ks[-2]) / np.log(Ls[-1] / Ls[-2])
        p = min(max(p, 0.2), 1.5)  # K ~ L^p with 0 < p <= 1 in practice
        L1 = Ls[-1] * (target / Ks[-1]) ** (1.0 / p)
    else:
        raise HarmonicError(f"the slice length did not converge to the harmonic stiffness "
                            f"{target:.6g} kNm/rad in {max_iter} steps (last L = {Ls[-1]:.4g} "
                            f"m, K = {Ks[-1]:.6g})")
    return float(Ls[-1]), {"lengths_m": Ls, "stiffness": Ks, "target": target,
                           "start_m": L0}
