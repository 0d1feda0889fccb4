"""Circumferential sampling planes of the harmonic model: where plasticity is evaluated.

Under a moment the yielded zones are local in theta, so the stress of a nonlinear material is
not a sum of a few harmonics. It is evaluated on ``m`` planes ``theta_k = k pi / (m - 1)``,
k = 0 .. m - 1 (theta = 0 and pi included: the heel and the toe, where yield starts), and
integrated back per harmonic with the trapezoid rule. The symmetric family of
:mod:`femcore.harmonic` (``T_n = diag(c, c, c, c, s, s)``) makes every integrand of the
full circle even in theta, so ``int_0^2pi = 2 int_0^pi``.

From amplitudes to planes and back (``c`` cells, ``q`` quadrature points)::

    eps_k   = sum_n T_n(theta_k) eps_n                         (m, c, q, 6)
    s_n     = sum_k w_k T_n(theta_k) sigma_k                    (harmonics, c, q, 6)
    D_nm    = sum_k w_k T_n(theta_k) C_k T_m(theta_k)           (harmonics, harmonics, ...)

with ``w_k`` twice the trapezoid weights on [0, pi]. The internal force of harmonic n is then
``B_n^T s_n dV`` and the tangent block between harmonics n and m is ``B_n^T D_nm B_m dV``
(the harmonic factor c_n is inside ``w``: for an elastic, theta-independent ``C = D`` the
projection gives ``s_n = c_n D eps_n`` and ``D_nm = delta_nm c_n D``, the block-diagonal
harmonic stiffness).

Exactness: the trapezoid rule on m planes over [0, pi] integrates cos(j theta) exactly for
j < 2 (m - 1) (the periodic trapezoid rule, e.g. Davis & Rabinowitz 1984, *Methods of
Numerical Integration*, from memory). The products T_n T_m of harmonics up to N have
frequencies up to 2N, so m >= N + 2 planes reproduce the elastic model exactly
(:func:`min_planes`); a plastic stress, not band-limited, needs more (measured in the tests).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

from .harmonic import HarmonicError, check_harmonic, trig_factors

__all__ = ["CircumferentialPlanes", "plane_angles", "plane_weights", "min_planes"]


def min_planes(n_max: int) -> int:
    """The fewest planes that integrate the elastic products of harmonics 0 .. n_max exactly."""
    return int(n_max) + 2


def plane_angles(m: int) -> NDArray[np.float64]:
    """``theta_k = k pi / (m - 1)``, k = 0 .. m - 1 (radians, both ends included)."""
    if int(m) != m or m < 2:
        raise HarmonicError(f"planes = {m!r}: must be an integer >= 2 (theta = 0 and pi)")
    return np.linspace(0.0, np.pi, int(m))


def plane_weights(m: int) -> NDArray[np.float64]:
    """Weights of the full circle: twice the trapezoid weights on [0, pi]; they sum to 2 pi."""
    h = np.pi / (int(m) - 1)
    w = np.full(int(m), 2.0 * h)
    w[[0, -1]] = h
    return w


class CircumferentialPlanes:
    """Planes for the harmonics ``harmonics`` (e.g. ``[0, 1, 2, 3]``).

    Attributes: ``theta (m,)``, ``w (m,)``, ``T (m, h, 6)`` the diagonals of T_n(theta_k)
    and ``wT (m, h, 6)`` = ``w_k T_n(theta_k)``.
    """

    def __init__(self, harmonics: Sequence[int], planes: int) -> None:
        self.harmonics = [check_harmonic(n) for n in harmonics]
        if not self.harmonics:
            raise HarmonicError("harmonics: at least one harmonic is needed")
        need = min_planes(max(self.harmonics))
        if int(planes) != planes or planes < need:
            raise HarmonicError(f"planes = {planes!r}: must be an integer >= {need} for "
                                f"harmonics up to {max(self.harmonics)} (N + 2, exact for "
                                "elastic states)")
        self.theta = plane_angles(int(planes))
        self.w = plane_weights(int(planes))
        self.T = np.stack([trig_factors(n, self.theta) for n in self.harmonics],
                          axis=1)  # (m, h, 6)
        self.wT = self.w[:, None, None] * self.T  # (m, h, 6)

    @property
    def n_planes(self) -> int:
        return self.theta.size

    def to_planes(self, amplitudes: NDArray[np.float64]) -> NDArray[np.float64]:
        """Values on the planes ``(m, ..., 6)`` from amplitudes ``(h, ..., 6)``."""
        a = np.asarray(amplitudes, dtype=np.float64)
        h = a.shape[0]
        flat = a.reshape(h, -1, 6)  # (h, p, 6)
        out = np.einsum("khj,hpj->kpj", self.T, flat)  # (m, p, 6)
        return out.reshape(self.n_planes, *a.shape[1:])

    def to_harmonics(self, planes: NDArray[np.float64]) -> NDArray[np.float64]:
        """Amplitudes ``s_n = sum_k w_k T_n(theta_k) sigma_k``, ``(h, ..., 6)``, from plane
        values ``(m, ..., 6)`` (the harmonic factor included)."""
        s = np.asarray(planes, dtype=np.float64)
        flat = s.reshape(self.n_planes, -1, 6)  # (m, p, 6)
        out = np.einsum("khj,kpj->hpj", self.wT, flat)  # (h, p, 6)
        return out.reshape(len(self.harmonics), *s.shape[1:])

    def coupled_tangent(self, C: NDArray[np.float64]) -> NDArray[np.float64]:
        """Blocks ``D_nm = sum_k w_k T_n C_k T_m``, ``(h, h, ..., 6, 6)``, from plane tangents
        ``C (m, ..., 6, 6)``."""
        C = np.asarray(C, dtype=np.float64)
        flat = C.reshape(self.n_planes, -1, 6, 6)  # (m, p, 6, 6)
        out = np.einsum("kni,kpij,kmj->nmpij", self.wT, flat, self.T)  # (h, h, p, 6, 6)
        h = len(self.harmonics)
        return out.reshape(h, h, *C.shape[1:])
