"""Reference Lagrange elements: triangles T3, T6, T15 and lines with 2, 3 and 5 nodes.

Node order is gmsh's (checked against ``gmsh.model.mesh.getElementProperties`` in the
tests). Reference triangle: vertices (0, 0), (1, 0), (0, 1). Reference line: [-1, 1].

T6 (gmsh type 9)::

    2
    |`.
    5  4
    |    `.
    0--3---1

T15 (gmsh type 23)::

    2
    | `.
    9   8
    |     `.
    10  14  7
    |         `.
    11  12  13  6
    |             `.
    0---3---4---5---1

Lines: nodes 0 and 1 are the ends (xi = -1, +1), then interior nodes from end 0 to end 1.

Shape functions are built from a monomial basis and the inverse of its Vandermonde matrix at
the nodes, so every element is nodal by construction and all evaluations are vectorized over
points. The Vandermonde matrices are tiny (at most 15 x 15) and well conditioned for p <= 4.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
from numpy.typing import NDArray

__all__ = ["ReferenceElement", "T3", "T6", "T15", "LINE2", "LINE3", "LINE5", "triangle", "line"]


def _triangle_exponents(order: int) -> NDArray[np.int64]:
    """Exponents (i, j) of the monomials x^i y^j with i + j <= order."""
    return np.array(
        [(i, d - i) for d in range(order + 1) for i in range(d, -1, -1)], dtype=np.int64
    )  # (n_monomials, 2)


@dataclass(frozen=True, eq=False)
class ReferenceElement:
    """A Lagrange element on its reference cell.

    Attributes
    ----------
    name : str
        "T3", "T6", "T15", "L2", "L3" or "L5".
    dim : int
        Reference dimension (2 for triangles, 1 for lines).
    order : int
        Polynomial degree p.
    nodes : ndarray (n_nodes, dim)
        Reference coordinates of the nodes, in gmsh order.
    gmsh_type : int
        gmsh element type number.
    meshio_type : str
        meshio cell type name.
    """

    name: str
    dim: int
    order: int
    nodes: NDArray[np.float64]
    gmsh_type: int
    meshio_type: str
    _exponents: NDArray[np.int64] = field(repr=False, default=None)  # type: ignore[assignment]

    def __post_init__(self) -> None:
        if self._exponents is None:
            if self.dim == 2:
                exps = _triangle_exponents(self.order)
            else:
                exps = np.arange(self.order + 1)[:, None]
            object.__setattr__(self, "_exponents", exps)

    @property
    def n_nodes(self) -> int:
        return self.nodes.shape[0]

    @cached_property
    def _coefficients(self) -> NDArray[np.float64]:
        vander = self._monomials(self.nodes)  # (n_nodes, n_monomials)
        return np.linalg.inv(vander)  # (n_monomials, n_nodes)

    def _monomials(self, xi: NDArray[np.float64]) -> NDArray[np.float64]:
        xi = np.atleast_2d(xi)
        return np.prod(xi[:, None, :] ** self._exponents[None, :, :], axis=-1)  # (n_pts, n_mono)

    def _monomial_gradients(self, xi: NDArray[np.float64]) -> NDArray[np.float64]:
        xi = np.atleast_2d(xi)
        exps = self._exponents  # (n_mono, dim)
        grads = np.empty((xi.shape[0], exps.shape[0], self.dim))  # (n_pts, n_mono, dim)
        for d in range(self.dim):  # loop over reference dimensions (1 or 2), not over points
            lowered = exps.copy()
            lowered[:, d] = np.maximum(exps[:, d] - 1, 0)
            grads[:, :, d] = exps[None, :, d] * np.prod(
                xi[:, None, :] ** lowered[None, :, :], axis=-1
            )
        return grads

    def shape(self, xi: NDArray[np.float64]) -> NDArray[np.float64]:
        """Shape functions at reference points ``xi (n_pts, dim)`` -> ``(n_pts, n_nodes)``."""
        return self._monomials(xi) @ self._coefficients

    def shape_gradients(self, xi: NDArray[np.float64]) -> NDArray[np.float64]:
        """Reference gradients at ``xi (n_pts, dim)`` -> ``(n_pts, n_nodes, dim)``."""
        return np.einsum("pmd,ma->pad", self._monomial_gradients(xi), self._coefficients)

    @cached_property
    def lattice(self) -> NDArray[np.int64]:
        """Integer lattice coordinates of the nodes, ``nodes * order`` rounded."""
        return np.rint(self.nodes * self.order).astype(np.int64)  # (n_nodes, dim)

    @cached_property
    def mirror_permutation(self) -> NDArray[np.int64]:
        """Node permutation that keeps a cell counter-clockwise after mirroring x -> -x.

        A mirror reverses orientation; swapping the reference coordinates (xi, eta) -> (eta, xi)
        reverses it again. ``new_cell = old_cell[:, perm]``.
        """
        if self.dim != 2:
            return np.arange(self.n_nodes)  # a line keeps its orientation meaning under a mirror
        key = {tuple(c): a for a, c in enumerate(self.lattice.tolist())}
        return np.array([key[(c[1], c[0])] for c in self.lattice.tolist()], dtype=np.int64)

    @cached_property
    def sub_triangles(self) -> NDArray[np.int64]:
        """Split of a triangle into order**2 linear triangles over its node lattice.

        Used for visualisation output (any VTK viewer shows linear triangles).
        """
        if self.dim != 2:
            raise ValueError("sub_triangles is defined for triangles only")
        p = self.order
        key = {tuple(c): a for a, c in enumerate(self.lattice.tolist())}
        tris = []
        for j in range(p):
            for i in range(p - j):
                tris.append((key[(i, j)], key[(i + 1, j)], key[(i, j + 1)]))
                if i + j + 2 <= p:
                    tris.append((key[(i + 1, j)], key[(i + 1, j + 1)], key[(i, j + 1)]))
        return np.array(tris, dtype=np.int64)  # (order**2, 3)

    @cached_property
    def edges(self) -> NDArray[np.int64]:
        """Local nodes of each triangle edge, ordered as a gmsh line of the same order.

        Edge k runs from vertex k to vertex (k + 1) % 3; row = [start, end, interior...].
        """
        if self.dim != 2:
            raise ValueError("edges is defined for triangles only")
        p = self.order
        out = []
        corners = [(0, 0), (p, 0), (0, p)]
        key = {tuple(c): a for a, c in enumerate(self.lattice.tolist())}
        for k in range(3):
            a = np.array(corners[k])
            b = np.array(corners[(k + 1) % 3])
            pts = [a, b] + [a + (b - a) * s // p for s in range(1, p)]
            out.append([key[tuple(int(v) for v in q)] for q in pts])
        return np.array(out, dtype=np.int64)  # (3, order + 1)


def _triangle_nodes(order: int) -> NDArray[np.float64]:
    """gmsh node order for complete triangles of order 1, 2, 4 (vertices, edges, interior)."""
    if order == 1:
        lat = [(0, 0), (1, 0), (0, 1)]
    elif order == 2:
        lat = [(0, 0), (2, 0), (0, 2), (1, 0), (1, 1), (0, 1)]
    elif order == 4:
        lat = [(0, 0), (4, 0), (0, 4),
               (1, 0), (2, 0), (3, 0),   # edge 0 -> 1
               (3, 1), (2, 2), (1, 3),   # edge 1 -> 2
               (0, 3), (0, 2), (0, 1),   # edge 2 -> 0
               (1, 1), (2, 1), (1, 2)]   # interior: a T3 of the inner lattice, gmsh order
    else:
        raise ValueError(f"triangle order {order} is not supported (1, 2 or 4)")
    return np.array(lat, dtype=np.float64) / order


def _line_nodes(order: int) -> NDArray[np.float64]:
    inner = np.linspace(-1.0, 1.0, order + 1)[1:-1]
    return np.concatenate([[-1.0, 1.0], inner])[:, None]


T3 = ReferenceElement("T3", 2, 1, _triangle_nodes(1), 2, "triangle")
T6 = ReferenceElement("T6", 2, 2, _triangle_nodes(2), 9, "triangle6")
T15 = ReferenceElement("T15", 2, 4, _triangle_nodes(4), 23, "triangle15")
LINE2 = ReferenceElement("L2", 1, 1, _line_nodes(1), 1, "line")
LINE3 = ReferenceElement("L3", 1, 2, _line_nodes(2), 8, "line3")
LINE5 = ReferenceElement("L5", 1, 4, _line_nodes(4), 27, "line5")

_TRIANGLES = {1: T3, 2: T6, 4: T15, "T3": T3, "T6": T6, "T15": T15}
_LINES = {1: LINE2, 2: LINE3, 4: LINE5}


def triangle(kind: int | str) -> ReferenceElement:
    """The triangle of a given order (1, 2, 4) or name ("T3", "T6", "T15")."""
    try:
        return _TRIANGLES[kind]
    except KeyError:
        raise ValueError(f"unknown triangle {kind!r}: use T3, T6 or T15") from None


def line(order: int) -> ReferenceElement:
    """The line element of a given order (1, 2, 4)."""
    try:
        return _LINES[order]
    except KeyError:
        raise ValueError(f"unknown line order {order!r}: use 1, 2 or 4") from None
