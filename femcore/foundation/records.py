"""Typed result records of one foundation run: requirement checks, pile envelopes, the dynamic
stiffness, and the caution every output carries.

Each record has ``as_dict()`` giving exactly what ``result.json`` holds for it (plain JSON types,
units in the field names or in ``unit``).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Literal

__all__ = ["Status", "RequirementCheck", "PileEnvelope", "DynamicStiffness", "CAUTION"]

Status = Literal["ok", "censored", "diverged"]

CAUTION = (
    "Indicative results of a simplified model with idealised soil behaviour; not a "
    "foundation design. Design and certification must follow the turbine supplier's "
    "foundation specification, IEC 61400-6, the applicable national codes (e.g. EN 1997-1 "
    "with its national annex, EN 1992-1-1) and be carried out or checked by a qualified, "
    "licensed engineer. Cyclic, fatigue, long-term tilt and construction stages are outside "
    "a monotonic pushover."
)


@dataclass(frozen=True)
class RequirementCheck:
    """One requirement: the computed ``value`` against the ``required`` one.

    ``passed`` is None when the check could not be decided (e.g. the curve never reached the
    moment the check applies at); ``margin`` = value / required - 1 (None likewise). For
    ``no_pile_tension`` the value is the least axial compression (kN, per pile) up to the
    moment and ``required`` is 0.
    """

    name: str
    value: float | None
    required: float
    unit: str
    passed: bool | None
    margin: float | None
    detail: str
    extra: dict = field(default_factory=dict)

    def as_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class PileEnvelope:
    """Axial force (compression positive, kN per pile) and bending moment (kNm per pile) of one
    pile row over the whole pushover: extremes and envelopes along the pile."""

    row: int
    x: float  # m, head position in the slice
    count: float  # piles in the row
    rake: float
    max_compression: float
    max_tension: float
    max_bending_moment: float
    depth: list[float]  # m below ground, element centres
    compression_max: list[float]
    compression_min: list[float]
    moment_max: list[float]
    moment_min: list[float]

    def as_dict(self) -> dict:
        d = asdict(self)
        env = {k: d.pop(k) for k in ("depth", "compression_max", "compression_min",
                                     "moment_max", "moment_min")}
        d["envelope"] = env
        return d


@dataclass(frozen=True)
class DynamicStiffness:
    """Rotational stiffness of a linear elastic small-rotation analysis with the small-strain
    shear moduli G0 (kNm/rad; None with the ``reason`` when it cannot be computed)."""

    value: float | None
    moduli: str = "small-strain G0 (E = 2 G0 (1 + nu)), elastic"
    rotation: float | None = None
    dofs: int | None = None
    reason: str | None = None

    def as_dict(self) -> dict:
        return asdict(self)
