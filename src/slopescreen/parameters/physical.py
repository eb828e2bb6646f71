"""Physical ranges of the soil parameters and checks of physical inputs.

:data:`PHYSICAL_RANGE` bounds each quantity; :func:`_physical` truncates a
:class:`~slopescreen.parameters.Parameter` to it, and :func:`_field` and
:func:`_physical_field` check numbers or arrays given directly.
"""

import math

import numpy as np

from .._numba import njit
from ..errors import InputError


PHYSICAL_RANGE = {
    "depth_m": (0.0, math.inf),
    "cohesion_kpa": (0.0, math.inf),
    "root_cohesion_kpa": (0.0, math.inf),
    "friction_deg": (0.0, 60.0),
    "unit_weight_kn_m3": (0.0, 30.0),
    "conductivity_m_per_day": (0.0, math.inf),
    "diffusivity_m2_per_s": (0.0, math.inf),
}
"""Physical range [low, high] of each soil parameter, in its own unit.

Depth, conductivity, diffusivity and unit weight must be > 0 (the lower bound
is open); cohesions may be 0. Distributions are truncated to these ranges.
"""

_OPEN_LOW = {"depth_m", "unit_weight_kn_m3", "conductivity_m_per_day", "diffusivity_m2_per_s"}


def _physical(param, key):
    """Intersect a parameter's bounds with :data:`PHYSICAL_RANGE` ``[key]``.

    Raises
    ------
    InputError
        When the (fixed) value or the whole distribution lies outside the range.
    """
    lo, hi = PHYSICAL_RANGE[key]
    name = param.name
    if param.kind == "fixed":
        v = param.a
        if v < lo or v > hi or (key in _OPEN_LOW and v <= lo):
            rel = ">" if key in _OPEN_LOW else ">="
            raise InputError(
                f"{name}: {v} is outside the physical range ({rel} {lo}, <= {hi})"
            )
        return param
    new_lo, new_hi = max(param.low, lo), min(param.high, hi)
    try:
        if new_lo > new_hi:
            raise InputError("empty")
        return param.truncated(new_lo, new_hi)
    except InputError:
        raise InputError(
            f"{name}: the {param.kind} distribution ({param.a}, {param.b}) within bounds "
            f"[{param.low}, {param.high}] lies outside the physical range [{lo}, {hi}]"
        ) from None


# ---------------------------------------------------------------------------
# validation of physical inputs given as numbers or arrays
# ---------------------------------------------------------------------------


@njit
def _scan_kernel(values):
    """One pass over the values: (min, max) of the finite ones, NaN count, infinity count."""
    vmin = math.inf
    vmax = -math.inf
    n_nan = 0
    n_inf = 0
    for i in range(values.size):
        v = values[i]
        if math.isnan(v):
            n_nan += 1
        elif math.isinf(v):
            n_inf += 1
        else:
            vmin = min(vmin, v)
            vmax = max(vmax, v)
    return float(vmin), float(vmax), n_nan, n_inf


def _field(value, name, low, high, *, open_low=False, open_high=False, allow_nan=True):
    """Validate a number or array of a physical quantity; return an ndarray.

    float32 input stays float32; anything else becomes float64. NaN marks
    nodata (when ``allow_nan``); infinities, values outside the range and
    all-NaN input raise :class:`InputError` naming ``name``.
    """
    try:
        arr = np.asarray(value)
        if arr.dtype != np.float32:
            arr = arr.astype(np.float64)
    except (TypeError, ValueError):
        raise InputError(
            f"{name}: expected a number or an array of numbers, got {value!r}"
        ) from None
    if arr.size == 0:
        raise InputError(f"{name}: empty array")
    vmin, vmax, n_nan, n_inf = _scan_kernel(arr.reshape(-1))
    if n_inf:
        raise InputError(f"{name}: holds infinite values; use NaN for nodata")
    if n_nan == arr.size:
        raise InputError(f"{name}: every value is NaN (nodata); nothing to compute")
    if n_nan and not allow_nan:
        raise InputError(f"{name}: NaN is not accepted here")
    bad_low = vmin <= low if open_low else vmin < low
    bad_high = vmax >= high if open_high else vmax > high
    if bad_low or bad_high:
        lo_txt = f"> {low}" if open_low else f">= {low}"
        hi_txt = f"< {high}" if open_high else f"<= {high}"
        got = vmin if bad_low else vmax
        raise InputError(f"{name}: got {got}; expected values {lo_txt} and {hi_txt}")
    return arr


def _physical_field(value, key, *, name=None):
    """:func:`_field` with the range of :data:`PHYSICAL_RANGE` ``[key]``."""
    lo, hi = PHYSICAL_RANGE[key]
    return _field(value, name or key, lo, hi, open_low=key in _OPEN_LOW)
