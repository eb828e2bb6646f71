"""Iverson's (2000) storm response: pressure head and factor of safety at (Z, t).

:func:`iverson_response`, :func:`storm_pressure_head` and
:func:`storm_factor_of_safety`; their point kernels are in
:mod:`slopescreen._kernels.iverson`, shared with the least-FS search and the
probability modules.
"""

import math

import numpy as np

from .. import _validate
from .._kernels.iverson import _head_point, _response, _storm_fs_point
from .._kernels.slope_stability import _rad
from .._numba import njit, njit_parallel, prange
from ..errors import InputError
from .rain import _INF


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
        _validate.field(depth_m, depth_name, 0.0, _INF, open_low=True),
        _validate.field(time_s, "time_s", 0.0, _INF),
        _validate.slope_field(slope_deg),
        _validate.field(water_table_depth_m, "water_table_depth_m", 0.0, _INF),
        _validate.field(intensity_m_per_s, "intensity_m_per_s", 0.0, _INF),
        _validate.field(conductivity_m_per_s, "conductivity_m_per_s", 0.0, _INF, open_low=True),
        _validate.field(diffusivity_m2_per_s, "diffusivity_m2_per_s", 0.0, _INF, open_low=True),
        _validate.field(duration_s, "duration_s", 0.0, _INF),
        _validate.field(steady_ratio, "steady_ratio", 0.0, 1.0),
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
    Iverson (2000); docs/methods.md, "Storm response (Iverson 2000)"::

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
    shape, arrs, st = _validate.broadcast_flat(fields)
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
        _validate.physical_field(cohesion_kpa, "cohesion_kpa"),
        _validate.physical_field(root_cohesion_kpa, "root_cohesion_kpa"),
        _validate.physical_field(friction_deg, "friction_deg"),
        _validate.physical_field(unit_weight_kn_m3, "unit_weight_kn_m3"),
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
        (docs/methods.md, "Infinite-slope factor of safety"). True uses Iverson's psi as it is.

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
    shape, arrs, st = _validate.broadcast_flat(fields)
    out = np.empty(int(np.prod(shape)), dtype=np.float32)
    _storm_fs_kernel(*arrs[:13], bool(count_suction), st, out)
    return out.reshape(shape)
