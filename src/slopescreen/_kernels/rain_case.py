"""A rain case as the sampling kernels read it: a kind code and a vector of six numbers.

Shared by the Monte Carlo and FOSM of cells and the Monte Carlo of clusters.
Steady: [recharge m/day, 0, 0, 0, 0, 0]. Storm: [intensity m/s, duration s,
water-table depth m, steady ratio, horizon s, antecedent recharge m/day]; the
water-table depth is -1 when the case gives an antecedent recharge instead
(the kernels then take each cell's steady water table,
:func:`slopescreen._kernels.wetness._storm_table_depth`).
"""

import numpy as np

from .._numba import njit
from ..errors import InputError
from ..hydrology import SteadyRain, StormRain


_STEADY, _STORM = 0, 1


def _rain_vector(rain):
    """(kind, vector) of a rain case; steady: recharge in m/day, storm: intensity m/s and so on."""
    if isinstance(rain, SteadyRain):
        # recharge in m/day, to be multiplied by a (m): inflow in m^2/day
        return _STEADY, np.array([rain.recharge_mm_per_day * 1e-3, 0.0, 0.0, 0.0, 0.0, 0.0])
    if isinstance(rain, StormRain):
        ante = rain.antecedent_mm_per_day
        return _STORM, np.array([
            rain.intensity_m_per_s, rain.duration_s,
            -1.0 if ante is not None else rain.water_table_depth_m,
            rain.steady_ratio, rain.horizon_s, 0.0 if ante is None else ante * 1e-3,
        ])
    raise InputError(f"rain: expected a SteadyRain or a StormRain, got {type(rain).__name__}")


def _needs_area(rain_kind, rain_vec):
    """True when the case reads the specific catchment area (steady, or an antecedent storm)."""
    return rain_kind == _STEADY or rain_vec[2] < 0.0


@njit
def _area_rate(rain_kind, rain):
    """The rate, m/day, that multiplies the specific catchment area a into q a."""
    return rain[0] if rain_kind == _STEADY else rain[5]
