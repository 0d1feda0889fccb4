"""Single piles and rigid caps on springs: beam, spring and cap checks (docs/validation.md, E1-E4).

Helpers build a vertical Euler-Bernoulli pile (head at y = 0, down to y = -L) on springs
anchored to fixed ground, driven through a reference point at the head (free or fixed head),
and a rigid cap on rows of axially loaded piles. Used by the tests and by ``main``:

* Hetenyi (1946), *Beams on Elastic Foundation*: long pile, free head y0 = 2 lambda H / k,
  theta0 = 2 lambda^2 H / k; fixed head y0 = lambda H / k, head moment H / (2 lambda);
  lambda = (k / 4 EI)^(1/4). Tolerance 0.5 %.
* Broms (1964), JSMFD 90(SM2): short fixed-head pile in clay H_u = 9 s_u D (L - 1.5 D).
  Tolerance 1 %.

Run: ``python -m benchmarks.piles [--json FILE]``.
"""

from __future__ import annotations

import argparse
import json

import numpy as np

from femcore import Mesh, Model
from femcore.beams import BeamBlock
from femcore.interfaces import SpringBlock
from femcore.stepping import Stepper, StepSettings

__all__ = ["pile_on_springs", "hetenyi_long", "broms_short_fixed_clay"]


def pile_on_springs(length: float, EI: float, k_lat, n_el: int = 200, EA: float = 1e9,
                    p_lim=None, k_ax: float = 0.0, head: str = "free"):
    """A vertical pile on lateral springs ``k_lat(depth)`` (kN/m per metre) with limits
    ``p_lim(depth)`` (kN/m, default none). Returns (model, constraints, ref DOF numbers)."""
    mesh = Mesh(np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]]), np.array([[0, 1, 2]]),
                Mesh.of_type("T3"))
    model = Model(mesh)
    model.add_reference_point("head", (0.0, 0.0))
    y = -np.linspace(0.0, length, n_el + 1)
    xy = np.column_stack([np.zeros_like(y), y])
    dofs = model.dofmap.add_points("pile", xy)
    edofs = np.concatenate([dofs[:-1], dofs[1:]], axis=1)
    model.add_element_block(BeamBlock("pile", xy, edofs, np.full(n_el, EA), np.full(n_el, EI)))
    seg = length / n_el
    trib = np.full(n_el + 1, seg)
    trib[[0, -1]] = seg / 2
    depth = -y
    kl = np.broadcast_to(k_lat(depth) if callable(k_lat) else k_lat, depth.shape) * trib
    big = 1e30
    lim = np.full(depth.shape, big) if p_lim is None else p_lim(depth) * trib
    k = np.column_stack([np.full_like(depth, k_ax) * trib, kl])
    # t = pile axis (down), normal = (1, 0) direction of lateral motion
    t = np.tile([0.0, -1.0], (len(y), 1))
    n = np.tile([1.0, 0.0], (len(y), 1))
    model.add_element_block(SpringBlock("springs", dofs[:, :2], None, t, n, k,
                                        -np.column_stack([np.full_like(lim, big), lim]),
                                        np.column_stack([np.full_like(lim, big), lim]), depth))
    cons = model.constraints()
    cons.fix_nodes(np.arange(3), (0, 1))
    cons.tie_points_rigid(dofs[:1], xy[:1], "head", rotation=True)
    dm = model.dofmap
    U, W, TH = (dm.ref_dof("head", c) for c in range(3))
    cons.fix([W], 0.0)
    if head == "fixed":
        cons.fix([TH], 0.0)
    return model, cons, (U, W, TH), dofs


def hetenyi_long(EI=1e5, k=1e4, length=30.0, H=100.0, M=0.0, head="free", n_el=300):
    """Head displacement, rotation and moment of a long pile; FE and closed form."""
    model, cons, (U, W, TH), dofs = pile_on_springs(length, EI, k, n_el=n_el, head=head)
    f = np.zeros(model.n_dofs)
    f[U] = H
    if head == "free":
        f[TH] = M
    sol = model.solve_linear(cons.build(), f)
    lam = (k / (4 * EI)) ** 0.25
    beam = model.blocks[0]
    _, moments = beam.section_forces(sol.u[beam.element_dofs])
    fe = {"y0": sol.u[U], "theta0": sol.u[TH], "head_moment": abs(moments[0, 0])}
    if head == "free":
        ref = {"y0": (2 * lam * H + 2 * lam**2 * M) / k,
               "theta0": (2 * lam**2 * H + 4 * lam**3 * M) / k}
    else:
        ref = {"y0": lam * H / k, "head_moment": H / (2 * lam)}
    return fe, ref, lam


def broms_short_fixed_clay(su=20.0, D=0.5, length=5.0, n_el=100):
    """Ultimate lateral load of a short fixed-head pile on rigid-plastic clay springs."""
    model, cons, (U, W, TH), dofs = pile_on_springs(
        length, EI=1e7, k_lat=1e7, n_el=n_el, EA=1e9, head="fixed",
        p_lim=lambda z: np.where(z >= 1.5 * D - 1e-9, 9 * su * D, 0.0))
    cmap = cons.build(extra_fixed={U: 0.0})
    res = Stepper(model, cmap, np.zeros(model.n_dofs), [U], [0.01],
                   settings=StepSettings(initial_step=0.05, max_step=0.1)).run()
    return float(res.force[-1, 0]), 9 * su * D * (length - 1.5 * D)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--json")
    args = ap.parse_args(argv)
    rows = []
    fe, ref, _ = hetenyi_long()
    rows += [{"case": f"hetenyi_free_{k}", "computed": fe[k], "reference": ref[k]} for k in ref]
    fe, ref, _ = hetenyi_long(head="fixed")
    rows += [{"case": f"hetenyi_fixed_{k}", "computed": fe[k], "reference": ref[k]}
             for k in ref]
    h, href = broms_short_fixed_clay()
    rows.append({"case": "broms_short_fixed_clay", "computed": h, "reference": href})
    for r in rows:
        r["error"] = r["computed"] / r["reference"] - 1
        print(f"{r['case']:28s} {r['reference']:12.6g} {r['computed']:12.6g} "
              f"{100 * r['error']:+.3f} %")
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(rows, fh, indent=2)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
