"""Sampling an encoded parameter by inverse transform (numba).

Numba kernels receive a parameter as the float64 row of
:meth:`slopescreen.parameters.Parameter.encode` ``[kind_code, a, b, low, high]``.
:func:`_prepare_into` (or :func:`_prepare`) turns it into the row of
:data:`PREPARED_WIDTH` values that :func:`_quantile_at`, :func:`_quantile_block`
and :func:`_quantile` read; :func:`_draw` maps a 64-bit counter key of
:mod:`slopescreen._kernels.counter_rng` to one value.
"""

import math

import numpy as np

from .._numba import njit
from .counter_rng import _uniform01
from .normal import _ndtr, _ndtri, _ndtri_central


# ---------------------------------------------------------------------------
# numba: sampling a parameter by inverse transform
# ---------------------------------------------------------------------------

PREPARED_WIDTH = 8
"""Length of a row made by :func:`_prepare`."""


@njit
def _prepare_into(code, out):
    """Fill ``out[0:8]`` from an encoded row ``[kind, a, b, low, high]``.

    out = [kind, loc, scale, p_low, p_width, sign, low, high] where for the
    normal kinds ``sign * ndtri(p_low + u * p_width)`` is the standard normal
    quantile at u of the truncated interval: an interval in the upper tail is
    mirrored to the lower tail (sign -1, p_width < 0) so that its
    probabilities keep full relative precision. Degenerate distributions
    become kind 0.
    """
    kind = int(code[0])
    a = code[1]
    b = code[2]
    low = code[3]
    high = code[4]
    out[0] = kind
    out[1] = a
    out[2] = 0.0
    out[3] = 0.0
    out[4] = 1.0
    out[5] = 1.0
    out[6] = low
    out[7] = high
    if kind == 1:
        lo = max(a, low)
        hi = min(b, high)
        out[1] = lo
        out[2] = hi - lo
        if hi == lo:
            out[0] = 0.0
    elif kind == 2 or kind == 3:
        if b == 0.0:
            out[0] = 0.0
            return
        if kind == 2:
            loc = a
            lo = low
            hi = high
        else:
            loc = math.log(a)
            lo = math.log(low) if low > 0.0 else -math.inf
            hi = math.log(high) if high > 0.0 else -math.inf
        zl = (lo - loc) / b
        zh = (hi - loc) / b
        out[1] = loc
        out[2] = b
        if zl > 0.0:
            # upper tail: p = Phi(-zl) - u (Phi(-zl) - Phi(-zh)), x = loc - b ndtri(p),
            # still increasing in u
            p_top = _ndtr(-zl)
            out[3] = p_top
            out[4] = _ndtr(-zh) - p_top
            out[5] = -1.0
        else:
            p_low = _ndtr(zl)
            out[3] = p_low
            out[4] = _ndtr(zh) - p_low


@njit
def _prepare(code):
    """Return the prepared row (float64[8]) of an encoded row."""
    out = np.empty(PREPARED_WIDTH, dtype=np.float64)
    _prepare_into(code, out)
    return out


@njit
def _quantile_at(prep, unit, par, u):
    """Quantile at probability ``u`` in (0, 1) of row ``prep[unit, par]``.

    Reads the prepared table in place: kernels call this in their inner loop
    rather than slicing a row, which would touch the array's reference count.
    """
    kind = prep[unit, par, 0]
    if kind == 0.0:
        return prep[unit, par, 1]
    if kind == 1.0:
        x = prep[unit, par, 1] + u * prep[unit, par, 2]
    else:
        z = prep[unit, par, 5] * _ndtri(prep[unit, par, 3] + u * prep[unit, par, 4])
        x = prep[unit, par, 1] + prep[unit, par, 2] * z
        if kind == 3.0:
            x = math.exp(x)
    # rounding can step a hair outside the truncation interval
    if x < prep[unit, par, 6]:
        x = prep[unit, par, 6]
    elif x > prep[unit, par, 7]:
        x = prep[unit, par, 7]
    return x


@njit
def _quantile_block(prep, unit, par, u, out, row, nb):
    """``out[0, row, j] = _quantile_at(prep, unit, par, u[j])`` for j < nb, bit for bit.

    The same arithmetic as :func:`_quantile_at`, arranged in branch-free loops
    over a block of samples so that the compiler can vectorise them; only the
    normal tails (|p - 0.5| > 0.425) and the lognormal exponential run lane by lane.
    """
    kind = prep[unit, par, 0]
    loc = prep[unit, par, 1]
    scale = prep[unit, par, 2]
    low = prep[unit, par, 6]
    high = prep[unit, par, 7]
    if kind == 0.0:
        for j in range(nb):
            out[0, row, j] = loc
        return
    if kind == 1.0:
        for j in range(nb):
            out[0, row, j] = loc + u[j] * scale
    else:
        p_low = prep[unit, par, 3]
        p_width = prep[unit, par, 4]
        sign = prep[unit, par, 5]
        for j in range(nb):
            out[0, row, j] = _ndtri_central(p_low + u[j] * p_width - 0.5)
        for j in range(nb):
            p = p_low + u[j] * p_width
            q = p - 0.5
            if not abs(q) <= 0.425:
                out[0, row, j] = _ndtri(p)
        for j in range(nb):
            out[0, row, j] = loc + scale * (sign * out[0, row, j])
        if kind == 3.0:
            for j in range(nb):
                out[0, row, j] = math.exp(out[0, row, j])
    for j in range(nb):
        x = out[0, row, j]
        x = low if x < low else x
        out[0, row, j] = high if x > high else x


@njit
def _quantile(prep_row, u):
    """Quantile of one prepared parameter row at probability ``u`` in (0, 1)."""
    return _quantile_at(prep_row.reshape((1, 1, PREPARED_WIDTH)), 0, 0, u)


@njit
def _draw(code_row, key):
    """Draw one value of an encoded parameter for a 64-bit counter key.

    Slow path (prepares the row on every call); kernels prepare once and call
    :func:`_quantile` with :func:`_uniform01`.
    """
    return _quantile(_prepare(code_row), _uniform01(key))
