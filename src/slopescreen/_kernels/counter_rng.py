"""Counter-based random numbers (numba).

A draw is the splitmix64 finaliser applied to a key built from (seed, stream,
counter), mapped into (0, 1) by :func:`_uniform01`. The stream is a cell or a
soil unit and the counter numbers the draws of a stream, so a draw depends only
on those integers, never on the order in which threads run: Monte Carlo results
are reproducible bit for bit.
"""

import numpy as np

from .._numba import njit


_GOLDEN = np.uint64(0x9E3779B97F4A7C15)
_STREAM = np.uint64(0xD1B54A32D192ED03)
_MIX1 = np.uint64(0xBF58476D1CE4E5B9)
_MIX2 = np.uint64(0x94D049BB133111EB)
_SEED_DOMAIN = np.uint64(0x5EED0F5107E5C2E5)
_S30 = np.uint64(30)
_S27 = np.uint64(27)
_S31 = np.uint64(31)
_S12 = np.uint64(12)
_TWO_M52 = 1.0 / 4503599627370496.0


@njit
def _mix64(z):
    """splitmix64 finaliser: a bijective 64-bit mixer.

    Steele, G.L., Lea, D., Flood, C.H. (2014). Fast splittable pseudorandom
    number generators. Proc. OOPSLA 2014, 453-472 (details from memory).
    """
    z = (z ^ (z >> _S30)) * _MIX1
    z = (z ^ (z >> _S27)) * _MIX2
    return z ^ (z >> _S31)


@njit
def _seed_key(seed):
    """Key of a run from a non-negative integer seed (uint64)."""
    return _mix64(np.uint64(seed) ^ _SEED_DOMAIN)


@njit
def _stream_key(seed_key, stream):
    """Key of one stream (a cell or a soil unit) of a run."""
    return _mix64(seed_key + np.uint64(stream + 1) * _STREAM)


@njit
def _counter_key(stream_key, counter):
    """Key of draw number ``counter`` (>= 0) of a stream."""
    return _mix64(stream_key + np.uint64(counter + 1) * _GOLDEN)


@njit
def _uniform01(key):
    """Map a 64-bit key to a uniform number strictly inside (0, 1).

    The top 52 bits k give (k + 1/2) / 2^52, in [2^-53, 1 - 2^-53]: both ends
    are exact doubles (with 53 bits, (2^53 - 1/2) / 2^53 would round to 1).
    """
    return (np.float64(key >> _S12) + 0.5) * _TWO_M52
