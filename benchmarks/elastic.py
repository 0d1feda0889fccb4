"""Elastic continuum problems shared by the tests and the benchmark runner.

* Uniform strip load on an elastic half-space (Poulos & Davis 1974, *Elastic Solutions for
  Soil and Rock Mechanics*): closed-form stresses.
* Rigid strip rocking (Gazetas 1991) and rigid circular punch (Sneddon 1946; Spence 1968):
  stiffness read at a reference node.
* Thick cylinder under internal pressure (Lame; Timoshenko & Goodier 1951): energy-norm error
  of the finite element stress field.
"""

from __future__ import annotations

import numpy as np

from femcore import Model
from femcore.loads import edge_pressure
from materials import LinearElastic, elastic_matrix
from meshing import annulus_sector, layered_domain, rectangle

__all__ = ["strip_stress", "rocking_stiffness", "punch_stiffness", "lame_stress",
           "lame_stress_axisym", "energy_error", "E", "NU", "G"]

E, NU = 1.0e4, 0.3
G = E / (2 * (1 + NU))
A_IN, B_OUT, P = 1.0, 2.0, 100.0


def strip_stress(x, q=1.0, b=1.0):
    """Uniform strip load q on |x| <= b: stresses [xx, yy, xy], tension positive, y up.

    Poulos & Davis (1974), *Elastic Solutions for Soil and Rock Mechanics*, Table 3.1 (from
    memory): sigma_z = q/pi [alpha + sin(alpha) cos(t1 + t2)], sigma_x = q/pi [alpha -
    sin(alpha) cos(t1 + t2)], tau = q/pi sin(alpha) sin(t1 + t2); t_i = atan((x -+ b)/z).
    """
    X, z = x[..., 0], np.maximum(-x[..., 1], 1e-300)
    t1, t2 = np.arctan((X + b) / z), np.arctan((X - b) / z)
    a, s = t1 - t2, t1 + t2
    sz = q / np.pi * (a + np.sin(a) * np.cos(s))
    sx = q / np.pi * (a - np.sin(a) * np.cos(s))
    txz = q / np.pi * np.sin(a) * np.sin(s)
    return np.stack([-sx, -sz, txz], axis=-1)


def rocking_stiffness(element, h_near, components, width=40.0):
    b = 1.0
    mesh = layered_domain(width, width / 2, footing=(-b, b), h=width / 20, h_near=h_near,
                          refine_radius=2.5, element=element)
    model = Model(mesh)
    model.add_block("soil", "soil", LinearElastic(E, NU))
    model.add_reference_point("footing", (0.0, 0.0))
    cons = model.constraints()
    cons.support_box(mesh)
    cons.tie_rigid(mesh.nodes_of("footing"), "footing", components)
    dm = model.dofmap
    theta = 1e-4
    cons.fix([dm.ref_dof("footing", 2)], [theta])
    if 0 not in components:
        cons.fix([dm.ref_dof("footing", 0)], [0.0])  # unused horizontal DOF of the reference
    cmap = cons.build()
    sol = model.solve_linear(cmap, np.zeros(model.n_dofs))
    moment = cmap.generalized_at(sol.reactions, dm.ref_dof("footing", 2))
    vertical = cmap.generalized_at(sol.reactions, dm.ref_dof("footing", 1))
    return moment / theta, vertical


def punch_stiffness(L, components, element="T15", h_near=0.05):
    R = 1.0
    mesh = layered_domain(L, L, x_min=0.0, footing=(0.0, R), h=L / 10, h_near=h_near,
                          refine_radius=2.0, element=element)
    model = Model(mesh, "axisymmetric")
    model.add_block("soil", "soil", LinearElastic(E, NU))
    model.add_reference_point("punch", (0.0, 0.0))
    cons = model.constraints()
    cons.support_box(mesh)
    nodes = mesh.nodes_of("footing")
    nodes = nodes[mesh.points[nodes, 0] > 0]  # the axis node keeps u_r = 0 from symmetry
    cons.tie_rigid(nodes, "punch", components)
    dm = model.dofmap
    w = -1e-3
    cons.fix([dm.ref_dof("punch", 0), dm.ref_dof("punch", 1), dm.ref_dof("punch", 2)],
             [0.0, w, 0.0])
    cmap = cons.build()
    sol = model.solve_linear(cmap, np.zeros(model.n_dofs))
    return cmap.generalized_at(sol.reactions, dm.ref_dof("punch", 1)) / w




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


