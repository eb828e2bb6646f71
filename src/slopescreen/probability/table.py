"""Tables of soil-unit parameters: :func:`encode_table`.

A table is a float64 array of shape (n_units, 7, 5): one encoded
:class:`~slopescreen.parameters.Parameter` per unit and entry of
:data:`PARAMETER_ORDER`, truncated to its physical range.
"""

import numpy as np

from .. import _validate
from .._kernels.soil_table import _ABSENT, _N_PAR, PARAMETER_ORDER
from ..errors import InputError
from ..parameters import Parameter, fixed

__all__ = ["PARAMETER_ORDER", "encode_table"]


def encode_table(units):
    """Pack the soil units' parameters into a float64 table (n_units, 7, 5).

    Parameters
    ----------
    units : sequence of mapping
        One mapping per soil unit (its position is its unit index), from each
        name of :data:`PARAMETER_ORDER` to a
        :class:`~slopescreen.parameters.Parameter` or a number (fixed).
        ``diffusivity_m2_per_s`` may be left out when only steady rain is run.

    Returns
    -------
    numpy.ndarray of float64, shape (n_units, 7, 5)
        Row [u, p] is ``Parameter.encode()``, truncated to the physical range.

    Raises
    ------
    InputError
        Unknown or missing names, invalid parameters, values outside the
        physical range (the message names the unit and the parameter).

    Examples
    --------
    >>> from slopescreen.parameters import uniform, normal
    >>> t = encode_table([{"depth_m": uniform(0.8, 1.6), "cohesion_kpa": 1.0,
    ...     "root_cohesion_kpa": uniform(2.0, 8.0), "friction_deg": normal(34.0, 2.0),
    ...     "unit_weight_kn_m3": 18.5, "conductivity_m_per_day": 2.0}])
    >>> t.shape
    (1, 7, 5)
    """
    if isinstance(units, dict) or not hasattr(units, "__len__") or len(units) == 0:
        raise InputError("units: expected a non-empty sequence of mappings, one per soil unit")
    table = np.empty((len(units), _N_PAR, 5), dtype=np.float64)
    for u, unit in enumerate(units):
        unknown = set(unit) - set(PARAMETER_ORDER)
        if unknown:
            raise InputError(
                f"unit {u}: unknown parameter(s) {sorted(unknown)}; "
                f"expected {list(PARAMETER_ORDER)}"
            )
        for p, key in enumerate(PARAMETER_ORDER):
            name = f"unit {u} {key}"
            if key not in unit:
                if key == "diffusivity_m2_per_s":
                    table[u, p] = _ABSENT
                    continue
                raise InputError(f"{name}: missing; every soil unit needs {key}")
            value = unit[key]
            if isinstance(value, Parameter):
                value = Parameter(value.kind, value.a, value.b, value.low, value.high, name=name)
            else:
                value = fixed(value, name=name)
            table[u, p] = _validate.physical_parameter(value, key).encode()
    return table
