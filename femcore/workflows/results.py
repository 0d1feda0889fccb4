"""Result files: result.json, curve.csv and fields.vtu (meshio) in an output folder.

``result.json`` is exactly :meth:`femcore.foundation.run.Result.to_dict`: schema versions,
status, curve (arrays), key points (value, unit, method, parameters), dynamic stiffness,
the elastic 3D stiffness, the design-strength pushover (factors, status, key points,
curve), requirement checks (value, required, pass/fail, margin), pile envelopes (per row), model
(nodes, DOFs, elements, slice length, rows, versions), stages, timings and the caution.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np

from femcore.foundation.keypoints import KeyPoint
from femcore.foundation.records import (
    CAUTION,
    DynamicStiffness,
    ElasticStiffness,
    RequirementCheck,
)
from femcore.foundation.run import RESULT_SCHEMA_VERSION, Result
from femcore.model import SolidBlock

__all__ = ["write_result_json", "harmonic_yielded_fractions", "write_curve_csv", "write_fields",
           "result_file_model", "RESULT_SCHEMA_VERSION", "CAUTION"]


def write_result_json(result: Result, path: Path) -> Path:
    path.write_text(json.dumps(result.to_dict(), indent=1))
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


def harmonic_yielded_fractions(result: Result) -> tuple[np.ndarray, np.ndarray]:
    """(theta of the planes, yielded fraction of each cell's points on each plane, shape
    (planes, cells)) at the end of a harmonic pushover."""
    from femcore.harmonic_plastic import HarmonicMohrCoulomb

    hb = result.harmonic
    theta = hb.planes.theta
    yielded = np.zeros((theta.size, hb.hf.model.mesh.n_cells))
    for blk, st in zip(hb.model.blocks, result.pushover.states, strict=True):
        if isinstance(blk, HarmonicMohrCoulomb):
            cells = np.asarray(hb.hf.model.blocks[[i for i, b in hb.model.nonlinear.items()
                                                   if b is blk][0]].cells)
            yielded[:, cells] = st.yielded.mean(axis=2)
    return theta, yielded


def write_harmonic_fields(result: Result, path: Path) -> Path | None:
    """The harmonic solution at the end of the pushover on its circumferential planes, in
    3D: every plane theta_k of [0, pi] and its mirror -theta_k (the model is symmetric about
    theta = 0) as a sheet of triangles at (r cos theta, r sin theta, z), with the
    displacement (harmonic sums; Cartesian x, y, z) and, per cell, the yielded fraction of
    its points on that plane; the piles of every ring as lines at their own angles with the
    axial force (kN, compression positive)."""
    import meshio

    hb = result.harmonic
    if hb is None or result.pushover is None or not result.pushover.records:
        return None
    mesh = hb.hf.model.mesh
    n1, nn = hb.model.n1, mesh.n_nodes
    U = np.asarray(result.pushover.u).reshape(-1, n1)  # (h, n1)
    harm = np.array(hb.harmonics)
    theta, yielded = harmonic_yielded_fractions(result)
    sub = mesh.element.sub_triangles
    tris = mesh.cells[:, sub].reshape(-1, 3)
    ns = sub.shape[0]
    amp = U[:, : 3 * nn].reshape(len(harm), nn, 3)  # (h, nodes, 3) U, W, V
    pts, disp, blocks, yf, axial = [], [], [], [], []
    offset = 0

    def sheet(th: float, k: int) -> None:
        nonlocal offset
        c, s_ = np.cos(harm * th), np.sin(harm * th)
        Ur, Wz, Vt = c @ amp[..., 0], c @ amp[..., 1], s_ @ amp[..., 2]
        r, z = mesh.points[:, 0], mesh.points[:, 1]
        pts.append(np.column_stack([r * np.cos(th), r * np.sin(th), z]))
        disp.append(np.column_stack([Ur * np.cos(th) - Vt * np.sin(th),
                                     Ur * np.sin(th) + Vt * np.cos(th), Wz]))
        blocks.append(("triangle", tris + offset))
        yf.append(np.repeat(yielded[k], ns))
        axial.append(np.full(len(tris), np.nan))
        offset += nn

    for k, th in enumerate(theta):
        sheet(float(th), k)
        if 0.0 < th < np.pi:
            sheet(float(-th), k)
    from femcore.foundation.harmonic_pushover import ring_observer

    forces = ring_observer(hb, per_pile=True)(result.pushover.u, result.pushover.states)
    for line, (angles, comp) in zip(hb.hf.rings, forces, strict=True):
        for th, cp in zip(angles, comp, strict=True):
            c, s_ = np.cos(harm * th), np.sin(harm * th)
            Ur, Wz = c @ U[:, line.trans[:, 0]], c @ U[:, line.trans[:, 1]]
            Vt = s_ @ U[:, line.trans[:, 2]]
            r, z = line.xy[:, 0], line.xy[:, 1]
            m = len(r)
            pts.append(np.column_stack([r * np.cos(th), r * np.sin(th), z]))
            disp.append(np.column_stack([Ur * np.cos(th) - Vt * np.sin(th),
                                         Ur * np.sin(th) + Vt * np.cos(th), Wz]))
            blocks.append(("line", offset + np.column_stack([np.arange(m - 1),
                                                            np.arange(1, m)])))
            yf.append(np.full(m - 1, np.nan))
            axial.append(cp)
            offset += m
    out = meshio.Mesh(np.vstack(pts), blocks, point_data={"displacement": np.vstack(disp)},
                      cell_data={"yielded_fraction": yf, "axial_force": axial})
    meshio.write(path, out)
    return path


def result_file_model():
    """A pydantic model of result.json (for validation and its JSON Schema)."""
    from typing import Literal

    from pydantic import BaseModel, ConfigDict
    from pydantic.dataclasses import dataclass as pydantic_dataclass

    # the typed records themselves, validated strictly (no unknown or missing fields)
    strict = ConfigDict(extra="forbid")
    KeyPointOut = pydantic_dataclass(config=strict)(KeyPoint)
    Requirement = pydantic_dataclass(config=strict, frozen=True)(RequirementCheck)
    Dynamic = pydantic_dataclass(config=strict, frozen=True)(DynamicStiffness)
    Elastic = pydantic_dataclass(config=strict, frozen=True)(ElasticStiffness)

    class DesignStrengthOut(BaseModel):
        model_config = ConfigDict(extra="forbid")
        factors: dict[str, float]
        status: Literal["ok", "censored", "diverged"]
        message: str
        keypoints: dict[str, KeyPointOut]
        curve: dict[str, list[float | None]]
        increments: int | None
        seconds: float

    class ResultFile(BaseModel):
        model_config = ConfigDict(extra="forbid")
        schema_version: Literal["5"]
        design_schema_version: str
        status: Literal["ok", "censored", "diverged"]
        message: str
        design: str
        curve: dict[str, list[float | None]]
        keypoints: dict[str, KeyPointOut]
        requirements: dict[str, Requirement]
        dynamic: Dynamic | None
        elastic: Elastic | None
        design_strength: DesignStrengthOut | None
        piles: list[dict]
        model: dict
        stages: list[dict]
        timings: dict
        quantities: dict[str, float | int | None] | None
        input: dict[str, str] | None
        caution: str

    return ResultFile
