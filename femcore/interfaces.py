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

from materials.springs import ContactState, SpringState, coulomb_update, epp_update

from .kinematics import Kinematics
from .mesh import Mesh

__all__ = ["SpringBlock", "ContactBlock", "contact_pairs"]


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
    residual_tangent : fraction of ``k`` kept in the tangent (not the force) of a spring at
        its limit: 0 is the consistent tangent; a tiny value (the pushover uses 1e-6) keeps
        the tangent regular where a yielded spring would leave a free local mode (a pinned
        pile whose lateral springs have all yielded swings about its head), without
        changing any force or equilibrium
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
    residual_tangent: float = 0.0

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

    def evaluate(self, u_e: NDArray[np.float64], state: SpringState):
        d = np.einsum("nki,ni->nk", self.B, u_e)  # (n, 2)
        f, k_tan, trial = epp_update(d, state, self.k, self.f_min, self.f_max)
        if self.residual_tangent:
            k_tan = np.where(k_tan == 0.0, self.residual_tangent * self.k, k_tan)
        f_e = np.einsum("nki,nk->ni", self.B, f)
        return f_e, lambda: np.einsum("nki,nk,nkj->nij", self.B, k_tan, self.B), trial


def contact_pairs(mesh: Mesh, edges: NDArray[np.int64], new_index: NDArray[np.int64],
                  normal_towards: NDArray[np.float64] | None = None,
                  analysis: Kinematics = Kinematics.PLANE_STRAIN):
    """Node pairs of a split surface with nodal (Newton-Cotes) integration weights.

    ``edges (e, p+1)`` are the surface's edges on the original side; ``new_index`` maps each
    split node to its copy. Returns ``(a, b, t, n, w)``: original and copy nodes ``(m,)``,
    unit tangent and normal ``(m, 2)`` and weights ``(m,)`` (m, or m^2 with 2 pi r in
    axisymmetry). The normal points from the original side towards the copy side, oriented
    along ``normal_towards`` when given (e.g. (0, 1) for a cap sitting on the soil).
    Nodal integration of zero-thickness interfaces avoids the traction oscillations of Gauss
    integration (Schellekens & de Borst 1993, IJNME 36).
    """
    from .quadrature import line_rule

    elem = mesh.line_element
    rule = line_rule(2 * elem.order)
    N = elem.shape(rule.points)  # (q, a)
    dN = elem.shape_gradients(rule.points)[..., 0]  # (q, a)
    X = mesh.points[edges]  # (e, a, 2)
    tx = np.einsum("qa,ead->eqd", dN, X)  # (e, q, 2)
    jac = np.linalg.norm(tx, axis=-1)  # (e, q)
    ds = jac * rule.weights
    if Kinematics(analysis) is Kinematics.AXISYMMETRIC:
        ds = ds * 2 * np.pi * np.einsum("qa,ea->eq", N, X[..., 0])
    w_e = np.einsum("qa,eq->ea", N, ds)  # (e, a) integral of N_a
    nodes = edges.ravel()
    keep = new_index[nodes] >= 0
    a = np.unique(nodes[keep])
    w = np.bincount(np.searchsorted(a, nodes[keep]), weights=w_e.ravel()[keep],
                    minlength=a.size)
    # tangent per node: mean edge direction (straight surfaces: exact)
    d = X[:, 1] - X[:, 0]
    d = d / np.linalg.norm(d, axis=1, keepdims=True)  # (e, 2)
    t = np.zeros((a.size, 2))
    np.add.at(t, np.searchsorted(a, nodes[keep]), np.repeat(d, edges.shape[1], axis=0)[keep])
    t /= np.linalg.norm(t, axis=1, keepdims=True)
    n = np.stack([-t[:, 1], t[:, 0]], axis=1)
    if normal_towards is not None:
        flip = (n @ np.asarray(normal_towards, dtype=np.float64)) < 0
        n[flip] *= -1
        t[flip] *= -1
    return a, new_index[a], t, n, w


@dataclass(eq=False)
class ContactBlock:
    """Zero-thickness contact between node pairs (Coulomb friction + tension cut-off).

    Attributes
    ----------
    name : str
    a_dofs, b_dofs : (m, 2) DOFs of the two sides (b moves relative to a)
    t, normal : (m, 2) tangent and normal (from side a towards side b)
    weight : (m,) integration weight (m per metre of slice, or m^2)
    k_s, k_n : (m,) shear and normal stiffness, kPa/m
    cohesion, tan_delta, tension_cutoff : (m,) strength: tau <= c - sigma_n tan(delta),
        sigma_n <= t_c (tension positive)
    """

    name: str
    a_dofs: NDArray[np.int64]
    b_dofs: NDArray[np.int64]
    t: NDArray[np.float64]
    normal: NDArray[np.float64]
    weight: NDArray[np.float64]
    k_s: NDArray[np.float64]
    k_n: NDArray[np.float64]
    cohesion: NDArray[np.float64]
    tan_delta: NDArray[np.float64]
    tension_cutoff: NDArray[np.float64]

    def __post_init__(self) -> None:
        R = np.stack([self.t, self.normal], axis=1)  # (m, 2, 2)
        self.element_dofs = np.concatenate([self.b_dofs, self.a_dofs], axis=1)  # (m, 4)
        self.B = np.concatenate([R, -R], axis=2)  # (m, 2, 4)

    def initial_state(self) -> ContactState:
        return ContactState.zeros(self.weight.size)

    def evaluate(self, u_e: NDArray[np.float64], state: ContactState):
        d = np.einsum("mki,mi->mk", self.B, u_e)  # (m, 2) slip, opening
        tr, C, trial = coulomb_update(d, state, self.k_s, self.k_n, self.cohesion,
                                      self.tan_delta, self.tension_cutoff)
        f_e = np.einsum("mki,mk,m->mi", self.B, tr, self.weight)
        return (f_e, lambda: np.einsum("mki,mkl,mlj,m->mij", self.B, C, self.B, self.weight),
                trial)
