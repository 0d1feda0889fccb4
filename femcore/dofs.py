"""Degrees of freedom, Dirichlet conditions and rigid-body (master-slave) ties.

Numbering: soil/cap nodes first, two DOFs each, interleaved node-major (``2*node + d`` with
d = 0 for u_x, 1 for u_y); then groups of 3-DOF points (beam nodes, reference points), three
DOFs each (u_x, u_y, theta).

Rotation sign (docs/conventions.md): a positive reference rotation ``theta`` tilts the body so
that its +x side goes down, i.e. theta is positive clockwise. A node at (x, y) tied to a
reference point at (x_r, y_r) moves as::

    u_x = U + theta * (y - y_r)
    u_y = W - theta * (x - x_r)

and the generalised force conjugate to theta is the clockwise moment.

All constraints become one map ``u_full = T @ u_free + g``; the reduced system is
``T^T K T``, which :class:`ConstraintMap` refills from the CSR data of ``K`` through a cached
index map (no sparse-sparse product per iteration).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
from numpy.typing import NDArray

__all__ = ["DofMap", "Constraints", "ConstraintMap", "ConstraintError"]


class ConstraintError(ValueError):
    """Constraints are inconsistent (a DOF tied twice, a slave fixed, ...)."""


@dataclass
class DofMap:
    """DOF numbering: ``n_nodes`` 2-DOF continuum nodes, then groups of 3-DOF points.

    A point group (beam nodes of a pile row, or a single reference point) has DOFs
    (u_x, u_y, theta) per point, theta clockwise positive.
    """

    n_nodes: int
    groups: dict[str, NDArray[np.float64]] = field(default_factory=dict)  # name -> (n, 2)

    def add_points(self, name: str, xy: NDArray[np.float64]) -> NDArray[np.int64]:
        """Add a group of 3-DOF points at ``xy (n, 2)``; returns their DOFs ``(n, 3)``."""
        if name in self.groups:
            raise ConstraintError(f"point group {name!r} exists already")
        self.groups[name] = np.atleast_2d(np.asarray(xy, dtype=np.float64)).copy()
        return self.point_dofs(name)

    def add_reference_point(self, name: str, xy: tuple[float, float]) -> int:
        """Add a single reference point (u_x, u_y, theta); returns its first DOF."""
        return int(self.add_points(name, np.array([xy]))[0, 0])

    @property
    def ref_points(self) -> dict[str, tuple[float, float]]:
        """Single-point groups by name (the reference points)."""
        return {k: (float(v[0, 0]), float(v[0, 1])) for k, v in self.groups.items()
                if len(v) == 1}

    def _first(self, name: str) -> int:
        if name not in self.groups:
            raise ConstraintError(f"no point group {name!r}; known: {list(self.groups)}")
        first = 2 * self.n_nodes
        for k, v in self.groups.items():
            if k == name:
                return first
            first += 3 * len(v)
        raise AssertionError("unreachable")

    @property
    def n_dofs(self) -> int:
        return 2 * self.n_nodes + 3 * sum(len(v) for v in self.groups.values())

    def node_dofs(self, nodes: NDArray[np.int64], component: int) -> NDArray[np.int64]:
        """DOFs of ``nodes`` in direction ``component`` (0 = x, 1 = y)."""
        return 2 * np.asarray(nodes, dtype=np.int64) + component

    def cell_dofs(self, cells: NDArray[np.int64]) -> NDArray[np.int64]:
        """Interleaved element DOFs ``(c, 2 * n_en)`` of a connectivity ``(c, n_en)``."""
        cells = np.asarray(cells, dtype=np.int64)
        return np.stack([2 * cells, 2 * cells + 1], axis=-1).reshape(cells.shape[0], -1)

    def point_dofs(self, name: str) -> NDArray[np.int64]:
        """DOFs ``(n, 3)`` of a point group."""
        first = self._first(name)
        n = len(self.groups[name])
        return first + np.arange(3 * n, dtype=np.int64).reshape(n, 3)

    def ref_dof(self, name: str, component: int) -> int:
        """DOF of a reference point: component 0 = u_x, 1 = u_y, 2 = theta (clockwise)."""
        return self._first(name) + component


class Constraints:
    """Collects Dirichlet conditions and ties, then builds a :class:`ConstraintMap`."""

    def __init__(self, dofmap: DofMap, points: NDArray[np.float64]) -> None:
        self.dofmap = dofmap
        self._points = np.asarray(points, dtype=np.float64)  # (n_nodes, 2)
        self._fixed: dict[int, float] = {}
        self._slave_rows: list[tuple[NDArray, NDArray, NDArray]] = []  # (slave, master, coef)
        self._slaves: set[int] = set()

    def fix(self, dofs, values=0.0) -> None:
        """Prescribe ``dofs`` (array-like) to ``values`` (scalar or array)."""
        dofs = np.atleast_1d(np.asarray(dofs, dtype=np.int64))
        values = np.broadcast_to(np.asarray(values, dtype=np.float64), dofs.shape)
        for d, v in zip(dofs.tolist(), values.tolist(), strict=True):
            self._fixed[d] = v

    def fix_nodes(self, nodes, components=(0, 1), value=0.0) -> None:
        """Prescribe the given components (0 = x, 1 = y) of ``nodes``."""
        for comp in components:
            self.fix(self.dofmap.node_dofs(nodes, comp), value)

    def support_box(self, mesh) -> None:
        """The usual soil-box supports: rollers on the ``left`` and ``right`` edges (u_x = 0)
        and a fixed ``base``."""
        self.fix_nodes(mesh.nodes_of("left"), (0,))
        self.fix_nodes(mesh.nodes_of("right"), (0,))
        self.fix_nodes(mesh.nodes_of("base"), (0, 1))

    def tie(self, slaves, masters, coefs) -> None:
        """Linear ties ``u[slave_i] = sum_j coefs[i, j] u[masters[i, j]]``.

        ``slaves (m,)``, ``masters (m, p)``, ``coefs (m, p)``. Masters must not be slaves.
        """
        slaves = np.atleast_1d(np.asarray(slaves, dtype=np.int64))
        masters = np.asarray(masters, dtype=np.int64).reshape(slaves.size, -1)
        coefs = np.asarray(coefs, dtype=np.float64).reshape(masters.shape)
        dup = self._slaves.intersection(slaves.tolist())
        if dup or len(set(slaves.tolist())) != slaves.size:
            raise ConstraintError(f"DOF {min(dup) if dup else slaves[0]} is tied twice")
        self._slaves.update(slaves.tolist())
        self._slave_rows.append((slaves, masters, coefs))

    def tie_rigid(self, nodes, ref: str, components=(0, 1)) -> None:
        """Make the given components of continuum ``nodes`` follow reference point ``ref``
        rigidly. ``components=(1,)`` ties only the vertical motion (a smooth rigid punch)."""
        nodes = np.unique(np.asarray(nodes, dtype=np.int64))
        self._tie_rigid_xy(self._points[nodes], [self.dofmap.node_dofs(nodes, c) for c in (0, 1)],
                           ref, components)

    def tie_points_rigid(self, point_dofs, xy, ref: str, rotation: bool = True) -> None:
        """Tie 3-DOF points (``point_dofs (n, 3)`` at ``xy (n, 2)``) rigidly to ``ref``:
        translations always, the rotation too when ``rotation`` (a fixed pile head)."""
        point_dofs = np.atleast_2d(np.asarray(point_dofs, dtype=np.int64))
        self._tie_rigid_xy(np.atleast_2d(xy), [point_dofs[:, 0], point_dofs[:, 1]], ref, (0, 1))
        if rotation:
            th = self.dofmap.ref_dof(ref, 2)
            self.tie(point_dofs[:, 2], np.full((len(point_dofs), 1), th),
                     np.ones((len(point_dofs), 1)))

    def _tie_rigid_xy(self, xy, dofs_xy, ref, components) -> None:
        dm = self.dofmap
        xr, yr = dm.ref_points[ref]
        U, W, TH = (dm.ref_dof(ref, k) for k in range(3))
        for comp in components:
            slave = dofs_xy[comp]
            if comp == 0:
                master = np.stack([np.full_like(slave, U), np.full_like(slave, TH)], axis=1)
                coef = np.stack([np.ones(slave.size), xy[:, 1] - yr], axis=1)
            else:
                master = np.stack([np.full_like(slave, W), np.full_like(slave, TH)], axis=1)
                coef = np.stack([np.ones(slave.size), -(xy[:, 0] - xr)], axis=1)
            self.tie(slave, master, coef)

    def build(self, extra_fixed: dict[int, float] | None = None) -> ConstraintMap:
        """The constraint map; ``extra_fixed`` prescribes further DOFs for this map only."""
        fixed_all = {**self._fixed, **(extra_fixed or {})}
        n = self.dofmap.n_dofs
        slaves = np.array(sorted(self._slaves), dtype=np.int64)
        fixed_slaves = self._slaves.intersection(fixed_all)
        if fixed_slaves:
            raise ConstraintError(
                f"DOF {min(fixed_slaves)} is both tied and prescribed; prescribe the reference "
                "point instead"
            )
        is_master = np.ones(n, dtype=bool)
        is_master[slaves] = False
        master_index = np.full(n, -1, dtype=np.int64)
        master_index[is_master] = np.arange(int(is_master.sum()))
        n_master = int(is_master.sum())

        rows = [np.flatnonzero(is_master)]
        cols = [master_index[is_master]]
        vals = [np.ones(n_master)]
        for slave, master, coef in self._slave_rows:
            if np.any(~is_master[master]):
                raise ConstraintError("a tie refers to a master DOF that is itself a slave")
            rows.append(np.repeat(slave, master.shape[1]))
            cols.append(master_index[master].ravel())
            vals.append(coef.ravel())
        T_tie = sp.csr_matrix(
            (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
            shape=(n, n_master),
        )
        fixed_dofs = np.array(sorted(fixed_all), dtype=np.int64)
        fixed_vals = np.array([fixed_all[d] for d in fixed_dofs.tolist()], dtype=np.float64)
        return ConstraintMap(T_tie, master_index, master_index[fixed_dofs], fixed_vals)


class ConstraintMap:
    """``u_full = T_tie @ u_master``; the free master DOFs are solved for, the rest prescribed.

    Parameters
    ----------
    T_tie : csr (n_full, n_master)
    master_index : (n_full,) index of each full DOF in master space, -1 for slaves
    fixed : (n_fixed,) master indices of prescribed DOFs
    fixed_values : (n_fixed,) their values
    """

    def __init__(self, T_tie: sp.csr_matrix, master_index, fixed, fixed_values) -> None:
        self.T_tie = T_tie.tocsr()
        self.master_index = master_index
        n_master = T_tie.shape[1]
        self.fixed = np.asarray(fixed, dtype=np.int64)
        is_free = np.ones(n_master, dtype=bool)
        is_free[self.fixed] = False
        self.free = np.flatnonzero(is_free)
        self.T = self.T_tie[:, self.free].tocsr()  # (n_full, n_free)
        self.T.sort_indices()
        self.TT = self.T.T.tocsr()
        self._g_master = np.zeros(n_master)
        self.set_prescribed(fixed_values)
        self._cache_key: tuple | None = None

    @property
    def n_free(self) -> int:
        return self.free.size

    def set_prescribed(self, values) -> None:
        """New values of the prescribed DOFs (same order as at build)."""
        self._g_master[:] = 0.0
        self._g_master[self.fixed] = values
        self.g = self.T_tie @ self._g_master  # (n_full,)

    @property
    def prescribed_values(self) -> NDArray[np.float64]:
        return self._g_master[self.fixed].copy()

    def fixed_position(self, full_dof: int) -> int:
        """Position of a prescribed full DOF in the prescribed-values vector."""
        m = self.master_index[full_dof]
        hits = np.flatnonzero(self.fixed == m)
        if m < 0 or hits.size == 0:
            raise ConstraintError(f"DOF {full_dof} is not prescribed")
        return int(hits[0])

    def expand(self, u_free: NDArray[np.float64]) -> NDArray[np.float64]:
        """Full displacement vector from the free unknowns."""
        return self.T @ u_free + self.g

    def reduce_vector(self, r_full: NDArray[np.float64]) -> NDArray[np.float64]:
        return self.TT @ r_full

    def generalized(self, r_full: NDArray[np.float64]) -> NDArray[np.float64]:
        """Forces in master space (e.g. the moment on a reference point), ``T_tie^T r``."""
        return self.T_tie.T @ r_full

    def generalized_at(self, r_full: NDArray[np.float64], full_dof: int) -> float:
        """Generalised force at one master DOF (reaction where it is prescribed)."""
        m = self.master_index[full_dof]
        if m < 0:
            raise ConstraintError(f"DOF {full_dof} is a slave; ask for its reference point")
        col = self.T_tie[:, [m]].toarray()[:, 0]  # (n_full,)
        return float(col @ r_full)

    def reduce_matrix(self, K: sp.csr_matrix) -> sp.csc_matrix:
        """``T^T K T`` by a cached scatter of ``K.data``, returned in CSC (what SuperLU takes).

        The index map is rebuilt only when the pattern of ``K`` changes.
        """
        if not self._same_pattern(K):
            self._build_cache(K)
            self._cache_key = (K.shape, K.indptr.copy(), K.indices.copy())
        data = np.bincount(self._dst, weights=K.data[self._src] * self._coef,
                           minlength=self._nnz_r)
        return sp.csc_matrix((data, self._indices_r, self._indptr_r),
                             shape=(self.n_free, self.n_free))

    def reduced_from_elements(self, pattern, element_matrices) -> sp.csc_matrix:
        """``T^T K T`` straight from element matrices (one scatter instead of two).

        The map from every element-matrix entry to the reduced CSC data is composed once per
        ``pattern`` (a :class:`femcore.assembly.SparsePattern`) from the pattern's scatter and
        the reduction map; entries of prescribed DOFs drop out, tied ones are spread with their
        coefficients.
        """
        if getattr(self, "_fused_for", None) is not pattern:
            K0 = sp.csr_matrix((np.zeros(pattern.nnz), pattern.indices, pattern.indptr),
                               shape=(pattern.n_dofs, pattern.n_dofs))
            if not self._same_pattern(K0):
                self._build_cache(K0)
                self._cache_key = (K0.shape, K0.indptr.copy(), K0.indices.copy())
            order = np.argsort(self._src, kind="stable")
            cnt = np.bincount(self._src, minlength=pattern.nnz)
            start = np.cumsum(cnt) - cnt
            slot = pattern.scatter
            c = cnt[slot]
            e_rep = np.repeat(np.arange(slot.size), c)
            off = np.arange(e_rep.size) - np.repeat(np.cumsum(c) - c, c)
            k = order[start[slot][e_rep] + off]
            self._fused = (e_rep, self._dst[k], self._coef[k])
            self._fused_for = pattern
        e_rep, dst, coef = self._fused
        values = np.concatenate([np.ravel(m) for m in element_matrices])
        data = np.bincount(dst, weights=values[e_rep] * coef, minlength=self._nnz_r)
        return sp.csc_matrix((data, self._indices_r, self._indptr_r),
                             shape=(self.n_free, self.n_free))

    def _same_pattern(self, K: sp.csr_matrix) -> bool:
        if self._cache_key is None:
            return False
        shape, indptr, indices = self._cache_key
        return (shape == K.shape and indices.size == K.indices.size
                and np.array_equal(indptr, K.indptr) and np.array_equal(indices, K.indices))

    def _build_cache(self, K: sp.csr_matrix) -> None:
        T = self.T
        n_full = K.shape[0]
        rows = np.repeat(np.arange(n_full), np.diff(K.indptr))  # (nnz,)
        cols = K.indices
        cnt = np.diff(T.indptr)

        def expand(keys: NDArray[np.int64]) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
            c = cnt[keys]
            rep = np.repeat(np.arange(keys.size), c)
            offset = np.arange(rep.size) - np.repeat(np.cumsum(c) - c, c)
            return rep, T.indptr[keys][rep] + offset

        k1, t1 = expand(rows)  # entries of T in row i of each K entry
        k2, t2 = expand(cols[k1])  # entries of T in row j
        src = k1[k2]
        a = T.indices[t1][k2].astype(np.int64)  # int64: a * n_free overflows int32
        b = T.indices[t2].astype(np.int64)
        coef = T.data[t1][k2] * T.data[t2]
        n_free = self.n_free
        keys = b * n_free + a  # column-major: CSC of the reduced matrix
        uniq, dst = np.unique(keys, return_inverse=True)
        self._src, self._dst, self._coef = src, dst.ravel(), coef
        self._nnz_r = uniq.size
        r_cols = uniq // n_free
        self._indices_r = (uniq % n_free).astype(np.int32)
        self._indptr_r = np.concatenate(
            [[0], np.cumsum(np.bincount(r_cols, minlength=n_free))]).astype(np.int32)
