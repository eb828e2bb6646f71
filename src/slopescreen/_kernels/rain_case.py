"""A rain case as the sampling kernels read it: a kind code and a vector of five numbers.

Shared by the Monte Carlo and FOSM of cells and the Monte Carlo of clusters.
"""

import numpy as np

from ..errors import InputError
from ..hydrology import SteadyRain, StormRain


_STEADY, _STORM = 0, 1


def _rain_vector(rain):
    """(kind, vector) of a rain case; steady: recharge in m/day, storm: intensity m/s and so on."""
    if isinstance(rain, SteadyRain):
        # recharge in m/day, to be multiplied by a (m): inflow in m^2/day
        return _STEADY, np.array([rain.recharge_mm_per_day * 1e-3, 0.0, 0.0, 0.0, 0.0])
    if isinstance(rain, StormRain):
        return _STORM, np.array([
            rain.intensity_m_per_s, rain.duration_s, rain.water_table_depth_m,
            rain.steady_ratio, rain.horizon_s,
        ])
    raise InputError(f"rain: expected a SteadyRain or a StormRain, got {type(rain).__name__}")
