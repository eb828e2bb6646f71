"""Iverson's (2000) storm response: pressure head and factor of safety at (Z, t).

:func:`iverson_response`, :func:`storm_pressure_head` and
:func:`storm_factor_of_safety`, with the point kernels that
:mod:`slopescreen.hydrology.storm` and the probability module reuse.
"""

import math

import numpy as np

from .._numba import njit, njit_parallel, prange
from ..errors import InputError
from ..parameters import _field, _physical_field
from ..stability import GAMMA_W, _flat, _fs_point, _rad, _slope_field
from .rain import _INF


_SQRT_PI = math.sqrt(math.pi)


# ---------------------------------------------------------------------------
# Iverson (2000): response function and pressure head
# ---------------------------------------------------------------------------


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


def iverson_response(t_star):
    """Iverson's (2000) response function R(t*) of the pressure head.

    Parameters
    ----------
    t_star : array_like
        Dimensionless time t* = t / (Z^2 / D_hat) >= 0, D_hat = 4 D0 cos^2(alpha).

    Returns
    -------
    numpy.ndarray of float64
        R(t*); R(0) = 0, NaN for NaN, +inf for +inf.

    Raises
    ------
    InputError
        Negative t*.

    Notes
    -----
    ::

        R(t*) = sqrt(t*/pi) exp(-1/t*) - erfc(1/sqrt(t*))

    R is the constant-flux solution of 1-D linear diffusion in a semi-infinite
    domain, scaled by Z I_Z/K_Z. It underflows smoothly to 0 for t* below
    about 1/700 and grows like sqrt(t*/pi) for large t* (it does not saturate:
    the head must be capped at beta Z).

    References
    ----------
    Iverson, R.M. (2000). Landslide triggering by rain infiltration. Water
    Resources Research 36(7), 1897-1910. doi 10.1029/2000WR900090

    Examples
    --------
    >>> round(float(iverson_response(1.0)), 10)
    0.0502545417
    """
    t = np.asarray(t_star, dtype=np.float64)
    if (t < 0).any():
        raise InputError("t_star: dimensionless time must be >= 0")
    out = np.empty(t.shape, dtype=np.float64)
    _response_kernel(t.reshape(-1), out.reshape(-1))
    return out


@njit
def _response_kernel(t, out):
    for i in range(t.size):
        out[i] = _response(t[i])


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


@njit_parallel
def _head_kernel(depth, time, slope, d, intens, k, d0, dur, ratio, st, out):
    for i in prange(out.size):
        cos_a = math.cos(_rad(slope[i * st[2]]))
        psi, _ = _head_point(
            depth[i * st[0]], time[i * st[1]], cos_a, d[i * st[3]], intens[i * st[4]],
            k[i * st[5]], d0[i * st[6]], dur[i * st[7]], ratio[i * st[8]],
        )
        out[i] = psi


def _storm_fields(depth_m, time_s, slope_deg, water_table_depth_m, intensity_m_per_s,
                  conductivity_m_per_s, diffusivity_m2_per_s, duration_s, steady_ratio,
                  depth_name="depth_m"):
    return [
        _field(depth_m, depth_name, 0.0, _INF, open_low=True),
        _field(time_s, "time_s", 0.0, _INF),
        _slope_field(slope_deg),
        _field(water_table_depth_m, "water_table_depth_m", 0.0, _INF),
        _field(intensity_m_per_s, "intensity_m_per_s", 0.0, _INF),
        _field(conductivity_m_per_s, "conductivity_m_per_s", 0.0, _INF, open_low=True),
        _field(diffusivity_m2_per_s, "diffusivity_m2_per_s", 0.0, _INF, open_low=True),
        _field(duration_s, "duration_s", 0.0, _INF),
        _field(steady_ratio, "steady_ratio", 0.0, 1.0),
    ]


def storm_pressure_head(
    depth_m,
    time_s,
    *,
    slope_deg,
    water_table_depth_m,
    intensity_m_per_s,
    conductivity_m_per_s,
    diffusivity_m2_per_s,
    duration_s,
    steady_ratio=0.0,
):
    """Pressure head at vertical depth Z and time t during and after a storm.

    Parameters
    ----------
    depth_m : array_like
        Vertical depth Z below the ground surface, m (> 0).
    time_s : array_like
        Time since the storm began, s (>= 0).
    slope_deg : array_like
        Slope angle alpha, degrees in [0, 90).
    water_table_depth_m : array_like
        Vertical depth d of the steady water table before the storm, m (>= 0).
    intensity_m_per_s : array_like
        Rain intensity I, m/s (>= 0); I_Z = min(I, K_Z) infiltrates, the rest runs off.
    conductivity_m_per_s : array_like
        Saturated conductivity K_Z, m/s (> 0).
    diffusivity_m2_per_s : array_like
        Maximum hydraulic diffusivity D0, m^2/s (> 0).
    duration_s : array_like
        Storm duration T, s (>= 0).
    steady_ratio : array_like, optional
        Long-term infiltration ratio (I_Z/K_Z)_LT in [0, 1]; default 0.

    All inputs broadcast against each other.

    Returns
    -------
    numpy.ndarray of float64
        psi in m, capped at beta Z. Negative above the initial water table.

    Raises
    ------
    InputError
        Values out of range, infinite values, all-NaN input.

    Notes
    -----
    Iverson (2000), METHODS.md section 7::

        psi = beta (Z - d) + Z (I_Z/K_Z) R(t*)                    t <= T
        psi = beta (Z - d) + Z (I_Z/K_Z) [R(t*) - R(t* - T*)]     t > T
        beta = cos^2(alpha) - steady_ratio (clipped at 0),  D_hat = 4 D0 cos^2(alpha)
        t* = t D_hat / Z^2,   T* = T D_hat / Z^2,   psi <= beta Z

    Assumes near-saturated initial soil and t << A / D0 (A the contributing
    area); Z is vertical depth; psi is a pressure head (psi = h_w cos^2 alpha
    for a slope-parallel water table), not a water height.

    References
    ----------
    Iverson, R.M. (2000). Landslide triggering by rain infiltration. Water
    Resources Research 36(7), 1897-1910. doi 10.1029/2000WR900090

    Examples
    --------
    >>> psi = storm_pressure_head(1.0, 12 * 3600.0, slope_deg=35.0, water_table_depth_m=1.0,
    ...     intensity_m_per_s=5e-6, conductivity_m_per_s=1e-5, diffusivity_m2_per_s=1e-4,
    ...     duration_s=24 * 3600.0)
    >>> round(float(psi), 4)  # 0.5 R(11.595), water table at Z
    0.5422
    """
    fields = _storm_fields(depth_m, time_s, slope_deg, water_table_depth_m, intensity_m_per_s,
                           conductivity_m_per_s, diffusivity_m2_per_s, duration_s, steady_ratio)
    shape, arrs, st = _flat(fields)
    out = np.empty(int(np.prod(shape)), dtype=np.float64)
    _head_kernel(*arrs, st, out)
    return out.reshape(shape)


@njit_parallel
def _storm_fs_kernel(depth, time, slope, d, intens, k, d0, dur, ratio, coh, root, phi, gam,
                     count_suction, st, out):
    for i in prange(out.size):
        a = _rad(slope[i * st[2]])
        cos_a = math.cos(a)
        z = depth[i * st[0]]
        psi, _ = _head_point(
            z, time[i * st[1]], cos_a, d[i * st[3]], intens[i * st[4]],
            k[i * st[5]], d0[i * st[6]], dur[i * st[7]], ratio[i * st[8]],
        )
        out[i] = _storm_fs_point(
            z, psi, math.sin(a), cos_a, coh[i * st[9]] + root[i * st[10]],
            math.tan(_rad(phi[i * st[11]])), gam[i * st[12]], count_suction,
        )


def _strength_fields(cohesion_kpa, root_cohesion_kpa, friction_deg, unit_weight_kn_m3):
    return [
        _physical_field(cohesion_kpa, "cohesion_kpa"),
        _physical_field(root_cohesion_kpa, "root_cohesion_kpa"),
        _physical_field(friction_deg, "friction_deg"),
        _physical_field(unit_weight_kn_m3, "unit_weight_kn_m3"),
    ]


def storm_factor_of_safety(
    depth_m,
    time_s,
    *,
    slope_deg,
    water_table_depth_m,
    intensity_m_per_s,
    conductivity_m_per_s,
    diffusivity_m2_per_s,
    duration_s,
    cohesion_kpa,
    root_cohesion_kpa,
    friction_deg,
    unit_weight_kn_m3,
    steady_ratio=0.0,
    count_suction=False,
):
    """Factor of safety FS(Z, t) on a slip plane at vertical depth Z during a storm.

    Parameters
    ----------
    depth_m, time_s, slope_deg, water_table_depth_m : array_like
        As in :func:`storm_pressure_head`.
    intensity_m_per_s, conductivity_m_per_s, diffusivity_m2_per_s : array_like
        As in :func:`storm_pressure_head`.
    duration_s, steady_ratio : array_like
        As in :func:`storm_pressure_head`.
    cohesion_kpa, root_cohesion_kpa : array_like
        c' and basal c_r, kPa (>= 0).
    friction_deg : array_like
        phi', degrees in [0, 60].
    unit_weight_kn_m3 : array_like
        Depth-averaged soil unit weight gamma_s, kN/m^3 (0, 30].
    count_suction : bool, keyword-only
        If False (default), negative pressure heads (above the water table)
        are taken as 0: suction is conservatively not counted as strength
        (METHODS.md section 5). True uses Iverson's psi as it is.

    Returns
    -------
    numpy.ndarray of float32
        FS in [0, FS_CAP] (FS_CAP = 100 on flat ground), NaN where an input is NaN.

    Raises
    ------
    InputError
        Values out of range, infinite values, all-NaN input.

    Notes
    -----
    Iverson (2000), with psi from :func:`storm_pressure_head`::

        FS = tan(phi')/tan(alpha) + [C - psi gamma_w tan(phi')] / (gamma_s Z sin(alpha) cos(alpha))

    which is the infinite-slope expression of :mod:`slopescreen.stability`
    with column weight gamma_s Z and pore pressure u = gamma_w psi.

    References
    ----------
    Iverson, R.M. (2000). Landslide triggering by rain infiltration. Water
    Resources Research 36(7), 1897-1910. doi 10.1029/2000WR900090

    Examples
    --------
    >>> fs = storm_factor_of_safety(1.0, 0.0, slope_deg=30.0, water_table_depth_m=5.0,
    ...     intensity_m_per_s=0.0, conductivity_m_per_s=1e-5, diffusivity_m2_per_s=1e-4,
    ...     duration_s=0.0, cohesion_kpa=0.0, root_cohesion_kpa=0.0, friction_deg=35.0,
    ...     unit_weight_kn_m3=18.0)
    >>> round(float(fs), 5)  # dry: tan 35 / tan 30
    1.2128
    """
    fields = _storm_fields(depth_m, time_s, slope_deg, water_table_depth_m, intensity_m_per_s,
                           conductivity_m_per_s, diffusivity_m2_per_s, duration_s, steady_ratio)
    fields += _strength_fields(cohesion_kpa, root_cohesion_kpa, friction_deg, unit_weight_kn_m3)
    shape, arrs, st = _flat(fields)
    out = np.empty(int(np.prod(shape)), dtype=np.float32)
    _storm_fs_kernel(*arrs[:13], bool(count_suction), st, out)
    return out.reshape(shape)
