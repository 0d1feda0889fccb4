"""All harmonics of a harmonic model as one nonlinear system (the harmonic pushover).

Linear elasticity keeps the circumferential harmonics apart; a yielded zone local in theta
couples them. :class:`CoupledModel` stacks the amplitudes of harmonics ``0..N`` in one vector
(harmonic-major: DOF ``d`` of harmonic number ``a`` is ``a * n1 + d``, ``n1`` the DOFs of one
harmonic) and presents the interface the load stepping of :mod:`femcore.stepping` drives:
``n_dofs``, ``initial_states()`` and a residual with its tangent (:func:`coupled_residual`).

Blocks:

* the linear blocks of the :class:`~femcore.harmonic.HarmonicModel` (cap, elastic soil, ring
  beams, tied springs): one element stiffness per harmonic, computed once;
* nonlinear blocks (:class:`~femcore.harmonic_plastic.HarmonicMohrCoulomb` soil, the ring slip
  and tip springs of :class:`PlaneSprings`): evaluated on the circumferential planes and
  projected back. Their tangent is block-diagonal wherever nothing has yielded; yielded
  cells and springs add blocks between harmonics.

The tangent (:class:`CoupledTangent`) is kept as its per-harmonic diagonal blocks (sparse,
reduced with each harmonic's constraint map) plus the coupling element blocks. Two linear
solvers on it: ``"direct"`` assembles the whole coupled matrix and factorizes it (SuperLU);
``"krylov"`` runs GMRES on the coupled operator (the coupling applied element by element)
preconditioned by the factorized diagonal blocks, which are kept from one Newton iteration to
the next while GMRES converges quickly (Newton-Krylov; Knoll & Keyes 2004,
Jacobian-free Newton-Krylov methods: a survey of approaches and applications, J. Comput.
Phys. 193).

Constraints: :func:`combine_maps` joins the per-harmonic :class:`~femcore.dofs.ConstraintMap`
of every harmonic into one block-diagonal map of the coupled vector.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from numpy.typing import NDArray

from .dofs import ConstraintMap
from .harmonic import HarmonicModel
from .harmonic_planes import CircumferentialPlanes
from .linsolve import SolverError, factorize

__all__ = ["CoupledModel", "CombinedMap", "combine_maps", "PlaneSprings", "SpringPlaneState",
           "PlaneContact", "ContactPlaneState",
           "CoupledTangent", "coupled_residual", "SOLVER_STATS"]

#: counters of the coupled linear solves (reset by the caller): factorizations of diagonal
#: blocks, GMRES iterations, seconds in factorizations and in GMRES
SOLVER_STATS = {"block_factorizations": 0, "direct_factorizations": 0, "gmres_iterations": 0,
                "solves": 0, "factor_s": 0.0, "solve_s": 0.0, "material_s": 0.0}


# --------------------------------------------------------------------------- constraints
class CombinedMap(ConstraintMap):
    """A block-diagonal :class:`ConstraintMap` of the coupled vector; ``parts`` the maps of
    the harmonics, ``free_slices`` where each harmonic's free unknowns sit."""

    parts: list[ConstraintMap]
    free_slices: list[slice]


def combine_maps(parts: Sequence[ConstraintMap]) -> CombinedMap:
    """The map of the coupled vector from one map per harmonic (same full size each)."""
    parts = list(parts)
    n1 = parts[0].T_tie.shape[0]
    masters = np.cumsum([0] + [p.T_tie.shape[1] for p in parts])
    T = sp.block_diag([p.T_tie for p in parts], format="csr")
    mi = np.concatenate([np.where(p.master_index >= 0, p.master_index + masters[a], -1)
                         for a, p in enumerate(parts)])
    fixed = np.concatenate([p.fixed + masters[a] for a, p in enumerate(parts)])
    values = np.concatenate([p.prescribed_values for p in parts])
    cm = CombinedMap(T, mi, fixed, values)
    cm.parts = parts
    sizes = np.cumsum([0] + [p.n_free for p in parts])
    cm.free_slices = [slice(int(sizes[a]), int(sizes[a + 1])) for a in range(len(parts))]
    if T.shape[0] != n1 * len(parts):
        raise ValueError("every harmonic's map must have the same number of DOFs")
    return cm


# --------------------------------------------------------------------------- springs
def _plane_family(planes: CircumferentialPlanes, scale: float = 1.0):
    """``S (m, h, 3)`` = diag(cos, cos, sin)(n theta_k) of (in-plane, in-plane, hoop)
    directions and ``wS`` = the plane weights times ``scale`` times S."""
    c, s_ = planes.T[..., 0], planes.T[..., 4]  # (m, h): cos(n theta), sin(n theta)
    S = np.stack([c, c, s_], axis=-1)
    return S, (planes.w * scale)[:, None, None] * S


def _plane_blocks(wS, S, C, B, changed):
    """Element tangent of a block of point laws on the planes: plane tangents ``C (m, s, 3,
    3)`` in local directions ``d = B u_e`` (``B (s, 3, i)`` or ``(3, i)``) projected to the
    harmonics, as ``(diagonal (h, s, i, i), changed points (p,), their blocks (h, h, p, i,
    i))``."""
    Kc = np.einsum("mhk,mskl,mgl->hgskl", wS, C, S)  # (h, h, s, 3, 3)
    B = np.broadcast_to(B, (Kc.shape[2], *B.shape[-2:]))
    Ke = np.einsum("ski,hgskl,slj->hgsij", B, Kc, B)  # (h, h, s, i, i)
    plastic = np.flatnonzero(changed)
    h = Ke.shape[0]
    return Ke[np.arange(h), np.arange(h)], plastic, Ke[:, :, plastic]


@dataclass
class SpringPlaneState:
    """Per plane and spring node ``(m, s, 3)``: relative displacement, slip and force (one
    pile: axial, in-plane normal, hoop), and where a limit is active ``(m, s)``."""

    d: NDArray[np.float64]
    d_p: NDArray[np.float64]
    f: NDArray[np.float64]
    at_limit: NDArray[np.bool_]


@dataclass(eq=False)
class PlaneSprings:
    """Elastic-perfectly plastic springs of a ring of ``count`` piles on the planes.

    Per node of the ring beam, one pile's spring between the beam (U, W, V) and the soil
    (U, W, V) (or fixed ground when ``soil`` is None): axial along the pile (t-z or q-z:
    force bounds ``axial_min <= f <= axial_max``), lateral in the plane normal to the pile
    with the in-plane normal and the hoop directions together (p-y: isotropic stiffness,
    ``|f_lat| <= lateral_max``, a radial return). On plane theta the relative displacement
    is ``sum_n S_n(theta) d_n`` with ``S_n = diag(cos, cos, sin)(n theta)``; the ring's
    forces are the smeared ``count / (2 pi)`` piles per radian projected back with the plane
    weights (elastic: N k for n = 0, N k / 2 for n >= 1, as
    :func:`~femcore.harmonic_rings.ring_factors`). ``residual_tangent`` keeps that fraction
    of k in the tangent of a yielded direction (forces unchanged).
    """

    name: str
    count: float
    tangent: NDArray[np.float64]  # (2,) pile axis (r, z), head -> tip
    beam: NDArray[np.int64]  # (s, 3) harmonic DOFs of one harmonic
    soil: NDArray[np.int64] | None
    k_axial: NDArray[np.float64]  # (s,) kN/m per pile
    k_lateral: NDArray[np.float64]  # (s,)
    axial_min: NDArray[np.float64]  # (s,) kN per pile (<= 0)
    axial_max: NDArray[np.float64]  # (s,)
    lateral_max: NDArray[np.float64]  # (s,) (>= 0)
    planes: CircumferentialPlanes
    residual_tangent: float = 0.0
    element_dofs: NDArray[np.int64] = field(init=False)

    def __post_init__(self) -> None:
        tr, tz = self.tangent
        dirs = np.array([[tr, tz, 0.0], [-tz, tr, 0.0], [0.0, 0.0, 1.0]])  # (3, 3) rows
        if self.soil is None:
            self.element_dofs = np.asarray(self.beam, dtype=np.int64)
            self._B = dirs  # (3, 3): d = B u_e
        else:
            self.element_dofs = np.concatenate([self.beam, self.soil], axis=1)  # (s, 6)
            self._B = np.concatenate([dirs, -dirs], axis=1)  # (3, 6)
        self._S, self._wS = _plane_family(self.planes, self.count / (2.0 * np.pi))

    @property
    def n_springs(self) -> int:
        return self.k_axial.size

    def initial_state(self) -> SpringPlaneState:
        m, s = self.planes.n_planes, self.n_springs
        z = np.zeros((m, s, 3))
        return SpringPlaneState(z, z.copy(), z.copy(), np.zeros((m, s), dtype=bool))

    def evaluate(self, u_e: NDArray[np.float64], state: SpringPlaneState, tangent: bool = True):
        """Like :meth:`HarmonicMohrCoulomb.evaluate`: ``u_e (h, s, i)`` element amplitudes."""
        d_amp = np.einsum("ki,hsi->hsk", self._B, u_e)  # (h, s, 3)
        d = np.einsum("mhk,hsk->msk", self._S, d_amp)  # (m, s, 3)
        ka, kl = self.k_axial[None, :], self.k_lateral[None, :]
        # axial: 1D elastic-perfectly plastic
        fa_t = ka * (d[..., 0] - state.d_p[..., 0])
        fa = np.clip(fa_t, self.axial_min[None, :], self.axial_max[None, :])
        lim_a = fa != fa_t
        # lateral: isotropic, radial return on |f| <= p
        fl_t = kl[..., None] * (d[..., 1:] - state.d_p[..., 1:])  # (m, s, 2)
        size = np.hypot(fl_t[..., 0], fl_t[..., 1])
        p = self.lateral_max[None, :]
        lim_l = size > p
        ratio = np.where(lim_l, p / np.maximum(size, 1e-300), 1.0)
        fl = fl_t * ratio[..., None]
        f = np.concatenate([fa[..., None], fl], axis=-1)  # (m, s, 3)
        k_safe = lambda k: np.where(k > 0, k, 1.0)  # noqa: E731
        d_p = state.d_p.copy()
        d_p[..., 0] = np.where(lim_a, d[..., 0] - fa / k_safe(ka), state.d_p[..., 0])
        d_p[..., 1:] = np.where(lim_l[..., None], d[..., 1:] - fl / k_safe(kl)[..., None],
                                state.d_p[..., 1:])
        at_limit = lim_a | lim_l
        new = SpringPlaneState(d, d_p, f, at_limit)
        F = np.einsum("mhk,msk->hsk", self._wS, f)  # (h, s, 3)
        f_e = np.einsum("ki,hsk->hsi", self._B, F)  # (h, s, i)
        if not tangent:
            return f_e, None, new
        C = np.zeros((*d.shape[:2], 3, 3))  # (m, s, 3, 3) tangent of each plane
        rt = self.residual_tangent
        C[..., 0, 0] = np.where(lim_a, rt * ka, ka)
        n = fl_t / np.maximum(size, 1e-300)[..., None]  # (m, s, 2) direction of the trial
        eye = np.eye(2)
        Cl = np.where(lim_l[..., None, None],
                      (ratio[..., None, None] * (eye - n[..., :, None] * n[..., None, :])
                       + rt * eye), eye) * kl[..., None, None]
        C[..., 1:, 1:] = Cl
        return f_e, _plane_blocks(self._wS, self._S, C, self._B, at_limit.any(axis=0)), new


@dataclass
class ContactPlaneState:
    """Per plane and node pair: relative displacement (radial shear, opening, hoop shear)
    ``(m, s, 3)``, its plastic part (slip of both shear directions and the opening of an open
    pair) ``(m, s, 3)``, the tractions on the cap ``(m, s, 3)`` and whether the pair is open
    / slipping ``(m, s)``."""

    d: NDArray[np.float64]
    d_p: NDArray[np.float64]
    traction: NDArray[np.float64]
    open: NDArray[np.bool_]
    sliding: NDArray[np.bool_]


@dataclass(eq=False)
class PlaneContact:
    """A no-tension Coulomb contact (lift-off, sliding) between node pairs on the planes: the
    law of the slice's cap contact (:func:`materials.springs.coulomb_update`, tension
    cut-off 0) with the two shear directions together.

    Pair p joins ``soil (s, 3)`` to ``cap (s, 3)`` harmonic DOFs (U, W, V); ``tangent`` and
    ``normal`` ``(s, 2)`` in the (r, z) plane, the normal pointing from the soil to the cap;
    ``area (s,)`` the nodal area per radian (m^2/rad). On plane theta the relative motion
    cap - soil is (radial shear, opening, hoop shear) = ``sum_n diag(cos, cos, sin)(n theta)
    d_n``. Trial ``sigma = k_n (opening - opening_p)`` (tension positive) and
    ``tau = k_s (shear - slip)``; ``sigma > 0``: open (no traction, the plastic opening
    follows); else the shear is bounded by ``min(c - sigma tan_delta, -sigma)`` (the 45
    degree ramp of the slice's law: the strength vanishes continuously at lift-off), with a
    radial return on both shear directions. Tractions times the area per radian are
    projected back with the plane weights.
    """

    name: str
    soil: NDArray[np.int64]
    cap: NDArray[np.int64]
    tangent: NDArray[np.float64]
    normal: NDArray[np.float64]
    area: NDArray[np.float64]
    k_n: NDArray[np.float64]
    k_s: NDArray[np.float64]
    cohesion: NDArray[np.float64]
    tan_delta: NDArray[np.float64]
    planes: CircumferentialPlanes
    residual_tangent: float = 1e-6
    element_dofs: NDArray[np.int64] = field(init=False)

    def __post_init__(self) -> None:
        s = self.area.size
        R = np.zeros((s, 3, 3))  # local rows (radial shear, opening, hoop) of (U, W, V)
        R[:, 0, :2], R[:, 1, :2], R[:, 2, 2] = self.tangent, self.normal, 1.0
        self._B = np.concatenate([R, -R], axis=2)  # (s, 3, 6): d = u_cap - u_soil
        self.element_dofs = np.concatenate([self.cap, self.soil], axis=1)  # (s, 6)
        self._S, self._wS = _plane_family(self.planes)

    def stiffness(self, n: int) -> NDArray[np.float64]:
        """Closed, sticking contact: the element stiffness of harmonic n (c_n included)."""
        from .harmonic import harmonic_factor

        k = np.stack([self.k_s, self.k_n, self.k_s if n else 0.0 * self.k_s], axis=1)
        return harmonic_factor(n) * np.einsum("ski,sk,skj->sij", self._B,
                                              k * self.area[:, None], self._B)

    def initial_state(self) -> ContactPlaneState:
        m, s = self.planes.n_planes, self.area.size
        z = np.zeros((m, s, 3))
        f = np.zeros((m, s), dtype=bool)
        return ContactPlaneState(z, z.copy(), z.copy(), f, f.copy())

    def evaluate(self, u_e: NDArray[np.float64], state: ContactPlaneState,
                 tangent: bool = True):
        """Like :meth:`PlaneSprings.evaluate`."""
        d_amp = np.einsum("ski,hsi->hsk", self._B, u_e)  # (h, s, 3)
        d = np.einsum("mhk,hsk->msk", self._S, d_amp)  # (m, s, 3)
        kn, ks = self.k_n[None, :], self.k_s[None, :]
        sig_t = kn * (d[..., 1] - state.d_p[..., 1])  # tension positive
        is_open = sig_t > 0.0
        sig = np.where(is_open, 0.0, sig_t)
        shear = d[..., [0, 2]]
        tau_t = ks[..., None] * (shear - state.d_p[..., [0, 2]])  # (m, s, 2)
        size = np.hypot(tau_t[..., 0], tau_t[..., 1])
        coulomb = self.cohesion[None, :] - sig * self.tan_delta[None, :]
        ramp = -sig
        on_ramp = ramp < coulomb
        limit = np.where(is_open, 0.0, np.maximum(np.where(on_ramp, ramp, coulomb), 0.0))
        slope = np.where(on_ramp, 1.0, self.tan_delta[None, :])
        sliding = ~is_open & (size > limit)
        ratio = np.where(sliding, limit / np.maximum(size, 1e-300), 1.0)
        tau = np.where(is_open[..., None], 0.0, tau_t * ratio[..., None])
        d_p = state.d_p.copy()
        safe_ks = np.where(ks > 0, ks, 1.0)[..., None]
        slipped = np.where(is_open[..., None], shear, shear - tau / safe_ks)
        d_p[..., [0, 2]] = np.where((is_open | sliding)[..., None], slipped,
                                    state.d_p[..., [0, 2]])
        d_p[..., 1] = np.where(is_open, d[..., 1], state.d_p[..., 1])
        trac = np.stack([tau[..., 0], sig, tau[..., 1]], axis=-1)  # (m, s, 3) on the cap
        new = ContactPlaneState(d, d_p, trac, is_open, sliding)
        F = np.einsum("mhk,msk->hsk", self._wS, trac) * self.area[None, :, None]  # (h, s, 3)
        f_e = np.einsum("ski,hsk->hsi", self._B, F)
        if not tangent:
            return f_e, None, new
        rt = self.residual_tangent
        C = np.zeros((*d.shape[:2], 3, 3))  # (m, s, 3, 3) in (radial, opening, hoop)
        e = tau_t / np.maximum(size, 1e-300)[..., None]  # (m, s, 2)
        eye = np.eye(2)
        Css = np.where(sliding[..., None, None],
                       ratio[..., None, None] * (eye - e[..., :, None] * e[..., None, :]),
                       eye) * ks[..., None, None]
        Css = np.where(is_open[..., None, None], rt * ks[..., None, None] * eye, Css)
        C[..., 0, 0], C[..., 0, 2] = Css[..., 0, 0], Css[..., 0, 1]
        C[..., 2, 0], C[..., 2, 2] = Css[..., 1, 0], Css[..., 1, 1]
        C[..., 1, 1] = np.where(is_open, rt * kn, kn)
        coup = np.where(sliding, -slope * kn, 0.0)  # d tau / d opening
        C[..., 0, 1] = coup * e[..., 0]
        C[..., 2, 1] = coup * e[..., 1]
        C *= self.area[None, :, None, None]
        return f_e, _plane_blocks(self._wS, self._S, C, self._B,
                                  (is_open | sliding).any(axis=0)), new


# --------------------------------------------------------------------------- model
class CoupledModel:
    """Harmonics ``planes.harmonics`` of ``base`` in one vector; ``nonlinear`` maps the index
    of a block of ``base.blocks`` to its nonlinear replacement (same ``element_dofs``)."""

    def __init__(self, base: HarmonicModel, planes: CircumferentialPlanes,
                 nonlinear: dict[int, object]) -> None:
        self.base, self.planes = base, planes
        self.harmonics = list(planes.harmonics)
        if max(self.harmonics) > base.n_max:
            raise ValueError(f"harmonic {max(self.harmonics)} above the model's n_max "
                             f"{base.n_max}")
        self.n1 = base.n_dofs
        self.h = len(self.harmonics)
        self.nonlinear = dict(nonlinear)
        self.blocks = [self.nonlinear[i] for i in sorted(self.nonlinear)]
        n_extra = self.n1 - 3 * base.mesh.n_nodes
        self._linear = []  # per harmonic: element matrices of every base block (zeros for
        for n in self.harmonics:  # the nonlinear ones) and the point DOFs
            mats = [np.zeros((*b.element_dofs.shape, b.element_dofs.shape[1]))
                    if i in self.nonlinear else b.stiffness(n)
                    for i, b in enumerate(base.blocks)]
            self._linear.append(mats + [np.zeros(n_extra)])
        self._K_lin = [base.pattern.assemble(m) for m in self._linear]
        #: a constant internal force (n_dofs,): initial stresses of linear blocks
        self.initial_force = np.zeros(self.n_dofs)

    @property
    def n_dofs(self) -> int:
        return self.h * self.n1

    def initial_states(self) -> list:
        return [b.initial_state() for b in self.blocks]

    def split(self, u: NDArray[np.float64]) -> NDArray[np.float64]:
        return np.asarray(u).reshape(self.h, self.n1)

    def evaluate(self, u: NDArray[np.float64], states: list, tangent: bool = True):
        """Internal force ``(n_dofs,)``, a function building the :class:`CoupledTangent`
        (None when ``tangent`` is False) and the trial states at the coupled amplitudes
        ``u``."""
        t0 = time.perf_counter()
        U = self.split(u)
        F = np.stack([K @ U[a] for a, K in enumerate(self._K_lin)])  # (h, n1)
        F += self.split(self.initial_force)
        trial, parts = [], []
        for i, st in zip(sorted(self.nonlinear), states, strict=True):
            blk = self.nonlinear[i]
            ed = blk.element_dofs
            f_e, tan, new = blk.evaluate(U[:, ed], st, tangent)
            for a in range(self.h):
                F[a] += np.bincount(ed.ravel(), weights=f_e[a].ravel(), minlength=self.n1)
            trial.append(new)
            parts.append((i, tan))
        SOLVER_STATS["material_s"] += time.perf_counter() - t0
        if not tangent:
            return F.reshape(-1), None, trial

        def make() -> CoupledTangent:
            t = time.perf_counter()
            out = CoupledTangent(self, [(i, tan() if callable(tan) else tan)
                                        for i, tan in parts])
            SOLVER_STATS["material_s"] += time.perf_counter() - t
            return out

        return F.reshape(-1), make, trial


class CoupledTangent:
    """The tangent of a :class:`CoupledModel` state: per-harmonic element matrices and the
    coupling blocks of yielded cells and springs."""

    def __init__(self, model: CoupledModel, parts: list) -> None:
        self.model = model
        self.diagonal = [list(m) for m in model._linear]  # per harmonic, per base block
        self.coupling = []  # (element_dofs (p, i), blocks (h, h, p, i, i)) off the diagonal
        h = model.h
        for i, (diag, plastic, Kp) in parts:
            for a in range(h):
                self.diagonal[a][i] = diag[a]
            if plastic.size and h > 1:
                off = Kp.copy()
                off[np.arange(h), np.arange(h)] = 0.0
                self.coupling.append((model.base.blocks[i].element_dofs[plastic], off))

    def reduced_diagonal(self, cmap: CombinedMap) -> list[sp.csc_matrix]:
        pat = self.model.base.pattern
        return [p.reduced_from_elements(pat, self.diagonal[a])
                for a, p in enumerate(cmap.parts)]

    def coupling_matvec(self, u_full: NDArray[np.float64]) -> NDArray[np.float64]:
        """The coupling blocks times full coupled amplitudes ``u_full`` (full vector)."""
        m = self.model
        U = m.split(u_full)
        out = np.zeros((m.h, m.n1))
        for ed, off in self.coupling:
            ue = U[:, ed]  # (h, p, i)
            y = np.einsum("abpij,bpj->api", off, ue)  # (h, p, i)
            for a in range(m.h):
                out[a] += np.bincount(ed.ravel(), weights=y[a].ravel(), minlength=m.n1)
        return out.reshape(-1)

    def reduced(self, cmap: CombinedMap) -> sp.csc_matrix:
        """The whole reduced coupled tangent ``T^T K T`` (CSC)."""
        A = sp.block_diag(self.reduced_diagonal(cmap), format="csc")
        if self.coupling:
            A = (A + (cmap.TT @ self.coupling_matrix() @ cmap.T)).tocsc()
        return A

    def coupling_matrix(self) -> sp.csr_matrix:
        m = self.model
        rows, cols, vals = [], [], []
        off = np.arange(m.h) * m.n1
        for ed, blk in self.coupling:
            r = off[:, None, None, None, None] + ed[None, None, :, :, None]
            c = off[None, :, None, None, None] + ed[None, None, :, None, :]
            r, c = np.broadcast_arrays(r, c, blk)[:2]
            rows.append(r.ravel())
            cols.append(c.ravel())
            vals.append(blk.ravel())
        if not rows:
            return sp.csr_matrix((m.n_dofs, m.n_dofs))
        return sp.coo_matrix((np.concatenate(vals), (np.concatenate(rows),
                                                     np.concatenate(cols))),
                             shape=(m.n_dofs, m.n_dofs)).tocsr()


# --------------------------------------------------------------------------- solvers
class _BlockPreconditioner:
    """Factorized diagonal blocks of a coupled tangent."""

    def __init__(self, blocks: list[sp.csc_matrix], slices: list[slice]) -> None:
        t = time.perf_counter()
        self.lus = [factorize(A) for A in blocks]
        self.slices = slices
        SOLVER_STATS["block_factorizations"] += len(blocks)
        SOLVER_STATS["factor_s"] += time.perf_counter() - t

    def solve(self, r: NDArray[np.float64]) -> NDArray[np.float64]:
        out = np.empty_like(r)
        for lu, s in zip(self.lus, self.slices, strict=True):
            out[s] = lu.solve(r[s])
        return out


@dataclass
class KrylovSettings:
    """GMRES on the coupled tangent: relative tolerance, restart, iteration cap, and the
    iteration count above which the diagonal blocks are factorized again."""

    rtol: float = 1e-8
    restart: int = 60
    maxiter: int = 400
    refresh_after: int = 25


class _KrylovSolve:
    """``.solve(r)`` of a coupled tangent by preconditioned GMRES."""

    def __init__(self, tangent: CoupledTangent, cmap: CombinedMap, cache: dict,
                 settings: KrylovSettings) -> None:
        self.cmap, self.tangent, self.settings = cmap, tangent, settings
        self.blocks = tangent.reduced_diagonal(cmap)
        pre = cache.get("pre")
        if pre is None or cache.get("refresh") or cache.get("cmap") is not cmap:
            pre = _BlockPreconditioner(self.blocks, cmap.free_slices)
            cache.update(pre=pre, refresh=False, cmap=cmap)
        self.pre, self.cache = pre, cache
        n = cmap.n_free
        self.op = spla.LinearOperator((n, n), matvec=self.matvec, dtype=np.float64)
        self.M = spla.LinearOperator((n, n), matvec=pre.solve, dtype=np.float64)

    def matvec(self, x: NDArray[np.float64]) -> NDArray[np.float64]:
        y = np.empty_like(x)
        for A, s in zip(self.blocks, self.cmap.free_slices, strict=True):
            y[s] = A @ x[s]
        if self.tangent.coupling:
            y += self.cmap.TT @ self.tangent.coupling_matvec(self.cmap.T @ x)
        return y

    def solve(self, r: NDArray[np.float64]) -> NDArray[np.float64]:
        t = time.perf_counter()
        count = [0]

        def cb(_):
            count[0] += 1

        s = self.settings
        x, info = spla.gmres(self.op, r, M=self.M, rtol=s.rtol, restart=s.restart,
                             maxiter=s.maxiter, callback=cb, callback_type="pr_norm")
        SOLVER_STATS["gmres_iterations"] += count[0]
        SOLVER_STATS["solves"] += 1
        SOLVER_STATS["solve_s"] += time.perf_counter() - t
        if count[0] > s.refresh_after:
            self.cache["refresh"] = True  # the next tangent gets fresh diagonal factors
        if info != 0:
            self.cache["refresh"] = True
            raise SolverError(f"GMRES did not converge in {count[0]} iterations")
        return x


class _DirectSolve:
    """``.solve(r)`` of the whole coupled tangent, factorized by SuperLU."""

    def __init__(self, tangent: CoupledTangent, cmap: CombinedMap) -> None:
        t = time.perf_counter()
        self.lu = factorize(tangent.reduced(cmap))
        SOLVER_STATS["direct_factorizations"] += 1
        SOLVER_STATS["factor_s"] += time.perf_counter() - t

    def solve(self, r: NDArray[np.float64]) -> NDArray[np.float64]:
        t = time.perf_counter()
        x = self.lu.solve(r)
        SOLVER_STATS["solves"] += 1
        SOLVER_STATS["solve_s"] += time.perf_counter() - t
        return x


class _LaggedSolve:
    """``.solve(r)`` by GMRES on the assembled coupled tangent, preconditioned by the
    factorization of an earlier coupled tangent (kept while GMRES converges within
    ``settings.refresh_after`` iterations, then refactorized): Newton-Krylov with a lagged
    preconditioner, fewer factorizations than the direct solve."""

    def __init__(self, tangent: CoupledTangent, cmap: CombinedMap, cache: dict,
                 settings: KrylovSettings) -> None:
        A = tangent.reduced(cmap)
        self.A, self.cache, self.settings = A, cache, settings
        if cache.get("lu") is None or cache.get("refresh") or cache.get("cmap") is not cmap:
            t = time.perf_counter()
            cache.update(lu=factorize(A), refresh=False, cmap=cmap, fresh=True)
            SOLVER_STATS["direct_factorizations"] += 1
            SOLVER_STATS["factor_s"] += time.perf_counter() - t
        else:
            cache["fresh"] = False
        self.fresh = cache["fresh"]
        self.lu = cache["lu"]

    def solve(self, r: NDArray[np.float64]) -> NDArray[np.float64]:
        t = time.perf_counter()
        SOLVER_STATS["solves"] += 1
        if self.fresh:  # the factorization is of this very tangent
            x = self.lu.solve(r)
            SOLVER_STATS["solve_s"] += time.perf_counter() - t
            return x
        n = r.size
        M = spla.LinearOperator((n, n), matvec=self.lu.solve, dtype=np.float64)
        count = [0]

        def cb(_):
            count[0] += 1

        s = self.settings
        x, info = spla.gmres(self.A, r, M=M, rtol=s.rtol, restart=s.restart,
                             maxiter=s.maxiter, callback=cb, callback_type="pr_norm")
        SOLVER_STATS["gmres_iterations"] += count[0]
        SOLVER_STATS["solve_s"] += time.perf_counter() - t
        if info != 0 or count[0] > s.refresh_after:
            self.cache["refresh"] = True
        if info != 0:
            raise SolverError(f"GMRES did not converge in {count[0]} iterations")
        return x


def coupled_residual(model: CoupledModel, solver: str = "krylov",
                     krylov: KrylovSettings | None = None):
    """A residual factory for :class:`~femcore.stepping.Stepper`: ``(cmap, f_ext, states) ->
    (u_free -> (r, solver_of_tangent, scale, payload))`` with ``solver`` "krylov" or
    "direct" (module docstring). The Krylov preconditioner is shared by every call of one
    factory (one stage)."""
    if solver not in ("krylov", "direct", "lagged"):
        raise ValueError(f"solver {solver!r}: use 'lagged', 'krylov' or 'direct'")
    cache: dict = {}
    settings = krylov or KrylovSettings()
    lagged = krylov or KrylovSettings(rtol=1e-8, refresh_after=8)

    def factory(cmap: CombinedMap, f_ext: NDArray[np.float64], states: list):
        f_ext_red = np.linalg.norm(cmap.reduce_vector(f_ext))

        def residual(u_free):
            u = cmap.expand(u_free)
            f_int, tangent, trial = model.evaluate(u, states)
            r_full = f_int - f_ext
            generalized = cmap.generalized(r_full)
            scale = max(f_ext_red, float(np.linalg.norm(generalized[cmap.fixed])))

            def make():
                tan = tangent()
                if solver == "direct":
                    return _DirectSolve(tan, cmap)
                if solver == "lagged":
                    return _LaggedSolve(tan, cmap, cache, lagged)
                return _KrylovSolve(tan, cmap, cache, settings)

            return cmap.reduce_vector(r_full), make, scale, (u, trial, generalized)

        return residual

    return factory
