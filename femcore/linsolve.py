"""One entry point for sparse linear solves.

Default backend: SuperLU (``scipy.sparse.linalg.splu``) with the multiple-minimum-degree
ordering of A^T + A and symmetric mode (small diagonal pivot threshold). FE stiffness
matrices are structurally symmetric, and this ordering keeps fill-in far below the default
COLAMD ordering. ``spsolve`` is never used: with scikit-umfpack installed it would silently
swap the solver.

An optional backend, ``pypardiso`` (Intel MKL PARDISO), is used when installed and asked for
(``backend="pardiso"``) or chosen by ``backend="auto"``.
"""

from __future__ import annotations

import importlib.util
import time

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from numpy.typing import NDArray

__all__ = ["solve", "factorize", "available_backends", "SolverError", "STATS", "reset_stats"]

# time spent in factorization + solve, for benchmarks (a few float additions per solve)
STATS = {"seconds": 0.0, "solves": 0, "factorizations": 0}


def reset_stats() -> None:
    STATS.update(seconds=0.0, solves=0, factorizations=0)


class SolverError(RuntimeError):
    """The linear system is singular or could not be solved."""


def available_backends() -> list[str]:
    out = ["superlu"]
    if importlib.util.find_spec("pypardiso") is not None:
        out.append("pardiso")
    return out


def _resolve(backend: str) -> str:
    if backend == "auto":
        return "pardiso" if "pardiso" in available_backends() else "superlu"
    if backend not in ("superlu", "pardiso"):
        raise ValueError(f"unknown linear solver backend {backend!r}: use auto, superlu, pardiso")
    if backend == "pardiso" and "pardiso" not in available_backends():
        raise ValueError("backend 'pardiso' needs the optional package pypardiso")
    return backend


class _SuperLU:
    def __init__(self, A: sp.spmatrix) -> None:
        try:
            self._lu = spla.splu(
                A if sp.isspmatrix_csc(A) else sp.csc_matrix(A),
                permc_spec="MMD_AT_PLUS_A",
                diag_pivot_thresh=0.001,
                options={"SymmetricMode": True},
            )
        except RuntimeError as exc:  # "Factor is exactly singular"
            raise SolverError(
                f"the stiffness matrix is singular ({exc}); the model is probably not "
                "restrained against rigid-body motion"
            ) from exc
        pivots = np.abs(self._lu.U.diagonal())
        n_zero = int(np.sum(pivots <= 1e-12 * pivots.max()))
        if n_zero:
            raise SolverError(
                f"the stiffness matrix is singular: {n_zero} near-zero pivot(s), i.e. "
                f"{n_zero} unrestrained mechanism(s); check supports and constraints"
            )

    def solve(self, b: NDArray[np.float64]) -> NDArray[np.float64]:
        return self._lu.solve(b)


class _Pardiso:
    def __init__(self, A: sp.spmatrix) -> None:
        import pypardiso

        self._solver = pypardiso.PyPardisoSolver()
        self._A = sp.csr_matrix(A)
        self._solver.factorize(self._A)

    def solve(self, b: NDArray[np.float64]) -> NDArray[np.float64]:
        return self._solver.solve(self._A, b)


def factorize(A: sp.spmatrix, backend: str = "superlu"):
    """A factorization object with ``.solve(b)`` (time counted in :data:`STATS`)."""
    t0 = time.perf_counter()
    try:
        return _Pardiso(A) if _resolve(backend) == "pardiso" else _SuperLU(A)
    finally:
        STATS["seconds"] += time.perf_counter() - t0
        STATS["factorizations"] = STATS.get("factorizations", 0) + 1


def solve(A: sp.spmatrix, b: NDArray[np.float64], backend: str = "superlu") -> NDArray[np.float64]:
    """Solve ``A x = b``; raises :class:`SolverError` for a singular or non-finite result.

    A numerically singular matrix (e.g. a mechanism: a body without supports) factorizes
    with round-off pivots instead of exact zeros; SuperLU pivots below 1e-12 of the largest
    are reported as such (a stiffness contrast of 1e6 between soil and concrete stays far
    above that).
    """
    lu = factorize(A, backend)
    t0 = time.perf_counter()
    try:
        x = lu.solve(np.asarray(b, dtype=np.float64))
    finally:
        STATS["seconds"] += time.perf_counter() - t0
        STATS["solves"] += 1
    if not np.all(np.isfinite(x)):
        raise SolverError("the linear solve produced non-finite values (singular matrix?)")
    return x
