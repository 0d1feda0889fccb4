"""Parametric gmsh geometries with named physical groups, meshed and converted to a Mesh.

Every builder opens its own :func:`gmsh_session`, so calls are independent and repeatable.

Names used by :func:`layered_domain`:

* cell sets ``layer_1`` ... ``layer_n`` (top down), ``soil`` (all layers), ``cap``;
* edge sets ``left``, ``right``, ``base``, ``ground`` (free surface outside the footing),
  ``footing`` (the loaded part of the surface), ``line_1`` ... (embedded lines, e.g. piles),
  ``cap_soil`` (cap-soil contact), ``cap_top``;
* node sets ``footing_ends``.
"""

from __future__ import annotations

from collections.abc import Sequence

import gmsh
import numpy as np

from femcore.mesh import Mesh

from . import regions
from .convert import from_gmsh_model
from .session import gmsh_session

__all__ = ["layered_domain", "rectangle", "annulus_sector", "disc_in_square", "ORDERS"]

ORDERS = {"T3": 1, "T6": 2, "T15": 4}


def _order(element: str) -> int:
    try:
        return ORDERS[element]
    except KeyError:
        raise ValueError(f"element must be one of {sorted(ORDERS)}, got {element!r}") from None


def _finish(order: int) -> Mesh:
    gmsh.model.mesh.generate(2)
    if order > 1:
        gmsh.model.mesh.setOrder(order)
    return from_gmsh_model()


def _size_field(h: float, h_near: float, dist_near: float, dist_far: float,
                points: Sequence[int] = (), curves: Sequence[int] = ()) -> None:
    """Element size h_near within dist_near of the given entities, growing to h at dist_far."""
    if not points and not curves:
        gmsh.option.setNumber("Mesh.MeshSizeMax", h)
        gmsh.option.setNumber("Mesh.MeshSizeMin", h)
        return
    dist = gmsh.model.mesh.field.add("Distance")
    if points:
        gmsh.model.mesh.field.setNumbers(dist, "PointsList", list(points))
    if curves:
        gmsh.model.mesh.field.setNumbers(dist, "CurvesList", list(curves))
        gmsh.model.mesh.field.setNumber(dist, "Sampling", 200)
    thr = gmsh.model.mesh.field.add("Threshold")
    gmsh.model.mesh.field.setNumber(thr, "InField", dist)
    gmsh.model.mesh.field.setNumber(thr, "SizeMin", h_near)
    gmsh.model.mesh.field.setNumber(thr, "SizeMax", h)
    gmsh.model.mesh.field.setNumber(thr, "DistMin", dist_near)
    gmsh.model.mesh.field.setNumber(thr, "DistMax", dist_far)
    gmsh.model.mesh.field.setAsBackgroundMesh(thr)
    gmsh.option.setNumber("Mesh.MeshSizeMax", h)


def rectangle(x0: float, x1: float, y0: float, y1: float, h: float,
              element: str = "T6", msh_file: str | None = None) -> Mesh:
    """Structured-free rectangle mesh with edge sets ``left``, ``right``, ``bottom``, ``top``.

    ``msh_file``: also write the meshed model to this gmsh file (format 4.1), e.g. to check
    that reading it back gives the same mesh."""
    order = _order(element)
    with gmsh_session("rectangle"):
        occ = gmsh.model.occ
        s = occ.addRectangle(x0, y0, 0.0, x1 - x0, y1 - y0)
        occ.synchronize()
        _name_box_edges(x0, x1, y0, y1, {"left": "left", "right": "right",
                                         "bottom": "bottom", "top": "top"})
        gmsh.model.addPhysicalGroup(2, [s], name="domain")
        _size_field(h, h, 0, 0)
        mesh = _finish(order)
        if msh_file is not None:
            gmsh.option.setNumber("Mesh.MshFileVersion", 4.1)
            gmsh.write(str(msh_file))
        return mesh


def annulus_sector(a: float, b: float, h: float, element: str = "T6",
                   angle_deg: float = 90.0) -> Mesh:
    """Sector a <= r <= b, 0 <= angle <= angle_deg; edge sets ``inner``, ``outer``,
    ``x_axis`` (the edge on y = 0) and ``y_axis`` (the edge at angle_deg, x = 0 for 90)."""
    order = _order(element)
    with gmsh_session("annulus"):
        occ = gmsh.model.occ
        t = np.radians(angle_deg)
        c = occ.addPoint(0, 0, 0)
        pa0, pb0 = occ.addPoint(a, 0, 0), occ.addPoint(b, 0, 0)
        pa1 = occ.addPoint(a * np.cos(t), a * np.sin(t), 0)
        pb1 = occ.addPoint(b * np.cos(t), b * np.sin(t), 0)
        l0 = occ.addLine(pa0, pb0)
        arc_out = occ.addCircleArc(pb0, c, pb1)
        l1 = occ.addLine(pb1, pa1)
        arc_in = occ.addCircleArc(pa1, c, pa0)
        loop = occ.addCurveLoop([l0, arc_out, l1, arc_in])
        s = occ.addPlaneSurface([loop])
        occ.synchronize()
        gmsh.model.addPhysicalGroup(1, [l0], name="x_axis")
        gmsh.model.addPhysicalGroup(1, [l1], name="y_axis")
        gmsh.model.addPhysicalGroup(1, [arc_in], name="inner")
        gmsh.model.addPhysicalGroup(1, [arc_out], name="outer")
        gmsh.model.addPhysicalGroup(2, [s], name="domain")
        _size_field(h, h, 0, 0)
        return _finish(order)


def disc_in_square(radius: float, half_width: float, h: float, h_near: float,
                   element: str = "T15") -> Mesh:
    """Upper half (y >= 0) of a square [-a, a] x [0, a] with a circular hole of the given
    radius at the origin: a plane slice through a laterally loaded pile, symmetric about
    y = 0. Edge sets ``hole``, ``symmetry`` (y = 0, both sides of the hole), ``outer``."""
    order = _order(element)
    with gmsh_session("disc"):
        occ = gmsh.model.occ
        a = half_width
        box = occ.addRectangle(-a, 0.0, 0.0, 2 * a, a)
        disc = occ.addDisk(0.0, 0.0, 0.0, radius, radius)
        occ.cut([(2, box)], [(2, disc)])
        occ.synchronize()
        tol = 1e-6 * a
        hole, sym, outer = [], [], []
        for _, c in gmsh.model.getEntities(1):
            x0, y0, _, x1, y1, _ = gmsh.model.getBoundingBox(1, c)
            if abs(y0) < tol and abs(y1) < tol:
                sym.append(c)
            elif max(abs(x0), abs(x1), abs(y1)) <= radius + tol:
                hole.append(c)
            else:
                outer.append(c)
        gmsh.model.addPhysicalGroup(1, hole, name="hole")
        gmsh.model.addPhysicalGroup(1, sym, name="symmetry")
        gmsh.model.addPhysicalGroup(1, outer, name="outer")
        gmsh.model.addPhysicalGroup(2, [s for _, s in gmsh.model.getEntities(2)], name="domain")
        _size_field(h, h_near, h_near, 6 * radius, curves=hole)
        return _finish(order)


def _name_box_edges(x0, x1, y0, y1, names: dict[str, str],
                    footing: tuple[float, float] | None = None, top_y: float | None = None):
    """Physical groups for curves on the sides of the box (and the footing part of the top)."""
    tol = 1e-6 * max(x1 - x0, y1 - y0, 1.0)  # OCC bounding boxes are padded by ~1e-7
    top_y = y1 if top_y is None else top_y
    groups: dict[str, list[int]] = {}
    for _, ctag in gmsh.model.getEntities(1):
        bx0, by0, _, bx1, by1, _ = gmsh.model.getBoundingBox(1, ctag)
        if abs(bx0 - x0) < tol and abs(bx1 - x0) < tol:
            key = "left"
        elif abs(bx0 - x1) < tol and abs(bx1 - x1) < tol:
            key = "right"
        elif abs(by0 - y0) < tol and abs(by1 - y0) < tol:
            key = "bottom"
        elif abs(by0 - top_y) < tol and abs(by1 - top_y) < tol:
            key = "top"
            if footing is not None and bx0 > footing[0] - tol and bx1 < footing[1] + tol:
                key = "footing"
        else:
            continue
        if key in names:
            groups.setdefault(names[key], []).append(ctag)
    for name, tags in groups.items():
        gmsh.model.addPhysicalGroup(1, tags, name=name)
    return groups


def layered_domain(
    width: float,
    depth: float,
    layer_depths: Sequence[float] = (),
    *,
    x_min: float | None = None,
    footing: tuple[float, float] | None = None,
    cap: Sequence[tuple[float, float]] | None = None,
    lines: Sequence[tuple[tuple[float, float], tuple[float, float]]] = (),
    extra_depths: Sequence[float] = (),
    h: float | None = None,
    h_near: float | None = None,
    refine_radius: float | None = None,
    element: str = "T6",
) -> Mesh:
    """Layered soil rectangle, ground at y = 0, optional footing segment, cap region and lines.

    Parameters
    ----------
    width, depth : float
        Domain size in m; x runs from ``x_min`` (default ``-width / 2``) to ``x_min + width``.
    layer_depths : sequence of float
        Depths (m, positive down) of the interfaces between layers, strictly inside (0, depth).
    footing : (x0, x1), optional
        Part of the ground surface that carries a footing; edge set ``footing``.
    cap : sequence of (x, y), optional
        Polygon of a cap region (counter-clockwise or not); cell set ``cap``. Where it lies
        below ground it replaces soil.
    lines : sequence of ((x0, y0), (x1, y1))
        Straight lines embedded in the mesh (mesh nodes lie on them); edge sets ``line_k``.
    extra_depths : sequence of float
        Depths of further horizontal mesh lines that do not start a new layer (e.g. the water
        table, so that the kink of the initial stresses lies on element edges).
    h, h_near : float
        Far-field and near-feature element sizes (m); defaults depth/8 and h/6.
    refine_radius : float
        Distance over which the size grows from h_near to h (default 4 * h_near + size of the
        footing or cap).
    element : "T3", "T6" or "T15"
    """
    order = _order(element)
    x0 = -width / 2.0 if x_min is None else float(x_min)
    x1 = x0 + width
    if width <= 0 or depth <= 0:
        raise ValueError(f"width and depth must be > 0, got {width}, {depth}")
    layer_depths = sorted(float(z) for z in layer_depths)
    if any(not 0 < z < depth for z in layer_depths):
        raise ValueError(f"layer depths must lie in (0, {depth}), got {layer_depths}")
    h = depth / 8.0 if h is None else float(h)
    h_near = h / 6.0 if h_near is None else float(h_near)

    with gmsh_session("layered_domain"):
        occ = gmsh.model.occ
        rect = occ.addRectangle(x0, -depth, 0.0, width, depth)
        tools: list[tuple[int, int]] = []
        for z in sorted({*layer_depths, *(float(e) for e in extra_depths if 0 < e < depth)}):
            tools.append((1, occ.addLine(occ.addPoint(x0, -z, 0), occ.addPoint(x1, -z, 0))))
        if footing is not None:
            fa, fb = sorted(footing)
            tools.append((1, occ.addLine(occ.addPoint(fa, 0, 0), occ.addPoint(fb, 0, 0))))
        cap_poly = None
        if cap is not None:
            pts = [occ.addPoint(px, py, 0) for px, py in cap]
            segs = [occ.addLine(pts[i], pts[(i + 1) % len(pts)]) for i in range(len(pts))]
            cap_poly = np.asarray(cap, dtype=float)
            tools.append((2, occ.addPlaneSurface([occ.addCurveLoop(segs)])))
        line_tags = []
        for (ax, ay), (bx, by) in lines:
            t = occ.addLine(occ.addPoint(ax, ay, 0), occ.addPoint(bx, by, 0))
            tools.append((1, t))
            line_tags.append(t)
        if tools:
            occ.fragment([(2, rect)], tools)
        occ.synchronize()

        # --- classify surfaces: cap or soil layer by the depth of their centre of mass
        layer_of: dict[str, list[int]] = {}
        cap_tags: list[int] = []
        bounds = [0.0, *layer_depths, depth]
        for _, stag in gmsh.model.getEntities(2):
            cx, cy, _ = occ.getCenterOfMass(2, stag)
            if cap_poly is not None and _inside(cap_poly, cx, cy):
                cap_tags.append(stag)
                continue
            z = -cy
            k = int(np.searchsorted(bounds, z)) - 1
            layer_of.setdefault(regions.layer(max(k, 0) + 1), []).append(stag)
        soil_tags = []
        for name in sorted(layer_of, key=lambda s: int(s.split("_")[1])):
            gmsh.model.addPhysicalGroup(2, layer_of[name], name=name)
            soil_tags += layer_of[name]
        gmsh.model.addPhysicalGroup(2, soil_tags, name=regions.SOIL)
        if cap_tags:
            gmsh.model.addPhysicalGroup(2, cap_tags, name=regions.CAP)

        # --- classify curves
        tol = 1e-7 * max(width, depth)
        box_names = {"left": regions.LEFT, "right": regions.RIGHT, "bottom": regions.BASE,
                     "top": regions.GROUND, "footing": regions.FOOTING}
        _name_box_edges(x0, x1, -depth, 0.0, box_names,
                        footing=None if footing is None else tuple(sorted(footing)))
        for k, on in enumerate(_curves_on_segments(lines, tol), start=1):
            gmsh.model.addPhysicalGroup(1, on, name=regions.line(k))
        if cap_tags:
            cap_boundary = gmsh.model.getBoundary([(2, t) for t in cap_tags], oriented=False)
            soil_boundary = gmsh.model.getBoundary([(2, t) for t in soil_tags], oriented=False)
            shared = sorted({abs(c) for _, c in cap_boundary} & {abs(c) for _, c in soil_boundary})
            if shared:
                gmsh.model.addPhysicalGroup(1, shared, name=regions.CAP_SOIL)
        if footing is not None:
            fa, fb = sorted(footing)
            ends = [p for _, p in gmsh.model.getEntities(0)
                    if abs(gmsh.model.getValue(0, p, [])[1]) < tol and
                    min(abs(gmsh.model.getValue(0, p, [])[0] - fa),
                        abs(gmsh.model.getValue(0, p, [])[0] - fb)) < tol]
            gmsh.model.addPhysicalGroup(0, ends, name=regions.FOOTING_ENDS)

        # --- refinement toward footing ends, cap and lines
        near_pts = []
        if footing is not None:
            near_pts = [p for _, p in gmsh.model.getEntities(0)
                        if abs(gmsh.model.getValue(0, p, [])[1]) < tol
                        and min(abs(gmsh.model.getValue(0, p, [])[0] - f) for f in footing) < tol]
        near_curves = []
        for k in range(1, len(lines) + 1):
            group = _group(1, regions.line(k))
            near_curves += list(gmsh.model.getEntitiesForPhysicalGroup(1, group))
        if cap_tags:
            near_curves += [abs(c) for _, c in gmsh.model.getBoundary(
                [(2, t) for t in cap_tags], oriented=False)]
        feature = 0.0
        if footing is not None:
            feature = abs(footing[1] - footing[0])
        if refine_radius is None:
            refine_radius = 4.0 * h_near + 0.5 * feature
        _size_field(h, h_near, h_near, refine_radius, near_pts, near_curves)
        return _finish(order)


def _group(dim: int, name: str) -> int:
    for d, tag in gmsh.model.getPhysicalGroups(dim):
        if gmsh.model.getPhysicalName(d, tag) == name:
            return tag
    raise KeyError(name)


def _curves_on_segments(lines, tol: float) -> list[list[int]]:
    """For each segment ``(a, b)`` of ``lines``, the model curves lying on it: five samples
    of each curve's parametrisation (taken once per curve) must all lie on the segment."""
    tags = [c for _, c in gmsh.model.getEntities(1)]
    if not tags or not lines:
        return [[] for _ in lines]
    xy = np.empty((len(tags), 5, 2))
    for i, c in enumerate(tags):
        lo, hi = gmsh.model.getParametrizationBounds(1, c)
        xy[i] = np.asarray(gmsh.model.getValue(1, c, np.linspace(lo[0], hi[0], 5))
                           ).reshape(-1, 3)[:, :2]
    ab = np.asarray(lines, dtype=float)  # (m, 2, 2)
    a, d = ab[:, 0], ab[:, 1] - ab[:, 0]  # (m, 2)
    length = np.hypot(d[:, 0], d[:, 1])
    rel = xy[None] - a[:, None, None]  # (m, c, 5, 2)
    cross = d[:, None, None, 0] * rel[..., 1] - d[:, None, None, 1] * rel[..., 0]
    t = np.einsum("mcsk,mk->mcs", rel, d) / length[:, None, None] ** 2
    on = (np.all(np.abs(cross) / length[:, None, None] < 10 * tol, axis=2)
          & np.all(t > -1e-9, axis=2) & np.all(t < 1 + 1e-9, axis=2))
    return [[tags[i] for i in np.flatnonzero(row)] for row in on]


def _inside(poly: np.ndarray, x: float, y: float) -> bool:
    """Even-odd point-in-polygon test."""
    inside = False
    n = len(poly)
    for i in range(n):
        (xa, ya), (xb, yb) = poly[i], poly[(i + 1) % n]
        if (ya > y) != (yb > y) and x < xa + (y - ya) * (xb - xa) / (yb - ya):
            inside = not inside
    return inside
