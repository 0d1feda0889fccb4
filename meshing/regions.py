"""Names of the physical groups the builders create, shared by the mesher and the model builder.

The layered soil domain (:func:`meshing.layered_domain`) names its cell sets ``soil``, ``cap``
and ``layer_1 .. layer_n`` (top down), its edge sets ``left``, ``right``, ``base``, ``ground``,
``footing``, ``cap_soil`` (the curves the cap shares with the soil) and ``line_1 .. line_n``
(the pile lines, in the order given), and the node set ``footing_ends``. Builders and model code
use these constants instead of bare strings, so a renamed group fails at import, not at run.
"""

from __future__ import annotations

__all__ = ["SOIL", "CAP", "LEFT", "RIGHT", "BASE", "GROUND", "FOOTING", "FOOTING_ENDS",
           "CAP_SOIL", "layer", "line"]

SOIL = "soil"
CAP = "cap"
LEFT = "left"
RIGHT = "right"
BASE = "base"
GROUND = "ground"
FOOTING = "footing"
FOOTING_ENDS = "footing_ends"
CAP_SOIL = "cap_soil"


def layer(k: int) -> str:
    """Cell set of soil layer ``k`` (1 = top layer)."""
    return f"layer_{k}"


def line(k: int) -> str:
    """Edge set of embedded line ``k`` (1-based, in the order the lines were given)."""
    return f"line_{k}"
