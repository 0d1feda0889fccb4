"""Elastic - perfectly plastic interface laws for pile springs (t-z, p-y, q-z, contact).

One vectorized law covers them all: force per unit length (or force, for a tip spring)
``f = k (d - d_p)`` bounded to ``[f_min, f_max]``; beyond a bound the spring slips and the
slip ``d_p`` is kept (path dependence on unloading). A compression-only tip with end-bearing
limit Q_b is ``f_min = 0, f_max = Q_b`` in the compression direction: a pile pulled out of
its tip opens a gap (slip) instead of carrying tension.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

__all__ = ["SpringState", "epp_update"]


@dataclass(frozen=True, eq=False)
class SpringState:
    """Relative displacement ``d``, slip ``d_p`` and force ``f`` per spring, and whether it
    was at a bound in its last update (all ``(n, k)`` for k directions)."""

    d: NDArray[np.float64]
    d_p: NDArray[np.float64]
    f: NDArray[np.float64]
    at_limit: NDArray[np.bool_]

    @classmethod
    def zeros(cls, shape: tuple[int, ...]) -> SpringState:
        z = np.zeros(shape)
        return cls(z, z.copy(), z.copy(), np.zeros(shape, dtype=bool))


def epp_update(d: NDArray[np.float64], state_n: SpringState, k: NDArray[np.float64],
               f_min: NDArray[np.float64], f_max: NDArray[np.float64]):
    """Return ``(f, k_tangent, trial_state)`` for relative displacements ``d``.

    All arrays broadcast to the shape of ``d``; ``f_min <= 0 <= f_max``. Exact return for a
    1D elastic-perfectly plastic law (one step, no iteration).
    """
    f_trial = k * (d - state_n.d_p)
    f = np.clip(f_trial, f_min, f_max)
    at_limit = f != f_trial
    k_safe = np.where(k > 0, k, 1.0)
    d_p = np.where(at_limit, d - f / k_safe, state_n.d_p)
    k_tan = np.where(at_limit, 0.0, k)
    return f, k_tan, SpringState(d, d_p, f, at_limit)
