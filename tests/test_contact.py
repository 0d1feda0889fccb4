"""Zero-thickness contact: the Coulomb / tension cut-off law (docs/validation.md, A5), shaft
capacity (E6) and the effective width of a no-tension base under moment (C6). Tags [M], [D] as
defined in docs/validation.md."""

import numpy as np
import pytest

from benchmarks.footing import Footing, run_footing
from femcore import Model
from femcore.interfaces import ContactBlock, contact_pairs
from femcore.stepping import Stepper, StepSettings
from materials import LinearElastic, Tresca
from materials.springs import ContactState, coulomb_update
from meshing import layered_domain


@pytest.mark.parametrize("d", [[1e-4, -2e-4], [5e-3, -1e-4], [-5e-3, -1e-4], [1e-3, 2e-4]],
                         ids=["stick", "slip+", "slip-", "open"])
def test_contact_law_states_and_tangent(d):
    """Coulomb friction with tension cut-off: stick (elastic), slip at tau = c - sigma tan(d)
    (zero dilation), open gap with zero tractions; tangent against central differences
    (the law is piecewise linear, so exact away from the region boundaries)."""
    ks, kn, c, tand, tc = 1e5, 2e5, 5.0, 0.5, 0.0
    st = ContactState.zeros(1)
    d = np.array([d])
    tr, C, new = coulomb_update(d, st, ks, kn, c, tand, tc)
    sig = min(kn * d[0, 1], tc)
    if d[0, 1] > 0:
        assert new.open[0] and np.allclose(tr, 0.0)
    else:
        limit = c - sig * tand
        expect = np.clip(ks * d[0, 0], -limit, limit)
        assert tr[0, 0] == pytest.approx(expect, rel=1e-12)
        assert tr[0, 1] == pytest.approx(sig, rel=1e-12)
    h = 1e-9
    for j in range(2):
        e = np.zeros((1, 2))
        e[0, j] = h
        fd = (coulomb_update(d + e, st, ks, kn, c, tand, tc)[0]
              - coulomb_update(d - e, st, ks, kn, c, tand, tc)[0]) / (2 * h)
        assert np.allclose(C[0, :, j], fd[0], rtol=1e-6, atol=1e-3)


def test_axisymmetric_shaft_capacity():
    """Pile shaft with interface strength alpha s_u (alpha = 0.5), base free: capacity
    2 pi r0 L alpha s_u (alpha method: API RP 2GEO; Tomlinson 1957) [M]; +-1 %."""
    r0, L, su, alpha = 0.5, 10.0, 20.0, 0.5
    mesh = layered_domain(3 * L, 2 * L, x_min=0.0, cap=[(0, 0), (r0, 0), (r0, -L), (0, -L)],
                          h=L / 4, h_near=r0, refine_radius=2 * r0, element="T6")
    edges = mesh.edge_sets["cap_soil"]
    shaft = edges[np.all(np.abs(mesh.points[edges[:, :2], 0] - r0) < 1e-9, axis=1)]
    mesh, new_index = mesh.split_nodes(np.unique(edges), mesh.cell_sets["cap"])
    a, b, t, n, w = contact_pairs(mesh, shaft, new_index, (-1.0, 0.0), "axisymmetric")
    assert w.sum() == pytest.approx(2 * np.pi * r0 * L, rel=1e-12)  # nodal weights: the area
    m = a.size
    model = Model(mesh, "axisymmetric")
    model.add_block("soil", "soil", Tresca(3000.0, 0.49, su))
    model.add_block("pile", "cap", LinearElastic(3e7, 0.2))
    model.add_element_block(ContactBlock(
        "shaft", np.stack([2 * a, 2 * a + 1], 1), np.stack([2 * b, 2 * b + 1], 1), t, n, w,
        np.full(m, 1e6), np.full(m, 1e6), np.full(m, alpha * su), np.zeros(m),
        np.full(m, 1e9)))
    model.add_reference_point("head", (0.0, 0.0))
    cons = model.constraints()
    cons.support_box(mesh)
    pile = np.unique(mesh.cells[mesh.cell_sets["cap"]])
    on_axis = pile[np.abs(mesh.points[pile, 0]) < 1e-9]
    cons.fix_nodes(on_axis[on_axis >= new_index.size], (0,))  # copies on the axis
    cons.tie_rigid(pile[np.abs(mesh.points[pile, 1]) < 1e-9], "head", (1,))
    dm = model.dofmap
    W = dm.ref_dof("head", 1)
    cons.fix([dm.ref_dof("head", 0), dm.ref_dof("head", 2)], 0.0)
    res = Stepper(model, cons.build(extra_fixed={W: 0.0}), np.zeros(model.n_dofs), [W],
                   [-0.02], settings=StepSettings(initial_step=0.05, max_step=0.1)).run()
    assert res.status == "ok"
    assert -res.force[-1, 0] == pytest.approx(2 * np.pi * r0 * L * alpha * su, rel=0.01)


def test_effective_width_no_tension_base():
    """Rigid strip with a no-tension contact (shear strength s_u while closed) on Tresca soil,
    V = V_ult / 2 held: M / (B^2 s_u) = v (1 - v / N_c) / 2 = 0.643, v = V / (B s_u)
    (Meyerhof 1953 effective width) [M, D]; FE 0...+8 % above."""
    su, B = 10.0, 2.0
    nc = 2 + np.pi
    V = 0.5 * nc * B * su
    r = run_footing(Footing(Tresca(3000.0, 0.49, su), B=B, control="rotation", target=0.1,
                            h_near=0.05, vertical=V, contact=True, contact_cohesion=su))
    v = V / (B * su)
    ref = v * (1 - v / nc) / 2
    assert ref == pytest.approx(0.643, abs=5e-4)
    assert r.plateau_change < 0.005
    err = r.collapse / (B**2 * su) / ref - 1
    assert 0.0 <= err <= 0.08, f"{100 * err:+.2f} %"
