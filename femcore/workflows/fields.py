"""Field output for VTK viewers (meshio): displacements and stresses on a linear sub-mesh.

Each T6/T15 cell is split into order**2 linear triangles over its own nodes, so any VTK
viewer shows the high-order solution at every node without special cell types.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from femcore.mesh import Mesh

__all__ = ["write_vtu", "nodal_average"]


def nodal_average(mesh: Mesh, cells: NDArray[np.int64], values: NDArray[np.float64]):
    """Average per-cell values ``(c, k)`` onto the nodes of those cells -> ``(n_nodes, k)``."""
    conn = mesh.cells[cells]  # (c, a)
    n_en = conn.shape[1]
    k = values.shape[1]
    total = np.zeros((mesh.n_nodes, k))
    np.add.at(total, conn.ravel(), np.repeat(values, n_en, axis=0))
    count = np.bincount(conn.ravel(), minlength=mesh.n_nodes)[:, None]
    return np.divide(total, count, out=np.zeros_like(total), where=count > 0)


def write_vtu(
    path: str | Path,
    mesh: Mesh,
    displacement: NDArray[np.float64] | None = None,
    cell_values: dict[str, NDArray[np.float64]] | None = None,
    point_values: dict[str, NDArray[np.float64]] | None = None,
) -> Path:
    """Write a .vtu file.

    Parameters
    ----------
    displacement : (n_nodes, 2), optional
        Written as a 3-vector point field ``displacement`` (z = 0).
    cell_values : name -> (n_cells,) or (n_cells, k)
        Per-cell values (e.g. Gauss-point averages of stress); also averaged to the nodes.
    point_values : name -> (n_nodes,) or (n_nodes, k)
    """
    import meshio  # lazy: keeps CLI start-up fast

    sub = mesh.element.sub_triangles  # (s, 3)
    tris = mesh.cells[:, sub].reshape(-1, 3)  # (c * s, 3)
    n_sub = sub.shape[0]
    points = np.column_stack([mesh.points, np.zeros(mesh.n_nodes)])
    pdata: dict[str, NDArray] = {}
    if displacement is not None:
        d = np.asarray(displacement).reshape(mesh.n_nodes, 2)
        pdata["displacement"] = np.column_stack([d, np.zeros(mesh.n_nodes)])
    for name, v in (point_values or {}).items():
        pdata[name] = np.asarray(v)
    cdata: dict[str, list[NDArray]] = {}
    all_cells = np.arange(mesh.n_cells)
    for name, v in (cell_values or {}).items():
        v = np.asarray(v, dtype=np.float64)
        v2 = v.reshape(mesh.n_cells, -1)
        cdata[name] = [np.repeat(v, n_sub, axis=0)]
        avg = nodal_average(mesh, all_cells, v2)
        pdata[f"{name}_nodal"] = avg[:, 0] if v.ndim == 1 else avg
    out = Path(path)
    meshio.write(out, meshio.Mesh(points, [("triangle", tris)], point_data=pdata,
                                  cell_data=cdata))
    return out
