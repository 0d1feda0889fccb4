"""tiltfe: nonlinear finite elements for the cap-pile-soil system of wind-turbine foundations.

Layers (each imports only the ones above it):

* ``materials`` -- constitutive models, numpy only;
* ``femcore`` (this package, flat) -- the FE engine: :class:`Mesh`, elements and quadrature,
  :mod:`~femcore.kinematics`, DOFs and constraints, assembly, :class:`Model`, Newton and the
  incremental :class:`~femcore.stepping.Stepper`, beams, springs and contact;
* ``meshing`` -- gmsh geometry builders, the only package that imports gmsh;
* ``femcore.foundation`` -- the foundation application: design schema, layout, model builder,
  stages, key points, requirement checks; :func:`run_design` is its one run path;
* ``femcore.workflows`` -- the ``tiltfe`` command, result files, report, campaigns.

The engine in a few steps: a plane-strain bar of two linear triangles, stretched by 1 per mille
with free lateral contraction, carries sigma_xx = E / (1 - nu^2) * eps exactly (constant-strain
elements reproduce a uniform field: the patch test of Irons & Razzaque 1972):

>>> import numpy as np
>>> from femcore import Mesh, Model
>>> from materials import LinearElastic
>>> points = np.array([[0.0, 0.0], [2.0, 0.0], [2.0, 1.0], [0.0, 1.0]])  # (n_nodes, 2), m
>>> mesh = Mesh(points, np.array([[0, 1, 2], [0, 2, 3]]), Mesh.of_type("T3"))
>>> model = Model(mesh, "plane_strain")
>>> block = model.add_block("bar", None, LinearElastic(E=1000.0, nu=0.25))  # kPa
>>> cons = model.constraints()
>>> cons.fix_nodes([0, 3], (0,))                # u_x = 0 on the left edge
>>> cons.fix_nodes([0], (1,))                   # u_y = 0 at one corner
>>> cons.fix(model.dofmap.node_dofs(np.array([1, 2]), 0), 2e-3)  # right edge: u_x = 2 mm
>>> sol = model.solve_linear(cons.build(), np.zeros(model.n_dofs))
>>> sigma = sol.stress[0]                       # (cells, points, 4): xx, yy, zz, xy in kPa
>>> bool(np.allclose(sigma[..., 0], 1000.0 / (1 - 0.25**2) * 1e-3))
True
>>> bool(np.allclose(sigma[..., 2], 0.25 * sigma[..., 0]))  # sigma_zz = nu sigma_xx
True

A whole foundation: ``femcore.run_design(femcore.load_design("design.toml"))`` returns a
:class:`~femcore.foundation.run.Result` with the curve, key points, the dynamic stiffness and
every requirement check (``result.to_dict()`` is what ``result.json`` holds).
"""

from .dofs import ConstraintError, ConstraintMap, Constraints, DofMap
from .kinematics import CellGeometry, Kinematics, cell_geometry
from .mesh import Mesh, MeshError
from .model import Model

__version__ = "0.1.0"

__all__ = ["run_design", "Result", "load_design", "demo_design", "Kinematics", "CellGeometry",
           "cell_geometry", "ConstraintError", "ConstraintMap", "Constraints", "DofMap", "Mesh",
           "MeshError", "Model", "__version__"]


def __getattr__(name: str):
    """``femcore.run_design`` / ``femcore.Result`` / ``femcore.load_design``, imported on first
    use (keeps ``tiltfe --help`` fast)."""
    if name in ("run_design", "Result"):
        from .foundation import run

        return getattr(run, name)
    if name in ("load_design", "demo_design"):
        from .foundation import design

        return getattr(design, name)
    raise AttributeError(f"module 'femcore' has no attribute {name!r}")
