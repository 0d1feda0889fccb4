"""The tables of a run's summary, shared by the PDF report and the terminal summary, so both
say the same thing in the same units: stiffness in GNm/rad, moment in MNm, rotation in mrad,
force in kN, lengths in m, volumes in m3.

Each function returns rows of strings; ``plain`` True keeps them ASCII for a terminal of any
encoding (``>=`` for a minimum, ``theta`` for the rotation), False uses the typographic
symbols of the PDF. Numbers are formatted for reading: four significant digits, never in
e-notation (:func:`num`).
"""

from __future__ import annotations

import math

__all__ = ["num", "requirement_rows", "keypoint_rows", "quantity_rows", "REQUIREMENT_HEADER",
           "KEYPOINT_HEADER", "QUANTITY_HEADER", "QUANTITY_LABELS", "display_value",
           "text_table"]

REQUIREMENT_HEADER = ("Requirement", "Required", "Computed", "Margin", "Result")
KEYPOINT_HEADER = ("Key point", "Value", "Method")
QUANTITY_HEADER = ("Quantity", "Value", "Unit")

#: internal unit -> (display unit, divisor)
_DISPLAY = {"kNm/rad": ("GNm/rad", 1e6), "kNm": ("MNm", 1e3), "kN": ("kN", 1.0),
            "rad": ("mrad", 1e-3), "m": ("m", 1.0), "m3": ("m3", 1.0), "-": ("", 1.0)}


def num(v: float | None, sig: int = 4) -> str:
    """``v`` with ``sig`` significant digits in fixed-point notation (no e-notation; at most
    six decimals; ``-`` for None or a non-finite value)."""
    if v is None or not math.isfinite(v):
        return "-"
    if v == 0:
        return "0"
    mag = math.floor(math.log10(abs(v)))
    decimals = min(max(sig - 1 - mag, 0), 6)
    text = f"{v:.{decimals}f}"
    return "0" if float(text) == 0 else text


def display_value(value: float | None, unit: str, plain: bool = False) -> tuple[str, str]:
    """(number, unit) of an internal value in the display unit of its kind."""
    shown, div = _DISPLAY.get(unit, (unit, 1.0))
    if not plain and shown == "m3":
        shown = "m\u00b3"
    return num(None if value is None else value / div), shown


def _with_unit(value: float | None, unit: str, plain: bool) -> str:
    n, u = display_value(value, unit, plain)
    return n if n == "-" or not u else f"{n} {u}"


def _moment(v: float, plain: bool) -> str:
    return _with_unit(v, "kNm", plain)


def _label(name: str, chk, design, plain: bool) -> str:
    x = chk.extra or {}
    div = "/" if plain else "\u00f7"
    if name == "static_stiffness":
        return f"Static rotational stiffness, secant at M = {_moment(x['at_moment'], plain)}"
    if name == "dynamic_stiffness":
        at = x.get("at_moment")
        return "Dynamic rotational stiffness (small-strain G0)" + \
            (f" at M = {_moment(at, plain)}" if at else "")
    if name == "capacity":
        src = "design strengths" if x.get("source") == "design_strength" else "characteristic"
        rf = x.get("resistance_factor", 1.0)
        return f"Moment capacity ({src}) {div} resistance factor {rf:g}"
    if name == "no_pile_tension":
        return f"No pile in tension up to M = {_moment(x['up_to_moment'], plain)}"
    return name.replace("_", " ").capitalize()


def requirement_rows(requirements: dict, design=None, plain: bool = False) -> list[tuple]:
    """(requirement, required, computed, margin, result) per check of ``requirements``."""
    ge = ">=" if plain else "\u2265"
    rows = []
    for name, chk in requirements.items():
        if name == "no_pile_tension":
            required = f"{ge} 0 kN (least axial compression)"
        elif name == "capacity":
            required = f"{ge} {_with_unit(chk.required, chk.unit, plain)} (design moment)"
        else:
            required = f"{ge} {_with_unit(chk.required, chk.unit, plain)}"
        computed = _with_unit(chk.value, chk.unit, plain)
        lower = (chk.extra or {}).get("lower_bound")
        if lower is not None:
            computed = f"{ge} {_with_unit(lower, chk.unit, plain)} (lower bound)"
        margin = "-" if chk.margin is None else f"{100 * chk.margin:+.1f} %"
        rows.append((_label(name, chk, design, plain), required, computed, margin,
                     chk.verdict))
    return rows


def _kp_label(name: str, kp, plain: bool) -> str:
    th = "theta" if plain else "\u03b8"
    if name == "initial_stiffness":
        return "Initial rotational stiffness"
    if name.startswith("secant_stiffness@"):
        return f"Secant stiffness at M = {_moment(kp.parameters['moment'], plain)}"
    if name.startswith("moment_at@"):
        return f"Moment at {th} = {_with_unit(kp.parameters['rotation'], 'rad', plain)}"
    return {"yield_equal_energy": "Yield moment (equal-energy bilinear)",
            "yield_tangents": "Yield moment (tangent intersection)",
            "ultimate": "Ultimate moment (plateau)",
            "ultimate_hyperbolic": "Ultimate moment (hyperbolic fit)"}.get(
                name, name.replace("_", " ").capitalize())


def keypoint_rows(result, plain: bool = False) -> list[tuple]:
    """(key point, value with unit, method) for the key points, the dynamic stiffness and
    the ultimate at design strengths of ``result``."""
    th = "theta" if plain else "\u03b8"
    rows = []
    for name, kp in result.keypoints.items():
        value = _with_unit(kp.value, kp.unit, plain)
        method = kp.method
        extra = kp.extra or {}
        if name == "ultimate" and extra.get("censored"):
            value = (">= " if plain else "\u2265 ") + value
            method += "; censored: a lower bound"
        elif name == "ultimate" and extra.get("rotation") is not None:
            method += f"; at {th} = {_with_unit(extra['rotation'], 'rad', plain)}"
        rows.append((_kp_label(name, kp, plain), value, method))
    dyn = result.dynamic
    if dyn is not None:
        rows.append(("Dynamic rotational stiffness (G0)", _with_unit(dyn.value, "kNm/rad",
                                                                      plain),
                     f"{dyn.method}, {dyn.moduli}" if dyn.value else (dyn.reason or "")))
    ds = result.design_strength
    if ds is not None:
        ud = ds["keypoints"].get("ultimate") or {}
        f = ds["factors"]
        value = _with_unit(ud.get("value"), "kNm", plain)
        cens = (ud.get("extra") or {}).get("censored")
        rows.append(("Ultimate moment, design strengths",
                     (">= " if plain else "\u2265 ") + value if cens else value,
                     f"pushover with s_u / {f['su']:g}, c' / {f['c']:g}, tan phi' / "
                     f"{f['tan_phi']:g}, pile resistances / {f['pile_resistance']:g}"
                     + ("; censored: a lower bound" if cens else "")))
    return rows


QUANTITY_LABELS = {"cap_concrete_volume": "Cap concrete",
                    "pedestal_concrete_volume": "Pedestal concrete",
                    "pile_count": "Piles", "pile_total_length": "Pile length, total (along "
                    "the axes)", "pile_concrete_volume": "Pile concrete",
                    "cost_index": "Cost index (from the unit rates)"}


def quantity_rows(quantities: dict | None, plain: bool = False) -> list[tuple]:
    """(quantity, value, unit) per material quantity (cost index only when computed)."""
    from femcore.foundation.quantities import QUANTITY_UNITS

    rows = []
    for name, unit in QUANTITY_UNITS.items():
        v = (quantities or {}).get(name)
        if name == "cost_index" and v is None:
            continue
        if name == "pile_count":
            rows.append((QUANTITY_LABELS[name], "-" if v is None else f"{int(v)}", ""))
            continue
        n, u = display_value(v, unit, plain)
        if name in ("pile_total_length",) or unit == "m3":
            n = "-" if v is None else f"{v:.1f}"
        rows.append((QUANTITY_LABELS[name], n, u))
    return rows


def text_table(header: tuple, rows: list[tuple], align: str, wrap: dict | None = None,
               indent: str = "  ") -> list[str]:
    """Lines of a fixed-width table for a terminal: ``align`` one of l / r per column;
    ``wrap`` {column: width} wraps long cells onto continuation lines."""
    import textwrap

    wrap = wrap or {}
    cells = [[textwrap.wrap(str(v), wrap[i]) or [""] if i in wrap else [str(v)]
              for i, v in enumerate(row)] for row in rows]
    widths = [max([len(header[i])] + [len(ln) for row in cells for ln in row[i]])
              for i in range(len(header))]

    def line(values):
        return indent + "  ".join(v.rjust(w) if a == "r" else v.ljust(w)
                                  for v, w, a in zip(values, widths, align, strict=True)
                                  ).rstrip()

    out = [line(header), indent + "  ".join("-" * w for w in widths)]
    for row in cells:
        for k in range(max(len(c) for c in row)):
            out.append(line([c[k] if k < len(c) else "" for c in row]))
    return out
