"""Fourier-series aided (semi-analytical) elastic finite elements on the axisymmetric mesh.

A 3D body of revolution under non-axisymmetric loads (a moment, a horizontal force) is
discretised in the (r, z) half-plane of the project's :class:`~femcore.mesh.Mesh` (x >= 0 is
the radius r, y = z is vertical, up; ground at y = 0) and in the circumferential angle theta by
a Fourier series (Wilson 1965, "Structural analysis of axisymmetric solids", AIAA J. 3;
Winnicki & Zienkiewicz 1979, IJNME 14; Potts & Zdravkovic 1999, *Finite Element Analysis in
Geotechnical Engineering: Theory*). The family symmetric about the plane theta = 0 (the plane
of the moment) is::

    u_r = sum_n U_n(r, z) cos(n theta)
    u_z = sum_n W_n(r, z) cos(n theta)
    u_t = sum_n V_n(r, z) sin(n theta)        n = 0 .. N

Conventions
-----------
* Nodal DOFs per node and per harmonic: ``(U, W, V)`` interleaved, ``3 * node + d``; then
  groups of 3-DOF points (reference points of rigid bodies; later beam nodes of pile rings).
  Every harmonic uses the same numbering, so one :class:`~femcore.assembly.SparsePattern`
  serves all of them.
* Strain amplitudes ``[eps_r, eps_z, eps_t, gamma_rz, gamma_zt, gamma_tr]`` (engineering
  shear), with ``eps(r, z, theta) = sum_n T_n(theta) B_n q_n`` and
  ``T_n = diag(c, c, c, c, s, s)``, c = cos n theta, s = sin n theta. Per node (shape function
  N) the rows of ``B_n`` are::

      [N,r    0       0        ]
      [0      N,z     0        ]
      [N/r    0       n N/r    ]
      [N,z    N,r     0        ]
      [0     -n N/r   N,z      ]
      [-n N/r 0       N,r - N/r]

* Harmonic factor: ``K_n = c_n * int B_n^T D B_n r dA`` with ``c_0 = 2 pi`` and
  ``c_n = pi`` (n >= 1), the integrals of cos^2 and sin^2 over the circle. The geometry
  weights ``dV = w det J r`` do **not** contain c_n; :func:`harmonic_factor` is applied
  explicitly by the stiffness, load and body-force routines of this module, so nodal forces
  and reactions are work-conjugate to the amplitudes over the full circumference (whole-body
  totals, as in the axisymmetric kinematics).
* n = 0 is the axisymmetric problem; its third DOF ``V_0`` is the torsional amplitude
  (u_t = V_0, the n = 0 member of the antisymmetric family). With an isotropic D it decouples
  from (U_0, W_0). A :class:`HarmonicModel` fixes it unless built with ``torsion=True``.
* Axis conditions (r = 0), applied automatically by :meth:`HarmonicConstraints.build` and
  checked on the resulting constraint map (:class:`AxisConditionError` when user constraints
  contradict them): n = 0: U = 0 (and V = 0 for torsion); n = 1: W = 0 and U + V = 0 (u_x
  single-valued); n >= 2: U = V = W = 0.
* Rigid bodies: a reference point on the axis at height ``y_ref`` with three components whose
  meaning depends on the harmonic (project convention: positive alpha tilts the +x side
  down)::

      component   n = 0                         n = 1
      0           (unused)                      horizontal translation Delta (along +x)
      1           vertical translation w (up)   (unused)
      2           twist phi about the z axis    rocking rotation alpha
                  (torsion models only)

  A bonded node at (r, z) follows ``U_1 = Delta + alpha (z - y_ref)``,
  ``V_1 = -Delta - alpha (z - y_ref)``, ``W_1 = -alpha r``; ``W_0 = w``, ``U_0 = 0``,
  ``V_0 = phi r``. Generalised reactions at these DOFs are the 3D totals: vertical force V,
  horizontal force H, overturning moment M (conjugate to alpha), torque T. Smooth contact ties
  W only. A rigid body has no amplitude at n >= 2 (bonded nodes are fixed there).

Quadrature
----------
The 1/r terms make the integrand rational; the Dunavant rules of :mod:`femcore.quadrature`
(interior points only) are used by default at degree ``min(2p + 2, 8)``, and
:func:`collapsed_rule` gives conical-product (Gauss-Jacobi x Gauss-Legendre) rules of any
degree, also with interior points only, to measure the effect of the rule. On the axis the
singular parts cancel once the axis conditions are applied; a point on r = 0 is rejected.
Measured on a rigid-disc rocking problem against a degree-31 conical rule: T6 at degree 4
differs by 7e-10 and at degree 6 by 1e-11; T15 at degree 4 is 1.8 % too soft, at degree 6
1e-6 off, at degree 8 3e-12.

API
---
``harmonic_geometry(mesh, n, rule, cells) -> HarmonicGeometry`` (``B (c, q, 6, 3 n_en)``,
``dV (c, q)``); :func:`ring_geometry` (the n-independent part, from which
``RingGeometry.harmonic(n)`` builds B cheaply); :func:`elastic_matrix_3d`;
:class:`HarmonicModel` (solid blocks with E per quadrature point, element blocks with
``element_dofs`` and ``stiffness(n)``, reference points, point groups, loads, solve per
harmonic with one factorisation for several load cases); :class:`HarmonicConstraints`;
:func:`rigid_stiffness` (K_V, K_H, K_R, K_HR, K_T of a rigid body tied to a node set);
:func:`synthesize` and :func:`trig_factors` (fields on a plane theta).

Element blocks (beams, springs) plug in through the :class:`HarmonicBlock` protocol: integer
``element_dofs (e, i)`` in the DOF space above and ``stiffness(n) -> (e, i, i)`` including
the harmonic factor (a ring quantity per unit circumference at radius R carries ``c_n R``).
"""

from __future__ import annotations

import numbers
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from functools import cache, cached_property
from typing import Protocol, runtime_checkable

import numpy as np
import scipy.sparse as sp
from numpy.typing import NDArray
from scipy.special import roots_jacobi

from .assembly import SparsePattern, assemble_vector
from .dofs import ConstraintError, ConstraintMap, Constraints
from .elements import ReferenceElement
from .kinematics import isoparametric_map
from .linsolve import SolverError, factorize
from .mesh import Mesh
from .quadrature import QuadratureRule, line_rule, triangle_rule

__all__ = [
    "HarmonicError",
    "AxisConditionError",
    "harmonic_factor",
    "check_harmonic",
    "collapsed_rule",
    "default_harmonic_rule",
    "elastic_matrix_3d",
    "RingGeometry",
    "HarmonicGeometry",
    "ring_geometry",
    "harmonic_geometry",
    "HarmonicDofMap",
    "HarmonicBlock",
    "HarmonicSolidBlock",
    "MatrixBlock",
    "HarmonicConstraints",
    "HarmonicModel",
    "HarmonicSolution",
    "RigidStiffness",
    "rigid_stiffness",
    "prescribed_cases",
    "axis_nodes",
    "check_axis_conditions",
    "trig_factors",
    "synthesize",
    "REF_HORIZONTAL",
    "REF_VERTICAL",
    "REF_ROTATION",
]

REF_HORIZONTAL, REF_VERTICAL, REF_ROTATION = 0, 1, 2  # reference point components
_U, _W, _V = 0, 1, 2  # nodal components (radial, vertical, hoop)


class HarmonicError(ValueError):
    """A harmonic number is out of range, or the mesh leaves the half-plane r >= 0."""


class AxisConditionError(ConstraintError):
    """Constraints or a displacement field contradict the conditions on the axis r = 0."""


# --------------------------------------------------------------------------- small helpers
def check_harmonic(n, n_max: int | None = None) -> int:
    """``n`` as an int after checking ``0 <= n <= n_max``; :class:`HarmonicError` otherwise."""
    allowed = f"0..{n_max}" if n_max is not None else "0, 1, 2, ..."
    if isinstance(n, bool) or not isinstance(n, numbers.Integral):
        raise HarmonicError(f"harmonic n = {n!r} must be an integer in {allowed}")
    n = int(n)
    if n < 0 or (n_max is not None and n > n_max):
        raise HarmonicError(f"harmonic n = {n} is out of range: allowed {allowed}")
    return n


def harmonic_factor(n: int) -> float:
    """``c_n``: 2 pi for n = 0, pi for n >= 1 (integral of cos^2 n theta over the circle)."""
    return 2.0 * np.pi if check_harmonic(n) == 0 else np.pi


@cache
def collapsed_rule(degree: int) -> QuadratureRule:
    """Conical-product rule on the reference triangle, exact to ``degree`` (any degree >= 0).

    The square [0, 1]^2 is collapsed onto the triangle by ``xi = u``, ``eta = v (1 - u)``
    (Jacobian 1 - u); u takes Gauss-Jacobi points for the weight (1 - u), v Gauss-Legendre
    points (Stroud 1971, *Approximate Calculation of Multiple Integrals*). ``m^2`` points with
    ``m = ceil((degree + 1) / 2)``, all interior; weights sum to 1/2.
    """
    if degree < 0:
        raise ValueError(f"rule degree {degree} must be >= 0")
    m = max(1, (degree + 2) // 2)
    t, wt = roots_jacobi(m, 1.0, 0.0)  # weight (1 - t) on [-1, 1]
    s, ws = np.polynomial.legendre.leggauss(m)
    u = 0.5 * (1.0 + t)  # (m,)
    v = 0.5 * (1.0 + s)  # (m,)
    xi = np.repeat(u, m)  # (m*m,)
    eta = np.tile(v, m) * (1.0 - xi)  # (m*m,)
    w = np.outer(0.25 * wt, 0.5 * ws).ravel()  # (m*m,)
    pts = np.column_stack([xi, eta])  # (m*m, 2)
    pts.setflags(write=False)
    w.setflags(write=False)
    return QuadratureRule(pts, w, 2 * m - 1)


def default_harmonic_rule(element: ReferenceElement) -> QuadratureRule:
    """Dunavant rule of degree ``min(2p + 2, 8)``: two degrees above the polynomial part
    of the stiffness, for the N^2/r terms (T3: 6 points, T6: 12, T15: 16)."""
    return triangle_rule(min(2 * element.order + 2, 8))


def elastic_matrix_3d(E, nu) -> NDArray[np.float64]:
    """Isotropic elasticity for ``[r, z, t, rz, zt, tr]`` (engineering shear), kPa.

    ``E`` (kPa) and ``nu`` broadcast to a shape ``S``; the result is ``(*S, 6, 6)``.
    """
    E = np.asarray(E, dtype=np.float64)
    nu = np.asarray(nu, dtype=np.float64)
    lam = E * nu / ((1.0 + nu) * (1.0 - 2.0 * nu))  # S
    mu = E / (2.0 * (1.0 + nu))  # S
    D = np.zeros((*np.broadcast(E, nu).shape, 6, 6))  # (*S, 6, 6)
    D[..., :3, :3] = lam[..., None, None]
    for k in range(3):  # the three normal and the three shear components
        D[..., k, k] += 2.0 * mu
        D[..., k + 3, k + 3] = mu
    return D


def trig_factors(n: int, theta) -> NDArray[np.float64]:
    """Diagonal of ``T_n(theta)``: ``(c, c, c, c, s, s)``, shape ``(*theta.shape, 6)``.

    At n = 0 the last two entries are sin 0 = 0: planes carry the symmetric family only (the
    torsional V_0 is not represented there).
    """
    n = check_harmonic(n)
    th = np.asarray(theta, dtype=np.float64)
    c, s = np.cos(n * th), np.sin(n * th)
    return np.stack([c, c, c, c, s, s], axis=-1)  # (..., 6)


def synthesize(amplitudes: dict[int, NDArray[np.float64]], theta: float) -> NDArray[np.float64]:
    """Cylindrical displacements ``(u_r, u_z, u_t)`` on the plane ``theta`` from nodal
    amplitudes ``{n: (n_nodes, 3) (U, W, V)}``; returns ``(n_nodes, 3)``.

    ``V_0`` (torsion) is added as u_t = V_0 (the antisymmetric n = 0 term).
    """
    out = None
    for n, q in amplitudes.items():
        n = check_harmonic(n)
        q = np.asarray(q, dtype=np.float64)
        f = np.array([np.cos(n * theta), np.cos(n * theta), np.sin(n * theta) if n else 1.0])
        term = q * f[None, :]  # (n_nodes, 3)
        out = term if out is None else out + term
    if out is None:
        raise HarmonicError("synthesize needs at least one harmonic")
    return out


# --------------------------------------------------------------------------- geometry
@dataclass(frozen=True, eq=False)
class HarmonicGeometry:
    """Quadrature-point geometry of a block of cells for harmonic ``n``.

    Attributes
    ----------
    n : int
        Harmonic number.
    B : ndarray (c, q, 6, 3 * n_en)
        Strain-amplitude matrix, local DOFs interleaved (U, W, V) per node, 1/m.
    dV : ndarray (c, q)
        ``w det J r`` in m^3 per radian, **without** the harmonic factor c_n.
    x : ndarray (c, q, 2)
        Quadrature points (r, z), m.
    N : ndarray (q, n_en)
        Shape functions at the quadrature points.
    """

    n: int
    B: NDArray[np.float64]
    dV: NDArray[np.float64]
    x: NDArray[np.float64]
    N: NDArray[np.float64]

    @property
    def n_cells(self) -> int:
        return self.dV.shape[0]

    @property
    def n_qp(self) -> int:
        return self.dV.shape[1]

    @cached_property
    def BtdV(self) -> NDArray[np.float64]:
        """``(B dV)^T`` as ``(c, i, q*6)``, contiguous (internal force and stiffness)."""
        n_c, n_q, n_k, n_i = self.B.shape
        BW = (self.B * self.dV[:, :, None, None]).reshape(n_c, n_q * n_k, n_i)  # (c, q*k, i)
        return np.ascontiguousarray(BW.transpose(0, 2, 1))  # (c, i, q*k)

    def strain(self, u_e: NDArray[np.float64]) -> NDArray[np.float64]:
        """Strain amplitudes ``(c, q, 6)`` from element amplitudes ``u_e (c, i)``."""
        n_c, n_q, n_k, n_i = self.B.shape
        return np.matmul(self.B.reshape(n_c, n_q * n_k, n_i), u_e[..., None]).reshape(
            n_c, n_q, n_k)  # (c, q, 6)

    def stiffness(self, D: NDArray[np.float64]) -> NDArray[np.float64]:
        """``sum_q B^T D B dV``, ``(c, i, i)``, without c_n. ``D`` broadcasts to
        ``(c, q, 6, 6)`` (e.g. ``(6, 6)`` for a uniform material)."""
        DB = np.matmul(D, self.B)  # (c, q, 6, i)
        n_c, n_q, n_k, n_i = self.B.shape
        return np.matmul(self.BtdV, DB.reshape(n_c, n_q * n_k, n_i))  # (c, i, i)

    def internal_force(self, stress: NDArray[np.float64]) -> NDArray[np.float64]:
        """``sum_q B^T sigma dV``, ``(c, i)``, without c_n; ``stress (c, q, 6)`` amplitudes."""
        n_c, n_q, n_k = stress.shape
        return np.matmul(self.BtdV, stress.reshape(n_c, n_q * n_k, 1))[..., 0]  # (c, i)


@dataclass(frozen=True, eq=False)
class RingGeometry:
    """The harmonic-independent part of the geometry of a block of cells.

    Attributes
    ----------
    dN : ndarray (c, q, a, 2)
        Shape function gradients (d/dr, d/dz), 1/m.
    N : ndarray (q, a)
        Shape functions.
    x : ndarray (c, q, 2)
        Quadrature points (r, z), m.
    dV : ndarray (c, q)
        ``w det J r``, m^3 per radian (no c_n).
    """

    dN: NDArray[np.float64]
    N: NDArray[np.float64]
    x: NDArray[np.float64]
    dV: NDArray[np.float64]

    @property
    def n_cells(self) -> int:
        return self.dV.shape[0]

    def harmonic(self, n: int) -> HarmonicGeometry:
        """The :class:`HarmonicGeometry` of harmonic ``n`` (B built from cached parts)."""
        n = check_harmonic(n)
        dN = self.dN
        Nr = self.N[None, :, :] / self.x[..., 0][..., None]  # (c, q, a)  N / r
        n_c, n_q, n_a = Nr.shape
        B = np.zeros((n_c, n_q, 6, 3 * n_a))  # (c, q, 6, i)
        B[:, :, 0, 0::3] = dN[..., 0]
        B[:, :, 1, 1::3] = dN[..., 1]
        B[:, :, 2, 0::3] = Nr
        B[:, :, 3, 0::3] = dN[..., 1]
        B[:, :, 3, 1::3] = dN[..., 0]
        B[:, :, 4, 2::3] = dN[..., 1]
        B[:, :, 5, 2::3] = dN[..., 0] - Nr
        if n:
            B[:, :, 2, 2::3] = n * Nr
            B[:, :, 4, 1::3] = -n * Nr
            B[:, :, 5, 0::3] = -n * Nr
        return HarmonicGeometry(n, B, self.dV, self.x, self.N)


def _check_radius(mesh: Mesh) -> float:
    """Tolerance for r = 0; raises if a node lies at r < 0."""
    size = max(float(np.ptp(mesh.points, axis=0).max()), 1e-300)
    tol = 1e-9 * size
    r = mesh.points[:, 0]
    if np.any(r < -tol):
        k = int(np.argmin(r))
        raise HarmonicError(
            f"node {k} lies at radius x = {r[k]:.6g} m; a harmonic model needs x >= 0 "
            "(x is the radius, the axis is x = 0)"
        )
    return tol


def ring_geometry(mesh: Mesh, rule: QuadratureRule | None = None,
                  cells: NDArray[np.int64] | None = None) -> RingGeometry:
    """Shape functions, gradients, points and ``dV = w det J r`` of ``cells`` (default all).

    Raises :class:`HarmonicError` for nodes at r < 0 or quadrature points at r <= 0, and
    :class:`~femcore.mesh.MeshError` for non-positive Jacobians.
    """
    _check_radius(mesh)
    rule = rule or default_harmonic_rule(mesh.element)
    N, dN, x, detJ = isoparametric_map(mesh, rule, cells)
    r = x[..., 0]  # (c, q)
    if np.any(r <= 0.0):
        k = int(np.flatnonzero((r <= 0.0).any(axis=1))[0])
        raise HarmonicError(
            f"a quadrature point of cell {k} lies at radius r = {r[k].min():.3e} m; harmonic "
            "integrals need r > 0 at every point (mesh in x >= 0, interior rule points)"
        )
    dV = detJ * rule.weights[None, :] * r  # (c, q)
    return RingGeometry(dN, N, x, dV)


def harmonic_geometry(mesh: Mesh, n: int, rule: QuadratureRule | None = None,
                      cells: NDArray[np.int64] | None = None) -> HarmonicGeometry:
    """``B_n (c, q, 6, 3 n_en)`` and ``dV (c, q)`` (no c_n) of ``cells`` for harmonic ``n``."""
    n = check_harmonic(n)
    return ring_geometry(mesh, rule, cells).harmonic(n)


# --------------------------------------------------------------------------- DOFs
@dataclass
class HarmonicDofMap:
    """DOF numbering shared by all harmonics: ``n_nodes`` nodes with (U, W, V), then groups
    of 3-DOF points (a single-point group is a reference point on the axis)."""

    n_nodes: int
    groups: dict[str, NDArray[np.float64]] = field(default_factory=dict)  # name -> (n, 2)

    @property
    def n_dofs(self) -> int:
        return 3 * self.n_nodes + 3 * sum(len(v) for v in self.groups.values())

    def node_dofs(self, nodes, component: int) -> NDArray[np.int64]:
        """DOFs of ``nodes`` in ``component`` (0 = U radial, 1 = W vertical, 2 = V hoop)."""
        if component not in (0, 1, 2):
            raise ConstraintError(f"node component {component!r} must be 0 (U), 1 (W), 2 (V)")
        return 3 * np.asarray(nodes, dtype=np.int64) + component

    def cell_dofs(self, cells: NDArray[np.int64]) -> NDArray[np.int64]:
        """Interleaved DOFs ``(c, 3 * n_en)`` of a connectivity ``(c, n_en)``."""
        cells = np.asarray(cells, dtype=np.int64)
        return (3 * cells[..., None] + np.arange(3)).reshape(cells.shape[0], -1)  # (c, i)

    def add_points(self, name: str, xy) -> NDArray[np.int64]:
        """A group of 3-DOF points at ``xy (n, 2)``; returns their DOFs ``(n, 3)``."""
        if name in self.groups:
            raise ConstraintError(f"point group {name!r} exists already")
        self.groups[name] = np.atleast_2d(np.asarray(xy, dtype=np.float64)).copy()
        return self.point_dofs(name)

    def _first(self, name: str) -> int:
        if name not in self.groups:
            raise ConstraintError(f"no point group {name!r}; known: {list(self.groups)}")
        first = 3 * self.n_nodes
        for k, v in self.groups.items():
            if k == name:
                return first
            first += 3 * len(v)
        raise AssertionError("unreachable")

    def point_dofs(self, name: str) -> NDArray[np.int64]:
        first = self._first(name)
        return first + np.arange(3 * len(self.groups[name]), dtype=np.int64).reshape(-1, 3)

    @property
    def ref_points(self) -> dict[str, float]:
        """Single-point groups (reference points) by name -> their height y_ref."""
        return {k: float(v[0, 1]) for k, v in self.groups.items() if len(v) == 1}

    def ref_dof(self, name: str, component: int) -> int:
        """DOF of a reference point (see the module table for the meaning per harmonic)."""
        if name not in self.ref_points:
            raise ConstraintError(f"no reference point {name!r}; known: {list(self.ref_points)}")
        return self._first(name) + int(component)


# --------------------------------------------------------------------------- blocks
@runtime_checkable
class HarmonicBlock(Protocol):
    """What :class:`HarmonicModel` needs from an element block (soil, ring beam, springs)."""

    element_dofs: NDArray[np.int64]  # (e, i) in the harmonic DOF space

    def stiffness(self, n: int) -> NDArray[np.float64]:
        """Element stiffness ``(e, i, i)`` of harmonic n, **including** c_n."""
        ...


@dataclass(eq=False)
class HarmonicSolidBlock:
    """Cells of one isotropic elastic material, E and nu per quadrature point.

    Attributes
    ----------
    name : str
    cells : (c,) cell indices
    ring : RingGeometry of those cells
    element_dofs : (c, 3 * n_en)
    E : (c, q) Young's modulus, kPa
    nu : (c, q) Poisson's ratio
    """

    name: str
    cells: NDArray[np.int64]
    ring: RingGeometry
    element_dofs: NDArray[np.int64]
    E: NDArray[np.float64]
    nu: NDArray[np.float64]
    _geoms: dict[int, HarmonicGeometry] = field(default_factory=dict, init=False, repr=False)

    def geometry(self, n: int) -> HarmonicGeometry:
        """Cached :class:`HarmonicGeometry` of harmonic n."""
        if n not in self._geoms:
            self._geoms[n] = self.ring.harmonic(n)
        return self._geoms[n]

    @cached_property
    def D(self) -> NDArray[np.float64]:
        """Elastic matrix, ``(6, 6)`` when uniform, else ``(c, q, 6, 6)``."""
        E, nu = self.E, self.nu
        if np.all(E == E.flat[0]) and np.all(nu == nu.flat[0]):
            return elastic_matrix_3d(E.flat[0], nu.flat[0])  # (6, 6)
        return elastic_matrix_3d(E, nu)  # (c, q, 6, 6)

    def stiffness(self, n: int) -> NDArray[np.float64]:
        return harmonic_factor(n) * self.geometry(n).stiffness(self.D)  # (c, i, i)

    def stress(self, n: int, u: NDArray[np.float64]) -> NDArray[np.float64]:
        """Stress amplitudes ``(c, q, 6)`` (kPa) from the full amplitude vector ``u``."""
        eps = self.geometry(n).strain(u[self.element_dofs])  # (c, q, 6)
        return np.einsum("...kl,cql->cqk", self.D, eps)  # (c, q, 6)


@dataclass(eq=False)
class MatrixBlock:
    """Element matrices given per harmonic by a function (springs, ring beams, penalties).

    ``element_dofs (e, i)``; ``matrices(n) -> (e, i, i)`` including the harmonic factor.
    """

    name: str
    element_dofs: NDArray[np.int64]
    matrices: Callable[[int], NDArray[np.float64]]

    def stiffness(self, n: int) -> NDArray[np.float64]:
        K = np.asarray(self.matrices(n), dtype=np.float64)  # (e, i, i)
        if K.shape != (*self.element_dofs.shape, self.element_dofs.shape[1]):
            raise ValueError(f"block {self.name!r}: matrices({n}) has shape {K.shape}, expected "
                             f"{(*self.element_dofs.shape, self.element_dofs.shape[1])}")
        return K


# --------------------------------------------------------------------------- constraints
def axis_nodes(mesh: Mesh) -> NDArray[np.int64]:
    """Nodes on the axis (|r| below 1e-9 of the mesh size), sorted."""
    tol = _check_radius(mesh)
    return np.flatnonzero(np.abs(mesh.points[:, 0]) <= tol)


class HarmonicConstraints:
    """Dirichlet conditions and ties of one harmonic; :meth:`build` adds the axis conditions,
    fixes unused reference components (and V_0 without torsion) and returns a
    :class:`~femcore.dofs.ConstraintMap` (``u = T u_free + g``).
    """

    def __init__(self, model: HarmonicModel, n: int) -> None:
        self.model = model
        self.n = check_harmonic(n, model.n_max)
        self.dofmap = model.dofmap
        self._fixed: dict[int, float] = {}
        self._ties: list[tuple[NDArray, NDArray, NDArray]] = []  # (slaves, masters, coefs)
        self._is_slave = np.zeros(self.dofmap.n_dofs, dtype=bool)

    # ------------------------------------------------------------ user constraints
    def fix(self, dofs, values=0.0) -> None:
        """Prescribe ``dofs`` to ``values`` (amplitudes of this harmonic)."""
        dofs = np.atleast_1d(np.asarray(dofs, dtype=np.int64))
        values = np.broadcast_to(np.asarray(values, dtype=np.float64), dofs.shape)
        self._fixed.update(zip(dofs.tolist(), values.tolist(), strict=True))

    def fix_nodes(self, nodes, components=(0, 1, 2), value=0.0) -> None:
        """Prescribe the components (0 = U, 1 = W, 2 = V) of ``nodes``; ``value`` scalar or
        ``(len(nodes),)``."""
        for comp in components:
            self.fix(self.dofmap.node_dofs(nodes, comp), value)

    def tie(self, slaves, masters, coefs) -> None:
        """``u[slave_m] = sum_p coefs[m, p] u[masters[m, p]]``; masters must not be slaves."""
        slaves = np.atleast_1d(np.asarray(slaves, dtype=np.int64))
        masters = np.asarray(masters, dtype=np.int64).reshape(slaves.size, -1)
        coefs = np.asarray(coefs, dtype=np.float64).reshape(masters.shape)
        if np.any(self._is_slave[slaves]) or np.unique(slaves).size != slaves.size:
            bad = slaves[self._is_slave[slaves]]
            raise ConstraintError(f"DOF {int(bad[0]) if bad.size else int(slaves[0])} is "
                                  "tied twice")
        self._is_slave[slaves] = True
        self._ties.append((slaves, masters, coefs))

    def tie_rigid(self, nodes, ref: str, contact: str = "bonded") -> None:
        """Tie ``nodes`` to reference point ``ref`` for this harmonic (module table).

        ``contact``: ``"bonded"`` ties all components, ``"smooth"`` the vertical W only.
        """
        if contact not in ("bonded", "smooth"):
            raise ConstraintError(f"contact {contact!r} must be 'bonded' or 'smooth'")
        dm, n = self.dofmap, self.n
        nodes = np.unique(np.asarray(nodes, dtype=np.int64))
        xy = self.model.mesh.points[nodes]  # (m, 2)
        y_ref = dm.ref_points.get(ref)
        if y_ref is None:
            raise ConstraintError(f"no reference point {ref!r}; known: {list(dm.ref_points)}")
        Dh, Wv, Rot = (dm.ref_dof(ref, k) for k in range(3))
        ones = np.ones(nodes.size)
        dz = xy[:, 1] - y_ref  # (m,)
        dU, dW, dV = (dm.node_dofs(nodes, k) for k in range(3))
        if n == 0:
            self.tie(dW, np.full((nodes.size, 1), Wv), ones[:, None])
            if contact == "bonded":
                self.fix(dU, 0.0)
                if self.model.torsion:
                    self.tie(dV, np.full((nodes.size, 1), Rot), xy[:, :1])
        elif n == 1:
            self.tie(dW, np.full((nodes.size, 1), Rot), -xy[:, :1])
            if contact == "bonded":
                m2 = np.tile([Dh, Rot], (nodes.size, 1))  # (m, 2)
                self.tie(dU, m2, np.column_stack([ones, dz]))
                self.tie(dV, m2, np.column_stack([-ones, -dz]))
        else:
            self.fix(dW, 0.0)
            if contact == "bonded":
                self.fix(dU, 0.0)
                self.fix(dV, 0.0)

    # ------------------------------------------------------------ build
    def _tie_row(self, dof: int) -> tuple[NDArray, NDArray]:
        for slaves, masters, coefs in self._ties:
            hit = np.flatnonzero(slaves == dof)
            if hit.size:
                return masters[hit[0]], coefs[hit[0]]
        raise AssertionError("unreachable")

    def _apply_axis(self, fixed: dict[int, float]) -> list[tuple]:
        """Axis conditions as further fixes (into ``fixed``) and ties (returned)."""
        dm, n = self.dofmap, self.n
        nodes = self.model.axis_nodes
        if nodes.size == 0:
            return []
        constrained = self._is_slave.copy()
        constrained[np.fromiter(fixed.keys(), dtype=np.int64, count=len(fixed))] = True
        zero_comps = {0: (_U, _V) if self.model.torsion else (_U,), 1: (_W,)}.get(n, (_U, _W, _V))
        for comp in zero_comps:  # zero conditions: fix where nothing else constrains the DOF
            d = dm.node_dofs(nodes, comp)
            fixed.update(dict.fromkeys(d[~constrained[d]].tolist(), 0.0))
        ties: list[tuple] = []
        if n != 1:
            return ties
        dU, dV = dm.node_dofs(nodes, _U), dm.node_dofs(nodes, _V)
        cu, cv = constrained[dU], constrained[dV]
        both_free = ~cu & ~cv
        if np.any(both_free):  # V = -U
            ties.append((dV[both_free], dU[both_free][:, None], -np.ones((both_free.sum(), 1))))
        # one side constrained (rare: a user condition on one component of an axis node)
        for a, b in np.column_stack([dU, dV])[cu ^ cv].tolist():
            known, other = (a, b) if constrained[a] else (b, a)
            if known in fixed:
                fixed[other] = -fixed[known]
            else:
                masters, coefs = self._tie_row(known)
                ties.append((np.array([other]), masters[None, :], -coefs[None, :]))
        return ties

    def build(self) -> ConstraintMap:
        """The constraint map of this harmonic, axis conditions included.

        Raises :class:`AxisConditionError` when the user constraints force a non-zero value
        (or a free motion) where the axis conditions require zero.
        """
        dm, model, n = self.dofmap, self.model, self.n
        if self._is_slave.size != dm.n_dofs:
            raise ConstraintError("DOFs were added to the model after these constraints were "
                                  "started; create the constraints again")
        fixed = dict(self._fixed)
        if self._is_slave[np.fromiter(fixed.keys(), dtype=np.int64, count=len(fixed))].any():
            d = [k for k in fixed if self._is_slave[k]][0]
            raise ConstraintError(f"DOF {d} is both tied and prescribed; prescribe the "
                                  "reference point instead")
        if n == 0 and not model.torsion:  # V_0 is not part of the symmetric family
            d = dm.node_dofs(np.arange(dm.n_nodes), _V)
            if np.any(self._is_slave[d]):
                raise ConstraintError("V_0 (torsion) is tied, but the model was built with "
                                      "torsion=False")
            keys = np.fromiter(fixed.keys(), dtype=np.int64, count=len(fixed))
            vals = np.fromiter(fixed.values(), dtype=np.float64, count=len(fixed))
            bad = np.flatnonzero(np.isin(keys, d) & (vals != 0.0))
            if bad.size:
                k = int(keys[bad[0]])
                raise ConstraintError(f"DOF {k} (V_0) is prescribed to {fixed[k]}, but the "
                                      "model was built with torsion=False")
            fixed.update(dict.fromkeys(d.tolist(), 0.0))
        ties = list(self._ties)
        ties += self._apply_axis(fixed)
        master = np.zeros(dm.n_dofs, dtype=bool)  # masters of ties
        for _, masters, _ in ties:
            master[masters.ravel()] = True
        in_block = np.zeros(dm.n_dofs, dtype=bool)  # DOFs of element blocks
        for b in model.blocks:
            in_block[np.ravel(b.element_dofs)] = True
        active = _active_ref_components(n, model.torsion)
        for name in dm.ref_points:  # reference components without stiffness get fixed
            for k in range(3):
                d = dm.ref_dof(name, k)
                if d in fixed or self._is_slave[d] or master[d]:
                    continue
                if k not in active or not in_block[d]:
                    fixed[d] = 0.0
        cons = Constraints(dm, model.mesh.points)
        if fixed:
            keys = np.fromiter(fixed.keys(), dtype=np.int64, count=len(fixed))
            cons.fix(keys, np.fromiter(fixed.values(), dtype=np.float64, count=len(fixed)))
        for slaves, masters, coefs in ties:
            cons.tie(slaves, masters, coefs)
        cmap = cons.build()
        _verify_axis(model, n, cmap)
        return cmap


def _active_ref_components(n: int, torsion: bool) -> tuple[int, ...]:
    """Reference-point components that carry a rigid-body motion in harmonic n."""
    if n == 0:
        return (REF_VERTICAL, REF_ROTATION) if torsion else (REF_VERTICAL,)
    return (REF_HORIZONTAL, REF_ROTATION) if n == 1 else ()


def _verify_axis(model: HarmonicModel, n: int, cmap: ConstraintMap) -> None:
    """Every axis condition must hold for every admissible master vector."""
    nodes = model.axis_nodes
    if nodes.size == 0:
        return
    dm = model.dofmap
    rows = {0: [(_U,), (_V,)] if model.torsion else [(_U,)], 1: [(_W,), (_U, _V)]}.get(
        n, [(_U,), (_W,), (_V,)])
    T = cmap.T_tie  # (n_full, n_master)
    is_fixed = np.zeros(T.shape[1], dtype=bool)
    is_fixed[cmap.fixed] = True
    g_master = np.zeros(T.shape[1])
    g_master[cmap.fixed] = cmap.prescribed_values
    scale = max(float(np.ptp(model.mesh.points, axis=0).max()), 1.0)
    names = {_U: "U", _W: "W", _V: "V"}
    for comps in rows:
        S = T[dm.node_dofs(nodes, comps[0])]  # (m, n_master)
        for c in comps[1:]:
            S = S + T[dm.node_dofs(nodes, c)]
        S = sp.csr_matrix(S)
        free_part = abs(S[:, ~is_fixed]).sum(axis=1).A.ravel()  # (m,)
        value = S @ g_master  # (m,)
        bad = np.flatnonzero((free_part > 1e-9 * scale)
                             | (np.abs(value) > 1e-9 * max(1.0, np.abs(g_master).max())))
        if bad.size:
            k = int(nodes[bad[0]])
            what = " + ".join(f"{names[c]}_{n}" for c in comps)
            raise AxisConditionError(
                f"node {k} lies on the axis, where {what} must be 0 for harmonic n = {n}, but "
                f"the constraints give {what} = {value[bad[0]]:.6g}"
                + (" plus a free motion" if free_part[bad[0]] > 1e-9 * scale else "")
                + "; remove the conflicting condition (axis conditions are applied "
                "automatically)"
            )


def check_axis_conditions(model: HarmonicModel, n: int, u: NDArray[np.float64],
                          rtol: float = 1e-9) -> None:
    """Raise :class:`AxisConditionError` if amplitudes ``u (n_dofs,)`` of harmonic ``n``
    violate the axis conditions by more than ``rtol`` times the largest nodal amplitude."""
    n = check_harmonic(n, model.n_max)
    nodes = model.axis_nodes
    if nodes.size == 0:
        return
    q = np.asarray(u)[: 3 * model.mesh.n_nodes].reshape(-1, 3)  # (n_nodes, 3)
    a = q[nodes]  # (m, 3)
    if n == 0:
        checks = {"U": a[:, _U]} | ({"V": a[:, _V]} if model.torsion else {})
    elif n == 1:
        checks = {"W": a[:, _W], "U + V": a[:, _U] + a[:, _V]}
    else:
        checks = {"U": a[:, _U], "W": a[:, _W], "V": a[:, _V]}
    tol = rtol * max(float(np.abs(q).max()), 1e-300)
    for what, val in checks.items():
        if np.any(np.abs(val) > tol):
            k = int(np.argmax(np.abs(val)))
            raise AxisConditionError(
                f"axis node {int(nodes[k])}: {what} = {val[k]:.6g} for harmonic n = {n}, "
                f"allowed |{what}| <= {tol:.3g} (must vanish on r = 0)"
            )


# --------------------------------------------------------------------------- model
@dataclass
class HarmonicSolution:
    """Solution of one harmonic for one or more load cases.

    Attributes
    ----------
    n : int
    u : (n_dofs,) or (m, n_dofs) amplitudes (m load cases)
    reactions : same shape, internal minus external force (generalised, c_n included)
    seconds : dict of wall times: ``assembly``, ``reduction``, ``factorization``, ``solve``
    """

    n: int
    u: NDArray[np.float64]
    reactions: NDArray[np.float64]
    seconds: dict[str, float] = field(default_factory=dict)

    def nodal(self, n_nodes: int) -> NDArray[np.float64]:
        """Node amplitudes ``(n_nodes, 3)`` (U, W, V) (last case when several)."""
        u = self.u if self.u.ndim == 1 else self.u[-1]
        return u[: 3 * n_nodes].reshape(-1, 3)


class HarmonicModel:
    """Mesh + solid/element blocks + DOFs for harmonics ``0..n_max``, one CSR pattern.

    Parameters
    ----------
    mesh : Mesh in x >= 0 (x = r)
    n_max : int
        Highest harmonic that may be solved (>= 0).
    rule : QuadratureRule, optional
        Default :func:`default_harmonic_rule`.
    torsion : bool
        Keep V_0 as the torsional unknown (elastic only); False fixes it.
    """

    def __init__(self, mesh: Mesh, n_max: int = 1, rule: QuadratureRule | None = None,
                 torsion: bool = False) -> None:
        self.n_max = check_harmonic(n_max)
        _check_radius(mesh)
        self.mesh = mesh
        self.rule = rule or default_harmonic_rule(mesh.element)
        self.torsion = bool(torsion)
        self.dofmap = HarmonicDofMap(mesh.n_nodes)
        self.blocks: list = []
        self._pattern: SparsePattern | None = None
        self.axis_nodes = axis_nodes(mesh)

    # ------------------------------------------------------------ building
    def add_block(self, name: str, cells: NDArray[np.int64] | str | None = None, *,
                  E=None, nu=None, material=None) -> HarmonicSolidBlock:
        """Add cells (named set, indices or all) of an isotropic elastic material.

        Either ``material`` (an object with ``nu`` and ``young_at(x)``, e.g.
        :class:`materials.LinearElastic` with its depth gradient) or ``E`` and ``nu``: each a
        number, an array ``(c, q)``, or a function of the points ``x (c, q, 2) -> (c, q)``.
        """
        if cells is None:
            cells = np.arange(self.mesh.n_cells)
        elif isinstance(cells, str):
            cells = self.mesh.cell_sets[cells]
        cells = np.asarray(cells, dtype=np.int64)
        ring = ring_geometry(self.mesh, self.rule, cells)
        if material is not None:
            E, nu = material.young_at, material.nu
        if E is None or nu is None:
            raise ValueError(f"block {name!r}: give material=..., or both E and nu")
        shape = ring.dV.shape

        def per_point(v):
            v = v(ring.x) if callable(v) else v
            return np.broadcast_to(np.asarray(v, dtype=np.float64), shape).copy()  # (c, q)

        E_q, nu_q = per_point(E), per_point(nu)
        if not np.all(np.isfinite(E_q) & (E_q > 0.0)):
            raise ValueError(f"block {name!r}: E must be > 0 kPa, min is {E_q.min():.6g}")
        if not np.all((nu_q > -1.0) & (nu_q < 0.5)):
            raise ValueError(f"block {name!r}: nu must satisfy -1 < nu < 0.5, got "
                             f"{nu_q.min():.6g}..{nu_q.max():.6g}")
        block = HarmonicSolidBlock(name, cells, ring, self.dofmap.cell_dofs(self.mesh.cells[cells]),
                                   E_q, nu_q)
        self.blocks.append(block)
        self._pattern = None
        return block

    def add_element_block(self, block: HarmonicBlock) -> None:
        """Add a block with ``element_dofs (e, i)`` and ``stiffness(n) -> (e, i, i)``."""
        self.blocks.append(block)
        self._pattern = None

    def add_reference_point(self, name: str, y_ref: float = 0.0) -> int:
        """A rigid-body reference point on the axis at height ``y_ref``; its first DOF."""
        self._pattern = None
        return int(self.dofmap.add_points(name, np.array([[0.0, float(y_ref)]]))[0, 0])

    def add_points(self, name: str, xy) -> NDArray[np.int64]:
        """A group of 3-DOF points (e.g. ring-beam nodes) ``xy (m, 2)``; DOFs ``(m, 3)``."""
        self._pattern = None
        return self.dofmap.add_points(name, xy)

    def constraints(self, n: int) -> HarmonicConstraints:
        return HarmonicConstraints(self, n)

    @property
    def n_dofs(self) -> int:
        return self.dofmap.n_dofs

    @property
    def pattern(self) -> SparsePattern:
        """CSR pattern of every block (the same for all harmonics), built once."""
        if self._pattern is None:
            extra = np.arange(3 * self.mesh.n_nodes, self.n_dofs)[:, None]  # (p, 1) diagonal
            self._pattern = SparsePattern(self.n_dofs,
                                          [*(b.element_dofs for b in self.blocks), extra])
        return self._pattern

    # ------------------------------------------------------------ operators
    def element_stiffness(self, n: int) -> list[NDArray[np.float64]]:
        """Element matrices of every block (c_n included) and zeros for the point DOFs."""
        n = check_harmonic(n, self.n_max)
        return [*(b.stiffness(n) for b in self.blocks),
                np.zeros(self.n_dofs - 3 * self.mesh.n_nodes)]

    def stiffness(self, n: int) -> sp.csr_matrix:
        """Global stiffness of harmonic n (CSR on the shared pattern)."""
        return self.pattern.assemble(self.element_stiffness(n))

    def body_force(self, n: int, b) -> NDArray[np.float64]:
        """Load of a body force with amplitudes ``(b_r, b_z, b_t)`` (kN/m^3): ``(3,)`` or a
        function of ``x (c, q, 2) -> (c, q, 3)``. Gravity is n = 0, ``(0, -gamma, 0)``."""
        n = check_harmonic(n, self.n_max)
        f = np.zeros(self.n_dofs)
        for blk in self.blocks:
            if not isinstance(blk, HarmonicSolidBlock):
                continue
            ring = blk.ring
            bq = b(ring.x) if callable(b) else b
            bq = np.broadcast_to(np.asarray(bq, dtype=np.float64), (*ring.dV.shape, 3))
            f_e = np.einsum("qa,cqd,cq->cad", ring.N, bq, ring.dV)  # (c, a, 3)
            f += assemble_vector(self.n_dofs, blk.element_dofs, f_e.reshape(len(f_e), -1))
        return harmonic_factor(n) * f

    def edge_traction(self, n: int, edges: NDArray[np.int64] | str, t) -> NDArray[np.float64]:
        """Load of a traction with amplitudes ``(t_r, t_z, t_t)`` (kPa) on mesh edges (an
        edge set name or ``(e, order + 1)`` connectivity): ``(3,)`` or a function of
        ``x (e, q, 2) -> (e, q, 3)``; integrated with ``r ds`` and c_n."""
        n = check_harmonic(n, self.n_max)
        if isinstance(edges, str):
            edges = self.mesh.edge_sets[edges]
        edges = np.asarray(edges, dtype=np.int64)
        elem = self.mesh.line_element
        rule = line_rule(2 * elem.order + 2)
        N = elem.shape(rule.points)  # (q, a)
        dN = elem.shape_gradients(rule.points)[..., 0]  # (q, a)
        X = self.mesh.points[edges]  # (e, a, 2)
        x = np.einsum("qa,ead->eqd", N, X)  # (e, q, 2)
        jac = np.linalg.norm(np.einsum("qa,ead->eqd", dN, X), axis=-1)  # (e, q)
        ds_r = jac * rule.weights[None, :] * x[..., 0]  # (e, q)
        tq = t(x) if callable(t) else t
        tq = np.broadcast_to(np.asarray(tq, dtype=np.float64), (*ds_r.shape, 3))  # (e, q, 3)
        f_e = np.einsum("qa,eqd,eq->ead", N, tq, ds_r)  # (e, a, 3)
        return harmonic_factor(n) * assemble_vector(
            self.n_dofs, self.dofmap.cell_dofs(edges), f_e.reshape(len(f_e), -1))

    # ------------------------------------------------------------ solution
    def solve(self, n: int, cmap: ConstraintMap, f_ext: NDArray[np.float64] | None = None,
              prescribed: NDArray[np.float64] | None = None,
              backend: str = "auto") -> HarmonicSolution:
        """Linear solve of harmonic n; one factorisation for all load cases.

        Parameters
        ----------
        cmap : ConstraintMap from :meth:`HarmonicConstraints.build`
        f_ext : (n_dofs,) or (m, n_dofs), optional
            External loads (from :meth:`edge_traction`, :meth:`body_force`, nodal forces).
        prescribed : (n_fixed,) or (m, n_fixed), optional
            Values of the prescribed DOFs per case (default: the values given at build).
        """
        n = check_harmonic(n, self.n_max)
        seconds: dict[str, float] = {}
        t0 = time.perf_counter()
        Ke = self.element_stiffness(n)
        K = self.pattern.assemble(Ke)
        t1 = time.perf_counter()
        Kr = cmap.reduced_from_elements(self.pattern, Ke)
        t2 = time.perf_counter()
        lu = factorize(Kr, backend)
        t3 = time.perf_counter()
        seconds.update(assembly=t1 - t0, reduction=t2 - t1, factorization=t3 - t2)
        single = (f_ext is None or np.ndim(f_ext) == 1) and (
            prescribed is None or np.ndim(prescribed) == 1)
        P = np.atleast_2d(cmap.prescribed_values if prescribed is None else prescribed)
        F = np.atleast_2d(np.zeros(self.n_dofs) if f_ext is None else f_ext)
        m = max(len(P), len(F))
        P = np.broadcast_to(P, (m, P.shape[1]))  # (m, n_fixed)
        F = np.broadcast_to(F, (m, self.n_dofs))  # (m, n_dofs)
        keep = cmap.prescribed_values
        U = np.empty((m, self.n_dofs))  # (m, n_dofs)
        try:
            for j in range(m):  # load cases
                cmap.set_prescribed(P[j])
                rhs = -cmap.reduce_vector(K @ cmap.g - F[j])
                U[j] = cmap.expand(lu.solve(rhs))
        finally:
            cmap.set_prescribed(keep)
        if not np.all(np.isfinite(U)):
            raise SolverError("the harmonic solve produced non-finite values (singular?)")
        R = (K @ U.T).T - F  # (m, n_dofs)
        seconds["solve"] = time.perf_counter() - t3
        if single:
            U, R = U[0], R[0]
        return HarmonicSolution(n, U, R, seconds)


# --------------------------------------------------------------------------- rigid bodies
@dataclass(frozen=True)
class RigidStiffness:
    """Static stiffness of a rigid body tied to a node set (3D totals).

    K_V : vertical, kN/m (n = 0)
    K_H : horizontal, kN/m (n = 1; nan for smooth contact)
    K_R : rocking, kNm/rad (n = 1; M conjugate to alpha, +x side down)
    K_HR : horizontal force per unit rotation, kN/rad (nan for smooth contact)
    K_RH : moment per unit horizontal translation, kNm/m (= K_HR by reciprocity)
    K_T : torsion, kNm/rad (bonded contact in a model with ``torsion=True``, else nan)
    """

    K_V: float
    K_H: float
    K_R: float
    K_HR: float
    K_RH: float
    K_T: float = float("nan")


def rigid_stiffness(model: HarmonicModel, nodes, supports, contact: str = "bonded",
                    y_ref: float = 0.0, ref: str = "rigid_body",
                    backend: str = "auto") -> RigidStiffness:
    """K_V (n = 0), K_H, K_R, K_HR (n = 1) and K_T of a rigid body tied to ``nodes``.

    Parameters
    ----------
    model : HarmonicModel with n_max >= 1 (a reference point ``ref`` at ``y_ref`` is added
        if absent)
    nodes : (m,) node indices of the body contact (e.g. a footing's surface nodes)
    supports : (k,) node indices fixed in every component and harmonic, or a function
        ``supports(cons: HarmonicConstraints)`` applying the far-field conditions
    contact : "bonded" or "smooth" (vertical tie only)
    """
    if model.n_max < 1:
        raise HarmonicError(f"rigid_stiffness needs harmonics 0..1, the model has 0..{model.n_max}")
    dm = model.dofmap
    if ref not in dm.ref_points:
        model.add_reference_point(ref, y_ref)

    def constraints(n: int) -> HarmonicConstraints:
        cons = model.constraints(n)
        if callable(supports):
            supports(cons)
        else:
            cons.fix_nodes(supports)
        cons.tie_rigid(nodes, ref, contact)
        return cons

    # n = 0: settlement w (and twist phi)
    cons = constraints(0)
    w, rot = dm.ref_dof(ref, REF_VERTICAL), dm.ref_dof(ref, REF_ROTATION)
    torsion = model.torsion and contact == "bonded"
    cons.fix([w, rot] if torsion else [w], 0.0)
    cmap = cons.build()
    cases = [{w: 1.0}, {rot: 1.0}] if torsion else [{w: 1.0}]
    sol = model.solve(0, cmap, prescribed=prescribed_cases(cmap, cases))
    R0 = np.atleast_2d(sol.reactions)
    K_V = cmap.generalized_at(R0[0], w)
    K_T = cmap.generalized_at(R0[1], rot) if torsion else float("nan")

    # n = 1: translation Delta and rotation alpha
    cons = constraints(1)
    h = dm.ref_dof(ref, REF_HORIZONTAL)
    if contact == "bonded":
        cons.fix([h, rot], 0.0)
        cmap = cons.build()
        sol = model.solve(1, cmap, prescribed=prescribed_cases(cmap, [{h: 1.0}, {rot: 1.0}]))
        R1 = sol.reactions
        K_H, K_RH = cmap.generalized_at(R1[0], h), cmap.generalized_at(R1[0], rot)
        K_HR, K_R = cmap.generalized_at(R1[1], h), cmap.generalized_at(R1[1], rot)
    else:
        cons.fix([rot], 1.0)
        cmap = cons.build()
        sol = model.solve(1, cmap)
        K_R = cmap.generalized_at(sol.reactions, rot)
        K_H = K_HR = K_RH = float("nan")
    return RigidStiffness(K_V, K_H, K_R, K_HR, K_RH, K_T)


def prescribed_cases(cmap: ConstraintMap,
                     cases: Sequence[dict[int, float]]) -> NDArray[np.float64]:
    """Prescribed-value vectors ``(m, n_fixed)``: zeros except the given full DOFs."""
    P = np.zeros((len(cases), cmap.fixed.size))  # (m, n_fixed)
    for j, case in enumerate(cases):
        for dof, val in case.items():
            P[j, cmap.fixed_position(dof)] = val
    return P
