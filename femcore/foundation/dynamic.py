"""Dynamic (small-strain) rotational stiffness: an elastic small-rotation analysis.

Turbine suppliers set a minimum dynamic rotational stiffness for the operational load level,
computed with small-strain moduli (G0). Every soil layer is replaced by a linear elastic
layer with E = 2 G0 (1 + nu) (constant over the layer), the pile springs take their stiffness
from the same moduli, a frictional cap contact is taken as closed (bonded), and a small
rotation (1e-5 rad) of the tower base gives K_dyn = M / theta (the model is linear, so the
value holds at any moment in the linear range). The static secant stiffness comes from the
pushover with the operational moduli E; results say which moduli each figure used.
"""

from __future__ import annotations

import numpy as np

from .build import build_model
from .design import Design
from .records import DynamicStiffness

__all__ = ["dynamic_stiffness"]


def dynamic_stiffness(design: Design, rotation: float = 1e-5) -> DynamicStiffness:
    """The small-strain rotational stiffness (kNm/rad), or None with the reason."""
    layers = design.soil.layers
    missing = [ly.name for ly in layers if ly.G0 is None]
    if missing:
        return DynamicStiffness(None, reason=f"no G0 given for layer(s) {missing}")
    if design.analysis.geometry != "plane_strain":
        return DynamicStiffness(None, reason="computed for plane-strain models only")
    new_layers = []
    for ly in layers:
        nu = ly.nu if ly.nu is not None else (0.49 if ly.undrained else 0.3)
        new_layers.append(ly.model_copy(update={
            "model": "elastic", "E": 2 * ly.G0 * (1 + nu), "E_gradient": 0.0, "nu": nu}))
    cap = design.cap.model_copy(update={"contact": "bonded"}) \
        if design.cap.contact == "frictional" else design.cap
    small = design.model_copy(update={
        "soil": design.soil.model_copy(update={"layers": new_layers}), "cap": cap})
    built = build_model(small)
    model = built.model
    TH = model.dofmap.ref_dof(built.ref, 2)
    cmap = built.constraints.build(extra_fixed={TH: rotation})
    sol = model.solve_linear(cmap, np.zeros(model.n_dofs))
    moment = cmap.generalized_at(sol.reactions, TH) * built.slice_length
    return DynamicStiffness(float(moment / rotation), rotation=rotation, dofs=model.n_dofs)
