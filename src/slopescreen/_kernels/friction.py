"""tan of a friction angle, branch free, for loops over blocks of samples (numba)."""

import math

import numpy as np

from .._numba import njit


# Taylor coefficients of sin and cos (1/n! with alternating signs)
_SIN_C = tuple((-1.0) ** k / math.factorial(2 * k + 1) for k in range(10))
_COS_C = tuple((-1.0) ** k / math.factorial(2 * k) for k in range(11))


@njit
def _tan_friction(phi_deg):
    """tan of a friction angle in [0, 60] degrees, branch free (vectorisable).

    sin and cos by their Taylor series to x^19 and x^20: for x <= pi/3 the
    truncation error is below 1e-19 and the result agrees with math.tan to a
    few units in the last place. Valid only on [0, 60] degrees, the physical
    range every friction distribution is truncated to.
    """
    x = phi_deg * (math.pi / 180.0)
    x2 = x * x
    s = _SIN_C[9]
    s = s * x2 + _SIN_C[8]
    s = s * x2 + _SIN_C[7]
    s = s * x2 + _SIN_C[6]
    s = s * x2 + _SIN_C[5]
    s = s * x2 + _SIN_C[4]
    s = s * x2 + _SIN_C[3]
    s = s * x2 + _SIN_C[2]
    s = s * x2 + _SIN_C[1]
    s = (s * x2 + _SIN_C[0]) * x
    c = _COS_C[10]
    c = c * x2 + _COS_C[9]
    c = c * x2 + _COS_C[8]
    c = c * x2 + _COS_C[7]
    c = c * x2 + _COS_C[6]
    c = c * x2 + _COS_C[5]
    c = c * x2 + _COS_C[4]
    c = c * x2 + _COS_C[3]
    c = c * x2 + _COS_C[2]
    c = c * x2 + _COS_C[1]
    c = c * x2 + _COS_C[0]
    return np.true_divide(s, c)
