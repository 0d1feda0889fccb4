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

__all__ = ["SpringState", "epp_update", "ContactState", "coulomb_update"]


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


@dataclass(frozen=True, eq=False)
class ContactState:
    """Zero-thickness contact: relative displacement (s, n), plastic part and tractions
    ``(m, 2)``; ``open`` where the tension cut-off is active, ``slip`` where shear is at its
    limit."""

    d: NDArray[np.float64]
    d_p: NDArray[np.float64]
    traction: NDArray[np.float64]
    open: NDArray[np.bool_]
    slip: NDArray[np.bool_]

    @classmethod
    def zeros(cls, m: int) -> ContactState:
        z = np.zeros((m, 2))
        b = np.zeros(m, dtype=bool)
        return cls(z, z.copy(), z.copy(), b, b.copy())


def coulomb_update(d: NDArray[np.float64], state_n: ContactState, k_s, k_n, cohesion,
                   tan_delta, tension_cutoff):
    """Coulomb friction with a tension cut-off and zero dilation, exact one-step return.

    ``d (m, 2)`` = (slip s, opening n) relative displacements; tractions (tau, sigma_n) with
    sigma_n tension positive. Steps:

    1. trial ``tau* = k_s (s - s_p)``, ``sigma* = k_n (n - n_p)``;
    2. ``sigma* > t_c``: the interface opens: ``sigma = t_c``, ``tau = 0`` (an open gap carries
       no shear); tangent zero;
    3. else ``|tau*| > tau_max(sigma*)``: slip: ``tau = sign(tau*) tau_max``, sigma unchanged,
       tangent d tau / d n = -sign(tau*) tan(delta) k_n (unsymmetric); ``tau_max =
       min(c - sigma tan(delta), t_c - sigma)``: a cohesive interface loses its strength along
       a 45 degree line as sigma approaches the cut-off (continuous tractions at opening);
    4. else elastic.

    Returns tractions ``(m, 2)``, tangent ``(m, 2, 2)`` and the trial state.
    """
    s_p, n_p = state_n.d_p[:, 0], state_n.d_p[:, 1]
    tau = k_s * (d[:, 0] - s_p)
    sig = k_n * (d[:, 1] - n_p)
    C = np.zeros((d.shape[0], 2, 2))
    C[:, 0, 0], C[:, 1, 1] = k_s, k_n
    is_open = sig > tension_cutoff
    sig = np.where(is_open, tension_cutoff, sig)
    # near the cut-off the shear strength falls to zero along tau = t_c - sigma (45 deg), so
    # the traction is continuous when the interface opens (a cohesive interface would
    # otherwise drop from c to 0 and Newton iterations cycle between the two states)
    coulomb = cohesion - sig * tan_delta
    ramp = tension_cutoff - sig
    on_ramp = ramp < coulomb
    tau_max = np.where(is_open, 0.0, np.maximum(np.where(on_ramp, ramp, coulomb), 0.0))
    slope = np.where(on_ramp, 1.0, tan_delta)
    slip = np.abs(tau) > tau_max
    sign = np.sign(tau)
    tau = np.where(slip, sign * tau_max, tau)
    C[is_open] = 0.0
    sl = slip & ~is_open
    C[sl, 0, 0] = 0.0
    C[sl, 0, 1] = -(sign * slope * k_n)[sl]
    C[is_open & slip, :, :] = 0.0
    new_p = state_n.d_p.copy()
    safe_ks = np.where(k_s > 0, k_s, 1.0)
    safe_kn = np.where(k_n > 0, k_n, 1.0)
    new_p[:, 0] = np.where(slip, d[:, 0] - tau / safe_ks, s_p)
    new_p[:, 1] = np.where(is_open, d[:, 1] - sig / safe_kn, n_p)
    traction = np.stack([tau, sig], axis=1)
    return traction, C, ContactState(d, new_p, traction, is_open, slip)
