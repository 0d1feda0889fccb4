"""Key points of a moment-rotation curve, each reported with its method and parameters.

The curve is ``theta`` (rad, increasing from 0) and ``M`` (kNm); (0, 0) is prepended when
missing. Different methods give different capacities, so every value says how it was found.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

import numpy as np
from numpy.typing import ArrayLike

#: rotation of the initial secant stiffness of a curve, rad (a pushover lands on it)
INITIAL_ROTATION = 1e-5

__all__ = ["KeyPoint", "Plateau", "plateau", "plateau_measure", "INITIAL_ROTATION",
           "PLATEAU_TANGENT", "PLATEAU_LOG_SLOPE", "PLATEAU_WINDOW", "PLATEAU_CONFIRM",
           "analyse_curve", "secant_at_rotation", "rotation_at_moment",
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


#: The plateau rule (see :func:`plateau_measure`): the chord tangent over the last 20 % of
#: the rotation below 2 % of the initial stiffness or below 10 % of the secant, holding
#: from there to 1.5 times that rotation.
PLATEAU_TANGENT = 0.02
PLATEAU_LOG_SLOPE = 0.10
PLATEAU_WINDOW = 1.25
PLATEAU_CONFIRM = 1.5


@dataclass(frozen=True)
class Plateau:
    """Where a curve reaches its plateau: ``rotation`` and ``moment`` at the interpolated
    crossing (None: not reached), and whether the curve holds it to ``PLATEAU_CONFIRM``
    times that rotation (``confirmed``)."""

    rotation: float | None
    moment: float | None
    confirmed: bool


def plateau_measure(theta, M, k_initial: float):
    """The plateau measure ``g`` at the curve points (``g <= 1``: on the plateau).

    ``g = min(t / (PLATEAU_TANGENT K0), t / (PLATEAU_LOG_SLOPE M / theta))``, ``t`` the
    chord slope of the curve over ``[theta / PLATEAU_WINDOW, theta]``:

    * the chord over a fixed fraction of the rotation makes ``t`` independent of the
      increment sizes;
    * the tangent limit (2 % of K0) is the common practice for reading a capacity off a
      hardening FE curve, and stays met on a long, slowly hardening tail;
    * the secant limit (log-slope d ln M / d ln theta below 0.1: doubling the rotation adds
      under 7 %) falls steeply through the knee, so its crossing is well-posed where the
      tangent alone hovers around 2 % of K0 for many mrad; and a curve that hardens only
      just above 2 % of K0 after a sharp knee is not pushed to the rotation cap.

    Returns (theta, g) at the curve points above the first window."""
    th, m = _curve(theta, M)
    pts = th[th >= th[1] * PLATEAU_WINDOW] if th.size > 1 else th[:0]
    if pts.size == 0:
        return pts, pts
    lo = pts / PLATEAU_WINDOW
    m_pts, m_lo = np.interp(pts, th, m), np.interp(lo, th, m)
    t = (m_pts - m_lo) / (pts - lo)
    with np.errstate(divide="ignore", invalid="ignore"):
        g_tan = t / (PLATEAU_TANGENT * k_initial) if k_initial > 0 else np.full_like(t, np.inf)
        g_sec = np.where(m_pts > 0, t * pts / (PLATEAU_LOG_SLOPE * np.maximum(m_pts, 1e-300)),
                         np.inf)
    return pts, np.minimum(g_tan, g_sec)


def plateau(theta, M, k_initial: float) -> Plateau:
    """The plateau of a curve (measure: :func:`plateau_measure`), crossing interpolated.

    The plateau rotation is the first crossing of ``g = 1`` (linear in ``g`` between two
    curve points) after which ``g <= 1`` holds up to ``PLATEAU_CONFIRM`` times that
    rotation; its moment is the curve's moment there. A crossing the curve has not yet
    held that far is returned unconfirmed."""
    th, m = _curve(theta, M)
    pts, g = plateau_measure(th, m, k_initial)
    if pts.size < 2:
        return Plateau(None, None, False)
    on = g <= 1.0
    starts = np.flatnonzero(on & np.concatenate([[True], ~on[:-1]]))
    last = None
    for k in starts:
        if k == 0:
            tp = float(pts[0])
        else:
            gk, gn = (g[k - 1] if np.isfinite(g[k - 1]) else 1e30), g[k]
            frac = (gk - 1.0) / (gk - gn) if gk > gn else 1.0
            tp = float(pts[k - 1] + frac * (pts[k] - pts[k - 1]))
        window = (pts > tp) & (pts <= PLATEAU_CONFIRM * tp * (1 + 1e-9))
        held = bool(np.all(g[window] <= 1.0))
        reached = th[-1] >= PLATEAU_CONFIRM * tp * (1 - 1e-9)
        if held:
            last = Plateau(tp, float(np.interp(tp, th, m)), bool(reached))
            if reached:
                return last
    return last if last is not None else Plateau(None, None, False)


def ultimate_plateau(theta, M, k_initial: float, ratio: float = 0.02):
    """The ultimate of a load-displacement curve by a tangent limit: the first crossing of
    ``tangent = ratio * k_initial`` (interpolated between increments) with ``censored``
    False, or the maximum with ``censored`` True. Used for the settlement curves of
    axisymmetric runs; moment-rotation curves use :func:`plateau`."""
    th, m = _curve(theta, M)
    tang = np.diff(m) / np.diff(th)
    idx = np.flatnonzero(tang < ratio * k_initial)
    if idx.size:
        k = int(idx[0])
        if k == 0:
            return float(th[1]), float(m[1]), False
        t0, t1 = tang[k - 1], tang[k]
        frac = (t0 - ratio * k_initial) / (t0 - t1) if t0 > t1 else 1.0
        # the tangents belong to the mid-points of their increments
        mid0, mid1 = 0.5 * (th[k - 1] + th[k]), 0.5 * (th[k] + th[k + 1])
        tu = float(mid0 + frac * (mid1 - mid0))
        return tu, float(np.interp(tu, th, m)), False
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


def analyse_curve(theta, M, rotations=(), moments=(), initial_rotation: float = INITIAL_ROTATION,
                  require_confirmed: bool = False) -> dict[str, KeyPoint]:
    """Every key point of a curve in (rad, kNm): stiffnesses, moments, yield, ultimate.

    ``require_confirmed`` True: a plateau that the curve has not held to
    ``PLATEAU_CONFIRM`` times its rotation still counts as censored."""
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
    pl = plateau(th, m, k0)
    rule = {"tangent_ratio": PLATEAU_TANGENT, "log_slope": PLATEAU_LOG_SLOPE,
            "chord_window": PLATEAU_WINDOW, "confirm": PLATEAU_CONFIRM}
    if pl.rotation is not None and (pl.confirmed or not require_confirmed):
        out["ultimate"] = KeyPoint("ultimate", pl.moment, "kNm",
                                   "plateau: chord tangent < 2 % of K0 or < 10 % of the "
                                   "secant, interpolated", rule,
                                   {"rotation": pl.rotation, "censored": False,
                                    "confirmed": pl.confirmed, "end_rotation": float(th[-1])})
    else:
        k = int(np.argmax(m))
        out["ultimate"] = KeyPoint("ultimate", float(m[k]), "kNm",
                                   "maximum moment: no plateau within the rotation reached "
                                   "(censored: a lower bound)", rule,
                                   {"rotation": float(th[k]), "censored": True,
                                    "confirmed": False, "end_rotation": float(th[-1])})
    a, b, r2 = hyperbolic_fit(th, m)
    out["ultimate_hyperbolic"] = KeyPoint(
        "ultimate_hyperbolic", None if not b or b <= 0 else 1.0 / b, "kNm",
        "hyperbolic fit theta/M = a + b theta (Chin-Kondner)", {},
        {"a": a, "b": b, "r2": r2, "initial_stiffness": None if not a else 1.0 / a})
    return out
