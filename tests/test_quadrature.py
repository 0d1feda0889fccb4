"""Quadrature exactness.

Reference: integral of x^i y^j over the unit right triangle = i! j! / (i + j + 2)! (standard
result, e.g. Zienkiewicz, Taylor & Zhu 2013, ch. 6); rule tables from Dunavant (1985), "High
degree efficient symmetrical Gaussian quadrature rules for the triangle", IJNME 21 (values from
memory, polished to machine precision; this test is what makes them trustworthy).
"""

from math import factorial

import numpy as np
import pytest

from femcore.quadrature import TRIANGLE_DEGREES, line_rule, triangle_rule


@pytest.mark.parametrize("degree", TRIANGLE_DEGREES)
def test_triangle_rule_exact_to_degree(degree):
    rule = triangle_rule(degree)
    x, y = rule.points.T
    assert np.all(rule.weights > 0), "all Dunavant rules used here have positive weights"
    assert np.all(x >= 0) and np.all(y >= 0) and np.all(x + y <= 1)
    for i in range(degree + 1):
        for j in range(degree + 1 - i):
            exact = factorial(i) * factorial(j) / factorial(i + j + 2)
            assert np.isclose(rule.weights @ (x**i * y**j), exact, rtol=1e-13, atol=1e-16)


def test_triangle_rule_point_counts():
    # Dunavant (1985) table: degree 4 -> 6 points, 6 -> 12, 8 -> 16
    assert [triangle_rule(d).n_points for d in (4, 6, 8)] == [6, 12, 16]


@pytest.mark.parametrize("degree", [1, 3, 5, 9])
def test_line_rule_exact(degree):
    rule = line_rule(degree)
    for k in range(degree + 1):
        exact = (1 - (-1) ** (k + 1)) / (k + 1)
        assert np.isclose(rule.weights @ rule.points[:, 0] ** k, exact, atol=1e-14)
