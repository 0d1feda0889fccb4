"""Formulas of derived campaign values: a small arithmetic language, evaluated without ``eval``.

A ``[[derived]]`` entry of a space file sets one design value from a formula, so that a
constraint holds in every sample by construction (the outer pile ring follows the cap edge,
a ring keeps its pile spacing). A formula is one expression made of

* numbers: ``40``, ``0.667``, ``1e3``;
* dotted design paths (keys and list indices): ``cap.diameter``, ``piles.rings.0.radius``,
  read from the sample's design after its sampled values and the earlier derived values are
  set;
* the constant ``pi``;
* ``+ - * / **``, unary minus (and plus) and parentheses;
* the functions ``round`` (one argument, or a second one of at most 15 digits), ``min``,
  ``max``, ``sqrt``, ``floor``, ``ceil``, ``abs``, ``int`` and ``float``.

Nothing else parses: no attributes, subscripts, comparisons, keywords or other names. To keep
every evaluation short and finite, a formula is refused (:class:`SpaceError`) when it is longer
than 2000 characters, nests deeper than 50 levels or has more than 200 parts, raises to a
power whose exponent exceeds 64 in magnitude, or produces (at any step) a value beyond 1e300
in magnitude or one that is not a real number.

:func:`parse_formula` checks a formula once (the space file is checked before any run);
:meth:`Formula.evaluate` computes it for one design.
"""

from __future__ import annotations

import ast
import math
import re
from dataclasses import dataclass
from typing import Any

from .paths import SpaceError, get_path

__all__ = ["Formula", "FormulaError", "parse_formula", "evaluate_formula", "MAX_EXPONENT",
           "MAX_MAGNITUDE", "MAX_DEPTH", "MAX_NODES", "MAX_LENGTH"]

MAX_EXPONENT = 64
MAX_MAGNITUDE = 1e300
MAX_DEPTH = 50
MAX_NODES = 200
MAX_LENGTH = 2000
_MAX_ROUND_DIGITS = 15


class FormulaError(SpaceError):
    """A formula cannot be parsed or evaluated; ``reason`` says why (without the formula)."""

    def __init__(self, text: str, reason: str) -> None:
        self.text, self.reason = text, reason
        super().__init__(f"formula {text!r}: {reason}")

_FUNCS: dict[str, Any] = {"round": round, "min": min, "max": max, "sqrt": math.sqrt,
                          "floor": math.floor, "ceil": math.ceil, "abs": abs, "int": int,
                          "float": float}
_CONSTS = {"pi": math.pi}
_BINOPS: dict[type, Any] = {ast.Add: lambda a, b: a + b, ast.Sub: lambda a, b: a - b,
                            ast.Mult: lambda a, b: a * b, ast.Div: lambda a, b: a / b,
                            ast.Pow: lambda a, b: a**b}
_UNARY: dict[type, Any] = {ast.USub: lambda a: -a, ast.UAdd: lambda a: +a}
# a dotted path: a name followed by at least one ".part"; not inside a number (1e5) or a path
_DOTTED = re.compile(r"(?<![\w.])[A-Za-z_][A-Za-z_0-9]*(?:\.[A-Za-z_0-9]+)+")
_SLOT = "__path"  # placeholder names of the paths (users cannot write them: see parse)
_ALLOWED = ("numbers, dotted design paths, pi, + - * / **, unary minus, parentheses and "
            f"the functions {', '.join(sorted(_FUNCS))}")


def _number(value: Any, what: str) -> int | float:
    """``value`` as a bounded real number, else SpaceError."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise SpaceError(f"{what} is {value!r}, not a real number")
    if isinstance(value, float) and not math.isfinite(value) or abs(value) > MAX_MAGNITUDE:
        shown = f"{value:.3g}" if isinstance(value, float) else \
            f"about 1e{int(math.log10(abs(value)))}"
        raise SpaceError(f"{what} = {shown} is beyond the bound of {MAX_MAGNITUDE:g} in "
                         "magnitude")
    return value


@dataclass(frozen=True)
class Formula:
    """A checked formula: its text, syntax tree and the design paths it reads."""

    text: str
    tree: ast.Expression
    slots: dict[str, str]  # placeholder name -> dotted path

    @property
    def paths(self) -> list[str]:
        """The design paths the formula reads, in order of appearance."""
        return list(dict.fromkeys(self.slots.values()))

    def evaluate(self, design: dict) -> int | float:
        """The value for one design (nested dicts); SpaceError with the reason otherwise."""
        try:
            values = {slot: _number(get_path(design, path), path)
                      for slot, path in self.slots.items()}
            return self._ev(self.tree.body, values)
        except SpaceError as exc:
            raise FormulaError(self.text, str(exc)) from None
        except (ArithmeticError, ValueError, TypeError) as exc:
            raise FormulaError(self.text, f"{type(exc).__name__}: {exc}") from None

    def _ev(self, node: ast.AST, values: dict[str, Any]) -> int | float:
        if isinstance(node, ast.Constant):
            return _number(node.value, "the number")
        if isinstance(node, ast.Name):
            return values[node.id] if node.id in values else _CONSTS[node.id]
        if isinstance(node, ast.UnaryOp):
            return _number(_UNARY[type(node.op)](self._ev(node.operand, values)), "a result")
        if isinstance(node, ast.BinOp):
            a, b = self._ev(node.left, values), self._ev(node.right, values)
            if isinstance(node.op, ast.Pow) and abs(b) > MAX_EXPONENT:
                raise SpaceError(f"the exponent {b:.6g} exceeds {MAX_EXPONENT} in magnitude")
            return _number(_BINOPS[type(node.op)](a, b), "a result")
        assert isinstance(node, ast.Call) and isinstance(node.func, ast.Name)
        args = [self._ev(a, values) for a in node.args]
        if node.func.id == "round" and len(args) == 2 and (
                not isinstance(args[1], int) or abs(args[1]) > _MAX_ROUND_DIGITS):
            raise SpaceError(f"round(x, n) needs an integer n of at most {_MAX_ROUND_DIGITS} "
                             f"in magnitude (got {args[1]!r})")
        return _number(_FUNCS[node.func.id](*args), f"{node.func.id}(...)")


def _check_tree(tree: ast.Expression, text: str, expr: str, slots: dict[str, str]) -> None:
    """Every node allowed, known names and functions, bounded depth and size (iterative)."""
    stack: list[tuple[ast.AST, int]] = [(tree.body, 1)]
    count = 0
    while stack:
        node, depth = stack.pop()
        count += 1
        if depth > MAX_DEPTH or count > MAX_NODES:
            raise FormulaError(text, f"too complex (at most {MAX_DEPTH} levels of nesting "
                               f"and {MAX_NODES} parts)")
        if isinstance(node, ast.Constant):
            if isinstance(node.value, bool) or not isinstance(node.value, (int, float)):
                raise FormulaError(text, f"{node.value!r} is not a number; allowed are "
                                   f"{_ALLOWED}")
            continue
        if isinstance(node, ast.Name):
            if node.id not in slots and node.id not in _CONSTS:
                raise FormulaError(text, f"unknown name {node.id!r}; use pi, a dotted design "
                                   "path such as cap.diameter, or a function "
                                   f"({', '.join(sorted(_FUNCS))})")
            continue
        if isinstance(node, ast.BinOp) and type(node.op) in _BINOPS:
            stack += [(node.left, depth + 1), (node.right, depth + 1)]
            continue
        if isinstance(node, ast.UnaryOp) and type(node.op) in _UNARY:
            stack.append((node.operand, depth + 1))
            continue
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
            if node.func.id not in _FUNCS:
                raise FormulaError(text, f"unknown function {node.func.id!r}; use "
                                   f"{', '.join(sorted(_FUNCS))}")
            if node.keywords or not node.args or \
                    any(isinstance(a, ast.Starred) for a in node.args):
                raise FormulaError(text, f"{node.func.id}() takes plain arguments only (at "
                                   "least one)")
            stack += [(a, depth + 1) for a in node.args]
            continue
        part = ast.get_source_segment(expr, node) or type(node).__name__
        for slot, path in slots.items():
            part = part.replace(slot, path)
        raise FormulaError(text, f"{part!r} is not allowed; allowed are {_ALLOWED}")


def parse_formula(text: str) -> Formula:
    """Check a formula once (syntax, allowed parts, bounds); SpaceError naming the problem."""
    if not isinstance(text, str) or not text.strip():
        raise FormulaError(text, "must be a non-empty text")
    if len(text) > MAX_LENGTH:
        raise FormulaError(text[:40] + "...", f"{len(text)} characters; at most {MAX_LENGTH} "
                           "allowed")
    if _SLOT in text:
        raise FormulaError(text, f"names starting with {_SLOT!r} are reserved")
    slots: dict[str, str] = {}

    def repl(m: re.Match) -> str:
        slot = f"{_SLOT}{len(slots)}"
        slots[slot] = m.group(0)
        return slot

    expr = _DOTTED.sub(repl, text).strip()
    try:
        tree = ast.parse(expr, mode="eval")
    except SyntaxError as exc:
        raise FormulaError(text, f"not a valid expression ({exc.msg})") from None
    except (RecursionError, MemoryError, ValueError):
        raise FormulaError(text, f"too complex (at most {MAX_DEPTH} levels of "
                           "nesting)") from None
    _check_tree(tree, text, expr, slots)
    return Formula(text, tree, slots)


def evaluate_formula(formula: str | Formula, design: dict) -> int | float:
    """Evaluate ``formula`` for ``design`` (nested dicts); SpaceError for any problem."""
    f = formula if isinstance(formula, Formula) else parse_formula(formula)
    return f.evaluate(design)
