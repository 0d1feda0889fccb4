"""Material-point driver: strain- or mixed-controlled paths for one point.

Use it to check parameters (e.g. the triaxial strength a set of Mohr-Coulomb parameters
gives) and in the tests. Components ``[xx, yy, zz, xy]``; tension positive; engineering shear.

Example: drained triaxial compression from an isotropic effective stress of 100 kPa, the cell
pressure held (xx and zz stress-controlled), axial (yy) compression prescribed::

    path = drive(model, np.linspace(0, -0.02, 41)[:, None] * [0, 1, 0, 0],
                 strain_controlled=[False, True, False, True], stress=[-100, 0, -100, 0],
                 initial_stress=[-100, -100, -100, 0])
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .base import MaterialModel

__all__ = ["drive", "PointPath", "PointDriverError"]


class PointDriverError(RuntimeError):
    """The mixed-control iteration at a material point did not converge."""


@dataclass
class PointPath:
    strain: NDArray[np.float64]  # (n, 4)
    stress: NDArray[np.float64]  # (n, 4)
    yielded: NDArray[np.bool_]  # (n,)
    tangent: NDArray[np.float64]  # (n, 4, 4)


def drive(
    model: MaterialModel,
    strain_path: ArrayLike,
    strain_controlled: ArrayLike = (True, True, True, True),
    stress: ArrayLike = (0.0, 0.0, 0.0, 0.0),
    initial_stress: ArrayLike = (0.0, 0.0, 0.0, 0.0),
    depth: float = 1.0,
    max_iter: int = 50,
) -> PointPath:
    """Follow ``strain_path (n, 4)`` in the strain-controlled components while the others
    keep ``stress`` (kPa); returns every state along the path (the first is the initial one).

    Loops over path steps (one point, not a hot path).
    """
    path = np.atleast_2d(np.asarray(strain_path, dtype=np.float64))
    ctrl = np.asarray(strain_controlled, dtype=bool)
    target = np.asarray(stress, dtype=np.float64)
    free = ~ctrl
    state = model.initial_state(np.array([[[0.0, -depth]]]))
    state = replace(state, stress=np.asarray(initial_stress, dtype=np.float64).reshape(1, 1, 4))
    eps = np.zeros(4)
    out_eps, out_sig, out_y, out_C = [], [], [], []
    for step in path:
        eps = np.where(ctrl, step, eps)
        for _ in range(max_iter):
            sig, C, trial = model.update(eps.reshape(1, 1, 4), state)
            sig, C = sig[0, 0], C[0, 0]
            r = sig[free] - target[free]
            if not free.any() or np.abs(r).max() <= 1e-10 * max(1.0, np.abs(sig).max()):
                break
            # least squares: on an edge of the yield surface two stress-controlled components
            # can only move together (a singular but consistent block)
            eps[free] -= np.linalg.lstsq(C[np.ix_(free, free)], r, rcond=None)[0]
        else:
            raise PointDriverError(f"mixed control did not converge at strain {eps.tolist()}")
        state = trial
        out_eps.append(eps.copy())
        out_sig.append(sig.copy())
        out_y.append(bool(trial.yielded[0, 0]))
        out_C.append(C.copy())
    return PointPath(np.array(out_eps), np.array(out_sig), np.array(out_y), np.array(out_C))
