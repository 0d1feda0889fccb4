"""A finite element model: mesh, analysis type, DOFs, material blocks and the global pattern.

The model evaluates internal forces and the tangent for a full displacement vector and a
list of committed material states. It never commits state itself: it returns trial states,
and the driver (linear solve, Newton, pushover) decides.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
from numpy.typing import NDArray

from materials.base import MaterialModel, State

from .assembly import (
    SparsePattern,
    assemble_vector,
    element_internal_force,
    element_stiffness,
    element_strain,
)
from .dofs import ConstraintMap, Constraints, DofMap
from .kinematics import CellGeometry, Kinematics, cell_geometry
from .linsolve import solve
from .loads import body_force
from .mesh import Mesh

__all__ = ["SolidBlock", "Model", "LinearSolution"]


@dataclass(eq=False)
class SolidBlock:
    """Cells sharing one material.

    Attributes
    ----------
    name : str
    cells : (c,) cell indices into the mesh
    material : MaterialModel
    geom : CellGeometry of those cells
    element_dofs : (c, 2 * n_en)
    unit_weight : kN/m^3 used by :meth:`Model.gravity`
    """

    name: str
    cells: NDArray[np.int64]
    material: MaterialModel
    geom: CellGeometry
    element_dofs: NDArray[np.int64]
    unit_weight: float = 0.0
    _K_elastic: NDArray[np.float64] | None = field(default=None, init=False, repr=False)

    def initial_state(self) -> State:
        return self.material.initial_state(self.geom.x)

    def evaluate(self, u_e: NDArray[np.float64], state: State):
        """Element forces ``(c, i)``, a function giving the tangents ``(c, i, i)``, the trial
        state. (All blocks share this interface; tangents are built only when asked for.)

        Cells without a yielded point have their elastic stiffness, which never changes; it
        is computed once and only the cells with yielded points are integrated again.
        """
        strain = element_strain(self.geom, u_e)  # (c, q, 4)
        stress, D, trial = self.material.update(strain, state)
        f_e = element_internal_force(self.geom, stress)
        return f_e, lambda: self._tangent(D, state, trial), trial

    def _tangent(self, D, state: State, trial: State) -> NDArray[np.float64]:
        elastic = getattr(self.material, "elastic_tangent", None)
        if elastic is None:
            return element_stiffness(self.geom, D)
        plastic = np.flatnonzero(trial.yielded.any(axis=1))
        if plastic.size > 0.5 * self.geom.n_cells:
            return element_stiffness(self.geom, D)
        if self._K_elastic is None:
            self._K_elastic = element_stiffness(self.geom, elastic(state))
        K = self._K_elastic.copy()
        if plastic.size:
            K[plastic] = element_stiffness(self.geom, D, plastic)
        return K


@dataclass
class LinearSolution:
    """Result of a linear solve: full displacements, stresses per block, reactions."""

    u: NDArray[np.float64]  # (n_dofs,)
    stress: list[NDArray[np.float64] | None]  # per block (c, q, 4); None for beams/springs
    reactions: NDArray[np.float64]  # (n_dofs,) internal minus external force
    states: list[State] = field(default_factory=list)


class Model:
    """Mesh + analysis + DOFs + blocks; builds the global CSR pattern once."""

    def __init__(self, mesh: Mesh, analysis: Kinematics = Kinematics.PLANE_STRAIN) -> None:
        self.mesh = mesh
        self.analysis = Kinematics(analysis)
        self.dofmap = DofMap(mesh.n_nodes)
        self.blocks: list = []  # SolidBlock, BeamBlock, SpringBlock: evaluate(u_e, state)
        self._pattern: SparsePattern | None = None

    # ---------------------------------------------------------------- building
    def add_block(
        self, name: str, cells: NDArray[np.int64] | str | None, material: MaterialModel,
        unit_weight: float = 0.0,
    ) -> SolidBlock:
        """Add the cells of a named cell set (or index array, or all) with a material."""
        if cells is None:
            cells = np.arange(self.mesh.n_cells)
        elif isinstance(cells, str):
            cells = self.mesh.cell_sets[cells]
        cells = np.asarray(cells, dtype=np.int64)
        geom = cell_geometry(self.mesh, self.analysis, cells=cells)
        block = SolidBlock(name, cells, material, geom,
                           self.dofmap.cell_dofs(self.mesh.cells[cells]), unit_weight)
        self.blocks.append(block)
        self._pattern = None
        return block

    def add_element_block(self, block) -> None:
        """Add a non-continuum block (beams, springs) with ``element_dofs`` and ``evaluate``."""
        self.blocks.append(block)
        self._pattern = None

    @property
    def solid_blocks(self) -> list[SolidBlock]:
        return [b for b in self.blocks if isinstance(b, SolidBlock)]

    def add_reference_point(self, name: str, xy: tuple[float, float]) -> int:
        self._pattern = None
        return self.dofmap.add_reference_point(name, xy)

    def constraints(self) -> Constraints:
        return Constraints(self.dofmap, self.mesh.points)

    @property
    def n_dofs(self) -> int:
        return self.dofmap.n_dofs

    @property
    def pattern(self) -> SparsePattern:
        if self._pattern is None:
            blocks = [b.element_dofs for b in self.blocks]
            # reference points get a diagonal entry so every DOF appears in the pattern
            extra = np.arange(2 * self.mesh.n_nodes, self.n_dofs)[:, None]
            self._pattern = SparsePattern(self.n_dofs, [*blocks, extra])
        return self._pattern

    # ---------------------------------------------------------------- evaluation
    def initial_states(self) -> list:
        return [b.initial_state() for b in self.blocks]

    def gravity(self) -> NDArray[np.float64]:
        """Global self-weight force of all blocks (unit weights downward)."""
        f = np.zeros(self.n_dofs)
        for b in self.solid_blocks:
            if b.unit_weight:
                f += body_force(self.dofmap, self.mesh.cells[b.cells], b.geom,
                                np.array([0.0, -b.unit_weight]))
        return f

    def evaluate(
        self, u: NDArray[np.float64], states: list[State], tangent: bool = True
    ) -> tuple[NDArray[np.float64], sp.csr_matrix | None, list[State]]:
        """Internal force, tangent (CSR, shared pattern) and trial states at displacement ``u``.

        ``tangent``: True builds the tangent, False skips it, ``"deferred"`` returns a function
        that builds it on demand (Newton needs no tangent once it has converged),
        ``"elements"`` a function returning the element matrices of every block.
        """
        f_int = np.zeros(self.n_dofs)
        makers = []
        trial = []
        for b, st in zip(self.blocks, states, strict=True):
            f_e, make_K, new_state = b.evaluate(u[b.element_dofs], st)
            f_int += assemble_vector(self.n_dofs, b.element_dofs, f_e)
            makers.append(make_K)
            trial.append(new_state)
        n_extra = self.n_dofs - 2 * self.mesh.n_nodes

        def element_tangents():
            return [*(m() for m in makers), np.zeros(n_extra)]

        def assemble_tangent():
            return self.pattern.assemble(element_tangents())

        if tangent == "deferred":
            return f_int, assemble_tangent, trial
        if tangent == "elements":  # for ConstraintMap.reduced_from_elements
            return f_int, element_tangents, trial
        return f_int, (assemble_tangent() if tangent else None), trial

    def solve_linear(
        self, cmap: ConstraintMap, f_ext: NDArray[np.float64], states: list[State] | None = None,
        backend: str = "auto",
    ) -> LinearSolution:
        """One linear step from ``states`` (default: stress-free) under ``f_ext``.

        Exact for linear materials; for others it is the first tangent predictor.
        """
        states = states if states is not None else self.initial_states()
        u0 = np.zeros(self.n_dofs)
        f0, K, _ = self.evaluate(u0, states)
        r = K @ cmap.g + f0 - f_ext  # residual at u = g
        du = solve(cmap.reduce_matrix(K), -cmap.reduce_vector(r), backend)
        u = cmap.expand(du)
        f_int, _, trial = self.evaluate(u, states, tangent=False)
        return LinearSolution(u, [getattr(s, "stress", None) for s in trial], f_int - f_ext,
                              trial)
