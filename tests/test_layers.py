"""The package layering, checked by reading every module's imports and calls with ``ast``.

Rules (DEVELOPERS.md, "Layers"):

1. ``materials/`` imports numpy and the standard library only.
2. The engine (the modules directly in ``femcore/``) never imports the application
   (``femcore.foundation``), the workflows (``femcore.workflows``), ``meshing``, gmsh, pydantic
   or matplotlib.
3. The application (``femcore/foundation/``) never imports the workflows, and never prints
   or writes files.
4. Only the workflows print, write files or import matplotlib, dask and pyarrow.
5. gmsh is imported only inside ``meshing/`` (in the shipped packages and the benchmarks).

Each rule is also checked on a small synthetic module that breaks it, so the checker itself
cannot silently pass everything.
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
STDLIB = set(sys.stdlib_module_names)
FACE = {"femcore", "femcore.__main__"}
WRITE_CALLS = {"write_text", "write_bytes", "savefig", "to_csv", "write_table"}


def _module_name(path: Path) -> str:
    rel = path.relative_to(ROOT).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def imports_of(source: str, module: str) -> set[str]:
    """Absolute names of every module imported by ``source`` (relative imports resolved)."""
    tree = ast.parse(source)
    package = module.split(".")
    out: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[: len(package) - node.level + (1 if _is_package(module) else 0)]
                name = ".".join(base + ([node.module] if node.module else []))
            else:
                name = node.module or ""
            out.add(name)
            out.update(f"{name}.{a.name}" for a in node.names)
    return out


def _is_package(module: str) -> bool:
    path = ROOT.joinpath(*module.split("."))
    return path.is_dir()


def side_effects(source: str) -> set[str]:
    """Calls that print or write files: ``print``, ``open(..., 'w')``, ``Path.write_text``,
    ``savefig``, ``meshio.write``, ...."""
    found: set[str] = set()
    for node in ast.walk(ast.parse(source)):
        if not isinstance(node, ast.Call):
            continue
        f = node.func
        if isinstance(f, ast.Name) and f.id == "print":
            found.add("print")
        if isinstance(f, ast.Name) and f.id == "open":
            mode = node.args[1] if len(node.args) > 1 else next(
                (k.value for k in node.keywords if k.arg == "mode"), None)
            if isinstance(mode, ast.Constant) and any(c in str(mode.value) for c in "wax+"):
                found.add("open for writing")
        if isinstance(f, ast.Attribute) and f.attr in WRITE_CALLS:
            found.add(f.attr)
        if isinstance(f, ast.Attribute) and f.attr == "write" and isinstance(f.value, ast.Name) \
                and f.value.id in ("meshio", "sys"):
            found.add(f"{f.value.id}.write")
    return found


def _top(names: set[str]) -> set[str]:
    return {n.split(".")[0] for n in names}


def violations(module: str, source: str) -> list[str]:
    """Every broken rule of one module (empty when it follows them all)."""
    imps = imports_of(source, module)
    tops = _top(imps)
    out: list[str] = []
    layer = module.split(".")
    if layer[0] == "materials":
        bad = tops - STDLIB - {"numpy", "materials"}
        out += [f"materials imports {b}" for b in sorted(bad)]
    # the package face (femcore/__init__: lazy run_design, load_design, Result) and
    # ``python -m femcore`` are the two sanctioned doors from the engine package to the layers
    is_engine = layer[0] == "femcore" and module not in FACE and (
        len(layer) == 1 or layer[1] not in ("foundation", "workflows"))
    is_app = layer[:2] == ["femcore", "foundation"]
    is_workflow = layer[:2] == ["femcore", "workflows"]
    if is_engine:
        for name in sorted(imps):
            if name.startswith(("femcore.foundation", "femcore.workflows")):
                out.append(f"engine imports {name}")
        out += [f"engine imports {b}" for b in sorted(tops & {"meshing", "gmsh", "pydantic",
                                                              "matplotlib"})]
    if is_app:
        out += [f"application imports {n}" for n in sorted(imps)
                if n.startswith("femcore.workflows")]
    if layer[0] in ("femcore", "materials", "meshing") and not is_workflow:
        out += [f"{module} calls {c}" for c in sorted(side_effects(source))]
        out += [f"{module} imports {b}" for b in sorted(tops & {"matplotlib", "dask", "pyarrow"})]
    if layer[0] != "meshing" and "gmsh" in tops:
        out.append(f"{module} imports gmsh outside meshing/")
    return out


def _sources():
    for pkg in ("femcore", "materials", "meshing", "benchmarks"):
        for path in sorted((ROOT / pkg).rglob("*.py")):
            yield _module_name(path), path.read_text(encoding="utf-8")


def test_every_module_follows_the_layer_rules():
    found = {m: v for m, src in _sources() if (v := violations(m, src))}
    assert found == {}


def test_the_packages_were_read():
    names = {m for m, _ in _sources()}
    # a checker that reads nothing passes everything: make sure each layer was seen
    assert {"materials.mohr_coulomb", "femcore.assembly", "femcore.foundation.run",
            "femcore.workflows.cli", "meshing.builders"} <= names


@pytest.mark.parametrize("module, source, expected", [
    ("materials.fake", "import scipy.linalg\n", "materials imports scipy"),
    ("femcore.fake", "from .foundation.design import Design\n",
     "engine imports femcore.foundation.design"),
    ("femcore.fake", "from meshing import layered_domain\n", "engine imports meshing"),
    ("femcore.fake", "import pydantic\n", "engine imports pydantic"),
    ("femcore.foundation.fake", "from ..workflows import cli\n",
     "application imports femcore.workflows"),
    ("femcore.foundation.fake", "print('hello')\n", "femcore.foundation.fake calls print"),
    ("femcore.foundation.fake", "from pathlib import Path\nPath('x').write_text('y')\n",
     "femcore.foundation.fake calls write_text"),
    ("femcore.foundation.fake", "f = open('x', 'w')\n",
     "femcore.foundation.fake calls open for writing"),
    ("femcore.fake", "import matplotlib.pyplot as plt\n", "femcore.fake imports matplotlib"),
    ("femcore.workflows.fake", "import gmsh\n", "femcore.workflows.fake imports gmsh outside "
     "meshing/"),
])
def test_a_broken_rule_is_reported(module, source, expected):
    assert expected in violations(module, source)


def test_allowed_imports_pass():
    assert violations("femcore.workflows.fake", "import matplotlib\nprint(1)\n") == []
    assert violations("meshing.fake", "import gmsh\nfrom femcore.mesh import Mesh\n") == []
    assert violations("femcore.foundation.fake", "from meshing import regions\n"
                      "from ..model import Model\n") == []
