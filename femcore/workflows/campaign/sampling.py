"""Samples of a design space: points of the unit cube, their physical values, the hold-out set.

Each sample is a point ``u`` of the unit cube [0, 1)^d, one coordinate per ``[[parameter]]``,
mapped to a physical value by the parameter's distribution:

* ``uniform``: ``low + u (high - low)``;
* ``loguniform``: ``exp(log low + u (log high - log low))`` (uniform in the logarithm);
* ``choice``: entry ``floor(u n)`` of the ``n`` values (each value equally likely).

The unit points come from ``sampling.method``: ``sobol`` (scrambled Sobol' points of
scipy.stats.qmc; a power-of-two size keeps their balance), ``lhs`` (Latin hypercube) or
``grid`` (``k`` cell centres per axis, ``size = k^d``). A fixed seed gives identical samples.

The optional hold-out set (``holdout`` samples, seed ``holdout_seed``) follows the training
samples with its own ids. It uses the training method when that gives new points: Sobol' with
a power-of-two hold-out size, otherwise a Latin hypercube (a grid would only repeat itself).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:  # pragma: no cover
    from .space import ParameterSpec, Space

__all__ = ["unit_samples", "physical", "sample_space", "grid_side"]


def grid_side(n: int, d: int) -> int | None:
    """``k`` with ``k**d == n`` (points per axis of a full grid), or None."""
    k = max(1, round(n ** (1.0 / d)))
    for c in (k - 1, k, k + 1):
        if c >= 1 and c**d == n:
            return c
    return None


def unit_samples(method: str, n: int, d: int, seed: int) -> np.ndarray:
    """``(n, d)`` points of the unit cube by ``method`` (sobol | lhs | grid)."""
    from scipy.stats import qmc

    if method == "sobol":
        return qmc.Sobol(d, scramble=True, seed=seed).random(n)
    if method == "lhs":
        return qmc.LatinHypercube(d, seed=seed).random(n)
    k = grid_side(n, d)
    if k is None:
        raise ValueError(f"grid sampling: {n} samples are no full grid in {d} dimensions")
    axes = [(np.arange(k) + 0.5) / k] * d
    return np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, d)


def physical(p: ParameterSpec, u: float) -> Any:
    """The physical value of parameter ``p`` at unit coordinate ``u``."""
    if p.distribution == "uniform":
        return p.low + u * (p.high - p.low)
    if p.distribution == "loguniform":
        return float(math.exp(math.log(p.low) + u * (math.log(p.high) - math.log(p.low))))
    values = p.values or []
    return values[min(int(u * len(values)), len(values) - 1)]


def _holdout_method(method: str, n: int) -> str:
    if method == "sobol" and not n & (n - 1):
        return "sobol"
    return "lhs"


def sample_space(space: Space) -> list[dict]:
    """Samples ``{"id", "set", "unit", "values"}``: the training set first, then the hold-out.

    ``values`` maps each parameter path to its physical value (derived values are computed
    per design, see :func:`~femcore.workflows.campaign.space.design_dict`).
    """
    d = len(space.parameters)
    sets = [("train", space.method, space.size, space.seed)]
    if space.holdout:
        sets.append(("holdout", _holdout_method(space.method, space.holdout), space.holdout,
                     space.holdout_seed))
    out = []
    for name, method, n, seed in sets:
        for u in unit_samples(method, n, d, seed):
            values = {p.path: physical(p, float(x))
                      for p, x in zip(space.parameters, u, strict=True)}
            out.append({"id": len(out), "set": name, "unit": [float(x) for x in u],
                        "values": values})
    return out
