"""Undrained Tresca soil: s_u growing linearly with depth; total stresses.

Tresca is Mohr-Coulomb with phi = psi = 0 and c = s_u, so it shares that return map (and its
tests); the tests also check the equivalence directly.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from .base import MaterialParameterError, State
from .mohr_coulomb import MohrCoulomb

__all__ = ["Tresca"]


@dataclass(frozen=True)
class Tresca:
    """Linear elastic - perfectly plastic Tresca.

    Parameters
    ----------
    E : float
        Undrained Young's modulus E_u, kPa (> 0); ``E_gradient`` kPa/m below ``depth_ref``.
    nu : float
        Poisson's ratio, 0 <= nu < 0.5 (0.49 is common practice for undrained analyses).
    su : float
        Undrained shear strength at ``depth_ref`` (default: ground level), kPa (> 0).
    su_gradient : float
        Increase of s_u with depth, kPa/m (>= 0).
    tension_cutoff : float or None
        Optional limit on the major principal total stress, kPa; None (default) for none.
    """

    E: float
    nu: float
    su: float
    su_gradient: float = 0.0
    E_gradient: float = 0.0
    depth_ref: float = 0.0
    tension_cutoff: float | None = None
    _mc: MohrCoulomb = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        if not (np.isfinite(self.su) and self.su > 0.0):
            raise MaterialParameterError(f"su = {self.su!r} kPa: must be > 0")
        if not (np.isfinite(self.su_gradient) and self.su_gradient >= 0.0):
            raise MaterialParameterError(f"su_gradient = {self.su_gradient!r} kPa/m: must be >= 0")
        mc = MohrCoulomb(E=self.E, nu=self.nu, c=self.su, phi=0.0, psi=0.0,
                         tension_cutoff=self.tension_cutoff, E_gradient=self.E_gradient,
                         c_gradient=self.su_gradient, depth_ref=self.depth_ref)
        object.__setattr__(self, "_mc", mc)

    def su_at(self, depth: NDArray[np.float64]) -> NDArray[np.float64]:
        """s_u at depths (m, positive down), kPa."""
        return self.su + self.su_gradient * np.maximum(np.asarray(depth) - self.depth_ref, 0.0)

    def initial_state(self, x: NDArray[np.float64]) -> State:
        return self._mc.initial_state(x)

    def elastic_tangent(self, state: State) -> NDArray[np.float64]:
        return self._mc.elastic_tangent(state)

    def update(self, strain: NDArray[np.float64], state_n: State):
        return self._mc.update(strain, state_n)
