"""Classical pile resistances and spring stiffnesses from soil parameters (per pile).

Resistances (kN/m of shaft, kN at the tip):

* shaft, clay (undrained): alpha s_u * perimeter with alpha = 0.5 psi^-0.5 (psi <= 1) or
  0.5 psi^-0.25 (psi > 1), psi = s_u / sigma'_v, alpha <= 1 (API RP 2GEO; Tomlinson 1957;
  from memory);
* shaft, sand (drained): beta sigma'_v * perimeter, beta = K tan(delta), K = 1.0 for displacement
  piles and delta = phi' - 5 deg (common practice);
* lateral, clay: N_p s_u D with N_p = 9 below 1.5 D and 0 above (Broms 1964, JSMFD 90(SM2));
* lateral, sand: 3 K_p sigma'_v D, K_p = (1 + sin phi)/(1 - sin phi) (Broms 1964, SM3);
* tip, clay: 9 s_u A_b; sand: N_q sigma'_v A_b with N_q = e^(pi tan phi) tan^2(45 + phi/2)
  (Prandtl-Reissner), q_b capped at 12 MPa (API-style limit, from memory).

Stiffnesses (per pile; G the soil shear modulus at the spring's depth):

* shaft (t-z): k_t = 2 pi G / zeta per metre, zeta = ln(r_m / r_0), r_m = 2.5 L (1 - nu)
  (Randolph & Wroth 1978, rho = 1);
* lateral (p-y): k_p = 4 G per metre (about 1.5 E at nu = 0.3; subgrade moduli of 1-2 E are
  common practice for piles, e.g. Vesic 1961);
* tip (q-z): k_b = 4 G r_0 / (1 - nu), the rigid circular punch (Boussinesq; Sneddon 1946).

r_0 is the radius of the circle of equal area for square piles.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["alpha_api", "shaft_limit", "lateral_limit", "tip_limit", "shaft_stiffness",
           "lateral_stiffness", "tip_stiffness", "QB_MAX"]

QB_MAX = 12_000.0  # kPa


def alpha_api(su: NDArray[np.float64], sigma_v_eff: NDArray[np.float64]):
    psi = np.maximum(su / np.maximum(sigma_v_eff, 1e-9), 1e-12)
    a = np.where(psi <= 1.0, 0.5 * psi**-0.5, 0.5 * psi**-0.25)
    return np.minimum(a, 1.0)


def shaft_limit(undrained, su, phi_deg, sigma_v_eff, perimeter, alpha=None, beta=None):
    """Ultimate shaft friction per metre (kN/m) of one pile."""
    a = alpha_api(su, sigma_v_eff) if alpha is None else alpha
    b = np.tan(np.radians(np.maximum(phi_deg - 5.0, 0.0))) if beta is None else beta
    return np.where(undrained, a * su, b * sigma_v_eff) * perimeter


def lateral_limit(undrained, su, phi_deg, sigma_v_eff, depth_below_head, width, n_p=9.0):
    """Ultimate lateral resistance per metre (kN/m) of one pile (Broms)."""
    s = np.sin(np.radians(phi_deg))
    kp = (1 + s) / (1 - s)
    clay = np.where(depth_below_head >= 1.5 * width, n_p * su * width, 0.0)
    return np.where(undrained, clay, 3.0 * kp * sigma_v_eff * width)


def tip_limit(undrained, su, phi_deg, sigma_v_eff, area):
    """Ultimate end bearing (kN) of one pile."""
    t = np.tan(np.radians(phi_deg))
    nq = np.exp(np.pi * t) * np.tan(np.radians(45 + phi_deg / 2)) ** 2
    qb = np.where(undrained, 9.0 * su, np.minimum(nq * sigma_v_eff, QB_MAX))
    return qb * area


def shaft_stiffness(G, nu, r0, pile_length):
    zeta = np.log(2.5 * pile_length * (1 - nu) / r0)
    return 2 * np.pi * G / zeta


def lateral_stiffness(G):
    return 4.0 * G


def tip_stiffness(G, nu, r0):
    return 4.0 * G * r0 / (1 - nu)
