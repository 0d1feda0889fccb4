"""Displacement-controlled stepping with adaptive increments: the one place state is committed.

Prescribed DOFs (boundary displacements or a reference point's u, w, theta) move from their
current values by ``increment * lam`` as the load factor ``lam`` goes from 0 to 1; all other
external forces (``f_ext``: weight, a held vertical load, ...) stay constant. Each increment is
solved by Newton-Raphson from the last converged state, starting from a linear extrapolation
of the previous increment (without it the first iterate concentrates the whole prescribed
increment in the elements next to the controlled nodes, and far more points flip between
elastic and plastic); on failure the increment is halved (bounded) and retried with a
backtracking line search, after easy convergence it grows. Increments may be tied to a grid
of load factors (they land on every grid point; a cut-back sub-steps inside its interval)
and bounded relative to the load factor reached. With ``proportional`` one free DOF is
controlled under a load of unknown factor (bordered Newton; Batoz & Dhatt 1979). The
material state is committed only here, after a converged increment. Progress and output go
through a callback.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
from numpy.typing import NDArray

from materials.base import State

from .dofs import ConstraintMap
from .linsolve import SolverError
from .model import Model
from .newton import ConvergenceError, newton

__all__ = ["StepSettings", "StepRecord", "StepResult", "Stepper", "residual_callback"]

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class StepSettings:
    """Stepping controls (load-factor units: 1 = the whole prescribed increment)."""

    initial_step: float = 0.02
    min_step: float = 1e-4
    max_step: float = 0.1
    grow: float = 1.5
    easy_iterations: int = 6
    hard_iterations: int = 12
    rtol: float = 1e-6
    max_iterations: int = 25
    drop_fraction: float | None = None  # stop when |force| < (1 - drop) * peak
    backend: str = "auto"  # linear solver (femcore.linsolve: PARDISO when installed)
    reuse_factorization: bool = False  # modified-Newton first step with the last tangent
    broyden: int = 0  # Broyden updates of a factorization before a new one (newton())

    def __post_init__(self) -> None:
        if not 0 < self.min_step <= self.initial_step <= self.max_step <= 1:
            raise ValueError("need 0 < min_step <= initial_step <= max_step <= 1, got "
                             f"{self.min_step}, {self.initial_step}, {self.max_step}")


@dataclass
class StepRecord:
    """One converged increment."""

    lam: float
    displacement: NDArray[np.float64]  # (n_control,) prescribed values
    force: NDArray[np.float64]  # (n_control,) generalised reactions at the controlled DOFs
    monitor: NDArray[np.float64]  # (n_monitor,) displacements of monitored DOFs
    iterations: int
    history: list[float]
    extra: dict = field(default_factory=dict)  # what the observer returned


@dataclass
class StepResult:
    status: str  # "ok" (target reached or post-peak stop) or "diverged"
    message: str
    records: list[StepRecord]
    u: NDArray[np.float64]
    states: list[State]
    seconds: float = 0.0
    cutbacks: int = 0
    failure: dict | None = None  # where and why the last increment failed (diverged runs)

    @property
    def lam(self) -> NDArray[np.float64]:
        return np.array([r.lam for r in self.records])

    @property
    def displacement(self) -> NDArray[np.float64]:
        return np.array([r.displacement for r in self.records])  # (n_steps, n_control)

    @property
    def force(self) -> NDArray[np.float64]:
        return np.array([r.force for r in self.records])  # (n_steps, n_control)

    @property
    def iterations(self) -> NDArray[np.int64]:
        return np.array([r.iterations for r in self.records])


def residual_callback(model: Model, cmap: ConstraintMap, f_ext: NDArray[np.float64],
                      states: list[State]):
    """Newton callback for the current prescribed values: ``u_free -> (r, K, scale, payload)``.

    ``scale`` = max(||T^T f_ext||, ||reactions at prescribed DOFs||) (docs/conventions.md).
    """
    f_ext_red = np.linalg.norm(cmap.reduce_vector(f_ext))

    def residual(u_free):
        u = cmap.expand(u_free)
        f_int, element_tangents, trial = model.evaluate(u, states, tangent="elements")
        r_full = f_int - f_ext
        generalized = cmap.generalized(r_full)
        scale = max(f_ext_red, float(np.linalg.norm(generalized[cmap.fixed])))
        return (cmap.reduce_vector(r_full),
                lambda: cmap.reduced_from_elements(model.pattern, element_tangents()), scale,
                (u, trial, generalized))

    return residual


@dataclass
class Stepper:
    """Drive prescribed DOFs by ``increments`` (same order as ``control_dofs``).

    Parameters
    ----------
    model, cmap : the model and its constraints (the controlled DOFs must be prescribed,
        except in the proportional-load mode below)
    f_ext : (n_dofs,) external forces held constant
    control_dofs : full DOF numbers of the prescribed DOFs to move
    increments : total change of each controlled DOF over the pushover
    monitor_dofs : DOFs whose displacement is recorded each step (e.g. settlement)
    f_ext_end : (n_dofs,) optional; external forces then go linearly from ``f_ext`` to it
    observer : ``(u, states) -> dict`` called on every committed state (e.g. pile forces)
    stop_when : ``StepRecord -> bool``; True ends the pushover (status "ok")
    grid : optional sorted load factors in (0, 1] on which increments land: a step never
        jumps past a grid point; a cut-back step sub-steps inside a grid interval and the
        stepping lands back on the grid point
    max_relative : optional bound on an increment relative to the load factor reached
        (``step <= max_relative * lam``, from ``lam >= relative_from`` on): the curve keeps
        points at large travel
    proportional : optional ``f_ref`` (n_dofs,): displacement control of one DOF under a
        proportional load (Batoz & Dhatt 1979, Incremental displacement algorithms for
        nonlinear problems, IJNME 14): the single control DOF stays free, its value is an
        extra equation, and the load ``lam_f * f_ref`` has an unknown factor ``lam_f``,
        solved with the displacements from one bordered system. The recorded force is
        ``lam_f``.
    residual_factory : optional ``(cmap, f_ext, states) -> callback`` replacing
        :func:`residual_callback` (a model with its own residual and tangent solver, e.g.
        the coupled harmonics of :mod:`femcore.harmonic_coupled`)
    """

    model: Model
    cmap: ConstraintMap
    f_ext: NDArray[np.float64]
    control_dofs: Sequence[int]
    increments: Sequence[float]
    monitor_dofs: Sequence[int] = ()
    settings: StepSettings = field(default_factory=StepSettings)
    f_ext_end: NDArray[np.float64] | None = None
    observer: Callable[[NDArray[np.float64], list], dict] | None = None
    stop_when: Callable[[StepRecord], bool] | None = None
    grid: Sequence[float] | None = None
    max_relative: float | None = None
    relative_from: float = 0.0
    proportional: NDArray[np.float64] | None = None
    residual_factory: Callable | None = None

    def _base_callback(self, cmap, f_ext, states):
        if self.residual_factory is not None:
            return self.residual_factory(cmap, f_ext, states)
        return residual_callback(self.model, cmap, f_ext, states)

    def _next_target(self, lam: float, step: float, grid) -> float:
        """The load factor the next increment aims at (see ``grid``, ``max_relative``)."""
        target = lam + step
        if self.max_relative is not None and lam >= self.relative_from and lam > 0:
            target = min(target, lam * (1.0 + self.max_relative))
        if grid is not None:
            above = grid[grid > lam * (1 + 1e-12) + 1e-15]
            if above.size and target >= above[0] * (1 - 1e-12):
                target = float(above[0])
        return min(target, 1.0)

    def run(
        self,
        u0: NDArray[np.float64] | None = None,
        states0: list[State] | None = None,
        callback: Callable[[StepRecord], None] | None = None,
    ) -> StepResult:
        t_start = time.perf_counter()
        cfg, cmap, model = self.settings, self.cmap, self.model
        prop = self.proportional is not None
        inc = np.asarray(self.increments, dtype=np.float64)
        u = np.zeros(model.n_dofs) if u0 is None else np.array(u0, dtype=np.float64)
        if prop:
            if len(self.control_dofs) != 1:
                raise ValueError("proportional loading controls exactly one DOF")
            d = int(self.control_dofs[0])
            hit = np.flatnonzero(cmap.free == cmap.master_index[d])
            if cmap.master_index[d] < 0 or hit.size == 0:
                raise ValueError(f"the control DOF {d} must be free under proportional loading")
            ctrl_free = int(hit[0])
            f_ref_red = cmap.reduce_vector(self.proportional)
            base_ctrl = float(u[d])
            positions = np.zeros(0, dtype=np.int64)
            base = cmap.prescribed_values
        else:
            positions = np.array([cmap.fixed_position(d) for d in self.control_dofs],
                                 dtype=np.int64)
            base = cmap.prescribed_values
            if u0 is not None:  # start from the current displacement of the controlled DOFs
                base[positions] = u0[list(self.control_dofs)]
        ctrl_master = cmap.master_index[list(self.control_dofs)]
        grid = None if self.grid is None else np.unique(np.asarray(self.grid, dtype=float))
        states = states0 if states0 is not None else model.initial_states()
        u_free = _free_part(cmap, u)
        lam_f = 0.0  # the unknown load factor of proportional loading
        scale: dict = {}  # its scale (see _bordered_callback)
        records: list[StepRecord] = []
        lam, step, cutbacks, peak = 0.0, cfg.initial_step, 0, 0.0
        velocity = None  # d(x)/d(lam) of the last increment: the predictor
        reuse: dict | None = {} if cfg.reuse_factorization else None
        status, message = "ok", "target reached"
        failure: dict | None = None
        failed_here = 0  # failures since the last converged increment (then: line search)
        while lam < 1.0 - 1e-12:
            target = self._next_target(lam, step, grid)
            dlam = target - lam
            values = _current(base, positions, inc, target)
            cmap.set_prescribed(values)
            f_ext = self.f_ext if self.f_ext_end is None else \
                self.f_ext + target * (self.f_ext_end - self.f_ext)
            x = u_free if not prop else np.append(u_free, lam_f / scale.get("s", 1.0))
            guess = x if velocity is None else x + dlam * velocity
            if prop:  # the control equation holds from the first iterate on
                guess[ctrl_free] = base_ctrl + target * float(inc[0]) - _tied_part(cmap, d)
                callback_fn = _bordered_callback(self._base_callback(cmap, f_ext, states), cmap,
                                                 self.proportional, f_ref_red, ctrl_free,
                                                 base_ctrl + target * float(inc[0]), scale)
            else:
                callback_fn = self._base_callback(cmap, f_ext, states)
            try:
                res = newton(callback_fn, guess, rtol=cfg.rtol, max_iter=cfg.max_iterations,
                             backend=cfg.backend, reuse=reuse, line_search=failed_here > 0,
                             broyden=cfg.broyden)
            except ConvergenceError as exc:
                cutbacks += 1
                failed_here += 1
                log.debug("increment %.3g failed at lam %.4f: %s", dlam, lam, exc)
                step = 0.5 * dlam
                if step < cfg.min_step:
                    status = "diverged"
                    message = (f"no convergence at load factor {lam:.4f} with step "
                               f"{step:.2e}: {exc}")
                    failure = {"lam": lam, "step": dlam, "singular": exc.singular,
                               "iteration": exc.iteration, "error": str(exc),
                               "history": exc.history}
                    break
                continue
            # converged: commit
            failed_here = 0
            u_full, trial, generalized = res.payload
            velocity = (res.x - x) / dlam
            states, lam = trial, target
            if prop:
                u_free, lam_f = res.x[:-1], float(res.x[-1]) * scale["s"]
                force = np.array([lam_f])
                ctrl_values = u_full[list(self.control_dofs)].copy()
            else:
                u_free = res.x
                force = generalized[ctrl_master]
                ctrl_values = values[positions].copy()
            u = u_full
            rec = StepRecord(lam, ctrl_values, force.copy(),
                             u_full[list(self.monitor_dofs)].copy(), res.iterations, res.history,
                             self.observer(u_full, states) if self.observer else {})
            records.append(rec)
            if callback is not None:
                callback(rec)
            if self.stop_when is not None and self.stop_when(rec):
                message = "stopping criterion met"
                break
            step = max(step, dlam)  # a step shortened to land on the grid keeps its allowance
            if res.iterations <= 1:  # (nearly) linear response: double
                step = min(step * max(cfg.grow, 2.0), cfg.max_step)
            elif res.iterations <= cfg.easy_iterations:
                step = min(step * cfg.grow, cfg.max_step)
            elif res.iterations >= cfg.hard_iterations:
                step = max(step * 0.7, cfg.min_step)
            size = float(np.abs(force).max()) if force.size else 0.0
            peak = max(peak, size)
            if cfg.drop_fraction is not None and size < (1.0 - cfg.drop_fraction) * peak:
                message = f"stopped after the peak: force fell by more than {cfg.drop_fraction:.0%}"
                break
        cmap.set_prescribed(_current(base, positions, inc, lam))  # leave the map at the end state
        return StepResult(status, message, records, u, states,
                          time.perf_counter() - t_start, cutbacks, failure)


def _bordered_callback(base, cmap: ConstraintMap, f_ref, f_ref_red, ctrl_free: int,
                       ctrl_value: float, scale: dict):
    """Newton callback of proportional loading: ``x = [u_free, mu]`` with the load factor
    ``lam_f = s mu``, residual ``[T^T (f_int - f_ext - s mu f_ref), s (u_ctrl - value)]`` and
    the bordered tangent ``[[K, -s f_ref], [s e_ctrl^T, 0]]``. ``s`` (the mean stiffness
    diagonal of the first tangent, kept in ``scale`` for the whole run) keeps the border in
    scale with K, so that the pivots of the border are not mistaken for a singularity.
    ``base`` is the callback of the unbordered system; when its tangent is a solver (an
    object with ``.solve``), the bordered system is solved by block elimination with it."""
    norm_ref = float(np.linalg.norm(f_ref_red))
    nz = np.flatnonzero(f_ref_red)

    def residual(x):
        u_free = x[:-1]
        r, K_of, res_scale, (u, trial, generalized) = base(u_free)

        def tangent():
            K = K_of()
            if hasattr(K, "solve"):
                if "s" not in scale:
                    scale["s"] = 1.0
                return _BorderedSolve(K, f_ref_red, ctrl_free, scale["s"])
            if "s" not in scale:
                scale["s"] = float(np.abs(K.diagonal()).mean()) or 1.0
            return bordered_csc(K, nz, -scale["s"] * f_ref_red[nz], ctrl_free, scale["s"])

        s = scale.get("s", 1.0)
        lam_f = s * x[-1]
        r = r - lam_f * f_ref_red
        g = s * (u_free[ctrl_free] - ctrl_value)
        generalized = generalized - lam_f * cmap.generalized(f_ref)
        return (np.append(r, g), tangent, max(res_scale, abs(lam_f) * norm_ref),
                (u, trial, generalized))

    return residual


def bordered_csc(K: sp.spmatrix, col_rows: NDArray[np.int64], col_values: NDArray[np.float64],
                 row_col: int, row_value: float) -> sp.csc_matrix:
    """``[[K, c], [r^T, 0]]`` in CSC, with ``c`` nonzero at ``col_rows`` and ``r`` a single
    entry ``row_value`` in column ``row_col``: K's arrays copied once, with one entry
    inserted (no format conversion of the whole matrix)."""
    K = K if sp.isspmatrix_csc(K) else sp.csc_matrix(K)
    n = K.shape[0]
    at = int(K.indptr[row_col + 1])
    order = np.argsort(col_rows)
    indices = np.concatenate([K.indices[:at], [n], K.indices[at:], col_rows[order]])
    data = np.concatenate([K.data[:at], [row_value], K.data[at:], col_values[order]])
    indptr = np.concatenate([K.indptr, [K.indptr[-1]]])
    indptr[row_col + 1:] += 1
    indptr[-1] += col_rows.size
    return sp.csc_matrix((data, indices.astype(K.indices.dtype, copy=False), indptr),
                         shape=(n + 1, n + 1))


class _BorderedSolve:
    """``[[K, -s f], [s e_c^T, 0]] [du; dmu] = [r; g]`` by two solves with K:
    ``du = a + s dmu b`` with ``K a = r``, ``K b = f``, and ``dmu`` from the control row."""

    def __init__(self, K, f, ctrl: int, s: float) -> None:
        self.K, self.f, self.ctrl, self.s = K, f, ctrl, s
        self._b = None

    def solve(self, rhs: NDArray[np.float64]) -> NDArray[np.float64]:
        r, g = rhs[:-1], rhs[-1]
        a = self.K.solve(r)
        if self._b is None:
            self._b = self.K.solve(self.f)
        b, c, s = self._b, self.ctrl, self.s
        if abs(b[c]) < 1e-300:
            raise SolverError("the control DOF does not move under the proportional load")
        dmu = (g / s - a[c]) / (s * b[c])
        return np.append(a + s * dmu * b, dmu)


def _tied_part(cmap: ConstraintMap, dof: int) -> float:
    """Prescribed contribution ``g`` to a full DOF (0 for a free master DOF)."""
    return float(cmap.g[dof])


def _free_part(cmap: ConstraintMap, u: NDArray[np.float64]) -> NDArray[np.float64]:
    """Free unknowns of a full displacement vector (free master DOFs are full DOFs)."""
    full_of_master = np.full(cmap.T_tie.shape[1], -1, dtype=np.int64)
    masters = np.flatnonzero(cmap.master_index >= 0)
    full_of_master[cmap.master_index[masters]] = masters
    return u[full_of_master[cmap.free]].copy()


def _current(base, positions, inc, lam):
    values = base.copy()
    values[positions] = base[positions] + lam * inc
    return values
