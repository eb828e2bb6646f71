"""Least storm factor of safety of one cell over depth and time (Iverson 2000).

:func:`_peak_head` gives the head where it peaks at one depth and
:func:`_storm_min_point` the least FS over a grid of depths; the storm map
(:func:`slopescreen.hydrology.storm_minimum`), the Monte Carlo of cells and
the Monte Carlo of clusters call them (see docs/methods.md, "Storm response
(Iverson 2000)").
"""

import math
from functools import lru_cache

import numpy as np

from .._numba import njit
from .iverson import _head_point, _peak_star, _pulse_response, _storm_fs_point


_INF = math.inf

# the peak table spans T* in [exp(_LOG_TS_LO), exp(_LOG_TS_HI)] on _TABLE_N nodes
_LOG_TS_LO = math.log(1e-7)
_LOG_TS_HI = math.log(1e7)
_TABLE_N = 8193


@njit
def _peak_head(z, cos_a, d, intensity, k, d0, duration, steady_ratio, horizon):
    """(t, psi, capped) at vertical depth z where the head peaks within [0, horizon].

    The head at a depth rises monotonically up to its post-storm peak
    (:func:`_peak_star`), so it is highest at min(peak, horizon); without
    rain the initial head holds (t = 0).
    """
    t = 0.0
    if intensity > 0.0 and duration > 0.0:
        tz = z * z / (4.0 * d0 * cos_a * cos_a)
        t = _peak_star(duration / tz) * tz
        if t > horizon:
            t = horizon
    psi, capped = _head_point(z, t, cos_a, d, intensity, k, d0, duration, steady_ratio)
    return t, psi, capped


@njit
def _peak_table_kernel(x0, h, out):
    """out[0, i] = ln P(T*), out[1, i] = ln(t*_peak / T*) at T* = exp(x0 + i h).

    P(T*) = R(t*_p) - R(t*_p - T*) is the peak of the pulse response, reached
    at t*_p = :func:`_peak_star` (T*) > T*.
    """
    for i in range(out.shape[1]):
        ts = math.exp(x0 + i * h)
        tp = _peak_star(ts)
        out[0, i] = math.log(_pulse_response(tp, ts))
        out[1, i] = math.log(tp / ts)


@njit
def _table_at(table, x0, inv_h, row, x):
    """Linear interpolation of table[row] at x (inside the table's range)."""
    u = (x - x0) * inv_h
    i = min(int(u), table.shape[1] - 2)
    f = u - i
    return table[row, i] + f * (table[row, i + 1] - table[row, i])


@lru_cache(maxsize=1)
def peak_table():
    """(table, x0, inv_h, eps): the tabulated peak of the pulse response and its error bound.

    The peak of R(t*) - R(t* - T*) over t* depends on T* alone, so the storm
    head where it peaks at depth Z is psi = beta (Z - d) + Z (I/K) P(T*),
    T* = T / (Z^2 / (4 D_0 cos^2)) (docs/methods.md, "Storm response
    (Iverson 2000)"). ln P is tabulated against ln T* on 8,193 nodes over
    T* in [1e-7, 1e7]; ``eps`` bounds the relative error of P from the
    table: four times the largest error at the midpoints of the intervals,
    where linear interpolation errs most. The Monte Carlo decides FS < 1
    from the table only where the decision holds for P (1 +- eps); other
    samples get the exact peak, so every decision equals the exact one.
    """
    h = (_LOG_TS_HI - _LOG_TS_LO) / (_TABLE_N - 1)
    table = np.empty((2, _TABLE_N))
    _peak_table_kernel(_LOG_TS_LO, h, table)
    mid = np.empty((2, _TABLE_N - 1))
    _peak_table_kernel(_LOG_TS_LO + 0.5 * h, h, mid)
    between = 0.5 * (table[:, 1:] + table[:, :-1])
    eps = 4.0 * float(np.expm1(np.abs(between - mid).max()))
    table.setflags(write=False)
    return table, _LOG_TS_LO, 1.0 / h, eps


@njit
def _failure_depth(soil_depth, top, j, n):
    """The j-th of n failure depths between ``top`` (excluded) and the soil base."""
    if j == n:
        return soil_depth
    return top + (soil_depth - top) * j / n


@njit
def _storm_min_point(soil_depth, n_depths, z_min, sin_a, cos_a, d, intensity, k, d0, duration,
                     steady_ratio, horizon, cohesion, tan_phi, gamma, count_suction, want_time):
    """Least FS over the failure depths and t in [0, horizon] for one cell.

    Failure depths (docs/methods.md, "Storm response (Iverson 2000)"):
    Z_k = z_min + (H - z_min) k / n, k = 1..n, from just below the minimum
    credible failure depth z_min down to the soil base H; where H <= z_min,
    the base only. With z_min = 0 this is the plain grid H k / n.

    Returns (fs, depth, time, cap_bound). For each depth the head rises
    monotonically up to its post-storm peak (:func:`_peak_head`), so the
    least FS over time is at min(peak, horizon). With ``want_time`` and the
    cap bound, the time returned is the first at which the head reaches the
    cap (the FS stays at its least value from then until the head falls).
    """
    if (
        math.isnan(soil_depth) or math.isnan(sin_a) or math.isnan(d) or math.isnan(intensity)
        or math.isnan(k) or math.isnan(d0) or math.isnan(duration) or math.isnan(cohesion)
        or math.isnan(tan_phi) or math.isnan(gamma) or math.isnan(steady_ratio)
    ):
        return math.nan, math.nan, math.nan, False
    best_fs = _INF
    best_z = math.nan
    best_t = math.nan
    best_cap = False
    top = z_min
    n = n_depths
    if soil_depth <= z_min:
        top = 0.0
        n = 1
    for j in range(1, n + 1):
        z = _failure_depth(soil_depth, top, j, n)
        t, psi, capped = _peak_head(z, cos_a, d, intensity, k, d0, duration, steady_ratio,
                                    horizon)
        fs = _storm_fs_point(z, psi, sin_a, cos_a, cohesion, tan_phi, gamma, count_suction)
        if fs < best_fs:
            best_fs = fs
            best_z = z
            best_t = t
            best_cap = capped
    if want_time and best_cap and best_t > 0.0:
        lo = 0.0
        hi = best_t
        _, cap0 = _head_point(best_z, 0.0, cos_a, d, intensity, k, d0, duration, steady_ratio)
        if cap0:
            hi = 0.0
        for _ in range(80):
            if hi - lo <= 1e-9 * best_t:
                break
            mid = 0.5 * (lo + hi)
            _, c = _head_point(best_z, mid, cos_a, d, intensity, k, d0, duration, steady_ratio)
            if c:
                hi = mid
            else:
                lo = mid
        best_t = hi
    return best_fs, best_z, best_t, best_cap


@njit
def _storm_fails(soil_depth, n_depths, z_min, sin_a, cos_a, d, intensity, k, d0, duration,
                 steady_ratio, horizon, cohesion, tan_phi, gamma, table, x0, inv_h, eps):
    """True where the least FS of :func:`_storm_min_point` (no suction) is < 1.

    The same decision, faster. Depths are tried from the base up, where
    failure is likeliest, and the search stops at the first depth with
    FS < 1. Where even the capped head psi = beta Z (the largest the model
    allows) leaves FS >= 1, no shallower depth can fail either. Otherwise
    the peak head comes from the tabulated peak of the pulse response
    (:func:`peak_table`: ``table, x0, inv_h, eps``), and only where the
    decision is not the same over the table's error bound (or T* or the
    horizon fall outside it) is the peak solved exactly.
    """
    if (
        math.isnan(soil_depth) or math.isnan(sin_a) or math.isnan(d) or math.isnan(intensity)
        or math.isnan(k) or math.isnan(d0) or math.isnan(duration) or math.isnan(cohesion)
        or math.isnan(tan_phi) or math.isnan(gamma) or math.isnan(steady_ratio)
    ):
        return False
    beta = cos_a * cos_a - steady_ratio
    if beta < 0.0:
        beta = 0.0
    top = z_min
    n = n_depths
    if soil_depth <= z_min:
        top = 0.0
        n = 1
    ratio = min(intensity, k) / k
    raining = intensity > 0.0 and duration > 0.0
    for j in range(n, 0, -1):
        z = _failure_depth(soil_depth, top, j, n)
        cap = beta * z
        # with the head at its cap FS = c'/(gamma Z sin cos) + const falls with Z
        # (c' >= 0), so when the base-most depth left holds, every shallower one does
        if _storm_fs_point(z, cap, sin_a, cos_a, cohesion, tan_phi, gamma, False) >= 1.0:
            return False
        if raining:
            tz = z * z / (4.0 * d0 * cos_a * cos_a)
            x = math.log(duration / tz)
            if x > _LOG_TS_LO and x < _LOG_TS_HI and (
                    horizon == _INF
                    or math.exp(_table_at(table, x0, inv_h, 1, x)) * duration * (1.0 + eps)
                    <= horizon):
                rise = z * ratio * math.exp(_table_at(table, x0, inv_h, 0, x))
                base = beta * (z - d)
                psi_hi = min(cap, base + rise * (1.0 + eps))
                if _storm_fs_point(z, psi_hi, sin_a, cos_a, cohesion, tan_phi, gamma,
                                   False) >= 1.0:
                    continue
                psi_lo = min(cap, base + rise * (1.0 - eps))
                if _storm_fs_point(z, psi_lo, sin_a, cos_a, cohesion, tan_phi, gamma,
                                   False) < 1.0:
                    return True
        _, psi, _ = _peak_head(z, cos_a, d, intensity, k, d0, duration, steady_ratio, horizon)
        if _storm_fs_point(z, psi, sin_a, cos_a, cohesion, tan_phi, gamma, False) < 1.0:
            return True
    return False
