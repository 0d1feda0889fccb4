"""Key points of a moment-rotation curve, each reported with its method and parameters.

The curve is ``theta`` (rad, increasing from 0) and ``M`` (kNm); (0, 0) is prepended when
missing. Different methods give different capacities, so every value says how it was found.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["KeyPoint", "analyse_curve", "secant_at_rotation", "rotation_at_moment",
           "moment_at_rotation", "bilinear_equal_energy", "tangent_intersection",
           "ultimate_plateau", "hyperbolic_fit"]


@dataclass
class KeyPoint:
    name: str
    value: float | None
    unit: str
    method: str
    parameters: dict = field(default_factory=dict)
    extra: dict = field(default_factory=dict)

    def as_dict(self) -> dict:
        return asdict(self)


def _curve(theta: ArrayLike, M: ArrayLike):
    th = np.asarray(theta, dtype=np.float64)
    m = np.asarray(M, dtype=np.float64)
    if th.size == 0 or th[0] != 0.0:
        th = np.concatenate([[0.0], th])
        m = np.concatenate([[0.0], m])
    return th, m


def moment_at_rotation(theta, M, rotation: float) -> float | None:
    """Linear interpolation of M at a rotation; None beyond the curve."""
    th, m = _curve(theta, M)
    if rotation > th[-1] * (1 + 1e-12):
        return None
    return float(np.interp(rotation, th, m))


def rotation_at_moment(theta, M, moment: float) -> float | None:
    """First rotation at which the curve reaches ``moment`` (interpolated); None if never."""
    th, m = _curve(theta, M)
    idx = np.flatnonzero(m >= moment)
    if idx.size == 0:
        return None
    k = int(idx[0])
    if k == 0:
        return 0.0
    return float(th[k - 1] + (moment - m[k - 1]) * (th[k] - th[k - 1]) / (m[k] - m[k - 1]))


def secant_at_rotation(theta, M, rotation: float) -> float | None:
    m = moment_at_rotation(theta, M, rotation)
    return None if m is None else m / rotation


def bilinear_equal_energy(theta, M, k_initial: float):
    """Elastic - perfectly plastic idealisation with the initial stiffness whose area up to the
    last rotation equals the curve's: M_y theta_max - M_y^2 / (2 K) = integral M dtheta."""
    th, m = _curve(theta, M)
    area = float(np.sum(0.5 * (m[1:] + m[:-1]) * np.diff(th)))  # trapezoidal rule
    tmax = th[-1]
    disc = (k_initial * tmax) ** 2 - 2 * k_initial * area
    if disc < 0:
        return None, None
    my = k_initial * tmax - np.sqrt(disc)
    return float(my / k_initial), float(my)


def tangent_intersection(theta, M, k_initial: float, tail: float = 0.1):
    """Intersection of the initial tangent with the final tangent (least-squares line through
    the last ``tail`` fraction of the rotation range)."""
    th, m = _curve(theta, M)
    sel = th >= th[-1] * (1 - tail)
    if sel.sum() < 2:
        sel = slice(-2, None)
    kf, c = np.polyfit(th[sel], m[sel], 1)
    if k_initial - kf <= 0:
        return None, None
    t = c / (k_initial - kf)
    return float(t), float(k_initial * t)


def ultimate_plateau(theta, M, k_initial: float, ratio: float = 0.02):
    """First point where the tangent falls below ``ratio`` x initial stiffness: (theta, M,
    censored). If never, the maximum moment, flagged censored."""
    th, m = _curve(theta, M)
    tang = np.diff(m) / np.diff(th)
    idx = np.flatnonzero(tang < ratio * k_initial)
    if idx.size:
        k = int(idx[0])
        return float(th[k]), float(m[k]), False
    k = int(np.argmax(m))
    return float(th[k]), float(m[k]), True


def hyperbolic_fit(theta, M, skip: float = 0.0):
    """Chin-Kondner: theta / M = a + b theta. Returns (a, b, R^2); M_ult = 1/b, K_0 = 1/a."""
    th, m = _curve(theta, M)
    sel = (th > skip) & (m > 0)
    x, y = th[sel], th[sel] / m[sel]
    if x.size < 3:
        return None, None, None
    b, a = np.polyfit(x, y, 1)
    pred = a + b * x
    ss_res = float(np.sum((y - pred) ** 2))
    ss_tot = float(np.sum((y - y.mean()) ** 2))
    r2 = 1.0 - ss_res / ss_tot if ss_tot > 0 else 1.0
    return float(a), float(b), r2


def analyse_curve(theta, M, rotations=(), moments=(), initial_rotation: float = 1e-5,
                  plateau_ratio: float = 0.02) -> dict[str, KeyPoint]:
    """Every key point of a curve in (rad, kNm): stiffnesses, moments, yield, ultimate."""
    th, m = _curve(theta, M)
    out: dict[str, KeyPoint] = {}
    k0 = secant_at_rotation(th, m, initial_rotation)
    out["initial_stiffness"] = KeyPoint(
        "initial_stiffness", k0, "kNm/rad", "secant M/theta at a small rotation",
        {"rotation": initial_rotation},
        {"note": "first increment below this rotation"} if th[1] < initial_rotation else
        {"note": "first increment above this rotation: extrapolated from the first point"})
    if k0 is None or th[1] > initial_rotation:
        k0 = m[1] / th[1]
        out["initial_stiffness"].value = k0
    for mo in moments:
        t = rotation_at_moment(th, m, mo)
        out[f"secant_stiffness@{mo:g}"] = KeyPoint(
            f"secant_stiffness@{mo:g}", None if t in (None, 0.0) else mo / t, "kNm/rad",
            "secant M/theta at a moment", {"moment": mo}, {"rotation": t})
    for r in rotations:
        out[f"moment_at@{r:g}"] = KeyPoint(f"moment_at@{r:g}", moment_at_rotation(th, m, r),
                                           "kNm", "moment at a rotation", {"rotation": r})
    ty, my = bilinear_equal_energy(th, m, k0)
    out["yield_equal_energy"] = KeyPoint("yield_equal_energy", my, "kNm",
                                         "bilinear equal-energy idealisation",
                                         {"initial_stiffness": k0, "theta_max": th[-1]},
                                         {"rotation": ty})
    ti, mi = tangent_intersection(th, m, k0)
    out["yield_tangents"] = KeyPoint("yield_tangents", mi, "kNm",
                                     "initial / final tangent intersection",
                                     {"final_tangent_fraction": 0.1}, {"rotation": ti})
    tu, mu, censored = ultimate_plateau(th, m, k0, plateau_ratio)
    out["ultimate"] = KeyPoint("ultimate", mu, "kNm",
                               "plateau: tangent below a fraction of the initial stiffness"
                               if not censored else "maximum moment (no plateau: censored)",
                               {"tangent_ratio": plateau_ratio},
                               {"rotation": tu, "censored": censored})
    a, b, r2 = hyperbolic_fit(th, m)
    out["ultimate_hyperbolic"] = KeyPoint(
        "ultimate_hyperbolic", None if not b or b <= 0 else 1.0 / b, "kNm",
        "hyperbolic fit theta/M = a + b theta (Chin-Kondner)", {},
        {"a": a, "b": b, "r2": r2, "initial_stiffness": None if not a else 1.0 / a})
    return out
