"""The space file of a campaign: which design values vary, how they are sampled and run.

A space file (TOML) names a base design and varies some of its values::

    base = "fennwick_fw07.toml"          # the design file, relative to the space file
    [analysis]                           # optional: overrides of the base's [analysis]
    mesh = "coarse"
    [[parameter]]                        # one per sampled value (at least one)
    path = "cap.diameter"                # dotted design path; list entries by index from 0
    distribution = "uniform"             # uniform | loguniform (low > 0) | choice
    low = 18.0                           # finite numbers, low < high, in the field's unit
    high = 26.0
    [[parameter]]
    path = "piles.rings.1.count"
    distribution = "choice"
    values = [12, 16]                    # non-empty list
    [[derived]]                          # computed per sample (see formulas.py)
    path = "piles.rings.0.radius"
    formula = "cap.diameter / 2 - 1.1"
    [sampling]
    method = "sobol"                     # sobol (size a power of two) | lhs | grid (k^d)
    size = 256                           # training samples, 1 to 2^20
    seed = 1                             # 0 to 2^32 - 1
    holdout = 32                         # optional hold-out samples (0 to 2^20)
    holdout_seed = 2                     # its own seed (must differ from seed)
    [run]
    time_limit = 300                     # s per run, > 0 and <= 86400 (checked per increment)
    retries = 1                          # 0 to 5: a diverged run is retried, first step / 4
    dynamic = true                       # false skips the small-strain stiffness (faster)
    design_strength = true               # false skips the base's [design_strength] pushover

Every key is checked by a pydantic schema (``extra="forbid"``: a mistyped key anywhere is
refused, :func:`space_json_schema` exports it as JSON Schema). Before any run the space is
also checked against its base design: the base with the ``[analysis]`` overrides must be a
valid design; every parameter and derived path must name a value there (the base file's
values and the schema's defaults); numeric distributions need numeric, non-integer fields;
no value is sampled or derived twice; every formula parses, reads only existing paths and
evaluates on the centre of the space. Each problem raises :class:`SpaceError` naming the field
(``sampling.size``, ``parameter.1.path``), the value and what is allowed.
"""

from __future__ import annotations

import copy
import hashlib
import json
import math
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal, get_args, get_origin

from pydantic import BaseModel, ConfigDict, Field, ValidationError, model_validator
from pydantic.fields import FieldInfo

from .formulas import Formula, FormulaError, parse_formula
from .paths import PATH_PATTERN, SpaceError, describe, get_path, path_problem, set_path
from .sampling import grid_side, physical

__all__ = ["SpaceSpec", "ParameterSpec", "DerivedSpec", "SamplingSpec", "RunSpec", "Space",
           "load_space", "space_from_dict", "space_json_schema", "design_dict", "SpaceError",
           "MAX_SIZE", "MAX_RETRIES", "MAX_TIME_LIMIT"]

MAX_SIZE = 2**20
MAX_SEED = 2**32 - 1
MAX_RETRIES = 5
MAX_TIME_LIMIT = 86400.0


def _field(default: Any = ..., *, allowed: str, meaning: str, **constraints: Any) -> Any:
    """A schema field whose ``allowed`` phrase is quoted by the error messages."""
    return Field(default, description=f"{meaning}; {allowed}",
                 json_schema_extra={"allowed": allowed}, **constraints)


class _Spec(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)


class ParameterSpec(_Spec):
    """One sampled design value."""

    path: str = _field(allowed="a dotted design path such as cap.diameter or soil.layers.2.su",
                       meaning="the design value to sample", pattern=PATH_PATTERN)
    distribution: Literal["uniform", "loguniform", "choice"] = _field(
        "uniform", allowed="'uniform', 'loguniform' or 'choice'",
        meaning="how the value is drawn")
    low: float | None = _field(None, allowed="a finite number below high, in the unit of the "
                               "design field (loguniform: > 0)", meaning="lower bound",
                               allow_inf_nan=False)
    high: float | None = _field(None, allowed="a finite number above low, in the unit of the "
                                "design field", meaning="upper bound", allow_inf_nan=False)
    values: list[int | float | str | bool] | None = _field(
        None, allowed="a non-empty list of values (numbers, texts or booleans)",
        meaning="choice: the values, each equally likely", min_length=1)

    @model_validator(mode="after")
    def _check(self) -> ParameterSpec:
        d = self.distribution
        if d == "choice":
            if self.values is None:
                raise ValueError("values: required for distribution = 'choice' (a non-empty "
                                 "list)")
            if self.low is not None or self.high is not None:
                raise ValueError(f"low = {self.low!r}, high = {self.high!r}: not used by "
                                 "distribution = 'choice' (give values only)")
            if any(isinstance(v, float) and not math.isfinite(v) for v in self.values):
                raise ValueError(f"values = {self.values!r}: numbers must be finite")
            return self
        if self.values is not None:
            raise ValueError(f"values = {self.values!r}: only for distribution = 'choice'")
        for name in ("low", "high"):
            if getattr(self, name) is None:
                raise ValueError(f"{name}: required for distribution = {d!r} (a finite "
                                 "number in the unit of the design field)")
        assert self.low is not None and self.high is not None
        if not self.low < self.high:
            raise ValueError(f"high = {self.high!r}: must be greater than low = {self.low!r}")
        if d == "loguniform" and self.low <= 0:
            raise ValueError(f"low = {self.low!r}: loguniform needs low > 0 (and high > low)")
        return self


class DerivedSpec(_Spec):
    """One design value computed from a formula for every sample."""

    path: str = _field(allowed="a dotted design path such as piles.rings.0.radius",
                       meaning="the design value to set", pattern=PATH_PATTERN)
    formula: str = _field(allowed="an arithmetic expression over numbers, design paths, pi "
                          "and a few functions", meaning="how the value is computed",
                          min_length=1)


class SamplingSpec(_Spec):
    """How the unit-cube points are drawn."""

    method: Literal["sobol", "lhs", "grid"] = _field(
        "sobol", allowed="'sobol' (scrambled, size a power of two), 'lhs' or 'grid' (size = "
        "k^d for d parameters)", meaning="sampling method")
    size: int = _field(64, allowed=f"an integer from 1 to {MAX_SIZE} samples", ge=1,
                       le=MAX_SIZE, meaning="number of training samples")
    seed: int = _field(0, allowed=f"an integer from 0 to {MAX_SEED}", ge=0, le=MAX_SEED,
                       meaning="seed of the training samples")
    holdout: int = _field(0, allowed=f"an integer from 0 to {MAX_SIZE} samples", ge=0,
                          le=MAX_SIZE, meaning="number of hold-out samples")
    holdout_seed: int = _field(1, allowed=f"an integer from 0 to {MAX_SEED}, not seed", ge=0,
                               le=MAX_SEED, meaning="seed of the hold-out samples")

    @model_validator(mode="after")
    def _check(self) -> SamplingSpec:
        n = self.size
        if self.method == "sobol" and n & (n - 1):
            lower = 1 << (n.bit_length() - 1)
            raise ValueError(f"size = {n}: sobol sampling needs a power of two (e.g. {lower} "
                             f"or {2 * lower}); use method = 'lhs' for any size")
        if self.holdout and self.holdout_seed == self.seed:
            raise ValueError(f"holdout_seed = {self.holdout_seed}: must differ from seed = "
                             f"{self.seed} (else the hold-out samples repeat training ones)")
        return self


class RunSpec(_Spec):
    """How each sample is run."""

    time_limit: float = _field(600.0, allowed=f"a number of seconds, > 0 and <= "
                               f"{MAX_TIME_LIMIT:g} s", meaning="time limit per run (checked "
                               "after every increment)", gt=0.0, le=MAX_TIME_LIMIT,
                               allow_inf_nan=False)
    retries: int = _field(1, allowed=f"an integer from 0 to {MAX_RETRIES}", ge=0,
                          le=MAX_RETRIES, meaning="retries of a diverged run, each with a 4x "
                          "smaller first increment")
    dynamic: bool = _field(True, allowed="true or false", meaning="compute the dynamic "
                           "(small-strain) stiffness of every sample")
    design_strength: bool = _field(True, allowed="true or false", meaning="run the base "
                                   "design's [design_strength] pushover for every sample "
                                   "(false: the characteristic pushover only, about half "
                                   "the time)")


class SpaceSpec(_Spec):
    """A campaign's design space (the space file)."""

    base: str = _field(allowed="a design file name, relative to the space file",
                       meaning="the base design", min_length=1)
    analysis: dict[str, Any] = _field(
        {}, allowed="a table of the design's [analysis] settings",
        meaning="overrides of the base design's [analysis]")
    parameter: list[ParameterSpec] = _field(
        allowed="one or more [[parameter]] tables", meaning="the sampled values",
        min_length=1)
    derived: list[DerivedSpec] = _field(
        [], allowed="[[derived]] tables with path and formula", meaning="values computed "
        "from the sampled ones")
    sampling: SamplingSpec = _field(SamplingSpec(), allowed="a [sampling] table",
                                    meaning="how samples are drawn")
    run: RunSpec = _field(RunSpec(), allowed="a [run] table", meaning="how samples are run")


def space_json_schema() -> dict:
    """JSON Schema of the space file (units and allowed ranges in the descriptions)."""
    return SpaceSpec.model_json_schema()


# ----------------------------------------------------------------------------- messages
def _model_in(annotation: Any) -> type[BaseModel] | None:
    """The pydantic model inside an annotation (``list[X]``, ``X | None``), if any."""
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return annotation
    for arg in get_args(annotation) if get_origin(annotation) is not None else ():
        found = _model_in(arg)
        if found is not None:
            return found
    return None


def _locate(loc: tuple) -> tuple[str, FieldInfo | None, type[BaseModel] | None]:
    """Dotted field path of an error location, the last field's info and the model the
    location ends in (None past a plain value)."""
    model: type[BaseModel] | None = SpaceSpec
    info: FieldInfo | None = None
    parts: list[str] = []
    for part in loc:
        if isinstance(part, int):
            parts.append(str(part))
        elif model is None:
            break  # a union member's tag after a plain value
        elif part in model.model_fields:
            info = model.model_fields[part]
            parts.append(part)
            model = _model_in(info.annotation)
        else:  # an unknown key of the table ``model``
            parts.append(str(part))
            info = None
            break
    return ".".join(parts) or "space", info, model


def _allowed(info: FieldInfo | None) -> str:
    extra = info.json_schema_extra if info is not None else None
    return str(extra.get("allowed", "")) if isinstance(extra, dict) else ""


def _format(exc: ValidationError) -> list[str]:
    out: list[str] = []
    seen: set[str] = set()
    for err in exc.errors(include_url=False):
        where, info, model = _locate(tuple(err["loc"]))
        if where in seen:  # one line per field (a union reports each member)
            continue
        seen.add(where)
        kind, value = err["type"], err.get("input")
        msg = str(err["msg"]).removeprefix("Value error, ")
        if kind == "extra_forbidden":
            keys = ", ".join(model.model_fields) if model is not None else ""
            out.append(f"{where} = {value!r}: unknown key; the keys here are: {keys}")
        elif kind == "missing":
            out.append(f"{where}: required ({_allowed(info)})")
        elif kind == "value_error":
            if msg.split(" ", 1)[0].split(":")[0] in (model.model_fields if model else {}):
                out.append(f"{where}.{msg}")
            else:
                out.append(f"{where}: {msg}")
        elif info is not None:
            out.append(f"{where} = {value!r}: must be {_allowed(info)}")
        else:
            out.append(f"{where} = {value!r}: {msg}")
    return out


# ----------------------------------------------------------------------------- space
@dataclass
class Space:
    """A checked space: the base design (complete nested dicts, with the schema's defaults),
    the parameters, the parsed derived formulas and the settings."""

    spec: SpaceSpec
    base: dict
    derived: list[tuple[str, Formula]]
    source: dict = field(default_factory=dict)  # the space file as read
    path: Path | None = None

    parameters = property(lambda self: self.spec.parameter)
    method = property(lambda self: self.spec.sampling.method)
    size = property(lambda self: self.spec.sampling.size)
    seed = property(lambda self: self.spec.sampling.seed)
    holdout = property(lambda self: self.spec.sampling.holdout)
    holdout_seed = property(lambda self: self.spec.sampling.holdout_seed)
    time_limit = property(lambda self: self.spec.run.time_limit)
    retries = property(lambda self: self.spec.run.retries)
    dynamic = property(lambda self: self.spec.run.dynamic)
    design_strength = property(lambda self: self.spec.run.design_strength)

    @property
    def planned(self) -> int:
        return self.size + self.holdout

    def digest(self) -> str:
        """Identity of the space file (a store holds the runs of one space only)."""
        return hashlib.sha256(json.dumps(self.source, sort_keys=True).encode()).hexdigest()[:16]

    def base_digest(self) -> str:
        """Identity of the base design (with the overrides) the samples start from."""
        return hashlib.sha256(json.dumps(self.base, sort_keys=True).encode()).hexdigest()[:16]


def _toml_load(path: Path, what: str) -> dict:
    if sys.version_info >= (3, 11):
        import tomllib
    else:  # pragma: no cover
        import tomli as tomllib
    where = "" if str(path) == what else f" ({path})"
    if path.is_dir():
        raise SpaceError(f"{what}: is a folder{where}, not a TOML file")
    if not path.is_file():
        raise SpaceError(f"{what}: no such file{where}")
    try:
        return tomllib.loads(path.read_text(encoding="utf-8-sig"))
    except OSError as exc:
        raise SpaceError(f"{what}: cannot be read{where} ({exc.strerror or exc})") from None
    except UnicodeDecodeError as exc:
        raise SpaceError(f"{what}: not UTF-8 text{where} ({exc.reason} at byte "
                         f"{exc.start})") from None
    except tomllib.TOMLDecodeError as exc:
        raise SpaceError(f"{what}: not valid TOML ({exc})") from None


def _base_design(spec: SpaceSpec, folder: Path) -> dict:
    from femcore.foundation.design import DesignError, design_from_dict

    where = f"base = {spec.base!r}"
    raw = _toml_load((folder / spec.base).resolve(), where)
    if spec.analysis:
        if not isinstance(raw.get("analysis", {}), dict):
            raise SpaceError(f"{where}: its analysis is not a table")
        raw.setdefault("analysis", {}).update(spec.analysis)
    try:
        design = design_from_dict(raw)
    except DesignError as exc:
        lines = "\n".join(f"  {p}" for p in exc.problems)
        raise SpaceError(f"{where} (with the space's [analysis]): not a valid design:\n"
                         f"{lines}") from None
    return design.model_dump(mode="json")


def _check_leaf(base: dict, where: str, path: str) -> Any:
    problem = path_problem(base, path)
    if problem is not None:
        raise SpaceError(f"{where}.path = {path!r}: no such value in the base design: "
                         f"{problem}")
    value = get_path(base, path)
    if isinstance(value, (dict, list)):
        raise SpaceError(f"{where}.path = {path!r}: names {describe(value)}, not one value; "
                         "add the key or index of the value")
    return value


def _check_paths(spec: SpaceSpec, base: dict) -> None:
    owner: dict[str, str] = {}
    for i, p in enumerate(spec.parameter):
        where = f"parameter.{i}"
        value = _check_leaf(base, where, p.path)
        if p.path in owner:
            raise SpaceError(f"{where}.path = {p.path!r}: already sampled by {owner[p.path]}")
        owner[p.path] = where
        if p.distribution != "choice":
            if isinstance(value, bool) or value is not None and not isinstance(value, float) \
                    and not isinstance(value, int):
                raise SpaceError(f"{where}.distribution = {p.distribution!r}: {p.path} is "
                                 f"{describe(value)}, not a number; use 'choice' with values")
            if isinstance(value, int):
                raise SpaceError(f"{where}.distribution = {p.distribution!r}: {p.path} is an "
                                 f"integer (base value {value}); use distribution = 'choice' "
                                 "with integer values")
    for i, d in enumerate(spec.derived):
        where = f"derived.{i}"
        _check_leaf(base, where, d.path)
        if d.path in owner:
            raise SpaceError(f"{where}.path = {d.path!r}: already set by {owner[d.path]}")
        owner[d.path] = where


def _parse_formulas(spec: SpaceSpec, base: dict) -> list[tuple[str, Formula]]:
    out = []
    for i, d in enumerate(spec.derived):
        where = f"derived.{i}.formula = {d.formula!r}"
        try:
            f = parse_formula(d.formula)
        except FormulaError as exc:
            raise SpaceError(f"{where}: {exc.reason}") from None
        for path in f.paths:
            problem = path_problem(base, path)
            if problem is not None:
                raise SpaceError(f"{where}: reads {path!r}, which is no value of the base "
                                 f"design: {problem}")
        out.append((d.path, f))
    return out


def space_from_dict(data: dict, folder: str | Path = ".") -> Space:
    """Check a parsed space file (``folder`` resolves ``base``) into a :class:`Space`."""
    if not isinstance(data, dict):
        raise SpaceError(f"space: must be a table of settings (got {data!r})")
    try:
        spec = SpaceSpec.model_validate(data)
    except ValidationError as exc:
        raise SpaceError("\n".join(_format(exc))) from None
    d = len(spec.parameter)
    if spec.sampling.method == "grid" and grid_side(spec.sampling.size, d) is None:
        k = max(2, round(spec.sampling.size ** (1.0 / d)))
        raise SpaceError(f"sampling.size = {spec.sampling.size}: grid sampling of {d} "
                         f"parameter(s) needs size = k^{d} (e.g. {(k - 1) ** d or 1}, {k ** d}"
                         f" or {(k + 1) ** d})")
    base = _base_design(spec, Path(folder))
    _check_paths(spec, base)
    space = Space(spec, base, _parse_formulas(spec, base), copy.deepcopy(data))
    centre = {"id": "centre", "values": {p.path: physical(p, 0.5) for p in spec.parameter}}
    for i, (_, f) in enumerate(space.derived):
        try:
            design_dict(space, centre, upto=i + 1)
        except SpaceError as exc:
            reason = exc.reason if isinstance(exc, FormulaError) else str(exc)
            raise SpaceError(f"derived.{i}.formula = {f.text!r}: fails at the centre of the "
                             f"space: {reason}") from None
    return space


def load_space(path: str | Path) -> Space:
    """Read and check a space file (see the module docstring); :class:`SpaceError` if bad."""
    p = Path(path)
    space = space_from_dict(_toml_load(p, str(p)), p.parent)
    space.path = p
    return space


def design_dict(space: Space, sample: dict, upto: int | None = None) -> dict:
    """The design of one sample (nested dicts): the base with the sampled values and then the
    derived values (in file order; the first ``upto`` only) set."""
    data = copy.deepcopy(space.base)
    for path, value in sample["values"].items():
        set_path(data, path, value)
    for path, formula in space.derived[:upto]:
        set_path(data, path, formula.evaluate(data))
    data["name"] = f"{data.get('name', 'design')} / sample {sample['id']}"
    return data
