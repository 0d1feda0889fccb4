"""Fourier-series aided (semi-analytical) elastic FE on the axisymmetric mesh (femcore.harmonic).

Method: Wilson (1965), "Structural analysis of axisymmetric solids", AIAA J. 3; Winnicki &
Zienkiewicz (1979), IJNME 14; Potts & Zdravkovic (1999), *Finite Element Analysis in
Geotechnical Engineering: Theory*. Every test states its reference and tolerance.
"""

import time
from math import factorial

import numpy as np
import pytest
from conftest import distort

from femcore import Model
from femcore.harmonic import (
    AxisConditionError,
    HarmonicError,
    HarmonicModel,
    MatrixBlock,
    check_axis_conditions,
    collapsed_rule,
    harmonic_geometry,
    rigid_stiffness,
    synthesize,
    trig_factors,
)
from femcore.kinematics import default_rule
from femcore.mesh import Mesh
from materials import LinearElastic
from meshing import layered_domain, rectangle

E, NU = 1.0e4, 0.3
G = E / (2 * (1 + NU))
R = 1.0  # footing radius, m


# --------------------------------------------------------------------------- helpers
def distorted_cylinder(element, r_out=2.0, depth=2.0, h=0.5, amount=0.2):
    """Rectangle r in [0, r_out], y in [-depth, 0], interior vertices moved (straight sides)."""
    return distort(rectangle(0.0, r_out, -depth, 0.0, h, element), amount, seed=3)


def nodal_dofs(model, nodes):
    """All three DOFs of ``nodes``, node-major ``(len(nodes) * 3,)``."""
    return model.dofmap.cell_dofs(np.asarray(nodes)[:, None]).ravel()


def footing_mesh(L, H, element, h, h_near):
    return layered_domain(L, H, x_min=0.0, footing=(0.0, R), h=h, h_near=h_near,
                          refine_radius=2.0, element=element)


def supports_of(mesh):
    return np.union1d(mesh.nodes_of("base"), mesh.nodes_of("right"))


def boussinesq_up(x):
    """Amplitudes (U, W, V) at n = 0 of a unit point force pulling the half-space surface
    upward at the origin (Boussinesq 1885; Johnson 1985, *Contact Mechanics*, ch. 3, for the
    downward force, from memory; y up, depth z = -y)."""
    r, z = x[:, 0], -x[:, 1]
    rho = np.hypot(r, z)
    k = 1.0 / (4 * np.pi * G * rho)
    u_r = k * (r * z / rho**2 - (1 - 2 * NU) * r / (rho + z))  # downward force
    w_down = k * (2 * (1 - NU) + z**2 / rho**2)
    return -np.column_stack([u_r, -w_down, np.zeros_like(r)])


def cerruti(x):
    """Amplitudes (U, W, V) at n = 1 of a unit tangential point force in +x at the origin of
    the half-space surface (Cerruti 1882; Johnson 1985, *Contact Mechanics*, eq. 2.19, from
    memory). With u = (u_x, u_y, u_z), z down, expanded in cos/sin theta."""
    r, z = x[:, 0], -x[:, 1]
    rho = np.hypot(r, z)
    k = 1.0 / (4 * np.pi * G)
    U = k * (1 / rho + r**2 / rho**3 + (1 - 2 * NU) * (1 / (rho + z) - r**2 / (rho * (rho + z)**2)))
    V = -k * (1 / rho + (1 - 2 * NU) / (rho + z))
    W = -k * (r * z / rho**3 + (1 - 2 * NU) * r / (rho * (rho + z)))  # up
    return np.column_stack([U, W, V])


def far_field_stiffness(mesh, n, field, contact, component):
    """Stiffness of the rigid disc with the far field of the point load applied on the cut
    boundary (self-consistently): case A, body displaced by 1 with the boundary fixed; case B,
    body fixed with the boundary on the field of a unit load; F = F_A / (1 - F_B)."""
    model = HarmonicModel(mesh, 1)
    model.add_block("soil", None, E=E, nu=NU)
    model.add_reference_point("disc", 0.0)
    dm = model.dofmap
    sup = supports_of(mesh)
    sup_dofs = nodal_dofs(model, sup)
    cons = model.constraints(n)
    cons.fix(sup_dofs, field(mesh.points[sup]).ravel())
    cons.tie_rigid(mesh.nodes_of("footing"), "disc", contact)
    master = dm.ref_dof("disc", component)
    cons.fix([master], 1.0)
    if n == 1:
        cons.fix([dm.ref_dof("disc", 2)], 0.0)
    cmap = cons.build()
    case_a, case_b = cmap.prescribed_values.copy(), cmap.prescribed_values.copy()
    case_a[[cmap.fixed_position(d) for d in sup_dofs]] = 0.0
    case_b[cmap.fixed_position(master)] = 0.0
    sol = model.solve(n, cmap, prescribed=np.stack([case_a, case_b]))
    f_a, f_b = (cmap.generalized_at(sol.reactions[j], master) for j in (0, 1))
    return f_a / (1.0 - f_b)


# --------------------------------------------------------------------------- 0. quadrature
@pytest.mark.parametrize("degree", [3, 8, 14, 21])
def test_collapsed_rule_is_exact(degree):
    """int_T xi^i eta^j = i! j! / (i + j + 2)! on the reference triangle (Stroud 1971,
    *Approximate Calculation of Multiple Integrals*): every monomial up to the degree to
    1e-14; all points strictly interior (no point on the axis)."""
    rule = collapsed_rule(degree)
    assert rule.degree >= degree
    xi, eta = rule.points[:, 0], rule.points[:, 1]
    assert xi.min() > 0 and eta.min() > 0 and (1 - xi - eta).min() > 0
    for i in range(degree + 1):
        for j in range(degree + 1 - i):
            exact = factorial(i) * factorial(j) / factorial(i + j + 2)
            assert abs(rule.weights @ (xi**i * eta**j) - exact) < 1e-14


def test_rule_degree_effect_on_footing_stiffness():
    """Effect of the rule on K_R (the N^2/r terms): the default Dunavant rules (T6 degree 6,
    T15 degree 8) against a degree-17 conical rule (81 points) as the reference. Measured on
    a finer mesh: T6 degree 4 7e-10, degree 6 1e-11; T15 degree 4 1.8 % soft, degree 6 1e-6,
    degree 8 3e-12. Tolerance 1e-9 relative for both defaults; T15 at degree 4 must differ by
    more than 1e-3 (under-integration shows)."""
    from femcore.quadrature import triangle_rule

    for element, h in (("T6", 0.5), ("T15", 0.8)):
        mesh = footing_mesh(3.0, 1.5, element, h, 0.1)
        out = {}
        for name, rule in (("default", None), ("rich", collapsed_rule(17)),
                           ("low", triangle_rule(4))):
            model = HarmonicModel(mesh, 1, rule=rule)
            model.add_block("soil", None, E=E, nu=NU)
            out[name] = rigid_stiffness(model, mesh.nodes_of("footing"), supports_of(mesh),
                                        contact="smooth").K_R
        assert out["default"] == pytest.approx(out["rich"], rel=1e-9)
        if element == "T15":  # under-integration shows: the rule matters
            assert abs(out["low"] / out["rich"] - 1) > 1e-3


# --------------------------------------------------------------------------- 1. rigid modes
@pytest.mark.parametrize("element", ["T6", "T15"])
def test_rigid_body_modes_give_zero_strain(element):
    """Rigid rotation (U_1 = a (z - z_ref), V_1 = -a (z - z_ref), W_1 = -a r), horizontal
    translation (U_1 = d, V_1 = -d), settlement (W_0 = w) and twist (V_0 = phi r) strain
    nothing (Wilson 1965; rigid motions of 3D elasticity), to 1e-12 on a distorted mesh. The
    mirror-sign rotation (V_1 = +a (z - z_ref)) must strain: the check can fail."""
    mesh = distorted_cylinder(element)
    r, z = mesh.points[:, 0], mesh.points[:, 1]
    a, d, w, phi, z_ref = 0.7, 0.3, -0.4, 0.9, -0.6
    zero = np.zeros_like(r)
    cases = {
        1: [np.column_stack([a * (z - z_ref), -a * r, -a * (z - z_ref)]),
            np.column_stack([np.full_like(r, d), zero, np.full_like(r, -d)])],
        0: [np.column_stack([zero, np.full_like(r, w), zero]),
            np.column_stack([zero, zero, phi * r])],
    }
    for n, fields in cases.items():
        geom = harmonic_geometry(mesh, n)
        for q in fields:
            eps = geom.strain(q.ravel()[3 * mesh.cells[:, :, None] + np.arange(3)].reshape(
                mesh.n_cells, -1))  # (c, q, 6)
            assert np.abs(eps).max() < 1e-12
    wrong = np.column_stack([a * (z - z_ref), -a * r, a * (z - z_ref)])
    geom = harmonic_geometry(mesh, 1)
    eps = geom.strain(wrong.ravel()[3 * mesh.cells[:, :, None] + np.arange(3)].reshape(
        mesh.n_cells, -1))
    assert np.abs(eps).max() > 0.1 * a


# --------------------------------------------------------------------------- 2. n = 0
@pytest.mark.parametrize("element", ["T6", "T15"])
def test_n0_matches_axisymmetric_kinematics(element):
    """K_0 restricted to (U, W) equals femcore's axisymmetric stiffness (2 pi r included) to
    round-off (1e-13 of the largest entry), with E growing with depth (per Gauss point); the
    torsional V_0 block is uncoupled (exact zeros) (Wilson 1965: the n = 0 term is the
    axisymmetric problem)."""
    mesh = distorted_cylinder(element)
    material = LinearElastic(E, NU, E_gradient=3000.0)
    ref_model = Model(mesh, "axisymmetric")
    ref_model.add_block("soil", None, material)
    _, K_ref, _ = ref_model.evaluate(np.zeros(ref_model.n_dofs), ref_model.initial_states())
    model = HarmonicModel(mesh, 0, rule=default_rule(mesh.element), torsion=True)
    model.add_block("soil", None, material=material)
    K0 = model.stiffness(0)
    uw = (3 * np.arange(mesh.n_nodes)[:, None] + np.array([0, 1])).ravel()
    v = 3 * np.arange(mesh.n_nodes) + 2
    scale = abs(K_ref).max()
    assert abs(K0[uw][:, uw] - K_ref).max() < 1e-13 * scale
    assert abs(K0[uw][:, v]).max() == 0.0
    assert abs(K0[v][:, v]).max() > 1e-3 * scale  # torsion has stiffness of its own


# --------------------------------------------------------------------------- 3. patch tests
@pytest.mark.parametrize("element", ["T6", "T15"])
def test_linear_3d_field_is_reproduced_in_harmonics_0_1_2(element):
    """u = A X + b in 3D Cartesian space, symmetric about the plane theta = 0, in harmonics:
    n = 0: U = r (a + d)/2, W = f z + b_z; n = 1: U = -V = c z + b_x, W = e r; n = 2:
    U = -V = r (a - d)/2. With the exact values on the outer boundary and the axis conditions
    applied automatically on r = 0, every node is reproduced (1e-10 relative) and the strains
    synthesised on a plane equal the Cartesian strain rotated to (r, z, theta) (constant-strain
    patch test, Irons & Razzaque 1972; harmonic split after Wilson 1965)."""
    a, c, d, e, f, bx, bz = 1e-3, 4e-4, -6e-4, 7e-4, -2e-4, 3e-3, -1e-3
    mesh = distorted_cylinder(element)
    r, z = mesh.points[:, 0], mesh.points[:, 1]
    zero = np.zeros_like(r)
    exact = {0: np.column_stack([r * (a + d) / 2, f * z + bz, zero]),
             1: np.column_stack([c * z + bx, e * r, -(c * z + bx)]),
             2: np.column_stack([r * (a - d) / 2, zero, -r * (a - d) / 2])}
    model = HarmonicModel(mesh, 2)
    block = model.add_block("soil", None, E=E, nu=NU)
    outer = np.unique(np.concatenate([mesh.nodes_of(s) for s in ("right", "top", "bottom")]))
    theta = 0.7
    eps_theta = 0.0
    amplitudes = {}
    for n, q in exact.items():
        cons = model.constraints(n)
        cons.fix(nodal_dofs(model, outer), q[outer].ravel())
        sol = model.solve(n, cons.build())
        got = sol.nodal(mesh.n_nodes)
        assert np.abs(got - q).max() < 1e-10 * np.abs(q).max()
        amplitudes[n] = got
        eps_n = block.geometry(n).strain(sol.u[block.element_dofs])  # (c, q, 6)
        eps_theta = eps_theta + trig_factors(n, theta) * eps_n
    # reference: Cartesian strain tensor of A rotated to the cylindrical basis at theta
    A = np.array([[a, 0, c], [0, d, 0], [e, 0, f]])
    S = 0.5 * (A + A.T)
    er = np.array([np.cos(theta), np.sin(theta), 0.0])
    et = np.array([-np.sin(theta), np.cos(theta), 0.0])
    ez = np.array([0.0, 0.0, 1.0])
    ref = np.array([er @ S @ er, ez @ S @ ez, et @ S @ et, 2 * er @ S @ ez, 2 * ez @ S @ et,
                    2 * et @ S @ er])
    assert np.abs(eps_theta - ref).max() < 1e-10 * np.abs(ref).max()
    # displacements synthesised on the plane equal the 3D field rotated to (r, z, theta)
    X = np.column_stack([r * np.cos(theta), r * np.sin(theta), z])
    u3 = X @ A.T + np.array([bx, 0.0, bz])
    ref_u = np.column_stack([u3 @ er, u3[:, 2], u3 @ et])
    assert np.abs(synthesize(amplitudes, theta) - ref_u).max() < 1e-10 * np.abs(ref_u).max()


@pytest.mark.parametrize("element", ["T6", "T15"])
def test_pure_bending_of_a_solid_cylinder_n1(element):
    """Saint-Venant pure bending of a prismatic bar (Timoshenko & Goodier 1951, *Theory of
    Elasticity*, from memory): u_x = k/2 (z^2 + nu (x^2 - y^2)), u_y = k nu x y,
    u_z = -k x z, i.e. the single harmonic n = 1 with U = k/2 (z^2 + nu r^2),
    V = k/2 (nu r^2 - z^2), W = -k r z, stress sigma_zz = -E k x only. Ends prescribed,
    lateral surface free (traction-free natural condition), axis automatic: quadratic field
    reproduced to 1e-9 (T6, T15), and the end reaction is M = E I k, I = pi R^4 / 4 (the
    moment is the work-conjugate of alpha, pi factor included), to 1e-9."""
    kappa, r_c, length = 1e-3, 1.0, 3.0
    mesh = distorted_cylinder(element, r_out=r_c, depth=length, h=0.4)
    r, z = mesh.points[:, 0], mesh.points[:, 1]
    exact = np.column_stack([0.5 * kappa * (z**2 + NU * r**2), -kappa * r * z,
                             0.5 * kappa * (NU * r**2 - z**2)])
    model = HarmonicModel(mesh, 1)
    model.add_block("soil", None, E=E, nu=NU)
    top, bottom = mesh.nodes_of("top"), mesh.nodes_of("bottom")
    ends = np.union1d(top, bottom)
    cons = model.constraints(1)
    cons.fix(nodal_dofs(model, ends), exact[ends].ravel())
    sol = model.solve(1, cons.build())
    assert np.abs(sol.nodal(mesh.n_nodes) - exact).max() < 1e-9 * np.abs(exact).max()
    reac = sol.reactions[: 3 * mesh.n_nodes].reshape(-1, 3)
    moment = -(reac[top, 1] * r[top]).sum()  # rigid rotation about (0, 0): W = -r, U = V = 0
    assert moment == pytest.approx(E * kappa * np.pi * r_c**4 / 4, rel=1e-9)


# --------------------------------------------------------------------------- loads
def test_edge_traction_and_body_force_totals():
    """Load totals (exact integrals over the 3D body): uniform pressure q on the footing
    disc, n = 0: sum of W forces = -q pi R^2; linear pressure p r/R cos(theta), n = 1: moment
    conjugate to alpha = pi p R^3 / 4; gravity gamma, n = 0: -gamma pi r_c^2 depth. 1e-12."""
    mesh = footing_mesh(3.0, 2.0, "T6", 0.5, 0.2)
    model = HarmonicModel(mesh, 1)
    model.add_block("soil", None, E=E, nu=NU)
    r = mesh.points[:, 0]
    q, p, gamma = 50.0, 80.0, 18.0
    f0 = model.edge_traction(0, "footing", np.array([0.0, -q, 0.0]))
    assert f0[1:3 * mesh.n_nodes:3].sum() == pytest.approx(-q * np.pi * R**2, rel=1e-12)
    f1 = model.edge_traction(1, "footing",
                             lambda x: np.stack([0 * x[..., 0], -p * x[..., 0] / R,
                                                 0 * x[..., 0]], axis=-1))
    moment = (f1[1:3 * mesh.n_nodes:3] * -r).sum()  # rigid rotation mode W_1 = -r
    assert moment == pytest.approx(np.pi * p * R**3 / 4, rel=1e-12)
    fg = model.body_force(0, np.array([0.0, -gamma, 0.0]))
    assert fg[1:3 * mesh.n_nodes:3].sum() == pytest.approx(-gamma * np.pi * 3.0**2 * 2.0,
                                                           rel=1e-12)


# --------------------------------------------------------------------------- 4. footings
def test_boussinesq_and_cerruti_fields_are_exact():
    """The far fields used below solve Navier's equations with a traction-free surface
    (checked by central differences of the 3D Cartesian fields: divergence below 1e-5 of
    its cancelling terms, surface traction below 1e-3 of the stress scale at depth 1e-4), so
    the half-space checks depend on no further recollection."""
    lam, mu = 2 * G * NU / (1 - 2 * NU), G

    def u_cart(X, which):  # X (m, 3) with z = X[:, 2] down; returns (m, 3) with u_z down
        r = np.hypot(X[:, 0], X[:, 1])
        th = np.arctan2(X[:, 1], X[:, 0])
        y = -X[:, 2]
        amp = (boussinesq_up if which == "V" else cerruti)(np.column_stack([r, y]))
        c, s = (1.0, 0.0) if which == "V" else (np.cos(th), np.sin(th))
        ur, uz_up, ut = amp[:, 0] * c, amp[:, 1] * c, amp[:, 2] * s
        return np.column_stack([ur * np.cos(th) - ut * np.sin(th),
                                ur * np.sin(th) + ut * np.cos(th), -uz_up])

    def stress(X, which, h=1e-5):
        grad = np.empty((len(X), 3, 3))  # (m, i, j) du_i / dx_j
        for j in range(3):  # the three directions, not a loop over points
            dX = np.zeros(3)
            dX[j] = h
            grad[:, :, j] = (u_cart(X + dX, which) - u_cart(X - dX, which)) / (2 * h)
        eps = 0.5 * (grad + grad.transpose(0, 2, 1))
        tr = np.trace(eps, axis1=1, axis2=2)
        return lam * tr[:, None, None] * np.eye(3) + 2 * mu * eps

    pts = np.array([[0.7, 0.4, 1.3], [-1.1, 0.5, 0.8], [0.3, -0.9, 2.0]])
    for which in ("V", "H"):
        scale = np.abs(stress(pts, which)).max()
        div = np.zeros((len(pts), 3))
        size = np.zeros((len(pts), 3))  # sum of |d sigma_ij / dx_j|: the terms that cancel
        for j in range(3):
            dX = np.zeros(3)
            dX[j] = 1e-3
            term = (stress(pts + dX, which)[:, :, j] - stress(pts - dX, which)[:, :, j]) / 2e-3
            div += term
            size += np.abs(term)
        assert np.abs(div).max() < 1e-5 * size.max()  # central differences: O(1e-6) error
        surf = pts * np.array([1.0, 1.0, 0.0]) + np.array([0.0, 0.0, 1e-4])  # just below z = 0
        assert np.abs(stress(surf, which)[:, 2, :]).max() < 1e-3 * scale


def test_rigid_disc_vertical_half_space():
    """Smooth rigid circular punch K_V = 4 G R / (1 - nu) (Boussinesq; Sneddon 1946, "Boussinesq's
    problem for a flat-ended cylinder", Proc. Camb. Phil. Soc. 42, from memory). Domain 5R x 5R
    with the Boussinesq far field applied self-consistently on the cut boundary (a fixed box
    stiffens K_V by 23 % at 5R); measured 0.9999 (T6, h_near = R/50). Tolerance 1 %."""
    mesh = footing_mesh(5.0, 5.0, "T6", 0.5, 0.02)
    k_v = far_field_stiffness(mesh, 0, boussinesq_up, "smooth", 1)
    assert k_v == pytest.approx(4 * G * R / (1 - NU), rel=0.01)


def test_rigid_disc_horizontal_half_space():
    """Bonded rigid disc, horizontal: K_H = 8 G R / (2 - nu) (Gazetas 1991, "Formulas and
    charts for impedances of surface and embedded foundations", J. Geotech. Eng. 117(9), from
    memory; an approximation: Bycroft's 32 (1 - nu) G R / (7 - 8 nu) is 3.5 % higher at
    nu = 0.3). Domain 10R with the Cerruti far field on the cut boundary; measured 1.012 x
    Gazetas (T15). Tolerance 3 %."""
    mesh = footing_mesh(10.0, 10.0, "T15", 1.0, 0.05)
    k_h = far_field_stiffness(mesh, 1, cerruti, "bonded", 0)
    assert k_h == pytest.approx(8 * G * R / (2 - NU), rel=0.03)
    assert k_h < 32 * (1 - NU) * G * R / (7 - 8 * NU)


def test_rigid_disc_rocking_and_torsion_half_space():
    """Smooth rigid disc, rocking K_R = 8 G R^3 / (3 (1 - nu)) (Borowicka 1943; Gazetas 1991,
    from memory) and bonded torsion K_T = 16 G R^3 / 3 (Reissner & Sagoci 1944, "Forced
    torsional oscillations of an elastic half-space", J. Appl. Phys. 15, from memory). Both
    far fields decay like 1/rho^2, so a fixed 10R box changes them by O((R/L)^3); measured
    1.0037 and 1.0036 (T15, h_near = R/25). Tolerance 1 %. Reciprocity K_HR = K_RH
    (Maxwell 1864; Betti 1872) to 1e-9."""
    mesh = footing_mesh(10.0, 10.0, "T15", 1.0, 0.04)
    model = HarmonicModel(mesh, 1, torsion=True)
    model.add_block("soil", None, E=E, nu=NU)
    smooth = rigid_stiffness(model, mesh.nodes_of("footing"), supports_of(mesh), "smooth")
    bonded = rigid_stiffness(model, mesh.nodes_of("footing"), supports_of(mesh), "bonded")
    assert smooth.K_R == pytest.approx(8 * G * R**3 / (3 * (1 - NU)), rel=0.01)
    assert bonded.K_T == pytest.approx(16 * G * R**3 / 3, rel=0.01)
    assert bonded.K_HR == pytest.approx(bonded.K_RH, rel=1e-9)
    assert np.isnan(smooth.K_H) and np.isnan(smooth.K_T)


@pytest.mark.parametrize("H", [2.0, 4.0])
def test_rigid_disc_on_layer_over_rigid_base(H):
    """Layer of depth H on a rigid base (Gazetas 1991, approximate fits, from memory):
    K_V x (1 + 1.28 R/H), K_H x (1 + R/(2H)), K_R x (1 + R/(6H)). Lateral extent R + 8H, far
    side fixed (the field of a layer on a rigid base decays exponentially). The fits are the
    limit here, not the mesh (half-space checks above within 0.4 %). FE / fit on this mesh
    (T6, h_near = R/20) for H = 2R, 4R: K_R 0.984, 0.980; K_V 0.997, 0.966; K_H 1.026, 1.016;
    on T15 meshes of 14k-38k DOFs: K_R 0.975, 0.971; K_V 0.992, 0.962; K_H 1.021, 1.012.
    Tolerances: K_R 4 %, K_V 5 %, K_H 4 %."""
    mesh = footing_mesh(R + 8 * H, H, "T6", 0.5, 0.05)
    model = HarmonicModel(mesh, 1)
    model.add_block("soil", None, E=E, nu=NU)
    smooth = rigid_stiffness(model, mesh.nodes_of("footing"), supports_of(mesh), "smooth")
    bonded = rigid_stiffness(model, mesh.nodes_of("footing"), supports_of(mesh), "bonded")
    assert smooth.K_R == pytest.approx(8 * G * R**3 / (3 * (1 - NU)) * (1 + R / (6 * H)),
                                       rel=0.04)
    assert smooth.K_V == pytest.approx(4 * G * R / (1 - NU) * (1 + 1.28 * R / H), rel=0.05)
    assert bonded.K_H == pytest.approx(8 * G * R / (2 - NU) * (1 + R / (2 * H)), rel=0.04)


def test_element_block_in_parallel():
    """A MatrixBlock spring k between the body's vertical DOF and fixed ground acts in
    parallel with the soil: K_V(with) - K_V(without) = k (statics of a rigid body, exact;
    1e-9 relative to K_V). Checks the block interface that ring beams and springs will use."""
    mesh = footing_mesh(9.0, 1.0, "T6", 0.5, 0.1)
    out = []
    for k_spring in (0.0, 2.5e4):
        model = HarmonicModel(mesh, 1)
        model.add_block("soil", None, E=E, nu=NU)
        model.add_reference_point("body", 0.0)
        w = model.dofmap.ref_dof("body", 1)
        model.add_element_block(MatrixBlock(
            "spring", np.array([[w]]), lambda n, k=k_spring: np.full((1, 1, 1), k * (n == 0))))
        out.append(rigid_stiffness(model, mesh.nodes_of("footing"), supports_of(mesh),
                                   "smooth", ref="body").K_V)
    assert out[1] - out[0] == pytest.approx(2.5e4, abs=1e-9 * out[0])


# --------------------------------------------------------------------------- 5. axis, range
def test_harmonic_range_and_radius_errors():
    """A harmonic outside 0..n_max and a node at r < 0 are rejected with a ValueError subclass
    naming the value and the allowed range."""
    mesh = rectangle(0.0, 1.0, -1.0, 0.0, 0.5, "T6")
    model = HarmonicModel(mesh, 1)
    model.add_block("soil", None, E=E, nu=NU)
    for bad in (2, -1):
        with pytest.raises(HarmonicError, match=rf"n = {bad} .*0\.\.1"):
            model.constraints(bad)
        with pytest.raises(HarmonicError, match=rf"n = {bad}"):
            model.stiffness(bad)
    with pytest.raises(HarmonicError, match="1.5"):
        harmonic_geometry(mesh, 1.5)
    with pytest.raises(HarmonicError, match=r"-1 .*allowed 0, 1, 2"):
        harmonic_geometry(mesh, -1)
    shifted = Mesh(mesh.points - np.array([0.25, 0.0]), mesh.cells, mesh.element)
    with pytest.raises(HarmonicError, match=r"x = -0.25 m.*x >= 0"):
        HarmonicModel(shifted, 1)
    assert issubclass(HarmonicError, ValueError) and issubclass(AxisConditionError, ValueError)


@pytest.mark.parametrize("n", [0, 1, 2])
def test_axis_conditions_applied_automatically(n):
    """Without any condition on r = 0 from the user, the solution satisfies U = 0 (n = 0),
    W = 0 and U + V = 0 (n = 1), U = V = W = 0 (n >= 2) (single-valued displacement on the
    axis; Winnicki & Zienkiewicz 1979) to 1e-12 of the largest amplitude, under a load with
    a non-zero amplitude of that harmonic on the axis region (a surface load cos n theta)."""
    mesh = footing_mesh(6.0, 3.0, "T6", 0.5, 0.1)
    model = HarmonicModel(mesh, 2)
    model.add_block("soil", None, E=E, nu=NU)
    cons = model.constraints(n)
    cons.fix_nodes(supports_of(mesh))
    f = model.edge_traction(n, "footing", np.array([10.0, -100.0, 10.0]))
    sol = model.solve(n, cons.build(), f)
    axis = model.axis_nodes
    q = sol.nodal(mesh.n_nodes)
    tol = 1e-12 * np.abs(q).max()
    if n == 0:
        assert np.abs(q[axis, 0]).max() <= tol and np.abs(q[axis, 1]).max() > 1e3 * tol
    elif n == 1:
        assert np.abs(q[axis, 1]).max() <= tol
        assert np.abs(q[axis, 0] + q[axis, 2]).max() <= tol
        assert np.abs(q[axis, 0]).max() > 1e3 * tol  # u_x on the axis moves
    else:
        assert np.abs(q[axis]).max() <= tol
    check_axis_conditions(model, n, sol.u)  # passes
    bad = sol.u.copy()
    bad[3 * axis[len(axis) // 2] + (1 if n == 1 else 0)] += 1e-3 * np.abs(q).max()
    with pytest.raises(AxisConditionError, match=f"n = {n}"):
        check_axis_conditions(model, n, bad)


def test_conflicting_axis_constraints_are_rejected():
    """User conditions that contradict the axis conditions are rejected at build
    (AxisConditionError naming the node and harmonic); a condition on one component of
    U + V = 0 is completed automatically (V = -U, checked to 1e-15)."""
    mesh = footing_mesh(6.0, 3.0, "T6", 0.5, 0.2)
    model = HarmonicModel(mesh, 1)
    model.add_block("soil", None, E=E, nu=NU)
    a = int(model.axis_nodes[len(model.axis_nodes) // 2])
    cons = model.constraints(0)
    cons.fix([3 * a], 1e-3)  # U_0 = 1e-3 on the axis
    with pytest.raises(AxisConditionError, match=rf"node {a} .*n = 0"):
        cons.build()
    cons = model.constraints(1)
    cons.fix([3 * a, 3 * a + 2], [1e-3, 1e-3])  # U_1 + V_1 = 2e-3
    with pytest.raises(AxisConditionError, match=rf"node {a} .*U_1 \+ V_1"):
        cons.build()
    cons = model.constraints(1)
    cons.fix_nodes(supports_of(mesh))
    cons.fix([3 * a], 1e-3)  # U_1 only: V_1 follows
    sol = model.solve(1, cons.build())
    assert sol.u[3 * a + 2] == pytest.approx(-1e-3, abs=1e-15)


# --------------------------------------------------------------------------- 6. timing
def test_n1_solve_timing_25k_dofs():
    """One n = 1 rocking solve at ~25k DOFs (T6): prints assembly, reduction, factorisation
    and solve times (measured, never asserted); asserts K_R = 8 G R^3 / (3 (1 - nu)) (smooth
    disc, Gazetas 1991 / Borowicka 1943, from memory) within 1 % on a fixed 10R box."""
    t0 = time.perf_counter()
    mesh = footing_mesh(10.0, 10.0, "T6", 0.27, 0.02)
    t1 = time.perf_counter()
    model = HarmonicModel(mesh, 1)
    model.add_block("soil", None, E=E, nu=NU)
    model.add_reference_point("disc", 0.0)
    alpha = model.dofmap.ref_dof("disc", 2)
    cons = model.constraints(1)
    cons.fix_nodes(supports_of(mesh))
    cons.tie_rigid(mesh.nodes_of("footing"), "disc", "smooth")
    cons.fix([alpha], 1.0)
    cmap = cons.build()
    t2 = time.perf_counter()
    _ = model.pattern
    t3 = time.perf_counter()
    first = model.solve(1, cmap)
    t4 = time.perf_counter()
    again = model.solve(1, cmap)
    t5 = time.perf_counter()
    print(f"\nn = 1 solve, {model.n_dofs} DOFs ({cmap.n_free} free), T6: mesh {t1 - t0:.2f} s, "
          f"model + constraints {t2 - t1:.2f} s, CSR pattern {t3 - t2:.2f} s, first solve "
          f"{t4 - t3:.2f} s {({k: round(v, 3) for k, v in first.seconds.items()})}, repeated "
          f"solve {t5 - t4:.2f} s {({k: round(v, 3) for k, v in again.seconds.items()})}")
    k_r = cmap.generalized_at(again.reactions, alpha)
    assert 20_000 <= model.n_dofs <= 32_000
    assert k_r == pytest.approx(8 * G * R**3 / (3 * (1 - NU)), rel=0.01)


# --------------------------------------------------------------------------- slow
@pytest.mark.slow
def test_half_space_stiffnesses_fine_t15():
    """Fine T15 meshes (h_near = R/50): K_V (Boussinesq far field, Sneddon 1946) and K_R
    (smooth, fixed 20R box; Gazetas 1991) within 0.5 %, K_T (Reissner & Sagoci 1944) within
    0.5 %, K_H within 2 % of Gazetas 1991 (an approximation; see the fast test)."""
    mesh = footing_mesh(10.0, 10.0, "T15", 0.5, 0.02)
    assert far_field_stiffness(mesh, 0, boussinesq_up, "smooth", 1) == pytest.approx(
        4 * G * R / (1 - NU), rel=0.005)
    assert far_field_stiffness(mesh, 1, cerruti, "bonded", 0) == pytest.approx(
        8 * G * R / (2 - NU), rel=0.02)
    mesh = footing_mesh(20.0, 20.0, "T15", 1.0, 0.02)
    model = HarmonicModel(mesh, 1, torsion=True)
    model.add_block("soil", None, E=E, nu=NU)
    smooth = rigid_stiffness(model, mesh.nodes_of("footing"), supports_of(mesh), "smooth")
    bonded = rigid_stiffness(model, mesh.nodes_of("footing"), supports_of(mesh), "bonded")
    assert smooth.K_R == pytest.approx(8 * G * R**3 / (3 * (1 - NU)), rel=0.005)
    assert bonded.K_T == pytest.approx(16 * G * R**3 / 3, rel=0.005)
