"""Rings of piles in the harmonic model: smeared ring beams, smeared slip springs, head ties.

A ring of N equal piles at radius R (pile k at the angle theta_k = theta_0 + 2 pi k / N)
becomes one beam along the pile line in the (r, z) half-plane whose nodal amplitudes follow
the harmonic family of :mod:`femcore.harmonic`: the in-plane displacements (U, W) and the
in-plane section rotation psi vary as cos(n theta), the hoop displacement V and the
out-of-plane section rotation chi as sin(n theta). Pile k then moves with the amplitudes
times cos(n theta_k) or sin(n theta_k), and the strain energy of the N discrete piles is

    sum_k cos^2(n theta_k) * E_in + sum_k sin^2(n theta_k) * E_out

with E_in, E_out the energies of one pile under the amplitudes. For N >= 3 and n = 1 both
sums are exactly N / 2 (for n = 0: N and 0, the sin part belonging to the torsional family);
the ring is therefore a beam with N / 2 times one pile's axial and bending stiffness, the
same as stiffness N E A / (2 pi R) per unit circumference times the harmonic factor
pi R. For n >= 2 the factor N / 2 is the smeared value (exact unless N divides 2n).

A pile on the axis (R = 0, one pile) is different: its lateral displacement is the amplitude
U itself (u_x = U on the axis), so its factor is 1 for n = 0 and 1 and it has no
out-of-plane part (its V and chi are fixed by :func:`ring_support`).

Beam DOFs per node (two 3-DOF point groups): translations ``(U, W, V)`` and rotations
``(psi, chi, -)``; the third rotation DOF is unused and fixed. psi is the rotation about
e_theta, positive clockwise in the (r, z) plane (the 2D convention of :mod:`femcore.beams`);
chi is the rotation about m = t x e_theta (t the pile axis, head to tip), chi = dV/ds
along the pile. A rigid rotation alpha of the cap (project convention, +x side down) gives
psi = alpha and chi = -t_z alpha on every pile; torsion of the single piles (the rotation
component along a raked pile's axis) is not modelled.

Slip springs join beam nodes to the soil nodes on the pile line, with stiffness per pile in
the axial, in-plane normal and hoop directions; they carry the same factors.

All element matrices returned by ``stiffness(n)`` include these factors (the harmonic
factor c_n is already contained in them: the reactions are 3D totals).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .beams import BeamBlock
from .harmonic import HarmonicConstraints, HarmonicModel, check_harmonic
from .kinematics import gradients_at_node

__all__ = ["RingLine", "RingBeamBlock", "RingSpringBlock", "ring_factors", "add_ring",
           "ring_support", "tie_head_rigid", "tie_head_to_solid", "hermite_bending"]

_IN = np.array([0, 1, 2, 5, 6, 7])  # (U, W, psi) of both nodes in the 10 element DOFs
_OUT = np.array([3, 4, 8, 9])  # (V, chi) of both nodes


def ring_factors(count: float, radius: float, n: int) -> tuple[float, float]:
    """(in-plane, out-of-plane) energy factors of a ring of ``count`` piles (module text)."""
    n = check_harmonic(n)
    if radius <= 0.0:  # one pile on the axis
        return (1.0, 0.0) if n <= 1 else (0.0, 0.0)
    if n == 0:
        return float(count), float(count)
    return 0.5 * count, 0.5 * count


def hermite_bending(EI, L) -> NDArray[np.float64]:
    """Euler-Bernoulli bending stiffness ``(e, 4, 4)`` for (v, dv/ds) at both ends."""
    EI, L = np.broadcast_arrays(np.asarray(EI, dtype=np.float64), np.asarray(L, dtype=np.float64))
    k = np.empty((L.size, 4, 4))  # (e, 4, 4)
    a, b, c, d = 12 / L**3, 6 / L**2, 4 / L, 2 / L
    rows = [[a, b, -a, b], [b, c, -b, d], [-a, -b, a, -b], [b, d, -b, c]]
    for i in range(4):  # 4 x 4 entries, vectorised over elements
        for j in range(4):
            k[:, i, j] = EI.ravel() * rows[i][j]
    return k


@dataclass(eq=False)
class RingLine:
    """The DOFs and geometry of one ring beam (returned by :func:`add_ring`)."""

    name: str
    count: float
    radius: float  # of the head, m
    xy: NDArray[np.float64]  # (m, 2) beam nodes (r, z), head first
    tangent: NDArray[np.float64]  # (2,) unit pile axis (head -> tip)
    trans: NDArray[np.int64]  # (m, 3) beam (U, W, V) DOFs
    rot: NDArray[np.int64]  # (m, 3) beam (psi, chi, unused) DOFs

    @property
    def on_axis(self) -> bool:
        return self.radius <= 0.0


@dataclass(eq=False)
class RingBeamBlock:
    """Smeared ring beam: in-plane frame beam (U, W, psi) + out-of-plane bending (V, chi).

    ``EA``, ``EI`` are one pile's stiffnesses (kN, kNm^2) per element ``(e,)``."""

    name: str
    line: RingLine
    EA: NDArray[np.float64]
    EI: NDArray[np.float64]

    def __post_init__(self) -> None:
        ln = self.line
        e = len(ln.xy) - 1
        d = np.zeros((e, 6), dtype=np.int64)
        inplane = BeamBlock(self.name, ln.xy, d, self.EA, self.EI)  # (U, W, theta_cw)
        self.length = inplane.length  # (e,)
        a, b = np.arange(e), np.arange(1, e + 1)
        t, r = ln.trans, ln.rot
        self.element_dofs = np.stack([t[a, 0], t[a, 1], r[a, 0], t[a, 2], r[a, 1],
                                      t[b, 0], t[b, 1], r[b, 0], t[b, 2], r[b, 1]], axis=1)
        self._k_in = inplane.K_e  # (e, 6, 6)
        self._k_out = hermite_bending(self.EI, self.length)  # (e, 4, 4)

    def stiffness(self, n: int) -> NDArray[np.float64]:
        f_in, f_out = ring_factors(self.line.count, self.line.radius, n)
        K = np.zeros((len(self.length), 10, 10))  # (e, 10, 10)
        K[:, _IN[:, None], _IN[None, :]] = f_in * self._k_in
        K[:, _OUT[:, None], _OUT[None, :]] = f_out * self._k_out
        return K


@dataclass(eq=False)
class RingSpringBlock:
    """Smeared springs between beam nodes and soil nodes (or fixed ground).

    ``k (m, 3)``: one pile's stiffness (kN/m) along the pile axis, the in-plane normal and
    the hoop direction at each node. ``soil (m, 3)`` soil (U, W, V) DOFs, or None for
    springs to fixed ground."""

    name: str
    line: RingLine
    beam: NDArray[np.int64]  # (m, 3)
    soil: NDArray[np.int64] | None
    k: NDArray[np.float64]  # (m, 3)

    def __post_init__(self) -> None:
        tr, tz = self.line.tangent
        dirs = np.array([[tr, tz, 0.0], [-tz, tr, 0.0], [0.0, 0.0, 1.0]])  # (3, 3) rows
        k = np.array(self.k, dtype=np.float64)
        if self.line.on_axis:
            k[:, 2] = 0.0  # a pile on the axis has no hoop component of its own
        local = np.einsum("mj,ja,jb->mab", k, dirs, dirs)  # (m, 3, 3)
        if self.soil is None:
            self.element_dofs = np.asarray(self.beam, dtype=np.int64)
            self._k = local
        else:
            self.element_dofs = np.concatenate([self.beam, self.soil], axis=1)  # (m, 6)
            self._k = np.block([[local, -local], [-local, local]])  # (m, 6, 6)

    def stiffness(self, n: int) -> NDArray[np.float64]:
        # every direction carries the in-plane factor: N (n = 0; the hoop spring acts on the
        # torsional V_0), N / 2 (n >= 1), 1 on the axis (no hoop part there)
        return ring_factors(self.line.count, self.line.radius, n)[0] * self._k


def add_ring(model: HarmonicModel, name: str, count: float, xy, EA, EI) -> tuple[RingLine,
                                                                            RingBeamBlock]:
    """Add the beam of a ring (nodes ``xy (m, 2)``, head first) to ``model``."""
    xy = np.asarray(xy, dtype=np.float64)
    d = xy[-1] - xy[0]
    tangent = d / np.hypot(*d)
    trans = model.add_points(name, xy)
    rot = model.add_points(f"{name}_rot", xy)
    line = RingLine(name, float(count), float(xy[0, 0]), xy, tangent, trans, rot)
    e = len(xy) - 1
    beam = RingBeamBlock(name, line, np.broadcast_to(np.asarray(EA, float), (e,)).copy(),
                         np.broadcast_to(np.asarray(EI, float), (e,)).copy())
    model.add_element_block(beam)
    return line, beam


def ring_support(cons: HarmonicConstraints, line: RingLine) -> None:
    """Fix the DOFs a ring beam does not use in harmonic ``cons.n``: the spare rotation; on
    the axis V and chi (and W for n = 1, everything for n >= 2)."""
    cons.fix(line.rot[:, 2], 0.0)
    if not line.on_axis:
        return
    cons.fix(line.trans[:, 2], 0.0)
    cons.fix(line.rot[:, 1], 0.0)
    if cons.n == 1:
        cons.fix(line.trans[:, 1], 0.0)
    elif cons.n >= 2:
        cons.fix(line.trans[:, :2].ravel(), 0.0)
        cons.fix(line.rot[:, 0], 0.0)


def tie_head_rigid(cons: HarmonicConstraints, line: RingLine, ref: str,
                   fixed_head: bool = True) -> None:
    """Tie the head node of a ring beam to a rigid body (reference point ``ref``): the
    translations as :meth:`HarmonicConstraints.tie_rigid`, the rotations (fixed head)
    psi = alpha and chi = -t_z alpha for n = 1, zero for n = 0 and n >= 2."""
    dm, n = cons.dofmap, cons.n
    y_ref = dm.ref_points[ref]
    Dh, Wv, Rot = (dm.ref_dof(ref, k) for k in range(3))
    r, dz = line.xy[0, 0], line.xy[0, 1] - y_ref
    U, W, V = line.trans[0]
    psi, chi = line.rot[0, :2]
    if n == 0:
        cons.tie([W], [[Wv]], [[1.0]])
        cons.fix([U], 0.0)
        if fixed_head:
            cons.fix([psi], 0.0)
        if not line.on_axis:
            cons.fix([V], 0.0)
            if fixed_head:
                cons.fix([chi], 0.0)
        return
    if n >= 2:
        cons.fix([U, W] + ([] if line.on_axis else [V]), 0.0)
        if fixed_head:
            cons.fix([psi] + ([] if line.on_axis else [chi]), 0.0)
        return
    cons.tie([U], [[Dh, Rot]], [[1.0, dz]])
    if not line.on_axis:
        cons.tie([W], [[Rot]], [[-r]])
        cons.tie([V], [[Dh, Rot]], [[-1.0, -dz]])
    if fixed_head:
        cons.tie([psi], [[Rot]], [[1.0]])
        if not line.on_axis:
            cons.tie([chi], [[Rot]], [[-line.tangent[1]]])


def tie_head_to_solid(cons: HarmonicConstraints, line: RingLine, node: int, cells,
                      fixed_head: bool = True) -> None:
    """Tie the head of a ring beam to the solid node ``node`` (its translations) and, for a
    fixed head, its rotations to the mean local rotation of the solid ``cells`` at that
    node: psi = (1/2)(U_,z - W_,r) and chi = -t_z w_r + t_r w_z with
    w_r = (1/2)(-n W / r - V_,z), w_z = (1/2)(V / r + V_,r + n U / r)."""
    model, n = cons.model, cons.n
    mesh = model.mesh
    cons.tie(line.trans[0], [[3 * node], [3 * node + 1], [3 * node + 2]], [[1.0]] * 3)
    if not fixed_head:
        return
    if n != 1 and not line.on_axis:  # chi belongs to the sin family: zero for n = 0
        cons.fix([line.rot[0, 1]], 0.0)
    conn, dN = gradients_at_node(mesh, cells, node)  # (k, a), (k, a, 2)
    w = 1.0 / len(conn)
    Na = (conn == node).astype(float)  # shape functions at the node, (k, a)
    psi_m = [3 * conn.ravel(), 3 * conn.ravel() + 1]
    psi_c = [0.5 * w * dN[..., 1].ravel(), -0.5 * w * dN[..., 0].ravel()]
    chi_m, chi_c = [], []
    if not line.on_axis and n == 1:  # chi = -t_z w_r + t_r w_z
        tr, tz = line.tangent
        r = float(mesh.points[node, 0])
        chi_m = [3 * conn.ravel() + 1, 3 * conn.ravel() + 2, 3 * conn.ravel()]
        chi_c = [w * (-tz * 0.5 * (-n * Na / r)).ravel(),
                 w * (-tz * 0.5 * (-dN[..., 1]) + tr * 0.5 * (Na / r + dN[..., 0])).ravel(),
                 w * (tr * 0.5 * (n * Na / r)).ravel()]
    cons.tie([line.rot[0, 0]], [np.concatenate(psi_m)], [np.concatenate(psi_c)])
    if chi_m:
        cons.tie([line.rot[0, 1]], [np.concatenate(chi_m)], [np.concatenate(chi_c)])
