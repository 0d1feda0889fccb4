"""Performance: where the time of one Newton iteration goes (elastoplastic state).

A rough rigid strip on Tresca soil (T15) is pushed to about 60 % of its collapse load; at that
state one Newton iteration is timed phase by phase: strain, return map, internal force,
element tangents (only cells with yielded points; the elastic ones are cached), their scatter
straight into the reduced (constrained) matrix, sparse factorization + solve. Reported at
about 10k and 50k DOFs (quick: ~8k only). The issue's targets: factorization + solve >= 85 %
of the iteration; everything else < ~10 ms at 10k DOFs and < ~40 ms at 50k.

Run: ``python -m benchmarks.perf_newton [--quick] [--json FILE]``.
"""

from __future__ import annotations

import time

import numpy as np

from femcore import Model
from femcore.assembly import (
    assemble_vector,
    element_internal_force,
    element_strain,
)
from femcore.linsolve import solve
from femcore.stepping import Stepper, StepSettings
from materials import Tresca
from meshing import layered_domain

from ._script import script_main


def _problem(h_near: float, h_far: float):
    B, su = 2.0, 10.0
    mesh = layered_domain(3 * B, 2 * B, x_min=0.0, footing=(0.0, B / 2), h=h_far,
                          h_near=h_near, refine_radius=B, element="T15")
    model = Model(mesh)
    model.add_block("soil", "soil", Tresca(3000.0, 0.49, su))
    model.add_reference_point("f", (0.0, 0.0))
    cons = model.constraints()
    cons.support_box(mesh)
    nodes = mesh.nodes_of("footing")
    cons.tie_rigid(nodes[mesh.points[nodes, 0] > 0], "f", (0, 1))
    dm = model.dofmap
    cons.fix([dm.ref_dof("f", k) for k in range(3)], 0.0)
    return model, cons.build(), dm.ref_dof("f", 1)


def _time(fn, repeat=3):
    best, out = np.inf, None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def profile(h_near: float, h_far: float) -> dict:
    model, cmap, w = _problem(h_near, h_far)
    # settlement 1 % of B: about 70-80 % of the collapse load, a wide plastic zone
    cfg = StepSettings(initial_step=0.25, max_step=0.25)
    res = Stepper(model, cmap, np.zeros(model.n_dofs), [w], [-0.02], settings=cfg).run()
    states = res.states  # committed at the start of the timed increment
    u = Stepper(model, cmap, np.zeros(model.n_dofs), [w], [-0.002],
                 settings=StepSettings(initial_step=1.0, max_step=1.0)).run(
        u0=res.u, states0=states).u  # the converged end of that increment
    block, st = model.blocks[0], states[0]
    t = {}
    t["strain"], eps = _time(lambda: element_strain(block.geom, u[block.element_dofs]))
    t["return_map"], (sig, D, trial) = _time(lambda: block.material.update(eps, st))
    t["internal_force"], _ = _time(lambda: assemble_vector(
        model.n_dofs, block.element_dofs, element_internal_force(block.geom, sig)))
    block._tangent(D, st, trial)  # the elastic stiffness of the block is cached once
    t["element_tangent"], Ke = _time(lambda: block._tangent(D, st, trial))
    n_extra = model.n_dofs - 2 * model.mesh.n_nodes
    cmap.reduced_from_elements(model.pattern, [Ke, np.zeros(n_extra)])  # build the map once
    t["reduced_assembly"], Kr = _time(
        lambda: cmap.reduced_from_elements(model.pattern, [Ke, np.zeros(n_extra)]))
    rhs = np.ones(Kr.shape[0])
    t["factor_solve"], _ = _time(lambda: solve(Kr, rhs), repeat=2)
    total = sum(t.values())
    rest = total - t["factor_solve"]
    return {"n_dofs": model.n_dofs, "n_cells": model.mesh.n_cells,
            "n_points": int(block.geom.dV.size),
            "plastic_fraction": float(trial.yielded.mean()),
            **{f"t_{k}_ms": 1e3 * v for k, v in t.items()},
            "t_iteration_ms": 1e3 * total, "t_outside_solver_ms": 1e3 * rest,
            "solver_share": t["factor_solve"] / total,
            "return_map_points_per_s": block.geom.dV.size / t["return_map"]}


def run(quick: bool = False) -> dict:
    sizes = {"8k": (0.05, 0.5)} if quick else {"10k": (0.04, 0.4), "50k": (0.016, 0.2)}
    return {"case": "perf_newton", "quick": quick,
            **{label: profile(*hs) for label, hs in sizes.items()}}


def main(argv: list[str] | None = None) -> int:
    return script_main(__doc__, run, argv)


if __name__ == "__main__":
    raise SystemExit(main())
