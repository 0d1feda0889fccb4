"""Pile-soil interface springs: node-to-node (embedded pile) or node-to-ground (springs mode).

Each spring joins a beam node to the soil node at the same position (or to fixed ground) and
acts in the pile's axial direction t (shaft friction, t-z; or the tip, q-z) and normal to it,
n (lateral, p-y), with elastic - perfectly plastic laws (:mod:`materials.springs`). Stiffness
and limits are per spring, already multiplied by the tributary length of the node and by the
number of piles per metre of slice: this is the line interface integrated with nodal
(Lobatto) quadrature, which keeps beam and soil nodes paired one to one.

Relative displacement ``d = [t . (u_b - u_s), n . (u_b - u_s)]``; force on the beam node
``-(f_t t + f_n n)`` (the spring resists), the opposite on the soil node.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from materials.springs import SpringState, epp_update

__all__ = ["SpringBlock"]


@dataclass(eq=False)
class SpringBlock:
    """Springs ``(n,)`` with two directions each.

    Attributes
    ----------
    name : str
    beam_dofs : (n, 2) u_x, u_y DOFs of the beam nodes
    soil_dofs : (n, 2) or None (anchored to fixed ground)
    t, normal : (n, 2) unit vectors (pile axis, its normal)
    k : (n, 2) stiffness in (t, n), kN/m per metre of slice
    f_min, f_max : (n, 2) force bounds, kN per metre of slice (f_min <= 0 <= f_max)
    depth : (n,) depth of each spring (reporting)
    """

    name: str
    beam_dofs: NDArray[np.int64]
    soil_dofs: NDArray[np.int64] | None
    t: NDArray[np.float64]
    normal: NDArray[np.float64]
    k: NDArray[np.float64]
    f_min: NDArray[np.float64]
    f_max: NDArray[np.float64]
    depth: NDArray[np.float64]

    def __post_init__(self) -> None:
        R = np.stack([self.t, self.normal], axis=1)  # (n, 2, 2): d = R (u_b - u_s)
        if self.soil_dofs is None:
            self.element_dofs = np.asarray(self.beam_dofs, dtype=np.int64)
            self.B = R  # (n, 2, 2)
        else:
            self.element_dofs = np.concatenate([self.beam_dofs, self.soil_dofs], axis=1)
            self.B = np.concatenate([R, -R], axis=2)  # (n, 2, 4)

    @property
    def n_springs(self) -> int:
        return self.k.shape[0]

    def initial_state(self) -> SpringState:
        return SpringState.zeros(self.k.shape)

    def evaluate(self, u_e: NDArray[np.float64], state: SpringState, tangent: bool = True):
        d = np.einsum("nki,ni->nk", self.B, u_e)  # (n, 2)
        f, k_tan, trial = epp_update(d, state, self.k, self.f_min, self.f_max)
        f_e = np.einsum("nki,nk->ni", self.B, f)
        K_e = np.einsum("nki,nk,nkj->nij", self.B, k_tan, self.B) if tangent else None
        return f_e, K_e, trial
