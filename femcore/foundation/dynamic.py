"""Dynamic (small-strain) rotational stiffness: an elastic small-rotation analysis.

Turbine suppliers set a minimum dynamic rotational stiffness for the operational load level,
computed with small-strain moduli (G0). Every soil layer is replaced by a linear elastic
layer with E = 2 G0 (1 + nu) (constant over the layer), the pile springs take their stiffness
from the same moduli, a frictional cap contact is taken as closed (bonded), and
K_dyn = M / theta under a moment at the tower base (no horizontal force; the model
is linear, so the value holds at any moment in the linear range). The value comes from the
harmonic 3D solve (:mod:`.elastic3d`) where the design allows it; the plane-strain slice
(a small rotation, 1e-5 rad, at the slice length in use) is reported beside it. The static
secant stiffness comes from the pushover with the operational moduli E; results say which
moduli each figure used.
"""

from __future__ import annotations

import numpy as np

from .build import build_model
from .design import Design
from .elastic3d import check_harmonic_layout, harmonic_stiffness, small_strain_design
from .records import DynamicStiffness

__all__ = ["dynamic_stiffness"]


def dynamic_stiffness(design: Design, rotation: float = 1e-5, slice_length: float | None = None,
                      harmonic: bool = True) -> DynamicStiffness:
    """The small-strain rotational stiffness (kNm/rad), or None with the reason.

    The value is the harmonic 3D solve when ``harmonic`` and the design allows it (continuum
    support, rings of >= 3 piles), else the plane-strain slice (at ``slice_length``, default
    the design's); a plane-strain design also reports the slice value."""
    missing = [ly.name for ly in design.soil.layers if ly.G0 is None]
    if missing:
        return DynamicStiffness(None, reason=f"no G0 given for layer(s) {missing}")
    geometry = design.analysis.geometry
    if geometry == "axisymmetric":
        return DynamicStiffness(None, reason="not computed for axisymmetric (vertical) models")
    h = None
    if harmonic and not check_harmonic_layout(design):
        h = harmonic_stiffness(design, "small_strain", vertical=False)
    if geometry == "harmonic":
        return DynamicStiffness(h.moment, rotation=None, dofs=h.dofs,
                                method="harmonic 3D solve (n = 1)")
    small = small_strain_design(design)
    built = build_model(small, slice_length)
    model = built.model
    TH = model.dofmap.ref_dof(built.ref, 2)
    cmap = built.constraints.build(extra_fixed={TH: rotation})
    sol = model.solve_linear(cmap, np.zeros(model.n_dofs))
    k_slice = float(cmap.generalized_at(sol.reactions, TH) * built.slice_length / rotation)
    if h is None:
        return DynamicStiffness(k_slice, rotation=rotation, dofs=model.n_dofs,
                                slice_value=k_slice)
    return DynamicStiffness(h.moment, rotation=None, dofs=h.dofs,
                            method="harmonic 3D solve (n = 1)", slice_value=k_slice)
