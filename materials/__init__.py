"""Constitutive models, numpy only, vectorized over (cells, points)."""

from .base import MaterialModel, MaterialParameterError, State
from .elastic import LinearElastic, elastic_matrix
from .mohr_coulomb import MohrCoulomb
from .tresca import Tresca

__all__ = ["MaterialModel", "MaterialParameterError", "State", "LinearElastic", "elastic_matrix",
           "MohrCoulomb", "Tresca"]
