"""Steady-state wetness W = h_w / z of one point (O'Loughlin 1986; Montgomery & Dietrich 1994).

Used by the steady wetness map and by the Monte Carlo of cells and of clusters
(see docs/methods.md, "Steady wetness").
"""

import math

import numpy as np

from .._numba import njit


@njit
def _wetness_point(inflow, k, depth, sin_t, cos_t):
    """W = min(1, q a / (K z cos sin)); ``inflow`` = q a in the units of K z.

    Flat ground (sin = 0) saturates when q a > 0 and stays dry when q a = 0.
    """
    cap = k * depth * cos_t * sin_t
    # selects and IEEE division so that loops over samples vectorise
    w = np.true_divide(inflow, cap)
    w = 1.0 if inflow >= cap else w
    w = 0.0 if inflow <= 0.0 else w
    return math.nan if math.isnan(cap) or math.isnan(inflow) else w


@njit
def _storm_table_depth(table_depth, inflow, k, depth, sin_t, cos_t):
    """Vertical depth d of a storm's initial water table, m.

    ``table_depth`` >= 0: that depth (one water table for the case). Negative:
    the steady water table of an antecedent recharge, d = z (1 - W) with
    W = :func:`_wetness_point` of ``inflow`` = q a (docs/methods.md, "Storm
    response (Iverson 2000)", antecedent water table).
    """
    if table_depth >= 0.0:
        return table_depth
    return depth * (1.0 - _wetness_point(inflow, k, depth, sin_t, cos_t))
