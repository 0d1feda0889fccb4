"""Requirement checks of the design file's ``[requirements]``, each a :class:`RequirementCheck`.

* ``static_stiffness``: secant M / theta of the pushover at ``static_stiffness_moment``
  (operational moduli E of each layer) >= ``static_stiffness_min``;
* ``dynamic_stiffness``: the small-strain (G0) elastic stiffness (harmonic 3D solve where the
  design allows it) >= ``dynamic_stiffness_min``;
* ``capacity``: ultimate moment (of the design-strength pushover when the design has
  ``[design_strength]``) / ``resistance_factor`` >= ``design_moment``; a censored ultimate
  (no plateau before the rotation cap) reads "not reached" with its lower bound;
* ``no_pile_tension``: the least pile axial compression up to ``no_tension_moment`` >= 0.

A check whose data are missing (the curve never reached the moment, no G0 given) is reported
with ``passed = None`` and the reason, never dropped.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

from .design import Design
from .keypoints import KeyPoint, rotation_at_moment
from .records import DynamicStiffness, RequirementCheck

__all__ = ["check_requirements"]


def _ratio_check(name: str, value: float | None, required: float, unit: str, detail: str,
                 why_missing: str, **extra) -> RequirementCheck:
    if value is None:
        return RequirementCheck(name, None, required, unit, None, None,
                                f"{detail}; not decided: {why_missing}", extra)
    return RequirementCheck(name, float(value), required, unit, bool(value >= required),
                            float(value / required - 1.0), detail, extra)


def _capacity_check(req, ult: KeyPoint | None, factored: KeyPoint | None,
                    stopped: str | None = None) -> RequirementCheck:
    """Ultimate / resistance factor against the design moment. A censored ultimate (no
    plateau before the rotation cap) is a lower bound: the check reads "not reached" with
    that bound, never pass or fail."""
    use = factored if factored is not None else ult
    which = "design-strength (factored) ultimate" if factored is not None else \
        "ultimate moment"
    extra = {"resistance_factor": req.resistance_factor, "source":
             "design_strength" if factored is not None else "characteristic"}
    detail = f"{which} / resistance factor {req.resistance_factor:g} against the design moment"
    if use is None or use.value is None:
        return _ratio_check("capacity", None, req.design_moment, "kNm", detail,
                            stopped or "no pushover curve", censored=None, **extra)
    value = use.value / req.resistance_factor
    if use.extra.get("censored"):
        return RequirementCheck(
            "capacity", float(value), req.design_moment, "kNm", None, None,
            f"{detail}; not reached: no plateau before the rotation cap, the capacity is at "
            f"least {value:.6g} kNm (a lower bound)", {**extra, "censored": True,
                                                        "lower_bound": float(value)})
    return _ratio_check("capacity", value, req.design_moment, "kNm", detail, "",
                        censored=False, **extra)


def check_requirements(design: Design, rotation: NDArray[np.float64],
                       moment: NDArray[np.float64], keypoints: dict[str, KeyPoint],
                       min_compression: Sequence[float],
                       dynamic: DynamicStiffness | None,
                       factored_ultimate: KeyPoint | None = None,
                       stopped: str | None = None) -> dict[str, RequirementCheck]:
    """All requirement checks of ``design`` for a pushover curve.

    Parameters
    ----------
    rotation, moment : (n_steps,) the M-theta curve (rad, kNm 3D estimate)
    keypoints : key points of the curve (``ultimate`` is used)
    min_compression : (n_steps,) least pile axial compression of each step (kN per pile)
    dynamic : the dynamic stiffness, or None when it was not computed
    factored_ultimate : the ultimate of the design-strength pushover; when given, the
        capacity check uses it instead of the characteristic ``ultimate``
    stopped : why the run has no curve (e.g. "the run stopped in the self-weight stage"):
        the reason every undecided check gives
    """
    req = design.requirements
    out: dict[str, RequirementCheck] = {}
    if req.static_stiffness_min is not None and req.static_stiffness_moment is not None:
        t = rotation_at_moment(rotation, moment, req.static_stiffness_moment) \
            if len(rotation) else None
        k = None if not t else req.static_stiffness_moment / t
        out["static_stiffness"] = _ratio_check(
            "static_stiffness", k, req.static_stiffness_min, "kNm/rad",
            f"secant M/theta at M = {req.static_stiffness_moment:g} kNm, operational E of each "
            "layer (pushover)", stopped or "the pushover did not reach that moment",
            at_moment=req.static_stiffness_moment)
    if req.dynamic_stiffness_min is not None:
        value = None if dynamic is None else dynamic.value
        why = stopped or ("the dynamic analysis was switched off" if dynamic is None else
                          (dynamic.reason or ""))
        out["dynamic_stiffness"] = _ratio_check(
            "dynamic_stiffness", value, req.dynamic_stiffness_min, "kNm/rad",
            "small-strain G0 moduli, elastic, M / theta under a moment ("
            + (dynamic.method if dynamic is not None else "not computed") + ")", why,
            at_moment=req.dynamic_stiffness_moment)
    if req.design_moment is not None:
        out["capacity"] = _capacity_check(req, keypoints.get("ultimate"), factored_ultimate,
                                          stopped)
    if req.no_tension_moment is not None:
        m = np.asarray(moment, dtype=np.float64)
        comp = np.asarray(min_compression, dtype=np.float64)
        within = m <= req.no_tension_moment
        worst = float(comp[within].min()) if comp.size and np.any(within) else None
        reached = bool(m.size and m.max() >= req.no_tension_moment)
        detail = f"least pile axial compression up to M = {req.no_tension_moment:g} kNm"
        if worst is None or not reached:
            out["no_pile_tension"] = RequirementCheck(
                "no_pile_tension", worst, 0.0, "kN", None, None,
                detail + "; not decided: " + (stopped or "the pushover did not reach that "
                                              "moment"),
                {"up_to_moment": req.no_tension_moment})
        else:
            out["no_pile_tension"] = RequirementCheck(
                "no_pile_tension", worst, 0.0, "kN", bool(worst >= 0.0), None, detail,
                {"up_to_moment": req.no_tension_moment})
    return out
