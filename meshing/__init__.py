"""gmsh geometry builders and conversion to :class:`femcore.mesh.Mesh`.

This is the only package that imports gmsh.
"""

from .builders import annulus_sector, layered_domain, rectangle
from .convert import from_gmsh_model, read_msh
from .session import gmsh_session

__all__ = ["gmsh_session", "layered_domain", "rectangle", "annulus_sector", "from_gmsh_model",
           "read_msh"]
