"""Collapse-load validation cases on standard (full) or coarse (quick) meshes.

Each case: reference value, published source, one-sided band (docs/validation.md), element, and
the increments / Newton iterations / seconds it took. References:

* prandtl_{rough,smooth}_{T6,T15}: q_u = (2 + pi) s_u (Prandtl 1920; Hill 1950, *The
  Mathematical Theory of Plasticity*); T15 0...+2 %, T6 0...+5 %.
* circle_{smooth,rough}: 5.69 s_u (Shield 1955, Proc. R. Soc. A 233), 6.05 s_u (Eason &
  Shield 1960, ZAMP 11), from memory; T15 axisymmetric, 0...+3 %.
* davis_booker_{2,10}: smooth F = 1.181, 1.396 in q_u = F[(2 + pi) s_u0 + rho B/4] (Davis &
  Booker 1973, Geotechnique 23(4)); -1...+4 %.
* moment_bonded: M/(B^2 s_u) = 0.690 (Murff 1994; Bransby & Randolph 1998, Geotechnique
  48(5)), from memory; -4...+4 %.
* cylinder_{T6,T15}: p_c = 2 s_u ln 2 = 1.386 s_u (Hill 1950); T15 0...+1 %, T6 0...+2 %.
* nc_{20,30}, nq_{20,30}: Prandtl (1921), Reissner (1924) N_c, N_q; 0...+5 %.
* ngamma_30_smooth: 7.653 (Martin 2005, 11th IACMAG); -3...+10 %.
* lateral_disc_rough: limiting lateral pressure on a rough disc in a plane slice,
  P_u/(s_u D) = 11.94 (Randolph & Houlsby 1984, Geotechnique 34(4); Martin & Randolph 2006),
  from memory; T15, 0...+3 %.

Run: ``python -m benchmarks.collapse [--quick] [--only NAME] [--json FILE]``.
"""

from __future__ import annotations

import argparse
import json
import time
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from materials import MohrCoulomb, Tresca

from .footing import Footing, run_footing

SU = 10.0


@dataclass(frozen=True)
class Case:
    name: str
    reference: float
    band: tuple[float, float]
    source: str
    run: Callable[[bool], tuple[float, dict]]


def _footing(f: Footing) -> tuple[float, dict]:
    r = run_footing(f)
    po = r.pushover
    return r.collapse, {"n_dofs": r.n_dofs, "increments": len(po.records),
                        "iterations": int(po.iterations.sum()), "status": po.status,
                        "plateau_change": r.plateau_change, "element": f.element}


def _prandtl(rough: bool, element: str):
    def run(quick: bool):
        h = {"T15": 0.05, "T6": 0.025}[element] * (1.0 if quick else 0.5)
        v, info = _footing(Footing(Tresca(3000.0, 0.49, SU), element=element, h_near=h,
                                   rough=rough))
        return v / SU, info
    return run


def _circle(rough: bool):
    def run(quick: bool):
        v, info = _footing(Footing(Tresca(3000.0, 0.49, SU), analysis="axisymmetric",
                                   rough=rough, h_near=0.05 if quick else 0.025))
        return v / SU, info
    return run


def _davis_booker(ratio: float):
    def run(quick: bool):
        B = 2.0
        rho = ratio * SU / B
        v, info = _footing(Footing(Tresca(3000.0, 0.49, SU, su_gradient=rho), B=B, rough=False,
                                   h_near=0.05 if quick else 0.025))
        return v / (np.pi + 2 + rho * B / (4 * SU)) / SU, info
    return run


def _moment(quick: bool):
    B = 2.0
    v, info = _footing(Footing(Tresca(3000.0, 0.49, SU), B=B, control="rotation", target=0.02,
                               h_near=0.05 if quick else 0.025))
    return v / (B**2 * SU), info


def _mc(kind: str, phi: float):
    def run(quick: bool):
        h = 0.1 if quick else 0.05
        common = dict(h_near=h, width_factor=5, depth_factor=3, refine_radius=1.5)
        if kind == "nc":
            f = Footing(MohrCoulomb(1e5, 0.3, 10.0, phi, phi, tension_cutoff=None), **common)
            v, info = _footing(f)
            return v / 10.0, info
        f = Footing(MohrCoulomb(1e5, 0.3, 0.0, phi, phi, tension_cutoff=None), surcharge=10.0,
                    K0=1.0, **common)
        v, info = _footing(f)
        return v / 10.0, info
    return run


def _ngamma(quick: bool):
    B, gamma = 2.0, 10.0
    f = Footing(MohrCoulomb(1e4, 0.3, 1e-3 * gamma * B, 30.0, 30.0, tension_cutoff=None), B=B,
                rough=False, h_near=0.05 if quick else 0.025, width_factor=4, gamma=gamma,
                K0=0.5, refine_radius=1.5)
    v, info = _footing(f)
    return v / (0.5 * gamma * B), info


def thick_cylinder(element: str, h: float, a: float = 1.0, b: float = 2.0,
                   delta: float = 0.05):
    """Tresca thick cylinder (plane strain quarter annulus), inner radial displacement
    prescribed (tangential zero by symmetry). Returns the pushover result and the inner
    pressure (kPa) along it."""
    from femcore import Model
    from femcore.stepping import Stepper, StepSettings
    from meshing import annulus_sector

    mesh = annulus_sector(a, b, h, element)
    model = Model(mesh)
    model.add_block("all", None, Tresca(E=1000 * SU, nu=0.49, su=SU))
    cons = model.constraints()
    cons.fix_nodes(mesh.nodes_of("x_axis"), (1,))
    cons.fix_nodes(mesh.nodes_of("y_axis"), (0,))
    inner = mesh.nodes_of("inner")
    ang = np.arctan2(mesh.points[inner, 1], mesh.points[inner, 0])
    ctrl, inc = [], []
    for node, t in zip(inner, ang, strict=True):  # boundary nodes, set-up only
        if not np.isclose(mesh.points[node, 0], 0.0):  # y_axis nodes keep u_x = 0
            ctrl.append(2 * node)
            inc.append(delta * np.cos(t))
        if not np.isclose(mesh.points[node, 1], 0.0):  # x_axis nodes keep u_y = 0
            ctrl.append(2 * node + 1)
            inc.append(delta * np.sin(t))
    cons.fix(ctrl, 0.0)
    res = Stepper(model, cons.build(), np.zeros(model.n_dofs), ctrl, inc,
                   settings=StepSettings(initial_step=0.05)).run()
    pressure = res.force @ (np.array(inc) / delta) / (a * np.pi / 2)
    return res, pressure


def thick_cylinder_pressure(element: str, h: float) -> tuple[float, dict]:
    """Collapse pressure / s_u of the thick cylinder, with run statistics."""
    res, p = thick_cylinder(element, h)
    return float(p[-1] / SU), {"n_dofs": res.u.size, "increments": len(res.records),
                               "iterations": int(res.iterations.sum()), "status": res.status,
                               "element": element}


def _cyl(element: str):
    def run(quick: bool):
        h = {"T15": 0.25, "T6": 0.1}[element] * (1.0 if quick else 0.5)
        return thick_cylinder_pressure(element, h)
    return run


def _nq(phi):
    return np.exp(np.pi * np.tan(np.radians(phi))) * np.tan(np.radians(45 + phi / 2)) ** 2


CASES: dict[str, Case] = {c.name: c for c in [
    Case("prandtl_rough_T15", 2 + np.pi, (0.0, 0.02), "Prandtl 1920; Hill 1950",
         _prandtl(True, "T15")),
    Case("prandtl_smooth_T15", 2 + np.pi, (0.0, 0.02), "Prandtl 1920; Hill 1950",
         _prandtl(False, "T15")),
    Case("prandtl_rough_T6", 2 + np.pi, (0.0, 0.05), "Prandtl 1920; Hill 1950",
         _prandtl(True, "T6")),
    Case("prandtl_smooth_T6", 2 + np.pi, (0.0, 0.05), "Prandtl 1920; Hill 1950",
         _prandtl(False, "T6")),
    Case("circle_smooth", 5.69, (0.0, 0.03), "Shield 1955", _circle(False)),
    Case("circle_rough", 6.05, (0.0, 0.03), "Eason & Shield 1960", _circle(True)),
    Case("davis_booker_2", 1.181, (-0.01, 0.04), "Davis & Booker 1973", _davis_booker(2.0)),
    Case("davis_booker_10", 1.396, (-0.01, 0.04), "Davis & Booker 1973", _davis_booker(10.0)),
    Case("moment_bonded", 0.690, (-0.04, 0.04), "Murff 1994; Bransby & Randolph 1998",
         _moment),
    Case("cylinder_T15", 2 * np.log(2), (0.0, 0.01), "Hill 1950", _cyl("T15")),
    Case("cylinder_T6", 2 * np.log(2), (0.0, 0.02), "Hill 1950", _cyl("T6")),
    Case("nc_20", (_nq(20) - 1) / np.tan(np.radians(20)), (0.0, 0.05), "Prandtl 1921",
         _mc("nc", 20.0)),
    Case("nc_30", (_nq(30) - 1) / np.tan(np.radians(30)), (0.0, 0.05), "Prandtl 1921",
         _mc("nc", 30.0)),
    Case("nq_20", _nq(20), (0.0, 0.05), "Prandtl 1921; Reissner 1924", _mc("nq", 20.0)),
    Case("nq_30", _nq(30), (0.0, 0.05), "Prandtl 1921; Reissner 1924", _mc("nq", 30.0)),
    Case("ngamma_30_smooth", 7.653, (-0.03, 0.10), "Martin 2005", _ngamma),
]}


def run(quick: bool = False, only: str | None = None) -> list[dict]:
    rows = []
    for name, case in CASES.items():
        if only and only not in name:
            continue
        t = time.perf_counter()
        value, info = case.run(quick)
        err = value / case.reference - 1
        rows.append({"case": name, "reference": case.reference, "source": case.source,
                     "computed": value, "error": err, "band": list(case.band),
                     "passed": bool(case.band[0] <= err <= case.band[1]),
                     "seconds": time.perf_counter() - t, **info})
    return rows


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--only")
    ap.add_argument("--json")
    args = ap.parse_args(argv)
    rows = run(args.quick, args.only)
    print(f"{'case':20s} {'ref':>8s} {'computed':>9s} {'error':>8s} {'band':>14s} {'elem':>4s} "
          f"{'DOFs':>6s} {'incr':>4s} {'iter':>5s} {'s':>6s}  ok")
    for r in rows:
        band = f"{100 * r['band'][0]:+.0f}..{100 * r['band'][1]:+.0f} %"
        print(f"{r['case']:20s} {r['reference']:8.4f} {r['computed']:9.4f} "
              f"{100 * r['error']:+7.2f}% {band:>14s} {r['element']:>4s} {r['n_dofs']:6d} "
              f"{r['increments']:4d} {r['iterations']:5d} {r['seconds']:6.1f}  "
              f"{'yes' if r['passed'] else 'NO'}")
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(rows, fh, indent=2)
    return 0 if all(r["passed"] for r in rows) else 1


if __name__ == "__main__":
    raise SystemExit(main())


def lateral_disc_pressure(element: str = "T15", h_near: float = 0.05,
                          half_width: float = 10.0) -> tuple[float, dict]:
    """P_u / (s_u D) of a rough rigid disc pushed through a plane slice of Tresca soil
    (symmetric half model, disc tied rigidly to a reference point)."""
    from femcore import Model
    from femcore.stepping import Stepper, StepSettings
    from meshing.builders import disc_in_square

    D = 1.0
    mesh = disc_in_square(D / 2, half_width * D, half_width * D / 5, h_near * D, element)
    model = Model(mesh)
    model.add_block("soil", None, Tresca(300 * SU, 0.49, SU))
    model.add_reference_point("disc", (0.0, 0.0))
    cons = model.constraints()
    cons.fix_nodes(mesh.nodes_of("symmetry"), (1,))
    cons.fix_nodes(mesh.nodes_of("outer"), (0, 1))
    hole = mesh.nodes_of("hole")
    above = mesh.points[hole, 1] > 1e-9 * D
    cons.tie_rigid(hole[above], "disc", (0, 1))
    cons.tie_rigid(hole[~above], "disc", (0,))  # on the symmetry line v = 0 already
    dm = model.dofmap
    U, W, TH = (dm.ref_dof("disc", k) for k in range(3))
    cons.fix([W, TH], 0.0)
    res = Stepper(model, cons.build(extra_fixed={U: 0.0}), np.zeros(model.n_dofs), [U],
                   [0.2 * D], settings=StepSettings(initial_step=0.02, max_step=0.1)).run()
    p = 2 * res.force[:, 0] / (SU * D)  # the full disc carries twice the half model
    return float(p[-1]), {"n_dofs": model.n_dofs, "increments": len(res.records),
                          "iterations": int(res.iterations.sum()), "status": res.status,
                          "element": element}


CASES["lateral_disc_rough"] = Case(
    "lateral_disc_rough", 11.94, (0.0, 0.03), "Randolph & Houlsby 1984; Martin & Randolph 2006",
    lambda quick: lateral_disc_pressure(h_near=0.05))
