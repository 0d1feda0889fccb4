"""3D linear-elastic reference stiffnesses of a rigid cap on a ring of outward-raked piles.

A check for the harmonic (Fourier) model of raked pile rings. Each case is one call of
:func:`benchmarks.reference3d.pile_group_stiffness` with ``rake`` (scikit-fem, quadratic
tetrahedra, half domain y >= 0, rigid cap tied to the pile heads at z = 0, SuperLU): N = 4
piles on a ring of radius 3 m, diameter d = 1 m, length L = 10 m measured along the axis,
soil G = 1e4 kPa and nu = 0.3, E_p/G = 1000 (nu_pile 0.2), angle offset 0, the default soil
cylinder (radius Rr + 4 L, depth 4 L) and the default element sizes (0.7 d at the piles,
0.8 L far away). Rakes 0 (the vertical group, checked against the stored result of
:mod:`benchmarks.ring3d_table`), 1/6 and 1/3, horizontal per vertical, outward in each
pile's radial plane (meshing: :func:`meshing.solid3d.pile_group`); plus rake 1/6 with
h_pile = 0.5 d as a mesh check.

Sanity checks written with the results: symmetry of the 3x3 stiffness in (U, W, theta),
the vertical/horizontal decoupling (the layout is mirror-symmetric about x = 0), the
rake-0 match with the vertical reference (0.1 %), and the ratios of each stiffness to the
vertical group's.

Each case runs in a child process of its own, one after the other, with a time limit
(``--timeout``, default 360 s) and an address-space limit (``--mem-gb``, default 12 GiB);
a case that exceeds either is recorded as ``"skipped": reason``.

Run: ``python -m benchmarks.raked3d [--json FILE] [--timeout S] [--mem-gb GB]``.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
from pathlib import Path

import numpy as np

from benchmarks.isolated import add_arguments, child_main, run_in_child

__all__ = ["PARAMS", "CASES", "VERTICAL", "run_case", "checks", "main"]

PARAMS = {"N": 4, "ring_radius": 3.0, "d": 1.0, "L": 10.0, "G": 1.0e4, "nu": 0.3,
          "Ep_over_G": 1000.0, "nu_pile": 0.2, "offset": 0.0}
"""Fixed parameters: pile count, ring radius, diameter and length (m, length along the
axis), soil G (kPa) and nu, E_p/G, pile Poisson's ratio, angle offset (rad)."""

DEFAULT_H_PILE = 0.7  # m, the default of pile_group_stiffness for d = 1 m

CASES = [(0.0, DEFAULT_H_PILE), (1 / 6, DEFAULT_H_PILE), (1 / 3, DEFAULT_H_PILE),
         (1 / 6, 0.5)]
"""(rake, h_pile (m)) in the order they run; the last is the mesh check of rake 1/6."""

VERTICAL = {"K_V": 4.1607e5, "K_R": 5.8495e6}
"""Vertical group (N = 4, Rr = 3 m, h_pile 0.7 d), kN/m and kNm/rad, as stored (rounded)
in ``benchmarks/data/ring3d_reference.json``; the full-precision values of that file are
used when it is present."""

VERTICAL_TOL = 1e-3  # relative

KEYS = ("K_V", "K_H", "K_R", "K_HR")

HOW = ("benchmarks.reference3d.pile_group_stiffness(rake=...): scikit-fem 3D linear "
       "elasticity, quadratic tetrahedra (ElementTetP2) on a gmsh mesh of the half domain "
       "y >= 0 (u_y = 0 on y = 0, results doubled to the full body); soil half cylinder of "
       "radius Rr + 4 L and depth 4 L, base and lateral boundary fixed, ground free; solid "
       "elastic piles bonded to the soil; each pile a circular cylinder along its axis "
       "d_k = (s cos a_k, s sin a_k, -1)/sqrt(1 + s^2) (s the outward rake), length L along "
       "the axis, tip face perpendicular to the axis, head face its section by the ground "
       "plane z = 0; heads tied to a rigid cap that does not touch the soil; rigid-body "
       "motions (U, W, theta) about (0, 0, 0) prescribed on the heads, reactions from K u; "
       "SuperLU. theta positive when the +x side goes down.")


def run_case(rake: float, h_pile: float) -> dict:
    """One case: stiffnesses, 3x3 matrix, DOF count and times.

    Parameters
    ----------
    rake : float
        Outward rake, horizontal per vertical.
    h_pile : float
        Element size (m) at the piles.

    Returns
    -------
    dict
        ``rake``, ``h_pile``, ``K_V``, ``K_H`` (kN/m), ``K_R`` (kNm/rad), ``K_HR``
        (kN/rad), ``K`` (3x3 in U, W, theta), ``tip_depth`` (m), ``n_dofs``, ``seconds``
        (total) and ``seconds_parts`` (mesh, assembly, solve).
    """
    from benchmarks.reference3d import pile_group_stiffness

    p = PARAMS
    r = pile_group_stiffness(p["N"], p["ring_radius"], p["d"], p["L"], G=p["G"], nu=p["nu"],
                             Ep_over_G=p["Ep_over_G"], nu_pile=p["nu_pile"],
                             offset=p["offset"], h_pile=h_pile, solver="splu", rake=rake)
    row = {"rake": rake, "h_pile": h_pile}
    row.update({k: r[k] for k in KEYS})
    row.update({"K": r["K"], "tip_depth": p["L"] / float(np.hypot(1.0, rake)),
                "n_dofs": r["n_dofs"], "seconds": r["seconds"]["total"],
                "seconds_parts": {k: r["seconds"][k] for k in ("mesh", "assembly", "solve")}})
    return row


def _run_spec(spec: str) -> dict:
    rake, h = (float(v) for v in spec.split(","))
    return run_case(rake, h)


def _run_child(rake: float, h: float, timeout: float, mem_gb: float) -> dict:
    """Run one case in a fresh interpreter under the time and memory limits."""
    row = run_in_child("benchmarks.raked3d", f"{rake!r},{h!r}", timeout, mem_gb)
    return {"rake": rake, "h_pile": h, **row} if "skipped" in row else row


def _vertical_reference() -> tuple[dict, str]:
    """K_V and K_R of the stored vertical group (full precision if the file is there)."""
    path = Path(__file__).with_name("data") / "ring3d_reference.json"
    try:
        with open(path) as fh:
            for c in json.load(fh)["cases"]:
                if (c.get("N"), c.get("ring_radius"), c.get("h_pile")) == (4, 3.0, 0.7) \
                        and "skipped" not in c:
                    return {k: c[k] for k in KEYS}, "benchmarks/data/ring3d_reference.json"
    except (OSError, KeyError, json.JSONDecodeError):
        pass
    return dict(VERTICAL), "rounded constants VERTICAL"


def _find(rows: list[dict], rake: float, h: float) -> dict | None:
    for r in rows:
        if abs(r["rake"] - rake) < 1e-12 and abs(r["h_pile"] - h) < 1e-12 \
                and "skipped" not in r:
            return r
    return None


def _k_h_free(r: dict) -> float:
    """Horizontal stiffness with the cap free to rotate, K_H - K_HR^2 / K_R (kN/m)."""
    return r["K_H"] - r["K_HR"] ** 2 / r["K_R"]


def checks(rows: list[dict]) -> dict:
    """Sanity checks of the computed cases.

    Returns
    -------
    dict
        ``symmetry``: per case the largest |K_ij - K_ji| / sqrt(K_ii K_jj);
        ``decoupling``: per case |K_WU| / sqrt(K_V K_H) and |K_Wtheta| / sqrt(K_V K_R)
        (zero for a layout symmetric about x = 0, up to the mesh's asymmetry);
        ``vertical_match``: rake 0 against the stored vertical group (relative differences,
        pass if below 0.1 % for K_V and K_R); ``ratio_to_vertical``: K(rake) / K(0) on the
        default mesh, including the horizontal stiffness with the cap free to rotate,
        K_H_free = K_H - K_HR^2 / K_R; ``axial_projection``: the changes of K_H and K_HR
        from the vertical group predicted by the horizontal component of the piles' axial
        stiffness alone, beside the FE changes; ``mesh_check``: 100 (K(h_pile 0.7) -
        K(h_pile 0.5)) / K(h_pile 0.5) for rake 1/6.

    Notes
    -----
    ``axial_projection``: a head motion (U, 0, W - theta x_k) of pile k stretches it along
    d_k = (s cos a_k, s sin a_k, -1) / sqrt(1 + s^2) by e_k = (s cos a_k U - W + theta x_k)
    / sqrt(1 + s^2), so an axial spring k_a per pile adds k_a s^2 / (1 + s^2) sum cos^2 a_k
    to K_H and k_a Rr s / (1 + s^2) sum cos^2 a_k to K_HR; k_a = K_V(0) / N (the group's
    axial stiffness per pile, interaction included). Changes of the lateral pile response
    and of the interaction with the spreading of the piles are left out, so only the
    order of magnitude is checked.
    """
    out: dict = {"symmetry": {}, "decoupling": {}}
    for r in rows:
        if "skipped" in r:
            continue
        K = np.asarray(r["K"])
        dg = np.sqrt(np.outer(np.diag(K), np.diag(K)))
        tag = f"rake={r['rake']:.6g}, h_pile={r['h_pile']:g}"
        out["symmetry"][tag] = float(np.max(np.abs(K - K.T) / dg))
        out["decoupling"][tag] = {"WU": float(abs(K[1, 0]) / dg[1, 0]),
                                  "Wtheta": float(abs(K[1, 2]) / dg[1, 2])}
    vert = _find(rows, 0.0, DEFAULT_H_PILE)
    ref, src = _vertical_reference()
    if vert is not None:
        rel = {k: (vert[k] - ref[k]) / ref[k] for k in ref}
        out["vertical_match"] = {
            "reference": ref, "source": src, "relative_difference": rel,
            "tolerance": VERTICAL_TOL,
            "pass": bool(all(abs(rel[k]) < VERTICAL_TOL for k in ("K_V", "K_R")))}
        out["ratio_to_vertical"] = {}
        for r in rows:
            if "skipped" in r or r["h_pile"] != DEFAULT_H_PILE or r["rake"] == 0.0:
                continue
            out["ratio_to_vertical"][f"rake={r['rake']:.6g}"] = dict(
                {k: r[k] / vert[k] for k in KEYS},
                K_H_free=_k_h_free(r) / _k_h_free(vert))
        out["axial_projection"] = {}
        k_a = vert["K_V"] / PARAMS["N"]
        cos2 = float(np.sum(np.cos(PARAMS["offset"]
                                   + 2 * np.pi * np.arange(PARAMS["N"]) / PARAMS["N"]) ** 2))
        for r in rows:
            if "skipped" in r or r["h_pile"] != DEFAULT_H_PILE or r["rake"] == 0.0:
                continue
            sr = r["rake"]
            f = sr / (1.0 + sr**2) * cos2 * k_a
            out["axial_projection"][f"rake={sr:.6g}"] = {
                "k_a": k_a, "dK_H_estimate": f * sr, "dK_H_FE": r["K_H"] - vert["K_H"],
                "dK_HR_estimate": f * PARAMS["ring_radius"],
                "dK_HR_FE": r["K_HR"] - vert["K_HR"]}
        out["K_H_free"] = {f"rake={r['rake']:.6g}, h_pile={r['h_pile']:g}": _k_h_free(r)
                           for r in rows if "skipped" not in r}
    coarse, fine = _find(rows, 1 / 6, DEFAULT_H_PILE), _find(rows, 1 / 6, 0.5)
    if coarse is not None and fine is not None:
        out["mesh_check"] = {
            "case": "rake 1/6", "definition": "100 (K(h_pile 0.7) - K(h_pile 0.5)) / "
            "K(h_pile 0.5)", "percent": {k: 100.0 * (coarse[k] - fine[k]) / fine[k]
                                         for k in KEYS}}
    return out


def _print(rows: list[dict], chk: dict) -> None:
    head = (f"{'rake':>7s} {'h_pile':>6s} {'DOFs':>7s} {'K_V (kN/m)':>12s} {'K_H (kN/m)':>12s} "
            f"{'K_R (kNm/rad)':>14s} {'K_HR (kN/rad)':>14s} {'time (s)':>8s}")
    print(head)
    print("-" * len(head))
    for r in rows:
        lead = f"{r['rake']:7.4f} {r['h_pile']:6.2f}"
        if "skipped" in r:
            print(f"{lead} skipped: {r['skipped']}")
            continue
        print(f"{lead} {r['n_dofs']:7d} {r['K_V']:12.5e} {r['K_H']:12.5e} {r['K_R']:14.5e} "
              f"{r['K_HR']:14.5e} {r['seconds']:8.1f}")
    if "vertical_match" in chk:
        vm = chk["vertical_match"]
        print("rake 0 vs stored vertical group: "
              + ", ".join(f"{k} {100 * v:+.4f} %" for k, v in vm["relative_difference"].items())
              + (" (pass)" if vm["pass"] else " (FAIL)"))
    for tag, rat in chk.get("ratio_to_vertical", {}).items():
        print(f"{tag} / vertical: " + ", ".join(f"{k} {v:.4f}" for k, v in rat.items()))
    for tag, a in chk.get("axial_projection", {}).items():
        print(f"{tag} axial projection: dK_H {a['dK_H_estimate']:.4g} (FE {a['dK_H_FE']:.4g}), "
              f"dK_HR {a['dK_HR_estimate']:.4g} (FE {a['dK_HR_FE']:.4g})")
    print("max relative asymmetry of K: "
          + ", ".join(f"{t}: {v:.1e}" for t, v in chk["symmetry"].items()))
    if "mesh_check" in chk:
        p = chk["mesh_check"]["percent"]
        print("mesh check rake 1/6, h_pile 0.7 vs 0.5: "
              + ", ".join(f"{k} {p[k]:+.2f} %" for k in KEYS))


def main(argv: list[str] | None = None) -> int:
    """Run the cases one after the other, print the table and checks, optionally JSON."""
    ap = argparse.ArgumentParser(prog="python -m benchmarks.raked3d",
                                 description=__doc__.splitlines()[0])
    ap.add_argument("--json", help="write the results to this file")
    add_arguments(ap)
    args = ap.parse_args(argv)
    if args.child:
        return child_main(args.child, args.child_out, _run_spec)

    rows = []
    for rake, h in CASES:  # sequentially: one heavy case at a time
        print(f"running rake = {rake:.4f}, h_pile = {h:g} m ...", flush=True)
        rows.append(_run_child(rake, h, args.timeout, args.mem_gb))
    chk = checks(rows)
    _print(rows, chk)
    if args.json:
        import scipy
        import skfem

        from meshing import gmsh_version

        out = {"description": __doc__.splitlines()[0],
               "parameters": dict(PARAMS, domain_radius="ring_radius + 4 L", depth="4 L",
                                  h_far="0.8 L", h_pile_default=DEFAULT_H_PILE,
                                  rake="horizontal per vertical, outward; L along the axis"),
               "how_computed": HOW,
               "units": {"K_V": "kN/m", "K_H": "kN/m", "K_R": "kNm/rad", "K_HR": "kN/rad",
                         "tip_depth": "m", "seconds": "s (mesh + assembly + solve, in the "
                         "child)"},
               "limits": {"timeout_seconds": args.timeout, "mem_gb": args.mem_gb},
               "environment": {"python": platform.python_version(),
                               "scikit-fem": skfem.__version__, "scipy": scipy.__version__,
                               "gmsh": gmsh_version(), "cores": os.cpu_count()},
               "cases": rows, "checks": chk}
        d = os.path.dirname(args.json)
        if d:
            os.makedirs(d, exist_ok=True)
        with open(args.json, "w") as fh:
            json.dump(out, fh, indent=2)
            fh.write("\n")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
