"""Table of 3D linear-elastic reference stiffnesses of a rigid cap on a ring of solid piles.

Each row is one call of :func:`benchmarks.reference3d.pile_group_stiffness` (scikit-fem,
quadratic tetrahedra, half domain y >= 0, rigid cap tied to the pile heads, SuperLU): pile
diameter d = 1 m, length 10 m, soil G = 1e4 kPa and nu = 0.3, E_p/G = 1000, angle offset 0,
the default soil cylinder (radius Rr + 4 L, depth 4 L) and the default far-field element
size. Rings of radius 3 m (N = 4, 6, 8) and 5 m (N = 4, 8, 12) with the default element
size 0.7 d at the piles, plus one finer mesh (0.5 d) for Rr = 3 m, N = 6 that measures the
mesh error of the default size.

Each case runs in a child process of its own, one after the other, with a time limit
(``--timeout``, default 360 s) and an address-space limit (``--mem-gb``, default 12 GiB);
a case that exceeds either is recorded as ``"skipped": reason`` and the table goes on.

Run: ``python -m benchmarks.ring3d_table [--json FILE] [--timeout S] [--mem-gb GB]``.
"""

from __future__ import annotations

import argparse
import json
import os
import platform

from benchmarks.isolated import add_arguments, child_main, run_in_child

__all__ = ["PARAMS", "CASES", "run_case", "main"]

PARAMS = {"d": 1.0, "L": 10.0, "G": 1.0e4, "nu": 0.3, "Ep_over_G": 1000.0}
"""Fixed parameters of every case: diameter d and length L (m), G (kPa), nu, E_p/G."""

CASES = [  # (N, ring radius Rr (m), element size at the piles h_pile (m))
    (4, 3.0, 0.7), (6, 3.0, 0.7), (8, 3.0, 0.7),
    (4, 5.0, 0.7), (8, 5.0, 0.7), (12, 5.0, 0.7),
    (6, 3.0, 0.5),
]
"""The cases in the order they run; the last is the mesh-convergence case."""

KEYS = ("K_V", "K_H", "K_R", "K_HR")

HOW = ("benchmarks.reference3d.pile_group_stiffness: scikit-fem 3D linear elasticity, "
       "quadratic tetrahedra (ElementTetP2) on a gmsh mesh of the half domain y >= 0 "
       "(u_y = 0 on y = 0, results doubled to the full body); soil half cylinder of radius "
       "Rr + 4 L and depth 4 L, base and lateral boundary fixed, ground free; solid elastic "
       "piles (nu_pile 0.2) bonded to the soil, heads at z = 0 tied to a rigid cap that does "
       "not touch the soil; rigid-body motions (U, W, theta) about (0, 0, 0) prescribed on "
       "the heads, reactions from K u; SuperLU (MMD(A^T+A) ordering). Element size h_pile at "
       "the piles, 0.8 L far away. theta positive when the +x side goes down.")


def run_case(n_piles: int, ring_radius: float, h_pile: float) -> dict:
    """One row of the table: the stiffnesses, DOF count and times of one case.

    Parameters
    ----------
    n_piles : int
        Number of piles N on the ring.
    ring_radius : float
        Ring radius Rr (m).
    h_pile : float
        Element size (m) at the piles.

    Returns
    -------
    dict
        ``N``, ``ring_radius``, ``h_pile``, ``K_V``, ``K_H`` (kN/m), ``K_R`` (kNm/rad),
        ``K_HR`` (kN/rad), ``K`` (3x3 in U, W, theta), ``n_dofs``, ``seconds`` (total) and
        ``seconds_parts`` (mesh, assembly, solve).
    """
    from benchmarks.reference3d import pile_group_stiffness

    r = pile_group_stiffness(n_piles, ring_radius, PARAMS["d"], PARAMS["L"], G=PARAMS["G"],
                             nu=PARAMS["nu"], Ep_over_G=PARAMS["Ep_over_G"], offset=0.0,
                             h_pile=h_pile, solver="splu")
    row = {"N": n_piles, "ring_radius": ring_radius, "h_pile": h_pile}
    row.update({k: r[k] for k in KEYS})
    row.update({"K": r["K"], "n_dofs": r["n_dofs"], "seconds": r["seconds"]["total"],
                "seconds_parts": {k: r["seconds"][k] for k in ("mesh", "assembly", "solve")}})
    return row


def _run_spec(spec: str) -> dict:
    n, rr, h = spec.split(",")
    return run_case(int(n), float(rr), float(h))


def _run_isolated(n: int, rr: float, h: float, timeout: float, mem_gb: float) -> dict:
    """Run one case in a fresh interpreter with time and memory limits."""
    row = run_in_child("benchmarks.ring3d_table", f"{n},{rr},{h}", timeout, mem_gb)
    return {"N": n, "ring_radius": rr, "h_pile": h, **row} if "skipped" in row else row


def _convergence(rows: list[dict]) -> dict | None:
    """Relative change (%) of each stiffness from h_pile 0.7 to 0.5 for Rr = 3 m, N = 6."""
    def find(h):
        for r in rows:
            if (r["N"], r["ring_radius"], r["h_pile"]) == (6, 3.0, h) and "skipped" not in r:
                return r
        return None
    coarse, fine = find(0.7), find(0.5)
    if coarse is None or fine is None:
        return None
    return {"case": "N = 6, ring radius 3 m",
            "definition": "100 (K(h_pile 0.7) - K(h_pile 0.5)) / K(h_pile 0.5)",
            "percent": {k: 100.0 * (coarse[k] - fine[k]) / fine[k] for k in KEYS}}


def _print_table(rows: list[dict], conv: dict | None) -> None:
    head = (f"{'N':>3s} {'Rr (m)':>6s} {'h_pile':>6s} {'DOFs':>7s} {'K_V (kN/m)':>12s} "
            f"{'K_H (kN/m)':>12s} {'K_R (kNm/rad)':>14s} {'K_HR (kN/rad)':>14s} {'time (s)':>8s}")
    print(head)
    print("-" * len(head))
    for r in rows:
        lead = f"{r['N']:3d} {r['ring_radius']:6.1f} {r['h_pile']:6.2f}"
        if "skipped" in r:
            print(f"{lead} skipped: {r['skipped']}")
            continue
        print(f"{lead} {r['n_dofs']:7d} {r['K_V']:12.5e} {r['K_H']:12.5e} {r['K_R']:14.5e} "
              f"{r['K_HR']:14.5e} {r['seconds']:8.1f}")
    if conv is not None:
        p = conv["percent"]
        print(f"mesh error of h_pile 0.7 vs 0.5 ({conv['case']}): "
              + ", ".join(f"{k} {p[k]:+.2f} %" for k in KEYS))


def main(argv: list[str] | None = None) -> int:
    """Run every case one after the other, print the table, optionally write JSON."""
    ap = argparse.ArgumentParser(prog="python -m benchmarks.ring3d_table",
                                 description=__doc__.splitlines()[0])
    ap.add_argument("--json", help="write the table to this file")
    add_arguments(ap)
    args = ap.parse_args(argv)
    if args.child:
        return child_main(args.child, args.child_out, _run_spec)

    rows = []
    for n, rr, h in CASES:  # sequentially: one case at a time
        print(f"running N = {n}, Rr = {rr:g} m, h_pile = {h:g} m ...", flush=True)
        rows.append(_run_isolated(n, rr, h, args.timeout, args.mem_gb))
    conv = _convergence(rows)
    _print_table(rows, conv)
    if args.json:
        import scipy
        import skfem

        from meshing import gmsh_version

        out = {"description": __doc__.splitlines()[0],
               "parameters": dict(PARAMS, nu_pile=0.2, offset=0.0,
                                  domain_radius="ring_radius + 4 L", depth="4 L",
                                  h_far="0.8 L"),
               "how_computed": HOW,
               "units": {"K_V": "kN/m", "K_H": "kN/m", "K_R": "kNm/rad", "K_HR": "kN/rad",
                         "seconds": "s (mesh + assembly + solve, inside the child)"},
               "limits": {"timeout_seconds": args.timeout, "mem_gb": args.mem_gb},
               "environment": {"python": platform.python_version(),
                               "scikit-fem": skfem.__version__, "scipy": scipy.__version__,
                               "gmsh": gmsh_version(), "cores": os.cpu_count()},
               "cases": rows, "mesh_convergence": conv}
        d = os.path.dirname(args.json)
        if d:
            os.makedirs(d, exist_ok=True)
        with open(args.json, "w") as fh:
            json.dump(out, fh, indent=2)
            fh.write("\n")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
