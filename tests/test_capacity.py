"""Capacity to failure: the plateau rule, the rotation grid, mechanisms, design strengths.

References: closed forms of the idealised curves (exact), the rigid-plastic moment capacity
of a rigid cap on rows of rigid-plastic axial springs (the plastic limit of the
elastic-plastic spring model: lower- and upper-bound theorems of plasticity, common
practice for pile groups), the partial-factor definitions of EN 1997-1 (a design value is
the characteristic value divided by its factor; for phi' on tan phi').
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from femcore.foundation.design import DesignStrength, demo_design, design_from_dict
from femcore.foundation.keypoints import KeyPoint, analyse_curve, plateau
from femcore.foundation.requirements import check_requirements
from femcore.foundation.run import run_design
from femcore.foundation.stages import PUSHOVER_RELATIVE, PUSHOVER_RELATIVE_FROM
from femcore.foundation.strength import factored_design


# --------------------------------------------------------------------------- the plateau rule
@pytest.mark.parametrize("n", [15, 40, 301])
def test_plateau_of_elastic_plastic_curve_is_exact_on_any_sampling(n):
    """M = min(K theta, M_y): the plateau moment is M_y to round-off whatever the sampling
    (irregular, coarse or fine), not censored; its rotation lies between theta_y and the
    first curve point past the chord window 1.25 theta_y [exact]."""
    K, My = 1e8, 2e5
    rng = np.random.default_rng(n)
    th = np.sort(np.concatenate([np.geomspace(1e-6, 0.02, n), rng.uniform(1e-5, 0.02, n)]))
    pl = plateau(th, np.minimum(K * th, My), K)
    ty = My / K
    assert pl.confirmed and pl.moment == pytest.approx(My, rel=1e-12)
    first_past_window = th[th >= 1.25 * ty][0]
    assert ty * (1 - 1e-9) <= pl.rotation <= first_past_window * (1 + 1e-9)


@pytest.mark.parametrize("hardening", [0.019, 0.021])
def test_plateau_well_posed_across_the_tangent_threshold(hardening):
    """Bilinear hardening with a tangent just below and just above 2 % of K0: a tangent
    limit alone reads a plateau at yield for one and none (censored) for the other; the
    rule with the secant limit reads both at the knee, within the chord window:
    M_y <= M_u <= M_y + k_h (0.25 theta_y) [exact bounds of the bilinear curve]."""
    K, My = 1e8, 2e5
    ty = My / K
    th = np.geomspace(1e-6, 0.05, 400)
    M = np.where(th < ty, K * th, My + hardening * K * (th - ty))
    kp = analyse_curve(th, M, require_confirmed=True)["ultimate"]
    assert kp.extra["censored"] is False
    assert My * (1 - 1e-12) <= kp.value <= My + hardening * K * 0.25 * ty


def test_plateau_of_hyperbola_matches_the_rule_in_closed_form():
    """M = theta / (a + b theta) (Kondner 1963): the chord slope over [theta/1.25, theta]
    is a closed form; the plateau is where it meets 2 % of K0 = 1/a or 10 % of the
    secant, whichever comes first (brentq on the closed form); the implementation's
    interpolated crossing on 200 points agrees within 0.5 % [exact rule, D]."""
    a, b = 1e-8, 2e-6

    def m(t):
        return t / (a + b * t)

    def chord(t):
        return (m(t) - m(t / 1.25)) / (0.2 * t)

    t_tan = brentq(lambda t: chord(t) - 0.02 / a, 1e-5, 1.0)
    t_sec = brentq(lambda t: chord(t) - 0.1 * m(t) / t, 1e-5, 1.0)
    tp = min(t_tan, t_sec)
    th = np.geomspace(1e-6, 3 * tp, 200)
    pl = plateau(th, m(th), 1 / a)
    assert pl.rotation == pytest.approx(tp, rel=5e-3)
    assert pl.moment == pytest.approx(m(tp), rel=5e-3)
    # the same curve cut before it: censored, the largest moment as a lower bound
    short = analyse_curve(th[th < tp], m(th[th < tp]), require_confirmed=True)["ultimate"]
    assert short.extra["censored"] is True and short.value == pytest.approx(m(th[th < tp][-1]))


def test_censored_capacity_reads_not_reached_with_its_lower_bound():
    """A censored ultimate is a lower bound: the capacity check is neither PASS nor FAIL,
    whether the bound is below or above the design moment [definition]."""
    d = demo_design()
    for value in (50e3, 900e3):
        kp = {"ultimate": KeyPoint("ultimate", value, "kNm", "max", {},
                                   {"censored": True, "rotation": 0.05})}
        chk = check_requirements(d, np.zeros(0), np.zeros(0), kp, [], None)["capacity"]
        assert chk.passed is None and chk.verdict == "not reached"
        assert chk.extra["lower_bound"] == pytest.approx(value, rel=1e-15)
    kp["ultimate"].extra["censored"] = False
    chk = check_requirements(d, np.zeros(0), np.zeros(0), kp, [], None)["capacity"]
    assert chk.verdict == "PASS" and chk.margin == pytest.approx(900e3 / 186.3e3 - 1)


# --------------------------------------------------------------------------- the pushover
def _springs(**loading):
    d = demo_design(support="springs").model_dump()
    d["design_strength"] = None
    d["loading"].update(loading)
    return d


def test_lever_pushover_lands_on_the_rotation_grid():
    """Lever control (H = M/h) drives the rotation: the curve passes exactly through every
    key-point rotation and the initial-secant rotation, ends exactly on the rotation cap,
    and above 0.5 mrad no increment exceeds 20 % of the rotation reached [definition of
    the grid]."""
    r = run_design(_springs(stop_at_plateau=False, rotation_max=0.02), dynamic=False)
    th = r.curve["rotation"]
    for key in (1e-5, 0.001, 0.003, 0.005):
        assert np.min(np.abs(th - key)) <= 1e-12 * key
    assert th[-1] == pytest.approx(0.02, rel=1e-12)
    big = th[:-1] >= PUSHOVER_RELATIVE_FROM * (1 - 1e-9)
    assert np.all(np.diff(th)[big] <= PUSHOVER_RELATIVE * th[:-1][big] * (1 + 1e-9))
    assert r.status == "ok"
    # H = M / h on every point (the proportional load)
    h = r.built.lever_height
    assert np.allclose(r.curve["horizontal"] * h, r.curve["moment"], rtol=1e-12)


def _plastic_moment(built, V3d, divisor=1.0):
    """Rigid-plastic moment of a rigid cap on the rows' axial springs (per metre of slice):
    rows on one side of a neutral row at compression capacity (shaft + tip), on the other
    at tension capacity (shaft), the neutral row carrying the rest of V; the best
    neutral position."""
    L = built.slice_length
    x = np.array([pr.row.x for pr in built.rows])
    comp = np.array([pr.springs.f_max[:, 0].sum() + pr.tip.f_max[0, 0]
                     for pr in built.rows]) / divisor
    ten = np.array([pr.springs.f_max[:, 0].sum() for pr in built.rows]) / divisor
    V = V3d / L + built.meta["cap_weight_kN_per_m"]
    order = np.argsort(x)
    best = -np.inf
    for k in range(len(x) + 1):
        q0 = np.where(np.isin(np.arange(len(x)), order[k:]), comp, -ten)
        for j in range(len(x)):
            q = q0.astype(float).copy()
            q[j] = 0.0
            qj = V - q.sum()
            if -ten[j] <= qj <= comp[j]:
                q[j] = qj
                best = max(best, float(q @ x))
    return best * L


@pytest.mark.parametrize("V", [8400.0, 97000.0])
def test_rigid_cap_on_springs_reaches_the_plastic_moment(V):
    """Rigid cap on pinned vertical piles with elastic-perfectly plastic axial springs, V
    held (also 99.5 % of the group's compression capacity, the corner of the capacity
    polygon where an earlier version reported a divergence): the curve runs to the cap
    and its final moment equals the rigid-plastic moment within 1e-5 [plastic limit
    theorems, exact for this model]."""
    d = _springs(control="rotation", horizontal=0.0, stop_at_plateau=False,
                 rotation_max=0.05, vertical=V)
    d["piles"]["head"] = "pinned"
    for ring in d["piles"]["rings"]:
        ring["rake"] = 0.0
    r = run_design(d, dynamic=False)
    assert r.status == "ok"
    ref = _plastic_moment(r.built, V)
    assert r.curve["moment"][-1] == pytest.approx(ref, rel=1e-5)  # Newton rtol 1e-6
    assert r.keypoints["ultimate"].value <= ref * (1 + 1e-9)


def test_vertical_load_beyond_the_group_is_a_mechanism():
    """V above the compression capacity of all piles minus the cap weight: no equilibrium
    under V alone; the run reports the mechanism (status ok, ultimate 0), not a divergence
    [statics]."""
    d = _springs(control="rotation", vertical=99000.0)
    d["piles"]["head"] = "pinned"
    for ring in d["piles"]["rings"]:
        ring["rake"] = 0.0
    r = run_design(d, dynamic=False)
    assert r.status == "ok" and "mechanism under the vertical load" in r.message
    assert r.keypoints["ultimate"].value == 0.0


# --------------------------------------------------------------------------- design strengths
def test_factored_design_divides_the_strengths_only():
    """s_u / 1.4, c' / 1.25, tan phi' / 1.25, dilation capped at the factored phi'; moduli
    and K0 stay characteristic (EN 1997-1 2.4.6.2: X_d = X_k / gamma_M) [definition]."""
    d = demo_design()
    f = factored_design(d)
    assert f.design_strength is None
    for a, b in zip(d.soil.layers, f.soil.layers, strict=True):
        if a.model == "tresca":
            assert b.su == pytest.approx(a.su / 1.4, rel=1e-15)
            assert b.su_gradient == pytest.approx(a.su_gradient / 1.4, rel=1e-15)
            assert b.E == a.E and b.K0 == pytest.approx(0.7)
        else:
            assert math.tan(math.radians(b.phi)) == pytest.approx(
                math.tan(math.radians(a.phi)) / 1.25, rel=1e-12)
            assert b.c == pytest.approx(a.c / 1.25) and b.psi == a.psi <= b.phi
            assert b.K0 == pytest.approx(1 - math.sin(math.radians(a.phi)), rel=1e-12)


def test_design_strength_pushover_on_springs_matches_the_factored_plastic_moment():
    """Pile resistances / 1.5 on the rigid cap model: the second pushover ends on the
    rigid-plastic moment of the factored springs (within 0.2 %, from below), the capacity
    check uses it, and
    result.json carries both [plastic limit, exact for this model]."""
    d = _springs(control="rotation", horizontal=0.0, stop_at_plateau=False,
                 rotation_max=0.05)
    d["piles"]["head"] = "pinned"
    for ring in d["piles"]["rings"]:
        ring["rake"] = 0.0
    d["design_strength"] = DesignStrength(pile_resistance=1.5).model_dump()
    r = run_design(design_from_dict(d), dynamic=False)
    ds = r.design_strength
    assert ds["status"] == "ok"
    ref = _plastic_moment(r.built, 8400.0, divisor=1.5)
    # the factored curve approaches the limit from below (some shaft springs still elastic)
    assert ref * (1 - 2e-3) <= ds["curve"]["moment"][-1] <= ref * (1 + 1e-9)
    chk = r.requirements["capacity"]
    assert chk.extra["source"] == "design_strength"
    assert chk.value == pytest.approx(ds["keypoints"]["ultimate"]["value"], rel=1e-15)
    assert ds["keypoints"]["ultimate"]["value"] < r.keypoints["ultimate"].value
    out = r.to_dict()
    assert out["design_strength"]["factors"]["pile_resistance"] == 1.5


def test_freed_soil_faces_keep_the_greenfield_state():
    """Cap without contact: the K0 stress field of the layered profile is in equilibrium
    with the soil weights plus the greenfield traction on the freed faces (underside, edge,
    backfill wall) to round-off; without that traction the out-of-balance is a few per
    cent of the weights [statics of the at-rest field, D]."""
    from femcore.foundation.build import build_model, greenfield_traction
    from femcore.foundation.stages import _soil_blocks
    from femcore.initial_stress import apply_k0, profile_loads

    b = build_model(demo_design(element="T6", mesh="coarse"))
    m, soil = b.model, _soil_blocks(b)
    states = apply_k0(m, b.profile, m.initial_states(), soil)
    f_int, _, _ = m.evaluate(np.zeros(m.n_dofs), states, tangent=False)
    weights = profile_loads(m, b.profile, soil)
    traction = greenfield_traction(m, b.meta["freed_edges"], b.design, b.profile)
    red = b.free_map.reduce_vector
    scale = np.linalg.norm(red(weights))
    assert np.linalg.norm(red(f_int - weights - traction)) <= 1e-10 * scale
    assert np.linalg.norm(red(f_int - weights)) >= 1e-2 * scale
