"""Mohr-Coulomb and Tresca at the material point (docs/validation.md, A1-A4, A6).

References: failure states and triaxial slopes, de Souza Neto, Peric & Owen (2008),
*Computational Methods for Plasticity*, ch. 6 and 8 (from memory); return-map vectors computed
independently from the main-plane closed form (docs/validation.md, A2); tangent checked against
central finite differences of the return map itself (docs/validation.md, A3).
"""

import numpy as np
import pytest

from materials import LinearElastic, MaterialParameterError, MohrCoulomb, Tresca
from materials.mohr_coulomb import mohr_coulomb_update, principal_return, region_name
from materials.point import drive

E, NU = 20000.0, 0.3
G, K = E / (2 * (1 + NU)), E / (3 * (1 - 2 * NU))


def _principal(trial, phi, psi, c=10.0, t=None):
    one = np.ones(1)
    s, _H, region = principal_return(
        np.array([trial], float), G * one, K * one, c * one, np.sin(np.radians(phi)),
        np.sin(np.radians(psi)), np.cos(np.radians(phi)), None if t is None else t * one)
    return s[0], int(region[0])


@pytest.mark.parametrize("trial,psi,expected,region", [
    ((-100, -150, -400), 30, (-122.624, -157.541, -402.514), 0),   # main plane
    ((-100, -110, -400), 30, (-122.774, -122.774, -402.962), 1),   # edge s1 = s2
    ((40, 35, 30), 30, (17.321, 17.321, 17.321), -1),              # apex c cot(phi)
    ((-100, -150, -400), 0, (-116.340, -150.000, -383.660), 0),
    ((-100, -110, -400), 0, (-115.072, -115.072, -379.856), 1),
])
def test_return_map_vectors(trial, psi, expected, region):
    # docs/validation.md, A2 table (E = 20 000 kPa, nu = 0.3, c = 10 kPa, phi = 30 deg): values
    # computed from the closed form, given to 3 decimals: tolerance 5e-4 kPa absolute
    s, reg = _principal(trial, 30, psi)
    assert np.allclose(s, expected, atol=5e-4, rtol=0)
    assert reg == region


def test_return_map_closed_form_main_plane():
    # de Souza Neto et al. (2008) main-plane return (from memory), to 1e-8:
    # dgamma = f*/a, a = 4G(1 + sphi spsi/3) + 4K sphi spsi
    sphi, spsi, c = np.sin(np.radians(30)), np.sin(np.radians(10)), 10.0
    st = np.array([-100.0, -150.0, -400.0])
    f = (st[0] - st[2]) + (st[0] + st[2]) * sphi - 2 * c * np.cos(np.radians(30))
    dg = f / (4 * G * (1 + sphi * spsi / 3) + 4 * K * sphi * spsi)
    expect = st + dg * np.array([-(2 * G * (1 + spsi / 3) + 2 * K * spsi),
                                 (4 * G / 3 - 2 * K) * spsi,
                                 2 * G * (1 - spsi / 3) - 2 * K * spsi])
    s, _ = _principal(st, 30, 10)
    assert np.allclose(s, expect, rtol=1e-8, atol=0)


def test_tresca_vector_and_apex_handling():
    # docs/validation.md, A2: Tresca s_u = 50: (-100, -150, -400) -> (-183.333, -183.333, -283.333)
    s, reg = _principal((-100, -150, -400), 0, 0, c=50.0)
    assert np.allclose(s, (-183.333, -183.333, -283.333), atol=5e-4) and reg == 1
    # psi = 0 beyond the apex: with the cut-off t = 0 the return is to (0, 0, 0), exactly
    s, reg = _principal((40, 35, 30), 30, 0, t=0.0)
    assert np.allclose(s, 0.0, atol=1e-10) and region_name(reg) == "T1+T2+T3"
    # without a cut-off it is returned to the apex and flagged as non-dilatant
    m = MohrCoulomb(E, NU, c=10.0, phi=30.0, psi=0.0, tension_cutoff=None)
    st = m.initial_state(np.zeros((1, 1, 2)) - [0, 1])
    eps = np.linalg.solve(m.elastic_tangent(st)[0, 0], [40.0, 35.0, 30.0, 0.0])
    sig, _, new = m.update(eps.reshape(1, 1, 4), st)
    assert np.allclose(sig[0, 0, :3], 10.0 / np.tan(np.radians(30)), rtol=1e-10)
    assert new.params["apex_nondilatant"][0, 0] == 1.0


def _fd_tangent(model, eps, state, h=1e-7):
    C = np.zeros((4, 4))
    for j in range(4):
        d = np.zeros(4)
        d[j] = h
        sp = model.update((eps + d).reshape(1, 1, 4), state)[0][0, 0]
        sm = model.update((eps - d).reshape(1, 1, 4), state)[0][0, 0]
        C[:, j] = (sp - sm) / (2 * h)
    return C


# strain increments from 100 kPa isotropic compression that land in each region (found by a
# random search and checked below through the region code)
_REGION_CASES = {
    "elastic": [8.5e-05, 0.000639, -0.000287, -0.000359],
    "MC13": [0.005267, -0.001611, -0.004954, 0.002107],
    "MC13+MC23": [0.008034, 0.007751, -0.010129, -0.004345],
    "MC13+MC12": [0.014452, -0.000908, -0.011761, 0.018001],
    "T1": [0.00531, 0.002805, 0.002016, 0.004544],
    "MC13+T1": [0.008263, 0.012178, -0.011833, -0.017185],
    "T1+T2": [0.005557, 0.001326, 0.004956, 0.003653],
    "T1+T2+T3": [0.010007, 0.011479, 0.003077, 0.008789],
    "MC13+MC23+T1": [0.00536, -0.002489, 0.010508, -0.003231],
    "MC13+MC12+T1": [0.01265, -0.002411, -0.0032, 0.004452],
    "MC13+T1+T2": [-0.00218, 0.006432, 0.013863, 0.006616],
}


@pytest.mark.parametrize("case", list(_REGION_CASES))
def test_consistent_tangent_matches_finite_differences(case):
    # FD of the return map (docs/validation.md, A3: 1e-5 relative) in every region;
    # psi = 5 < phi = 30, so the tangent is also checked where it is unsymmetric
    m = MohrCoulomb(E, NU, c=10.0, phi=30.0, psi=5.0, tension_cutoff=0.0)
    s0 = np.array([-100.0, -100.0, -100.0, 0.0])
    st = m.initial_state(np.zeros((1, 1, 2)) - [0, 1]).with_stress(s0.reshape(1, 1, 4))
    eps = np.array(_REGION_CASES[case])
    D = m.elastic_tangent(st)[0, 0]
    one = np.ones(1)
    *_, region = mohr_coulomb_update((s0 + D @ eps)[None], G * one, K * one, 10 * one, 0.5,
                                     np.sin(np.radians(5)), np.cos(np.radians(30)), 0 * one,
                                     D[None].copy())
    assert region_name(int(region[0])) == case
    sig, C, new = m.update(eps.reshape(1, 1, 4), st)
    C_fd = _fd_tangent(m, eps, st)
    assert np.allclose(C[0, 0], C_fd, rtol=1e-5, atol=1e-5 * E)
    assert bool(new.yielded[0, 0]) == (case != "elastic")
    if case in ("MC13", "MC13+MC23"):
        assert not np.allclose(C[0, 0], C[0, 0].T), "non-associated flow: tangent unsymmetric"


def test_associated_tangent_is_symmetric():
    # associated flow (psi = phi): the algorithmic tangent is symmetric (de Souza Neto 2008)
    m = MohrCoulomb(E, NU, c=10.0, phi=30.0, psi=30.0, tension_cutoff=0.0)
    st = m.initial_state(np.zeros((1, 1, 2)) - [0, 1]).with_stress(
        np.array([[[-100.0, -100.0, -100.0, 0.0]]]))
    _, C, new = m.update(np.array(_REGION_CASES["MC13"]).reshape(1, 1, 4), st)
    assert new.yielded[0, 0]
    assert np.allclose(C[0, 0], C[0, 0].T, rtol=1e-10, atol=1e-10 * E)


def test_update_does_not_mutate_state():
    m = MohrCoulomb(E, NU, c=10.0, phi=30.0, psi=5.0)
    st = m.initial_state(np.zeros((2, 3, 2)) - [0, 1])
    before = [a.copy() for a in (st.stress, st.strain, st.plastic_strain)]
    m.update(np.full((2, 3, 4), -1e-2), st)
    assert all(np.array_equal(a, b) for a, b in zip(before, (st.stress, st.strain,
                                                            st.plastic_strain), strict=True))


def test_tresca_equals_mohr_coulomb_at_zero_friction():
    rng = np.random.default_rng(4)
    strain = rng.normal(scale=5e-3, size=(5, 7, 4))
    x = np.zeros((5, 7, 2)) - [0.0, 2.0]
    t = Tresca(E, NU, su=40.0, su_gradient=3.0)
    mc = MohrCoulomb(E, NU, c=40.0, phi=0.0, psi=0.0, tension_cutoff=None, c_gradient=3.0)
    s1, C1, _ = t.update(strain, t.initial_state(x))
    s2, C2, _ = mc.update(strain, mc.initial_state(x))
    assert np.array_equal(s1, s2) and np.array_equal(C1, C2)
    # every yielded point satisfies Tresca: sigma_1 - sigma_3 = 2 s_u(z), s_u(2 m) = 46 kPa
    ev = _principal_values(s1)
    tau = ev[..., -1] - ev[..., 0]
    assert np.all(tau <= 2 * 46.0 * (1 + 1e-10))
    assert np.any(np.isclose(tau, 92.0, rtol=1e-10))


def _principal_values(s):
    T = np.zeros((*s.shape[:-1], 3, 3))
    T[..., 0, 0], T[..., 1, 1], T[..., 2, 2] = s[..., 0], s[..., 1], s[..., 2]
    T[..., 0, 1] = T[..., 1, 0] = s[..., 3]
    return np.linalg.eigvalsh(T)


@pytest.mark.parametrize("phi,c", [(30.0, 0.0), (30.0, 10.0), (20.0, 5.0)])
def test_triaxial_compression_and_extension_strength(phi, c):
    # q = M (p' + c cot phi), M_c = 6 sin(phi)/(3 - sin(phi)), M_e = 6 sin(phi)/(3 + sin(phi))
    # (de Souza Neto et al. 2008, ch. 6, from memory); phi = 30: M_c = 1.200, M_e = 0.857.
    # Tolerance 1e-10 relative on the failure state reached by the driver.
    m = MohrCoulomb(E, NU, c=c, phi=phi, psi=phi / 3, tension_cutoff=None)
    s = np.sin(np.radians(phi))
    cot = c / np.tan(np.radians(phi))
    p0 = -100.0
    init = [p0, p0, p0, 0.0]
    for sign, M in ((-1, 6 * s / (3 - s)), (+1, 6 * s / (3 + s))):
        path = drive(m, np.linspace(0, sign * 0.03, 31)[:, None] * [0, 1, 0, 0],
                     strain_controlled=[False, True, False, True], stress=init,
                     initial_stress=init)
        sig = -path.stress[-1]  # compression positive
        q = abs(sig[1] - sig[0])
        p = sig[:3].mean()
        assert path.yielded[-1]
        assert q == pytest.approx(M * (p + cot), rel=1e-10)
    if phi == 30.0:
        assert 6 * s / (3 - s) == pytest.approx(1.200, abs=5e-4)
        assert 6 * s / (3 + s) == pytest.approx(0.857, abs=5e-4)


@pytest.mark.parametrize("psi", [0.0, 10.0, 30.0])
def test_plane_strain_biaxial_failure_independent_of_dilation(psi):
    # sigma_1 = N_phi sigma_3 + 2 c sqrt(N_phi), N_phi = (1 + sin)/(1 - sin) = 3 at 30 deg,
    # independent of E, nu, psi (docs/validation.md, A1); plane strain: eps_zz = 0 (strain-
    # controlled)
    c = 10.0
    m = MohrCoulomb(E, NU, c=c, phi=30.0, psi=psi, tension_cutoff=None)
    n_phi = (1 + 0.5) / (1 - 0.5)
    assert n_phi == pytest.approx(3.0, rel=1e-12)
    init = [-100.0, -100.0, -100.0, 0.0]
    path = drive(m, np.linspace(0, -0.03, 31)[:, None] * [0, 1, 0, 0],
                 strain_controlled=[False, True, True, True], stress=init,
                 initial_stress=init)
    s1, s3 = -path.stress[-1, 1], -path.stress[-1, 0]
    assert s1 == pytest.approx(n_phi * s3 + 2 * c * np.sqrt(n_phi), rel=1e-10)


@pytest.mark.parametrize("kwargs,match", [
    (dict(E=1e4, nu=0.3, c=5.0, phi=95.0), "phi = 95"),
    (dict(E=1e4, nu=0.3, c=5.0, phi=30.0, psi=35.0), "psi = 35"),
    (dict(E=1e4, nu=0.5, c=5.0, phi=30.0), "nu = 0.5"),
    (dict(E=1e4, nu=0.3, c=-1.0, phi=30.0), "c = -1"),
    (dict(E=0.0, nu=0.3, c=1.0, phi=30.0), "E = 0"),
])
def test_parameter_errors(kwargs, match):
    with pytest.raises(MaterialParameterError, match=match):
        MohrCoulomb(**kwargs)
    with pytest.raises(MaterialParameterError, match="su = 0"):
        Tresca(1e4, 0.49, su=0.0)
    assert LinearElastic(1e4, 0.3).shear_modulus == pytest.approx(1e4 / 2.6)
