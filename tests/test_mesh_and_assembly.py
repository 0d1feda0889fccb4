"""Mesh conversion and validation, DOF constraints, CSR assembly, solver backends, VTU output.

References: exact identities (assembly by bincount equals a plain COO sum; T^T K T by the cached
map equals the sparse triple product; a rigidly tied body moves without strain), and the
gmsh/meshio file formats themselves (a mesh written by gmsh and read by meshio must equal the
one taken from the gmsh model in memory).
"""

import numpy as np
import pytest
import scipy.sparse as sp
from conftest import nodal

from femcore import ConstraintError, Mesh, MeshError, Model
from femcore.assembly import SparsePattern, element_stiffness
from femcore.elements import T6
from femcore.linsolve import SolverError, available_backends, solve
from femcore.workflows.fields import write_vtu
from materials import LinearElastic, MaterialParameterError, elastic_matrix
from meshing import layered_domain, read_msh, rectangle


def test_inverted_cell_is_named():
    mesh = rectangle(0, 1, 0, 1, 0.5, "T6")
    cells = mesh.cells.copy()
    cells[3] = cells[3][[0, 2, 1, 5, 4, 3]]  # clockwise
    with pytest.raises(MeshError, match="cell 3 is inverted"):
        Mesh(mesh.points, cells, T6)


def test_bad_shapes_and_indices():
    with pytest.raises(MeshError, match="shape"):
        Mesh(np.zeros((3, 3)), np.array([[0, 1, 2]]), T6)
    with pytest.raises(MeshError, match="outside"):
        m = rectangle(0, 1, 0, 1, 0.5, "T6")
        Mesh(m.points, m.cells + 10_000, T6)


def test_meshes_are_reproducible():
    a = layered_domain(30, 15, [2, 6], footing=(-3, 3), lines=[((5, 0), (5, -8))], h=3,
                       h_near=0.4, element="T15")
    b = layered_domain(30, 15, [2, 6], footing=(-3, 3), lines=[((5, 0), (5, -8))], h=3,
                       h_near=0.4, element="T15")
    assert np.array_equal(a.points, b.points) and np.array_equal(a.cells, b.cells)
    # named sets: layers partition the soil; the embedded line is covered by mesh edges
    assert sum(len(a.cell_sets[f"layer_{k}"]) for k in (1, 2, 3)) == a.n_cells
    line = a.edge_sets["line_1"]
    assert np.allclose(a.points[line][..., 0], 5.0, atol=1e-9)
    ends = a.points[line[:, :2]][..., 1]
    assert np.isclose(np.abs(ends[:, 0] - ends[:, 1]).sum(), 8.0, rtol=1e-12)
    # area of the mesh equals the domain area
    assert np.isclose(a.corner_areas().sum(), 30 * 15, rtol=1e-12)


def test_read_msh_equals_model_conversion(tmp_path):
    path = str(tmp_path / "box.msh")
    direct = rectangle(0.0, 2.0, 0.0, 1.0, 0.3, "T6", msh_file=path)
    from_file = read_msh(path)
    assert from_file.n_cells == direct.n_cells and from_file.n_nodes == direct.n_nodes
    assert np.isclose(from_file.corner_areas().sum(), 2.0, rtol=1e-12)
    # same geometry cell by cell (node numbering may differ): compare sorted centroids
    c1 = np.sort(direct.points[direct.cells].mean(axis=1), axis=0)
    c2 = np.sort(from_file.points[from_file.cells].mean(axis=1), axis=0)
    assert np.allclose(c1, c2, atol=1e-12)
    assert np.isclose(np.ptp(from_file.points[from_file.nodes_of("bottom"), 1]), 0.0)


def test_bincount_assembly_equals_coo_sum():
    mesh = rectangle(0, 3, 0, 2, 0.6, "T15")
    model = Model(mesh)
    block = model.add_block("all", None, LinearElastic(1e4, 0.3))
    Ke = element_stiffness(block.geom, elastic_matrix(1e4, 0.3))
    pattern = SparsePattern(model.n_dofs, [block.element_dofs])
    K = pattern.assemble([Ke])
    e = block.element_dofs
    rows = np.repeat(e, e.shape[1], axis=1).ravel()
    cols = np.tile(e, (1, e.shape[1])).ravel()
    K_ref = sp.coo_matrix((Ke.ravel(), (rows, cols)), shape=K.shape).tocsr()
    assert abs(K - K_ref).max() <= 1e-12 * abs(K_ref).max()
    # symmetric and singular by exactly the 3 rigid-body modes (eigenvalues of the free body)
    assert abs(K - K.T).max() <= 1e-12 * abs(K).max()
    ev = np.linalg.eigvalsh(K.toarray())
    assert np.sum(np.abs(ev) < 1e-9 * ev.max()) == 3


def _tied_model(element: str):
    """Soil box with a footing tied rigidly to a reference point off its centre."""
    mesh = layered_domain(10, 5, footing=(-1, 1), h=1.0, h_near=0.3, element=element)
    model = Model(mesh)
    model.add_block("soil", "soil", LinearElastic(1e4, 0.3))
    model.add_reference_point("ref", (0.2, 0.5))
    cons = model.constraints()
    cons.fix_nodes(mesh.nodes_of("base"), (0, 1))
    cons.tie_rigid(mesh.nodes_of("footing"), "ref")
    return mesh, model, cons


def test_reduced_matrix_and_rigid_tie():
    mesh, model, cons = _tied_model("T6")
    cmap = cons.build()
    K = model.evaluate(np.zeros(model.n_dofs), model.initial_states())[1]
    Kr = cmap.reduce_matrix(K)
    Kr_ref = (cmap.T.T @ K @ cmap.T).tocsr()
    assert abs(Kr - Kr_ref).max() <= 1e-12 * abs(Kr_ref).max()
    # a rigid motion of the reference point moves the tied nodes rigidly
    dm = model.dofmap
    u_free = np.zeros(cmap.n_free)
    ref_master = cmap.master_index[[dm.ref_dof("ref", k) for k in range(3)]]
    u_free[np.searchsorted(cmap.free, ref_master)] = [0.01, -0.02, 0.003]
    u = nodal(cmap.expand(u_free), mesh)
    x = mesh.points[mesh.nodes_of("footing")]
    expect = np.column_stack([0.01 + 0.003 * (x[:, 1] - 0.5), -0.02 - 0.003 * (x[:, 0] - 0.2)])
    assert np.allclose(u[mesh.nodes_of("footing")], expect, atol=1e-15)
    with pytest.raises(ConstraintError, match="tied twice"):
        cons.tie_rigid(mesh.nodes_of("footing"), "ref")


def test_singular_system_is_reported():
    mesh = rectangle(0, 1, 0, 1, 0.5, "T6")
    model = Model(mesh)
    model.add_block("all", None, LinearElastic(1e4, 0.3))
    cons = model.constraints()  # no supports: rigid-body modes
    with pytest.raises(SolverError, match="singular|non-finite"):
        model.solve_linear(cons.build(), np.ones(model.n_dofs))


@pytest.mark.skipif("pardiso" not in available_backends(), reason="pypardiso not installed")
def test_optional_backend_agrees():
    A = sp.random(200, 200, density=0.05, random_state=1) + 10 * sp.eye(200)
    b = np.arange(200.0)
    assert np.allclose(solve(A, b, "pardiso"), solve(A, b, "superlu"), rtol=1e-10)


def test_pardiso_that_does_not_load_falls_back_to_superlu(monkeypatch):
    """A PARDISO install whose MKL library does not load is reported, never raised: "auto"
    solves with SuperLU (the same solution as asking for SuperLU, to 1e-12) and asking for
    PARDISO by name is refused naming the cause."""
    from femcore import linsolve

    def broken():
        raise OSError("libmkl_rt.so: cannot open shared object file")

    linsolve.pardiso_problem.cache_clear()
    monkeypatch.setattr(linsolve, "_mkl_pardiso", broken)
    try:
        assert linsolve.available_backends() == ["superlu"]
        assert linsolve.preferred_backend() == "superlu"
        A = sp.random(50, 50, density=0.1, random_state=2) + 5 * sp.eye(50)
        b = np.arange(50.0)
        assert np.allclose(solve(A, b), solve(A, b, "superlu"), rtol=1e-12)
        problem = linsolve.check_backend_name("pardiso", "TILTFE_SOLVER")
        assert problem.startswith("TILTFE_SOLVER = 'pardiso' cannot be used")
    finally:
        monkeypatch.undo()
        linsolve.pardiso_problem.cache_clear()


def test_material_parameter_errors_name_the_value():
    with pytest.raises(MaterialParameterError, match=r"nu = 0\.5"):
        LinearElastic(1e4, 0.5)
    with pytest.raises(MaterialParameterError, match=r"E = -1"):
        LinearElastic(-1.0, 0.3)


def test_vtu_round_trip(tmp_path):
    import meshio

    mesh = rectangle(0, 2, 0, 1, 0.4, "T15")
    u = np.column_stack([mesh.points[:, 0] * 1e-3, -mesh.points[:, 1] * 2e-3])
    stress = np.tile([1.0, 2.0, 3.0, 4.0], (mesh.n_cells, 1))
    path = write_vtu(tmp_path / "f.vtu", mesh, u, cell_values={"stress": stress})
    back = meshio.read(path)
    assert np.allclose(back.point_data["displacement"][:, :2], u)
    assert back.cells[0].data.shape == (mesh.n_cells * 16, 3)  # T15 -> 16 linear triangles
    assert np.allclose(back.point_data["stress_nodal"], [1.0, 2.0, 3.0, 4.0])


def test_fused_reduction_equals_assemble_then_reduce():
    # T^T K T from element matrices in one scatter equals assembling K first (to round-off)
    _, model, cons = _tied_model("T15")
    cmap = cons.build()
    f, elements, _ = model.evaluate(np.zeros(model.n_dofs), model.initial_states(), "elements")
    a = cmap.reduced_from_elements(model.pattern, elements())
    b = cmap.reduce_matrix(model.pattern.assemble(elements()))
    assert abs(a - b).max() <= 1e-12 * abs(b).max()
