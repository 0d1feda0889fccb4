"""Performance: tangent assembly and factorization of a plane-strain elastic T6 problem.

Ours (batched matmul element matrices + cached CSR pattern refilled by bincount) against
scikit-fem's ``asm`` on the same mesh and the same integration degree (4), in one run, and
SuperLU with MMD(A^T + A) ordering against SciPy's default ``spsolve``. Both codes'
matrices must agree in trace and Frobenius norm (invariant under DOF numbering) to 1e-10.

Run: ``python -m benchmarks.perf_elastic_assembly [--quick] [--json FILE]``.
Full size ~50k DOFs; quick ~5k DOFs (used by the test suite to keep the script working).
"""

from __future__ import annotations

import time

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from femcore import Model
from femcore.assembly import element_stiffness
from femcore.linsolve import factorize
from materials import LinearElastic, elastic_matrix
from meshing import rectangle

from ._script import script_main

E, NU = 3.0e4, 0.3


def _best(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def run(quick: bool = False) -> dict:
    h = 3.0 if quick else 0.9
    mesh = rectangle(0.0, 100.0, -50.0, 0.0, h, "T6")
    model = Model(mesh)
    t0 = time.perf_counter()
    block = model.add_block("soil", None, LinearElastic(E, NU))
    t_geom = time.perf_counter() - t0
    t0 = time.perf_counter()
    pattern = model.pattern
    t_pattern = time.perf_counter() - t0
    D = elastic_matrix(E, NU)
    repeat = 3 if quick else 5

    def ours():
        return pattern.assemble([element_stiffness(block.geom, D), np.zeros(0)])

    t_ours = _best(ours, repeat)
    K = ours()

    out = {
        "case": "perf_elastic_assembly", "quick": quick, "n_dofs": int(model.n_dofs),
        "n_cells": int(mesh.n_cells), "n_qp": int(block.geom.n_qp),
        "t_geometry_s": t_geom, "t_pattern_once_s": t_pattern, "t_assembly_ours_s": t_ours,
    }
    try:
        from skfem import Basis, ElementTriP2, ElementVector, MeshTri, asm
        from skfem.models.elasticity import lame_parameters, linear_elasticity

        corners = np.unique(mesh.cells[:, :3])
        index = np.full(mesh.n_nodes, -1)
        index[corners] = np.arange(corners.size)
        m = MeshTri(mesh.points[corners].T.copy(), index[mesh.cells[:, :3]].T.copy())
        basis = Basis(m, ElementVector(ElementTriP2()), intorder=4)
        form = linear_elasticity(*lame_parameters(E, NU))
        t_sk = _best(lambda: asm(form, basis), repeat)
        K_sk = asm(form, basis)
        out.update({
            "t_assembly_skfem_s": t_sk, "n_qp_skfem": int(basis.X.shape[1]),
            "assembly_speedup": t_sk / t_ours,
            "trace_rel_diff": abs(K.diagonal().sum() - K_sk.diagonal().sum())
            / K_sk.diagonal().sum(),
            "frobenius_rel_diff": abs(sp.linalg.norm(K) - sp.linalg.norm(K_sk))
            / sp.linalg.norm(K_sk),
        })
    except ImportError:
        out["skfem"] = "not installed"

    # factorization: fix the base, rollers on the sides
    cons = model.constraints()
    cons.fix_nodes(mesh.nodes_of("bottom"), (0, 1))
    cons.fix_nodes(mesh.nodes_of("left"), (0,))
    cons.fix_nodes(mesh.nodes_of("right"), (0,))
    cmap = cons.build()
    Kr = cmap.reduce_matrix(K)
    b = np.ones(Kr.shape[0])
    t_lu = _best(lambda: factorize(Kr).solve(b), 2)
    t_default = _best(lambda: spla.spsolve(sp.csc_matrix(Kr), b), 2)
    out.update({"t_factor_solve_ours_s": t_lu, "t_spsolve_default_s": t_default,
                "solve_speedup": t_default / t_lu})
    return out


def main(argv: list[str] | None = None) -> int:
    return script_main(__doc__, run, argv)


if __name__ == "__main__":
    raise SystemExit(main())
