"""Material quantities of a design: the numbers variants are compared by.

All from the design's geometry (no analysis needed), in m, m3 and counts:

* ``cap_concrete_volume`` (m3): the cap as a solid of revolution of its section (flat
  underside; thickness ``centre_thickness`` inside the pedestal radius, falling linearly to
  ``edge_thickness`` at the edge), by Pappus' theorem on the section polygon;
* ``pedestal_concrete_volume`` (m3): the cylinder of ``pedestal_diameter`` and
  ``pedestal_height`` above the cap's centre;
* ``pile_count``; ``pile_total_length`` (m, the sum of the lengths along the pile axes, so
  raked piles count their full length); ``pile_concrete_volume`` (m3, section area times
  total length);
* ``cost_index``: with ``[unit_rates]`` in the design, the sum of each rate times its
  quantity (concrete of cap and pedestal, pile metres, pile concrete, piles); else None.
"""

from __future__ import annotations

import math

import numpy as np

from .design import Design

__all__ = ["quantities", "QUANTITY_UNITS", "revolved_volume"]

#: The quantities and their units (the keys of :func:`quantities`).
QUANTITY_UNITS = {"cap_concrete_volume": "m3", "pedestal_concrete_volume": "m3",
                  "pile_count": "-", "pile_total_length": "m", "pile_concrete_volume": "m3",
                  "cost_index": "-"}


def revolved_volume(r, z) -> float:
    """Volume swept by a closed polygon (r >= 0, vertices in order) turned about the r = 0
    axis: 2 pi times the first moment of its area about the axis (Pappus)."""
    r, z = np.asarray(r, dtype=float), np.asarray(z, dtype=float)
    r1, z1 = np.roll(r, -1), np.roll(z, -1)
    cross = r * z1 - r1 * z
    first_moment = np.sum((r + r1) * cross) / 6.0  # integral of r over the area (signed)
    return float(2.0 * math.pi * abs(first_moment))


def quantities(design: Design) -> dict[str, float | int | None]:
    """The material quantities of ``design`` (see the module docstring)."""
    cap = design.cap
    R, rp = cap.diameter / 2, cap.pedestal_diameter / 2
    section = [(0.0, 0.0), (R, 0.0), (R, cap.edge_thickness), (rp, cap.centre_thickness),
               (0.0, cap.centre_thickness)]
    cap_v = revolved_volume(*zip(*section, strict=True))
    ped_v = math.pi * rp**2 * cap.pedestal_height
    piles = design.piles
    count = int(sum(r.count for r in piles.rings))
    area = piles.width**2 if piles.shape == "square" else math.pi * piles.width**2 / 4
    length = count * piles.length
    out: dict[str, float | int | None] = {
        "cap_concrete_volume": cap_v, "pedestal_concrete_volume": ped_v, "pile_count": count,
        "pile_total_length": length, "pile_concrete_volume": area * length, "cost_index": None}
    ur = design.unit_rates
    if ur is not None:
        out["cost_index"] = (ur.concrete * (cap_v + ped_v) + ur.pile_metre * length
                             + ur.pile_concrete * area * length + ur.pile_each * count)
    return out
