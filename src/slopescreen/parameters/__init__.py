"""Soil parameters: a fixed value or a probability distribution, and their physical ranges."""

from .._validate import PHYSICAL_RANGE
from .distributions import KIND_CODES, Parameter, fixed, lognormal, normal, uniform

__all__ = [
    "Parameter",
    "fixed",
    "uniform",
    "normal",
    "lognormal",
    "KIND_CODES",
    "PHYSICAL_RANGE",
]
