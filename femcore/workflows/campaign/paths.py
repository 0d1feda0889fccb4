"""Dotted design paths and the campaign's error type.

A design path names one value of a design as the keys from the top of the design file down,
joined by dots; entries of a list (``soil.layers``, ``piles.rings``) are named by their index,
counted from 0: ``cap.diameter``, ``soil.layers.2.su``, ``piles.rings.0.radius``. The space
file uses them for its parameters and derived values, and formulas read them.
"""

from __future__ import annotations

import re
from typing import Any

__all__ = ["SpaceError", "PATH_PATTERN", "get_path", "set_path", "path_problem", "describe"]

PATH_PATTERN = r"^[A-Za-z_][A-Za-z_0-9]*(\.[A-Za-z_0-9]+)*$"
_PATH = re.compile(PATH_PATTERN)


class SpaceError(ValueError):
    """A campaign input is invalid: the message names the field path, the value and what is
    allowed there (one line per problem)."""


def describe(node: Any) -> str:
    """A short description of what a design value is (for error messages)."""
    if isinstance(node, dict):
        keys = ", ".join(sorted(node)) or "no keys"
        return f"a table with keys: {keys}"
    if isinstance(node, list):
        return f"a list of {len(node)} entries (indices 0 to {len(node) - 1})" if node else \
            "an empty list"
    return f"the value {node!r}"


def path_problem(data: dict, path: str) -> str | None:
    """None when ``path`` names a value in ``data``, else what exists where it stops."""
    if not isinstance(path, str) or not _PATH.match(path):
        return (f"{path!r} is not a dotted path (keys and list indices joined by dots, "
                "e.g. soil.layers.2.su)")
    node: Any = data
    done: list[str] = []
    for key in path.split("."):
        where = ".".join(done) or "the design"
        if isinstance(node, dict):
            if key not in node:
                return f"{where} has no key {key!r}; it is {describe(node)}"
            node = node[key]
        elif isinstance(node, list):
            if not key.isdigit():
                return f"{where} is {describe(node)}; use an index, not {key!r}"
            if int(key) >= len(node):
                return f"{where} has no entry {key}; it is {describe(node)}"
            node = node[int(key)]
        else:
            return f"{where} is {describe(node)}, not a table or list"
        done.append(key)
    return None


def get_path(data: dict, path: str) -> Any:
    """The value at ``path``; :class:`SpaceError` saying what exists when there is none."""
    problem = path_problem(data, path)
    if problem is not None:
        raise SpaceError(f"{path}: {problem}")
    node: Any = data
    for key in path.split("."):
        node = node[int(key)] if isinstance(node, list) else node[key]
    return node


def set_path(data: dict, path: str, value: Any) -> None:
    """Set the value at ``path`` (its parent must exist; a missing last key is added)."""
    parent, _, last = path.rpartition(".")
    node = get_path(data, parent) if parent else data
    if isinstance(node, list):
        if not last.isdigit() or int(last) >= len(node):
            raise SpaceError(f"{path}: {parent} is {describe(node)}")
        node[int(last)] = value
    elif isinstance(node, dict):
        node[last] = value
    else:
        raise SpaceError(f"{path}: {parent} is {describe(node)}, not a table or list")
