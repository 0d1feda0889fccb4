"""Result files: result.json, curve.csv and fields.vtu (meshio) in an output folder.

result.json carries ``schema_version``; its layout is DESIGN 5.3: status, curve (arrays),
keypoints (value, unit, method, parameters), requirements (pass/fail, margins), piles (per
row), model (nodes, DOFs, elements, L, rows, versions), timings.
"""

from __future__ import annotations

import csv
import json
import platform
from pathlib import Path

import numpy as np

from femcore import __version__
from femcore.foundation.design import SCHEMA_VERSION
from femcore.foundation.run import Result
from femcore.model import SolidBlock

__all__ = ["write_result_json", "write_curve_csv", "write_fields", "result_dict",
           "RESULT_SCHEMA_VERSION", "CAUTION"]

RESULT_SCHEMA_VERSION = "1"

CAUTION = (
    "Indicative results of a simplified 2D model with idealised soil behaviour; not a "
    "foundation design. Design and certification must follow the turbine supplier's "
    "foundation specification, IEC 61400-6, the applicable national codes (e.g. EN 1997-1 "
    "with its national annex, EN 1992-1-1) and be carried out or checked by a qualified, "
    "licensed engineer. Cyclic, fatigue, long-term tilt and construction stages are outside "
    "a monotonic pushover."
)


def _clean(obj):
    """JSON-safe copy: numpy to lists/floats, NaN/inf to None."""
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _clean(obj.tolist())
    if isinstance(obj, (np.floating, float)):
        v = float(obj)
        return v if np.isfinite(v) else None
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


def result_dict(result: Result, extra: dict | None = None) -> dict:
    import gmsh
    import scipy

    d = result.to_dict()
    d["schema_version"] = RESULT_SCHEMA_VERSION
    d["design_schema_version"] = SCHEMA_VERSION
    d["model"]["versions"] = {"tiltfe": __version__, "python": platform.python_version(),
                              "numpy": np.__version__, "scipy": scipy.__version__,
                              "gmsh": gmsh.__version__}
    d["caution"] = CAUTION
    if extra:
        d.update(extra)
    return _clean(d)


def write_result_json(result: Result, path: Path, extra: dict | None = None) -> Path:
    path.write_text(json.dumps(result_dict(result, extra), indent=1))
    return path


def write_curve_csv(result: Result, path: Path) -> Path:
    keys = [k for k, v in result.curve.items() if np.ndim(v) == 1 and len(v)]
    units = {"rotation": "rad", "moment": "kNm", "moment_per_m": "kNm/m", "vertical": "kN",
             "horizontal": "kN", "settlement": "m", "horizontal_displacement": "m",
             "iterations": "-"}
    with path.open("w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow([f"{k} [{units.get(k, '-')}]" for k in keys])
        for row in zip(*(np.asarray(result.curve[k]) for k in keys), strict=True):
            w.writerow([f"{v:.9g}" for v in row])
    return path


def write_fields(result: Result, path: Path) -> Path | None:
    """Displacements, stresses, yielded fraction per cell and pile forces (lines) in one .vtu."""
    import meshio

    built = result.built
    if built is None or result.pushover is None or not result.pushover.records:
        return None
    model, u, states = built.model, result.pushover.u, result.pushover.states
    mesh = model.mesh
    n = mesh.n_nodes
    continuum = bool(model.solid_blocks)
    pts = [np.column_stack([mesh.points, np.zeros(n)])]
    disp = [np.column_stack([u[: 2 * n].reshape(-1, 2), np.zeros(n)])]
    blocks, cdata = [], {"stress": [], "yielded_fraction": [], "axial_force": [],
                         "bending_moment": []}
    if continuum:
        stress = np.zeros((mesh.n_cells, 4))
        yielded = np.zeros(mesh.n_cells)
        for b, st in zip(model.blocks, states, strict=True):
            if isinstance(b, SolidBlock):
                w = b.geom.dV / b.geom.dV.sum(axis=1, keepdims=True)
                stress[b.cells] = np.einsum("cqk,cq->ck", st.stress, w)
                yielded[b.cells] = st.yielded.mean(axis=1)
        sub = mesh.element.sub_triangles
        tris = mesh.cells[:, sub].reshape(-1, 3)
        blocks.append(("triangle", tris))
        ns = sub.shape[0]
        cdata["stress"].append(np.repeat(stress, ns, axis=0))
        cdata["yielded_fraction"].append(np.repeat(yielded, ns))
        cdata["axial_force"].append(np.full(len(tris), np.nan))
        cdata["bending_moment"].append(np.full(len(tris), np.nan))
    offset = n
    L = built.slice_length
    for pr in built.rows:
        xy = pr.beam.xy
        m = len(xy)
        pts.append(np.column_stack([xy, np.zeros(m)]))
        disp.append(np.column_stack([u[pr.beam_dofs[:, :2]], np.zeros(m)]))
        lines = offset + np.column_stack([np.arange(m - 1), np.arange(1, m)])
        offset += m
        axial, moments = pr.beam.section_forces(u[pr.beam.element_dofs])
        per_pile = L / pr.row.count
        blocks.append(("line", lines))
        cdata["stress"].append(np.full((m - 1, 4), np.nan))
        cdata["yielded_fraction"].append(np.full(m - 1, np.nan))
        cdata["axial_force"].append(-axial * per_pile)  # compression positive, per pile
        cdata["bending_moment"].append(moments.mean(axis=1) * per_pile)
    out = meshio.Mesh(np.vstack(pts), blocks, point_data={"displacement": np.vstack(disp)},
                      cell_data=cdata)
    meshio.write(path, out)
    return path


def result_file_model():
    """A pydantic model of result.json (for validation and its JSON Schema)."""
    from typing import Literal

    from pydantic import BaseModel, ConfigDict

    class KeyPointOut(BaseModel):
        model_config = ConfigDict(extra="forbid")
        name: str
        value: float | None
        unit: str
        method: str
        parameters: dict
        extra: dict

    class ResultFile(BaseModel):
        model_config = ConfigDict(extra="forbid")
        schema_version: Literal["1"]
        design_schema_version: str
        status: Literal["ok", "censored", "diverged"]
        message: str
        design: str
        curve: dict[str, list[float | None]]
        keypoints: dict[str, KeyPointOut]
        requirements: dict[str, dict]
        piles: list[dict]
        model: dict
        timings: dict
        caution: str
        dynamic: dict | None = None

    return ResultFile
