"""gmsh geometry builders and conversion to :class:`femcore.mesh.Mesh`.

This is the only package that imports gmsh. The region names (:mod:`meshing.regions`) and
:func:`gmsh_version` are available without loading gmsh; the builders load it on first use.
"""

from __future__ import annotations

from importlib import import_module

from . import regions

__all__ = ["gmsh_session", "layered_domain", "rectangle", "annulus_sector", "disc_in_square",
           "from_gmsh_model", "read_msh", "gmsh_version", "regions"]

_LAZY = {"layered_domain": "builders", "rectangle": "builders", "annulus_sector": "builders",
         "disc_in_square": "builders", "from_gmsh_model": "convert", "read_msh": "convert",
         "gmsh_session": "session"}


def gmsh_version() -> str:
    """Version of the gmsh library in use (for provenance records)."""
    import gmsh

    return str(gmsh.__version__)


def __getattr__(name: str):
    if name in _LAZY:
        return getattr(import_module(f".{_LAZY[name]}", __name__), name)
    raise AttributeError(f"module 'meshing' has no attribute {name!r}")
