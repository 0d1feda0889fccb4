"""Circumferential planes of the harmonic model (femcore/harmonic_planes.py).

References: orthogonality of cos(n theta) and sin(n theta) over the circle and the exactness
of the periodic trapezoid rule for trigonometric polynomials of degree < 2 (m - 1) on m
points over [0, pi] (Davis & Rabinowitz 1984, *Methods of Numerical Integration*, from
memory); the harmonic factors c_0 = 2 pi, c_n = pi of the elastic harmonic model (Wilson
1965; Winnicki & Zienkiewicz 1979).
"""

import numpy as np
import pytest

from femcore.harmonic import HarmonicError, elastic_matrix_3d, harmonic_factor, trig_factors
from femcore.harmonic_planes import CircumferentialPlanes, min_planes, plane_weights
from materials.mohr_coulomb import mohr_coulomb_update_3d


@pytest.mark.parametrize("n_max", [1, 2, 4, 8])
def test_minimal_planes_integrate_harmonic_products_exactly(n_max):
    """sum_k w_k T_n T_m = delta_nm c_n (per component; the sine rows vanish at n = 0) on
    N + 2 planes; one plane fewer breaks it for the highest pair."""
    m = min_planes(n_max)
    pl = CircumferentialPlanes(range(n_max + 1), m)
    G = np.einsum("khj,kgj->hgj", pl.wT, pl.T)  # (h, h, 6)
    for n in range(n_max + 1):
        want = np.full(6, harmonic_factor(n))
        if n == 0:
            want[4:] = 0.0
        assert np.allclose(G[n, n], want, rtol=1e-13)
        G[n, n] = 0.0
    assert np.abs(G).max() < 1e-12
    assert abs(plane_weights(m).sum() - 2 * np.pi) < 1e-13
    th = np.linspace(0.0, np.pi, m - 1)  # one plane fewer
    w = np.full(m - 1, 2 * np.pi / (m - 2))
    w[[0, -1]] /= 2
    top = trig_factors(n_max, th)
    assert abs((w * top[:, 0] ** 2).sum() - np.pi) > 1e-3


def test_elastic_projection_is_the_block_diagonal_harmonic_stiffness():
    """A theta-independent elastic C gives D_nm = delta_nm c_n D and s_n = c_n D eps_n."""
    pl = CircumferentialPlanes([0, 1, 2, 3], 5)
    D = elastic_matrix_3d(30000.0, 0.3)
    rng = np.random.default_rng(0)
    eps = rng.normal(size=(4, 7, 3, 6))  # (h, c, q, 6)
    eps[0, ..., 4:] = 0.0  # no torsion in the symmetric family
    sig_planes = np.einsum("ij,kcqj->kcqi", D, pl.to_planes(eps))
    s = pl.to_harmonics(sig_planes)
    Dnm = pl.coupled_tangent(np.broadcast_to(D, (pl.n_planes, 7, 3, 6, 6)))
    for a, n in enumerate(pl.harmonics):
        assert np.allclose(s[a], harmonic_factor(n) * eps[a] @ D.T, rtol=1e-12, atol=1e-10)
        for b in range(4):
            want = harmonic_factor(n) * D if a == b else 0.0 * D
            if n == 0 and a == b:
                want = want.copy()
                want[4:, :] = want[:, 4:] = 0.0
            assert np.allclose(Dnm[a, b], want, rtol=1e-12, atol=1e-9)


def test_too_few_planes_or_a_bad_count_is_refused():
    with pytest.raises(HarmonicError, match=r"planes = 5: must be an integer >= 6"):
        CircumferentialPlanes(range(5), 5)
    with pytest.raises(HarmonicError, match="planes = 2.5"):
        CircumferentialPlanes([0, 1], 2.5)


def _plastic_projection(m: int) -> np.ndarray:
    """Harmonic stress amplitudes of a Mohr-Coulomb soil point under K0 stress plus an n = 1
    strain (a rocking foundation: compression at theta = 0, extension at pi), on m planes."""
    E, nu, su = 20000.0, 0.3, 10.0
    G, K = E / (2 * (1 + nu)), E / (3 * (1 - 2 * nu))
    D = elastic_matrix_3d(E, nu)
    pl = CircumferentialPlanes([0, 1, 2, 3], m)
    eps = np.zeros((4, 1, 1, 6))
    eps[1, 0, 0] = [-2e-3, 1e-3, 4e-4, 1.5e-3, 8e-4, -6e-4]  # n = 1 amplitudes
    s0 = np.array([-50.0, -80.0, -50.0, 0, 0, 0])  # n = 0 (K0 state, kPa)
    trial = s0 + np.einsum("ij,kcqj->kcqi", D, pl.to_planes(eps)).reshape(m, 6)
    one = np.ones(m)
    tang = np.broadcast_to(D, (m, 6, 6)).copy()
    s, y, _ = mohr_coulomb_update_3d(trial, G * one, K * one, su * one, np.sin(0.35),
                                     0.0, np.cos(0.35), 0.0 * one, tang)
    assert 0 < y.sum() < m  # yield local in theta: the harmonics couple
    return pl.to_harmonics(s.reshape(m, 1, 1, 6))[:, 0, 0]  # (h, 6)


def test_plane_count_study_for_a_plastic_point():
    """Yield local in theta is not band-limited: the projected amplitudes converge with the
    plane count (trapezoid rule on a kinked integrand; not monotone, since it depends on
    where the yield boundary falls between planes). Measured against a 2001-plane reference
    in the n = 1 amplitude: 7 planes (2N + 1 for N = 3) 0.24 %, 13 planes 0.010 %, 25 planes
    0.013 %, 49 planes 0.0019 %."""
    ref = _plastic_projection(2001)
    err = {m: np.abs(_plastic_projection(m) - ref)[1].max() / np.abs(ref[1]).max()
           for m in (7, 13, 25, 49)}
    assert err[7] < 5e-3 and err[13] < 5e-4 and err[25] < 5e-4 and err[49] < 5e-5, err
    assert np.abs(ref[2]).max() > 1e-3 * np.abs(ref[1]).max()  # n = 2 is excited by yield
