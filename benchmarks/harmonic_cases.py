"""Validation cases of the harmonic 3D stiffness for ``tiltfe bench`` (docs/validation.md,
group H): the harmonic model against 3D finite elements computed in the run (scikit-fem,
P2 tetrahedra) on the same geometry, the 3D solutions against published formulas, and the
cap-size artefact of the slice.

Every case returns (computed, info) with ``computed`` a ratio whose reference is 1 (or the
stated known bias).
"""

from __future__ import annotations

from functools import cache

from .collapse import Case

__all__ = ["CASES"]

G, NU = 1.0e4, 0.3
D, LP, RR = 1.0, 10.0, 3.0  # pile diameter, length, ring radius of the 4-pile ring (m)


@cache
def _footing3d(quick: bool) -> dict:
    """3D footing stiffnesses extrapolated from edge sizes h and h/2 (R/4, R/8 quick; R/8,
    R/16 full) with order 1: the rigid edge's r^(1/2) singularity makes the energy error
    proportional to h (common practice). Measured: the R/16 values are 1.0-2.1 % stiff;
    the harmonic model (T15, R/16) agrees with the extrapolation to 0.1 %."""
    from .reference3d import footing_stiffness

    n = (4, 8) if quick else (8, 16)
    a, b = (footing_stiffness(G, NU, 1.0, 2.0, h_near=1 / k) for k in n)
    out = {k: 2 * b[k] - a[k] for k in ("K_V_smooth", "K_R_smooth", "K_H_bonded")}
    out.update(n_dofs=b["n_dofs"], seconds={"total": a["seconds"]["total"]
                                            + b["seconds"]["total"]})
    return out


@cache
def _footing_h() -> dict:
    from .harmonic_check import harmonic_footing

    return harmonic_footing(G, NU, 1.0, 2.0)


@cache
def _ring3d(quick: bool) -> dict:
    from .reference3d import pile_group_stiffness

    return pile_group_stiffness(4, RR, D, LP, G=G, nu=NU, h_pile=D if quick else None)


@cache
def _ring_h() -> dict:
    from .harmonic_check import harmonic_pile_ring

    return harmonic_pile_ring(4, RR, D, LP, G, NU)


@cache
def _single3d(quick: bool) -> dict:
    from .reference3d import single_pile_stiffness

    return single_pile_stiffness(D, LP, G=G, nu=NU, h_pile=D if quick else None)


def _footing_vs_3d(key: str):
    def run(quick: bool):
        h, s = _footing_h(), _footing3d(quick)
        return h[key] / s[key], {"harmonic_dofs": h["n_dofs"], "solid3d_dofs": s["n_dofs"],
                                 "harmonic_s": h["seconds"], "solid3d_s": s["seconds"]["total"]}
    return run


def _footing_vs_gazetas(key: str):
    def run(quick: bool):
        from .reference3d import gazetas_layer

        h = _footing_h()
        return h[key] / gazetas_layer(G, NU, 1.0, 2.0)[key[:3]], {"n_dofs": h["n_dofs"]}
    return run


def _ring_vs_3d(key: str):
    def run(quick: bool):
        h, s = _ring_h(), _ring3d(quick)
        return h[key] / s[key], {"harmonic_dofs": h["n_dofs"], "solid3d_dofs": s["n_dofs"],
                                 "harmonic_s": h["seconds"], "solid3d_s": s["seconds"]["total"]}
    return run


def _single_axial(quick: bool):
    s = _single3d(quick)
    return s["K_V"] / s["randolph_wroth"], {"n_dofs": s["n_dofs"]}


def _single_lateral(quick: bool):
    from .reference3d import randolph_lateral_pile

    s = _single3d(quick)
    return s["K_H"] / randolph_lateral_pile(G, NU, D, 1000 * G)["K_H"], {"n_dofs": s["n_dofs"]}


def _ring_vs_interaction(quick: bool):
    import numpy as np

    from .reference3d import interaction_estimate

    s, p = _ring3d(quick), _single3d(quick)
    est = interaction_estimate(p["K_V"], np.array(s["centres"]), D / 2, LP, NU, p["K_theta"])
    return s["K_R"] / est["K_R"], {"n_dofs": s["n_dofs"]}


def _raked(key: str, rake: float = 1 / 6):
    """Harmonic raked ring over the stored 3D solution of the same raked group."""
    def run(quick: bool):
        import json
        from pathlib import Path

        from .harmonic_check import harmonic_pile_ring

        ref = json.loads((Path(__file__).with_name("data") / "raked3d_reference.json")
                         .read_text())
        case = next(c for c in ref["cases"] if abs(c["rake"] - rake) < 1e-9
                    and c["h_pile"] == 0.7)
        h = harmonic_pile_ring(4, RR, D, LP, G, NU, rake=rake)
        return h[key] / case[key], {"harmonic_dofs": h["n_dofs"], "rake": rake}
    return run


def _cap_size(model: str):
    """K under a 30 m cap over K under a 20 m cap, 16 piles on a 9 m ring, no contact."""
    def run(quick: bool):
        from femcore.foundation.build import build_model
        from femcore.foundation.design import PileRing, demo_design
        from femcore.foundation.elastic3d import (
            calibrated_slice_length,
            harmonic_stiffness,
            slice_stiffness,
        )

        base = demo_design(**({"element": "T6", "mesh": "coarse"} if quick else {}))
        k = {}
        for Dc in (20.0, 30.0):
            d = base.model_copy(update={
                "cap": base.cap.model_copy(update={"diameter": Dc, "contact": "none"}),
                "piles": base.piles.model_copy(update={"rings": [PileRing(radius=9.0,
                                                                          count=16)]})})
            e = harmonic_stiffness(d, vertical=False)
            if model == "harmonic":
                k[Dc] = e.value
                continue
            b = build_model(d)
            L = calibrated_slice_length(b, e.value)[0] if model == "calibrated" \
                else b.slice_length
            k[Dc] = slice_stiffness(b, [L])[0][0]
        return k[30.0] / k[20.0], {"K_20_GNm_rad": k[20.0] / 1e6, "K_30_GNm_rad": k[30.0] / 1e6}
    return run


def _circle(control: str, rough: bool = True, harmonics: int = 0, scale=None):
    """The rigid circle of the harmonic pushover (benchmarks/footing.py): vertical pressure,
    horizontal force or moment normalised as the reference (h = B/10 quick, B/20 full)."""
    def run(quick: bool):
        import numpy as np

        from .footing import HarmonicFooting, run_harmonic_footing

        B, su = 2.0, 10.0
        r = run_harmonic_footing(HarmonicFooting(
            su=su, B=B, harmonics=harmonics, control=control, rough=rough,
            h_near=0.1 if quick else 0.05, target=0.05 if control == "settlement" else 0.02))
        area = np.pi * B**2 / 4
        norm = {"settlement": su, "horizontal": su, "rotation": area * B * su}[control]
        po = r.pushover
        return r.collapse / norm, {"n_dofs": r.n_dofs, "increments": len(po.records),
                                   "iterations": int(po.iterations.sum()),
                                   "plateau_change": r.plateau_change}
    return run


def _circle_no_tension(quick: bool):
    """M / (V D) of a circle on a no-tension contact under V = V_ult / 2 (6.05 s_u A / 2),
    harmonics 0..4 (h = B/20); the reference is the effective-area rule's e / D."""
    import numpy as np

    from .footing import HarmonicFooting, run_harmonic_footing

    B, su = 2.0, 10.0
    p = 6.05 * su / 2
    r = run_harmonic_footing(HarmonicFooting(su=su, B=B, harmonics=4, control="rotation",
                                             contact=True, pressure=p, target=0.05,
                                             h_near=0.05))
    V = p * np.pi * B**2 / 4
    return r.collapse / (V * B), {"n_dofs": r.n_dofs, "increments": len(r.pushover.records),
                                  "plateau_change": r.plateau_change}


def _demo_harmonics(quick: bool):
    """The demo's harmonic ultimate with N = 4 over N = 8 (T6, coarse quick, standard mesh
    full; the T15 pair is in docs/harmonic.md: N = 8 alone takes over 10 minutes)."""
    from femcore.foundation.design import demo_design
    from femcore.foundation.run import run_harmonic

    cfg = {"element": "T6", "mesh": "coarse" if quick else "standard"}
    ult = {}
    for N in (4, 8):
        d = demo_design(geometry="harmonic", harmonics=N, **cfg).model_copy(
            update={"design_strength": None})
        r = run_harmonic(d, dynamic=False)
        ult[N] = r.keypoints["ultimate"].value
    return ult[4] / ult[8], {"ultimate_N4_MNm": ult[4] / 1e3, "ultimate_N8_MNm": ult[8] / 1e3}


SRC_3D = "3D FE in the run (scikit-fem P2 tetrahedra, same geometry)"
SRC_3D_EXT = SRC_3D + ", extrapolated h -> 0"
CASES: dict[str, Case] = {c.name: c for c in [
    Case("harmonic_footing_K_V_smooth_vs_3d", 1.0, (-0.02, 0.02), SRC_3D_EXT,
         _footing_vs_3d("K_V_smooth")),
    Case("harmonic_footing_K_R_smooth_vs_3d", 1.0, (-0.02, 0.02), SRC_3D_EXT,
         _footing_vs_3d("K_R_smooth")),
    Case("harmonic_footing_K_H_bonded_vs_3d", 1.0, (-0.02, 0.02), SRC_3D_EXT,
         _footing_vs_3d("K_H_bonded")),
    Case("harmonic_footing_K_R_vs_gazetas", 1.0, (-0.04, 0.04),
         "Gazetas 1991 (rigid circle on a layer, H = 2R)", _footing_vs_gazetas("K_R_smooth")),
    Case("harmonic_ring4_K_V_vs_3d", 1.0, (-0.05, 0.05), SRC_3D, _ring_vs_3d("K_V")),
    Case("harmonic_ring4_K_H_vs_3d", 1.0, (-0.05, 0.05), SRC_3D, _ring_vs_3d("K_H")),
    Case("harmonic_ring4_K_R_vs_3d", 1.0, (-0.05, 0.05), SRC_3D, _ring_vs_3d("K_R")),
    Case("harmonic_raked_ring4_K_R_vs_3d", 1.0, (-0.05, 0.05),
         "stored 3D FE of the raked group (benchmarks/raked3d.py)", _raked("K_R")),
    Case("harmonic_raked_ring4_K_H_vs_3d", 1.0, (-0.05, 0.05),
         "stored 3D FE of the raked group (benchmarks/raked3d.py)", _raked("K_H")),
    Case("single_pile_3d_K_V_vs_randolph_wroth", 1.0, (-0.05, 0.05),
         "Randolph & Wroth 1978 (axial head stiffness)", _single_axial),
    Case("single_pile_3d_K_H_vs_randolph_1981", 1.0, (-0.15, 0.15),
         "Randolph 1981 (lateral head stiffness, fixed head)", _single_lateral),
    Case("ring4_3d_K_R_vs_interaction_factors", 1.0, (-0.15, 0.0),
         "Randolph & Wroth 1979 interaction factors (superposition over-predicts)",
         _ring_vs_interaction),
    Case("cap_size_artefact_harmonic", 1.0, (-0.03, 0.03),
         "3D: cap size without contact does not matter", _cap_size("harmonic")),
    Case("cap_size_artefact_calibrated_slice", 1.0, (-0.05, 0.05),
         "3D: cap size without contact does not matter", _cap_size("calibrated")),
    Case("harmonic_pushover_circle_rough_vertical", 6.05, (0.0, 0.04),
         "Eason & Shield 1960, rough circle on Tresca (from memory); n = 0",
         _circle("settlement")),
    Case("harmonic_pushover_circle_rough_vertical_N2", 6.05, (0.0, 0.04),
         "Eason & Shield 1960 (from memory); harmonics 0-2", _circle("settlement",
                                                                     harmonics=2)),
    Case("harmonic_pushover_circle_smooth_vertical", 5.69, (0.0, 0.04),
         "Shield 1955, smooth circle on Tresca (from memory)",
         _circle("settlement", rough=False)),
    Case("harmonic_pushover_circle_moment_bonded", 0.67, (-0.02, 0.08),
         "Gourvenec & Randolph 2003, M/(A D s_u) of a bonded circle (from memory)",
         _circle("rotation", harmonics=2)),
    Case("harmonic_pushover_circle_horizontal_rough", 1.0, (0.0, 0.15),
         "sliding of a rough circle H = A s_u (common practice)",
         _circle("horizontal", harmonics=1)),
    Case("harmonic_pushover_circle_moment_no_tension", 0.2020, (0.0, 0.10),
         "Meyerhof 1953 effective area at V = V_ult/2: M/(V D) = e/D (from memory, derived)",
         _circle_no_tension),
    Case("harmonic_pushover_demo_N4_vs_N8", 1.0, (-0.03, 0.03),
         "the demo's harmonic ultimate with N = 8 (issue target: within 3 %)",
         _demo_harmonics),
]}
