"""Probability of failure from uncertain soil parameters: Monte Carlo and FOSM."""

from .fosm import FosmResult, fosm_reliability, reliability_index
from .monte_carlo import failure_probability
from .table import PARAMETER_ORDER, encode_table

__all__ = [
    "PARAMETER_ORDER",
    "encode_table",
    "failure_probability",
    "fosm_reliability",
    "reliability_index",
    "FosmResult",
]
