"""Patch tests on distorted T3/T6/T15 meshes, plane strain and axisymmetric.

Reference: a displacement field that produces constant stress in equilibrium must be reproduced
exactly (to round-off) by a convergent element (Irons & Razzaque 1972, "Experience with the
patch test for convergence of finite elements"; Zienkiewicz, Taylor & Zhu 2013, ch. 9).
Plane strain: any linear field. Axisymmetric: u_r = a r, u_z = b z + e (constant stress,
sigma_rr = sigma_thetatheta and no shear, so the 1/r equilibrium terms vanish).
Tolerance 1e-10 relative.
"""

import numpy as np
import pytest
from conftest import distort, nodal

from femcore import Kinematics, Model
from materials import LinearElastic, elastic_matrix
from meshing import rectangle


def exact_field(points, analysis):
    x, y = points.T
    if analysis == "plane_strain":
        return np.column_stack([1e-3 + 2e-3 * x - 1e-3 * y, -2e-3 + 0.5e-3 * x + 3e-3 * y])
    return np.column_stack([2e-3 * x, 3e-3 * y - 1e-3])


@pytest.mark.parametrize("element", ["T3", "T6", "T15"])
@pytest.mark.parametrize("analysis", ["plane_strain", "axisymmetric"])
def test_patch_distorted(element, analysis):
    mesh = distort(rectangle(0.5, 2.5, 0.0, 1.5, 0.35, element), 0.25, seed=3)
    model = Model(mesh, analysis)
    mat = LinearElastic(E=2.0e4, nu=0.3)
    model.add_block("all", None, mat)
    u_ex = exact_field(mesh.points, analysis)
    cons = model.constraints()
    boundary = np.unique(np.concatenate([mesh.nodes_of(k) for k in ("left", "right", "top",
                                                                      "bottom")]))
    for d in (0, 1):
        cons.fix(model.dofmap.node_dofs(boundary, d), u_ex[boundary, d])
    sol = model.solve_linear(cons.build(), np.zeros(model.n_dofs))
    u = nodal(sol.u, mesh)
    scale = np.abs(u_ex).max()
    assert np.abs(u - u_ex).max() <= 1e-10 * scale
    # constant stress everywhere, equal to D eps
    if analysis == "plane_strain":
        eps = np.array([2e-3, 3e-3, 0.0, -1e-3 + 0.5e-3])
    else:
        eps = np.array([2e-3, 3e-3, 2e-3, 0.0])
    sig = elastic_matrix(mat.E, mat.nu) @ eps
    assert np.allclose(sol.stress[0], sig, rtol=0, atol=1e-9 * np.abs(sig).max())
    assert model.analysis is Kinematics(analysis)
