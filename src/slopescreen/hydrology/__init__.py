"""Wetness of the soil column under rain: steady recharge and storms.

Two models, both on the conventions of METHODS.md section 0 (vertical depths,
slope-parallel flow, angles in degrees at the interface):

* steady recharge (O'Loughlin 1986; Montgomery & Dietrich 1994):
  :func:`steady_wetness` gives W = h_w / z;
* a storm on near-saturated soil (Iverson 2000): :func:`iverson_response`,
  :func:`storm_pressure_head`, :func:`storm_factor_of_safety` and
  :func:`storm_minimum` (least FS over depth and time, per cell).

Rain cases are described by :class:`SteadyRain` and :class:`StormRain`, which
the probability module reuses.
"""

# Every name of the former single module stays importable from here: what it
# imported from elsewhere in the package,
from ..errors import InputError
from ..parameters import _field, _physical_field
from ..stability import GAMMA_W, _flat, _fs_point, _rad, _slope_field
# and what it defined, private names included (tests and other modules use some).
from .iverson import (
    _SQRT_PI,
    _head_kernel,
    _head_point,
    _peak_equation,
    _peak_star,
    _pulse_response,
    _response,
    _response_kernel,
    _storm_fields,
    _storm_fs_kernel,
    _storm_fs_point,
    _strength_fields,
    iverson_response,
    storm_factor_of_safety,
    storm_pressure_head,
)
from .rain import _INF, SteadyRain, StormRain, _positive
from .steady import _steady_wetness_kernel, _wetness_point, steady_wetness
from .storm import (
    StormMinimum,
    _peak_head,
    _storm_min_point,
    _storm_minimum_kernel,
    storm_minimum,
)

__all__ = [
    "SteadyRain",
    "StormRain",
    "StormMinimum",
    "steady_wetness",
    "iverson_response",
    "storm_pressure_head",
    "storm_factor_of_safety",
    "storm_minimum",
]
