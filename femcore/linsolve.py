"""One entry point for sparse linear solves.

Default backend: SuperLU (``scipy.sparse.linalg.splu``) with the multiple-minimum-degree
ordering of A^T + A and symmetric mode (small diagonal pivot threshold). FE stiffness
matrices are structurally symmetric, and this ordering keeps fill-in far below the default
COLAMD ordering. ``spsolve`` is never used: with scikit-umfpack installed it would silently
swap the solver.

An optional backend, ``pypardiso`` (Intel MKL PARDISO, the ``fast`` install extra), is
picked automatically when it is installed: every solve asks for ``backend="auto"`` unless
told otherwise, and "auto" means the preferred backend -- the environment variable
``TILTFE_SOLVER`` (``auto``, ``superlu`` or ``pardiso``) read at import, or
:func:`use_backend` -- and, for "auto" itself, PARDISO when present, else SuperLU.
"""

from __future__ import annotations

import atexit
import functools
import importlib.util
import os
import time
import zlib
from contextlib import contextmanager

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from numpy.typing import NDArray

__all__ = ["solve", "factorize", "available_backends", "SolverError", "STATS", "reset_stats",
           "BACKENDS", "use_backend", "preferred_backend", "check_backend_name",
           "environment_problem", "pardiso_problem"]

#: the names a backend may be asked for by
BACKENDS = ("auto", "superlu", "pardiso")

# time spent in factorization + solve, for benchmarks (a few float additions per solve)
STATS = {"seconds": 0.0, "solves": 0, "factorizations": 0}


def reset_stats() -> None:
    STATS.update(seconds=0.0, solves=0, factorizations=0)


class SolverError(RuntimeError):
    """The linear system is singular or could not be solved."""


def available_backends() -> list[str]:
    """The backends that work here: SuperLU always, PARDISO when pypardiso is installed and
    its MKL library loads (see :func:`pardiso_problem`)."""
    out = ["superlu"]
    if pardiso_problem() is None:
        out.append("pardiso")
    return out


@functools.cache
def pardiso_problem() -> str | None:
    """None when PARDISO can be used, else why not (not installed, or its MKL library does
    not load: then "auto" falls back to SuperLU instead of failing at the first solve)."""
    if importlib.util.find_spec("pypardiso") is None:
        return "pypardiso is not installed (pip install -e \".[fast]\")"
    try:
        _mkl_pardiso()
    except Exception as exc:  # noqa: BLE001 - a broken install is reported, never raised
        return f"pypardiso is installed but MKL's PARDISO does not load ({exc})"
    return None


def check_backend_name(name: str, where: str = "backend") -> str | None:
    """None when ``name`` is a backend that can be used here, else what is wrong with it."""
    if name not in BACKENDS:
        return f"{where}: expected one of {', '.join(BACKENDS)}, got {name!r}"
    if name == "pardiso" and "pardiso" not in available_backends():
        return f"{where} = 'pardiso' cannot be used: {pardiso_problem()}"
    return None


def _environment_backend() -> str:
    return os.environ.get("TILTFE_SOLVER", "auto").strip().lower() or "auto"


_PREFERRED = {"backend": _environment_backend()}


def environment_problem() -> str | None:
    """What is wrong with the ``TILTFE_SOLVER`` environment variable (as it is now), if
    anything."""
    return check_backend_name(_environment_backend(), "TILTFE_SOLVER")


def preferred_backend() -> str:
    """What "auto" resolves to now: ``superlu`` or ``pardiso``."""
    return _resolve("auto")


@contextmanager
def use_backend(backend: str):
    """Within the block, "auto" solves use ``backend`` (``superlu``, ``pardiso``, ``auto``)."""
    problem = check_backend_name(backend)
    if problem:
        raise ValueError(problem)
    old = _PREFERRED["backend"]
    _PREFERRED["backend"] = backend
    try:
        yield
    finally:
        _PREFERRED["backend"] = old


def _resolve(backend: str) -> str:
    where = "backend"
    if backend == "auto":
        backend, where = _PREFERRED["backend"], "TILTFE_SOLVER"
        if backend == "auto":
            return "pardiso" if "pardiso" in available_backends() else "superlu"
    problem = check_backend_name(backend, where)
    if problem:
        raise ValueError(problem)
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


@functools.cache
def _mkl_pardiso():
    """MKL's ``pardiso`` routine, found once (pypardiso searches the environment for the
    library it installed) with its C signature."""
    import ctypes

    import pypardiso

    fn = pypardiso.PyPardisoSolver().libmkl.pardiso
    i32p, f64p = ctypes.POINTER(ctypes.c_int32), ctypes.POINTER(ctypes.c_double)
    fn.argtypes = [ctypes.POINTER(ctypes.c_int64), i32p, i32p, i32p, i32p, i32p, f64p, i32p,
                   i32p, i32p, i32p, i32p, i32p, f64p, f64p, i32p]
    fn.restype = None
    return fn


class _PardisoPattern:
    """One PARDISO instance (its handle ``pt``) for one sparsity pattern: the symbolic
    analysis (phase 11: the nested-dissection ordering, most of the cost of a one-off
    factorization) once, then a numerical factorization (phase 22) for every matrix of that
    pattern and solves (phase 33). The MKL routine is called through ctypes with the
    library that ``pypardiso`` installs and loads (zero-based indices, CSC solved as the
    transpose of CSR: no copies of the index arrays). ``owner`` is the factorization whose
    numbers the handle holds now."""

    def __init__(self, A: sp.spmatrix) -> None:
        import ctypes

        self._ct = ctypes
        self.fn = _mkl_pardiso()
        self.n = A.shape[0]
        self.indptr = A.indptr.astype(np.int32)  # kept: the pattern this handle belongs to
        self.indices = A.indices.astype(np.int32)
        self.csc = sp.isspmatrix_csc(A)
        self.pt = np.zeros(64, dtype=np.int64)
        self.iparm = np.zeros(64, dtype=np.int32)
        self.iparm[[0, 1, 9, 10, 12, 34]] = [1, 2, 13, 1, 1, 1]  # own values, METIS,
        # pivot perturbation 1e-13, scaling and matching (unsymmetric defaults), 0-based
        self.iparm[11] = 2 if self.csc else 0  # CSC of A is CSR of A^T: solve transposed
        self.perm = np.zeros(self.n, dtype=np.int32)
        self.owner = None
        self._call(11, A.data, np.zeros(1), np.zeros(1))

    def matches(self, A: sp.spmatrix) -> bool:
        return (A.shape[0] == self.n and sp.isspmatrix_csc(A) == self.csc
                and A.indices.size == self.indices.size
                and np.array_equal(A.indptr, self.indptr)
                and np.array_equal(A.indices, self.indices))

    def _call(self, phase: int, data, b, x) -> None:
        ct = self._ct
        i32p, f64p = ct.POINTER(ct.c_int32), ct.POINTER(ct.c_double)
        err = ct.c_int32(0)
        one = ct.byref(ct.c_int32(1))
        self.fn(self.pt.ctypes.data_as(ct.POINTER(ct.c_int64)), one, one,
                ct.byref(ct.c_int32(11)), ct.byref(ct.c_int32(phase)),
                ct.byref(ct.c_int32(self.n)), data.ctypes.data_as(f64p),
                self.indptr.ctypes.data_as(i32p), self.indices.ctypes.data_as(i32p),
                self.perm.ctypes.data_as(i32p), one, self.iparm.ctypes.data_as(i32p),
                ct.byref(ct.c_int32(0)), b.ctypes.data_as(f64p), x.ctypes.data_as(f64p),
                ct.byref(err))
        if err.value != 0:
            raise SolverError(f"PARDISO phase {phase} failed with error {err.value}")

    def factor(self, owner, data) -> int:
        """Numerical factorization of ``data`` (this pattern); the perturbed pivots."""
        self._call(22, data, np.zeros(1), np.zeros(1))
        self.owner = owner
        return int(self.iparm[13])

    def solve(self, data, b) -> NDArray[np.float64]:
        b = np.ascontiguousarray(b, dtype=np.float64)
        x = np.zeros_like(b)
        self._call(33, data, b, x)
        return x

    def release(self) -> None:
        """Free PARDISO's memory of this handle (phase -1)."""
        try:
            if self.pt.any():
                self._call(-1, np.zeros(1), np.zeros(1), np.zeros(1))
                self.pt[:] = 0
        except Exception:  # noqa: BLE001 - interpreter shutdown: numpy or MKL may be gone
            pass

    def __del__(self) -> None:
        self.release()


#: PARDISO handles of the last few sparsity patterns (a Newton run refactorizes one pattern)
_PATTERNS: list[_PardisoPattern] = []


@atexit.register
def _release_patterns() -> None:
    while _PATTERNS:
        _PATTERNS.pop().release()


def _known_pattern(A: sp.spmatrix) -> _PardisoPattern | None:
    """The handle of ``A``'s sparsity pattern (made the most recent one), or None."""
    for k, h in enumerate(_PATTERNS):
        if h.matches(A):
            _PATTERNS.append(_PATTERNS.pop(k))
            return h
    return None


def _new_pattern(A: sp.spmatrix) -> _PardisoPattern:
    h = _PardisoPattern(A)
    _PATTERNS.append(h)
    if len(_PATTERNS) > 4:
        _PATTERNS.pop(0).release()
    return h


class _Pardiso:
    """A factorization by Intel MKL PARDISO (real unsymmetric) on the shared handle of its
    sparsity pattern (:class:`_PardisoPattern`). A factorization whose handle has been
    refactorized since (e.g. a kept factorization after a newer one) refactorizes its own
    numbers before it solves, so every solve is with the matrix it was made for."""

    def __init__(self, A: sp.spmatrix, handle: _PardisoPattern | None = None) -> None:
        """``A`` CSC or CSR with sorted indices (:func:`_compressed`); ``handle`` its
        pattern's handle when known."""
        self._data = np.ascontiguousarray(A.data, dtype=np.float64)
        self._h = handle if handle is not None else _known_pattern(A) or _new_pattern(A)
        perturbed = self._h.factor(self, self._data)
        if perturbed:
            raise SolverError(
                f"the stiffness matrix is singular: {perturbed} perturbed pivot(s), i.e. "
                "unrestrained mechanism(s); check supports and constraints")

    def solve(self, b: NDArray[np.float64]) -> NDArray[np.float64]:
        if self._h.owner is not self:
            self._h.factor(self, self._data)
        return self._h.solve(self._data, b)


def _compressed(A: sp.spmatrix) -> sp.spmatrix:
    """``A`` as CSC (or CSR as given) with sorted indices, refused when a row or column is
    empty (PARDISO would crash on it)."""
    A = A if sp.isspmatrix_csc(A) or sp.isspmatrix_csr(A) else sp.csc_matrix(A)
    if A.nnz == 0 or not np.diff(A.indptr).all():
        raise SolverError("the stiffness matrix is singular: it has an empty row or "
                          "column (a DOF without stiffness); check supports and constraints")
    return A if A.has_sorted_indices else A.sorted_indices()


#: signatures of sparsity patterns factorized once (by SuperLU) under the PARDISO backend
_SEEN: dict[tuple, None] = {}


def _signature(A: sp.spmatrix) -> tuple:
    return (A.shape[0], A.nnz, A.format, zlib.crc32(np.ascontiguousarray(A.indptr)),
            zlib.crc32(np.ascontiguousarray(A.indices)))


def _pardiso_or_first_sight(A: sp.spmatrix):
    """PARDISO pays for a sparsity pattern once (the symbolic analysis, several numerical
    factorizations' worth): a pattern seen for the first time is factorized by SuperLU (a
    one-off solve: the elastic 3D solves, a calibration, the dynamic analysis), from the
    second time on by PARDISO with the analysis kept (a Newton run)."""
    A = _compressed(A)
    handle = _known_pattern(A)
    if handle is not None:
        return _Pardiso(A, handle)
    key = _signature(A)
    if key in _SEEN:
        _SEEN.pop(key)
        return _Pardiso(A)
    _SEEN[key] = None
    if len(_SEEN) > 64:
        _SEEN.pop(next(iter(_SEEN)))
    return _SuperLU(A)


def factorize(A: sp.spmatrix, backend: str = "auto"):
    """A factorization object with ``.solve(b)`` (time counted in :data:`STATS`). With the
    PARDISO backend a pattern's first factorization is SuperLU's (see
    :func:`_pardiso_or_first_sight`)."""
    t0 = time.perf_counter()
    try:
        if _resolve(backend) == "pardiso":
            return _pardiso_or_first_sight(A)
        return _SuperLU(A)
    finally:
        STATS["seconds"] += time.perf_counter() - t0
        STATS["factorizations"] = STATS.get("factorizations", 0) + 1


def solve(A: sp.spmatrix, b: NDArray[np.float64], backend: str = "auto") -> NDArray[np.float64]:
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
