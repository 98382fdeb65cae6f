"""The product-mix formulation: validated arrays in, Pyomo models out (no I/O).

The Pyomo builders are imported on first use, so that reading the arrays
(``models.data``) does not pay Pyomo's import time.
"""

from models.data import MixData

__all__ = ["MixData", "build_mix_model", "build_cut_model", "add_cuts"]


def __getattr__(name: str):
    if name in ("build_cut_model", "add_cuts"):
        from models import cuts

        return getattr(cuts, name)
    if name == "build_mix_model":
        from models.mix import build_mix_model

        return build_mix_model
    raise AttributeError(f"module 'models' has no attribute {name!r}")
