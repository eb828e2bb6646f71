"""Exact percentiles of a large raster without copying or sorting it.

The report quotes percentiles of whole products (slope, specific catchment
area, critical recharge). ``numpy.percentile`` copies the finite values and
partitions the copy; on a grid of 10^7-10^8 cells that costs a copy of the
product and a quarter of a second per product. :func:`percentiles` finds the
same order statistics in two passes over the values: a histogram of the
order-preserving integer keys of the floats (high 16 bits), then, within the
few bins that hold the wanted ranks, the exact values. The result is the
``linear`` method of numpy (Hyndman and Fan 1996, definition 7), interpolated
in float64.
"""

from __future__ import annotations

import math

import numpy as np

from .._numba import njit

__all__ = ["percentiles"]

_BINS = 1 << 16


@njit
def _key(v):
    """Order-preserving unsigned key of a float32 value (bit pattern, sign folded)."""
    bits = np.int64(np.float32(v).view(np.uint32))
    if bits & 0x80000000:
        return (~bits) & 0xFFFFFFFF
    return bits | 0x80000000


@njit
def _histogram_kernel(values, counts):
    n = 0
    for i in range(values.size):
        v = values[i]
        if math.isfinite(v):
            counts[_key(v) >> 16] += 1
            n += 1
    return n


@njit
def _gather_kernel(values, wanted_bins, out):
    """Values whose bin is wanted (``wanted_bins[b]`` is 1), into ``out``; return how many."""
    m = 0
    for i in range(values.size):
        v = values[i]
        if math.isfinite(v) and wanted_bins[_key(v) >> 16]:
            out[m] = v
            m += 1
    return m


def percentiles(values, qs):
    """Percentiles of the finite values of an array (numpy's ``linear`` method).

    Parameters
    ----------
    values : array_like
        Any shape; float32 (a product) is read in place, other types go through
        ``numpy.percentile``. NaN and infinities are left out.
    qs : sequence of float
        Percentiles in [0, 100].

    Returns
    -------
    tuple of float or None
        None when no value is finite.

    Notes
    -----
    For n finite values sorted as v_0 <= ... <= v_(n-1), the q-th percentile is
    v_j + (v_(j+1) - v_j)(h - j) with h = q (n - 1) / 100 and j = floor(h)
    (Hyndman and Fan 1996, definition 7; numpy's default). The order statistics
    are exact; the interpolation is in float64.

    References
    ----------
    Hyndman, R.J., Fan, Y. (1996). Sample quantiles in statistical packages.
    The American Statistician 50(4), 361-365 (from memory).

    Examples
    --------
    >>> p = percentiles(np.array([3.0, 1.0, np.nan, 2.0, 10.0], dtype=np.float32), [0, 50, 90])
    >>> [round(v, 9) for v in p]  # 90th: h = 0.9 * 3 = 2.7, so 3 + 0.7 * (10 - 3)
    [1.0, 2.5, 7.9]
    """
    v = np.asarray(values)
    if v.dtype != np.float32:  # not a product: a plain copy-and-partition is exact and small
        fin = v[np.isfinite(v)].astype(np.float64)
        return tuple(float(p) for p in np.percentile(fin, qs)) if fin.size else None
    flat = np.ascontiguousarray(v).reshape(-1)
    counts = np.zeros(_BINS, dtype=np.int64)
    n = int(_histogram_kernel(flat, counts))
    if n == 0:
        return None
    ranks = []
    for q in qs:
        if not 0.0 <= q <= 100.0:
            raise ValueError(f"percentile {q} is outside [0, 100]")
        h = q * (n - 1) / 100.0
        j = int(math.floor(h))
        ranks.append((j, min(j + 1, n - 1), h - j))
    cum = np.cumsum(counts)
    starts = cum - counts
    wanted = np.zeros(_BINS, dtype=np.uint8)
    needed = sorted({r for j, k, _t in ranks for r in (j, k)})
    bins = np.searchsorted(cum, np.array(needed) + 1)  # bin holding each rank (0-based ranks)
    wanted[bins] = 1
    size = int(counts[wanted == 1].sum())
    out = np.empty(size, dtype=np.float32)
    m = _gather_kernel(flat, wanted, out)
    chosen = np.sort(out[:m])
    # rank r lies in bin b at offset r - starts[b] among the gathered values of bins below it
    offsets = {}
    base = 0
    for b in np.flatnonzero(wanted):
        offsets[int(b)] = base - int(starts[b])
        base += int(counts[b])
    rank_bin = dict(zip(needed, (int(b) for b in bins)))

    def at(rank):
        return float(chosen[rank + offsets[rank_bin[rank]]])

    return tuple(at(j) + (at(k) - at(j)) * t for j, k, t in ranks)
