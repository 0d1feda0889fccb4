"""A gmsh context manager with fixed options, so the same input gives the same mesh."""

from __future__ import annotations

import contextlib
import threading
from collections.abc import Iterator

import gmsh
import numpy as np

__all__ = ["gmsh_session", "FIXED_OPTIONS", "element_properties"]

FIXED_OPTIONS: dict[str, float] = {
    "General.Terminal": 0,
    "General.Verbosity": 1,
    "General.NumThreads": 1,  # threaded meshing is not reproducible
    "Mesh.Algorithm": 6,  # Frontal-Delaunay
    "Mesh.RandomFactor": 1e-9,
    "Mesh.MeshSizeFromPoints": 0,
    "Mesh.MeshSizeFromCurvature": 0,
    "Mesh.MeshSizeExtendFromBoundary": 0,
    "Mesh.SecondOrderIncomplete": 0,  # complete T15 with interior nodes
    "Mesh.HighOrderOptimize": 0,
    "Geometry.Tolerance": 1e-9,
}

_lock = threading.Lock()


@contextlib.contextmanager
def gmsh_session(name: str = "tiltfe") -> Iterator[None]:
    """Initialise gmsh with :data:`FIXED_OPTIONS`, yield, and always finalise.

    gmsh holds global state, so sessions are serialised with a lock within a process.
    """
    with _lock:
        gmsh.initialize(readConfigFiles=False, interruptible=False)
        try:
            for key, value in FIXED_OPTIONS.items():
                gmsh.option.setNumber(key, value)
            gmsh.model.add(name)
            yield
        finally:
            gmsh.finalize()


def element_properties(gmsh_type: int) -> tuple[int, np.ndarray]:
    """gmsh's own node count and reference node coordinates ``(n_nodes, dim)`` of an element
    type (the reference the element tests compare our node order with)."""
    with gmsh_session("element properties"):
        props = gmsh.model.mesh.getElementProperties(gmsh_type)
    dim = int(props[1])
    return int(props[3]), np.asarray(props[4], dtype=np.float64).reshape(-1, dim)
