"""Isotropic linear elasticity with a Young's modulus that may grow linearly with depth."""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import NDArray

from .base import MaterialParameterError, State

__all__ = ["LinearElastic", "elastic_matrix"]


def elastic_matrix(E: NDArray[np.float64] | float, nu: NDArray[np.float64] | float):
    """Isotropic elasticity matrix for ``[xx, yy, zz, xy]`` with engineering shear.

    ``E`` and ``nu`` may be arrays of equal shape ``S``; the result has shape ``(*S, 4, 4)``.
    """
    E = np.asarray(E, dtype=np.float64)
    nu = np.asarray(nu, dtype=np.float64)
    lam = E * nu / ((1.0 + nu) * (1.0 - 2.0 * nu))
    mu = E / (2.0 * (1.0 + nu))
    D = np.zeros((*np.broadcast(E, nu).shape, 4, 4))  # (*S, 4, 4)
    D[..., :3, :3] = lam[..., None, None]
    for k in range(3):  # the three normal components, not a loop over points
        D[..., k, k] += 2.0 * mu
    D[..., 3, 3] = mu
    return D


@dataclass(frozen=True)
class LinearElastic:
    """Linear elastic soil or concrete.

    Parameters
    ----------
    E : float
        Young's modulus at the ground surface (or at ``depth_ref``), kPa, > 0.
    nu : float
        Poisson's ratio, -1 < nu < 0.5.
    E_gradient : float
        Increase of E with depth, kPa/m, >= 0. Depth is ``-y`` (ground at y = 0).
    depth_ref : float
        Depth at which E applies, m; E(z) = E + E_gradient * max(z - depth_ref, 0).
    """

    E: float
    nu: float
    E_gradient: float = 0.0
    depth_ref: float = 0.0

    def __post_init__(self) -> None:
        if not (np.isfinite(self.E) and self.E > 0.0):
            raise MaterialParameterError(f"E = {self.E!r} kPa: must be > 0")
        if not (-1.0 < self.nu < 0.5):
            raise MaterialParameterError(f"nu = {self.nu!r}: must satisfy -1 < nu < 0.5")
        if not (np.isfinite(self.E_gradient) and self.E_gradient >= 0.0):
            raise MaterialParameterError(f"E_gradient = {self.E_gradient!r} kPa/m: must be >= 0")

    @property
    def shear_modulus(self) -> float:
        return self.E / (2.0 * (1.0 + self.nu))

    def young_at(self, x: NDArray[np.float64]) -> NDArray[np.float64]:
        """E at points ``x (..., 2)``, kPa."""
        depth = -np.asarray(x)[..., 1]
        return self.E + self.E_gradient * np.maximum(depth - self.depth_ref, 0.0)

    def initial_state(self, x: NDArray[np.float64]) -> State:
        return State.zeros(x.shape[:2], {"E": self.young_at(x)})

    def tangent(self, state: State) -> NDArray[np.float64]:
        """Elastic matrix per point, (c, q, 4, 4)."""
        E = state.params["E"]
        if self.E_gradient == 0.0:
            return np.broadcast_to(elastic_matrix(self.E, self.nu), (*E.shape, 4, 4))
        return elastic_matrix(E, np.full_like(E, self.nu))

    def elastic_tangent(self, state: State) -> NDArray[np.float64]:
        return self.tangent(state)

    def update(self, strain: NDArray[np.float64], state_n: State):
        D = self.tangent(state_n)  # (c, q, 4, 4)
        stress = state_n.stress + np.einsum("cqkl,cql->cqk", D, strain - state_n.strain)
        return stress, D, replace(state_n, stress=stress, strain=strain)
