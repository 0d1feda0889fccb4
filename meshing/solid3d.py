"""gmsh builders for 3D quadratic tetrahedral meshes of half domains (y >= 0).

These meshes feed the independent 3D reference solutions in :mod:`benchmarks.reference3d`;
they are plain numpy arrays and import nothing from a finite element library.

Axes (3D only): x horizontal in the loading plane, y horizontal out of that plane, **z
vertical up**, ground surface at z = 0 (the project's 2D models use y up instead). The
domains are the half y >= 0 of a body symmetric about the plane y = 0, the symmetry plane
of loading in the x-z plane. Lengths in m.

Node order of a 10-node tetrahedron (``tets``) is gmsh's: vertices 0-3, then the edge
nodes on (0,1), (1,2), (2,0), (3,0), (3,2), (3,1). :data:`GMSH_TO_VTK_TET10` permutes the
columns to the VTK/meshio order (edges (0,1), (1,2), (0,2), (0,3), (1,3), (2,3)), which is
also the edge order of the tetrahedron in scikit-fem. Face sets are 6-node triangles in
gmsh order (vertices, then edges (0,1), (1,2), (2,0)).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import gmsh
import numpy as np
from numpy.typing import NDArray

from .session import gmsh_session

__all__ = ["SolidMesh", "footing_layer", "pile_group", "ring_angles", "GMSH_TO_VTK_TET10"]

GMSH_TO_VTK_TET10 = np.array([0, 1, 2, 3, 4, 5, 6, 7, 9, 8])
_TET10, _TRI6 = 11, 9  # gmsh element type numbers


@dataclass
class SolidMesh:
    """A second-order tetrahedral mesh with named cell, face and node sets.

    Attributes
    ----------
    points : ndarray, shape (n, 3)
        Node coordinates (m); every node belongs to a tetrahedron.
    tets : ndarray, shape (m, 10)
        Zero-based connectivity in gmsh order (see the module docstring).
    cell_sets : dict of str to ndarray
        Indices into ``tets`` per named volume group.
    face_sets : dict of str to ndarray, shape (k, 6)
        Boundary (or interface) triangles per named surface group, node indices.
    node_sets : dict of str to ndarray
        Sorted unique node indices of each face set (vertices and edge nodes).
    info : dict
        Geometry parameters the builder used (m, rad) and derived data, e.g. pile centres.
    """

    points: NDArray
    tets: NDArray
    cell_sets: dict[str, NDArray]
    face_sets: dict[str, NDArray]
    node_sets: dict[str, NDArray] = field(default_factory=dict)
    info: dict = field(default_factory=dict)

    @property
    def n_nodes(self) -> int:
        """Number of nodes."""
        return int(self.points.shape[0])

    def tets_vtk(self) -> NDArray:
        """Connectivity in VTK/meshio (and scikit-fem edge) order, shape (m, 10)."""
        return self.tets[:, GMSH_TO_VTK_TET10]


def ring_angles(n_piles: int, offset: float = 0.0) -> NDArray:
    """Angles theta_k = offset + 2 pi k / N (rad) of N piles on a ring, k = 0..N-1.

    Raises
    ------
    ValueError
        If the layout is not mirror-symmetric about the plane y = 0 (offset must be a
        multiple of pi / N), since the meshes model the half y >= 0 only.
    """
    if n_piles < 1:
        raise ValueError(f"n_piles must be >= 1, got {n_piles}")
    m = offset * n_piles / np.pi
    if abs(m - round(m)) > 1e-9:
        raise ValueError(f"offset {offset!r} rad gives a layout that is not symmetric about "
                         f"y = 0; use a multiple of pi/N = {np.pi / n_piles:.6g}")
    return offset + 2.0 * np.pi * np.arange(n_piles) / n_piles


def _size_threshold(h: float, h_near: float, d_near: float, d_far: float, *,
                    curves: Sequence[int] = (), surfaces: Sequence[int] = (),
                    sampling: int = 60) -> None:
    """Background size h_near within d_near of the entities, growing linearly to h at d_far."""
    dist = gmsh.model.mesh.field.add("Distance")
    if curves:
        gmsh.model.mesh.field.setNumbers(dist, "CurvesList", list(curves))
    if surfaces:
        gmsh.model.mesh.field.setNumbers(dist, "SurfacesList", list(surfaces))
    gmsh.model.mesh.field.setNumber(dist, "Sampling", sampling)
    thr = gmsh.model.mesh.field.add("Threshold")
    gmsh.model.mesh.field.setNumber(thr, "InField", dist)
    gmsh.model.mesh.field.setNumber(thr, "SizeMin", h_near)
    gmsh.model.mesh.field.setNumber(thr, "SizeMax", h)
    gmsh.model.mesh.field.setNumber(thr, "DistMin", d_near)
    gmsh.model.mesh.field.setNumber(thr, "DistMax", d_far)
    gmsh.model.mesh.field.setAsBackgroundMesh(thr)
    gmsh.option.setNumber("Mesh.MeshSizeMax", h)
    gmsh.option.setNumber("Mesh.MeshSizeMin", min(h_near, h) * 0.5)


def _bbox(dim: int, tag: int) -> NDArray:
    return np.array(gmsh.model.getBoundingBox(dim, tag))  # x0 y0 z0 x1 y1 z1


def _extract(info: dict) -> SolidMesh:
    """Mesh (order 2) the current 3D model and read the physical groups into arrays."""
    gmsh.option.setNumber("Mesh.Algorithm3D", 1)  # Delaunay: fast and deterministic
    gmsh.option.setNumber("Mesh.Optimize", 1)
    gmsh.model.mesh.generate(3)
    gmsh.model.mesh.setOrder(2)
    tags, coords, _ = gmsh.model.mesh.getNodes()
    tags = tags.astype(np.int64)
    xyz = coords.reshape(-1, 3)
    lookup = np.full(int(tags.max()) + 1, -1, dtype=np.int64)
    lookup[tags] = np.arange(tags.size)

    blocks: list[NDArray] = []
    seen: dict[int, NDArray] = {}
    n_cells = 0
    cell_sets: dict[str, list[NDArray]] = {}
    face_sets: dict[str, list[NDArray]] = {}
    for dim, ptag in gmsh.model.getPhysicalGroups():
        name = gmsh.model.getPhysicalName(dim, ptag)
        for ent in gmsh.model.getEntitiesForPhysicalGroup(dim, ptag):
            etypes, _, enodes = gmsh.model.mesh.getElements(dim, ent)
            for et, nt in zip(etypes, enodes, strict=True):
                nt = lookup[nt.astype(np.int64)]
                if dim == 3 and et == _TET10:
                    if ent not in seen:
                        conn = nt.reshape(-1, 10)
                        seen[ent] = np.arange(n_cells, n_cells + len(conn))
                        blocks.append(conn)
                        n_cells += len(conn)
                    cell_sets.setdefault(name, []).append(seen[ent])
                elif dim == 2 and et == _TRI6:
                    face_sets.setdefault(name, []).append(nt.reshape(-1, 6))
                else:
                    raise RuntimeError(f"unexpected gmsh element type {et} in group {name!r}")
    tets = np.concatenate(blocks)
    used = np.unique(tets)
    new = np.full(xyz.shape[0], -1, dtype=np.int64)
    new[used] = np.arange(used.size)
    faces = {k: new[np.concatenate(v)] for k, v in face_sets.items()}
    return SolidMesh(
        points=xyz[used].copy(), tets=new[tets],
        cell_sets={k: np.concatenate(v) for k, v in cell_sets.items()},
        face_sets=faces, node_sets={k: np.unique(v) for k, v in faces.items()}, info=info)


def _classify_outer(domain_radius: float, depth: float, tol: float) -> dict[str, list[int]]:
    """Boundary surfaces of the half cylinder: symmetry, top, base and lateral."""
    out: dict[str, list[int]] = {"symmetry": [], "top": [], "base": [], "lateral": [],
                                 "inner": []}
    for _, s in gmsh.model.getEntities(2):
        b = _bbox(2, s)
        if abs(b[1]) < tol and abs(b[4]) < tol:
            out["symmetry"].append(s)
        elif abs(b[2]) < tol and abs(b[5]) < tol:
            out["top"].append(s)
        elif abs(b[2] + depth) < tol and abs(b[5] + depth) < tol:
            out["base"].append(s)
        elif abs(b[3] - domain_radius) < tol and abs(b[0] + domain_radius) < tol and \
                abs(b[4] - domain_radius) < tol:
            out["lateral"].append(s)
        else:
            out["inner"].append(s)
    return out


def _raked_axes(theta: NDArray, centres: NDArray, on_plane: NDArray, length: float,
                rake: float) -> tuple[NDArray, NDArray]:
    """Unit axis directions (N, 3), pointing down, and tip centres (N, 3) of the piles.

    d_k = (s cos theta_k, s sin theta_k, -1) / sqrt(1 + s^2) with the rake s (outward
    positive); piles centred on y = 0 get d_y = 0 exactly (their axis lies in that plane).
    """
    n = np.hypot(1.0, rake)
    axes = np.column_stack([rake * np.cos(theta), rake * np.sin(theta),
                            -np.ones_like(theta)]) / n
    axes[on_plane, 1] = 0.0
    heads = np.column_stack([centres, np.zeros(len(centres))])
    return axes, heads + length * axes


def _segment_distance(p0: NDArray, p1: NDArray, q0: NDArray, q1: NDArray) -> float:
    """Smallest distance between the segments p0-p1 and q0-q1 (3D, non-degenerate)."""
    u, v, w = p1 - p0, q1 - q0, p0 - q0
    a, b, c, d, e = u @ u, u @ v, v @ v, u @ w, v @ w
    den = a * c - b * b
    s = np.clip((b * e - c * d) / den, 0.0, 1.0) if den > 1e-12 * a * c else 0.0
    t = (b * s + e) / c
    if t < 0.0 or t > 1.0:  # clamp t, then recompute s for that end
        t = min(max(t, 0.0), 1.0)
        s = np.clip((b * t - d) / a, 0.0, 1.0)
    return float(np.linalg.norm(w + s * u - t * v))


def _check_raked(centres: NDArray, tips: NDArray, on_plane: NDArray, r0: float,
                 ring_radius: float, domain_radius: float, tol: float) -> None:
    """Geometric checks of raked piles (lateral boundary, overlap, symmetry plane).

    Every point of a pile lies within r0 of its axis segment (head centre to tip centre),
    so axis segments more than 2 r0 apart guarantee piles that do not touch.
    """
    if ring_radius == 0.0:
        raise ValueError("a pile on the ring centre (ring_radius = 0) cannot be raked")
    heads = np.column_stack([centres, np.zeros(len(centres))])
    if np.any(np.hypot(*tips[:, :2].T) + r0 >= domain_radius):
        raise ValueError("raked piles reach the lateral boundary; increase domain_radius")
    n = len(centres)
    for i in range(n):
        for j in range(i + 1, n):
            if _segment_distance(heads[i], tips[i], heads[j], tips[j]) <= 2.0 * r0:
                raise ValueError("raked piles overlap; increase ring_radius or reduce rake")
    yh, yt = centres[:, 1], tips[:, 1]
    off = ~on_plane
    if np.any(off & ((yh * yt <= 0.0) | (np.minimum(abs(yh), abs(yt)) <= r0 + tol))):
        raise ValueError("a raked pile crosses the symmetry plane y = 0 off-centre")


def _raked_pile(centre: NDArray, axis: NDArray, on_plane: bool, r0: float, length: float,
                diameter: float, domain_radius: float, depth: float) -> int:
    """OCC volume of one raked pile: the part below z = 0 (and in y >= 0) of a cylinder.

    The cylinder of radius r0 runs along ``axis`` (unit, pointing down) from a point
    d (1 + |slope|) above the ground (so that its tilted top face, whose rim spans
    +-r0 |slope| / sqrt(1 + slope^2) in z, clears the plane z = 0) to the tip at ``length``
    along the axis below the head centre (x, y, 0). It is
    intersected with the box -R <= x <= R, 0 <= y <= R, -depth <= z <= 0 (R the domain
    radius): the cut by z = 0 makes the head face, the cut by y = 0 halves a pile centred
    on the symmetry plane (off-plane piles lie in y > 0 entirely and are not cut).
    """
    occ = gmsh.model.occ
    x, y = centre
    head = np.array([x, 0.0 if on_plane else y, 0.0])
    above = diameter * np.hypot(axis[0], axis[1]) / abs(axis[2]) + diameter
    t0 = above / abs(axis[2])  # axis length from the start point down to the head centre
    start = head - t0 * axis
    cyl = occ.addCylinder(*start, *((t0 + length) * axis), r0)
    box = occ.addBox(-domain_radius, 0.0, -depth, 2.0 * domain_radius, domain_radius, depth)
    out, _ = occ.intersect([(3, cyl)], [(3, box)], removeObject=True, removeTool=True)
    vols = [t for d, t in out if d == 3]
    if len(vols) != 1:
        raise RuntimeError(f"raked pile at ({x:g}, {y:g}): intersection gave {len(vols)} "
                           "volumes, expected 1")
    return vols[0]


def footing_layer(radius: float, depth: float, domain_radius: float, h_near: float,
                  h_far: float, refine_distance: float | None = None) -> SolidMesh:
    """Half cylinder y >= 0 of radius ``domain_radius`` and depth ``depth`` (z in [-depth, 0])
    with a circular footing of radius ``radius`` centred at the origin of the surface z = 0.

    Parameters
    ----------
    radius : float
        Footing radius R (m).
    depth : float
        Layer depth H (m), the base z = -H.
    domain_radius : float
        Radius of the lateral boundary (m), > radius.
    h_near : float
        Element size (m) at the footing edge (the circle r = R, z = 0).
    h_far : float
        Element size (m) far from it.
    refine_distance : float, optional
        Distance (m) over which the size grows from ``h_near`` to ``h_far``; default
        3 ``h_far``.

    Returns
    -------
    SolidMesh
        Cell set ``soil``; face/node sets ``footing`` (z = 0, r <= R), ``ground`` (z = 0,
        r > R), ``base`` (z = -H), ``lateral`` (r = domain_radius), ``symmetry`` (y = 0).
    """
    if not 0 < radius < domain_radius:
        raise ValueError(f"need 0 < radius < domain_radius, got {radius}, {domain_radius}")
    tol = 1e-6 * max(domain_radius, depth)
    with gmsh_session("footing_layer"):
        occ = gmsh.model.occ
        body = occ.addCylinder(0, 0, -depth, 0, 0, depth, domain_radius, angle=np.pi)
        disk = occ.addCylinder(0, 0, -depth, 0, 0, depth, radius, angle=np.pi)
        occ.fragment([(3, body)], [(3, disk)])
        occ.synchronize()
        groups = _classify_outer(domain_radius, depth, tol)
        foot, ground = [], []
        for s in groups["top"]:
            b = _bbox(2, s)
            (foot if max(abs(b[0]), abs(b[3]), abs(b[4])) <= radius + tol else ground).append(s)
        edge = []
        for _, c in gmsh.model.getEntities(1):
            b = _bbox(1, c)
            if abs(b[2]) < tol and abs(b[5]) < tol and abs(b[4] - radius) < tol \
                    and abs(b[1]) < tol:
                edge.append(c)
        gmsh.model.addPhysicalGroup(3, [v for _, v in gmsh.model.getEntities(3)], name="soil")
        for name, tags in (("footing", foot), ("ground", ground), ("base", groups["base"]),
                           ("lateral", groups["lateral"]), ("symmetry", groups["symmetry"])):
            gmsh.model.addPhysicalGroup(2, tags, name=name)
        d_far = 3.0 * h_far if refine_distance is None else refine_distance
        _size_threshold(h_far, h_near, 0.0, d_far, curves=edge)
        return _extract({"radius": radius, "depth": depth, "domain_radius": domain_radius,
                         "h_near": h_near, "h_far": h_far})


def pile_group(n_piles: int, ring_radius: float, diameter: float, length: float,
               domain_radius: float, depth: float, h_pile: float, h_far: float,
               offset: float = 0.0, refine_distance: float | None = None,
               rake: float = 0.0) -> SolidMesh:
    """Half cylinder y >= 0 of soil with N vertical circular piles, heads at z = 0.

    With ``rake`` != 0 the piles are raked in their radial planes (see ``rake`` below).

    The piles (circular cross-section of diameter d) stand at (Rr cos theta_k, Rr sin
    theta_k), theta_k = offset + 2 pi k / N (:func:`ring_angles`); ``n_piles = 1`` with
    ``ring_radius = 0`` is a single pile on the axis. A pile centred on y = 0 is cut in half
    by the symmetry plane; piles with y < 0 are the mirror images and are not meshed.

    Parameters
    ----------
    n_piles : int
        Number of piles N in the full group.
    ring_radius : float
        Ring radius Rr (m) of the pile axes.
    diameter : float
        Pile diameter d (m).
    length : float
        Pile length Lp (m); tips at z = -Lp.
    domain_radius, depth : float
        Soil cylinder radius and depth (m); rigid base at z = -depth > -Lp.
    h_pile : float
        Element size (m) on the pile surfaces.
    h_far : float
        Element size (m) far from the piles.
    offset : float, default 0
        Angle offset (rad); must be a multiple of pi / N (layout symmetric about y = 0).
    refine_distance : float, optional
        Distance (m) from the pile surfaces over which the size grows to ``h_far``;
        default 3 ``h_far``.
    rake : float, default 0
        Rake s of every pile, horizontal per vertical, positive outward (away from the ring
        centre along theta_k). Pile k keeps its head centre (Rr cos theta_k, Rr sin theta_k,
        0) and its length Lp along the axis d_k = (s cos theta_k, s sin theta_k, -1) /
        sqrt(1 + s^2), so its tip centre lies at depth Lp / sqrt(1 + s^2); the cross-section
        is circular perpendicular to the axis, the head face is the (elliptic) section of
        the cylinder by the ground plane z = 0 and the tip face is perpendicular to the
        axis. 0 gives the vertical piles (the same construction as before); a single pile
        on the axis (``ring_radius = 0``) must have rake 0; |rake| <= 1 (meshes checked
        for N = 2-12, rakes -1/8 to 1, h_pile 0.5-1.0 d). Negative (inward) rakes are
        accepted if the piles do not touch.

    Returns
    -------
    SolidMesh
        Cell sets ``soil``, ``piles`` and ``pile_<k>``; face/node sets ``pile_heads`` (all
        head faces), ``head_<k>``, ``ground`` (z = 0 outside the piles), ``base``,
        ``lateral``, ``symmetry``. ``info["centres"]`` (N, 2) holds all N axis positions (m),
        ``info["meshed"]`` the indices k of the meshed piles and ``info["weight"]`` their
        share in the half model (0.5 when cut by y = 0, else 1); ``info["rake"]``,
        ``info["axes"]`` (N, 3) unit axis directions (pointing down) and ``info["tips"]``
        (N, 3) tip centres (m).
    """
    r0 = 0.5 * diameter
    if depth <= length:
        raise ValueError(f"depth {depth} must exceed the pile length {length}")
    if not abs(rake) <= 1.0:  # also rejects nan
        raise ValueError(f"rake {rake!r} outside [-1, 1] (45 degrees), the range meshed")
    theta = ring_angles(n_piles, offset)
    centres = ring_radius * np.column_stack([np.cos(theta), np.sin(theta)])  # (N, 2)
    if np.any(np.hypot(*centres.T) + r0 >= domain_radius):
        raise ValueError("piles reach the lateral boundary; increase domain_radius")
    if n_piles > 1:
        gap = np.hypot(*(centres[:, None] - centres[None]).transpose(2, 0, 1))
        if np.min(gap + 1e3 * np.eye(n_piles) * diameter) <= diameter:
            raise ValueError("piles overlap; increase ring_radius")
    tol = 1e-6 * max(domain_radius, depth)
    on_plane = np.abs(centres[:, 1]) < tol
    if np.any(~on_plane & (np.abs(centres[:, 1]) <= r0 + tol)):
        raise ValueError("a pile crosses the symmetry plane y = 0 off-centre")
    meshed = np.flatnonzero(on_plane | (centres[:, 1] > 0))
    weight = np.where(on_plane[meshed], 0.5, 1.0)
    axes, tips = _raked_axes(theta, centres, on_plane, length, rake)
    if rake != 0.0:
        _check_raked(centres, tips, on_plane, r0, ring_radius, domain_radius, tol)
    with gmsh_session("pile_group"):
        occ = gmsh.model.occ
        body = occ.addCylinder(0, 0, -depth, 0, 0, depth, domain_radius, angle=np.pi)
        piles = []
        if rake == 0.0:
            for k in meshed:
                x, y = centres[k]
                if on_plane[k]:  # half cylinder y >= 0 about the axis
                    piles.append(occ.addCylinder(x, y, -length, 0, 0, length, r0,
                                                 angle=np.pi))
                else:
                    piles.append(occ.addCylinder(x, y, -length, 0, 0, length, r0))
        else:
            for k in meshed:
                piles.append(_raked_pile(centres[k], axes[k], on_plane[k], r0, length,
                                         diameter, domain_radius, depth))
        _, out_map = occ.fragment([(3, body)], [(3, p) for p in piles])
        occ.synchronize()
        pile_vols = [[t for d, t in out_map[1 + i] if d == 3] for i in range(len(piles))]
        pile_set = {t for vs in pile_vols for t in vs}
        soil = [t for _, t in gmsh.model.getEntities(3) if t not in pile_set]
        groups = _classify_outer(domain_radius, depth, tol)
        heads_by_pile, pile_surfs = [], []
        for vs in pile_vols:
            bnd = [s for _, s in gmsh.model.getBoundary([(3, v) for v in vs], oriented=False)]
            heads = [s for s in bnd if abs(_bbox(2, s)[2]) < tol and abs(_bbox(2, s)[5]) < tol]
            heads_by_pile.append(heads)
            pile_surfs += [s for s in bnd if s not in groups["symmetry"]]
        all_heads = [s for h in heads_by_pile for s in h]
        if rake != 0.0:
            # Frontal-Delaunay can leave the curved face of a tilted half pile with triangles
            # spanning its two straight edges (flat, on top of the symmetry face) when
            # h_pile ~ d; the adaptive 2D algorithm meshes these faces reliably.
            for surf in sorted(set(pile_surfs) - set(all_heads)):
                if gmsh.model.getType(2, surf) == "Cylinder":
                    gmsh.model.mesh.setAlgorithm(2, surf, 1)
        ground = [s for s in groups["top"] if s not in all_heads]
        gmsh.model.addPhysicalGroup(3, soil, name="soil")
        gmsh.model.addPhysicalGroup(3, sorted(pile_set), name="piles")
        for k, vs in zip(meshed, pile_vols, strict=True):
            gmsh.model.addPhysicalGroup(3, vs, name=f"pile_{k}")
        gmsh.model.addPhysicalGroup(2, all_heads, name="pile_heads")
        for k, hs in zip(meshed, heads_by_pile, strict=True):
            gmsh.model.addPhysicalGroup(2, hs, name=f"head_{k}")
        for name, tags in (("ground", ground), ("base", groups["base"]),
                           ("lateral", groups["lateral"]), ("symmetry", groups["symmetry"])):
            gmsh.model.addPhysicalGroup(2, tags, name=name)
        d_far = 3.0 * h_far if refine_distance is None else refine_distance
        _size_threshold(h_far, h_pile, 0.0, d_far, surfaces=sorted(set(pile_surfs)))
        return _extract({"n_piles": n_piles, "ring_radius": ring_radius, "diameter": diameter,
                         "length": length, "domain_radius": domain_radius, "depth": depth,
                         "h_pile": h_pile, "h_far": h_far, "offset": offset,
                         "theta": theta, "centres": centres, "meshed": meshed,
                         "weight": weight, "rake": rake, "axes": axes, "tips": tips})
