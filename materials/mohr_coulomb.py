"""Perfectly plastic Mohr-Coulomb with a tension cut-off (Tresca is its phi = psi = 0 case).

Implicit return mapping in principal stress space, vectorized over all points, with the
consistent (algorithmic) tangent. Tension positive; principal stresses sorted
sigma_1 >= sigma_2 >= sigma_3.

Yield and potential planes in sorted principal space (all linear, constant gradients)::

    MC13: f = (s1 - s3) + (s1 + s3) sin(phi) - 2 c cos(phi)   main plane
    MC23: f = (s2 - s3) + (s2 + s3) sin(phi) - 2 c cos(phi)   active on the edge s1 = s2
    MC12: f = (s1 - s2) + (s1 + s2) sin(phi) - 2 c cos(phi)   active on the edge s2 = s3
    T1, T2, T3: f = s_i - t                                   tension cut-off (t <= c cot phi)

The plastic potentials of the MC planes are the same expressions with psi; the cut-off is
associated.

Algorithm (per point; steps 3-5 only for points outside the elastic domain):

1. Elastic trial stress ``s* = s_n + D (eps - eps_n)``.
2. In-plane principal stresses and angle: ``s_a,b = (xx + yy)/2 +- R``,
   ``alpha = atan2(2 xy, xx - yy) / 2``; with ``s_zz`` they form the principal triple.
3. Sort the triple; evaluate every plane ``f_k(s*)``. Elastic if all ``f_k <= tol``.
4. Active-set search: for candidate sets ``A`` (main plane, edges, cut-off, corners, apex),
   solve ``(N_f^T D_p N_g) dgamma = f_A(s*)``, ``s = s* - D_p N_g dgamma``. Accept the first
   candidate with ``dgamma >= 0`` and every ``f_k(s) <= tol`` (the Kuhn-Tucker conditions;
   for linear planes the return is exact in one step, and a result that breaks the ordering
   s1 >= s2 >= s3 violates an edge plane, so region boundaries follow the potential directions
   as in Clausen, Damkilde & Andersen 2007, "An efficient return algorithm for non-associated
   plasticity with linear yield criteria in principal stress space", Comput. Struct. 85).
   If no plane set qualifies, the point lies beyond the apex: ``s1 = s2 = s3 = c cot(phi)``,
   tangent zero (de Souza Neto et al. 2008, box 8.5, perfect plasticity).
5. Principal tangent ``H = I - D_p N_g (N_f^T D_p N_g)^-1 N_f^T`` (exact derivative of the
   return for the active set, de Souza Neto, Peric & Owen 2008, *Computational Methods for
   Plasticity*, ch. 8); in-plane spin term ``(s_a - s_b)/(s*_a - s*_b)``.
6. Rotate back: ``s = R(alpha)^-1 s_principal``; tangent ``C = R^-1 H R D``.

Apex with psi = 0 and no cut-off: the non-dilatant flow rule cannot produce the volumetric
plastic strain that the apex return needs, so no consistent return exists. Such points are
still returned to the apex (with the volume change the return implies: "apex dilation") and
flagged per point in ``State.params['apex_nondilatant']``, so a caller can report them; the
tension cut-off (default t = 0 <= c cot(phi)) removes the case altogether.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from itertools import combinations

import numpy as np
from numpy.typing import NDArray

from .base import MaterialParameterError, State
from .elastic import elastic_matrix

__all__ = ["MohrCoulomb", "principal_return", "mohr_coulomb_update", "region_name"]

_MC13, _MC23, _MC12, _T1, _T2, _T3 = range(6)
_PLANE_NAMES = ("MC13", "MC23", "MC12", "T1", "T2", "T3")
# plane sets tried in this order: the common ones first, then every other corner of the cut-off
_ORDERED = [(_MC13,), (_MC13, _MC23), (_MC13, _MC12), (_T1,), (_MC13, _T1), (_T1, _T2),
            (_T1, _T2, _T3), (_MC13, _MC23, _T1), (_MC13, _MC12, _T1), (_MC13, _T1, _T2)]
_CANDIDATES = _ORDERED + [
    s for m in (1, 2, 3) for s in combinations(range(6), m)
    if s not in _ORDERED and s != (_MC13, _MC23, _MC12)  # the MC apex is the fallback
]
_N_WITHOUT_CUTOFF = 3  # the first three sets use no cut-off plane


def region_name(code: int) -> str:
    """Readable name of a region code returned by the return map."""
    if code == -3:
        return "elastic"
    if code == -1:
        return "apex"
    return "+".join(_PLANE_NAMES[k] for k in _CANDIDATES[code])


def _planes(sin_phi, sin_psi, cos_phi, c, t):
    """Gradients ``n_f``, ``n_g`` (n, 6, 3) and offsets ``r`` (n, 6): ``f = n_f . s - r``."""
    n = c.shape[0]
    a, b = 1.0 + sin_phi, -(1.0 - sin_phi)
    ag, bg = 1.0 + sin_psi, -(1.0 - sin_psi)
    nf = np.zeros((n, 6, 3))
    ng = np.zeros((n, 6, 3))
    for k, (i, j) in enumerate(((0, 2), (1, 2), (0, 1))):  # MC13, MC23, MC12
        nf[:, k, i], nf[:, k, j] = a, b
        ng[:, k, i], ng[:, k, j] = ag, bg
    for k in range(3):
        nf[:, 3 + k, k] = 1.0
        ng[:, 3 + k, k] = 1.0
    r = np.empty((n, 6))  # (n, 6)
    r[:, :3] = (2.0 * c * cos_phi)[:, None]
    r[:, 3:] = np.inf if t is None else t[:, None]
    return nf, ng, r


def principal_return(
    s_trial: NDArray[np.float64], G, K, c, sin_phi, sin_psi, cos_phi, t=None
):
    """Return map of sorted principal trial stresses ``s_trial (n, 3)``.

    Parameters are arrays ``(n,)`` (``t`` None disables the cut-off). Returns the returned
    sorted stresses ``(n, 3)``, the principal tangent ``H = ds/ds* (n, 3, 3)`` and a region
    code ``(n,)``: index into the candidate list, -1 for a forced apex return.
    """
    n = s_trial.shape[0]
    nf, ng, r = _planes(sin_phi, sin_psi, cos_phi, c, t)
    lam = K - 2.0 * G / 3.0
    Dp = np.zeros((n, 3, 3)) + lam[:, None, None]  # (n, 3, 3) principal elasticity
    Dp[:, [0, 1, 2], [0, 1, 2]] += 2.0 * G[:, None]
    scale = np.maximum(np.abs(s_trial).max(axis=1), np.maximum(np.abs(c), 1.0))  # (n,)
    tol = 1e-10 * scale

    s_out = s_trial.copy()
    H = np.broadcast_to(np.eye(3), (n, 3, 3)).copy()  # (n, 3, 3)
    region = np.full(n, -2, dtype=np.int64)  # -2 unresolved
    cands = _CANDIDATES if t is not None else _CANDIDATES[:_N_WITHOUT_CUTOFF]
    Dng = np.einsum("nij,nkj->nki", Dp, ng)  # (n, 6, 3) D_p n_g for every plane
    for ci, active in enumerate(cands):
        todo = np.flatnonzero(region == -2)
        if todo.size == 0:
            break
        act = list(active)
        Nf = nf[todo][:, act]  # (m, p, 3)
        DNg = Dng[todo][:, act]  # (m, p, 3)
        A = np.einsum("mpi,mqi->mpq", Nf, DNg)  # (m, p, p)
        det = np.linalg.det(A)
        ok = np.abs(det) > 1e-12 * np.abs(A).max(axis=(1, 2)) ** len(act)
        if not np.any(ok):
            continue
        todo, Nf, DNg, A = todo[ok], Nf[ok], DNg[ok], A[ok]
        st = s_trial[todo]
        f_act = np.einsum("mpi,mi->mp", Nf, st) - r[todo][:, act]  # (m, p)
        dgam = np.linalg.solve(A, f_act[..., None])[..., 0]  # (m, p)
        s_new = st - np.einsum("mpi,mp->mi", DNg, dgam)  # (m, 3)
        f_all = np.einsum("mki,mi->mk", nf[todo], s_new) - r[todo]  # (m, 6)
        good = np.all(dgam >= -tol[todo, None] / np.maximum(G[todo, None], 1e-300), axis=1)
        good &= np.all(f_all <= tol[todo, None], axis=1)
        if not np.any(good):
            continue
        idx = todo[good]
        s_out[idx] = s_new[good]
        Ainv_Nf = np.linalg.solve(A[good], Nf[good])  # (g, p, 3)
        H[idx] = np.eye(3) - np.einsum("gpi,gpj->gij", DNg[good], Ainv_Nf)
        region[idx] = ci
    left = np.flatnonzero(region == -2)
    if left.size:  # beyond the apex with non-dilatant flow and no cut-off
        apex = c[left] * cos_phi[left] / np.maximum(sin_phi[left], 1e-300)
        s_out[left] = apex[:, None]
        H[left] = 0.0
        region[left] = -1
    return s_out, H, region


def _rotation(alpha: NDArray[np.float64]) -> NDArray[np.float64]:
    """Stress rotation ``(n, 4, 4)`` for [xx, yy, zz, xy] (tensor shear) into axes at alpha."""
    c, s = np.cos(alpha), np.sin(alpha)
    R = np.zeros((alpha.size, 4, 4))
    R[:, 0, 0], R[:, 0, 1], R[:, 0, 3] = c * c, s * s, 2 * c * s
    R[:, 1, 0], R[:, 1, 1], R[:, 1, 3] = s * s, c * c, -2 * c * s
    R[:, 2, 2] = 1.0
    R[:, 3, 0], R[:, 3, 1], R[:, 3, 3] = -c * s, c * s, c * c - s * s
    return R


def mohr_coulomb_update(trial, D, G, K, c, sin_phi, sin_psi, cos_phi, t):
    """Return map of trial stresses ``(n, 4)``: stress ``(n, 4)``, tangent ``(n, 4, 4)``,
    yielded ``(n,)`` and region ``(n,)`` (-3 for elastic points)."""
    n = trial.shape[0]
    xx, yy, zz, xy = trial.T
    mean, diff = 0.5 * (xx + yy), 0.5 * (xx - yy)
    rad = np.hypot(diff, xy)
    s_a, s_b = mean + rad, mean - rad
    p3 = np.stack([s_a, s_b, zz], axis=1)  # (n, 3) principal triple (a, b, z)
    order = np.argsort(-p3, axis=1, kind="stable")  # (n, 3) sorted position -> abz index
    s_sorted = np.take_along_axis(p3, order, axis=1)
    nf, _ng, r = _planes(sin_phi, sin_psi, cos_phi, c, t)
    f = np.einsum("nki,ni->nk", nf, s_sorted) - r  # (n, 6)
    scale = np.maximum(np.abs(s_sorted).max(axis=1), np.maximum(np.abs(c), 1.0))
    plastic = np.flatnonzero(f.max(axis=1) > 1e-10 * scale)

    stress = trial.copy()
    tangent = np.array(np.broadcast_to(D, (n, 4, 4)))  # (n, 4, 4)
    region = np.full(n, -3, dtype=np.int64)
    if plastic.size == 0:
        return stress, tangent, np.zeros(n, dtype=bool), region
    P = plastic
    s_ret, H_sorted, reg = principal_return(
        s_sorted[P], G[P], K[P], c[P], sin_phi[P], sin_psi[P], cos_phi[P],
        None if t is None else t[P])
    region[P] = reg
    # unsort: back to the (a, b, z) order
    o = order[P]
    s_abz = np.empty_like(s_ret)
    np.put_along_axis(s_abz, o, s_ret, axis=1)
    inv = np.argsort(o, axis=1)  # abz index -> sorted position
    H_abz = np.take_along_axis(np.take_along_axis(H_sorted, inv[:, :, None], axis=1),
                               inv[:, None, :], axis=2)  # (m, 3, 3)
    # in-plane spin term; limit for equal in-plane trial stresses
    gap = s_a[P] - s_b[P]
    spin_lim = 0.5 * (H_abz[:, 0, 0] - H_abz[:, 0, 1] - H_abz[:, 1, 0] + H_abz[:, 1, 1])
    small = np.abs(gap) <= 1e-12 * scale[P]
    spin = np.where(small, spin_lim,
                    (s_abz[:, 0] - s_abz[:, 1]) / np.where(small, 1.0, gap))
    Hfull = np.zeros((P.size, 4, 4))  # (m, 4, 4) in principal axes
    Hfull[:, :3, :3] = H_abz
    Hfull[:, 3, 3] = spin
    alpha = 0.5 * np.arctan2(2.0 * xy[P], xx[P] - yy[P])
    R = _rotation(alpha)
    Rinv = _rotation(-alpha)
    s_princ = np.zeros((P.size, 4))
    s_princ[:, :3] = s_abz
    stress[P] = np.einsum("mkl,ml->mk", Rinv, s_princ)
    tangent[P] = Rinv @ Hfull @ R @ tangent[P]
    yielded = np.zeros(n, dtype=bool)
    yielded[P] = True
    return stress, tangent, yielded, region


def _check_angle(name: str, value: float, hi: float) -> None:
    if not (np.isfinite(value) and 0.0 <= value <= hi):
        raise MaterialParameterError(f"{name} = {value!r} degrees: must lie in [0, {hi}]")


@dataclass(frozen=True)
class MohrCoulomb:
    """Linear elastic - perfectly plastic Mohr-Coulomb.

    Parameters
    ----------
    E : float
        Young's modulus, kPa (> 0); ``E_gradient`` kPa/m below ``depth_ref``.
    nu : float
        Poisson's ratio, 0 <= nu < 0.5.
    c : float
        Cohesion (effective, drained) or undrained strength s_u for phi = 0, kPa (>= 0);
        ``c_gradient`` kPa/m below ``depth_ref``.
    phi, psi : float
        Friction and dilation angles, degrees; 0 <= psi <= phi < 90.
    tension_cutoff : float or None
        Tensile strength, kPa (>= 0); capped at the apex c cot(phi). None disables the
        cut-off (then the apex is treated as described in the module docstring).
    """

    E: float
    nu: float
    c: float
    phi: float
    psi: float = 0.0
    tension_cutoff: float | None = 0.0
    E_gradient: float = 0.0
    c_gradient: float = 0.0
    depth_ref: float = 0.0

    def __post_init__(self) -> None:
        if not (np.isfinite(self.E) and self.E > 0.0):
            raise MaterialParameterError(f"E = {self.E!r} kPa: must be > 0")
        if not (0.0 <= self.nu < 0.5):
            raise MaterialParameterError(f"nu = {self.nu!r}: must satisfy 0 <= nu < 0.5")
        if not (np.isfinite(self.c) and self.c >= 0.0):
            raise MaterialParameterError(f"c = {self.c!r} kPa: must be >= 0")
        _check_angle("phi", self.phi, 89.0)
        _check_angle("psi", self.psi, 89.0)
        if self.psi > self.phi:
            raise MaterialParameterError(
                f"psi = {self.psi!r} degrees exceeds phi = {self.phi!r}: need psi <= phi")
        if self.phi == 0.0 and self.c <= 0.0 and self.c_gradient <= 0.0:
            raise MaterialParameterError("c = 0 with phi = 0 gives a material with no strength")
        if self.tension_cutoff is not None and not self.tension_cutoff >= 0.0:
            raise MaterialParameterError(
                f"tension_cutoff = {self.tension_cutoff!r} kPa: must be >= 0 or None")
        for name in ("E_gradient", "c_gradient"):
            v = getattr(self, name)
            if not (np.isfinite(v) and v >= 0.0):
                raise MaterialParameterError(f"{name} = {v!r} kPa/m: must be >= 0")

    def _depth_below_ref(self, x):
        return np.maximum(-np.asarray(x)[..., 1] - self.depth_ref, 0.0)

    def initial_state(self, x: NDArray[np.float64]) -> State:
        dz = self._depth_below_ref(x)  # (c, q)
        E = self.E + self.E_gradient * dz
        c = self.c + self.c_gradient * dz
        params = {"E": E, "c": c, "apex_nondilatant": np.zeros(x.shape[:2])}
        return State.zeros(x.shape[:2], params)

    def elastic_tangent(self, state: State) -> NDArray[np.float64]:
        E = state.params["E"]
        return elastic_matrix(E, np.full_like(E, self.nu))  # (c, q, 4, 4)

    def update(self, strain: NDArray[np.float64], state_n: State):
        shape = strain.shape[:2]
        n = int(np.prod(shape))
        E = state_n.params["E"].reshape(n)
        c = state_n.params["c"].reshape(n)
        D = self.elastic_tangent(state_n).reshape(n, 4, 4)
        deps = (strain - state_n.strain).reshape(n, 4)
        trial = state_n.stress.reshape(n, 4) + np.einsum("nkl,nl->nk", D, deps)
        G = E / (2.0 * (1.0 + self.nu))
        K = E / (3.0 * (1.0 - 2.0 * self.nu))
        sphi, spsi = np.sin(np.radians(self.phi)), np.sin(np.radians(self.psi))
        cphi = np.cos(np.radians(self.phi))
        ones = np.ones(n)
        t = None
        if self.tension_cutoff is not None and self.phi > 0.0:
            t = np.minimum(self.tension_cutoff * ones, c * cphi / sphi)
        elif self.tension_cutoff is not None:
            t = self.tension_cutoff * ones if np.isfinite(self.tension_cutoff) else None
        stress, tangent, yielded, region = mohr_coulomb_update(
            trial, D, G, K, c, sphi * ones, spsi * ones, cphi * ones, t)
        # plastic strain increment = D^-1 (trial - stress), isotropic compliance in closed form
        dsig = trial - stress  # (n, 4)
        dep = np.empty_like(dsig)
        dep[:, :3] = ((1.0 + self.nu) * dsig[:, :3]
                      - self.nu * dsig[:, :3].sum(axis=1, keepdims=True)) / E[:, None]
        dep[:, 3] = dsig[:, 3] / G
        params = dict(state_n.params)
        params["apex_nondilatant"] = ((region == -1) & (spsi == 0.0)).reshape(shape).astype(
            np.float64)
        new = replace(
            state_n,
            stress=stress.reshape(*shape, 4),
            strain=strain,
            plastic_strain=state_n.plastic_strain + dep.reshape(*shape, 4),
            yielded=yielded.reshape(shape),
            params=params,
        )
        return stress.reshape(*shape, 4), tangent.reshape(*shape, 4, 4), new
