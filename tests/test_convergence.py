"""Energy-norm convergence of the thick-walled cylinder under internal pressure (Lame).

Reference (exact, any mechanics text, e.g. Timoshenko & Goodier 1951, *Theory of Elasticity*,
§28): sigma_r = A - B/r^2, sigma_theta = A + B/r^2, A = p a^2/(b^2 - a^2), B = A b^2; plane
strain sigma_z = 2 nu A. Expected energy-norm rate O(h^p) for Lagrange elements of degree p
(Strang & Fix 1973, *An Analysis of the Finite Element Method*, ch. 3); accepted if the fitted
rate is within 0.2 of p (or better). The same field is checked in plane strain (quarter
annulus, curved isoparametric boundary) and in axisymmetry (a long cylinder: r in [a, b],
axial displacement fixed top and bottom).
"""

import numpy as np
import pytest

from femcore import Model
from femcore.loads import edge_pressure
from materials import LinearElastic, elastic_matrix
from meshing import annulus_sector, rectangle

A_IN, B_OUT, P, E, NU = 1.0, 2.0, 100.0, 1.0e4, 0.3


def lame_stress(x):
    """Exact stress (..., 4) [xx, yy, zz, xy] (tension positive) at points x (..., 2)."""
    r2 = (x**2).sum(axis=-1)
    A = P * A_IN**2 / (B_OUT**2 - A_IN**2)
    Bc = A * B_OUT**2
    s_r, s_t = A - Bc / r2, A + Bc / r2
    c2, s2, cs = x[..., 0] ** 2 / r2, x[..., 1] ** 2 / r2, x[..., 0] * x[..., 1] / r2
    return np.stack([s_r * c2 + s_t * s2, s_r * s2 + s_t * c2,
                     np.full_like(r2, 2 * NU * A), (s_r - s_t) * cs], axis=-1)


def lame_stress_axisym(x):
    """Exact stress with r = x[..., 0]: [rr, zz, thetatheta, rz]."""
    r2 = x[..., 0] ** 2
    A = P * A_IN**2 / (B_OUT**2 - A_IN**2)
    Bc = A * B_OUT**2
    return np.stack([A - Bc / r2, np.full_like(r2, 2 * NU * A), A + Bc / r2,
                     np.zeros_like(r2)], axis=-1)


def energy_error(analysis, element, h):
    if analysis == "plane_strain":
        mesh = annulus_sector(A_IN, B_OUT, h, element)
    else:
        mesh = rectangle(A_IN, B_OUT, 0.0, 0.5, h, element)
    model = Model(mesh, analysis)
    model.add_block("all", None, LinearElastic(E, NU))
    cons = model.constraints()
    if analysis == "plane_strain":
        cons.fix_nodes(mesh.nodes_of("x_axis"), components=(1,))
        cons.fix_nodes(mesh.nodes_of("y_axis"), components=(0,))
        inner = mesh.edge_sets["inner"]
        exact = lame_stress
    else:
        cons.fix_nodes(mesh.nodes_of("bottom"), components=(1,))
        cons.fix_nodes(mesh.nodes_of("top"), components=(1,))
        inner = mesh.edge_sets["left"]
        exact = lame_stress_axisym
    f = edge_pressure(mesh, model.dofmap, inner, P, model.analysis)
    sol = model.solve_linear(cons.build(), f)
    geom = model.blocks[0].geom
    diff = sol.stress[0] - exact(geom.x)  # (c, q, 4)
    C = np.linalg.inv(elastic_matrix(E, NU))
    err2 = np.einsum("cqk,kl,cql,cq->", diff, C, diff, geom.dV)
    ref = exact(geom.x)
    norm2 = np.einsum("cqk,kl,cql,cq->", ref, C, ref, geom.dV)
    return np.sqrt(err2 / norm2), mesh.h_mean()


@pytest.mark.parametrize("analysis", ["plane_strain", "axisymmetric"])
@pytest.mark.parametrize("element,p,sizes", [("T6", 2, (0.2, 0.1, 0.05)),
                                             ("T15", 4, (0.25, 0.125, 0.0625))])
def test_lame_energy_rate(analysis, element, p, sizes):
    errs, hs = zip(*(energy_error(analysis, element, h) for h in sizes), strict=True)
    rate = np.polyfit(np.log(hs), np.log(errs), 1)[0]
    assert rate >= p - 0.2, f"rate {rate:.2f} for {element} ({errs})"
    assert errs[-1] < (1e-3 if p == 2 else 1e-5)
