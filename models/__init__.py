"""The product-mix formulation: validated arrays in, Pyomo models out (no I/O)."""

from .cuts import add_cuts, build_cut_model
from .data import MixData
from .mix import build_mix_model

__all__ = ["MixData", "build_mix_model", "build_cut_model", "add_cuts"]
