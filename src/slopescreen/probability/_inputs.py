"""Checks of the grids, table and rain case shared by Monte Carlo and FOSM."""

import math

import numpy as np

from .. import _validate
from .._kernels.rain_case import _STORM, _needs_area, _rain_vector
from .._kernels.soil_table import _checked_table
from ..errors import InputError


def _grid_inputs(slope_deg, sca_m, unit_index, table, rain, n_depths):
    """Validate the inputs shared by the Monte Carlo and FOSM functions."""
    rain_kind, rain_vec = _rain_vector(rain)
    slope, _ = _validate.surface(slope_deg, name="slope_deg", min_size=1)
    _validate.slope_field(slope)
    shape = slope.shape
    area = _needs_area(rain_kind, rain_vec)
    if area:
        if sca_m is None:
            raise InputError("sca_m: a steady rain case, or a storm with antecedent_mm_per_day, "
                             "needs the specific catchment area")
        sca = _validate.field(sca_m, "sca_m", 0.0, math.inf)
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
    nd = _validate.positive_int(n_depths, "n_depths")
    flat_sca = sca.reshape(-1) if area else sca
    return (shape, slope.reshape(-1), flat_sca, unit.astype(np.int64, copy=False).reshape(-1),
            encoded, params, rain_kind, rain_vec, nd)
