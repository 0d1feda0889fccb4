"""Two-node Euler-Bernoulli beam elements (axial + bending) for piles.

Euler-Bernoulli rather than Timoshenko: foundation piles are slender (length / width 30-60,
here 48), so shear deformation changes head stiffness by well under 1 %, and the cubic
Hermite element is exact for nodal loads on an elastic beam, which the Winkler checks
(Hetenyi 1946) rely on. Piles stay elastic (their structural capacity is checked against the
reported forces, not modelled).

DOFs per node: (u_x, u_y, theta) with theta clockwise positive (the project convention).
Local element formulas use the counter-clockwise rotation phi = -theta.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

__all__ = ["BeamBlock", "beam_local_stiffness"]


def beam_local_stiffness(EA, EI, L) -> NDArray[np.float64]:
    """Local stiffness ``(e, 6, 6)`` for DOFs (u_axial, v, phi) at both ends (phi ccw)."""
    EA, EI, L = np.broadcast_arrays(*(np.asarray(a, dtype=np.float64) for a in (EA, EI, L)))
    k = np.zeros((L.size, 6, 6))  # (e, 6, 6)
    a = EA / L
    b, c, d, e = 12 * EI / L**3, 6 * EI / L**2, 4 * EI / L, 2 * EI / L
    k[:, 0, 0] = k[:, 3, 3] = a
    k[:, 0, 3] = k[:, 3, 0] = -a
    k[:, 1, 1] = k[:, 4, 4] = b
    k[:, 1, 4] = k[:, 4, 1] = -b
    k[:, 1, 2] = k[:, 2, 1] = k[:, 1, 5] = k[:, 5, 1] = c
    k[:, 4, 2] = k[:, 2, 4] = k[:, 4, 5] = k[:, 5, 4] = -c
    k[:, 2, 2] = k[:, 5, 5] = d
    k[:, 2, 5] = k[:, 5, 2] = e
    return k


@dataclass(eq=False)
class BeamBlock:
    """Elastic beams between consecutive points of a pile row.

    Attributes
    ----------
    name : str
    xy : (n_nodes, 2) node coordinates
    element_dofs : (e, 6) global DOFs (u_x, u_y, theta of both ends)
    EA, EI : (e,) axial and bending stiffness (kN, kNm^2), already per metre of slice
    """

    name: str
    xy: NDArray[np.float64]
    element_dofs: NDArray[np.int64]
    EA: NDArray[np.float64]
    EI: NDArray[np.float64]

    def __post_init__(self) -> None:
        d = self.xy[1:] - self.xy[:-1]  # (e, 2)
        self.length = np.hypot(d[:, 0], d[:, 1])  # (e,)
        c, s = d[:, 0] / self.length, d[:, 1] / self.length
        T = np.zeros((self.length.size, 6, 6))  # global -> local, (e, 6, 6)
        for o in (0, 3):
            T[:, o, o], T[:, o, o + 1] = c, s
            T[:, o + 1, o], T[:, o + 1, o + 1] = -s, c
            T[:, o + 2, o + 2] = -1.0  # phi (ccw) = -theta (clockwise)
        self.T = T
        self.k_local = beam_local_stiffness(self.EA, self.EI, self.length)
        self.K_e = np.einsum("eji,ejk,ekl->eil", T, self.k_local, T)  # (e, 6, 6)

    def initial_state(self):
        return None

    def evaluate(self, u_e: NDArray[np.float64], state):
        f_e = np.einsum("eij,ej->ei", self.K_e, u_e)
        return f_e, lambda: self.K_e, state

    def end_forces(self, u_e: NDArray[np.float64]) -> NDArray[np.float64]:
        """Local end forces ``(e, 6)``: (N, V, M) at both ends in the local frame (M ccw)."""
        return np.einsum("eij,ejk,ek->ei", self.k_local, self.T, u_e)

    def section_forces(self, u_e: NDArray[np.float64]):
        """Axial force (tension positive) ``(e,)`` and bending moments at both ends ``(e, 2)``
        (sagging positive along the element direction), kN and kNm per metre of slice."""
        f = self.end_forces(u_e)
        axial = f[:, 3]
        moments = np.stack([-f[:, 2], f[:, 5]], axis=1)
        return axial, moments
