"""Wetness of the soil column under rain: steady recharge and storms (Iverson 2000)."""

from .iverson import StormInputs, iverson_response, storm_factor_of_safety, storm_pressure_head
from .rain import SteadyRain, StormRain
from .steady import antecedent_table_depth, steady_wetness
from .storm import StormMinimum, storm_minimum

__all__ = [
    "SteadyRain",
    "StormRain",
    "StormInputs",
    "StormMinimum",
    "steady_wetness",
    "antecedent_table_depth",
    "iverson_response",
    "storm_pressure_head",
    "storm_factor_of_safety",
    "storm_minimum",
]
