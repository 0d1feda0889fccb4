"""Reference elements: nodality, partition of unity, polynomial completeness, FD gradients,
and node order identical to gmsh's.

References: the Lagrange property N_a(x_b) = delta_ab and completeness of degree p are the
defining properties of Lagrange elements (Zienkiewicz, Taylor & Zhu 2013, *The Finite Element
Method: Its Basis and Fundamentals*, ch. 6); gmsh's own node order is the reference for the
ordering (gmsh.model.mesh.getElementProperties, through meshing.session).
"""

import numpy as np
import pytest

from femcore.elements import LINE2, LINE3, LINE5, T3, T6, T15
from meshing.session import element_properties

ALL = [T3, T6, T15, LINE2, LINE3, LINE5]
RNG = np.random.default_rng(7)


def _random_points(elem, n=20):
    if elem.dim == 2:
        p = RNG.random((n, 2))
        flip = p.sum(axis=1) > 1
        p[flip] = 1 - p[flip]
        return p
    return RNG.uniform(-1, 1, (n, 1))


@pytest.mark.parametrize("elem", ALL, ids=lambda e: e.name)
def test_nodality(elem):
    # exact: N_a(x_b) = delta_ab (Lagrange property); tolerance 1e-12 (round-off)
    assert np.allclose(elem.shape(elem.nodes), np.eye(elem.n_nodes), atol=1e-12)


@pytest.mark.parametrize("elem", ALL, ids=lambda e: e.name)
def test_partition_of_unity_and_completeness(elem):
    # exact: sum_a N_a = 1 and sum_a N_a x_a^k = x^k for every monomial of degree <= p
    x = _random_points(elem)
    N = elem.shape(x)
    assert np.allclose(N.sum(axis=1), 1.0, atol=1e-12)
    for k in range(elem.order + 1):
        for j in range(k + 1):
            if elem.dim == 1 and j > 0:
                continue
            xn = elem.nodes
            f_nodes = xn[:, 0] ** (k - j) * (xn[:, 1] ** j if elem.dim == 2 else 1.0)
            f_exact = x[:, 0] ** (k - j) * (x[:, 1] ** j if elem.dim == 2 else 1.0)
            assert np.allclose(N @ f_nodes, f_exact, atol=1e-11)


@pytest.mark.parametrize("elem", ALL, ids=lambda e: e.name)
def test_gradients_match_finite_differences(elem):
    # central differences, step 1e-6: truncation O(h^2) ~ 1e-12, round-off ~ 1e-10
    x = _random_points(elem, 8) * 0.9 + 0.03
    dN = elem.shape_gradients(x)
    h = 1e-6
    for d in range(elem.dim):
        e = np.zeros(elem.dim)
        e[d] = h
        fd = (elem.shape(x + e) - elem.shape(x - e)) / (2 * h)
        assert np.allclose(dN[..., d], fd, atol=1e-7)
    assert np.allclose(dN.sum(axis=1), 0.0, atol=1e-11)


@pytest.mark.parametrize("elem", ALL, ids=lambda e: e.name)
def test_node_order_is_gmsh(elem):
    n_nodes, local = element_properties(elem.gmsh_type)
    assert n_nodes == elem.n_nodes
    assert np.allclose(local, elem.nodes, atol=1e-14)


@pytest.mark.parametrize("elem", [T3, T6, T15], ids=lambda e: e.name)
def test_edges_subtriangles_and_mirror(elem):
    # edge k runs vertex k -> vertex k+1 with interior nodes in order (gmsh line order)
    for k, edge in enumerate(elem.edges):
        a, b = elem.nodes[k], elem.nodes[(k + 1) % 3]
        s = np.linspace(0, 1, elem.order + 1)
        expected = np.concatenate([[0, 1], s[1:-1]])
        pts = elem.nodes[edge]
        assert np.allclose(pts, a + expected[:, None] * (b - a), atol=1e-14)
    # sub-triangles tile the reference cell: areas sum to 1/2, all positive
    p = elem.nodes[elem.sub_triangles]
    area = 0.5 * ((p[:, 1, 0] - p[:, 0, 0]) * (p[:, 2, 1] - p[:, 0, 1])
                  - (p[:, 1, 1] - p[:, 0, 1]) * (p[:, 2, 0] - p[:, 0, 0]))
    assert np.all(area > 0) and np.isclose(area.sum(), 0.5, rtol=1e-14)
    # mirror permutation maps node (xi, eta) -> (eta, xi)
    perm = elem.mirror_permutation
    assert np.allclose(elem.nodes[perm], elem.nodes[:, ::-1], atol=1e-14)
