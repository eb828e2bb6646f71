"""Read and validate a scenario file (TOML) into typed objects in SI units."""

from .fields import SOIL_PROPERTIES, slugify
from .load import TOP_LEVEL_KEYS, load_scenario, scenario_from_data
from .model import VERTICAL_UNITS, Scenario, Uncertainty
from .sections import SECTION_PARSERS

__all__ = ["SECTION_PARSERS", "SOIL_PROPERTIES", "Scenario", "TOP_LEVEL_KEYS", "Uncertainty",
           "VERTICAL_UNITS", "load_scenario", "scenario_from_data", "slugify"]
