"""The material protocol and the material-point state.

A material is pure: ``update(strain, state_n)`` returns the stress, the tangent and a new
trial state and never changes ``state_n``. Only the analysis driver decides when a trial state
becomes the committed one.

Stress and strain carry four components ``[xx, yy, zz, xy]``; tension positive; engineering
shear strain (gamma_xy = 2 eps_xy). Stresses in kPa.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Protocol, runtime_checkable

import numpy as np
from numpy.typing import NDArray

__all__ = ["State", "MaterialModel", "MaterialParameterError"]


class MaterialParameterError(ValueError):
    """A material parameter is outside its allowed range."""


@dataclass(frozen=True, eq=False)
class State:
    """Material-point state of a block, every array with leading axes ``(c, q)``.

    Attributes
    ----------
    stress : (c, q, 4) kPa
    strain : (c, q, 4) total strain at which ``stress`` holds
    plastic_strain : (c, q, 4) accumulated plastic strain (zero for elastic models)
    yielded : (c, q) bool, the point was on the yield surface in its last update
    params : name -> (c, q) per-point parameters (depth-dependent moduli and strengths)
    """

    stress: NDArray[np.float64]
    strain: NDArray[np.float64]
    plastic_strain: NDArray[np.float64]
    yielded: NDArray[np.bool_]
    params: dict[str, NDArray[np.float64]] = field(default_factory=dict)

    @classmethod
    def zeros(
        cls, shape: tuple[int, int], params: dict[str, NDArray[np.float64]] | None = None
    ) -> State:
        z = np.zeros((*shape, 4))
        return cls(z, z.copy(), z.copy(), np.zeros(shape, dtype=bool), dict(params or {}))

    def with_stress(self, stress: NDArray[np.float64]) -> State:
        """A copy with a new stress (e.g. initial K0 stresses) at the current strain."""
        return replace(self, stress=np.asarray(stress, dtype=np.float64))


@runtime_checkable
class MaterialModel(Protocol):
    """What the FE core needs from a constitutive model."""

    def initial_state(self, x: NDArray[np.float64]) -> State:
        """Zero-stress state at quadrature points ``x (c, q, 2)`` with per-point parameters."""
        ...

    def update(
        self, strain: NDArray[np.float64], state_n: State
    ) -> tuple[NDArray[np.float64], NDArray[np.float64], State]:
        """Stress (c, q, 4), tangent d(stress)/d(strain) (c, q, 4, 4), trial state."""
        ...
