"""The harmonic model on the geometries of the 3D references (:mod:`benchmarks.reference3d`).

* :func:`harmonic_footing`: rigid circular footing on an elastic layer over a rigid base
  (the geometry of ``reference3d.footing_stiffness``: lateral boundary at 6R fixed).
* :func:`harmonic_pile_ring`: a rigid cap (no soil contact) on a ring of N piles, heads flush
  with the ground, perfectly bonded to the soil (``reference3d.pile_group_stiffness``): the
  ring is a smeared ring beam tied to the soil by the near-field springs of
  :mod:`femcore.foundation.elastic3d` (no slip springs: the 3D piles are bonded).

Both return full-body stiffnesses K_V, K_H (kN/m), K_R (kNm/rad), K_HR (kN/rad) in the sign
convention of the 3D references, the DOFs and the wall time.

``python -m benchmarks.harmonic_check`` prints them beside the stored 3D table
(``benchmarks/data/ring3d_reference.json``).
"""

from __future__ import annotations

import argparse
import json
import time
from pathlib import Path

import numpy as np

from femcore.foundation.elastic3d import near_field_springs
from femcore.harmonic import HarmonicModel, prescribed_cases, rigid_stiffness
from femcore.harmonic_rings import RingSpringBlock, add_ring, ring_support, tie_head_rigid
from meshing import layered_domain

DATA = Path(__file__).with_name("data") / "ring3d_reference.json"


def harmonic_footing(G: float = 1.0e4, nu: float = 0.3, radius: float = 1.0,
                     depth: float = 2.0, domain_radius: float | None = None,
                     element: str = "T15", h_near: float | None = None) -> dict:
    """K of a rigid disc on a layer (smooth and bonded contact), harmonic n = 0 and 1."""
    t0 = time.perf_counter()
    R = radius
    Rd = 6.0 * R if domain_radius is None else domain_radius
    mesh = layered_domain(Rd, depth, x_min=0.0, footing=(0.0, R), h=R / 1.5,
                          h_near=R / 16 if h_near is None else h_near, refine_radius=2.0 * R,
                          element=element)
    supports = np.union1d(mesh.nodes_of("base"), mesh.nodes_of("right"))
    out = {}
    for contact in ("smooth", "bonded"):
        model = HarmonicModel(mesh, 1)
        model.add_block("soil", None, E=2 * G * (1 + nu), nu=nu)
        k = rigid_stiffness(model, mesh.nodes_of("footing"), supports, contact)
        out[f"K_V_{contact}"], out[f"K_R_{contact}"] = k.K_V, k.K_R
        if contact == "bonded":
            out["K_H_bonded"], out["K_HR_bonded"] = k.K_H, k.K_HR
        out["n_dofs"] = model.n_dofs
    out["seconds"] = time.perf_counter() - t0
    return out


def harmonic_pile_ring(n_piles: int = 4, ring_radius: float = 3.0, diameter: float = 1.0,
                       length: float = 10.0, G: float = 1.0e4, nu: float = 0.3,
                       Ep_over_G: float = 1000.0, near_field: bool = True,
                       element: str = "T15", h_near: float | None = None,
                       domain_radius: float | None = None, depth: float | None = None,
                       rake: float = 0.0) -> dict:
    """K of a rigid cap on a ring of N bonded circular piles (harmonic n = 0 and 1);
    ``rake`` outward, horizontal per vertical (the pile length is along its axis)."""
    t0 = time.perf_counter()
    d, Lp, Rr = diameter, length, ring_radius
    width = Rr + 4 * Lp if domain_radius is None else domain_radius
    depth = 4 * Lp if depth is None else depth
    h = d / 2 if h_near is None else h_near
    Lv = Lp / np.sqrt(1 + rake**2)
    mesh = layered_domain(width, depth, [], x_min=0.0, lines=[((Rr, 0.0), (Rr + rake * Lv, -Lv))],
                          h=0.8 * Lp, h_near=h, refine_radius=4 * h + 2 * d, element=element)
    model = HarmonicModel(mesh, 1)
    model.add_block("soil", None, E=2 * G * (1 + nu), nu=nu)
    nodes = np.unique(mesh.edge_sets["line_1"])
    nodes = nodes[np.argsort(-mesh.points[nodes, 1])]  # head first
    xy = mesh.points[nodes]
    Ep = Ep_over_G * G
    line, _ = add_ring(model, "ring", n_piles, xy, Ep * np.pi * d**2 / 4, Ep * np.pi * d**4 / 64)
    seg = np.hypot(*np.diff(xy, axis=0).T)
    trib = np.zeros(len(xy))
    trib[:-1] += seg / 2
    trib[1:] += seg / 2
    ka, kl = near_field_springs(np.full(len(xy), G), np.full(len(xy), nu),
                                2 * np.pi * xy[:, 0] / n_piles, d)
    stiff = np.full(len(xy), 1e4 * G)  # bonded where no correction applies: very stiff ties
    ka, kl = (stiff, stiff) if not near_field else (np.where(np.isfinite(ka), ka, stiff),
                                                   np.where(np.isfinite(kl), kl, stiff))
    soil = np.stack([3 * nodes, 3 * nodes + 1, 3 * nodes + 2], axis=1)
    model.add_element_block(RingSpringBlock("ties", line, line.trans, soil,
                                            np.stack([ka * trib, kl * trib, kl * trib], 1)))
    model.add_reference_point("cap", 0.0)
    far = np.union1d(mesh.nodes_of("base"), mesh.nodes_of("right"))
    dm = model.dofmap
    H, W, TH = (dm.ref_dof("cap", k) for k in range(3))

    def constraints(n):
        cons = model.constraints(n)
        cons.fix_nodes(far)
        ring_support(cons, line)
        tie_head_rigid(cons, line, "cap")
        return cons

    cons = constraints(0)
    cons.fix([W], 1.0)
    cmap = cons.build()
    K_V = cmap.generalized_at(model.solve(0, cmap).reactions, W)
    cons = constraints(1)
    cons.fix([H, TH], 0.0)
    cmap = cons.build()
    R1 = model.solve(1, cmap, prescribed=prescribed_cases(cmap, [{H: 1.0}, {TH: 1.0}])).reactions
    return {"K_V": float(K_V), "K_H": float(cmap.generalized_at(R1[0], H)),
            "K_R": float(cmap.generalized_at(R1[1], TH)),
            "K_HR": float(cmap.generalized_at(R1[1], H)), "n_dofs": int(model.n_dofs),
            "spacing_over_pi_d": 2 * np.pi * Rr / n_piles / (np.pi * d),
            "seconds": time.perf_counter() - t0}


def harmonic_single_pile(diameter: float = 1.0, length: float = 10.0, G: float = 1.0e4,
                         nu: float = 0.3, Ep_over_G: float = 1000.0, element: str = "T15",
                         h_near: float | None = None) -> dict:
    """K of one circular pile on the axis as a solid column r <= d/2 (the centre pile of
    the foundation model), head flush with the ground tied to a rigid cap; the geometry of
    ``reference3d.single_pile_stiffness``."""
    t0 = time.perf_counter()
    r0, Lp = diameter / 2, length
    h = r0 / 2 if h_near is None else h_near
    mesh = layered_domain(4 * Lp, 4 * Lp, [], x_min=0.0,
                          lines=[((r0, 0.0), (r0, -Lp)), ((0.0, -Lp), (r0, -Lp))],
                          h=0.8 * Lp, h_near=h, refine_radius=4 * h + diameter,
                          element=element)
    c = mesh.points[mesh.cells[:, :3]].mean(axis=1)
    column = (c[:, 0] < r0) & (c[:, 1] > -Lp)
    model = HarmonicModel(mesh, 1)
    model.add_block("soil", np.flatnonzero(~column), E=2 * G * (1 + nu), nu=nu)
    model.add_block("pile", np.flatnonzero(column), E=Ep_over_G * G, nu=0.2)
    pts = mesh.points
    head = np.flatnonzero((np.abs(pts[:, 1]) < 1e-9) & (pts[:, 0] <= r0 + 1e-9))
    far = np.union1d(mesh.nodes_of("base"), mesh.nodes_of("right"))
    k = rigid_stiffness(model, head, far, "bonded")
    return {"K_V": k.K_V, "K_H": k.K_H, "K_R": k.K_R, "K_HR": k.K_HR,
            "n_dofs": model.n_dofs, "seconds": time.perf_counter() - t0}


def ring_table(near_field: bool = True) -> list[dict]:
    """Harmonic / 3D ratios for every case of the stored 3D table."""
    ref = json.loads(DATA.read_text())
    p = ref["parameters"]
    rows = []
    for case in ref["cases"]:
        if case.get("skipped") or case.get("h_pile", 0.7) != 0.7:
            continue
        h = harmonic_pile_ring(case["N"], case["ring_radius"], p["d"], p["L"],
                               p["G"], p["nu"], p["Ep_over_G"], near_field=near_field)
        rows.append({"N": case["N"], "ring_radius": case["ring_radius"],
                     "s_over_pi_d": h["spacing_over_pi_d"],
                     **{k: h[k] / case[k] for k in ("K_V", "K_H", "K_R", "K_HR")},
                     "harmonic_s": h["seconds"], "solid3d_s": case["seconds"]})
    return rows


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(prog="python -m benchmarks.harmonic_check",
                                 description=__doc__.splitlines()[0])
    ap.parse_args(argv)
    print("harmonic / 3D FE (P2 tetrahedra) for a rigid cap on a ring of bonded piles")
    print(f"{'N':>3s} {'Rr':>4s} {'s/pi d':>7s} {'near field':>10s} {'K_V':>6s} {'K_H':>6s} "
          f"{'K_R':>6s} {'K_HR':>6s} {'harm s':>7s} {'3D s':>6s}")
    for nf in (True, False):
        for r in ring_table(nf):
            print(f"{r['N']:3d} {r['ring_radius']:4.1f} {r['s_over_pi_d']:7.2f} "
                  f"{'on' if nf else 'off':>10s} {r['K_V']:6.3f} {r['K_H']:6.3f} "
                  f"{r['K_R']:6.3f} {r['K_HR']:6.3f} {r['harmonic_s']:7.2f} "
                  f"{r['solid3d_s']:6.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
