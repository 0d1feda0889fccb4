"""tiltfe finite element core: mesh, elements, kinematics, assembly, constraints, solvers."""

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
