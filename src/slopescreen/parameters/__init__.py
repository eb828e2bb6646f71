"""Soil parameters: a fixed value or a probability distribution.

A :class:`Parameter` is one of

* ``fixed(value)``;
* ``uniform(low, high)``;
* ``normal(mean, sd)``;
* ``lognormal(median, sd_log)`` (the natural logarithm is normal with mean
  ``ln(median)`` and standard deviation ``sd_log``);

each optionally truncated to physical bounds ``[low, high]`` with
:meth:`Parameter.truncated`. A truncated distribution is the original one
conditioned on lying inside the bounds (its density is renormalised, nothing is
piled up at a bound). A normal distribution that can leave the physical range
of its quantity (a negative depth or cohesion, a friction angle above 60
degrees) is always truncated to that range before sampling: see
:data:`PHYSICAL_RANGE`, applied by ``probability.encode_table``.

Numba kernels receive a parameter as the float64 row of :meth:`Parameter.encode`
``[kind_code, a, b, low, high]``. :func:`_prepare` turns it into a row holding
what the inverse-CDF sampler :func:`_quantile` needs, and :func:`_draw` maps a
64-bit counter key to one value. The random numbers come from a counter-based
generator: the splitmix64 finaliser applied to a key built from (seed, cell or
soil-unit index, sample index, parameter index). A draw therefore depends only
on those four integers, never on the order in which threads run, so Monte Carlo
results are reproducible bit for bit.
"""

# Every name of the former single module stays importable from here: what it
# imported from elsewhere in the package,
from ..errors import InputError
# and what it defined, private names included (tests and other modules use some).
from ._random import (
    _GOLDEN,
    _INV_SQRT2,
    _MIX1,
    _MIX2,
    _S12,
    _S27,
    _S30,
    _S31,
    _SEED_DOMAIN,
    _STREAM,
    _TWO_M52,
    _counter_key,
    _mix64,
    _ndtr,
    _ndtri,
    _ndtri_central,
    _ndtri_tail,
    _seed_key,
    _stream_key,
    _uniform01,
)
from ._sampling import (
    PREPARED_WIDTH,
    _draw,
    _prepare,
    _prepare_into,
    _quantile,
    _quantile_at,
    _quantile_block,
)
from .distributions import (
    _KIND_NAMES,
    _MIN_MASS,
    KIND_CODES,
    Parameter,
    _mass,
    _num,
    fixed,
    lognormal,
    normal,
    uniform,
)
from .physical import PHYSICAL_RANGE, _OPEN_LOW, _field, _physical, _physical_field, _scan_kernel

__all__ = [
    "Parameter",
    "fixed",
    "uniform",
    "normal",
    "lognormal",
    "KIND_CODES",
    "PHYSICAL_RANGE",
]
