"""Independent 3D linear-elastic reference stiffnesses, solved with scikit-fem.

These are references for the harmonic (Fourier) axisymmetric model: full 3D solids of
quadratic tetrahedra (``ElementTetP2``, vector elasticity) assembled by scikit-fem
(Gustafsson & McBain 2020, "scikit-fem: A Python package for finite element assembly",
JOSS 5(52), 2369) on gmsh meshes from :mod:`meshing.solid3d`. scikit-fem is optional at run
time: it is imported inside the functions only.

Axes (3D only): x horizontal, y horizontal, **z vertical up**, ground at z = 0. Loading acts
in the x-z plane, so only the half y >= 0 is modelled, with u_y = 0 on the symmetry plane
y = 0; forces, moments and stiffnesses returned are those of the **full** body (twice the
half model's). Generalised motion of a rigid body (footing or cap) about the reference point
(0, 0, 0): translations U (along x) and W (along z, up), rotation theta about the y-axis,
positive when the +x side goes down (the project's clockwise convention):

    u_x = U + theta z,   u_y = 0,   u_z = W - theta x.

The conjugate forces are H (along x), V (along z) and the moment M = sum(z F_x - x F_z).
The rigid constraint is a Dirichlet condition: the rigid field is prescribed on the tied
nodes and the reactions are taken from the residual K u there. Units: kN, m, kPa; K_V and
K_H in kN/m, K_R in kNm/rad, K_HR in kN/rad (= kNm/m).

Boundary conditions of the soil: base z = -H fixed (rigid base), lateral cylinder fixed (all
components zero; the measured effect of its radius is stated in the function docstrings),
ground surface free. Cases:

* :func:`footing_stiffness`: rigid circular footing on the surface of a layer over a rigid
  base, smooth (only u_z tied) or bonded (all components tied), compared with
  :func:`gazetas_layer`.
* :func:`pile_group_stiffness`: a rigid cap (not touching the soil) on N solid circular
  piles on a ring, heads at z = 0 tied to the cap; :func:`single_pile_stiffness` for N = 1,
  compared with :func:`randolph_wroth_pile`; :func:`interaction_estimate` superposes single
  pile stiffnesses with interaction factors (Randolph & Wroth 1979).

Linear solvers, measured on 2 idle cores for the three rigid-body load cases of one
constraint set (seconds; ``splu`` SuperLU with the MMD(A^T+A) ordering, ``spsolve`` its
default COLAMD ordering, ``cg`` Jacobi-preconditioned CG to rtol 1e-10, ``amg`` CG
preconditioned by pyamg smoothed aggregation with the six rigid-body modes, pyamg not being
a dependency; all agree to < 1e-10 relative):

========================================  =======  =====  =======  =====  =====
case                                      DOFs     splu   spsolve  cg     amg
========================================  =======  =====  =======  =====  =====
footing, edge R/16, far R/1.5 (default)   32,007   2.3    4.9      1.2    1.7
footing, edge R/24                        42,585   9.7    10.2     1.9    2.4
footing, edge R/16, far R/4               238,791  1217   --       61     45.5
4 piles, h = d at the piles               22,293   1.9    5.6      2.7    1.7
4 piles, h = 0.7 d (default)              31,053   5.5    15.2     4.7    2.4
4 piles, h = 0.5 d                        46,137   13.5   34.0     8.4    4.5
========================================  =======  =====  =======  =====  =====

Jacobi-CG is the default for the homogeneous footing, SuperLU for the pile groups (the
pile/soil contrast E_p/G = 1000 costs CG many iterations; SuperLU's time is also the least
sensitive to other processes on the machine: CG ran 3-12x slower while another job used the
cores, SuperLU about 1x). Direct fill-in grows fast: beyond ~50k DOFs use ``cg`` or ``amg``.

Run: ``python -m benchmarks.reference3d [--quick] [--json FILE]``.
"""

from __future__ import annotations

import argparse
import json
import time

import numpy as np
import scipy.sparse.linalg as sla
from numpy.typing import NDArray

__all__ = ["footing_stiffness", "pile_group_stiffness", "single_pile_stiffness",
           "gazetas_layer", "gazetas_pile", "randolph_wroth_pile", "interaction_factor",
           "interaction_estimate", "rigid_modes", "rigid_body_modes", "solve_rigid_ties",
           "elasticity_matrix", "main"]

SOLVERS = ("splu", "spsolve", "cg", "amg")


# --------------------------------------------------------------------------- references


def gazetas_layer(G: float, nu: float, radius: float, depth: float) -> dict[str, float]:
    """Static stiffnesses of a rigid circular surface footing on a layer over a rigid base.

    Gazetas (1991), "Formulas and charts for impedances of surface and embedded
    foundations", J. Geotech. Eng. 117(9) (from memory): K_V = 4GR/(1-nu) (1 + 1.28 R/H),
    K_H = 8GR/(2-nu) (1 + R/(2H)), K_R = 8GR^3/(3(1-nu)) (1 + R/(6H)). The half-space values
    (H -> infinity) are exact for a smooth footing (vertical: Boussinesq; rocking: Borowicka)
    and close for a bonded one; the layer factors are approximate fits.

    Parameters
    ----------
    G : float
        Shear modulus (kPa).
    nu : float
        Poisson's ratio.
    radius, depth : float
        Footing radius R and layer depth H (m).

    Returns
    -------
    dict
        ``K_V``, ``K_H`` (kN/m) and ``K_R`` (kNm/rad).
    """
    R, H = radius, depth
    return {"K_V": 4 * G * R / (1 - nu) * (1 + 1.28 * R / H),
            "K_H": 8 * G * R / (2 - nu) * (1 + R / (2 * H)),
            "K_R": 8 * G * R**3 / (3 * (1 - nu)) * (1 + R / (6 * H))}


def randolph_wroth_pile(G: float, nu: float, r0: float, length: float,
                        E_pile: float) -> float:
    """Axial head stiffness P/w (kN/m) of a compressible pile in homogeneous soil.

    Randolph & Wroth (1978), "Analysis of deformation of vertically loaded piles",
    J. Geotech. Eng. Div. 104(GT12) (from memory):
    P/(w G r0) = [4/(1-nu) + (2 pi/zeta)(tanh(mu L)/(mu L))(L/r0)] /
    [1 + (1/(pi lambda))(4/(1-nu))(tanh(mu L)/(mu L))(L/r0)],
    zeta = ln(r_m/r0), r_m = 2.5 L (1-nu), mu L = (L/r0) sqrt(2/(zeta lambda)),
    lambda = E_p/G. E.g. L/r0 = 20, lambda = 1000, nu = 0.3 gives 37.36.

    Parameters
    ----------
    G : float
        Soil shear modulus (kPa).
    nu : float
        Soil Poisson's ratio.
    r0, length : float
        Pile radius and length (m).
    E_pile : float
        Young's modulus of the pile (kPa).
    """
    lam = E_pile / G
    zeta = np.log(2.5 * length * (1 - nu) / r0)
    mul = (length / r0) * np.sqrt(2.0 / (zeta * lam))
    t = np.tanh(mul) / mul * length / r0
    return float(G * r0 * (4 / (1 - nu) + 2 * np.pi / zeta * t)
                 / (1 + 4 / (np.pi * lam * (1 - nu)) * t))


def randolph_lateral_pile(G: float, nu: float, diameter: float,
                          E_pile: float) -> dict[str, float]:
    """Head stiffness of a flexible pile under lateral load in homogeneous soil.

    Randolph (1981), "The response of flexible piles to lateral loading", Geotechnique
    31(2) (from memory): with G* = G (1 + 3 nu / 4), l_c = d (E_p / G*)^(2/7) and
    a = l_c / 2, the head flexibilities (rho_c = 1) are
    u = (E_p/G*)^(1/7) / G* [0.27 H / a + 0.3 M / a^2],
    theta = (E_p/G*)^(1/7) / G* [0.3 H / a^2 + 0.8 M / a^3]; inverted to the stiffness with
    the head translation and rotation as independent DOFs (a fixed head's K_H = K[0, 0]).
    Valid for piles longer than l_c.

    Returns
    -------
    dict
        ``K_H`` (kN/m, rotation held), ``K_R`` (kNm/rad, translation held), ``K_H_free``
        (kN/m, free head), ``l_c`` (m).
    """
    Gs = G * (1 + 0.75 * nu)
    ratio = E_pile / Gs
    lc = diameter * ratio ** (2 / 7)
    a = lc / 2
    F = ratio ** (1 / 7) / Gs * np.array([[0.27 / a, 0.3 / a**2], [0.3 / a**2, 0.8 / a**3]])
    K = np.linalg.inv(F)
    return {"K_H": float(K[0, 0]), "K_R": float(K[1, 1]), "K_H_free": float(1 / F[0, 0]),
            "l_c": float(lc)}


def gazetas_pile(E_soil: float, E_pile: float, diameter: float) -> dict[str, float]:
    """Head stiffness matrix of a flexible pile in homogeneous soil (rotation held / free).

    Gazetas (1991), "Foundation vibrations", ch. 15 of *Foundation Engineering Handbook*,
    2nd ed. (Fang, ed.), Van Nostrand Reinhold (from memory): K_HH = d E_s (E_p/E_s)^0.21,
    K_RR = 0.15 d^3 E_s (E_p/E_s)^0.75, K_HR = -0.22 d^2 E_s (E_p/E_s)^0.50 (head
    translation and rotation as independent DOFs), for piles longer than the active length
    ~2 d (E_p/E_s)^0.25. The sign of K_HR is that of this module's convention (checked
    independently in the tests), the magnitude is the formula's.

    Parameters
    ----------
    E_soil, E_pile : float
        Young's moduli of soil and pile (kPa).
    diameter : float
        Pile diameter d (m).

    Returns
    -------
    dict
        ``K_H`` (kN/m), ``K_R`` (kNm/rad), ``K_HR`` (kN/rad).
    """
    r = E_pile / E_soil
    d, E = diameter, E_soil
    return {"K_H": d * E * r**0.21, "K_R": 0.15 * d**3 * E * r**0.75,
            "K_HR": -0.22 * d**2 * E * r**0.5}


def interaction_factor(s: NDArray, r0: float, length: float, nu: float) -> NDArray:
    """Axial interaction factor alpha(s) = ln(r_m/s) / ln(r_m/r0) for s < r_m, else 0.

    Randolph & Wroth (1979), "An analysis of the vertical deformation of pile groups",
    Geotechnique 29(4) (from memory), with r_m = 2.5 L (1 - nu) as in the 1978 single-pile
    solution; derived for stiff piles (it overestimates interaction for compressible ones).
    ``s`` is the axis spacing (m); alpha(r0) = 1.
    """
    rm = 2.5 * length * (1 - nu)
    s = np.asarray(s, dtype=float)
    return np.where(s < rm, np.log(rm / np.maximum(s, r0)) / np.log(rm / r0), 0.0)


def interaction_estimate(k_single: float, centres: NDArray, r0: float, length: float,
                         nu: float, k_theta: float = 0.0) -> dict[str, float]:
    """Rigid-cap group stiffnesses from a single-pile stiffness and interaction factors.

    Superposition (Poulos 1968, "Analysis of the settlement of pile groups", Geotechnique
    18(4); factors of :func:`interaction_factor`): pile head settlements w = (1/k) A P with
    A_ij = alpha(s_ij), A_ii = 1, so K_V = k 1^T A^-1 1 and the axial part of the rocking
    stiffness about the cap centre is k x^T A^-1 x; ``k_theta`` (head rotational stiffness
    of one pile, kNm/rad) is added N times without interaction. ``no_interaction_*`` are the
    same with A = I. Note that for rocking the interaction of piles on opposite sides
    *stiffens* (A has negative weight cos(pi) in the antisymmetric mode), so the
    no-interaction value is no upper bound in general.

    Parameters
    ----------
    k_single : float
        Axial head stiffness of one isolated pile (kN/m).
    centres : ndarray, shape (N, 2)
        Pile axis positions (m) of the full group.
    r0, length, nu : float
        Pile radius, length (m) and soil Poisson's ratio.
    k_theta : float, default 0
        Head rotational stiffness of one isolated pile (kNm/rad).

    Returns
    -------
    dict
        ``K_V`` (kN/m), ``K_R`` (kNm/rad), ``no_interaction_K_V``, ``no_interaction_K_R``.
    """
    c = np.asarray(centres, dtype=float)
    s = np.hypot(*(c[:, None, :] - c[None, :, :]).transpose(2, 0, 1))  # (N, N)
    A = interaction_factor(s, r0, length, nu)
    np.fill_diagonal(A, 1.0)
    one, x = np.ones(len(c)), c[:, 0]
    return {"K_V": float(k_single * one @ np.linalg.solve(A, one)),
            "K_R": float(k_single * x @ np.linalg.solve(A, x) + len(c) * k_theta),
            "no_interaction_K_V": float(k_single * len(c)),
            "no_interaction_K_R": float(k_single * x @ x + len(c) * k_theta)}


# --------------------------------------------------------------------------- FE machinery


def _skfem_basis(solid, intorder: int = 3):
    """scikit-fem P2 vector basis on the quadratic mesh; (basis, dofs (n_nodes, 3))."""
    from scipy.spatial import cKDTree
    from skfem import Basis, ElementTetP2, ElementVector, MeshTet2

    mesh = MeshTet2(solid.points.T.copy(), solid.tets_vtk().T.copy())
    basis = Basis(mesh, ElementVector(ElementTetP2()), intorder=intorder)
    table = np.vstack([basis.nodal_dofs.T, basis.edge_dofs.T])  # (n_sk_nodes, 3)
    dist, idx = cKDTree(mesh.doflocs.T).query(solid.points)
    if dist.max() > 1e-9 * np.ptp(solid.points):
        raise RuntimeError("node/DOF matching failed between the gmsh and scikit-fem meshes")
    dofs = table[idx]  # (n_nodes, 3)
    return basis, dofs


def elasticity_matrix(solid, materials: dict[str, tuple[float, float]], intorder: int = 3):
    """Assemble the stiffness matrix of isotropic linear elasticity with scikit-fem.

    Parameters
    ----------
    solid : meshing.solid3d.SolidMesh
        The mesh; ``materials`` keys are names of its cell sets.
    materials : dict of str to (E, nu)
        Young's modulus (kPa) and Poisson's ratio per cell set (the sets must not overlap).
    intorder : int, default 3
        Quadrature degree (2 is exact for straight-sided P2 tetrahedra).

    Returns
    -------
    K : scipy.sparse.csr_matrix
        Stiffness (kN/m), DOF numbering of scikit-fem.
    dofs : ndarray, shape (n_nodes, 3)
        Global DOF of each node (mesh numbering) and component x, y, z.
    """
    from skfem import Basis, BilinearForm, asm
    from skfem.helpers import ddot, sym_grad, trace

    basis, dofs = _skfem_basis(solid, intorder)

    @BilinearForm
    def form(u, v, w):
        eu, ev = sym_grad(u), sym_grad(v)
        return 2.0 * w["mu"] * ddot(eu, ev) + w["lam"] * trace(eu) * trace(ev)

    K = None
    for name, (E, nu) in materials.items():
        sub = Basis(basis.mesh, basis.elem, intorder=intorder,
                    elements=np.asarray(solid.cell_sets[name], dtype=np.int64))
        lam, mu = E * nu / ((1 + nu) * (1 - 2 * nu)), E / (2 * (1 + nu))
        Ki = asm(form, sub, lam=lam, mu=mu)
        K = Ki if K is None else K + Ki
    return K.tocsr(), dofs


def rigid_modes(points: NDArray, components: tuple[int, ...] = (0, 1, 2)) -> NDArray:
    """Rigid-body displacement per unit generalised motion (U, W, theta) about the origin.

    Parameters
    ----------
    points : ndarray, shape (n, 3)
        Tied node coordinates (m).
    components : tuple of int
        Tied displacement components (0 = x, 1 = y, 2 = z).

    Returns
    -------
    ndarray, shape (n, len(components), 3)
        u_c of each node per unit U (m), W (m) and theta (rad): u_x = U + theta z,
        u_y = 0, u_z = W - theta x.
    """
    n = len(points)
    phi = np.zeros((n, 3, 3))  # (node, component, mode)
    phi[:, 0, 0] = 1.0
    phi[:, 2, 1] = 1.0
    phi[:, 0, 2] = points[:, 2]
    phi[:, 2, 2] = -points[:, 0]
    return phi[:, list(components), :]


def _factorize(A, solver: str, near_null: NDArray | None = None, rtol: float = 1e-10):
    """Return solve(B) -> X for a symmetric positive definite A with the chosen method.

    ``splu``: SuperLU with the symmetric MMD(A^T + A) ordering (2-2.5x faster than the
    default COLAMD ordering of ``spsolve`` here); ``cg``: conjugate gradients with a Jacobi
    preconditioner; ``amg``: CG preconditioned by smoothed-aggregation AMG with the rigid
    body modes ``near_null`` (needs the optional package pyamg).
    """
    if solver == "splu":
        lu = sla.splu(A.tocsc(), permc_spec="MMD_AT_PLUS_A",
                      options={"SymmetricMode": True})
        return lu.solve
    if solver == "spsolve":
        return lambda B: np.asarray(sla.spsolve(A.tocsc(), B)).reshape(B.shape)
    if solver in ("cg", "amg"):
        Ar = A.tocsr()
        if solver == "amg":
            try:
                import pyamg
            except ImportError:  # optional, not a dependency of the project
                raise ImportError("solver='amg' needs pyamg (pip install pyamg); use 'cg' or "
                                  "'splu'") from None
            ml = pyamg.smoothed_aggregation_solver(
                Ar, B=near_null, strength=("symmetric", {"theta": 0.0}), max_coarse=2000)
            M = ml.aspreconditioner(cycle="V")
        else:
            d = 1.0 / Ar.diagonal()
            M = sla.LinearOperator(Ar.shape, matvec=lambda v: d * v, dtype=float)

        def solve(B):
            out = np.empty_like(B)
            for j in range(B.shape[1]):  # a handful of load cases, not a hot loop
                x, info = sla.cg(Ar, B[:, j], M=M, rtol=rtol, maxiter=20 * Ar.shape[0])
                if info != 0:
                    raise RuntimeError(f"CG did not converge (info={info})")
                out[:, j] = x
            return out
        return solve
    raise ValueError(f"solver must be one of {SOLVERS}, got {solver!r}")


def rigid_body_modes(points: NDArray, dofs: NDArray, n_dofs: int) -> NDArray:
    """The six rigid-body modes as global DOF vectors, shape (n_dofs, 6) (AMG near-nullspace).

    Parameters
    ----------
    points : ndarray, shape (n_nodes, 3)
        Node coordinates (m).
    dofs : ndarray, shape (n_nodes, 3)
        Global DOF of each node and component.
    n_dofs : int
        Number of global DOFs.
    """
    x, y, z = points.T
    zero, one = np.zeros_like(x), np.ones_like(x)
    modes = np.stack([  # (6, 3, n_nodes): translations, then rotations about x, y, z
        [one, zero, zero], [zero, one, zero], [zero, zero, one],
        [zero, -z, y], [z, zero, -x], [-y, x, zero]])
    out = np.zeros((n_dofs, 6))
    out[dofs.T.ravel()] = modes.reshape(6, -1).T
    return out


def solve_rigid_ties(K, fixed: NDArray, tied: NDArray, phi: NDArray, solver: str = "splu",
                     near_null: NDArray | None = None) -> tuple[NDArray, dict]:
    """Generalised stiffness of a rigid body tied by prescribed displacements.

    u = 0 on ``fixed``, u = phi q on ``tied``; K_II u_I = -K_ID u_D for each unit q, the
    generalised reaction Q = phi^T (K u)_tied. One factorisation serves all modes.

    Parameters
    ----------
    K : sparse matrix, shape (n, n)
        Stiffness (kN/m).
    fixed : ndarray of int
        DOFs held at zero (must not overlap ``tied``).
    tied : ndarray of int, shape (t,)
        DOFs following the rigid body.
    phi : ndarray, shape (t, k)
        Displacement of each tied DOF per unit generalised motion (k modes).
    solver : {"splu", "spsolve", "cg", "amg"}
        Linear solver (see :func:`_factorize`).
    near_null : ndarray, shape (n, 6), optional
        Rigid-body modes (:func:`rigid_body_modes`), used by ``amg`` only.

    Returns
    -------
    Q : ndarray, shape (k, k)
        Generalised stiffness of the model as meshed (symmetric up to round-off).
    info : dict
        ``n_dofs``, ``n_free`` and ``solve_seconds``.
    """
    n = K.shape[0]
    D = np.concatenate([fixed, tied])
    free = np.ones(n, dtype=bool)
    free[D] = False
    gD = np.zeros((n, phi.shape[1]))  # (n, k)
    gD[tied] = phi
    Kc = K.tocsc()
    KI = Kc[:, free]  # (n, n_free)
    KII = KI[free]
    t = time.perf_counter()
    solve = _factorize(KII, solver, None if near_null is None else near_null[free])
    uI = solve(-np.asarray((K @ gD)[free]))  # (n_free, k)
    sec = time.perf_counter() - t
    r = K @ gD + KI @ uI  # (n, k) K u
    return phi.T @ r[tied], {"n_dofs": int(n), "n_free": int(free.sum()),
                             "solve_seconds": sec}


def _dofs_of(dofs: NDArray, nodes: NDArray, comps=(0, 1, 2)) -> NDArray:
    return dofs[nodes][:, list(comps)].ravel()


def _support_dofs(solid, dofs: NDArray) -> NDArray:
    """Base and lateral boundary fixed; u_y = 0 on the symmetry plane."""
    ns = solid.node_sets
    return np.unique(np.concatenate([_dofs_of(dofs, ns["base"]), _dofs_of(dofs, ns["lateral"]),
                                     _dofs_of(dofs, ns["symmetry"], (1,))]))


# --------------------------------------------------------------------------- cases


def footing_stiffness(G: float = 1.0e4, nu: float = 0.3, radius: float = 1.0,
                      depth: float = 2.0, domain_radius: float | None = None,
                      h_near: float | None = None, h_far: float | None = None,
                      interface: str = "both", solver: str = "cg") -> dict:
    """Rigid circular surface footing on an elastic layer over a rigid base (3D, P2).

    Half cylinder y >= 0 (radius ``domain_radius``, lateral boundary fixed), base fixed,
    footing nodes (z = 0, r <= R) prescribed to the rigid motion: all components
    (``bonded``) or only u_z (``smooth``, shear-free contact). Measured with H = 2R and
    h_near = R/16: moving the fixed lateral boundary from 6R to 8R changes K_V and K_R by
    < 0.1 % and K_H by -0.4 %; from 4R to 6R, K_H by -2.5 %.

    Parameters
    ----------
    G : float
        Shear modulus (kPa).
    nu : float
        Poisson's ratio.
    radius, depth : float
        Footing radius R and layer depth H (m).
    domain_radius : float, optional
        Lateral boundary radius (m); default 6 R.
    h_near, h_far : float, optional
        Element sizes (m) at the footing edge and far away; default R/16 and R/1.5.
    interface : {"both", "smooth", "bonded"}
        Which contact conditions to solve (one factorisation or CG run each).
    solver : {"cg", "splu", "spsolve", "amg"}
        Linear solver; Jacobi-CG is the fastest measured for this homogeneous problem on
        the default mesh (see the timings in the module docstring).

    Returns
    -------
    dict
        ``K_V_smooth``, ``K_R_smooth`` (smooth); ``K_V_bonded``, ``K_H_bonded``,
        ``K_R_bonded``, ``K_HR_bonded`` (bonded); ``K_bonded`` 3x3 list in (U, W, theta)
        (kN/m, kN/rad, kNm/rad); ``gazetas`` (:func:`gazetas_layer`); ``n_dofs``;
        ``seconds`` (``mesh``, ``assembly``, ``solve``, ``total``).
    """
    from meshing.solid3d import footing_layer

    if interface not in ("both", "smooth", "bonded"):
        raise ValueError(f"interface must be 'both', 'smooth' or 'bonded', got {interface!r}")
    t0 = time.perf_counter()
    R = radius
    solid = footing_layer(R, depth, 6.0 * R if domain_radius is None else domain_radius,
                          R / 16 if h_near is None else h_near,
                          R / 1.5 if h_far is None else h_far)
    t1 = time.perf_counter()
    K, dofs = elasticity_matrix(solid, {"soil": (2 * G * (1 + nu), nu)})
    t2 = time.perf_counter()
    support = _support_dofs(solid, dofs)
    near = rigid_body_modes(solid.points, dofs, K.shape[0]) if solver == "amg" else None
    foot = solid.node_sets["footing"]
    out: dict = {"gazetas": gazetas_layer(G, nu, R, depth), "n_dofs": int(K.shape[0])}
    solve_sec = 0.0
    if interface in ("both", "bonded"):
        tied = _dofs_of(dofs, foot)
        phi = rigid_modes(solid.points[foot]).reshape(-1, 3)
        Q, info = solve_rigid_ties(K, np.setdiff1d(support, tied), tied, phi, solver, near)
        Q = 2.0 * Q  # full body
        out.update(K_V_bonded=float(Q[1, 1]), K_H_bonded=float(Q[0, 0]),
                   K_R_bonded=float(Q[2, 2]), K_HR_bonded=float(0.5 * (Q[0, 2] + Q[2, 0])),
                   K_bonded=Q.tolist())
        solve_sec += info["solve_seconds"]
    if interface in ("both", "smooth"):
        tied = _dofs_of(dofs, foot, (2,))
        phi = rigid_modes(solid.points[foot], (2,)).reshape(-1, 3)[:, 1:]  # W, theta
        Q, info = solve_rigid_ties(K, np.setdiff1d(support, tied), tied, phi, solver, near)
        Q = 2.0 * Q
        out.update(K_V_smooth=float(Q[0, 0]), K_R_smooth=float(Q[1, 1]))
        solve_sec += info["solve_seconds"]
    out["seconds"] = {"mesh": t1 - t0, "assembly": t2 - t1, "solve": solve_sec,
                      "total": time.perf_counter() - t0}
    return out


def pile_group_stiffness(n_piles: int = 4, ring_radius: float = 3.0, diameter: float = 1.0,
                         length: float = 10.0, G: float = 1.0e4, nu: float = 0.3,
                         Ep_over_G: float = 1000.0, nu_pile: float = 0.2, offset: float = 0.0,
                         domain_radius: float | None = None, depth: float | None = None,
                         h_pile: float | None = None, h_far: float | None = None,
                         solver: str = "splu", rake: float = 0.0) -> dict:
    """Rigid cap on N solid elastic piles (circular, diameter d) in homogeneous soil (3D, P2).

    Piles at theta_k = offset + 2 pi k / N on a ring of radius Rr, heads flush with the
    ground z = 0, perfectly bonded to the soil; the cap is rigid, does not touch the soil,
    and the head faces follow its motion (all components). Soil: half cylinder y >= 0 of
    radius ``domain_radius`` (lateral boundary fixed) and depth ``depth`` (base fixed).
    The axial stiffness depends on the domain like ln(size): measured for one pile
    (L/r0 = 20, lambda = 1000), K_V changes by -2.7 % from (Rd, D) = (4L, 4L) to (6L, 6L)
    and by a further -3.5 % to (15L, 15L); K_H and K_R by < 1.5 % from 4L to 6L. Four
    piles: K_V -5.6 %, K_H -2.8 %, K_R -0.3 % from (Rr + 4L, 4L) to (Rr + 6L, 6L).

    Parameters
    ----------
    n_piles : int
        Number of piles N (1 with ``ring_radius = 0`` is a single pile).
    ring_radius, diameter, length : float
        Ring radius Rr, pile diameter d and length Lp (m).
    G, nu : float
        Soil shear modulus (kPa) and Poisson's ratio.
    Ep_over_G : float
        Pile Young's modulus over the soil shear modulus, lambda = E_p / G.
    nu_pile : float
        Pile Poisson's ratio.
    offset : float
        Angle offset (rad), a multiple of pi/N.
    domain_radius, depth : float, optional
        Soil cylinder radius and depth (m); default Rr + 4 Lp and 4 Lp.
    h_pile, h_far : float, optional
        Element sizes (m) at the piles and far away; default 0.7 d and 0.8 Lp.
    solver : {"splu", "cg", "spsolve", "amg"}
        Linear solver; SuperLU is the fastest measured here up to ~50k DOFs (Jacobi-CG
        suffers from the pile/soil stiffness contrast).
    rake : float, default 0
        Outward rake of every pile, horizontal per vertical, in its radial plane; the
        length Lp is measured along the axis (tips at depth Lp / sqrt(1 + rake^2)) and the
        head faces stay in z = 0 (see :func:`meshing.solid3d.pile_group`).

    Returns
    -------
    dict
        ``K_V``, ``K_H`` (kN/m), ``K_R`` (kNm/rad), ``K_HR`` (kN/rad: H per unit theta =
        M per unit U; negative: a push in +x with the cap held level needs a moment against
        positive theta), ``K`` 3x3 list in (U, W, theta), ``centres`` (N, 2) list (m),
        ``n_dofs``, ``seconds``; with ``rake`` != 0 also ``rake``.
    """
    from meshing.solid3d import pile_group

    t0 = time.perf_counter()
    Lp = length
    solid = pile_group(n_piles, ring_radius, diameter, Lp,
                       ring_radius + 4.0 * Lp if domain_radius is None else domain_radius,
                       4.0 * Lp if depth is None else depth,
                       0.7 * diameter if h_pile is None else h_pile,
                       0.8 * Lp if h_far is None else h_far, offset, rake=rake)
    t1 = time.perf_counter()
    K, dofs = elasticity_matrix(solid, {"soil": (2 * G * (1 + nu), nu),
                                        "piles": (Ep_over_G * G, nu_pile)})
    t2 = time.perf_counter()
    heads = solid.node_sets["pile_heads"]
    tied = _dofs_of(dofs, heads)
    phi = rigid_modes(solid.points[heads]).reshape(-1, 3)
    near = rigid_body_modes(solid.points, dofs, K.shape[0]) if solver == "amg" else None
    Q, info = solve_rigid_ties(K, np.setdiff1d(_support_dofs(solid, dofs), tied), tied, phi,
                               solver, near)
    Q = 2.0 * Q
    out = {"K_V": float(Q[1, 1]), "K_H": float(Q[0, 0]), "K_R": float(Q[2, 2]),
           "K_HR": float(0.5 * (Q[0, 2] + Q[2, 0])), "K": Q.tolist(),
           "centres": solid.info["centres"].tolist(), "n_dofs": info["n_dofs"],
           "seconds": {"mesh": t1 - t0, "assembly": t2 - t1, "solve": info["solve_seconds"],
                       "total": time.perf_counter() - t0}}
    if rake != 0.0:
        out["rake"] = float(rake)
    return out


def single_pile_stiffness(diameter: float = 1.0, length: float = 10.0, **kw) -> dict:
    """One pile on the axis: :func:`pile_group_stiffness` with N = 1 and Rr = 0.

    Adds ``randolph_wroth`` (:func:`randolph_wroth_pile`, kN/m), ``gazetas``
    (:func:`gazetas_pile`) and ``K_theta`` (head rotational stiffness with the head held
    laterally, kNm/rad; equal to ``K_R`` for a pile on the axis). Keyword arguments go to
    :func:`pile_group_stiffness`.
    """
    out = pile_group_stiffness(1, 0.0, diameter, length, **kw)
    G, nu, lam = kw.get("G", 1.0e4), kw.get("nu", 0.3), kw.get("Ep_over_G", 1000.0)
    out["randolph_wroth"] = randolph_wroth_pile(G, nu, diameter / 2, length, lam * G)
    out["gazetas"] = gazetas_pile(2 * G * (1 + nu), lam * G, diameter)
    out["K_theta"] = out["K_R"]
    return out


# --------------------------------------------------------------------------- script


def main(argv: list[str] | None = None) -> int:
    """Print the FE stiffnesses beside their references; optionally write them as JSON."""
    ap = argparse.ArgumentParser(prog="python -m benchmarks.reference3d",
                                 description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="coarse meshes (~10 s)")
    ap.add_argument("--json", help="write the results to this file")
    args = ap.parse_args(argv)
    foot = footing_stiffness(h_near=1 / 8 if args.quick else None)
    h_pile = 1.0 if args.quick else None
    pile = single_pile_stiffness(h_pile=h_pile)
    grp = pile_group_stiffness(4, h_pile=h_pile)
    est = interaction_estimate(pile["K_V"], np.array(grp["centres"]), 0.5, 10.0, 0.3,
                               pile["K_theta"])
    rows = [("footing H=2R", k, foot[k], foot["gazetas"][k[:3]], "Gazetas 1991")
            for k in ("K_V_smooth", "K_V_bonded", "K_H_bonded", "K_R_smooth", "K_R_bonded")]
    rows += [("single pile", "K_V", pile["K_V"], pile["randolph_wroth"],
              "Randolph & Wroth 1978")]
    rows += [("single pile", k, pile[k], pile["gazetas"][k], "Gazetas 1991 (piles)")
             for k in ("K_H", "K_R", "K_HR")]
    rows += [("4 piles", k, grp[k], est[k], "Randolph & Wroth 1979 factors")
             for k in ("K_V", "K_R")]
    print(f"{'case':14s} {'quantity':11s} {'FE':>12s} {'reference':>12s} {'ratio':>7s}  source")
    for case, key, fe, ref, src in rows:
        print(f"{case:14s} {key:11s} {fe:12.5g} {ref:12.5g} {fe / ref:7.3f}  {src}")
    for name, r in (("footing", foot), ("single pile", pile), ("4 piles", grp)):
        print(f"{name}: {r['n_dofs']} DOFs, {r['seconds']['total']:.1f} s")
    if args.json:
        with open(args.json, "w") as fh:
            json.dump({"footing": foot, "single_pile": pile, "group_4": grp,
                       "group_4_estimate": est}, fh, indent=2)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
