"""Typed result records of one foundation run: requirement checks, pile envelopes, the dynamic
stiffness, and the caution every output carries.

Each record has ``as_dict()`` giving exactly what ``result.json`` holds for it (plain JSON types,
units in the field names or in ``unit``).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Literal

__all__ = ["Status", "RequirementCheck", "PileEnvelope", "DynamicStiffness", "ElasticStiffness",
           "CAUTION"]

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

    @property
    def verdict(self) -> str:
        """PASS, FAIL, "not reached" (a capacity whose curve had no plateau before the
        rotation cap: only a lower bound is known) or "not decided"."""
        if self.passed is None:
            return "not reached" if self.extra.get("censored") else "not decided"
        return "PASS" if self.passed else "FAIL"


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
    """Rotational stiffness (kNm/rad) of a linear elastic analysis with the small-strain shear
    moduli G0, M / theta under a moment (no horizontal force); None with the ``reason`` when
    it cannot be computed.

    ``value`` comes from ``method``: the harmonic 3D solve where the design allows it, else
    the plane-strain slice; ``slice_value`` is the slice's figure at the slice length in use
    (None for harmonic-only runs)."""

    value: float | None
    moduli: str = "small-strain G0 (E = 2 G0 (1 + nu)), elastic"
    rotation: float | None = None
    dofs: int | None = None
    reason: str | None = None
    method: str = "plane-strain slice"
    slice_value: float | None = None

    def as_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class ElasticStiffness:
    """Elastic stiffness of the 3D foundation at the tower base from the harmonic model.

    ``value``: M / theta under the load case (lever: H = M / h; otherwise a moment), kNm/rad;
    ``moment``: M / theta under a pure moment (H = 0); ``K_R`` rocking with the base held
    horizontally, ``K_H`` (kN/m), ``K_HR`` (kN/rad, H per unit rotation with the base held),
    ``K_V`` (kN/m; None when the n = 0 solve was skipped, as in plane-strain runs).
    ``moduli``: "operational" (the layers' E) or "small_strain" (G0).
    """

    value: float
    moment: float
    K_R: float
    K_H: float
    K_HR: float
    K_V: float | None
    moduli: str
    lever_arm: float | None
    dofs: int
    seconds: dict
    near_field: list

    def as_dict(self) -> dict:
        return asdict(self)
