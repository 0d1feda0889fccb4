"""Example: a rough rigid strip footing on undrained clay (Tresca), pushed to collapse.

Built with the public engine API only: a gmsh mesh of the half domain, a Tresca soil block,
supports, the footing nodes tied to a reference point, and a settlement-controlled
:class:`~femcore.stepping.Stepper`. The collapse pressure approaches (2 + pi) s_u
(Prandtl 1920). Run::

    python examples/strip_footing.py [--element T6|T15]

It prints the load-settlement curve and the computed bearing factor N_c = q_u / s_u.
"""

from __future__ import annotations

import argparse

import numpy as np

from femcore import Model
from femcore.stepping import Stepper, StepSettings
from materials import Tresca
from meshing import layered_domain, regions


def strip_footing(B: float = 2.0, su: float = 20.0, element: str = "T15"):
    """Settlements (m) and mean footing pressures (kPa) of a rough strip of width B (m)."""
    # half domain x >= 0 (symmetry), 3B wide and 2B deep, refined at the footing edge (the
    # quadratic T6 needs cells half the size of the quartic T15 for the same accuracy)
    h_near = (0.05 if element == "T15" else 0.025) * B
    mesh = layered_domain(3 * B, 2 * B, x_min=0.0, footing=(0.0, B / 2), h=0.5 * B,
                          h_near=h_near, refine_radius=B, element=element)
    model = Model(mesh, "plane_strain")
    model.add_block("clay", regions.SOIL, Tresca(E=300 * su, nu=0.49, su=su))
    model.add_reference_point("footing", (0.0, 0.0))
    cons = model.constraints()
    cons.support_box(mesh)  # rollers on the sides (x = 0 is the symmetry plane), fixed base
    nodes = mesh.nodes_of(regions.FOOTING)
    nodes = nodes[mesh.points[nodes, 0] > 1e-9]  # the node on the symmetry plane keeps u_x = 0
    cons.tie_rigid(nodes, "footing", (0, 1))  # rough: both components follow the footing
    U, W, TH = (model.dofmap.ref_dof("footing", k) for k in range(3))
    cons.fix([U, W, TH], 0.0)  # the footing moves vertically only, by the prescribed W
    stepper = Stepper(model, cons.build(), np.zeros(model.n_dofs), [W], [-0.05 * B],
                      settings=StepSettings())
    result = stepper.run()
    settlement = -result.displacement[:, 0]
    pressure = -result.force[:, 0] / (B / 2)  # reaction of the half footing over B/2
    return settlement, pressure


def main(argv: list[str] | None = None) -> float:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--element", choices=["T6", "T15"], default="T15")
    args = parser.parse_args(argv)
    su = 20.0
    settlement, pressure = strip_footing(su=su, element=args.element)
    print(f"{'settlement (mm)':>16s} {'pressure (kPa)':>15s}")
    for d, q in zip(settlement[::3], pressure[::3], strict=False):
        print(f"{d * 1e3:16.2f} {q:15.2f}")
    n_c = pressure[-1] / su
    print(f"N_c = q_u / s_u = {n_c:.3f}  (Prandtl: {2 + np.pi:.3f})")
    return n_c


if __name__ == "__main__":
    main()
