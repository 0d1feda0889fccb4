"""The design file: what the engineer describes (soil, cap, piles, loads, requirements).

One pydantic schema validates TOML input, exports a JSON Schema with units in every
description (``tiltfe schema``) and is the object the analysis reads. Units: kN, m, kPa,
kN/m^3, degrees for friction and dilation angles, radians for rotations.

Bad input raises :class:`DesignError` with one line per problem: the field path, the value
and the allowed range.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, model_validator

__all__ = ["AnalysisSettings", "SoilLayer", "Soil", "Cap", "PileRing", "Piles", "Loading",
           "Requirements", "Keypoints", "DesignStrength", "UnitRates", "Design", "ROTATION_CAP",
           "design_from_dict", "load_design",
           "DesignError", "demo_design", "SCHEMA_VERSION"]

SCHEMA_VERSION = "1"

#: joins several problems found by one validator (a problem's own text may hold "; ")
PROBLEM_SEP = "\n"

#: Default rotation cap of the pushover, rad: 95 % or more of the example design space
#: reach their plateau before it (README, docs/keypoints.md).
ROTATION_CAP = 0.05

Pos = Annotated[float, Field(gt=0, allow_inf_nan=False)]
NonNeg = Annotated[float, Field(ge=0, allow_inf_nan=False)]


class DesignError(ValueError):
    """A design value is missing, out of range or inconsistent. ``problems`` lists them."""

    def __init__(self, problems: list[str] | str) -> None:
        self.problems = [problems] if isinstance(problems, str) else list(problems)
        super().__init__("\n".join(self.problems))


def _is_number_type(annotation) -> bool:
    """True for float / int annotations (also inside Optional and Annotated)."""
    import typing

    if annotation in (float, int):
        return True
    args = typing.get_args(annotation)
    origin = typing.get_origin(annotation)
    if origin is typing.Annotated:
        return _is_number_type(args[0])
    if origin in (typing.Union, getattr(__import__("types"), "UnionType", None)):
        options = [a for a in args if a is not type(None)]
        return bool(options) and all(_is_number_type(a) for a in options)
    return False


def _bounds(field) -> str:
    """`` (> 0, <= 60)``-style bounds of a field, from its constraints."""
    import typing

    marks = list(field.metadata)
    ann = field.annotation
    for a in typing.get_args(ann) or ():
        if typing.get_origin(a) is typing.Annotated:
            for m in typing.get_args(a)[1:]:
                marks += list(getattr(m, "metadata", [m]))
    out = []
    for m in marks:
        for attr, sym in (("gt", ">"), ("ge", ">="), ("lt", "<"), ("le", "<=")):
            v = getattr(m, attr, None)
            if v is not None:
                out.append(f"{sym} {v:g}")
    return f" ({', '.join(out)})" if out else ""


def _unit(field) -> str:
    """The unit a field's description ends with (``"cap diameter, m"`` -> ``"m"``)."""
    text = (field.description or "").rsplit(", ", 1)
    unit = text[-1].split(":")[0].strip() if len(text) == 2 else ""
    return unit if 0 < len(unit) <= 8 and " " not in unit else ""


def _allowed_number(field) -> str:
    """`` in m (> 2, <= 60)``: what a numeric field accepts."""
    unit = _unit(field)
    return (f" in {unit}" if unit else "") + _bounds(field)


def _field_at(loc: tuple) -> Any:
    """The pydantic field an error location ends in (None where it cannot be followed)."""
    import typing

    model: Any = Design
    info = None
    for part in loc:
        if isinstance(part, int):
            continue
        if model is None or part not in getattr(model, "model_fields", {}):
            return None
        info = model.model_fields[part]
        model = None
        stack = [info.annotation]
        while stack:
            a = stack.pop()
            if isinstance(a, type) and issubclass(a, BaseModel):
                model = a
                break
            stack += list(typing.get_args(a))
    return info


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, validate_default=True,
                              allow_inf_nan=False)

    @model_validator(mode="before")
    @classmethod
    def _numbers_are_numbers(cls, data: Any) -> Any:
        """A boolean or a string where a number belongs is refused (``true`` would become
        1, ``"22"`` 22.0 silently)."""
        if isinstance(data, dict):
            bad = [f"{k}: expected a number{_allowed_number(cls.model_fields[k])}, got {v!r}"
                   for k, v in data.items()
                   if k in cls.model_fields and isinstance(v, (bool, str))
                   and _is_number_type(cls.model_fields[k].annotation)]
            if bad:
                raise ValueError(PROBLEM_SEP.join(bad))
        return data


class AnalysisSettings(_Model):
    """How the design is analysed."""

    geometry: Literal["plane_strain", "axisymmetric", "harmonic"] = Field(
        "plane_strain", description="plane_strain (moment-rotation pushover of a slice), "
        "axisymmetric (vertical only) or harmonic (the 3D pushover of the real geometry: "
        "the axisymmetric mesh with coupled circumferential harmonics and smeared pile "
        "rings)")
    harmonics: int = Field(
        4, ge=1, le=12, description="highest circumferential harmonic n of the harmonic "
        "model (1-12); elastic loads live in n = 0 and 1; yield local in theta couples the "
        "higher ones (4 gives the demo's ultimate moment within 1 % of 8)")
    planes: int | None = Field(
        None, ge=3, le=200, description="circumferential planes over [0, pi] on which the "
        "harmonic pushover evaluates plasticity (theta = 0 and pi included); at least "
        "harmonics + 2; default 2 harmonics + 1")
    element: Literal["T6", "T15"] = Field(
        "T15", description="soil triangles: T15 = 15-node quartic (default: accurate undrained "
        "collapse loads in plane strain and axisymmetry, where low-order triangles lock; Sloan "
        "& Randolph 1982, Numerical prediction of collapse loads using finite element "
        "methods) or T6 = 6-node quadratic (about 4x faster, collapse loads a few % high)")
    mesh: Literal["coarse", "standard", "fine"] = Field(
        "standard", description="element size near piles and cap: 3.0 / 1.6 / 1.0 m")
    support: Literal["continuum", "springs"] = Field(
        "continuum", description="soil continuum with embedded piles, or springs only "
        "(subgrade reaction, rigid cap)")
    slice_length: Pos | Literal["calibrated", "cap_rule"] = Field(
        "calibrated", description="out-of-plane length L of the plane-strain slice, m; "
        "'calibrated' (default): L such that the slice's elastic rotational stiffness equals "
        "the harmonic 3D solve of the same design; 'cap_rule': L = 16 R / (3 pi) of the cap "
        "radius R")
    row_merge: Pos = Field(0.25, description="pile projections within this distance of the "
                           "first pile of a row merge into it, m")
    domain_factor: float = Field(2.0, ge=1.0, le=6.0,
                                 description="soil beyond the cap edge, in cap diameters")


class SoilLayer(_Model):
    """A horizontal soil layer (top to bottom in the file)."""

    name: str = Field(description="layer name (free text)")
    thickness: float = Field(gt=0, le=1000.0, description="layer thickness, m (at most 1000)")
    model: Literal["tresca", "mohr_coulomb", "elastic"] = Field(
        description="tresca (undrained, total stress), mohr_coulomb (drained, effective "
        "stress) or elastic")
    gamma: float = Field(gt=0, le=30, description="unit weight above the water table, kN/m3")
    gamma_sat: float | None = Field(None, gt=0, le=30,
                                    description="unit weight below the water table, kN/m3")
    E: Pos | None = Field(None, description="Young's modulus at the layer top, kPa (undrained "
                          "E_u for tresca; default 200 s_u)")
    E_gradient: NonNeg = Field(0.0, description="increase of E with depth, kPa/m")
    nu: float | None = Field(None, ge=0.0, lt=0.5,
                             description="Poisson's ratio (default 0.49 tresca, 0.3 otherwise)")
    su: Pos | None = Field(None, description="undrained shear strength at the layer top, kPa")
    su_gradient: NonNeg = Field(0.0, description="increase of s_u with depth, kPa/m")
    c: NonNeg = Field(0.0, description="effective cohesion, kPa (mohr_coulomb)")
    phi: float = Field(0.0, ge=0.0, le=50.0, description="friction angle, degrees")
    psi: float = Field(0.0, ge=0.0, le=50.0, description="dilation angle, degrees (<= phi)")
    K0: float | None = Field(None, gt=0.0, le=3.0, description="earth pressure at rest "
                             "(default 1 - sin(phi) drained, 0.7 undrained)")
    G0: Pos | None = Field(None, description="small-strain shear modulus, kPa (dynamic "
                           "stiffness)")

    @property
    def undrained(self) -> bool:
        return self.model == "tresca"

    @property
    def E_top(self) -> float:
        """Young's modulus at the layer top in use, kPa: ``E``, or 200 s_u for a Tresca layer
        without it."""
        return self.E if self.E is not None else 200.0 * self.su

    @property
    def poisson(self) -> float:
        """Poisson's ratio in use: ``nu``, or 0.49 undrained and 0.3 otherwise."""
        return self.nu if self.nu is not None else (0.49 if self.undrained else 0.3)

    @property
    def k0(self) -> float:
        """Earth pressure coefficient at rest in use: ``K0``, or 0.7 undrained and
        1 - sin(phi) drained (Jaky 1944)."""
        if self.K0 is not None:
            return self.K0
        return 0.7 if self.undrained else 1.0 - math.sin(math.radians(self.phi))

    @model_validator(mode="after")
    def _check(self) -> SoilLayer:
        if self.model == "tresca" and self.su is None:
            raise ValueError("model = 'tresca' needs su (kPa, > 0)")
        if self.model != "tresca" and self.E is None:
            raise ValueError(f"model = {self.model!r} needs E (kPa, > 0)")
        if self.psi > self.phi:
            raise ValueError(f"psi = {self.psi} exceeds phi = {self.phi}: need psi <= phi")
        if self.model == "mohr_coulomb" and self.phi == 0 and self.c == 0:
            raise ValueError("mohr_coulomb with phi = 0 and c = 0 has no strength: give phi "
                             "(degrees, 0-50) or c (kPa)")
        return self


class Soil(_Model):
    layers: list[SoilLayer] = Field(min_length=1, description="layers from the ground down")
    water_table: NonNeg = Field(1e9, description="depth of the water table below ground, m")


class Cap(_Model):
    """Circular concrete cap (its section through the centre in plane strain)."""

    diameter: float = Field(gt=2.0, le=60.0, description="cap diameter, m")
    underside_depth: float = Field(gt=0.0, le=10.0, description="depth of the underside "
                                   "below ground, m")
    edge_thickness: Pos = Field(description="thickness at the edge, m")
    centre_thickness: Pos = Field(description="thickness at the centre (pedestal edge), m")
    pedestal_diameter: Pos = Field(description="pedestal diameter, m")
    pedestal_height: NonNeg = Field(0.0, description="pedestal height above the cap top, m")
    E: float = Field(3.3e7, gt=1e6, le=1e8, description="concrete Young's modulus, kPa")
    nu: float = Field(0.2, ge=0.0, lt=0.5, description="concrete Poisson's ratio")
    gamma: float = Field(25.0, gt=0.0, le=30.0, description="concrete unit weight, kN/m3")
    contact: Literal["none", "bonded", "frictional"] = Field(
        "none", description="cap on soil: none (the cap touches no soil: underside and edge "
        "free, the backfill above it only a weight on its top), bonded, or frictional "
        "(underside: Coulomb, no tension: lift-off)")

    @model_validator(mode="after")
    def _check(self) -> Cap:
        if self.edge_thickness > self.centre_thickness:
            raise ValueError(f"edge_thickness = {self.edge_thickness} m exceeds "
                             f"centre_thickness = {self.centre_thickness} m")
        if self.pedestal_diameter >= self.diameter:
            raise ValueError(f"pedestal_diameter = {self.pedestal_diameter} m must be smaller "
                             f"than diameter = {self.diameter} m")
        return self


class PileRing(_Model):
    radius: NonNeg = Field(description="ring radius, m (0: one pile at the centre)")
    count: int = Field(ge=1, le=200, description="number of piles in the ring")
    rake: float = Field(0.0, ge=0.0, le=0.34, description="outward rake, horizontal per "
                        "vertical (1/6 for 1:6; at most about 1:3)")
    angle_offset: float = Field(0.0, ge=-180.0, le=360.0,
                                description="angle of the first pile from the +x axis, degrees")


class Piles(_Model):
    width: float = Field(gt=0.1, le=3.0, description="pile width (square side or diameter), m")
    length: float = Field(gt=2.0, le=80.0, description="pile length along its axis, m")
    rings: list[PileRing] = Field(min_length=1, description="ring layout")
    shape: Literal["square", "circular"] = Field("square", description="cross-section shape")
    E: float = Field(3.5e7, gt=1e6, le=3e8, description="pile Young's modulus, kPa")
    head: Literal["fixed", "pinned"] = Field("fixed", description="connection to the cap")
    alpha: float | None = Field(None, gt=0.0, le=1.5,
                                description="shaft adhesion factor in clay (default API)")
    beta: float | None = Field(None, gt=0.0, le=2.0,
                               description="shaft friction factor in sand (default "
                               "tan(phi - 5))")
    lateral_factor: float = Field(9.0, ge=1.0, le=15.0, description="N_p for clay (Broms: 9)")
    slip_stiffening: float = Field(
        10.0, ge=1.0, le=1000.0,
        description="continuum support only: how many times stiffer the pile-soil slip "
        "springs are than the subgrade-reaction springs of the springs-only model (the soil "
        "continuum already carries the soil's deformation; the slip springs add only the "
        "local slip at the pile wall, about a tenth of the subgrade compliance at 10)")


class Loading(_Model):
    vertical: NonNeg = Field(description="vertical turbine load at the tower base, kN")
    control: Literal["rotation", "lever", "settlement"] = Field(
        "lever", description="pushover control: rotation, lever (H = M/h), or settlement "
        "(axisymmetric)")
    lever_arm: Pos | None = Field(None, description="h = M/H of the load case, m (lever)")
    horizontal: float = Field(0.0, description="horizontal load held under rotation control, "
                              "kN")
    rotation_max: float = Field(
        ROTATION_CAP, gt=1e-4, le=0.1, description="rotation cap of the pushover, rad: the "
        "pushover ends here, or earlier where the moment-rotation curve holds its plateau")
    stop_at_plateau: bool = Field(True, description="end the pushover once the curve holds "
                                  "its plateau (the capacity); false runs to rotation_max")
    initial_increment: float = Field(2e-6, gt=1e-9, lt=1e-5,
                                     description="first rotation increment, rad (< 1e-5)")
    settlement_max: float = Field(0.1, gt=0.0, le=2.0,
                                  description="target settlement (control = settlement), m")

    @model_validator(mode="after")
    def _check(self) -> Loading:
        if self.control == "lever" and self.lever_arm is None:
            raise ValueError("control = 'lever' needs lever_arm (m, > 0)")
        return self


class Requirements(_Model):
    static_stiffness_min: Pos | None = Field(None, description="minimum static rotational "
                                             "stiffness, kNm/rad")
    static_stiffness_moment: Pos | None = Field(None, description="moment at which the static "
                                                "secant stiffness is checked, kNm")
    dynamic_stiffness_min: Pos | None = Field(None, description="minimum dynamic rotational "
                                              "stiffness (small-strain moduli), kNm/rad")
    dynamic_stiffness_moment: Pos | None = Field(None, description="moment of the dynamic "
                                                 "check (operational), kNm")
    design_moment: Pos | None = Field(None, description="factored design moment, kNm")
    resistance_factor: float = Field(1.0, ge=1.0, le=3.0, description="capacity is divided "
                                     "by this before the comparison")
    no_tension_moment: Pos | None = Field(None, description="moment up to which no pile may "
                                          "be in tension, kNm")

    @model_validator(mode="after")
    def _companions(self) -> Requirements:
        if self.static_stiffness_min is not None and self.static_stiffness_moment is None:
            raise ValueError("static_stiffness_min needs static_stiffness_moment (the moment "
                             "of the secant check, kNm, > 0); without it the check would "
                             "not be made")
        if self.static_stiffness_moment is not None and self.static_stiffness_min is None:
            raise ValueError("static_stiffness_moment needs static_stiffness_min (kNm/rad, "
                             "> 0)")
        return self


class DesignStrength(_Model):
    """Partial factors on the soil strength for a second, factored pushover (each >= 1,
    dividing the characteristic value). Which values apply is the user's responsibility
    (EN 1997-1 and its national annex)."""

    su: float = Field(1.0, ge=1.0, le=3.0, description="factor on the undrained shear "
                      "strength s_u (and its gradient)")
    c: float = Field(1.0, ge=1.0, le=3.0, description="factor on the effective cohesion c'")
    tan_phi: float = Field(1.0, ge=1.0, le=3.0, description="factor on tan(phi'); the "
                           "dilation angle is capped at the factored phi'")
    pile_resistance: float = Field(1.0, ge=1.0, le=3.0, description="factor on the pile "
                                   "shaft, tip and lateral resistances (after the soil "
                                   "factors)")


class Keypoints(_Model):
    rotations: list[Annotated[float, Field(gt=0, le=0.1)]] = Field(
        [0.001, 0.003, 0.005], description="rotations for 'moment at', rad")
    moments: list[Pos] = Field([], description="moments for secant stiffness, kNm")


class UnitRates(_Model):
    """Unit rates for a cost index (any one currency or a relative unit: the index is the
    sum of each rate times its quantity, for comparing variants, not a cost estimate)."""

    concrete: NonNeg = Field(0.0, description="per m3 of cap and pedestal concrete (placed, "
                             "with its reinforcement if the rate includes it)")
    pile_metre: NonNeg = Field(0.0, description="per m of pile (along its axis)")
    pile_concrete: NonNeg = Field(0.0, description="per m3 of pile concrete")
    pile_each: NonNeg = Field(0.0, description="per pile (a fixed cost per pile)")


class Design(_Model):
    """A piled wind-turbine foundation and its load case."""

    name: str = Field(description="design name (free text)")
    soil: Soil
    cap: Cap
    piles: Piles
    loading: Loading
    analysis: AnalysisSettings = Field(default_factory=AnalysisSettings)
    requirements: Requirements = Field(default_factory=Requirements)
    keypoints: Keypoints = Field(default_factory=Keypoints)
    design_strength: DesignStrength | None = Field(
        None, description="partial factors for a second pushover with design strengths; the "
        "capacity requirement is then checked against its capacity")
    unit_rates: UnitRates | None = Field(
        None, description="unit rates for the cost index of the quantities (optional)")

    @property
    def pile_tip_depth(self) -> float:
        """Depth of the deepest pile tip below ground (m)."""
        max_rake = max(r.rake for r in self.piles.rings)
        return self.cap.underside_depth + self.piles.length / math.sqrt(1 + max_rake**2)

    @property
    def model_depth(self) -> float:
        """Depth of the soil model (m): the deeper of the pile tips + one cap diameter and two
        cap diameters (continuum), or the pile tips (springs). The one soil-depth rule: the
        schema checks the layers reach it, the builder meshes to it."""
        if self.analysis.support != "continuum":
            return self.pile_tip_depth
        return max(self.pile_tip_depth + self.cap.diameter, 2 * self.cap.diameter)

    @model_validator(mode="after")
    def _geometry(self) -> Design:
        problems = []
        R = self.cap.diameter / 2
        w = self.piles.width
        for i, ring in enumerate(self.piles.rings):
            if ring.radius == 0 and (ring.count != 1 or ring.rake != 0):
                problems.append(f"piles.rings.{i}: radius 0 is one vertical centre pile "
                                f"(need count = 1 and rake = 0, got count = {ring.count}, "
                                f"rake = {ring.rake})")
            if ring.radius + w / 2 > R:
                problems.append(f"piles.rings.{i}.radius = {ring.radius} m: the piles must lie "
                                f"inside the cap (radius + width/2 <= {R} m)")
            spacing = 2 * math.pi * ring.radius / ring.count
            if ring.count > 1 and spacing < 2 * w:
                problems.append(f"piles.rings.{i}.count = {ring.count}: pile spacing "
                                f"{spacing:.2f} m is below 2 widths ({2 * w:.2f} m)")
        radii = sorted(r.radius for r in self.piles.rings)
        for a, b in zip(radii, radii[1:], strict=False):
            if b - a < 2 * w:
                problems.append(f"piles.rings: radii {a} m and {b} m overlap (need at least "
                                f"2 pile widths = {2 * w:.2f} m between rings)")
        total = sum(ly.thickness for ly in self.soil.layers)
        needed = self.model_depth
        if total < needed:
            rule = ("the deeper of pile tips + one cap diameter and two cap diameters"
                    if self.analysis.support == "continuum" else "the pile tips")
            problems.append(f"soil.layers: total thickness {total:.2f} m must reach "
                            f"{needed:.2f} m ({rule}); thicken the last layer")
        if self.cap.centre_thickness > self.cap.underside_depth + 3.0:
            problems.append(f"cap.centre_thickness = {self.cap.centre_thickness} m: the cap top "
                            "may stand at most 3 m above ground (use pedestal_height)")
        if self.analysis.geometry == "axisymmetric" and self.analysis.support != "continuum":
            problems.append("analysis.support must be 'continuum' for axisymmetric analyses "
                            f"(got {self.analysis.support!r})")
        if self.analysis.geometry == "harmonic":
            if self.analysis.support != "continuum":
                problems.append("analysis.support must be 'continuum' for harmonic analyses "
                                f"(got {self.analysis.support!r})")
            an = self.analysis
            if an.planes is not None and an.planes < an.harmonics + 2:
                problems.append(f"analysis.planes = {an.planes}: too few for analysis.harmonics"
                                f" = {an.harmonics} (need >= {an.harmonics + 2}, harmonics + 2,"
                                " at most 200)")
            for i, ring in enumerate(self.piles.rings):
                if ring.count < 3 and ring.radius > 0:
                    problems.append(f"piles.rings.{i}.count = {ring.count}: a ring of the "
                                    "harmonic model needs at least 3 piles (allowed: 3-200, "
                                    "or radius 0 with one centre pile)")
        lo = self.loading
        if lo.control == "lever" and lo.lever_arm is not None and lo.lever_arm < self.cap.diameter:
            problems.append(f"loading.lever_arm = {lo.lever_arm} m is too short to control the "
                            f"rotation: need lever_arm >= cap.diameter = {self.cap.diameter} m "
                            "(H = M/h, below it the horizontal load governs: a sliding check, "
                            "not a moment-rotation pushover)")
        if lo.control != "settlement" and self.keypoints.rotations and \
                max(self.keypoints.rotations) > lo.rotation_max:
            problems.append(f"loading.rotation_max = {lo.rotation_max} rad is below the largest "
                            f"key-point rotation {max(self.keypoints.rotations)} rad: need "
                            f"rotation_max >= {max(self.keypoints.rotations)} (at most 0.1)")
        if self.analysis.geometry == "axisymmetric" and self.loading.control != "settlement":
            problems.append("loading.control must be 'settlement' for axisymmetric analyses")
        if self.loading.control == "settlement" and self.analysis.geometry != "axisymmetric":
            problems.append("loading.control = 'settlement' needs analysis.geometry = "
                            "'axisymmetric'")
        if problems:
            raise ValueError(PROBLEM_SEP.join(problems))
        return self


#: keys of earlier versions of the design file and their new names
RENAMED = {"piles.interface_factor": "piles.slip_stiffening"}


def _format(exc: ValidationError) -> list[str]:
    out = []
    for err in exc.errors(include_url=False):
        path = ".".join(str(p) for p in err["loc"]) or "design"
        msg = err["msg"].removeprefix("Value error, ")
        if err["type"] == "missing":
            out.append(f"{path}: required field is missing")
        elif err["type"] == "extra_forbidden" and path in RENAMED:
            out.append(f"{path}: renamed to {RENAMED[path]} (same meaning and range)")
        elif err["type"] == "extra_forbidden":
            out.append(f"{path}: unknown key (value {err['input']!r}); check the spelling")
        elif err["type"] == "finite_number":
            info = _field_at(tuple(err["loc"]))
            allowed = _allowed_number(info) if info is not None else ""
            out.append(f"{path}: expected a finite number{allowed}, got {err['input']!r}")
        elif "expected a number" in msg:
            out += [f"{path}.{m.strip()}" if path != "design" else m.strip()
                    for m in msg.split(PROBLEM_SEP)]
        elif path == "design" and err["type"] == "value_error":  # the design-wide checks
            out += [m.strip() for m in msg.split(PROBLEM_SEP)]
        else:
            out.append(f"{path}: {msg} (got {err['input']!r})" if "input" in err and not
                       isinstance(err["input"], dict) else f"{path}: {msg}")
    return out


def design_from_dict(data: Any) -> Design:
    """Validate nested dicts (e.g. a parsed TOML file) into a Design."""
    if isinstance(data, Design):
        return data
    try:
        return Design.model_validate(data)
    except ValidationError as exc:
        raise DesignError(_format(exc)) from None


def load_design(path: str | Path) -> Design:
    """Read and validate a TOML design file."""
    if sys.version_info >= (3, 11):
        import tomllib
    else:  # pragma: no cover
        import tomli as tomllib
    p = Path(path)
    if p.is_dir():
        raise DesignError(f"{p}: is a folder, not a design file (give the .toml file)")
    if not p.is_file():
        raise DesignError(f"{p}: no such design file")
    try:
        text = p.read_text(encoding="utf-8-sig")  # a byte-order mark is not an error
    except OSError as exc:
        raise DesignError(f"{p}: cannot be read ({exc.strerror or exc})") from None
    except UnicodeDecodeError as exc:
        raise DesignError(f"{p}: not UTF-8 text ({exc.reason} at byte {exc.start})") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise DesignError(f"{p}: not valid TOML ({exc})") from None
    return design_from_dict(data)


def demo_design(**analysis) -> Design:
    """The invented demo: "Fennwick Polder", position FW-07 (fictitious site and turbine)."""
    return Design(
        name="Fennwick Polder FW-07",
        soil=Soil(water_table=0.6, layers=[
            SoilLayer(name="clay crust", thickness=1.2, model="tresca", gamma=17.0,
                      gamma_sat=17.0, su=30.0, E=6000.0, G0=12000.0),
            SoilLayer(name="peat", thickness=2.8, model="tresca", gamma=10.5, gamma_sat=10.5,
                      su=8.0, su_gradient=6.0 / 2.8, E=1600.0, E_gradient=430.0, G0=2500.0),
            SoilLayer(name="soft organic clay", thickness=8.5, model="tresca", gamma=15.5,
                      gamma_sat=15.5, su=12.0, su_gradient=1.4, E=2400.0, E_gradient=280.0,
                      G0=8000.0),
            SoilLayer(name="silty clay", thickness=4.0, model="tresca", gamma=17.5,
                      gamma_sat=17.5, su=40.0, E=8000.0, G0=25000.0),
            SoilLayer(name="dense sand", thickness=30.0, model="mohr_coulomb", gamma=19.0,
                      gamma_sat=20.5, E=40000.0, nu=0.3, c=0.5, phi=35.0, psi=5.0,
                      G0=90000.0),
        ]),
        cap=Cap(diameter=22.0, underside_depth=3.0, edge_thickness=1.2, centre_thickness=3.0,
                pedestal_diameter=6.4),
        piles=Piles(width=0.45, length=21.5, rings=[PileRing(radius=9.9, count=28, rake=1 / 6),
                                                    PileRing(radius=6.6, count=16)]),
        loading=Loading(vertical=8400.0, control="lever", lever_arm=92.0),
        analysis=AnalysisSettings(**analysis),
        requirements=Requirements(static_stiffness_min=30e6, static_stiffness_moment=138e3,
                                  dynamic_stiffness_min=150e6, dynamic_stiffness_moment=40e3,
                                  design_moment=186.3e3, resistance_factor=1.0,
                                  no_tension_moment=72e3),
        keypoints=Keypoints(rotations=[0.001, 0.003, 0.005], moments=[40e3, 138e3]),
        design_strength=DesignStrength(su=1.4, c=1.25, tan_phi=1.25),
    )
