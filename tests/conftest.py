"""Shared helpers for the tests (plain functions; import them with ``from conftest import``)."""

import numpy as np

from femcore.mesh import Mesh


def straight_sided(mesh: Mesh, vertex_points: np.ndarray) -> Mesh:
    """Move the vertices to ``vertex_points`` and put every high-order node back on the
    straight-sided (affine) image of its reference position."""
    elem = mesh.element
    pts = mesh.points.copy()
    corner = mesh.cells[:, :3]
    verts = np.unique(corner)
    pts[verts] = vertex_points[verts]
    lam = np.column_stack([1 - elem.nodes.sum(axis=1), elem.nodes])  # (a, 3) barycentric
    X = pts[corner]  # (c, 3, 2)
    pos = np.einsum("av,cvd->cad", lam, X)  # (c, a, 2)
    pts[mesh.cells.ravel()] = pos.reshape(-1, 2)
    return Mesh(pts, mesh.cells, elem, mesh.cell_sets, mesh.edge_sets, mesh.node_sets)


def distort(mesh: Mesh, amount: float, seed: int = 1, fixed: np.ndarray | None = None) -> Mesh:
    """Randomly move interior vertices by up to ``amount`` x local size; straight sides kept."""
    rng = np.random.default_rng(seed)
    boundary = np.unique(np.concatenate([e[:, :2].ravel() for e in mesh.edge_sets.values()]))
    h = mesh.h_mean()
    new = mesh.points + rng.uniform(-amount * h, amount * h, mesh.points.shape)
    keep = np.zeros(mesh.n_nodes, bool)
    keep[boundary] = True
    if fixed is not None:
        keep[fixed] = True
    new[keep] = mesh.points[keep]
    return straight_sided(mesh, new)


def nodal(u: np.ndarray, mesh: Mesh) -> np.ndarray:
    """Node displacements (n_nodes, 2) from a full DOF vector."""
    return u[: 2 * mesh.n_nodes].reshape(-1, 2)
