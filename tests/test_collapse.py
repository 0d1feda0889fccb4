"""Undrained and drained collapse loads (docs/validation.md, C1-C5, D1, D2, E5; Newton: F6).

Displacement FE over-predicts collapse loads, so the bands are one-sided as docs/validation.md
sets them (tags [S], [M], [C], [D] as defined there); collapse is the plateau of the reaction
(< 0.5 % change over the last 15 % of the imposed displacement). Coarse meshes keep the default
run fast; the fine-mesh versions are the full run of `benchmarks/collapse.py` (marked slow in
tests/test_benchmark_scripts.py).
"""

import numpy as np
import pytest

from benchmarks.collapse import lateral_disc_pressure, thick_cylinder
from benchmarks.footing import Footing, run_footing
from materials import MohrCoulomb, Tresca

SU = 10.0
NC = 2 + np.pi  # Prandtl (1920); Hill (1950), *The Mathematical Theory of Plasticity*


def _in_band(value, ref, lo, hi):
    err = value / ref - 1
    assert lo <= err <= hi, f"{value:.4f} vs {ref:.4f}: {100 * err:+.2f} % outside [{lo}, {hi}]"
    return err


@pytest.mark.parametrize("element,h_near,hi", [("T15", 0.05, 0.02), ("T6", 0.025, 0.05)])
@pytest.mark.parametrize("rough", [True, False])
def test_prandtl_strip_two_meshes(element, h_near, hi, rough):
    """q_u = (2 + pi) s_u, smooth and rough (Prandtl 1920; Hill 1950) [M, C].
    T15 0...+2 %, T6 0...+5 %; meshes h and h/2: the fine one inside the band and the error
    not growing on refinement (docs/validation.md, rules for collapse loads)."""
    errs = []
    for h in (h_near, h_near / 2):
        r = run_footing(Footing(Tresca(3000.0, 0.49, SU), element=element, h_near=h,
                                rough=rough))
        assert r.plateau_change < 0.005
        errs.append(r.collapse / (NC * SU) - 1)
    _in_band(NC * SU * (1 + errs[1]), NC * SU, 0.0, hi)
    assert errs[1] <= errs[0] + 1e-4


@pytest.mark.parametrize("rough,ref", [(False, 5.69), (True, 6.05)])
def test_circular_footing_axisymmetric(rough, ref):
    """Smooth 5.69 s_u (Shield 1955, Proc. R. Soc. A 233) and rough 6.05 s_u (Eason & Shield
    1960, ZAMP 11), from memory. T15, 0...+3 %."""
    r = run_footing(Footing(Tresca(3000.0, 0.49, SU), analysis="axisymmetric", rough=rough,
                            h_near=0.05))
    assert r.plateau_change < 0.01
    _in_band(r.collapse, ref * SU, 0.0, 0.03)


@pytest.mark.parametrize("ratio,F", [(2.0, 1.181), (10.0, 1.396)])
def test_davis_booker_strength_gradient(ratio, F):
    """q_u = F [(2 + pi) s_u0 + rho B / 4], smooth F = 1.181 (rho B/s_u0 = 2), 1.396 (10)
    (Davis & Booker 1973, Geotechnique 23(4), form from memory, F computed). -1 %...+4 %."""
    B = 2.0
    rho = ratio * SU / B
    r = run_footing(Footing(Tresca(3000.0, 0.49, SU, su_gradient=rho), B=B, rough=False,
                            h_near=0.05))
    _in_band(r.collapse, F * (NC * SU + rho * B / 4), -0.01, 0.04)


def test_pure_moment_bonded_strip():
    """M / (B^2 s_u) = 0.690 for a bonded rigid strip under pure moment (V = 0): scoop upper
    bound (Murff 1994; Bransby & Randolph 1998, Geotechnique 48(5)), from memory. -4 %...+4 %.
    The moment is read at the reference node driven in rotation."""
    B = 2.0
    r = run_footing(Footing(Tresca(3000.0, 0.49, SU), B=B, control="rotation", target=0.02,
                            h_near=0.05))
    assert r.plateau_change < 0.005
    _in_band(r.collapse / (B**2 * SU), 0.690, -0.04, 0.04)


@pytest.mark.parametrize("element,h,hi", [("T15", 0.25, 0.01), ("T6", 0.1, 0.02)])
def test_thick_cylinder_collapse(element, h, hi):
    """Tresca cylinder, b/a = 2: collapse p_c = 2 k ln(b/a) = 1.386 k (Hill 1950) [M, C];
    T15 0...+1 %, T6 0...+2 %."""
    res, p = thick_cylinder(element, h)
    assert res.status == "ok"
    _in_band(p[-1], 2 * SU * np.log(2.0), 0.0, hi)


def test_newton_converges_quadratically():
    """Consistent tangent: once the relative residual is small (< 1e-2) the next one is at
    most ~ C r^2 (quadratic convergence, de Souza Neto et al. 2008, ch. 4; here C = 100),
    checked on every elastoplastic increment of the thick-cylinder expansion."""
    res, _ = thick_cylinder("T15", 0.25)
    pairs = 0
    for rec in res.records:
        h = rec.history
        for r0, r1 in zip(h[:-1], h[1:], strict=True):
            if 1e-9 < r0 < 1e-2:
                assert r1 <= 100 * r0**2, f"not quadratic: {r0:.2e} -> {r1:.2e}"
                pairs += 1
    assert pairs >= 5
    assert np.max(res.iterations) <= 6


@pytest.mark.parametrize("phi,nc_ref", [(20.0, 14.835), (30.0, 30.140)])
def test_nc_weightless_mohr_coulomb(phi, nc_ref):
    """N_c = (N_q - 1) cot(phi): 14.835 (20 deg), 30.140 (30 deg) (Prandtl 1921; Reissner
    1924) [M, C]; weightless soil, c = 10 kPa, associated flow. 0...+5 %."""
    nq = np.exp(np.pi * np.tan(np.radians(phi))) * np.tan(np.radians(45 + phi / 2)) ** 2
    assert (nq - 1) / np.tan(np.radians(phi)) == pytest.approx(nc_ref, abs=1e-3)
    r = run_footing(Footing(MohrCoulomb(E=1e5, nu=0.3, c=10.0, phi=phi, psi=phi,
                                        tension_cutoff=None),
                            h_near=0.1, width_factor=5, depth_factor=3, refine_radius=1.5))
    assert r.plateau_change < 0.005
    _in_band(r.collapse, nc_ref * 10.0, 0.0, 0.05)


@pytest.mark.parametrize("phi,nq_ref", [(20.0, 6.399), (30.0, 18.401)])
def test_nq_weightless_mohr_coulomb(phi, nq_ref):
    """N_q = e^(pi tan phi) tan^2(45 + phi/2): 6.399 (20 deg), 18.401 (30 deg) [M, C];
    weightless, c = 0, surcharge 10 kPa beside the footing (and as the initial isotropic
    stress). 0...+5 %."""
    r = run_footing(Footing(MohrCoulomb(E=1e5, nu=0.3, c=0.0, phi=phi, psi=phi,
                                        tension_cutoff=None),
                            h_near=0.1, width_factor=5, depth_factor=3, refine_radius=1.5,
                            surcharge=10.0, K0=1.0))
    assert r.plateau_change < 0.005
    _in_band(r.collapse, nq_ref * 10.0, 0.0, 0.05)


def test_ngamma_smooth_30():
    """Smooth N_gamma(30 deg) = 7.653 (Martin 2005, method of characteristics) [S abstract, C];
    q_u = 0.5 gamma B N_gamma with c / (gamma B) = 1e-3. -3 %...+10 %."""
    B, gamma = 2.0, 10.0
    r = run_footing(Footing(MohrCoulomb(E=1e4, nu=0.3, c=1e-3 * gamma * B, phi=30.0,
                                        psi=30.0, tension_cutoff=None),
                            B=B, rough=False, h_near=0.05, width_factor=4, gamma=gamma,
                            K0=0.5, refine_radius=1.5))
    assert r.plateau_change < 0.005
    _in_band(r.collapse, 0.5 * gamma * B * 7.653, -0.03, 0.10)


def test_limiting_lateral_pressure_rough_disc():
    """Plane slice of Tresca soil around a rough rigid disc: P_u / (s_u D) = 11.94
    (Randolph & Houlsby 1984, Geotechnique 34(4); Martin & Randolph 2006), from memory;
    T15, 0...+3 %. This sets the scale of the lateral spring limit (N_p = 9 is the usual,
    lower, design value near the surface)."""
    value, info = lateral_disc_pressure("T15", h_near=0.05)
    assert info["status"] == "ok"
    _in_band(value, 11.94, 0.0, 0.03)
