"""Shared helpers for the tests (plain functions; import them with ``from conftest import``)."""

import json

import numpy as np

from femcore.mesh import Mesh


def toml_text(data: dict) -> str:
    """Minimal TOML writer for nested dicts / arrays of tables (test inputs only)."""
    out: list[str] = []

    def value(v):
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, str):
            return json.dumps(v)
        if isinstance(v, list):
            return "[" + ", ".join(value(x) for x in v) + "]"
        return repr(v)

    def table(prefix, d):
        scalars = {k: v for k, v in d.items() if not isinstance(v, dict)
                   and not (isinstance(v, list) and v and isinstance(v[0], dict))}
        for k, v in scalars.items():
            out.append(f"{k} = {value(v)}")
        for k, v in d.items():
            name = f"{prefix}.{k}" if prefix else k
            if isinstance(v, dict):
                out.append(f"[{name}]")
                table(name, v)
            elif isinstance(v, list) and v and isinstance(v[0], dict):
                for item in v:
                    out.append(f"[[{name}]]")
                    table(name, item)

    table("", data)
    return "\n".join(out) + "\n"


def straight_sided(mesh: Mesh, vertex_points: np.ndarray) -> Mesh:
    """Move the vertices to ``vertex_points`` and put every high-order node back on the
    straight-sided (affine) image of its reference position."""
    elem = mesh.element
    pts = mesh.points.copy()
    corner = mesh.cells[:, :3]
    verts = np.unique(corner)
    pts[verts] = vertex_points[verts]
    lam = np.column_stack([1 - elem.nodes.sum(axis=1), elem.nodes])  # (a, 3) barycentric
    X = pts[corner]  # (c, 3, 2)
    pos = np.einsum("av,cvd->cad", lam, X)  # (c, a, 2)
    pts[mesh.cells.ravel()] = pos.reshape(-1, 2)
    return Mesh(pts, mesh.cells, elem, mesh.cell_sets, mesh.edge_sets, mesh.node_sets)


def distort(mesh: Mesh, amount: float, seed: int = 1, fixed: np.ndarray | None = None) -> Mesh:
    """Randomly move interior vertices by up to ``amount`` x local size; straight sides kept."""
    rng = np.random.default_rng(seed)
    boundary = np.unique(np.concatenate([e[:, :2].ravel() for e in mesh.edge_sets.values()]))
    h = mesh.h_mean()
    new = mesh.points + rng.uniform(-amount * h, amount * h, mesh.points.shape)
    keep = np.zeros(mesh.n_nodes, bool)
    keep[boundary] = True
    if fixed is not None:
        keep[fixed] = True
    new[keep] = mesh.points[keep]
    return straight_sided(mesh, new)


def nodal(u: np.ndarray, mesh: Mesh) -> np.ndarray:
    """Node displacements (n_nodes, 2) from a full DOF vector."""
    return u[: 2 * mesh.n_nodes].reshape(-1, 2)


def springs_space_text(base, size: int = 4, lengths=(12.0, 15.0), run: str = "",
                       seed: int = 5) -> str:
    """A small space file on a springs-only base design (about 0.1 s per run): cap diameter,
    top s_u and pile length sampled; the ring follows the cap edge at about 5 pile widths of
    spacing; a dynamic stiffness requirement of 1e7 kNm/rad."""
    values = ", ".join(f"{v:g}" if v != int(v) else f"{v:.1f}" for v in lengths)
    return f'''base = "{base.as_posix()}"
[[parameter]]
path = "cap.diameter"
low = 7.6
high = 9.0
[[parameter]]
path = "soil.layers.0.su"
distribution = "loguniform"
low = 15.0
high = 25.0
[[parameter]]
path = "piles.length"
distribution = "choice"
values = [{values}]
[[derived]]
path = "piles.rings.0.radius"
formula = "cap.diameter / 2 - 0.8"
[[derived]]
path = "piles.rings.0.count"
formula = "round(2 * pi * piles.rings.0.radius / (5 * piles.width))"
[[derived]]                     # not in the base file: a default of the design schema
path = "requirements.dynamic_stiffness_min"
formula = "1.0e7"
[sampling]
method = "sobol"
size = {size}
seed = {seed}
[run]
{run}
'''
