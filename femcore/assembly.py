"""Vectorized assembly: element arrays by batched einsum/matmul, one cached CSR pattern.

The CSR pattern of the global matrix and the map from every element-matrix entry to its slot
in ``data`` are built once per model (:class:`SparsePattern`); each Newton iteration refills
``data`` with a single ``np.bincount``. Several element blocks (soil, cap, beams, interfaces)
share one pattern.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import scipy.sparse as sp
from numpy.typing import NDArray

from .kinematics import CellGeometry

__all__ = [
    "SparsePattern",
    "assemble_vector",
    "element_stiffness",
    "element_internal_force",
    "element_strain",
]


class SparsePattern:
    """CSR pattern of a global matrix built from blocks of element DOFs.

    Parameters
    ----------
    n_dofs : int
    element_dofs : sequence of ndarray (c_b, i_b)
        Global DOFs of every element of each block.
    """

    def __init__(self, n_dofs: int, element_dofs: Sequence[NDArray[np.int64]]) -> None:
        self.n_dofs = int(n_dofs)
        self.element_dofs = [np.asarray(e, dtype=np.int64) for e in element_dofs]
        rows = np.concatenate([np.repeat(e, e.shape[1], axis=1).ravel() for e in self.element_dofs])
        cols = np.concatenate([np.tile(e, (1, e.shape[1])).ravel() for e in self.element_dofs])
        keys = rows * self.n_dofs + cols  # (n_entries,)
        uniq, inverse = np.unique(keys, return_inverse=True)
        self.scatter = inverse.ravel()  # (n_entries,) slot in data of each element entry
        self.indices = (uniq % self.n_dofs).astype(np.int32)
        counts = np.bincount(uniq // self.n_dofs, minlength=self.n_dofs)
        self.indptr = np.concatenate([[0], np.cumsum(counts)]).astype(np.int32)
        self.nnz = uniq.size

    def assemble(self, element_matrices: Sequence[NDArray[np.float64]]) -> sp.csr_matrix:
        """Global CSR matrix from element matrices ``(c_b, i_b, i_b)`` of every block."""
        values = np.concatenate([np.ravel(k) for k in element_matrices])
        data = np.bincount(self.scatter, weights=values, minlength=self.nnz)
        # the pattern arrays are shared, so downstream caches keyed on them stay valid
        return sp.csr_matrix((data, self.indices, self.indptr),
                             shape=(self.n_dofs, self.n_dofs))


def assemble_vector(
    n_dofs: int, element_dofs: NDArray[np.int64], element_vectors: NDArray[np.float64]
) -> NDArray[np.float64]:
    """Global vector from element vectors ``(c, i)`` at DOFs ``(c, i)``."""
    return np.bincount(
        np.ravel(element_dofs), weights=np.ravel(element_vectors), minlength=n_dofs
    )


def element_stiffness(geom: CellGeometry, D: NDArray[np.float64],
                      cells: NDArray[np.int64] | None = None) -> NDArray[np.float64]:
    """``K_e = sum_q B^T D B dV`` for all cells, ``(c, i, i)``.

    ``D`` is ``(c, q, 4, 4)`` or broadcastable to it (e.g. ``(4, 4)`` for a uniform material).
    Two batched matrix products; the (q, k) axes are contracted in one BLAS call per cell.
    With ``cells``, only those cells (``D`` then holds all cells, or just those).
    """
    rows = geom.active_rows  # (xx, yy, xy) in plane strain: B_zz is zero there
    B, BtdV = geom.B_active, geom.BtdV_active  # (c, q, k', i), (c, i, q*k')
    D = np.asarray(D)
    if cells is not None:
        B, BtdV = B[cells], BtdV[cells]
        if D.ndim == 4 and D.shape[0] == geom.n_cells:
            D = D[cells]
    if rows.size < 4:
        D = D[..., rows[:, None], rows[None, :]]  # (..., k', k')
    DB = np.matmul(D, B)  # (c, q, k', i)
    n_c, n_q, n_k, n_i = B.shape
    return np.matmul(BtdV, DB.reshape(n_c, n_q * n_k, n_i))  # (c, i, i)


def element_internal_force(geom: CellGeometry, stress: NDArray[np.float64]) -> NDArray[np.float64]:
    """``f_e = sum_q B^T sigma dV``, ``(c, i)``: one batched product with the cached
    ``(B dV)^T`` over the non-zero strain rows (sigma_zz does no work in plane strain)."""
    n_c, n_q = geom.dV.shape
    rows = geom.active_rows
    s = stress if rows.size == 4 else stress[:, :, rows]  # (c, q, k')
    return np.matmul(geom.BtdV_active, s.reshape(n_c, n_q * rows.size, 1))[..., 0]


def element_strain(geom: CellGeometry, u_e: NDArray[np.float64]) -> NDArray[np.float64]:
    """Strain at quadrature points from element displacements ``u_e (c, i)`` -> ``(c, q, 4)``."""
    n_c, n_q, n_k, n_i = geom.B.shape
    return np.matmul(geom.B.reshape(n_c, n_q * n_k, n_i), u_e[..., None]).reshape(
        n_c, n_q, n_k)
