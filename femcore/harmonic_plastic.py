"""Mohr-Coulomb soil in the harmonic model: stresses on circumferential planes, coupled
harmonics.

The soil's strain amplitudes of every harmonic are synthesised on the planes of a
:class:`~femcore.harmonic_planes.CircumferentialPlanes` at every quadrature point, the
six-component return map (:func:`materials.mohr_coulomb.mohr_coulomb_update_3d`) runs on
each plane, and the stresses and consistent tangents are projected back::

    f_n   = c-weighted  sum_q B_n^T s_n dV              s_n  = sum_k w_k T_n sigma_k
    K_nm  = sum_q B_n^T D_nm B_m dV                      D_nm = sum_k w_k T_n C_k T_m

(the harmonic factors are inside the plane weights). Elastic everywhere, K_nm is the
block-diagonal harmonic stiffness (``delta_nm c_n B^T D B dV``); where the soil yields on some
planes only, the blocks between harmonics appear (unsymmetric for non-associated flow).

The state is per plane and quadrature point: the stress ``(m, c, q, 6)`` and the total strain
``(m, c, q, 6)`` of the last converged increment (the initial K0 stress is the starting stress,
the same on every plane).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import scipy.sparse as sp
from numpy.typing import NDArray

from materials.mohr_coulomb import mohr_coulomb_update_3d

from .harmonic import HarmonicGeometry, RingGeometry, elastic_matrix_3d, harmonic_factor
from .harmonic_planes import CircumferentialPlanes

__all__ = ["PlaneState", "HarmonicMohrCoulomb", "assemble_coupled", "assemble_forces",
           "solve_displacement_step", "HarmonicStepError"]


@dataclass
class PlaneState:
    """Stress and total strain on every plane and quadrature point, ``(m, c, q, 6)``
    each (stress kPa with tensor shear, strain with engineering shear)."""

    stress: NDArray[np.float64]
    strain: NDArray[np.float64]
    yielded: NDArray[np.bool_]  # (m, c, q)


@dataclass(eq=False)
class HarmonicMohrCoulomb:
    """Cells of one Mohr-Coulomb material (Tresca: phi = psi = 0) in a harmonic model.

    ``E``, ``nu``, ``cohesion`` and ``cutoff`` (tension cut-off, None for none) are per
    quadrature point ``(c, q)``; the angles are one per block, in degrees.
    """

    ring: RingGeometry
    element_dofs: NDArray[np.int64]  # (c, i)
    planes: CircumferentialPlanes
    E: NDArray[np.float64]
    nu: NDArray[np.float64]
    cohesion: NDArray[np.float64]
    phi: float = 0.0
    psi: float = 0.0
    cutoff: NDArray[np.float64] | None = None
    _geoms: dict = field(default_factory=dict, init=False, repr=False)

    def geometry(self, n: int) -> HarmonicGeometry:
        if n not in self._geoms:
            self._geoms[n] = self.ring.harmonic(n)
        return self._geoms[n]

    @cached_property
    def D(self) -> NDArray[np.float64]:
        return elastic_matrix_3d(self.E, self.nu)  # (c, q, 6, 6)

    def initial_state(self, stress0: NDArray[np.float64] | None = None) -> PlaneState:
        """The state of an initial stress ``(c, q, 6)`` (the n = 0 field, e.g. K0; default
        none) on every plane, with zero strain."""
        if stress0 is None:
            stress0 = np.zeros((*self.E.shape, 6))
        m = self.planes.n_planes
        s = np.broadcast_to(np.asarray(stress0, dtype=np.float64),
                            (m, *self.E.shape, 6)).copy()
        return PlaneState(s, np.zeros_like(s), np.zeros((m, *self.E.shape), dtype=bool))

    def strain_amplitudes(self, u: NDArray[np.float64]) -> NDArray[np.float64]:
        """``(h, c, q, 6)`` from the amplitude vectors ``u (h, n_dofs)`` of the harmonics."""
        return self._strains(u[:, self.element_dofs])

    def _strains(self, u_e: NDArray[np.float64]) -> NDArray[np.float64]:
        return np.stack([self.geometry(n).strain(u_e[a])
                         for a, n in enumerate(self.planes.harmonics)])

    def elastic_blocks(self) -> NDArray[np.float64]:
        """``c_n B_n^T D B_n dV`` per harmonic, ``(h, c, i, i)`` (computed once): the tangent
        of cells without a yielded point on any plane."""
        if "_elastic" not in self._geoms:
            D = self.D
            D0 = D.copy()  # n = 0: the sin family (torsion, V_0) is not on the planes
            D0[..., 4:, :] = D0[..., :, 4:] = 0.0
            self._geoms["_elastic"] = np.stack([
                harmonic_factor(n) * self.geometry(n).stiffness(D0 if n == 0 else D)
                for n in self.planes.harmonics])
        return self._geoms["_elastic"]

    def evaluate(self, u_e: NDArray[np.float64], state: PlaneState, tangent: bool = True):
        """Element forces ``(h, c, i)`` for element amplitudes ``u_e (h, c, i)`` from the
        converged ``state``, the tangent as a function returning ``(diagonal (h, c, i, i),
        plastic cells (p,), their full blocks (h, h, p, i, i))`` (built only when called:
        quasi-Newton iterations need no tangent; None when ``tangent`` is False) and the new
        :class:`PlaneState`. Cells without a yielded point keep the block-diagonal elastic
        tangent; only the others are integrated again and couple the harmonics."""
        pl = self.planes
        m = pl.n_planes
        eps = pl.to_planes(self._strains(u_e))  # (m, c, q, 6)
        D = self.D  # (c, q, 6, 6)
        trial = state.stress + np.matmul(D[None], (eps - state.strain)[..., None])[..., 0]
        shape = trial.shape
        n_pts = int(np.prod(shape[:-1]))
        G = np.broadcast_to(self.E / (2.0 * (1.0 + self.nu)), shape[:-1]).reshape(-1)
        K = np.broadcast_to(self.E / (3.0 * (1.0 - 2.0 * self.nu)), shape[:-1]).reshape(-1)
        c = np.broadcast_to(self.cohesion, shape[:-1]).reshape(-1)
        t = None if self.cutoff is None else \
            np.broadcast_to(self.cutoff, shape[:-1]).reshape(-1)
        sp_, ss = np.sin(np.radians(self.phi)), np.sin(np.radians(self.psi))
        stress, yielded, _, C_p = mohr_coulomb_update_3d(
            trial.reshape(n_pts, 6), G, K, c, sp_, ss, np.cos(np.radians(self.phi)), t, None)
        stress = stress.reshape(shape)
        yielded = yielded.reshape(shape[:-1])  # (m, c, q)
        s_amp = pl.to_harmonics(stress)  # (h, c, q, 6)
        f = np.stack([self.geometry(n).internal_force(s_amp[a])
                      for a, n in enumerate(pl.harmonics)])  # (h, c, i)
        new = PlaneState(stress, eps, yielded)
        if not tangent:
            return f, None, new

        def blocks():
            plastic = np.flatnonzero(yielded.any(axis=(0, 2)))  # (p,)
            diag = self.elastic_blocks().copy()  # (h, c, i, i)
            h = len(pl.harmonics)
            if not plastic.size:
                return diag, plastic, np.zeros((h, h, 0, *diag.shape[2:]))
            Cc = np.broadcast_to(D[plastic], (m, *D[plastic].shape)).copy()  # (m, p, q, 6, 6)
            k, cell, qq = np.nonzero(yielded)  # the order of np.flatnonzero(yielded)
            pos = np.full(shape[1], -1)
            pos[plastic] = np.arange(plastic.size)
            Cc[k, pos[cell], qq] = C_p
            Kp = self._coupled_blocks(Cc, plastic)
            diag[:, plastic] = Kp[np.arange(h), np.arange(h)]
            return diag, plastic, Kp

        return f, blocks, new

    def _coupled_blocks(self, C: NDArray[np.float64], cells: NDArray[np.int64]):
        """``B_n^T D_nm B_m dV`` of ``cells`` from plane tangents ``C (m, p, q, 6, 6)``,
        ``(h, h, p, i, i)``."""
        pl = self.planes
        h = len(pl.harmonics)
        Dnm = pl.coupled_tangent(C)  # (h, h, p, q, 6, 6)
        n_i = self.element_dofs.shape[1]
        Kb = np.empty((h, h, cells.size, n_i, n_i))
        for a, n in enumerate(pl.harmonics):  # h^2 blocks (harmonic pairs, not elements)
            BtdV = self.geometry(n).BtdV[cells]
            for b, k in enumerate(pl.harmonics):
                Bb = self.geometry(k).B[cells]  # (p, q, 6, i)
                DB = np.matmul(Dnm[a, b], Bb)  # (p, q, 6, i)
                n_c, n_q, n_k, _ = Bb.shape
                Kb[a, b] = np.matmul(BtdV, DB.reshape(n_c, n_q * n_k, n_i))
        return Kb

    def response(self, u: NDArray[np.float64], state: PlaneState):
        """Internal forces ``(h, c, i)``, tangent blocks ``(h, h, c, i, i)`` of every cell and
        the new :class:`PlaneState` for total amplitudes ``u (h, n_dofs)`` from the
        converged ``state``."""
        f, blocks, new = self.evaluate(u[:, self.element_dofs], state)
        diag, plastic, Kp = blocks()
        h = diag.shape[0]
        Kb = np.zeros((h, h, *diag.shape[1:]))
        Kb[np.arange(h), np.arange(h)] = diag
        Kb[:, :, plastic] = Kp
        return f, Kb, new


def assemble_coupled(Kb: NDArray[np.float64], element_dofs: NDArray[np.int64],
                     n_dofs: int) -> sp.csr_matrix:
    """The coupled sparse tangent ``(h n_dofs, h n_dofs)`` of element blocks
    ``Kb (h, h, e, i, i)``: harmonic a's DOFs are ``a * n_dofs + dof`` (harmonic-major)."""
    h = Kb.shape[0]
    off = np.arange(h) * n_dofs  # (h,)
    rows = off[:, None, None, None, None] + element_dofs[None, None, :, :, None]
    cols = off[None, :, None, None, None] + element_dofs[None, None, :, None, :]
    rows, cols = np.broadcast_arrays(rows, cols, Kb)[:2]
    A = sp.coo_matrix((Kb.ravel(), (rows.ravel(), cols.ravel())),
                      shape=(h * n_dofs, h * n_dofs))
    return A.tocsr()


def assemble_forces(f: NDArray[np.float64], element_dofs: NDArray[np.int64],
                    n_dofs: int) -> NDArray[np.float64]:
    """Nodal force amplitudes ``(h * n_dofs,)`` (harmonic-major) of element forces
    ``f (h, e, i)``."""
    h = f.shape[0]
    idx = (np.arange(h)[:, None, None] * n_dofs + element_dofs[None]).ravel()
    return np.bincount(idx, weights=f.ravel(), minlength=h * n_dofs)


class HarmonicStepError(RuntimeError):
    """Newton's method did not converge in a displacement-controlled step."""


def solve_displacement_step(block: HarmonicMohrCoulomb, n_dofs: int, u: NDArray[np.float64],
                            fixed: NDArray[np.int64], values: NDArray[np.float64],
                            state: PlaneState, tol: float = 1e-9, max_iter: int = 25):
    """One step of the coupled harmonics under prescribed amplitudes and no other load.

    ``u (h, n_dofs)`` the converged amplitudes, ``fixed`` harmonic-major DOF indices
    (``a * n_dofs + dof``) prescribed to ``values``; every other DOF is free and unloaded.
    A tangent predictor from the converged state, then Newton's method on the coupled
    sparse tangent (sparse direct solve), converged when the
    free residual is below ``tol`` times the largest internal force. Returns the new
    amplitudes, the assembled internal forces (the reactions at the fixed DOFs), the new
    :class:`PlaneState` and the iteration count; :class:`HarmonicStepError` if it fails.
    """
    import scipy.sparse.linalg as spla

    h = u.shape[0]
    x = u.reshape(-1).copy()
    free = np.setdiff1d(np.arange(h * n_dofs), fixed)
    # tangent predictor: the free DOFs follow the prescribed increment through the tangent
    # of the converged state (else the first iterate strains one layer of cells alone)
    _, Kb0, _ = block.response(u, state)
    A0 = assemble_coupled(Kb0, block.element_dofs, n_dofs).tocsr()
    jump = np.zeros(h * n_dofs)
    jump[fixed] = values - x[fixed]
    x[free] -= spla.spsolve(A0[free][:, free].tocsc(), (A0 @ jump)[free])
    x[fixed] = values
    for it in range(1, max_iter + 1):
        f_e, Kb, new = block.response(x.reshape(h, n_dofs), state)
        F = assemble_forces(f_e, block.element_dofs, n_dofs)
        r = F[free]
        scale = max(np.abs(F).max(), 1e-300)
        if np.abs(r).max() <= tol * scale:
            return x.reshape(h, n_dofs), F, new, it
        A = assemble_coupled(Kb, block.element_dofs, n_dofs)[free][:, free]
        x[free] -= spla.spsolve(A.tocsc(), r)
    raise HarmonicStepError(f"no convergence in {max_iter} Newton iterations (free residual "
                            f"{np.abs(r).max() / scale:.2e} of the largest force)")
