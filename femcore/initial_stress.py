"""Initial stresses: at-rest (K0) stresses of a layered, level profile with a water table.

Drained layers carry effective stresses in the material state; the steady pore pressure acts
as a fixed load ``f_pw = int B^T (u m) dV`` (m = [1, 1, 1, 0]), so equilibrium is written in
total stress and layer interfaces between drained and undrained soil balance exactly.
Undrained (Tresca, total-stress) layers carry total stresses and see no pore pressure term.
Unit weights: ``gamma`` above the water table, ``gamma_sat`` below (kN/m^3).

For level ground the K0 state is in exact equilibrium with gravity (and the pore pressure
load) whenever it lies in the finite element stress space; :func:`equilibrium_error` measures
it. The alternative, a self-weight solve (:func:`gravity_stresses`), solves the elastic problem
under the weights instead.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import NDArray

from materials.base import State

from .assembly import assemble_vector, element_internal_force
from .dofs import ConstraintMap
from .loads import body_force
from .model import Model, SolidBlock

__all__ = ["Layer", "Profile", "k0_stresses", "profile_loads", "apply_k0",
           "equilibrium_error", "gravity_stresses", "GAMMA_W"]

GAMMA_W = 9.81  # kN/m^3, unit weight of water (common practice: 9.81 or 10)


@dataclass(frozen=True)
class Layer:
    """A horizontal soil layer between depths ``top`` and ``bottom`` (m, positive down)."""

    top: float
    bottom: float
    gamma: float
    gamma_sat: float | None = None
    K0: float = 0.5
    drained: bool = True

    def __post_init__(self) -> None:
        if not self.bottom > self.top:
            raise ValueError(f"layer bottom {self.bottom} m must be below its top {self.top} m")
        if not self.gamma >= 0 or (self.gamma_sat is not None and not self.gamma_sat >= 0):
            raise ValueError("unit weights must be >= 0 kN/m3")
        if not self.K0 > 0:
            raise ValueError(f"K0 = {self.K0} must be > 0")


@dataclass(frozen=True)
class Profile:
    """Layers from the ground surface down, a water table depth and a surface surcharge."""

    layers: tuple[Layer, ...]
    water_table: float = np.inf
    surcharge: float = 0.0
    gamma_w: float = GAMMA_W

    def _breaks(self) -> NDArray[np.float64]:
        z = {0.0, *(ly.top for ly in self.layers), *(ly.bottom for ly in self.layers)}
        if np.isfinite(self.water_table):
            z.add(float(self.water_table))
        return np.array(sorted(z))  # (n_breaks,)

    def layer_index(self, depth: NDArray[np.float64]) -> NDArray[np.int64]:
        """Index of the layer containing each depth (the last layer continues below)."""
        bottoms = np.array([ly.bottom for ly in self.layers])
        return np.minimum(np.searchsorted(bottoms, depth, side="left"), len(self.layers) - 1)

    def unit_weight(self, depth: NDArray[np.float64]) -> NDArray[np.float64]:
        """Bulk unit weight at depth: gamma above the water table, gamma_sat below."""
        depth = np.asarray(depth, dtype=np.float64)
        k = self.layer_index(depth)
        g = np.array([ly.gamma for ly in self.layers])[k]
        gs = np.array([ly.gamma if ly.gamma_sat is None else ly.gamma_sat
                       for ly in self.layers])[k]
        return np.where(depth > self.water_table, gs, g)

    def pore_pressure(self, depth: NDArray[np.float64]) -> NDArray[np.float64]:
        """Hydrostatic pore pressure (kPa, compression positive)."""
        return self.gamma_w * np.maximum(np.asarray(depth) - self.water_table, 0.0)

    def total_vertical(self, depth: NDArray[np.float64]) -> NDArray[np.float64]:
        """Total vertical stress (kPa, compression positive), exact for piecewise-constant
        unit weights: integrated between break points, linear within them."""
        zb = self._breaks()
        mid = 0.5 * (zb[1:] + zb[:-1])
        sig_b = self.surcharge + np.concatenate([[0.0], np.cumsum(self.unit_weight(mid)
                                                                   * np.diff(zb))])
        depth = np.asarray(depth, dtype=np.float64)
        below = depth > zb[-1]
        out = np.interp(depth, zb, sig_b)
        return np.where(below, sig_b[-1] + self.unit_weight(depth) * (depth - zb[-1]), out)


def k0_stresses(profile: Profile, x: NDArray[np.float64]) -> NDArray[np.float64]:
    """K0 stresses ``(..., 4)`` (tension positive) at points ``x (..., 2)``.

    Drained layers: effective stresses. Undrained layers: total stresses with
    sigma_h = K0 sigma'_v + u.
    """
    depth = np.maximum(-np.asarray(x)[..., 1], 0.0)
    sv = profile.total_vertical(depth)
    u = profile.pore_pressure(depth)
    k = profile.layer_index(depth)
    K0 = np.array([ly.K0 for ly in profile.layers])[k]
    drained = np.array([ly.drained for ly in profile.layers])[k]
    sv_eff = sv - u
    sh_eff = K0 * sv_eff
    out = np.zeros((*depth.shape, 4))
    out[..., 1] = -np.where(drained, sv_eff, sv)
    out[..., 0] = out[..., 2] = -np.where(drained, sh_eff, sh_eff + u)
    return out


def profile_loads(model: Model, profile: Profile, blocks: Sequence[int] | None = None,
                  drained: Sequence[bool] | None = None) -> NDArray[np.float64]:
    """Weight of the soil blocks (unit weight from the profile at each point) plus the pore
    pressure load of drained blocks (``drained`` per block; default: from the layer)."""
    f = np.zeros(model.n_dofs)
    solid = [i for i, b in enumerate(model.blocks) if isinstance(b, SolidBlock)]
    blocks = solid if blocks is None else blocks
    for i in blocks:
        b = model.blocks[i]
        depth = np.maximum(-b.geom.x[..., 1], 0.0)  # (c, q)
        gamma = profile.unit_weight(depth)
        bf = np.zeros((*depth.shape, 2))
        bf[..., 1] = -gamma
        f += body_force(model.dofmap, model.mesh.cells[b.cells], b.geom, bf)
        k = profile.layer_index(depth)
        is_drained = (np.array([ly.drained for ly in profile.layers])[k] if drained is None
                      else np.full(depth.shape, bool(drained[i])))
        u = np.where(is_drained, profile.pore_pressure(depth), 0.0)
        if np.any(u):
            sig_w = np.zeros((*depth.shape, 4))
            sig_w[..., :3] = u[..., None]
            f += assemble_vector(model.n_dofs, b.element_dofs,
                                 element_internal_force(b.geom, sig_w))
    return f


def apply_k0(model: Model, profile: Profile, states: list[State],
             blocks: Sequence[int] | None = None) -> list[State]:
    """States with K0 stresses in the given blocks (default: every continuum block)."""
    blocks = set(i for i, b in enumerate(model.blocks) if isinstance(b, SolidBlock)) \
        if blocks is None else set(blocks)
    return [st.with_stress(k0_stresses(profile, b.geom.x)) if i in blocks else st
            for i, (b, st) in enumerate(zip(model.blocks, states, strict=True))]


def equilibrium_error(model: Model, cmap: ConstraintMap, states: list[State],
                      f_ext: NDArray[np.float64]) -> float:
    """Relative out-of-balance force ``||T^T (f_int - f_ext)|| / ||T^T f_ext||`` at u = 0."""
    f_int, _, _ = model.evaluate(np.zeros(model.n_dofs), states, tangent=False)
    r = cmap.reduce_vector(f_int - f_ext)
    return float(np.linalg.norm(r) / max(np.linalg.norm(cmap.reduce_vector(f_ext)), 1e-300))


def gravity_stresses(model: Model, cmap: ConstraintMap, f_ext: NDArray[np.float64],
                     states: list[State] | None = None) -> list[State]:
    """A self-weight solve: one elastic solve under ``f_ext``; returns stressed states with zero
    strain (the displacements of this stage are discarded, as is common practice)."""
    sol = model.solve_linear(cmap, f_ext, states)
    return [replace(st, strain=np.zeros_like(st.strain)) if isinstance(st, State) else st
            for st in sol.states]
