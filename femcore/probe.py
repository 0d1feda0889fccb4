"""Evaluate the solution at arbitrary points: locate the cell, invert the map, interpolate."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from .kinematics import Kinematics
from .mesh import Mesh

__all__ = ["locate", "displacement_at", "strain_at"]


def locate(mesh: Mesh, points: NDArray[np.float64], tol: float = 1e-10):
    """Cell index ``(n,)`` and reference coordinates ``(n, 2)`` of each point.

    Uses the affine map of each cell's corners, then Newton on the isoparametric map so curved
    cells are handled. Points outside the mesh raise ValueError. Cost O(n_points * n_cells)
    in memory-bounded chunks: for probing, not for hot loops.
    """
    pts = np.atleast_2d(np.asarray(points, dtype=np.float64))
    X = mesh.points[mesh.cells[:, :3]]  # (c, 3, 2)
    A = np.stack([X[:, 1] - X[:, 0], X[:, 2] - X[:, 0]], axis=-1)  # (c, 2, 2)
    Ainv = np.linalg.inv(A)
    cell = np.empty(len(pts), dtype=np.int64)
    xi = np.empty((len(pts), 2))
    for start in range(0, len(pts), 64):  # chunks of points (not a loop over cells)
        p = pts[start:start + 64]
        loc = np.einsum("cde,pce->pcd", Ainv, p[:, None, :] - X[None, :, 0])  # (p, c, 2)
        inside = np.minimum(loc.min(axis=-1), 1.0 - loc.sum(axis=-1))  # (p, c) >= 0 inside
        best = inside.argmax(axis=1)
        if np.any(inside[np.arange(len(p)), best] < -1e-6):
            k = int(np.flatnonzero(inside[np.arange(len(p)), best] < -1e-6)[0])
            raise ValueError(f"point {p[k].tolist()} lies outside the mesh")
        cell[start:start + len(p)] = best
        xi[start:start + len(p)] = loc[np.arange(len(p)), best]
    elem = mesh.element
    Xc = mesh.points[mesh.cells[cell]]  # (n, a, 2)
    for _ in range(20):  # Newton on x(xi) = p for curved cells
        N = elem.shape(xi)
        dN = elem.shape_gradients(xi)
        r = np.einsum("na,nad->nd", N, Xc) - pts
        if np.abs(r).max() < tol * max(1.0, np.abs(pts).max()):
            break
        J = np.einsum("nad,nae->nde", Xc, dN)
        xi = xi - np.linalg.solve(J, r[..., None])[..., 0]
    return cell, xi


def displacement_at(mesh: Mesh, u: NDArray[np.float64], points) -> NDArray[np.float64]:
    """Interpolated displacement ``(n, 2)``; ``u`` is the full DOF vector."""
    cell, xi = locate(mesh, points)
    N = mesh.element.shape(xi)  # (n, a)
    U = u[: 2 * mesh.n_nodes].reshape(-1, 2)[mesh.cells[cell]]  # (n, a, 2)
    return np.einsum("na,nad->nd", N, U)


def strain_at(mesh: Mesh, analysis: Kinematics, u: NDArray[np.float64], points):
    """Strain ``(n, 4)`` [xx, yy, zz|thetatheta, xy] at points."""
    pts = np.atleast_2d(np.asarray(points, dtype=np.float64))
    cell, xi = locate(mesh, pts)
    elem = mesh.element
    Xc = mesh.points[mesh.cells[cell]]  # (n, a, 2)
    N = elem.shape(xi)  # (n, a)
    dN_ref = elem.shape_gradients(xi)  # (n, a, 2)
    J = np.einsum("nad,nae->nde", Xc, dN_ref)  # (n, 2, 2)
    dN = np.einsum("nae,ned->nad", dN_ref, np.linalg.inv(J))  # (n, a, 2)
    U = u[: 2 * mesh.n_nodes].reshape(-1, 2)[mesh.cells[cell]]  # (n, a, 2)
    grad = np.einsum("nad,nae->nde", U, dN)  # (n, 2, 2) du_d/dx_e
    eps = np.zeros((len(pts), 4))
    eps[:, 0] = grad[:, 0, 0]
    eps[:, 1] = grad[:, 1, 1]
    eps[:, 3] = grad[:, 0, 1] + grad[:, 1, 0]
    if Kinematics(analysis) is Kinematics.AXISYMMETRIC:
        eps[:, 2] = np.einsum("na,na->n", N, U[..., 0]) / pts[:, 0]
    return eps
