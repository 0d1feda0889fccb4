"""Cross-check with scikit-fem, an independent general-purpose FE library (docs/validation.md, B8).

The same T6 mesh (straight-sided, so both codes integrate the stiffness exactly), the same
quadratic body force (so both integrate the load exactly and the field is truly 2D) and the
same supports are solved by both; nodal displacements must agree to
1e-8 relative. Reference: scikit-fem (Gustafsson & McBain 2020, "scikit-fem: A Python package
for finite element assembly", JOSS 5(52), 2369).
"""

import numpy as np
import pytest

from femcore import Model
from materials import LinearElastic
from meshing import layered_domain

skfem = pytest.importorskip("skfem")


def body(x):
    """Quadratic body force (kN/m3): 2D field, integrated exactly by degree-4 rules."""
    return 0.01 * x[0] * x[1], -18.0 * (1.0 + 0.002 * x[0] ** 2)


def _solve_skfem(mesh, E, nu):
    from skfem import Basis, ElementTriP2, ElementVector, LinearForm, MeshTri, asm, condense, solve
    from skfem.models.elasticity import lame_parameters, linear_elasticity

    corners = np.unique(mesh.cells[:, :3])
    index = np.full(mesh.n_nodes, -1)
    index[corners] = np.arange(corners.size)
    m = MeshTri(mesh.points[corners].T.copy(), index[mesh.cells[:, :3]].T.copy())
    basis = Basis(m, ElementVector(ElementTriP2()), intorder=4)
    K = asm(linear_elasticity(*lame_parameters(E, nu)), basis)

    @LinearForm
    def weight(v, w):
        bx, by = body(w.x)
        return bx * v[0] + by * v[1]

    f = asm(weight, basis)
    x_min, x_max = mesh.points[:, 0].min(), mesh.points[:, 0].max()
    y_min = mesh.points[:, 1].min()
    tol = 1e-9
    d = basis.get_dofs(lambda x: np.isclose(x[0], x_min, atol=tol) | np.isclose(x[0], x_max,
                                                                                  atol=tol))
    base = basis.get_dofs(lambda x: np.isclose(x[1], y_min, atol=tol))
    fixed = np.unique(np.concatenate([d.nodal["u^1"], d.facet["u^1"],
                                      base.nodal["u^1"], base.facet["u^1"],
                                      base.nodal["u^2"], base.facet["u^2"]]))
    u = solve(*condense(K, f, D=fixed))
    # map scikit-fem DOFs to our node numbering: vertices, then edge midpoints by coordinate
    out = np.full((mesh.n_nodes, 2), np.nan)
    out[corners] = u[basis.nodal_dofs].T
    mid = m.p[:, m.facets].mean(axis=1).T  # (n_facets, 2)
    key = {tuple(np.round(p, 9)): k for k, p in enumerate(mid)}
    others = np.setdiff1d(np.arange(mesh.n_nodes), corners)
    fac = np.array([key[tuple(np.round(mesh.points[n], 9))] for n in others])
    out[others] = u[basis.facet_dofs[:, fac]].T
    return out


def test_same_displacements_as_scikit_fem():
    E, nu = 3.0e4, 0.3
    mesh = layered_domain(30.0, 12.0, [3.0], footing=(-2.0, 2.0), h=2.0, h_near=0.4,
                          element="T6")
    model = Model(mesh)
    model.add_block("soil", "soil", LinearElastic(E, nu))
    cons = model.constraints()
    cons.support_box(mesh)
    from femcore.loads import body_force

    geom = model.blocks[0].geom
    b = np.stack(body(np.moveaxis(geom.x, -1, 0)), axis=-1)  # (c, q, 2)
    f = body_force(model.dofmap, mesh.cells[model.blocks[0].cells], geom, b)
    sol = model.solve_linear(cons.build(), f)
    ours = sol.u[: 2 * mesh.n_nodes].reshape(-1, 2)
    theirs = _solve_skfem(mesh, E, nu)
    assert np.abs(ours - theirs).max() <= 1e-8 * np.abs(theirs).max()
