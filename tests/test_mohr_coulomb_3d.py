"""The six-component Mohr-Coulomb return map (no principal axis assumed), for plasticity
evaluated on circumferential planes of the harmonic model.

References: the derivative of an isotropic tensor function of a symmetric tensor, de Souza
Neto, Peric & Owen (2008), *Computational Methods for Plasticity*, appendix A (from memory);
the plane-strain return of ``materials.mohr_coulomb`` (itself checked in test_materials.py
against closed forms and finite differences) as the independent reference where sigma_33 is
principal; the tangent against central finite differences of the return map itself.
"""

import numpy as np
import pytest

from materials.elastic import elastic_matrix
from materials.mohr_coulomb import mohr_coulomb_update, mohr_coulomb_update_3d

E, NU = 20000.0, 0.3
G, K = E / (2 * (1 + NU)), E / (3 * (1 - 2 * NU))
PHI, PSI, C = 30.0, 5.0, 10.0
SPHI, SPSI, CPHI = np.sin(np.radians(PHI)), np.sin(np.radians(PSI)), np.cos(np.radians(PHI))


def _D6() -> np.ndarray:
    lam = K - 2 * G / 3
    D = np.zeros((6, 6))
    D[:3, :3] = lam
    D[:3, :3] += 2 * G * np.eye(3)
    D[3:, 3:] = G * np.eye(3)  # engineering shear strain -> tensor shear stress
    return D


def _update3d(trial, t=0.0):
    n = trial.shape[0]
    one = np.ones(n)
    tang = np.broadcast_to(_D6(), (n, 6, 6)).copy()
    s, y, r = mohr_coulomb_update_3d(trial, G * one, K * one, C * one, SPHI, SPSI, CPHI,
                                     None if t is None else t * one, tang)
    return s, tang, y, r


def _random_states(n, seed):
    rng = np.random.default_rng(seed)
    s0 = np.array([-100.0, -100.0, -100.0, 0, 0, 0])
    eps = rng.normal(scale=1e-2, size=(n, 6))
    return s0 + eps @ _D6().T, eps


def test_plane_states_match_the_plane_strain_return():
    """With sigma_23 = sigma_13 = 0 the 6-component return equals the 4-component one
    (stress and tangent) to round-off, cut-off included."""
    trial, _ = _random_states(400, 1)
    trial[:, 4:] = 0.0
    s6, C6, y6, _ = _update3d(trial)
    four = trial[:, [0, 1, 2, 3]]
    n = four.shape[0]
    one = np.ones(n)
    D4 = np.broadcast_to(np.asarray(elastic_matrix(E, NU)), (n, 4, 4)).copy()
    s4, y4, _ = mohr_coulomb_update(four, G * one, K * one, C * one, SPHI, SPSI, CPHI,
                                    0.0 * one, D4)
    assert y6.sum() > 200 and np.array_equal(y6, y4)
    assert np.allclose(s6[:, :4], s4, rtol=0, atol=1e-9 * 400)
    assert np.allclose(s6[:, 4:], 0.0, atol=1e-9)
    idx = [0, 1, 2, 3]
    assert np.allclose(C6[:, idx][:, :, idx], D4, rtol=1e-8, atol=1e-8 * E)


def test_returned_stress_is_admissible_and_objective():
    """Every returned stress satisfies Mohr-Coulomb and the cut-off; rotating the trial stress
    rotates the returned one (isotropy)."""
    trial, _ = _random_states(300, 2)
    s, _, y, _ = _update3d(trial)
    T = np.zeros((len(s), 3, 3))
    for k, (i, j) in enumerate([(0, 0), (1, 1), (2, 2), (0, 1), (1, 2), (0, 2)]):
        T[:, i, j] = T[:, j, i] = s[:, k]
    w = np.linalg.eigvalsh(T)
    f = (1 + SPHI) * w[:, 2] - (1 - SPHI) * w[:, 0] - 2 * C * CPHI
    assert y.sum() > 200
    assert f.max() <= 1e-8 * np.abs(w).max() and w[:, 2].max() <= 1e-8 * np.abs(w).max()
    rng = np.random.default_rng(7)
    Q, _ = np.linalg.qr(rng.normal(size=(3, 3)))

    def rot(v):
        A = np.zeros((len(v), 3, 3))
        for k, (i, j) in enumerate([(0, 0), (1, 1), (2, 2), (0, 1), (1, 2), (0, 2)]):
            A[:, i, j] = A[:, j, i] = v[:, k]
        B = Q @ A @ Q.T
        return np.stack([B[:, 0, 0], B[:, 1, 1], B[:, 2, 2], B[:, 0, 1], B[:, 1, 2],
                         B[:, 0, 2]], axis=1)

    s_rot, *_ = _update3d(rot(trial))
    assert np.allclose(s_rot, rot(s), rtol=0, atol=1e-8 * np.abs(s).max())


def test_tresca_pure_shear_limit_is_su():
    """phi = 0: a simple shear on any plane yields at tau = c = s_u (common practice)."""
    one = np.ones(3)
    trial = np.zeros((3, 6))
    trial[[0, 1, 2], [3, 4, 5]] = 40.0  # shear 40 kPa on 12, 23, 13 with s_u = 10
    tang = np.broadcast_to(_D6(), (3, 6, 6)).copy()
    s, y, _ = mohr_coulomb_update_3d(trial, G * one, K * one, 10.0 * one, 0.0, 0.0, 1.0,
                                     None, tang)
    assert y.all()
    assert np.allclose(s[[0, 1, 2], [3, 4, 5]], 10.0, rtol=1e-12)
    assert np.allclose(np.delete(s, [3, 4, 5], axis=1)[:, :3], 0.0, atol=1e-9)


@pytest.mark.parametrize("seed", [3, 4, 5])
def test_consistent_tangent_matches_finite_differences(seed):
    """The 6x6 tangent (unsymmetric: psi < phi) against central differences of the return
    with respect to the strain increment, at plastic points with distinct principal trial
    stresses and away from region boundaries (two step sizes must agree)."""
    trial, eps = _random_states(40, seed)
    s0 = trial - eps @ _D6().T
    _, Ct, y, region = _update3d(trial)
    D = _D6()
    checked = 0
    for k in np.flatnonzero(y):
        fd = {}
        for h in (1e-7, 1e-8):
            cols = []
            for j in range(6):
                de = np.zeros(6)
                de[j] = h
                sp, *_ = _update3d((s0[k] + D @ (eps[k] + de))[None])
                sm, *_ = _update3d((s0[k] + D @ (eps[k] - de))[None])
                cols.append((sp[0] - sm[0]) / (2 * h))
            fd[h] = np.array(cols).T
        if not np.allclose(fd[1e-7], fd[1e-8], rtol=1e-4, atol=1e-4 * E):
            continue  # a region boundary within the step: no derivative to compare
        assert np.allclose(Ct[k], fd[1e-7], rtol=1e-5, atol=1e-5 * E), (k, region[k])
        checked += 1
    assert checked >= 10
    main = np.flatnonzero(region == 0)  # the main plane MC13: non-associated flow
    assert main.size and not np.allclose(Ct[main[0]], Ct[main[0]].T)


def test_closed_form_principal_values_match_lapack():
    """The screening principal values (Smith 1961, trigonometric form of the cubic) against
    LAPACK's eigh: random stresses, and two or three equal values (the hard cases), within
    1e-7 of the stress scale."""
    from materials.mohr_coulomb import principal_values

    rng = np.random.default_rng(7)
    s = rng.normal(scale=50.0, size=(2000, 6))
    Q = np.linalg.qr(rng.normal(size=(3, 3)))[0]
    eq = []
    for lam in ([-30.0, -30.0, -80.0], [-20.0, -20.0, -20.0], [10.0, -5.0, -5.0]):
        T = Q @ np.diag(lam) @ Q.T
        eq.append([T[0, 0], T[1, 1], T[2, 2], T[0, 1], T[1, 2], T[0, 2]])
    s = np.vstack([s, eq])
    T = np.zeros((len(s), 3, 3))
    idx = [(0, 0), (1, 1), (2, 2), (0, 1), (1, 2), (0, 2)]
    for k, (i, j) in enumerate(idx):
        T[:, i, j] = T[:, j, i] = s[:, k]
    ref = np.linalg.eigvalsh(T)[:, ::-1]
    scale = np.abs(ref).max(axis=1, keepdims=True)
    assert np.abs(principal_values(s) - ref).max() <= 1e-7 * scale.max()
    assert np.all(np.abs(principal_values(s) - ref) <= 1e-7 * scale)
