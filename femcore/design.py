"""The design: what the engineer describes (soil, cap, piles, loads, requirements).

Plain frozen dataclasses with units in every field comment; :func:`design_from_dict` builds a
design from nested dicts (the TOML file format and its schema validation build on this).
Units: kN, m, kPa, kN/m^3, degrees for friction and dilation angles, radians for rotations.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields, is_dataclass
from typing import Any

__all__ = ["Analysis", "SoilLayer", "Soil", "Cap", "PileRing", "Piles", "Loading",
           "Requirements", "Keypoints", "Design", "design_from_dict", "DesignError",
           "demo_design"]


class DesignError(ValueError):
    """A design value is missing, out of range or inconsistent."""


@dataclass(frozen=True)
class Analysis:
    geometry: str = "plane_strain"  # plane_strain | axisymmetric (vertical loading only)
    element: str = "T15"  # T6 | T15
    mesh: str = "standard"  # coarse | standard | fine
    support: str = "continuum"  # continuum | springs
    slice_length: float | None = None  # m; default 16 R / (3 pi)
    row_merge: float = 1.0  # m; projected rows closer than this are merged
    domain_factor: float = 2.0  # lateral extent beyond the cap edge, in cap diameters


@dataclass(frozen=True)
class SoilLayer:
    name: str
    thickness: float  # m
    model: str  # tresca | mohr_coulomb | elastic
    gamma: float  # kN/m^3 above the water table
    gamma_sat: float | None = None  # kN/m^3 below it (default gamma)
    E: float | None = None  # kPa (undrained E_u for tresca); default 200 s_u for tresca
    E_gradient: float = 0.0  # kPa/m
    nu: float | None = None  # default 0.49 (tresca), 0.3 otherwise
    su: float | None = None  # kPa at the layer top (tresca)
    su_gradient: float = 0.0  # kPa/m
    c: float = 0.0  # kPa (mohr_coulomb)
    phi: float = 0.0  # degrees
    psi: float = 0.0  # degrees
    K0: float | None = None  # default 1 - sin(phi) (drained) or 0.7 (undrained)
    G0: float | None = None  # kPa, small-strain shear modulus (dynamic stiffness)

    @property
    def undrained(self) -> bool:
        return self.model == "tresca"


@dataclass(frozen=True)
class Soil:
    layers: tuple[SoilLayer, ...]
    water_table: float = 1e9  # m below ground


@dataclass(frozen=True)
class Cap:
    diameter: float  # m
    underside_depth: float  # m below ground
    edge_thickness: float  # m
    centre_thickness: float  # m
    pedestal_diameter: float  # m
    pedestal_height: float = 0.0  # m above the cap top at the centre
    E: float = 3.3e7  # kPa
    nu: float = 0.2
    gamma: float = 25.0  # kN/m^3
    contact: str = "none"  # none | bonded | frictional


@dataclass(frozen=True)
class PileRing:
    radius: float  # m
    count: int
    rake: float = 0.0  # horizontal per vertical, outward (1/6 for 1:6)
    angle_offset: float = 0.0  # degrees


@dataclass(frozen=True)
class Piles:
    width: float  # m (side of a square pile, or diameter)
    length: float  # m along the pile axis
    rings: tuple[PileRing, ...]
    shape: str = "square"  # square | circular
    E: float = 3.5e7  # kPa
    head: str = "fixed"  # fixed | pinned
    alpha: float | None = None  # shaft adhesion factor in clay (default API alpha(psi))
    beta: float | None = None  # shaft friction factor in sand (default tan(phi - 5))
    lateral_factor: float = 9.0  # N_p for clay
    interface_factor: float = 10.0  # continuum only: interface springs x this (see build.py)


@dataclass(frozen=True)
class Loading:
    vertical: float  # kN (turbine, at the tower base, compression positive)
    control: str = "lever"  # rotation | lever | settlement (axisymmetric, vertical only)
    lever_arm: float | None = None  # m (= M/H of the load case), for control = lever
    horizontal: float = 0.0  # kN held during a rotation-controlled pushover
    rotation_max: float = 0.01  # rad
    initial_increment: float = 2e-6  # rad (first rotation increment, < 1e-5)
    settlement_max: float = 0.1  # m, for control = settlement


@dataclass(frozen=True)
class Requirements:
    static_stiffness_min: float | None = None  # kNm/rad
    static_stiffness_moment: float | None = None  # kNm at which the secant is checked
    dynamic_stiffness_min: float | None = None  # kNm/rad (small-strain moduli)
    dynamic_stiffness_moment: float | None = None  # kNm
    design_moment: float | None = None  # kNm (factored)
    resistance_factor: float = 1.0  # capacity divided by this must exceed the design moment
    no_tension_moment: float | None = None  # kNm up to which no pile may be in tension


@dataclass(frozen=True)
class Keypoints:
    rotations: tuple[float, ...] = (0.001, 0.003, 0.005)  # rad
    moments: tuple[float, ...] = ()  # kNm for secant stiffness


@dataclass(frozen=True)
class Design:
    name: str
    soil: Soil
    cap: Cap
    piles: Piles
    loading: Loading
    analysis: Analysis = field(default_factory=Analysis)
    requirements: Requirements = field(default_factory=Requirements)
    keypoints: Keypoints = field(default_factory=Keypoints)


def _build(cls, data: Any, path: str):
    if is_dataclass(data):
        return data
    if not isinstance(data, dict):
        raise DesignError(f"{path}: expected a table, got {type(data).__name__}")
    names = {f.name: f for f in fields(cls)}
    unknown = set(data) - set(names)
    if unknown:
        raise DesignError(f"{path}: unknown key(s) {sorted(unknown)}; allowed: {sorted(names)}")
    kwargs = {}
    for key, value in data.items():
        sub = _NESTED.get((cls, key))
        if sub is None:
            kwargs[key] = tuple(value) if isinstance(value, list) else value
        elif isinstance(value, (list, tuple)):
            kwargs[key] = tuple(_build(sub, v, f"{path}.{key}.{i}") for i, v in enumerate(value))
        else:
            kwargs[key] = _build(sub, value, f"{path}.{key}")
    try:
        return cls(**kwargs)
    except TypeError as exc:
        raise DesignError(f"{path}: {exc}") from None


_NESTED = {
    (Soil, "layers"): SoilLayer,
    (Piles, "rings"): PileRing,
    (Design, "soil"): Soil,
    (Design, "cap"): Cap,
    (Design, "piles"): Piles,
    (Design, "loading"): Loading,
    (Design, "analysis"): Analysis,
    (Design, "requirements"): Requirements,
    (Design, "keypoints"): Keypoints,
}


def design_from_dict(data: dict) -> Design:
    """A Design from nested dicts (keys as the dataclass fields)."""
    return _build(Design, data, "design")


def demo_design(**analysis) -> Design:
    """The invented demo: "Fennwick Polder", position FW-07 (fictitious site and turbine)."""
    soil = Soil(water_table=0.6, layers=(
        SoilLayer("clay crust", 1.2, "tresca", 17.0, 17.0, su=30.0, E=6000.0, G0=12000.0),
        SoilLayer("peat", 2.8, "tresca", 10.5, 10.5, su=8.0, su_gradient=6.0 / 2.8,
                  E=1000.0, E_gradient=0.0, G0=2500.0),
        SoilLayer("soft organic clay", 8.5, "tresca", 15.5, 15.5, su=12.0, su_gradient=1.4,
                  E=2400.0, E_gradient=280.0, G0=8000.0),
        SoilLayer("silty clay", 4.0, "tresca", 17.5, 17.5, su=40.0, E=8000.0, G0=25000.0),
        SoilLayer("dense sand", 30.0, "mohr_coulomb", 19.0, 20.5, E=40000.0, nu=0.3, c=0.5,
                  phi=35.0, psi=5.0, G0=90000.0),
    ))
    cap = Cap(diameter=22.0, underside_depth=3.0, edge_thickness=1.2, centre_thickness=3.0,
              pedestal_diameter=6.4)
    piles = Piles(width=0.45, length=21.5, rings=(PileRing(9.9, 28, 1 / 6),
                                                    PileRing(6.6, 16, 0.0)))
    loading = Loading(vertical=8400.0, control="lever", lever_arm=92.0, rotation_max=0.005)
    req = Requirements(static_stiffness_min=30e6, static_stiffness_moment=138e3,
                       dynamic_stiffness_min=150e6, dynamic_stiffness_moment=40e3,
                       design_moment=186.3e3, resistance_factor=1.0, no_tension_moment=72e3)
    kp = Keypoints(rotations=(0.001, 0.003, 0.005), moments=(40e3, 138e3))
    return Design("Fennwick Polder FW-07", soil, cap, piles, loading, Analysis(**analysis), req,
                  kp)
