"""Newton failure handling, pushover cutback and reporting, at-rest (K0) initial stresses
(docs/validation.md, F5, F6).

References: an applied vertical load above the undrained bearing capacity (2 + pi) s_u B
(Prandtl 1920) has no equilibrium solution, so Newton must fail and say so; K0 stresses of a
level layered profile are in exact equilibrium with self-weight (sigma_v = integral of the
unit weight, a fact of statics) and are reproduced exactly by T6 (linear stress in depth).
"""

import numpy as np
import pytest

from femcore import Model
from femcore.initial_stress import (
    Layer,
    Profile,
    apply_k0,
    equilibrium_error,
    gravity_stresses,
    k0_stresses,
    profile_loads,
)
from femcore.loads import edge_traction
from femcore.newton import ConvergenceError, newton
from femcore.stepping import Stepper, StepSettings, residual_callback
from materials import LinearElastic, MohrCoulomb, Tresca
from meshing import layered_domain

SU, B = 10.0, 2.0


def _strip(load_factor):
    """Half model of a flexible strip load q = load_factor (2 + pi) s_u on Tresca soil, with
    the horizontal displacement of a far node as a dummy controlled DOF."""
    mesh = layered_domain(3 * B, 2 * B, x_min=0.0, footing=(0.0, B / 2), h=B / 2, h_near=0.1,
                          refine_radius=B, element="T6")
    model = Model(mesh)
    model.add_block("soil", "soil", Tresca(3000.0, 0.49, SU))
    cons = model.constraints()
    cons.support_box(mesh)
    cmap = cons.build()
    q = load_factor * (2 + np.pi) * SU
    f = edge_traction(mesh, model.dofmap, mesh.edge_sets["footing"], np.array([0.0, -q]))
    return model, cmap, f


def test_impossible_load_raises_convergence_error_with_history():
    model, cmap, f = _strip(1.5)
    cb = residual_callback(model, cmap, f, model.initial_states())
    with pytest.raises(ConvergenceError) as info:
        newton(cb, np.zeros(cmap.n_free), max_iter=15)
    assert len(info.value.history) >= 2
    assert "relative residuals" in str(info.value)
    # a load at half the capacity converges
    model, cmap, f = _strip(0.5)
    res = newton(residual_callback(model, cmap, f, model.initial_states()),
                 np.zeros(cmap.n_free))
    assert res.history[-1] <= 1e-6


def test_pushover_cuts_back_and_reports_divergence():
    # the held load (1.5 x capacity) cannot be carried: every increment fails, the driver
    # halves the step down to its minimum and ends with status "diverged" and a message
    model, cmap, f = _strip(1.5)
    right = model.mesh.nodes_of("right")
    dof = int(2 * right[0])  # a roller node: its u_x is prescribed (zero) and "driven"
    po = Stepper(model, cmap, f, [dof], [0.0],
                  settings=StepSettings(initial_step=0.1, min_step=0.02, max_iterations=8))
    res = po.run()
    assert res.status == "diverged"
    assert res.cutbacks >= 3 and "no convergence" in res.message
    assert res.records == []


def test_k0_profile_values():
    # sigma_v by hand: crust 1.2 m at 17, water table 0.6 m, gamma_sat 17.5 below; clay 2 m
    # at gamma_sat 15.5: at 3.2 m: 0.6*17 + 0.6*17.5 + 2*15.5 = 51.7 kPa total,
    # u = 9.81 * 2.6 = 25.506 kPa
    prof = Profile((Layer(0.0, 1.2, 17.0, 17.5, K0=0.6), Layer(1.2, 5.0, 15.0, 15.5, K0=0.7,
                                                                  drained=False)),
                   water_table=0.6)
    assert prof.total_vertical(np.array([3.2]))[0] == pytest.approx(51.7, rel=1e-12)
    assert prof.pore_pressure(np.array([3.2]))[0] == pytest.approx(25.506, rel=1e-12)
    s = k0_stresses(prof, np.array([[0.0, -3.2], [0.0, -1.0]]))
    # undrained layer: total stresses, sigma_h = K0 sigma'_v + u
    assert s[0, 1] == pytest.approx(-51.7)
    assert s[0, 0] == pytest.approx(-(0.7 * (51.7 - 25.506) + 25.506))
    # drained crust: effective stresses
    sv1 = 0.6 * 17 + 0.4 * 17.5
    assert s[1, 1] == pytest.approx(-(sv1 - 9.81 * 0.4))
    assert s[1, 0] == pytest.approx(0.6 * s[1, 1])


@pytest.mark.parametrize("element", ["T6", "T15"])
def test_k0_state_is_in_equilibrium(element):
    """Level layered ground, water table inside a drained layer, an undrained layer between
    two drained ones: the K0 state balances weight + pore pressure load to round-off (the
    water table is a mesh line, so every kink of the stress profile lies on element edges)."""
    prof = Profile((Layer(0.0, 1.5, 17.0, 19.0, K0=0.5),
                    Layer(1.5, 4.0, 15.0, 15.5, K0=0.8, drained=False),
                    Layer(4.0, 10.0, 19.0, 20.5, K0=0.45)), water_table=0.7)
    mesh = layered_domain(12.0, 10.0, [1.5, 4.0], extra_depths=[0.7], h=1.5, h_near=1.5,
                          element=element)
    model = Model(mesh)
    model.add_block("crust", "layer_1", MohrCoulomb(1e4, 0.3, 5.0, 30.0))
    model.add_block("clay", "layer_2", Tresca(3e3, 0.49, 15.0))
    model.add_block("sand", "layer_3", MohrCoulomb(4e4, 0.3, 0.1, 35.0, 5.0))
    cons = model.constraints()
    cons.support_box(mesh)
    cmap = cons.build()
    states = apply_k0(model, prof, model.initial_states())
    f = profile_loads(model, prof)
    assert equilibrium_error(model, cmap, states, f) < 1e-10
    # and Newton accepts it at once: zero iterations, no plastic point
    res = newton(residual_callback(model, cmap, f, states), np.zeros(cmap.n_free))
    assert res.iterations == 0


def test_self_weight_solve_gives_k0_of_nu():
    """A self-weight solve of an elastic layer with lateral rollers: sigma_h / sigma_v =
    nu / (1 - nu) (one-dimensional compression, common practice)."""
    prof = Profile((Layer(0.0, 10.0, 18.0, K0=1.0),))
    mesh = layered_domain(6.0, 10.0, h=1.0, element="T6")
    model = Model(mesh)
    model.add_block("soil", "soil", LinearElastic(1e4, 0.25))
    cons = model.constraints()
    cons.support_box(mesh)
    states = gravity_stresses(model, cons.build(), profile_loads(model, prof))
    s = states[0].stress
    assert np.allclose(s[..., 0] / s[..., 1], 0.25 / 0.75, rtol=1e-8)
    depth = -model.blocks[0].geom.x[..., 1]
    assert np.allclose(-s[..., 1], 18.0 * depth, rtol=1e-8, atol=1e-8)


def test_broyden_updates_reach_the_root_with_fewer_factorizations():
    """A stiffening cubic system r(x) = A x + 0.05 x^3 - b (A a 1D Laplacian): Newton with
    Broyden updates (Broyden 1965) converges to the root that scipy.optimize.root finds
    (to 1e-8 relative) and factorizes fewer tangents than plain Newton."""
    import scipy.sparse as sp
    from scipy.optimize import root

    n = 40
    A = sp.diags([-1.0, 2.0, -1.0], [-1, 0, 1], shape=(n, n), format="csc") * 50.0
    b = np.linspace(1.0, 30.0, n)
    count = {"plain": 0, "broyden": 0}

    def make(kind):
        def residual(x):
            def tangent():
                count[kind] += 1
                return (A + sp.diags(0.15 * x**2)).tocsc()
            r = A @ x + 0.05 * x**3 - b
            return r, tangent, float(np.linalg.norm(b)), None
        return residual

    ref = root(lambda x: A @ x + 0.05 * x**3 - b, np.zeros(n), tol=1e-12).x
    plain = newton(make("plain"), np.zeros(n), rtol=1e-10)
    quasi = newton(make("broyden"), np.zeros(n), rtol=1e-10, broyden=8)
    for res in (plain, quasi):
        assert np.allclose(res.x, ref, rtol=1e-8, atol=1e-8 * np.abs(ref).max())
    assert count["broyden"] < count["plain"]


def test_broyden_updates_carry_over_to_the_next_load_step():
    """The same stiffening system loaded in ten steps b_k = k b / 10, each solved from the
    last root with a shared ``reuse`` dict: every step's root equals scipy.optimize.root's
    (to 1e-8 relative), and carrying the Broyden updates from one step to the next needs no
    more factorizations than starting every step from the bare factorization (the carried
    updates describe the tangent near the last root)."""
    import scipy.sparse as sp
    from scipy.optimize import root

    import femcore.newton as nm

    n = 40
    A = sp.diags([-1.0, 2.0, -1.0], [-1, 0, 1], shape=(n, n), format="csc") * 50.0
    b_end = np.linspace(1.0, 30.0, n)

    def run(carry: bool) -> int:
        count = [0]

        def make(b):
            def residual(x):
                def tangent():
                    count[0] += 1
                    return (A + sp.diags(0.15 * x**2)).tocsc()
                return A @ x + 0.05 * x**3 - b, tangent, float(np.linalg.norm(b)), None
            return residual

        reuse: dict = {}
        x = np.zeros(n)
        for k in range(1, 11):
            b = k * b_end / 10
            if not carry and isinstance(reuse.get("lu"), nm._Broyden):
                reuse["lu"] = reuse["lu"].lu  # the bare factorization only
            x = newton(make(b), x, rtol=1e-10, broyden=8, reuse=reuse).x
            ref = root(lambda y, b=b: A @ y + 0.05 * y**3 - b, x, tol=1e-12).x
            assert np.allclose(x, ref, rtol=1e-8, atol=1e-8 * np.abs(ref).max())
        return count[0]

    assert run(carry=True) <= run(carry=False)


def test_bordered_matrix_equals_scipy_block_assembly():
    """The bordered tangent of proportional loading, built by inserting one row entry and one
    column into K's CSC arrays, equals SciPy's general block assembly ``bmat`` (independent
    code) entry by entry, and solves the same system."""
    import scipy.sparse as sp

    from femcore.stepping import bordered_csc

    rng = np.random.default_rng(3)
    n = 60
    K = (sp.random(n, n, density=0.08, format="csc", random_state=4) + 4 * sp.eye(n)).tocsc()
    rows = np.array([51, 2, 30, 17])
    vals = rng.normal(size=rows.size)
    B = bordered_csc(K, rows, vals, 9, 2.5)
    col = sp.csc_matrix((vals, (rows, np.zeros(rows.size, dtype=int))), shape=(n, 1))
    row = sp.csc_matrix(([2.5], ([0], [9])), shape=(1, n))
    ref = sp.bmat([[K, col], [row, None]], format="csc")
    assert B.shape == (n + 1, n + 1)
    assert abs(B - ref).max() == 0.0
    b = rng.normal(size=n + 1)
    from femcore.linsolve import solve

    assert np.allclose(solve(B, b, "superlu"), solve(ref, b, "superlu"), rtol=1e-12)
