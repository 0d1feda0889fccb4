"""Design strengths: the soil of a design with its strengths divided by partial factors.

The factored design keeps everything that is not a strength: the moduli (E_u of a Tresca
layer given as a default of 200 s_u stays at the characteristic value), the at-rest
coefficient K0 (its default 1 - sin(phi') stays at the characteristic phi'), the unit
weights and the geometry. Strengths: s_u and its gradient / ``su``, c' / ``c``,
tan(phi') / ``tan_phi``; the dilation angle is capped at the factored phi'. The pile
resistances derive from the factored strengths and are divided by ``pile_resistance`` in
the model build. Factor values are the user's: EN 1997-1 (Annex A, with its national annex)
gives the sets in use.
"""

from __future__ import annotations

import math

from .design import Design, DesignStrength

__all__ = ["factored_design"]


def factored_design(design: Design) -> Design:
    """``design`` with the design strengths of its ``design_strength`` factors (and no
    ``design_strength`` table itself, so it is not factored twice)."""
    f = design.design_strength or DesignStrength()
    layers = []
    for ly in design.soil.layers:
        upd: dict = {"K0": ly.k0}
        if ly.model == "tresca":
            upd.update(su=ly.su / f.su, su_gradient=ly.su_gradient / f.su,
                       E=ly.E_top)
        elif ly.model == "mohr_coulomb":
            phi = math.degrees(math.atan(math.tan(math.radians(ly.phi)) / f.tan_phi))
            upd.update(c=ly.c / f.c, phi=phi, psi=min(ly.psi, phi))
        layers.append(ly.model_copy(update=upd))
    soil = design.soil.model_copy(update={"layers": layers})
    return design.model_copy(update={"soil": soil, "design_strength": None})
