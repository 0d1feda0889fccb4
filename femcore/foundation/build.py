"""Design -> geometry (gmsh) -> Model: soil layers, elastic cap, pile rows, ties and loads.

The design is trusted here: every rule lives in the schema (:mod:`.design`), checked once when
the file is read. Two supports:

* ``continuum``: soil as T6/T15 continuum (Tresca, Mohr-Coulomb or elastic layers, K0 initial
  stresses with the water table), an elastic cap continuum, and each pile row a beam whose
  nodes lie on the soil nodes of its line (gmsh puts the line into the soil mesh), tied to
  them node by node by slip springs (shaft t-z, lateral p-y, tip q-z). Cap contact ``none``:
  the cap touches no soil (underside and edge split, the backfill above it removed and its
  weight applied to the cap top); ``bonded`` shares the nodes;
  ``frictional`` splits them and joins them by a zero-thickness contact (Coulomb friction, no
  tension: the cap can lift off).
* ``springs``: no soil continuum; the same springs anchored to fixed ground and a rigid cap
  (the classical subgrade-reaction model).

The spring stiffnesses of :mod:`.resistance` describe the whole soil response of a pile
(subgrade reaction). In the continuum the soil mesh already deforms, so the slip springs only
carry the local pile-soil slip: their stiffness is ``piles.slip_stiffening`` (default 10)
times the subgrade value, so that they add about a tenth of the subgrade compliance in series
with the continuum; their limits are unchanged. The value is written into every result.

Everything in the 2D model is per metre of slice (out-of-plane length L); loads are divided
by L, row stiffnesses and resistances multiplied by n_row / L.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
from numpy.typing import NDArray

from femcore.foundation.resistance import (
    lateral_limit,
    lateral_stiffness,
    shaft_limit,
    shaft_stiffness,
    tip_limit,
    tip_stiffness,
)
from materials import LinearElastic, MohrCoulomb, Tresca
from meshing import regions

from ..beams import BeamBlock
from ..dofs import ConstraintMap, Constraints
from ..initial_stress import GAMMA_W, Layer, Profile
from ..interfaces import ContactBlock, SpringBlock, contact_pairs
from ..kinematics import gradients_at_node
from ..mesh import Mesh
from ..model import Model
from .design import Design, SoilLayer
from .layout import Ring, Row, default_slice_length, lump_rings

__all__ = ["BuiltModel", "PileRow", "build_model", "set_slice_length", "slice_length_of",
           "domain_mesh",
           "mesh_width", "MESH_SIZES"]

# element size near piles and cap (m) and far-field size (in cap diameters)
MESH_SIZES = {"coarse": (3.0, 1 / 2.0), "standard": (1.6, 1 / 2.5), "fine": (1.0, 1 / 3.5)}


@dataclass
class PileRow:
    """One lumped row: its beam, shaft springs, tip spring and metadata."""

    row: Row
    beam: BeamBlock
    springs: SpringBlock
    tip: SpringBlock
    beam_dofs: NDArray[np.int64]  # (n_nodes, 3)
    head_xy: tuple[float, float]


@dataclass
class BuiltModel:
    design: Design
    model: Model
    constraints: Constraints  # supports and ties, without the pushover control
    ref: str
    ref_xy: tuple[float, float]
    pedestal_top: float  # y of the tower base (m)
    slice_length: float
    rows: list[PileRow]
    profile: Profile | None
    meta: dict = field(default_factory=dict)

    @cached_property
    def free_map(self) -> ConstraintMap:
        """The constraint map of the supports and ties alone (no control prescribed), built
        once and shared by the load-ramp stages."""
        return self.constraints.build()

    @property
    def lever_height(self) -> float:
        """Height h of the reference point above the tower base (m; 0 without a lever)."""
        return self.ref_xy[1] - self.pedestal_top


def _soil_material(layer: SoilLayer, top: float):
    nu = layer.poisson
    if layer.model == "tresca":
        return Tresca(E=layer.E_top, nu=nu, su=layer.su, su_gradient=layer.su_gradient,
                      E_gradient=layer.E_gradient, depth_ref=top)
    if layer.model == "mohr_coulomb":
        return MohrCoulomb(E=layer.E, nu=nu, c=layer.c, phi=layer.phi, psi=layer.psi,
                           E_gradient=layer.E_gradient, depth_ref=top)
    return LinearElastic(E=layer.E, nu=nu, E_gradient=layer.E_gradient, depth_ref=top)


def soil_profile(design: Design) -> Profile:
    layers, top = [], 0.0
    for ly in design.soil.layers:
        layers.append(Layer(top, top + ly.thickness, ly.gamma, ly.gamma_sat, ly.k0,
                            drained=not ly.undrained))
        top += ly.thickness
    return Profile(tuple(layers), water_table=design.soil.water_table, gamma_w=GAMMA_W)


class _SoilAtDepth:
    """Layer properties at depths (for spring stiffness and limits)."""

    def __init__(self, design: Design, profile: Profile) -> None:
        self.design, self.profile = design, profile
        self.tops = np.cumsum([0.0] + [ly.thickness for ly in design.soil.layers])[:-1]

    def __call__(self, depth: NDArray[np.float64]) -> dict[str, NDArray[np.float64]]:
        k = self.profile.layer_index(depth)
        lys = self.design.soil.layers
        out: dict[str, list] = {n: [] for n in ("undrained", "su", "phi", "G", "nu")}
        for kk, z in zip(k, depth, strict=True):  # one entry per spring node (set-up only)
            ly = lys[kk]
            mat = _soil_material(ly, self.tops[kk])
            dz = max(z - self.tops[kk], 0.0)
            E = (mat.E + mat.E_gradient * dz)
            nu = mat.nu
            out["undrained"].append(ly.undrained)
            out["su"].append((ly.su or 0.0) + ly.su_gradient * dz)
            out["phi"].append(ly.phi)
            out["G"].append(E / (2 * (1 + nu)))
            out["nu"].append(nu)
        res = {k2: np.array(v) for k2, v in out.items()}
        sv = self.profile.total_vertical(depth) - self.profile.pore_pressure(depth)
        res["sigma_v_eff"] = np.maximum(sv, 0.0)
        return res


def _cap_polygon(design: Design, half: bool = False) -> tuple[list[tuple[float, float]], float]:
    """Cap section through the centre (``half``: its x >= 0 part, for axisymmetry) and the
    height of the tower base."""
    cap = design.cap
    R, rp = cap.diameter / 2, cap.pedestal_diameter / 2
    yu = -cap.underside_depth
    yc = yu + cap.centre_thickness
    ye = yu + cap.edge_thickness
    top = yc + cap.pedestal_height
    right = [(R, yu), (R, ye), (rp, yc)] + ([(rp, top)] if cap.pedestal_height > 0 else [])
    if half:
        return [(0.0, yu), *right, (0.0, top)], top
    left = [(-x, y) for x, y in reversed(right)]
    return [(-R, yu), *right, *left[:-1]], top


def _pile_section(design: Design):
    p = design.piles
    if p.shape == "square":
        A, I, per = p.width**2, p.width**4 / 12, 4 * p.width
    else:
        A, I, per = np.pi * p.width**2 / 4, np.pi * p.width**4 / 64, np.pi * p.width
    return A, I, per, np.sqrt(A / np.pi)


def _row_line(row: Row, head_y: float, length: float):
    dz = length / np.sqrt(1.0 + row.rake**2)
    side = np.sign(row.x)
    return (row.x, head_y), (row.x + side * row.rake * dz, head_y - dz)


def _split_underside(mesh: Mesh, y: float, x_lim: float):
    """Give the cap its own nodes along its underside (edges at height y strictly inside
    |x| < x_lim). Returns the new mesh, the split nodes, the copy index and the underside
    edges (soil side)."""
    tol = 1e-6 * max(1.0, x_lim)
    edges = mesh.edge_sets[regions.CAP_SOIL]
    pts = mesh.points
    under = edges[np.all(np.abs(pts[edges[:, :2], 1] - y) < tol, axis=1)]
    nodes = np.unique(under)
    nodes = nodes[np.abs(pts[nodes, 0]) < x_lim - tol]
    new_mesh, new_index = mesh.split_nodes(nodes, mesh.cell_sets[regions.CAP])
    return new_mesh, nodes, new_index, under


def mesh_width(design: Design, half: bool) -> float:
    """Width of the soil domain (m): the cap plus ``domain_factor`` cap diameters each side
    (half of it for a mesh of the half-plane x >= 0)."""
    return design.cap.diameter * (1 + 2 * design.analysis.domain_factor) / (2 if half else 1)


_MESHES: dict[tuple, Mesh] = {}


def domain_mesh(design: Design, lines, half: bool) -> Mesh:
    """The soil-and-cap mesh of a design (gmsh): layers, water table, cap section, pile
    lines; the half-plane x >= 0 for ``half`` (axisymmetric and harmonic models). The last
    few meshes are kept, so that models of the same geometry (the slice at another length,
    the harmonic model at other moduli) skip the mesher."""
    from meshing import layered_domain  # gmsh only when a mesh is needed

    an, cap = design.analysis, design.cap
    h_near, far = MESH_SIZES[an.mesh]
    depth = design.model_depth
    layer_depths = np.cumsum([ly.thickness for ly in design.soil.layers])[:-1]
    layer_depths = tuple(float(z) for z in layer_depths if 0 < z < depth - 1e-6)
    poly, _ = _cap_polygon(design, half=half)
    wt = design.soil.water_table
    lines = tuple((tuple(map(float, a)), tuple(map(float, b))) for a, b in lines)
    key = (mesh_width(design, half), depth, layer_depths, tuple(poly), lines, half,
           wt if 0 < wt < depth else None, far * cap.diameter, h_near, an.element)
    if key not in _MESHES:
        if len(_MESHES) >= 4:
            _MESHES.pop(next(iter(_MESHES)))
        _MESHES[key] = layered_domain(
            key[0], depth, list(layer_depths), cap=poly, lines=list(lines),
            x_min=0.0 if half else None, extra_depths=[wt] if 0 < wt < depth else [],
            h=far * cap.diameter, h_near=h_near, refine_radius=4 * h_near + 2.0,
            element=an.element)
    return _MESHES[key]


def slice_length_of(design: Design) -> float:
    """The out-of-plane length given in the design, or 16 R / (3 pi) for 'cap_rule' and as
    the starting value of 'calibrated'."""
    L = design.analysis.slice_length
    return float(L) if isinstance(L, (int, float)) else default_slice_length(
        design.cap.diameter / 2)


def backfill_lines(design: Design, half: bool) -> list:
    """Vertical mesh lines from the cap edge top to the ground (x = +-R), so that the soil
    above the cap (the backfill) is a region of its own; none when the edge top is not
    below ground."""
    cap = design.cap
    R = cap.diameter / 2
    ye = -cap.underside_depth + cap.edge_thickness
    if ye >= -1e-9:
        return []
    return [((R, ye), (R, 0.0))] + ([] if half else [((-R, ye), (-R, 0.0))])


def free_cap(mesh: Mesh, design: Design):
    """Cap contact ``none``: the cap touches no soil. The backfill above the cap (soil cells
    over the cap, inside its radius) is removed from the mesh (its weight is a load on the
    cap top, :func:`backfill_load`), and every node the cap shares with the soil (underside
    and edge) is split. Returns the new mesh, the split nodes, the copy index and the cap top
    edges that carried the backfill."""
    cap = design.cap
    R, yu = cap.diameter / 2, -cap.underside_depth
    tol = 1e-6 * max(1.0, R)
    cap_cells = mesh.cell_sets[regions.CAP]
    is_cap = np.zeros(mesh.n_cells, dtype=bool)
    is_cap[cap_cells] = True
    centre = mesh.points[mesh.cells[:, :3]].mean(axis=1)  # (c, 2) corner centroids
    backfill = np.flatnonzero(~is_cap & (np.abs(centre[:, 0]) < R - tol)
                              & (centre[:, 1] > yu + tol))
    if backfill.size:
        mesh, _ = mesh.without_cells(backfill)
        cap_cells = mesh.cell_sets[regions.CAP]
    soil = np.ones(mesh.n_cells, dtype=bool)
    soil[cap_cells] = False
    shared = np.intersect1d(np.unique(mesh.cells[cap_cells]), np.unique(mesh.cells[soil]))
    edges = mesh.edge_sets.get(regions.CAP_SOIL, np.zeros((0, 2), dtype=np.int64))
    ec = mesh.points[edges].mean(axis=1) if len(edges) else np.zeros((0, 2))
    top = edges[(ec[:, 1] > yu + tol) & (np.abs(ec[:, 0]) < R - tol)] if len(edges) else edges
    new_mesh, new_index = mesh.split_nodes(shared, cap_cells)
    top = np.where(new_index[top] >= 0, new_index[top], top)  # the cap's own copies
    return new_mesh, shared, new_index, top


def freed_soil_edges(mesh: Mesh, design: Design, first_extra_line: int) -> NDArray[np.int64]:
    """Cap contact ``none``: the soil faces the cap and the removed backfill no longer hold
    (soil side of the cap underside and edge, and the backfill wall from the cap edge top to
    the ground); the soil keeps the original node numbers when the cap is split."""
    cap = design.cap
    R, yu = cap.diameter / 2, -cap.underside_depth
    tol = 1e-6 * max(1.0, R)
    edges = mesh.edge_sets.get(regions.CAP_SOIL, np.zeros((0, 2), dtype=np.int64))
    ec = mesh.points[edges].mean(axis=1) if len(edges) else np.zeros((0, 2))
    keep = (ec[:, 1] <= yu + tol) | (np.abs(ec[:, 0]) >= R - tol) if len(edges) else \
        np.zeros(0, dtype=bool)
    parts = [edges[keep]]
    k = first_extra_line
    while regions.line(k) in mesh.edge_sets:
        parts.append(mesh.edge_sets[regions.line(k)])
        k += 1
    return np.concatenate(parts, axis=0) if parts else edges


def greenfield_traction(model: Model, edges, design: Design, profile: Profile
                        ) -> NDArray[np.float64]:
    """Loads that hold freed soil faces in the greenfield (K0) state: the traction
    sigma_0 n of the total at-rest stress (sigma_v, K0 sigma'_v + u) with n the outward
    normal of the soil (towards the cap: -sign(x) on the vertical faces, up on the
    underside). The cap of contact ``none`` is wished in place: the soil is neither
    excavated nor loaded by it, and the freed faces do not collapse under their own weight
    when the strengths are factored."""
    from ..assembly import assemble_vector
    from ..loads import edge_geometry

    if len(edges) == 0:
        return np.zeros(model.n_dofs)
    R = design.cap.diameter / 2
    tol = 1e-6 * max(1.0, R)
    N, x, _, ds = edge_geometry(model.mesh, edges, model.analysis)
    depth = np.maximum(-x[..., 1], 0.0)  # (e, q)
    sv = profile.total_vertical(depth)
    u = profile.pore_pressure(depth)
    K0 = np.array([ly.K0 for ly in profile.layers])[profile.layer_index(depth)]
    sh = K0 * (sv - u) + u
    mid = model.mesh.points[edges].mean(axis=1)  # (e, 2)
    vertical = np.abs(mid[:, 0]) >= R - tol
    t = np.zeros((*depth.shape, 2))
    t[..., 0] = np.where(vertical[:, None], sh * np.sign(mid[:, 0])[:, None], 0.0)
    t[..., 1] = np.where(vertical[:, None], 0.0, -sv)
    f_e = np.einsum("qa,eqd,eq->ead", N, t, ds)
    return assemble_vector(model.n_dofs, model.dofmap.cell_dofs(edges),
                           f_e.reshape(len(edges), -1))


def backfill_load(model: Model, edges, profile: Profile) -> NDArray[np.float64]:
    """The weight of the removed backfill on the cap top edges: a vertical load
    sigma_v(depth) (total stress of the profile) per unit horizontal projection, i.e. the
    traction (0, -sigma_v |n_y|) on a sloped edge."""
    from ..assembly import assemble_vector
    from ..loads import edge_geometry

    if len(edges) == 0:
        return np.zeros(model.n_dofs)
    N, x, normal, ds = edge_geometry(model.mesh, edges, model.analysis)
    sv = profile.total_vertical(np.maximum(-x[..., 1], 0.0)) * np.abs(normal[..., 1])  # (e, q)
    f_e = np.zeros((len(edges), N.shape[1], 2))  # (e, a, 2)
    f_e[..., 1] = -np.einsum("qa,eq,eq->ea", N, sv, ds)
    return assemble_vector(model.n_dofs, model.dofmap.cell_dofs(edges),
                           f_e.reshape(len(edges), -1))


def set_slice_length(built: BuiltModel, L: float) -> None:
    """Change the out-of-plane length of a built slice in place: every pile block carries
    n_row / L of one pile's stiffness and resistance, so beams and springs scale by
    L_old / L; soil, cap and loads per metre stay (loads divide by ``built.slice_length``
    when the stages run). Equivalent to building the model at L, without the set-up."""
    f = built.slice_length / L
    for pr in built.rows:
        b = pr.beam
        b.EA, b.EI, b.k_local, b.K_e = b.EA * f, b.EI * f, b.k_local * f, b.K_e * f
        for sp in (pr.springs, pr.tip):
            sp.k, sp.f_min, sp.f_max = sp.k * f, sp.f_min * f, sp.f_max * f
    built.slice_length = float(L)
    built.meta["slice_length_m"] = float(L)


def build_model(design: Design, slice_length: float | None = None,
                pile_resistance: float = 1.0) -> BuiltModel:
    """The 2D model of a (validated) design (see module docstring); ``slice_length``
    overrides the design's out-of-plane length (the calibrated value); the pile shaft, tip
    and lateral resistances are divided by ``pile_resistance`` (a partial factor)."""
    if design.analysis.geometry == "harmonic":
        raise ValueError("build_model builds 2D models; harmonic designs are built by "
                         "femcore.foundation.elastic3d.build_harmonic")
    an, cap, piles, loading = design.analysis, design.cap, design.piles, design.loading
    axisym = an.geometry == "axisymmetric"
    R = cap.diameter / 2
    rings = [Ring(r.radius, r.count, r.rake, r.angle_offset) for r in piles.rings]
    vertical_extent = piles.length / np.sqrt(1 + max(r.rake for r in rings) ** 2)
    if axisym:
        # each ring is one smeared row at its radius; forces and stiffnesses are ring totals
        L = 1.0
        rows = [Row(r.radius, float(r.count), r.rake, i) for i, r in enumerate(rings)]
    else:
        L = slice_length if slice_length is not None else slice_length_of(design)
        rows = lump_rings(rings, an.row_merge, depth=vertical_extent)
    profile = soil_profile(design)
    soil_at = _SoilAtDepth(design, profile)
    poly, ped_top = _cap_polygon(design, half=axisym)
    head_y = -cap.underside_depth
    A, I, perimeter, r0 = _pile_section(design)

    # the reference point: the lever-arm tip (control lever) or the tower base
    ref_xy = (0.0, ped_top + (loading.lever_arm if loading.control == "lever" else 0.0))

    meta = {"slice_length_m": L, "rows": [r.__dict__ for r in rows],
            "support": an.support, "element": an.element, "mesh": an.mesh,
            "slip_stiffening": piles.slip_stiffening if an.support == "continuum" else 1.0,
            "pile_resistance_factor": pile_resistance}
    if an.support == "springs":
        return _build_springs(design, rows, L, profile, soil_at, ref_xy, ped_top, meta,
                              (A, I, perimeter, r0))
    lines = [_row_line(r, head_y, piles.length) for r in rows]
    extra = backfill_lines(design, axisym) if cap.contact == "none" else []
    mesh = domain_mesh(design, lines + extra, half=axisym)
    width = mesh_width(design, half=axisym)
    depth = design.model_depth
    split_nodes = np.zeros(0, dtype=np.int64)
    new_index = None
    underside = None
    top_edges = np.zeros((0, mesh.element.order + 1), dtype=np.int64)
    freed = top_edges
    if cap.contact == "frictional":
        mesh, split_nodes, new_index, underside = _split_underside(mesh, head_y, R)
    elif cap.contact == "none":
        mesh, split_nodes, new_index, top_edges = free_cap(mesh, design)
        freed = freed_soil_edges(mesh, design, len(lines) + 1)

    model = Model(mesh, an.geometry)
    tops = np.cumsum([0.0] + [ly.thickness for ly in design.soil.layers])
    for k, ly in enumerate(design.soil.layers, start=1):
        name = regions.layer(k)
        if name in mesh.cell_sets and len(mesh.cell_sets[name]):
            model.add_block(ly.name, name, _soil_material(ly, tops[k - 1]))
    model.add_block("cap", regions.CAP, LinearElastic(cap.E, cap.nu), unit_weight=cap.gamma)
    if cap.contact == "frictional":
        model.add_element_block(_cap_contact(mesh, underside, new_index, design, soil_at))
    model.add_reference_point("ref", ref_xy)
    cons = model.constraints()
    cons.support_box(mesh)
    if axisym and split_nodes.size:  # copies of split nodes on the axis keep u_r = 0 too
        copies = new_index[split_nodes]
        cons.fix_nodes(copies[np.abs(mesh.points[copies, 0]) < 1e-9], (0,))
    # tower base: pedestal-top nodes tied rigidly to the reference point
    cap_nodes = np.unique(mesh.cells[mesh.cell_sets[regions.CAP]])
    tol = 1e-6 * cap.diameter
    top_nodes = cap_nodes[(np.abs(mesh.points[cap_nodes, 1] - ped_top) < tol)
                          & (np.abs(mesh.points[cap_nodes, 0]) <= cap.pedestal_diameter / 2
                             + tol)]
    if axisym:  # vertical motion only; the axis keeps u_r = 0
        cons.tie_rigid(top_nodes, "ref", (1,))
        cons.fix([model.dofmap.ref_dof("ref", 0), model.dofmap.ref_dof("ref", 2)], 0.0)
    else:
        cons.tie_rigid(top_nodes, "ref")

    pile_rows = []
    for k, row in enumerate(rows, start=1):
        edges = mesh.edge_sets[regions.line(k)]
        nodes = np.unique(edges)
        head = np.array(lines[k - 1][0])
        order = np.argsort(np.hypot(*(mesh.points[nodes] - head).T))
        nodes = nodes[order]
        xy = mesh.points[nodes]
        pr = _pile_row(model, f"pile_{k}", row, xy, L, design, soil_at, (A, I, perimeter, r0),
                       soil_nodes=nodes, divisor=meta["pile_resistance_factor"])
        pile_rows.append(pr)
        # head: translations follow the cap node at the head; rotation the cap's local rotation
        cap_head = nodes[0] if new_index is None or new_index[nodes[0]] < 0 \
            else new_index[nodes[0]]
        _tie_head_to_cap(cons, model, pr.beam_dofs[0], int(cap_head),
                         rotation=piles.head == "fixed")
    meta.update({"n_split_nodes": int(split_nodes.size), "domain_width_m": width,
                 "domain_depth_m": depth, "backfill_edges": top_edges,
                 "freed_edges": freed})
    return BuiltModel(design, model, cons, "ref", ref_xy, ped_top, L, pile_rows, profile, meta)


def cap_contact_law(design: Design, soil_at, m: int):
    """Stiffness (kPa/m), cohesion (kPa) and friction coefficient of ``m`` cap-soil contact
    points (see :func:`_cap_contact`)."""
    s = soil_at(np.full(m, design.cap.underside_depth + 1e-6))
    k = 100.0 * s["G"]
    layer = design.soil.layers[int(soil_at.profile.layer_index(
        np.array([design.cap.underside_depth + 1e-6]))[0])]
    if layer.undrained:
        return k, s["su"], np.zeros(m)
    return k, np.full(m, layer.c), np.full(m, np.tan(np.radians(2 * layer.phi / 3)))


def _cap_contact(mesh: Mesh, underside, new_index, design: Design, soil_at) -> ContactBlock:
    """Cap-soil contact under the cap: no tension, Coulomb shear (undrained: s_u at the
    underside; drained: c' and tan(2 phi' / 3), common practice), normal and shear stiffness
    100 G / (1 m) of the soil there (stiff enough to add < 1 % compliance, soft enough for
    Newton)."""
    a, b, t, n, w = contact_pairs(mesh, underside, new_index, (0.0, 1.0))
    m = a.size
    k, c, tand = cap_contact_law(design, soil_at, m)
    return ContactBlock("cap_contact", np.stack([2 * a, 2 * a + 1], 1),
                        np.stack([2 * b, 2 * b + 1], 1), t, n, w, k, k.copy(), c, tand,
                        np.zeros(m))


def _tie_head_to_cap(cons: Constraints, model: Model, head_dofs, cap_node: int,
                     rotation: bool) -> None:
    """Pile head translations = cap node; rotation (fixed head) = minus the mean local cap
    rotation (1/2)(dv/dx - du/dy) over the cap cells at that node (clockwise theta)."""
    cons.tie(head_dofs[:2], [[2 * cap_node], [2 * cap_node + 1]], [[1.0], [1.0]])
    if not rotation:
        return
    mesh = model.mesh
    cap_cells = mesh.cell_sets[regions.CAP]
    cells = cap_cells[np.any(mesh.cells[cap_cells] == cap_node, axis=1)]
    conn, dN = gradients_at_node(mesh, cells, cap_node)  # (k, a), (k, a, 2)
    k = len(cells)
    # clockwise theta = -(1/2)(dv/dx - du/dy) = (1/2)(du/dy - dv/dx)
    masters = [2 * conn.ravel(), 2 * conn.ravel() + 1]
    coefs = [0.5 * dN[..., 1].ravel() / k, -0.5 * dN[..., 0].ravel() / k]
    cons.tie([head_dofs[2]], [np.concatenate(masters)], [np.concatenate(coefs)])


def _pile_row(model: Model, name: str, row: Row, xy, L: float, design: Design, soil_at,
              section, soil_nodes=None, divisor: float = 1.0) -> PileRow:
    A, I, perimeter, r0 = section
    piles = design.piles
    f = row.count / L  # piles per metre of slice
    fk = f * (1.0 if soil_nodes is None else piles.slip_stiffening)  # stiffness scale
    dofs = model.dofmap.add_points(name, xy)  # (n, 3)
    edofs = np.concatenate([dofs[:-1], dofs[1:]], axis=1)  # (e, 6)
    e = len(edofs)
    beam = BeamBlock(name, xy, edofs, np.full(e, piles.E * A * f), np.full(e, piles.E * I * f))
    model.add_element_block(beam)
    seg = beam.length
    trib = np.zeros(len(xy))
    trib[:-1] += seg / 2
    trib[1:] += seg / 2
    t = (xy[-1] - xy[0]) / np.hypot(*(xy[-1] - xy[0]))  # head -> tip (down)
    normal = np.array([-t[1], t[0]])
    n_nodes = len(xy)
    depth = -xy[:, 1]
    s = soil_at(depth)
    below_head = np.hypot(*(xy - xy[0]).T)
    f_res = f / divisor  # resistances per metre of slice, divided by a partial factor
    t_lim = shaft_limit(s["undrained"], s["su"], s["phi"], s["sigma_v_eff"], perimeter,
                        piles.alpha, piles.beta) * trib * f_res
    p_lim = lateral_limit(s["undrained"], s["su"], s["phi"], s["sigma_v_eff"], below_head,
                          piles.width, piles.lateral_factor) * trib * f_res
    kt = shaft_stiffness(s["G"], s["nu"], r0, piles.length) * trib * fk
    kp = lateral_stiffness(s["G"]) * trib * fk
    k = np.stack([kt, kp], axis=1)
    lim = np.stack([t_lim, p_lim], axis=1)
    soil_dofs = None if soil_nodes is None else np.stack([2 * soil_nodes, 2 * soil_nodes + 1],
                                                         axis=1)
    springs = SpringBlock(f"{name}_shaft", dofs[:, :2], soil_dofs, np.tile(t, (n_nodes, 1)),
                          np.tile(normal, (n_nodes, 1)), k, -lim, lim, depth)
    model.add_element_block(springs)
    st = {key: v[-1:] for key, v in s.items()}
    qb = tip_limit(st["undrained"], st["su"], st["phi"], st["sigma_v_eff"], A) * f_res
    kb = tip_stiffness(st["G"], st["nu"], r0) * fk
    tip = SpringBlock(f"{name}_tip", dofs[-1:, :2],
                      None if soil_dofs is None else soil_dofs[-1:], t[None], normal[None],
                      np.array([[kb[0], 0.0]]), np.array([[0.0, 0.0]]),
                      np.array([[qb[0], 0.0]]), depth[-1:])
    model.add_element_block(tip)
    return PileRow(row, beam, springs, tip, dofs, (float(xy[0, 0]), float(xy[0, 1])))


def _build_springs(design, rows, L, profile, soil_at, ref_xy, ped_top, meta, section):
    """Rigid cap on rows of beams with springs anchored to fixed ground."""
    piles, cap = design.piles, design.cap
    head_y = -cap.underside_depth
    mesh = Mesh(np.zeros((3, 2)) + [[0, 0], [1, 0], [0, 1]], np.array([[0, 1, 2]]),
                Mesh.of_type("T3"))  # placeholder continuum: three fixed nodes, no block
    model = Model(mesh)
    model.add_reference_point("ref", ref_xy)
    cons = model.constraints()
    cons.fix_nodes(np.arange(3), (0, 1))
    pile_rows = []
    n_el = max(20, int(np.ceil(piles.length / 0.5)))
    for k, row in enumerate(rows, start=1):
        (x0, y0), (x1, y1) = _row_line(row, head_y, piles.length)
        s = np.linspace(0.0, 1.0, n_el + 1)[:, None]
        xy = np.array([x0, y0]) + s * np.array([x1 - x0, y1 - y0])
        pr = _pile_row(model, f"pile_{k}", row, xy, L, design, soil_at, section,
                       divisor=meta["pile_resistance_factor"])
        pile_rows.append(pr)
        cons.tie_points_rigid(pr.beam_dofs[:1], xy[:1], "ref", rotation=piles.head == "fixed")
    meta.update({"cap_weight_kN_per_m": _cap_area(design) * cap.gamma})
    return BuiltModel(design, model, cons, "ref", ref_xy, ped_top, L, pile_rows, profile, meta)


def _cap_area(design: Design) -> float:
    pts, _ = _cap_polygon(design)
    x, y = np.array(pts).T
    return float(0.5 * abs(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1))))
