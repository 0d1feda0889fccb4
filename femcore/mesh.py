"""The Mesh: nodes, one block of triangles and named sets, validated on construction."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from .elements import ReferenceElement, line, triangle

__all__ = ["Mesh", "MeshError"]


class MeshError(ValueError):
    """A mesh is malformed (bad shapes, indices out of range, inverted or degenerate cells)."""


@dataclass(eq=False)
class Mesh:
    """A 2D triangle mesh with named sets.

    Parameters
    ----------
    points : ndarray (n_nodes, 2)
        Node coordinates x (horizontal, or radius r) and y (vertical, up), in m.
    cells : ndarray (n_cells, n_en)
        Zero-based triangle connectivity in gmsh node order, counter-clockwise.
    element : ReferenceElement
        The triangle type (T3, T6 or T15); ``n_en`` must match.
    cell_sets : dict name -> ndarray (n,)
        Cell indices of named regions (soil layers, cap, ...).
    edge_sets : dict name -> ndarray (n_edges, order + 1)
        Line connectivity (gmsh line node order) of named boundary or interior curves.
    node_sets : dict name -> ndarray (n,)
        Named node groups (e.g. single points).
    """

    points: NDArray[np.float64]
    cells: NDArray[np.int64]
    element: ReferenceElement
    cell_sets: dict[str, NDArray[np.int64]] = field(default_factory=dict)
    edge_sets: dict[str, NDArray[np.int64]] = field(default_factory=dict)
    node_sets: dict[str, NDArray[np.int64]] = field(default_factory=dict)

    def __post_init__(self) -> None:
        self.points = np.ascontiguousarray(self.points, dtype=np.float64)
        self.cells = np.ascontiguousarray(self.cells, dtype=np.int64)
        self.cell_sets = {k: np.asarray(v, dtype=np.int64) for k, v in self.cell_sets.items()}
        self.edge_sets = {k: np.asarray(v, dtype=np.int64) for k, v in self.edge_sets.items()}
        self.node_sets = {k: np.asarray(v, dtype=np.int64) for k, v in self.node_sets.items()}
        self.validate()

    # ------------------------------------------------------------------ checks
    def validate(self) -> None:
        """Raise MeshError on bad shapes, indices out of range, inverted or degenerate cells."""
        p, c = self.points, self.cells
        if p.ndim != 2 or p.shape[1] != 2:
            raise MeshError(f"points must have shape (n_nodes, 2), got {p.shape}")
        if not np.all(np.isfinite(p)):
            bad = int(np.flatnonzero(~np.isfinite(p).all(axis=1))[0])
            raise MeshError(f"node {bad} has a non-finite coordinate {p[bad].tolist()}")
        if c.ndim != 2 or c.shape[1] != self.element.n_nodes:
            raise MeshError(
                f"cells must have shape (n_cells, {self.element.n_nodes}) for "
                f"{self.element.name}, got {c.shape}"
            )
        n = p.shape[0]
        if c.size and (c.min() < 0 or c.max() >= n):
            raise MeshError(f"cell connectivity refers to nodes outside 0..{n - 1}")
        area = self.corner_areas()
        if area.size:
            scale = max(float(np.ptp(p, axis=0).max()), 1e-300) ** 2
            bad = np.flatnonzero(area <= 1e-14 * scale)
            if bad.size:
                k = int(bad[0])
                kind = "inverted (clockwise)" if area[k] < 0 else "degenerate (zero area)"
                raise MeshError(
                    f"cell {k} is {kind}: corner nodes {c[k, :3].tolist()} at "
                    f"{p[c[k, :3]].round(6).tolist()}; {bad.size} such cell(s) in total. "
                    "Cells must be counter-clockwise with positive area."
                )
        for name, ids in self.cell_sets.items():
            if ids.size and (ids.min() < 0 or ids.max() >= c.shape[0]):
                raise MeshError(f"cell set {name!r} refers to cells outside 0..{c.shape[0] - 1}")
        for name, edges in self.edge_sets.items():
            if edges.ndim != 2 or edges.shape[1] != self.element.order + 1:
                raise MeshError(
                    f"edge set {name!r} must have shape (n_edges, {self.element.order + 1}), "
                    f"got {edges.shape}"
                )
            if edges.size and (edges.min() < 0 or edges.max() >= n):
                raise MeshError(f"edge set {name!r} refers to nodes outside 0..{n - 1}")
        for name, ids in self.node_sets.items():
            if ids.size and (ids.min() < 0 or ids.max() >= n):
                raise MeshError(f"node set {name!r} refers to nodes outside 0..{n - 1}")

    # ------------------------------------------------------------------ queries
    @property
    def n_nodes(self) -> int:
        return self.points.shape[0]

    @property
    def n_cells(self) -> int:
        return self.cells.shape[0]

    @property
    def line_element(self) -> ReferenceElement:
        """The line element matching the triangle's order (for edges)."""
        return line(self.element.order)

    def corner_areas(self) -> NDArray[np.float64]:
        """Signed area of each cell's corner triangle, ``(n_cells,)``."""
        x = self.points[self.cells[:, :3]]  # (c, 3, 2)
        e1 = x[:, 1] - x[:, 0]
        e2 = x[:, 2] - x[:, 0]
        return 0.5 * (e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0])

    def nodes_of(self, name: str) -> NDArray[np.int64]:
        """Sorted unique nodes of a named node, edge or cell set."""
        if name in self.node_sets:
            return np.unique(self.node_sets[name])
        if name in self.edge_sets:
            return np.unique(self.edge_sets[name])
        if name in self.cell_sets:
            return np.unique(self.cells[self.cell_sets[name]])
        known = sorted({*self.node_sets, *self.edge_sets, *self.cell_sets})
        raise KeyError(f"no set named {name!r}; known sets: {known}")

    def h_mean(self) -> float:
        """Mean cell size sqrt(2 * area) of the corner triangles, in m."""
        return float(np.sqrt(2.0 * self.corner_areas()).mean())

    def mirrored(self) -> Mesh:
        """The mirror image about x = 0, with cells re-ordered to stay counter-clockwise."""
        pts = self.points * np.array([-1.0, 1.0])
        cells = self.cells[:, self.element.mirror_permutation]
        return Mesh(pts, cells, self.element, dict(self.cell_sets), dict(self.edge_sets),
                    dict(self.node_sets))

    def split_nodes(self, nodes: NDArray[np.int64], cells: NDArray[np.int64]):
        """Give ``cells`` their own copies of ``nodes`` (a crack or contact surface).

        Returns the new mesh and ``new_index (n_nodes,)``: the copy of each split node, -1
        elsewhere. Named sets keep the original nodes; copies are appended at the end.
        """
        nodes = np.unique(np.asarray(nodes, dtype=np.int64))
        new_index = np.full(self.n_nodes, -1, dtype=np.int64)
        new_index[nodes] = self.n_nodes + np.arange(nodes.size)
        conn = self.cells.copy()
        sub = conn[cells]
        hit = new_index[sub] >= 0
        sub[hit] = new_index[sub[hit]]
        conn[cells] = sub
        pts = np.vstack([self.points, self.points[nodes]])
        mesh = Mesh(pts, conn, self.element, self.cell_sets, self.edge_sets, self.node_sets)
        return mesh, new_index

    def without_cells(self, cells: NDArray[np.int64]):
        """The mesh without ``cells`` and without the nodes only they used.

        Returns the new mesh and ``old_to_new (n_nodes,)`` (-1 for removed nodes). Cell sets
        lose the removed cells; edge and node sets keep what still exists."""
        drop = np.zeros(self.n_cells, dtype=bool)
        drop[np.asarray(cells, dtype=np.int64)] = True
        keep_cells = np.flatnonzero(~drop)
        used = np.zeros(self.n_nodes, dtype=bool)
        used[self.cells[keep_cells]] = True
        old_to_new = np.full(self.n_nodes, -1, dtype=np.int64)
        old_to_new[used] = np.arange(int(used.sum()))
        cell_new = np.full(self.n_cells, -1, dtype=np.int64)
        cell_new[keep_cells] = np.arange(keep_cells.size)
        csets = {k: cell_new[v][cell_new[v] >= 0] for k, v in self.cell_sets.items()}
        esets = {k: old_to_new[v[np.all(used[v], axis=1)]] for k, v in self.edge_sets.items()}
        nsets = {k: old_to_new[v[used[v]]] for k, v in self.node_sets.items()}
        mesh = Mesh(self.points[used], old_to_new[self.cells[keep_cells]], self.element,
                    csets, esets, nsets)
        return mesh, old_to_new

    @staticmethod
    def of_type(name: str) -> ReferenceElement:
        """Reference triangle by name ("T3", "T6", "T15")."""
        return triangle(name)
