"""Probability of failure from uncertain soil parameters: Monte Carlo and FOSM.

The soil of each cell belongs to a soil unit (``unit_index``, -1 = nodata);
each unit has one :class:`~slopescreen.parameters.Parameter` per entry of
:data:`PARAMETER_ORDER`, packed by :func:`encode_table` into a float64 array
of shape (n_units, 7, 5). Every distribution is truncated to the physical
range of its quantity (:data:`slopescreen.parameters.PHYSICAL_RANGE`) before
it is used, so no negative depth or cohesion is ever drawn.

A rain case is a :class:`~slopescreen.hydrology.SteadyRain` (FS from the
steady wetness) or a :class:`~slopescreen.hydrology.StormRain` (least FS over
time of Iverson's storm response).

P_f is per cell and conditional on the assumed distributions; parameters are
independent of each other, and between cells they are either independent
(``correlation="cell"``) or fully shared within a soil unit
(``correlation="unit"``). Spatial correlation in between is not modelled:
P_f of a cell is not the probability that some landslide occurs in an area.
"""

# Every name of the former single module stays importable from here: what it
# imported from elsewhere in the package,
from ..errors import InputError
from ..hydrology import SteadyRain, StormRain, _storm_min_point, _wetness_point
from ..parameters import (
    PREPARED_WIDTH,
    Parameter,
    _counter_key,
    _field,
    _mix64,
    _physical,
    _prepare_into,
    _quantile_at,
    _quantile_block,
    _seed_key,
    _stream_key,
    _uniform01,
    fixed,
)
from ..stability import _rad, _steady_fs_point
# and what it defined, private names included (tests and other modules use some).
from ._fs_sample import _sample_fs
from ._inputs import _STEADY, _STORM, _grid_inputs, _rain_vector
from .fosm import FosmResult, _fosm_kernel, _fs_of_vector, fosm_reliability, reliability_index
from .monte_carlo import (
    _BLOCK,
    _CHUNK,
    _COS_C,
    _SIN_C,
    _TAN,
    _UNIT_DOMAIN,
    _count_failures,
    _draw_block,
    _failure_probability_kernel,
    _prepare_table,
    _tan_friction,
    _unit_draws_kernel,
    failure_probability,
)
from .table import (
    _ABSENT,
    _COH,
    _COND,
    _DEPTH,
    _DIFF,
    _GAMMA,
    _N_PAR,
    _PHI,
    _ROOT,
    PARAMETER_ORDER,
    _absent,
    _checked_table,
    encode_table,
)

__all__ = [
    "PARAMETER_ORDER",
    "encode_table",
    "failure_probability",
    "fosm_reliability",
    "reliability_index",
    "FosmResult",
]
