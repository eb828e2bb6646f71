"""Layout of an encoded soil-unit table, the array the sampling kernels read, and its check.

A table is a float64 array of shape (n_units, 7, 5): one encoded
:class:`~slopescreen.parameters.Parameter` per unit and entry of
:data:`PARAMETER_ORDER`, truncated to its physical range. The Monte Carlo and
FOSM of cells (:mod:`slopescreen.probability`) and the Monte Carlo of clusters
(:mod:`slopescreen.clusters.probability`) index it with the row constants
below.
"""

import numpy as np

from .. import _validate
from ..errors import InputError
from ..parameters import Parameter


PARAMETER_ORDER = (
    "depth_m",
    "cohesion_kpa",
    "root_cohesion_kpa",
    "friction_deg",
    "unit_weight_kn_m3",
    "conductivity_m_per_day",
    "diffusivity_m2_per_s",
)
"""Order of the parameters along axis 1 of an encoded table."""

_N_PAR = len(PARAMETER_ORDER)
_DEPTH, _COH, _ROOT, _PHI, _GAMMA, _COND, _DIFF = range(_N_PAR)
_ABSENT = np.array([0.0, np.nan, 0.0, -np.inf, np.inf])


def _absent(row):
    return row[0] == 0.0 and np.isnan(row[1])


def _checked_table(table, storm):
    """Validate an encoded table; return (encoded, truncated) and its parameters."""
    try:
        t = np.asarray(table, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError("table: expected a float array of shape (n_units, 7, 5)") from None
    if t.ndim != 3 or t.shape[1:] != (_N_PAR, 5) or t.shape[0] < 1:
        raise InputError(f"table: expected shape (n_units, {_N_PAR}, 5), got {t.shape}")
    out = np.empty_like(t)
    params = []
    for u in range(t.shape[0]):
        row_params = []
        for p, key in enumerate(PARAMETER_ORDER):
            name = f"unit {u} {key}"
            if _absent(t[u, p]):
                if key != "diffusivity_m2_per_s" or storm:
                    raise InputError(f"{name}: missing; a storm case needs it")
                out[u, p] = _ABSENT
                row_params.append(None)
                continue
            par = _validate.physical_parameter(Parameter.decode(t[u, p], name=name), key)
            out[u, p] = par.encode()
            row_params.append(par)
        params.append(row_params)
    return out, params
