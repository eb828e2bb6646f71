"""Iverson's (2000) storm response at one point: response function, pressure head, FS.

The point kernels behind :func:`slopescreen.hydrology.iverson_response`,
:func:`~slopescreen.hydrology.storm_pressure_head` and
:func:`~slopescreen.hydrology.storm_factor_of_safety`, which the least-FS
kernels of :mod:`slopescreen._kernels.storm` build on (see docs/methods.md,
"Storm response (Iverson 2000)").
"""

import math

from .._numba import njit
from .slope_stability import GAMMA_W, _fs_point


_INF = math.inf
_SQRT_PI = math.sqrt(math.pi)


@njit
def _response(ts):
    """R(t*) = sqrt(t*/pi) exp(-1/t*) - erfc(1/sqrt(t*)); 0 for t* <= 0."""
    if not ts > 0.0:
        return math.nan if math.isnan(ts) else 0.0
    if ts == _INF:
        return _INF
    x = 1.0 / ts
    return math.sqrt(ts) / _SQRT_PI * math.exp(-x) - math.erfc(math.sqrt(x))


@njit
def _pulse_response(ts, storm_ts):
    """R(t*) during the storm, R(t*) - R(t* - T*) after it (superposition)."""
    r = _response(ts)
    if ts > storm_ts:
        r -= _response(ts - storm_ts)
    return r


@njit
def _peak_equation(v, storm_ts):
    """G(v) = 2 v - T* (1 + v) ln(1 + v) / v and dG/dv (> 0 where T* < 4)."""
    lp = math.log1p(v)
    g = 2.0 * v - storm_ts * (1.0 + v) * lp / v
    if v < 1e-3:  # (v - ln(1 + v)) / v^2 by its series, free of cancellation
        d = 0.5 - v / 3.0 + 0.25 * v * v
    else:
        d = (v - lp) / (v * v)
    return g, 2.0 - storm_ts * d


@njit
def _peak_star(storm_ts):
    """Dimensionless time of the post-storm peak of R(t*) - R(t* - T*).

    dR/dt* = exp(-1/t*) / (2 sqrt(pi t*)), so the peak is where that rate is
    equal at t* and t* - T*. Writing v = T* / (t* - T*) the condition becomes
    T* = 2 v^2 / ((1 + v) ln(1 + v)), whose right side increases with v; its
    root G(v) = 0 is found by Newton steps kept inside a bracket (bisection
    when a step leaves it). Returns T* (1 + 1/v).
    """
    if not storm_ts > 0.0:
        return 0.0
    if storm_ts <= 2.0:  # series of the root for small T*
        v = storm_ts * (0.5 + 0.125 * storm_ts)
    else:  # large T*: v ~ (T*/2) ln(1 + v) (1 + 1/v), one fixed-point step
        v = 0.5 * storm_ts * math.log1p(0.5 * storm_ts)
        v = 0.5 * storm_ts * math.log1p(v) * (1.0 + 1.0 / v)
    lo = 0.0
    hi = _INF
    for _ in range(200):
        g, dg = _peak_equation(v, storm_ts)
        if g > 0.0:
            hi = v
        else:
            lo = v
        new = v - g / dg if dg > 0.0 else math.nan
        if not (new > lo and new < hi):
            new = 0.5 * (lo + hi) if hi < _INF else 2.0 * v
        # Newton converges quadratically: a step below 1e-7 v leaves an error near 1e-14 v
        done = abs(new - v) <= 1e-7 * v
        v = new
        if done:
            break
    return storm_ts * (1.0 + 1.0 / v)


@njit
def _head_point(depth, time, cos_a, d, intensity, k, d0, duration, steady_ratio):
    """Capped pressure head psi (m) at vertical depth Z and time t; also whether the cap bound."""
    cos2 = cos_a * cos_a
    beta = cos2 - steady_ratio
    if beta < 0.0:
        beta = 0.0
    ratio = min(intensity, k) / k
    tz = depth * depth / (4.0 * d0 * cos2)
    psi = beta * (depth - d) + depth * ratio * _pulse_response(time / tz, duration / tz)
    cap = beta * depth
    if psi > cap:
        return cap, True
    return psi, False


@njit
def _storm_fs_point(depth, psi, sin_a, cos_a, cohesion, tan_phi, gamma, count_suction):
    """FS at depth Z for pressure head psi: u = gamma_w psi (psi < 0 counted only on request)."""
    if psi < 0.0 and not count_suction:
        psi = 0.0
    return _fs_point(cohesion, tan_phi, sin_a, cos_a, gamma * depth, GAMMA_W * psi)
