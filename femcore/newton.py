"""Newton-Raphson on a residual-and-tangent callback. Knows nothing about materials.

Convergence: ``||r|| <= rtol * scale``, rtol = 1e-6 by default, with the scale supplied by the
callback: max(||f_ext||, ||reactions at the prescribed DOFs||) for the stepping driver (see
docs/conventions.md). The relative residual of every iteration is recorded; failure raises
:class:`ConvergenceError` carrying that history.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.sparse as sp
from numpy.typing import NDArray

from .linsolve import STATS, SolverError, factorize

__all__ = ["NewtonResult", "ConvergenceError", "newton"]


class ConvergenceError(RuntimeError):
    """Newton-Raphson did not converge; ``history`` holds the relative residuals."""

    def __init__(self, message: str, history: list[float], singular: bool = False,
                 iteration: int | None = None) -> None:
        super().__init__(f"{message}; relative residuals: "
                         + ", ".join(f"{h:.2e}" for h in history))
        self.history = list(history)
        self.singular = singular  # the tangent was singular (a mechanism), not slow iterations
        self.iteration = iteration  # the iteration at which it failed (None: all used)


@dataclass
class NewtonResult:
    """Converged solution ``x``, iterations used, residual history and the callback payload."""

    x: NDArray[np.float64]
    iterations: int
    history: list[float] = field(default_factory=list)
    payload: Any = None


Callback = Callable[[NDArray[np.float64]], tuple[NDArray[np.float64], sp.spmatrix, float, Any]]


def newton(
    residual: Callback,
    x0: NDArray[np.float64],
    rtol: float = 1e-6,
    max_iter: int = 25,
    backend: str = "auto",
    divergence: float = 1e6,
    reuse: dict | None = None,
    line_search: bool = False,
    broyden: int = 0,
) -> NewtonResult:
    """Solve ``r(x) = 0``.

    Parameters
    ----------
    residual : callable
        ``x -> (r, K, scale, payload)``: residual vector, its tangent dr/dx (sparse, or a
        function returning it: built only if an iteration needs it; or an object with
        ``.solve(r)`` that solves with it, e.g. an iterative solver), the force
        scale for the relative criterion and anything the caller wants back (e.g. trial states).
    x0 : initial guess (not modified).
    rtol : relative tolerance on ``||r|| / scale``.
    max_iter : iterations allowed.
    divergence : give up early when the relative residual exceeds this.
    reuse : optional dict holding a factorization (key ``"lu"``) from an earlier solve. If
        present, the first iteration uses it instead of a new tangent (a modified-Newton step:
        exact when the tangent has not changed, e.g. in the elastic range); a new tangent is
        factorized as soon as that step reduces the residual by less than a factor 10. The
        latest factorization is stored back. Quadratic convergence is kept once tangents are
        fresh.
    line_search : backtrack a full step that increases the residual (steps 1, 1/2, 1/4,
        1/8 of the Newton step; the first that lowers the relative residual, else the
        smallest): for iterations that oscillate where contact or yield states flip.
    broyden : up to this many Broyden updates of a factorization before a new one
        (quasi-Newton; Broyden 1965, A class of methods for solving nonlinear simultaneous
        equations, Math. Comp. 19; the inverse update ``H + (s - H y) y^T / (y^T y)``): a
        factorization is kept while each iteration lowers the residual at least to 0.8 of the
        last (measured on the coupled harmonics: 0.5 and 0.9 made more factorizations or
        more iterations; docs/harmonic.md). With ``reuse`` the factorization goes on to the
        next increment with its updates (at most ``broyden`` new ones per increment and
        ``3 broyden`` in all), which cut the demo's coupled factorizations from 35 to 31
        and its harmonic pushover by 22-24 %. For models
        whose factorization costs many residual evaluations (the coupled harmonics); 0 (the
        default): Newton's method with the reuse rule above.
    """
    x = np.array(x0, dtype=np.float64)
    history: list[float] = []
    stale = reuse.get("lu") if reuse is not None else None
    used_stale = False
    evaluated = None  # the evaluation of x, when a line search already made it
    quasi: _Broyden | None = None  # the factorization in use with its Broyden updates
    if broyden and stale is not None:  # the last factorization with its updates, carried on
        quasi = stale = stale if isinstance(stale, _Broyden) else _Broyden(stale)
    start = quasi.count if quasi is not None else 0
    last: tuple | None = None  # (x, r) of the previous iterate
    for it in range(max_iter + 1):
        r, K, scale, payload = evaluated if evaluated is not None else residual(x)
        evaluated = None
        scale = scale if scale > 0 and np.isfinite(scale) else 1.0
        rel = float(np.linalg.norm(r) / scale)
        history.append(rel)
        if broyden and quasi is not None and last is not None:
            if rel <= 0.8 * history[-2] and quasi.count - start < broyden \
                    and quasi.count < 3 * broyden:
                quasi.update(x - last[0], r - last[1])
                stale, used_stale = quasi, False  # kept: no new factorization
            else:
                quasi, stale, used_stale = None, None, False
        last = (x.copy(), r.copy()) if broyden else None
        if not np.isfinite(rel) or rel > divergence:
            if reuse is not None:
                reuse.pop("lu", None)
            raise ConvergenceError(f"diverged after {it} iteration(s)", history, iteration=it)
        if rel <= rtol:
            if reuse is not None and quasi is not None:
                reuse["lu"] = quasi  # the next increment goes on with these updates
            return NewtonResult(x, it, history, payload)
        if it == max_iter:
            break
        if used_stale and rel > 0.1 * history[-2]:
            stale = None  # the old tangent is not good enough any more
        try:
            if stale is not None:
                lu, used_stale = stale, True
            else:
                A = K() if callable(K) else K  # a matrix, or a solver with .solve(r)
                lu = A if hasattr(A, "solve") else factorize(A, backend)
                used_stale = False
                if reuse is not None:
                    reuse["lu"] = lu
                if broyden:
                    quasi = lu = _Broyden(lu)
                    start = 0
            t0 = time.perf_counter()
            dx = lu.solve(r)
            STATS["seconds"] += time.perf_counter() - t0
            STATS["solves"] += 1
            if not np.all(np.isfinite(dx)):
                raise SolverError("the linear solve produced non-finite values")
        except SolverError as exc:
            if reuse is not None:
                reuse.pop("lu", None)
            raise ConvergenceError(f"linear solve failed at iteration {it + 1}: {exc}",
                                   history, singular=True, iteration=it + 1) from exc
        if line_search:
            x, evaluated = _backtrack(residual, x, dx, rel)
        else:
            x = x - dx
    if reuse is not None:
        reuse.pop("lu", None)
    raise ConvergenceError(f"no convergence in {max_iter} iterations", history)


class _Broyden:
    """A factorization with Broyden updates of its inverse: ``H v = lu.solve(v) + sum_j c_j
    (y_j . v)``."""

    def __init__(self, lu) -> None:
        self.lu = lu.lu if isinstance(lu, _Broyden) else lu
        self.c: list[NDArray[np.float64]] = []
        self.y: list[NDArray[np.float64]] = []

    @property
    def count(self) -> int:
        return len(self.c)

    def solve(self, v: NDArray[np.float64]) -> NDArray[np.float64]:
        out = self.lu.solve(v)
        for c, y in zip(self.c, self.y, strict=True):
            out = out + c * float(y @ v)
        return out

    def update(self, s: NDArray[np.float64], y: NDArray[np.float64]) -> None:
        """Secant condition ``H y = s`` for the step ``s = x_new - x_old`` and the residual
        change ``y`` (Newton's step is ``x - H r``, H approximating the inverse tangent)."""
        yy = float(y @ y)
        if yy <= 0.0:
            return
        self.c.append((s - self.solve(y)) / yy)
        self.y.append(y)


def _backtrack(residual: Callback, x, dx, rel: float):
    """``x - a dx`` for the first ``a`` in 1, 1/2, 1/4, 1/8 whose relative residual is below
    ``rel`` (else the last); returns it with its evaluation."""
    for a in (1.0, 0.5, 0.25, 0.125):
        trial = x - a * dx
        ev = residual(trial)
        sc = ev[2] if ev[2] > 0 and np.isfinite(ev[2]) else 1.0
        if float(np.linalg.norm(ev[0]) / sc) < rel:
            break
    return trial, ev
