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
def _any_nan(soil_depth, sin_a, d, intensity, k, d0, duration, cohesion, tan_phi, gamma,
             steady_ratio):
    """True where any input of a storm least-FS search is NaN (nodata)."""
    return (
        math.isnan(soil_depth) or math.isnan(sin_a) or math.isnan(d) or math.isnan(intensity)
        or math.isnan(k) or math.isnan(d0) or math.isnan(duration) or math.isnan(cohesion)
        or math.isnan(tan_phi) or math.isnan(gamma) or math.isnan(steady_ratio)
    )


@njit
def _depth_span(soil_depth, n_depths, z_min):
    """(top, n) of :func:`_failure_depth`: the base only where the soil is no deeper than z_min."""
    if soil_depth <= z_min:
        return 0.0, 1
    return z_min, n_depths


@njit
def _tabled_rise(z, cos_a, d0, duration, horizon, ratio, table, x0, inv_h, eps):
    """Z (I/K) P(T*) at depth Z from the peak table, or -1 where the table cannot be used.

    -1 where T* lies outside the table or the peak may come after the
    horizon (its tabulated time widened by ``eps``); the rise has relative
    error at most ``eps`` (:func:`peak_table`).
    """
    tz = z * z / (4.0 * d0 * cos_a * cos_a)
    x = math.log(duration / tz)
    if not (x > _LOG_TS_LO and x < _LOG_TS_HI):
        return -1.0
    if horizon != _INF and math.exp(_table_at(table, x0, inv_h, 1, x)) * duration * (
            1.0 + eps) > horizon:
        return -1.0
    return z * ratio * math.exp(_table_at(table, x0, inv_h, 0, x))


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
    if _any_nan(soil_depth, sin_a, d, intensity, k, d0, duration, cohesion, tan_phi, gamma,
                steady_ratio):
        return math.nan, math.nan, math.nan, False
    best_fs = _INF
    best_z = math.nan
    best_t = math.nan
    best_cap = False
    top, n = _depth_span(soil_depth, n_depths, z_min)
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
    if _any_nan(soil_depth, sin_a, d, intensity, k, d0, duration, cohesion, tan_phi, gamma,
                steady_ratio):
        return False
    beta = max(0.0, cos_a * cos_a - steady_ratio)
    top, n = _depth_span(soil_depth, n_depths, z_min)
    ratio = min(intensity, k) / k
    raining = intensity > 0.0 and duration > 0.0
    for j in range(n, 0, -1):
        z = _failure_depth(soil_depth, top, j, n)
        cap = beta * z
        # with the head at its cap FS = c'/(gamma Z sin cos) + const falls with Z
        # (c' >= 0), so when the base-most depth left holds, every shallower one does
        if _storm_fs_point(z, cap, sin_a, cos_a, cohesion, tan_phi, gamma, False) >= 1.0:
            return False
        rise = -1.0
        if raining:
            rise = _tabled_rise(z, cos_a, d0, duration, horizon, ratio, table, x0, inv_h, eps)
        if rise >= 0.0:
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


@njit
def _storm_least_depth(soil_depth, n_depths, z_min, sin_a, cos_a, d, intensity, k, d0,
                       duration, steady_ratio, horizon, cohesion, tan_phi, gamma, table, x0,
                       inv_h, eps):
    """(fs, depth, psi) of :func:`_storm_min_point` (no suction), found with fewer peaks.

    The same least FS over the failure depths, the same depth (the
    shallowest of exact ties) and the exact peak head there; only depths
    that can still beat the best so far get an exact peak. Depths are tried
    from the base up. Where the capped head psi = beta Z leaves a depth above
    the best FS (and c' >= 0), no shallower depth can reach it: with the head
    at its cap FS falls with Z (a relative margin of 1e-9 covers rounding
    where it is the same at every depth). Where the tabulated peak (:func:`peak_table`)
    widened by its error bound leaves the depth above the best FS, the depth
    is passed over without solving its peak.
    """
    if _any_nan(soil_depth, sin_a, d, intensity, k, d0, duration, cohesion, tan_phi, gamma,
                steady_ratio):
        return math.nan, math.nan, math.nan
    beta = max(0.0, cos_a * cos_a - steady_ratio)
    top, n = _depth_span(soil_depth, n_depths, z_min)
    ratio = min(intensity, k) / k
    raining = intensity > 0.0 and duration > 0.0
    best_fs = _INF
    best_z = math.nan
    best_psi = math.nan
    for j in range(n, 0, -1):
        z = _failure_depth(soil_depth, top, j, n)
        cap = beta * z
        fs_cap = _storm_fs_point(z, cap, sin_a, cos_a, cohesion, tan_phi, gamma, False)
        if fs_cap > best_fs:
            # the margin keeps the rounding of an FS that is the same at every depth
            # (c' = 0, capped heads) from ending the search before the shallowest tie
            if cohesion >= 0.0 and fs_cap > best_fs * (1.0 + 1e-9):
                break
            continue
        rise = -1.0
        if raining:
            rise = _tabled_rise(z, cos_a, d0, duration, horizon, ratio, table, x0, inv_h, eps)
        if rise >= 0.0:
            psi_hi = min(cap, beta * (z - d) + rise * (1.0 + eps))
            if _storm_fs_point(z, psi_hi, sin_a, cos_a, cohesion, tan_phi, gamma,
                               False) > best_fs:
                continue
        _, psi, _ = _peak_head(z, cos_a, d, intensity, k, d0, duration, steady_ratio, horizon)
        fs = _storm_fs_point(z, psi, sin_a, cos_a, cohesion, tan_phi, gamma, False)
        if fs <= best_fs:
            best_fs = fs
            best_z = z
            best_psi = psi
    return best_fs, best_z, best_psi
