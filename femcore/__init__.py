"""tiltfe finite element core: mesh, elements, kinematics, assembly, constraints, solvers."""

from .dofs import ConstraintError, ConstraintMap, Constraints, DofMap
from .kinematics import Analysis, CellGeometry, cell_geometry
from .mesh import Mesh, MeshError
from .model import Model

__version__ = "0.1.0"

__all__ = ["Analysis", "CellGeometry", "cell_geometry", "ConstraintError", "ConstraintMap",
           "Constraints", "DofMap", "Mesh", "MeshError", "Model", "__version__"]
