"""Validation cases beyond the collapse loads: elastic continuum, material point, piles,
contact (docs/validation.md, groups A, B and E). Each case returns (computed value, info) and
carries its reference, published source and band; ``benchmarks.collapse.CASES`` holds the
collapse ones.
"""

from __future__ import annotations

import numpy as np

from .collapse import Case

__all__ = ["CASES"]

E, NU = 1.0e4, 0.3
G = E / (2 * (1 + NU))


def _strip_sigma_x(quick: bool):
    from femcore import Model
    from femcore.loads import edge_traction
    from femcore.probe import strain_at
    from materials import LinearElastic, elastic_matrix
    from meshing import layered_domain

    def exact(x, q=1.0, b=1.0):
        X, z = x[..., 0], np.maximum(-x[..., 1], 1e-300)
        t1, t2 = np.arctan((X + b) / z), np.arctan((X - b) / z)
        a, s = t1 - t2, t1 + t2
        return np.stack([-(q / np.pi) * (a - np.sin(a) * np.cos(s)),
                         -(q / np.pi) * (a + np.sin(a) * np.cos(s)),
                         (q / np.pi) * np.sin(a) * np.sin(s)], axis=-1)

    mesh = layered_domain(10.0, 10.0, x_min=0.0, footing=(0.0, 1.0), h=1.0,
                          h_near=0.1 if quick else 0.05, refine_radius=3.0, element="T15")
    model = Model(mesh)
    model.add_block("soil", "soil", LinearElastic(E, NU))
    cons = model.constraints()
    left = mesh.nodes_of("left")
    cons.fix_nodes(left, (0,))
    cons.fix_nodes([left[np.argmin(mesh.points[left, 1])]], (1,))
    f = edge_traction(mesh, model.dofmap, mesh.edge_sets["footing"], np.array([0.0, -1.0]))
    f += edge_traction(mesh, model.dofmap, mesh.edge_sets["right"],
                       lambda x: exact(x)[..., [0, 2]])
    f += edge_traction(mesh, model.dofmap, mesh.edge_sets["base"],
                       lambda x: -exact(x)[..., [2, 1]])
    sol = model.solve_linear(cons.build(), f)
    sig = strain_at(mesh, "plane_strain", sol.u, np.array([[0.0, -2.0]])) @ \
        elastic_matrix(E, NU).T
    return float(-sig[0, 0]), {"n_dofs": model.n_dofs, "element": "T15"}


def _rocking(quick: bool):
    from .elastic import rocking_stiffness

    k, _ = rocking_stiffness("T15", 0.1 if quick else 0.05, (1,))
    return k / (np.pi * G / (2 * (1 - NU))), {"element": "T15"}


def _lame(element: str, p: int):
    def run(quick: bool):
        from .elastic import energy_error

        sizes = {"T6": (0.2, 0.1, 0.05), "T15": (0.25, 0.125, 0.0625)}[element]
        errs, hs = zip(*(energy_error("plane_strain", element, h) for h in sizes),
                       strict=True)
        rate = float(np.polyfit(np.log(hs), np.log(errs), 1)[0])
        return rate, {"element": element, "convergence": {"h": list(hs), "error": list(errs)}}
    return run


def _hetenyi(kind: str):
    def run(quick: bool):
        from .piles import hetenyi_long

        fe, ref, _ = hetenyi_long(head="free" if kind == "free" else "fixed")
        key = "y0" if kind == "free" else "head_moment"
        return fe[key] / ref[key], {"element": "beam"}
    return run


def _broms(quick: bool):
    from .piles import broms_short_fixed_clay

    h, ref = broms_short_fixed_clay()
    return h / ref, {"element": "beam"}


def _return_map(quick: bool):
    from materials.mohr_coulomb import principal_return

    E2, nu2 = 20000.0, 0.3
    G2, K2 = E2 / (2 * (1 + nu2)), E2 / (3 * (1 - 2 * nu2))
    one = np.ones(1)
    s, _, _ = principal_return(np.array([[-100.0, -150.0, -400.0]]), G2 * one, K2 * one,
                               10 * one, 0.5, 0.5, np.cos(np.radians(30)))
    return float(s[0, 0]), {"element": "point"}


CASES: dict[str, Case] = {c.name: c for c in [
    Case("return_map_main_plane", -122.624, (-5e-6, 5e-6),
         "de Souza Neto, Peric & Owen 2008 (docs/validation.md, A2)", _return_map),
    Case("strip_sigma_x_at_2b", 0.0405, (-0.02, 0.02), "Poulos & Davis 1974", _strip_sigma_x),
    Case("rocking_smooth_strip", 1.0, (-0.02, 0.05), "Gazetas 1991 (K = pi G b^2 / 2(1-nu))",
         _rocking),
    Case("lame_rate_T6", 2.0, (-0.1, 0.5), "Strang & Fix 1973 (O(h^p)); Lame", _lame("T6", 2)),
    Case("lame_rate_T15", 4.0, (-0.05, 0.5), "Strang & Fix 1973 (O(h^p)); Lame",
         _lame("T15", 4)),
    Case("hetenyi_free_head", 1.0, (-0.005, 0.005), "Hetenyi 1946", _hetenyi("free")),
    Case("hetenyi_fixed_head_moment", 1.0, (-0.005, 0.005), "Hetenyi 1946",
         _hetenyi("fixed")),
    Case("broms_short_fixed_clay", 1.0, (-0.01, 0.01), "Broms 1964 (SM2)", _broms),
]}
