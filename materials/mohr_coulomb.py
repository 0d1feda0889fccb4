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

__all__ = ["MohrCoulomb", "principal_return", "mohr_coulomb_update", "mohr_coulomb_update_3d",
           "region_name"]

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


def _plane_gradients(sin_phi: float, sin_psi: float):
    """Yield and potential gradients of the six planes, ``(6, 3)`` each (constant)."""
    nf = np.zeros((6, 3))
    ng = np.zeros((6, 3))
    for k, (i, j) in enumerate(((0, 2), (1, 2), (0, 1))):  # MC13, MC23, MC12
        nf[k, i], nf[k, j] = 1.0 + sin_phi, -(1.0 - sin_phi)
        ng[k, i], ng[k, j] = 1.0 + sin_psi, -(1.0 - sin_psi)
    nf[3:, :] = ng[3:, :] = np.eye(3)
    return nf, ng


def _offsets(c, cos_phi: float, t) -> NDArray[np.float64]:
    """Plane offsets ``r (n, 6)`` with ``f = n_f . s - r``."""
    r = np.empty((c.shape[0], 6))  # (n, 6)
    r[:, :3] = (2.0 * cos_phi * c)[:, None]
    r[:, 3:] = np.inf if t is None else t[:, None]
    return r


def principal_return(s_trial: NDArray[np.float64], G, K, c, sin_phi: float, sin_psi: float,
                     cos_phi: float, t=None):
    """Return map of sorted principal trial stresses ``s_trial (n, 3)``.

    ``G``, ``K``, ``c`` (and ``t``, None to disable the cut-off) are arrays ``(n,)``; the angles
    are scalars. Returns the returned sorted stresses ``(n, 3)``, the principal tangent
    ``H = ds/ds* (n, 3, 3)`` and a region code ``(n,)`` (see :func:`region_name`).
    """
    n = s_trial.shape[0]
    nf, ng = _plane_gradients(sin_phi, sin_psi)
    r = _offsets(c, cos_phi, t)
    lam = K - 2.0 * G / 3.0  # (n,)
    scale = np.maximum(np.abs(s_trial).max(axis=1), np.maximum(np.abs(c), 1.0))  # (n,)
    tol = 1e-10 * scale

    def d_ng(idx, planes):  # D_p n_g for points idx and planes: (m, p, 3)
        g = ng[planes]  # (p, 3)
        return (lam[idx, None, None] * g.sum(axis=1)[None, :, None]
                + 2.0 * G[idx, None, None] * g[None])

    s_out = s_trial.copy()
    H = np.zeros((n, 3, 3))  # (n, 3, 3)
    region = np.full(n, -2, dtype=np.int64)  # -2 unresolved

    # 1. main plane in closed form: most plastic points end here
    everyone = np.arange(n)
    Dn13 = d_ng(everyone, [_MC13])[:, 0]  # (n, 3)
    a13 = Dn13 @ nf[_MC13]  # (n,)
    dg = (s_trial @ nf[_MC13] - r[:, _MC13]) / a13
    s_main = s_trial - dg[:, None] * Dn13  # (n, 3)
    ok = (dg >= 0.0) & np.all(s_main @ nf.T - r <= tol[:, None], axis=1)
    s_out[ok] = s_main[ok]
    H[ok] = np.eye(3) - Dn13[ok, :, None] * (nf[_MC13] / a13[ok, None])[:, None, :]
    region[ok] = 0

    # 2. edges, cut-off and corners: small linear systems on the remaining points
    cands = _CANDIDATES if t is not None else _CANDIDATES[:_N_WITHOUT_CUTOFF]
    for ci, active in enumerate(cands[1:], start=1):
        todo = np.flatnonzero(region == -2)
        if todo.size == 0:
            break
        act = list(active)
        Nf = nf[act]  # (p, 3)
        DNg = d_ng(todo, act)  # (m, p, 3)
        A = np.einsum("pi,mqi->mpq", Nf, DNg)  # (m, p, p)
        det = np.linalg.det(A)
        usable = np.abs(det) > 1e-12 * np.abs(A).max(axis=(1, 2)) ** len(act)
        if not np.any(usable):
            continue
        todo, DNg, A = todo[usable], DNg[usable], A[usable]
        st = s_trial[todo]
        f_act = st @ Nf.T - r[todo][:, act]  # (m, p)
        dgam = np.linalg.solve(A, f_act[..., None])[..., 0]  # (m, p)
        s_new = st - np.einsum("mpi,mp->mi", DNg, dgam)  # (m, 3)
        good = np.all(dgam >= -tol[todo, None] / G[todo, None], axis=1)
        good &= np.all(s_new @ nf.T - r[todo] <= tol[todo, None], axis=1)
        if not np.any(good):
            continue
        idx = todo[good]
        s_out[idx] = s_new[good]
        Ainv_Nf = np.linalg.solve(A[good], np.broadcast_to(Nf, (idx.size, *Nf.shape)))
        H[idx] = np.eye(3) - np.einsum("gpi,gpj->gij", DNg[good], Ainv_Nf)
        region[idx] = ci

    # 3. beyond the apex: s1 = s2 = s3 = c cot(phi), zero tangent
    left = np.flatnonzero(region == -2)
    if left.size:
        s_out[left] = (c[left] * cos_phi / max(sin_phi, 1e-300))[:, None]
        region[left] = -1
    return s_out, H, region


def _plastic_points(s_sorted, c, sin_phi: float, cos_phi: float, t, margin: float = -1e-10):
    """Indices of sorted principal trial stresses ``(n, 3)`` outside the elastic domain, and
    the stress scale ``(n,)`` of the tolerances. With s1 >= s2 >= s3 the largest MC plane is
    MC13 and the largest cut-off plane is T1. ``margin`` > 0 also takes points within
    ``margin`` times the scale inside the surface (candidates)."""
    f_max = ((1.0 + sin_phi) * s_sorted[:, 0] - (1.0 - sin_phi) * s_sorted[:, 2]
             - 2.0 * c * cos_phi)
    if t is not None:
        f_max = np.maximum(f_max, s_sorted[:, 0] - t)
    scale = np.maximum(np.abs(s_sorted).max(axis=1), np.maximum(np.abs(c), 1.0))
    return np.flatnonzero(f_max > -margin * scale), scale


def principal_values(s: NDArray[np.float64]) -> NDArray[np.float64]:
    """Principal values, sorted s1 >= s2 >= s3, of symmetric stresses ``(n, 6)`` (order 11,
    22, 33, 12, 23, 13) in closed form (the trigonometric solution of the characteristic
    cubic; Smith 1961, Eigenvalues of a symmetric 3 x 3 matrix, Commun. ACM 4(4)). Accurate
    to about 1e-8 of the stress scale where two values nearly coincide: for screening."""
    q = (s[:, 0] + s[:, 1] + s[:, 2]) / 3.0
    d0, d1, d2 = s[:, 0] - q, s[:, 1] - q, s[:, 2] - q
    off = s[:, 3] ** 2 + s[:, 4] ** 2 + s[:, 5] ** 2
    p = np.sqrt((d0 * d0 + d1 * d1 + d2 * d2 + 2.0 * off) / 6.0)
    det = (d0 * (d1 * d2 - s[:, 4] ** 2) - s[:, 3] * (s[:, 3] * d2 - s[:, 4] * s[:, 5])
           + s[:, 5] * (s[:, 3] * s[:, 4] - d1 * s[:, 5]))
    safe = np.where(p > 0.0, p, 1.0)
    r = np.clip(0.5 * det / safe**3, -1.0, 1.0)
    a = np.arccos(r) / 3.0
    out = np.empty((s.shape[0], 3))
    out[:, 0] = q + 2.0 * p * np.cos(a)
    out[:, 2] = q + 2.0 * p * np.cos(a + 2.0 * np.pi / 3.0)
    out[:, 1] = 3.0 * q - out[:, 0] - out[:, 2]
    return out


def _rotation(alpha: NDArray[np.float64], strain: bool = False) -> NDArray[np.float64]:
    """Rotation ``(n, 4, 4)`` of [xx, yy, zz, xy] into axes at angle alpha: stress (tensor
    shear) or, with ``strain=True``, strain with engineering shear."""
    c, s = np.cos(alpha), np.sin(alpha)
    f = 2.0 if strain else 1.0
    R = np.zeros((alpha.size, 4, 4))
    R[:, 0, 0], R[:, 0, 1], R[:, 0, 3] = c * c, s * s, 2 * c * s / f
    R[:, 1, 0], R[:, 1, 1], R[:, 1, 3] = s * s, c * c, -2 * c * s / f
    R[:, 2, 2] = 1.0
    R[:, 3, 0], R[:, 3, 1], R[:, 3, 3] = -c * s * f, c * s * f, c * c - s * s
    return R


def mohr_coulomb_update(trial, G, K, c, sin_phi, sin_psi, cos_phi, t, tangent):
    """Return map of trial stresses ``(n, 4)``.

    ``tangent (n, 4, 4)`` holds the elastic matrix on entry and is overwritten at plastic
    points with the consistent tangent ``C = R_s^-1 (H D') R_e`` (D' the elastic matrix in
    principal axes, R_s / R_e the stress / strain rotations; isotropy gives R_s D = D R_e).
    Returns stress ``(n, 4)``, yielded ``(n,)`` and region ``(n,)`` (-3 for elastic points).
    """
    n = trial.shape[0]
    xx, yy, zz, xy = trial.T
    mean, diff = 0.5 * (xx + yy), 0.5 * (xx - yy)
    rad = np.hypot(diff, xy)
    s_a, s_b = mean + rad, mean - rad
    p3 = np.stack([s_a, s_b, zz], axis=1)  # (n, 3) principal triple (a, b, z)
    order = np.argsort(-p3, axis=1, kind="stable")  # (n, 3) sorted position -> abz index
    s_sorted = np.take_along_axis(p3, order, axis=1)
    P, scale = _plastic_points(s_sorted, c, sin_phi, cos_phi, t)
    stress = trial.copy()
    region = np.full(n, -3, dtype=np.int64)
    yielded = np.zeros(n, dtype=bool)
    if P.size == 0:
        return stress, yielded, region
    yielded[P] = True
    s_ret, H_sorted, region[P] = principal_return(
        s_sorted[P], G[P], K[P], c[P], sin_phi, sin_psi, cos_phi, None if t is None else t[P])
    # back to the (a, b, z) order
    o = order[P]
    s_abz = np.empty_like(s_ret)
    np.put_along_axis(s_abz, o, s_ret, axis=1)
    inv = np.argsort(o, axis=1)  # abz index -> sorted position
    H_abz = np.take_along_axis(np.take_along_axis(H_sorted, inv[:, :, None], axis=1),
                               inv[:, None, :], axis=2)  # (m, 3, 3)
    # in-plane spin term; its limit for equal in-plane trial stresses
    gap = s_a[P] - s_b[P]
    small = np.abs(gap) <= 1e-12 * scale[P]
    spin = np.where(small,
                    0.5 * (H_abz[:, 0, 0] - H_abz[:, 0, 1] - H_abz[:, 1, 0] + H_abz[:, 1, 1]),
                    (s_abz[:, 0] - s_abz[:, 1]) / np.where(small, 1.0, gap))
    alpha = 0.5 * np.arctan2(2.0 * xy[P], xx[P] - yy[P])
    Rs_inv = _rotation(-alpha)
    s_princ = np.zeros((P.size, 4))
    s_princ[:, :3] = s_abz
    stress[P] = np.einsum("mkl,ml->mk", Rs_inv, s_princ)
    M = np.zeros((P.size, 4, 4))  # H D' in principal axes; D' = lam 1 1^T + 2G I (+ G shear)
    lam = K[P] - 2.0 * G[P] / 3.0
    M[:, :3, :3] = (lam[:, None, None] * H_abz.sum(axis=2)[:, :, None]
                    + 2.0 * G[P][:, None, None] * H_abz)
    M[:, 3, 3] = spin * G[P]
    tangent[P] = np.matmul(np.matmul(Rs_inv, M), _rotation(alpha, strain=True))
    return stress, yielded, region


_ROOT2 = np.sqrt(2.0)
# Voigt order of the six-component update: 11, 22, 33, 12, 23, 13
_PAIRS = ((0, 1), (1, 2), (0, 2))


def _mandel(A: NDArray[np.float64]) -> NDArray[np.float64]:
    """Mandel vectors ``(..., 6)`` of symmetric tensors ``(..., 3, 3)``."""
    return np.stack([A[..., 0, 0], A[..., 1, 1], A[..., 2, 2], _ROOT2 * A[..., 0, 1],
                     _ROOT2 * A[..., 1, 2], _ROOT2 * A[..., 0, 2]], axis=-1)


def mohr_coulomb_update_3d(trial, G, K, c, sin_phi, sin_psi, cos_phi, t, tangent):
    """Return map of general trial stresses ``(n, 6)`` (no principal axis assumed).

    Components in the order 11, 22, 33, 12, 23, 13, stress with tensor shear; ``tangent
    (n, 6, 6)`` maps strain with engineering shear to stress. It holds the elastic matrix on
    entry and is overwritten at plastic points with the consistent tangent.

    The trial stress is diagonalised (``eigh``); the sorted principal values are returned by
    :func:`principal_return` (isotropy: the principal axes do not change) and the stress is
    rebuilt on the trial axes. The tangent is the derivative of this isotropic tensor
    function, ``dsigma/dsigma* = sum_ij H_ij E_i (x) E_j + sum_{i<j} (s_i - s_j) /
    (s*_i - s*_j) m_ij (x) m_ij`` (E_i = v_i v_i, m_ij = (v_i v_j + v_j v_i) / sqrt 2, in
    Mandel form; de Souza Neto, Peric & Owen 2008, *Computational Methods for Plasticity*,
    appendix A), times the elastic matrix. Where two trial principal values coincide the
    ratio takes its limit ``(H_ii - H_ij - H_ji + H_jj) / 2``.

    Returns stress ``(n, 6)``, yielded ``(n,)`` and region ``(n,)`` (-3 for elastic points).
    With ``tangent`` None the consistent tangents of the yielded points only are returned
    as a fourth value ``(p, 6, 6)``, in the order of ``np.flatnonzero(yielded)``.
    """
    n = trial.shape[0]
    stress = trial.copy()
    region = np.full(n, -3, dtype=np.int64)
    yielded = np.zeros(n, dtype=bool)
    none = np.zeros((0, 6, 6))
    # candidates from closed-form principal values (cheap), with a margin far above their
    # round-off; eigenvalues and axes by LAPACK only for those
    cand, _ = _plastic_points(principal_values(trial), c, sin_phi, cos_phi, t, margin=1e-6)
    if cand.size == 0:
        return (stress, yielded, region) if tangent is not None else \
            (stress, yielded, region, none)
    tr = trial[cand]
    T = np.empty((cand.size, 3, 3))
    T[:, 0, 0], T[:, 1, 1], T[:, 2, 2] = tr[:, 0], tr[:, 1], tr[:, 2]
    T[:, 0, 1] = T[:, 1, 0] = tr[:, 3]
    T[:, 1, 2] = T[:, 2, 1] = tr[:, 4]
    T[:, 0, 2] = T[:, 2, 0] = tr[:, 5]
    w, V = np.linalg.eigh(T)  # ascending
    s_c, V = w[:, ::-1], V[:, :, ::-1]  # s1 >= s2 >= s3, columns v1 v2 v3
    hit, scale_c = _plastic_points(s_c, c[cand], sin_phi, cos_phi,
                                   None if t is None else t[cand])
    if hit.size == 0:
        return (stress, yielded, region) if tangent is not None else \
            (stress, yielded, region, none)
    P = cand[hit]
    s_sorted = np.zeros((n, 3))
    s_sorted[P] = s_c[hit]
    scale = np.zeros(n)
    scale[P] = scale_c[hit]
    V = V[hit]
    yielded[P] = True
    s_ret, H, region[P] = principal_return(
        s_sorted[P], G[P], K[P], c[P], sin_phi, sin_psi, cos_phi, None if t is None else t[P])
    Vp = V  # (m, 3, 3)
    S = np.einsum("mik,mk,mjk->mij", Vp, s_ret, Vp)
    stress[P] = np.stack([S[:, 0, 0], S[:, 1, 1], S[:, 2, 2], S[:, 0, 1], S[:, 1, 2],
                          S[:, 0, 2]], axis=1)
    # Mandel basis of the trial axes: E_i (diagonal) and m_ij (shear), each (m, 6)
    E = [_mandel(np.einsum("mi,mj->mij", Vp[:, :, i], Vp[:, :, i])) for i in range(3)]
    dS = np.einsum("mij,mia,mjb->mab", H, np.stack(E, axis=1), np.stack(E, axis=1))
    for i, j in _PAIRS:
        vi, vj = Vp[:, :, i], Vp[:, :, j]
        mij = _mandel((np.einsum("mi,mj->mij", vi, vj) + np.einsum("mi,mj->mij", vj, vi))
                      / _ROOT2)
        gap = s_sorted[P, i] - s_sorted[P, j]
        small = np.abs(gap) <= 1e-12 * scale[P]
        ratio = np.where(small, 0.5 * (H[:, i, i] - H[:, i, j] - H[:, j, i] + H[:, j, j]),
                         (s_ret[:, i] - s_ret[:, j]) / np.where(small, 1.0, gap))
        dS += ratio[:, None, None] * mij[:, :, None] * mij[:, None, :]
    lam = K[P] - 2.0 * G[P] / 3.0
    D = 2.0 * G[P][:, None, None] * np.eye(6)  # elastic matrix in Mandel form
    D[:, :3, :3] += lam[:, None, None]
    C = np.matmul(dS, D)  # Mandel: stress_M = C strain_M
    w6 = np.array([1.0, 1.0, 1.0, 1.0 / _ROOT2, 1.0 / _ROOT2, 1.0 / _ROOT2])
    C = w6[None, :, None] * C * w6[None, None, :]  # to tensor / engineering shear
    if tangent is None:
        return stress, yielded, region, C
    tangent[P] = C
    return stress, yielded, region


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
        G = E / (2.0 * (1.0 + self.nu))
        K = E / (3.0 * (1.0 - 2.0 * self.nu))
        lam = K - 2.0 * G / 3.0
        deps = (strain - state_n.strain).reshape(n, 4)
        trial = state_n.stress.reshape(n, 4).copy()  # (n, 4) elastic trial, isotropic D
        trial[:, :3] += (lam * deps[:, :3].sum(axis=1))[:, None] + 2.0 * G[:, None] * deps[:, :3]
        trial[:, 3] += G * deps[:, 3]
        tangent = elastic_matrix(E, np.full(n, self.nu))  # (n, 4, 4), plastic rows replaced
        sphi, spsi = np.sin(np.radians(self.phi)), np.sin(np.radians(self.psi))
        cphi = np.cos(np.radians(self.phi))
        t = None
        if self.tension_cutoff is not None:
            t = np.full(n, float(self.tension_cutoff))
            if self.phi > 0.0:
                t = np.minimum(t, c * cphi / sphi)
        stress, yielded, region = mohr_coulomb_update(trial, G, K, c, sphi, spsi, cphi, t,
                                                      tangent)
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
