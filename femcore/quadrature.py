"""Quadrature rules on the reference triangle and the reference line [-1, 1].

Triangle rules are the symmetric rules of Dunavant (1985), "High degree efficient symmetrical
Gaussian quadrature rules for the triangle", Int. J. Numer. Meth. Eng. 21, 1129-1148. The
values below were taken from that table (from memory) and polished to machine precision by
solving the moment equations of each orbit structure with scipy.optimize.least_squares; the
tests check exactness for every monomial up to the stated degree. Weights sum to the reference
area 1/2.

Line rules are Gauss-Legendre (numpy.polynomial.legendre.leggauss).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache

import numpy as np
from numpy.typing import NDArray

__all__ = ["QuadratureRule", "triangle_rule", "line_rule", "TRIANGLE_DEGREES"]


@dataclass(frozen=True, eq=False)
class QuadratureRule:
    """Points ``(n_qp, dim)`` and weights ``(n_qp,)`` of an integration rule exact to ``degree``."""

    points: NDArray[np.float64]
    weights: NDArray[np.float64]
    degree: int

    @property
    def n_points(self) -> int:
        return self.weights.shape[0]


def _expand(orbits: list[tuple]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Expand symmetric orbits into points (barycentric -> (xi, eta)) and weights."""
    pts: list[tuple[float, float]] = []
    wts: list[float] = []
    for orbit in orbits:
        kind, *vals = orbit
        if kind == "S3":
            (w,) = vals
            pts.append((1.0 / 3.0, 1.0 / 3.0))
            wts.append(w)
        elif kind == "S21":
            a, w = vals
            pts += [(a, a), (1.0 - 2.0 * a, a), (a, 1.0 - 2.0 * a)]
            wts += [w] * 3
        elif kind == "S111":
            a, b, w = vals
            c = 1.0 - a - b
            pts += [(a, b), (b, a), (a, c), (c, a), (b, c), (c, b)]
            wts += [w] * 6
    return np.array(pts), np.array(wts)


# Orbit tables: ("S21", a, w) is the orbit of barycentric (a, a, 1-2a); weights on area 1/2.
_TRIANGLE_ORBITS: dict[int, list[tuple]] = {
    1: [("S3", 0.5)],
    2: [("S21", 1.0 / 6.0, 1.0 / 6.0)],
    4: [  # 6 points
        ("S21", 0.4459484909159648, 0.11169079483900567),
        ("S21", 0.09157621350977078, 0.054975871827661),
    ],
    6: [  # 12 points
        ("S21", 0.2492867451708719, 0.05839313786322192),
        ("S21", 0.06308901449151003, 0.02542245318510897),
        ("S111", 0.053145049844790106, 0.31035245103381354, 0.041425537809167884),
    ],
    8: [  # 16 points
        ("S3", 0.0721578038388935),
        ("S21", 0.459292588292723, 0.0475458171336425),
        ("S21", 0.17056930775176, 0.051608685267359),
        ("S21", 0.050547228317031, 0.016229248811599),
        ("S111", 0.008394777409958, 0.263112829634638, 0.0136151570872175),
    ],
}

TRIANGLE_DEGREES = tuple(sorted(_TRIANGLE_ORBITS))


@cache
def triangle_rule(degree: int) -> QuadratureRule:
    """The cheapest tabulated triangle rule exact to at least ``degree``."""
    for d in TRIANGLE_DEGREES:
        if d >= degree:
            pts, wts = _expand(_TRIANGLE_ORBITS[d])
            pts.setflags(write=False)
            wts.setflags(write=False)
            return QuadratureRule(pts, wts, d)
    raise ValueError(f"no triangle rule of degree {degree}; highest is {TRIANGLE_DEGREES[-1]}")


@cache
def line_rule(degree: int) -> QuadratureRule:
    """Gauss-Legendre rule on [-1, 1] exact to at least ``degree``."""
    n = max(1, (degree + 2) // 2)
    x, w = np.polynomial.legendre.leggauss(n)
    return QuadratureRule(x[:, None], w, 2 * n - 1)
