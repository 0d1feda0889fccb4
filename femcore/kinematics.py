"""Strain-displacement matrices and volume weights for plane strain and axisymmetry.

Strain rows (engineering shear): ``[eps_xx, eps_yy, eps_zz, gamma_xy]``. In plane strain
eps_zz = 0; in axisymmetry x is the radius r and row 2 is the hoop strain u_r / r. The material
always sees these four components, so no material branches on the analysis type.

Axisymmetric volume weights include the full circumference 2*pi*r, so forces and stiffnesses
are totals over the whole ring (not per radian).
"""

from __future__ import annotations

import enum
from dataclasses import dataclass
from functools import cached_property

import numpy as np
from numpy.typing import NDArray

from .elements import ReferenceElement
from .mesh import Mesh, MeshError
from .quadrature import QuadratureRule, triangle_rule

__all__ = ["Kinematics", "CellGeometry", "cell_geometry", "default_rule", "isoparametric_map",
           "gradients_at_node"]


class Kinematics(str, enum.Enum):
    """Kinematic assumption of the 2D model."""

    PLANE_STRAIN = "plane_strain"
    AXISYMMETRIC = "axisymmetric"


def default_rule(element: ReferenceElement) -> QuadratureRule:
    """Degree-2p rule: exact stiffness on straight-sided cells (T3: 3 points, T6: 6, T15: 16)."""
    return triangle_rule(max(2 * element.order, 2))


@dataclass(frozen=True, eq=False)
class CellGeometry:
    """Quadrature-point geometry of a block of cells.

    Attributes
    ----------
    B : ndarray (c, q, 4, 2 * n_en)
        Strain-displacement matrix; local DOFs interleaved (u_x, u_y) per node.
    dV : ndarray (c, q)
        Integration weight times Jacobian determinant (times 2*pi*r in axisymmetry), m^3 per m
        (plane strain) or m^3 (axisymmetric).
    x : ndarray (c, q, 2)
        Physical coordinates of the quadrature points.
    N : ndarray (q, n_en)
        Shape functions at the quadrature points.
    """

    B: NDArray[np.float64]
    dV: NDArray[np.float64]
    x: NDArray[np.float64]
    N: NDArray[np.float64]

    @property
    def n_cells(self) -> int:
        return self.dV.shape[0]

    @cached_property
    def active_rows(self) -> NDArray[np.int64]:
        """Strain rows that are not identically zero: (xx, yy, xy) in plane strain, all four in
        axisymmetry. The tangent needs only these (a quarter fewer operations in plane
        strain)."""
        return np.flatnonzero(np.any(self.B != 0.0, axis=(0, 1, 3)))

    @cached_property
    def B_active(self) -> NDArray[np.float64]:
        """``B`` restricted to :attr:`active_rows`, ``(c, q, k', i)``, contiguous."""
        return np.ascontiguousarray(self.B[:, :, self.active_rows, :])

    @cached_property
    def BtdV_active(self) -> NDArray[np.float64]:
        """``(B dV)^T`` over the active rows, ``(c, i, q*k')``, contiguous; cached for the
        internal force and the tangent."""
        Ba = self.B_active
        n_c, n_q, n_k, n_i = Ba.shape
        BW = (Ba * self.dV[:, :, None, None]).reshape(n_c, n_q * n_k, n_i)
        return np.ascontiguousarray(BW.transpose(0, 2, 1))

    @property
    def n_qp(self) -> int:
        return self.dV.shape[1]


def isoparametric_map(mesh: Mesh, rule: QuadratureRule, cells: NDArray[np.int64] | None = None):
    """The isoparametric map of ``cells`` (default: all) at the points of ``rule``.

    Returns ``N (q, a)``, the physical gradients ``dN (c, q, a, 2)``, the points
    ``x (c, q, 2)`` and ``det J (c, q)``; raises :class:`MeshError` naming the first cell with
    a non-positive Jacobian (inverted or too distorted).
    """
    element = mesh.element
    conn = mesh.cells if cells is None else mesh.cells[np.asarray(cells, dtype=np.int64)]
    X = mesh.points[conn]  # (c, a, 2)
    N = element.shape(rule.points)  # (q, a)
    dN_ref = element.shape_gradients(rule.points)  # (q, a, 2)
    J = np.einsum("cad,qae->cqde", X, dN_ref)  # (c, q, 2, 2)  dx_d / dxi_e
    detJ = J[..., 0, 0] * J[..., 1, 1] - J[..., 0, 1] * J[..., 1, 0]  # (c, q)
    if np.any(detJ <= 0.0):
        k = int(np.flatnonzero((detJ <= 0.0).any(axis=1))[0])
        cell_id = k if cells is None else int(np.asarray(cells)[k])
        raise MeshError(
            f"cell {cell_id} has a non-positive Jacobian at a quadrature point "
            f"(min det J = {detJ[k].min():.3e}); it is inverted or too distorted"
        )
    inv_detJ = 1.0 / detJ  # (c, q)
    invJ = np.empty_like(J)  # (c, q, 2, 2)  dxi_e / dx_d
    invJ[..., 0, 0] = J[..., 1, 1] * inv_detJ
    invJ[..., 1, 1] = J[..., 0, 0] * inv_detJ
    invJ[..., 0, 1] = -J[..., 0, 1] * inv_detJ
    invJ[..., 1, 0] = -J[..., 1, 0] * inv_detJ
    dN = np.einsum("qae,cqed->cqad", dN_ref, invJ)  # (c, q, a, 2)
    x = np.einsum("qa,cad->cqd", N, X)  # (c, q, 2)
    return N, dN, x, detJ


def cell_geometry(
    mesh: Mesh,
    analysis: Kinematics = Kinematics.PLANE_STRAIN,
    rule: QuadratureRule | None = None,
    cells: NDArray[np.int64] | None = None,
) -> CellGeometry:
    """B matrices, volume weights and point coordinates for ``cells`` (default: all)."""
    analysis = Kinematics(analysis)
    element = mesh.element
    rule = rule or default_rule(element)
    N, dN, x_qp, detJ = isoparametric_map(mesh, rule, cells)
    n_c, n_q, n_a = dN.shape[:3]
    B = np.zeros((n_c, n_q, 4, 2 * n_a))  # (c, q, 4, i)
    B[:, :, 0, 0::2] = dN[..., 0]
    B[:, :, 1, 1::2] = dN[..., 1]
    B[:, :, 3, 0::2] = dN[..., 1]
    B[:, :, 3, 1::2] = dN[..., 0]
    dV = detJ * rule.weights[None, :]  # (c, q)
    if analysis is Kinematics.AXISYMMETRIC:
        r = x_qp[..., 0]  # (c, q)
        if np.any(r <= 0.0):
            k = int(np.flatnonzero((r <= 0.0).any(axis=1))[0])
            raise MeshError(
                f"axisymmetric model has a quadrature point at radius {r[k].min():.3e} m in "
                f"cell {k}; the mesh must lie in x >= 0 (x is the radius)"
            )
        B[:, :, 2, 0::2] = N[None, :, :] / r[..., None]
        dV = dV * (2.0 * np.pi * r)
    return CellGeometry(B=B, dV=dV, x=x_qp, N=N)


def gradients_at_node(mesh: Mesh, cells: NDArray[np.int64], node: int):
    """Physical shape-function gradients of ``cells`` (all containing ``node``) evaluated
    at that node: connectivities ``(k, a)`` and ``dN (k, a, 2)`` (local rotations and
    strains at a node, e.g. where a pile head meets the cap)."""
    element = mesh.element
    conn = mesh.cells[np.asarray(cells, dtype=np.int64)]  # (k, a)
    local = np.argmax(conn == node, axis=1)  # (k,)
    dN_ref = element.shape_gradients(element.nodes[local])  # (k, a, 2)
    J = np.einsum("kad,kae->kde", mesh.points[conn], dN_ref)  # (k, 2, 2)
    return conn, np.einsum("kae,ked->kad", dN_ref, np.linalg.inv(J))  # (k, a, 2)
