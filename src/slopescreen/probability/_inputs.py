"""Checks of the grids, table and rain case shared by Monte Carlo and FOSM."""

import math

import numpy as np

from .. import _checks
from ..errors import InputError
from ..hydrology import SteadyRain, StormRain
from ..parameters import _field
from .table import _checked_table


_STEADY, _STORM = 0, 1


def _rain_vector(rain):
    if isinstance(rain, SteadyRain):
        # recharge in m/day, to be multiplied by a (m): inflow in m^2/day
        return _STEADY, np.array([rain.recharge_mm_per_day * 1e-3, 0.0, 0.0, 0.0, 0.0])
    if isinstance(rain, StormRain):
        return _STORM, np.array([
            rain.intensity_m_per_s, rain.duration_s, rain.water_table_depth_m,
            rain.steady_ratio, rain.horizon_s,
        ])
    raise InputError(f"rain: expected a SteadyRain or a StormRain, got {type(rain).__name__}")


def _grid_inputs(slope_deg, sca_m, unit_index, table, rain, n_depths):
    """Validate the inputs shared by the Monte Carlo and FOSM functions."""
    rain_kind, rain_vec = _rain_vector(rain)
    slope, _ = _checks.surface(slope_deg, name="slope_deg", min_size=1)
    _field(slope, "slope_deg", 0.0, 90.0, open_high=True)
    shape = slope.shape
    if rain_kind == _STEADY:
        if sca_m is None:
            raise InputError("sca_m: a steady rain case needs the specific catchment area")
        sca = _field(sca_m, "sca_m", 0.0, math.inf)
        if sca.shape != shape:
            raise InputError(f"sca_m: shape {sca.shape} does not match slope_deg shape {shape}")
    else:
        sca = np.zeros(1, dtype=np.float64)
    unit = np.asarray(unit_index)
    if unit.shape != shape:
        raise InputError(f"unit_index: shape {unit.shape} does not match slope_deg shape {shape}")
    if not np.issubdtype(unit.dtype, np.integer):
        raise InputError(f"unit_index: expected an integer array, got {unit.dtype}")
    encoded, params = _checked_table(table, rain_kind == _STORM)
    n_units = encoded.shape[0]
    if unit.size and (unit.min() < -1 or unit.max() >= n_units):
        raise InputError(
            f"unit_index: values must lie in [-1, {n_units - 1}] (-1 = nodata, else a row of "
            f"the table), got [{unit.min()}, {unit.max()}]"
        )
    try:
        nd = int(n_depths)
    except (TypeError, ValueError):
        raise InputError(f"n_depths: expected an integer >= 1, got {n_depths!r}") from None
    if nd < 1 or nd != n_depths:
        raise InputError(f"n_depths: expected an integer >= 1, got {n_depths!r}")
    flat_sca = sca.reshape(-1) if rain_kind == _STEADY else sca
    return (shape, slope.reshape(-1), flat_sca, unit.astype(np.int64, copy=False).reshape(-1),
            encoded, params, rain_kind, rain_vec, nd)
