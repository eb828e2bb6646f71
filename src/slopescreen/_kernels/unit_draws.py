"""Parameter draws shared by every cell of a soil unit (numba).

The Monte Carlo of cells (``correlation="unit"``) and the Monte Carlo of
clusters draw each parameter once per soil unit and sample, from stream u of
a run key made from the seed and :data:`_UNIT_DOMAIN`, so both see the same
draws for the same seed.
"""

import numpy as np

from .._numba import njit, njit_parallel, prange
from .counter_rng import _counter_key, _stream_key, _uniform01
from .friction import _tan_friction
from .inverse_cdf import PREPARED_WIDTH, _prepare_into, _quantile_at
from .soil_table import _N_PAR, _PHI


_UNIT_DOMAIN = np.uint64(0x0C0FFEE5A1DE5EED)


@njit
def _prepare_table(table):
    """Prepared rows (n_units, n_par, PREPARED_WIDTH) of an encoded table, for the samplers."""
    n_units, n_par = table.shape[0], table.shape[1]
    prep = np.empty((n_units, n_par, PREPARED_WIDTH), dtype=np.float64)
    for u in range(n_units):
        for p in range(n_par):
            _prepare_into(table[u, p], prep[u, p])
    return prep


_TAN = _N_PAR  # row of the sample block holding tan(phi)


@njit_parallel
def _unit_draws_kernel(prep, samples, run_key, out):
    """Draws shared by every cell of a unit: out[u, p, s] (p < 7), tan(phi) in out[u, 7, s]."""
    n_units, n_par = prep.shape[0], prep.shape[1]
    for u in prange(n_units):
        key = _stream_key(run_key, u)
        for s in range(samples):
            for p in range(n_par):
                uni = _uniform01(_counter_key(key, s * n_par + p))
                out[u, p, s] = _quantile_at(prep, u, p, uni)
            out[u, _TAN, s] = _tan_friction(out[u, _PHI, s])
