"""External loads: body forces (gravity) and edge tractions / pressures.

Axisymmetric loads are totals over the full circumference (2*pi*r included), consistent
with :mod:`femcore.kinematics`.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numpy.typing import NDArray

from .assembly import assemble_vector
from .dofs import DofMap
from .kinematics import CellGeometry, Kinematics
from .mesh import Mesh, MeshError
from .quadrature import line_rule

__all__ = ["body_force", "edge_traction", "edge_pressure", "edge_geometry"]

Traction = NDArray[np.float64] | Callable[[NDArray[np.float64]], NDArray[np.float64]]


def body_force(
    dofmap: DofMap, cells: NDArray[np.int64], geom: CellGeometry, b: NDArray[np.float64]
) -> NDArray[np.float64]:
    """Global force of a body force ``b`` (kN/m^3): ``(2,)`` uniform or ``(c, q, 2)``.

    Gravity with unit weight gamma is ``b = (0, -gamma)``.
    """
    b = np.broadcast_to(np.asarray(b, dtype=np.float64), (*geom.dV.shape, 2))  # (c, q, 2)
    f_e = np.einsum("qa,cqd,cq->cad", geom.N, b, geom.dV)  # (c, a, 2)
    return assemble_vector(dofmap.n_dofs, dofmap.cell_dofs(cells), f_e.reshape(len(f_e), -1))


def edge_geometry(mesh: Mesh, edges: NDArray[np.int64], analysis: Kinematics):
    """Quadrature on edges: N (q, a), x (e, q, 2), unit normal (e, q, 2) and weights ds (e, q).

    The normal points out of the mesh for boundary edges (decided from the adjacent cell).
    """
    elem = mesh.line_element
    rule = line_rule(2 * elem.order + 1)
    N = elem.shape(rule.points)  # (q, a)
    dN = elem.shape_gradients(rule.points)[..., 0]  # (q, a)
    X = mesh.points[edges]  # (e, a, 2)
    x = np.einsum("qa,ead->eqd", N, X)  # (e, q, 2)
    t = np.einsum("qa,ead->eqd", dN, X)  # (e, q, 2) dx/dxi
    jac = np.linalg.norm(t, axis=-1)  # (e, q)
    normal = np.stack([t[..., 1], -t[..., 0]], axis=-1) / jac[..., None]  # (e, q, 2)
    # orient outward: away from the centroid of the cell that owns the edge
    centroid = mesh.points[mesh.cells[_owner_cells(mesh, edges), :3]].mean(axis=1)  # (e, 2)
    mid = X[:, :2].mean(axis=1)  # (e, 2)
    sign = np.sign(np.einsum("ed,ed->e", normal[:, 0], mid - centroid))
    normal = normal * sign[:, None, None]
    ds = jac * rule.weights[None, :]  # (e, q)
    if Kinematics(analysis) is Kinematics.AXISYMMETRIC:
        ds = ds * 2.0 * np.pi * x[..., 0]
    return N, x, normal, ds


def _owner_cells(mesh: Mesh, edges: NDArray[np.int64]) -> NDArray[np.int64]:
    """Index of a cell having both end nodes of each edge among its corners."""
    n = mesh.n_nodes
    corners = mesh.cells[:, :3]
    pairs = np.concatenate([corners[:, [0, 1]], corners[:, [1, 2]], corners[:, [2, 0]]])
    owner = np.tile(np.arange(mesh.n_cells), 3)
    keys = np.sort(pairs, axis=1) @ np.array([n, 1])
    order = np.argsort(keys, kind="stable")
    ekeys = np.sort(edges[:, :2], axis=1) @ np.array([n, 1])
    pos = np.searchsorted(keys[order], ekeys)
    pos = np.minimum(pos, keys.size - 1)
    found = keys[order][pos] == ekeys
    if not np.all(found):
        k = int(np.flatnonzero(~found)[0])
        raise MeshError(f"edge {k} (nodes {edges[k, :2].tolist()}) is not an edge of any cell")
    return owner[order][pos]


def edge_traction(
    mesh: Mesh, dofmap: DofMap, edges: NDArray[np.int64], traction: Traction,
    analysis: Kinematics = Kinematics.PLANE_STRAIN,
) -> NDArray[np.float64]:
    """Global force of a traction (kPa) on edges: a vector ``(2,)`` or a function of ``x``."""
    N, x, _normal, ds = edge_geometry(mesh, edges, analysis)
    t = traction(x) if callable(traction) else np.broadcast_to(traction, x.shape)  # (e, q, 2)
    f_e = np.einsum("qa,eqd,eq->ead", N, t, ds)  # (e, a, 2)
    return assemble_vector(dofmap.n_dofs, dofmap.cell_dofs(edges), f_e.reshape(len(f_e), -1))


def edge_pressure(
    mesh: Mesh, dofmap: DofMap, edges: NDArray[np.int64], pressure: float,
    analysis: Kinematics = Kinematics.PLANE_STRAIN,
) -> NDArray[np.float64]:
    """Global force of a normal pressure (kPa, positive pushing into the body) on boundary edges."""
    N, _x, normal, ds = edge_geometry(mesh, edges, analysis)
    f_e = np.einsum("qa,eqd,eq->ead", N, -pressure * normal, ds)  # (e, a, 2)
    return assemble_vector(dofmap.n_dofs, dofmap.cell_dofs(edges), f_e.reshape(len(f_e), -1))
