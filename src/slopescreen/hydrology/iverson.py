"""Iverson's (2000) storm response: pressure head and factor of safety at (Z, t).

:class:`StormInputs` (the storm and the soil's hydraulic properties, validated
once), :func:`iverson_response`, :func:`storm_pressure_head` and
:func:`storm_factor_of_safety`; their point kernels are in
:mod:`slopescreen._kernels.iverson`, shared with the least-FS search and the
probability modules.
"""

import dataclasses
import math

import numpy as np

from .. import _validate
from .._kernels.iverson import _head_point, _response, _storm_fs_point
from .._kernels.slope_stability import _rad
from .._numba import njit, njit_parallel, prange
from ..errors import InputError
from ..stability import SoilStrength
from .rain import _INF


@dataclasses.dataclass(frozen=True, kw_only=True, eq=False)
class StormInputs:
    """A storm on near-saturated soil and the soil's hydraulic properties, validated once.

    The inputs of Iverson's (2000) response besides the depth, time and slope
    (docs/methods.md, "Storm response (Iverson 2000)"), in SI units. Every
    field is a number or an array (per cell); they broadcast against each
    other and against the other inputs of :func:`storm_pressure_head`,
    :func:`storm_factor_of_safety` and
    :func:`~slopescreen.hydrology.storm_minimum`, which take one.

    Parameters
    ----------
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
        Long-term infiltration ratio (I_Z/K_Z)_LT in [0, 1]; beta =
        cos^2(alpha) - steady_ratio (clipped at 0). Default 0.

    Raises
    ------
    InputError
        A value out of its range (the message names the field), infinite
        values, an all-NaN field.

    Notes
    -----
    Each field is stored as a read-only numpy array: a float32 input as a
    view of the caller's array (an array changed by its owner afterwards is
    seen changed by the object), anything else as a float64 copy.

    References
    ----------
    Iverson, R.M. (2000). Landslide triggering by rain infiltration. Water
    Resources Research 36(7), 1897-1910. doi 10.1029/2000WR900090

    Examples
    --------
    >>> storm = StormInputs(water_table_depth_m=1.0, intensity_m_per_s=5e-6,
    ...     conductivity_m_per_s=1e-5, diffusivity_m2_per_s=1e-4, duration_s=24 * 3600.0)
    >>> float(storm.duration_s), float(storm.steady_ratio)
    (86400.0, 0.0)
    >>> StormInputs(water_table_depth_m=1.0, intensity_m_per_s=5e-6, conductivity_m_per_s=0.0,
    ...     diffusivity_m2_per_s=1e-4, duration_s=3600.0)
    Traceback (most recent call last):
    ...
    slopescreen.errors.InputError: conductivity_m_per_s: got 0.0; expected values > 0.0 and <= inf
    """

    water_table_depth_m: np.ndarray
    intensity_m_per_s: np.ndarray
    conductivity_m_per_s: np.ndarray
    diffusivity_m2_per_s: np.ndarray
    duration_s: np.ndarray
    steady_ratio: np.ndarray = 0.0

    # field -> (low, high, open_low) of its check
    _RANGES = {
        "water_table_depth_m": (0.0, _INF, False),
        "intensity_m_per_s": (0.0, _INF, False),
        "conductivity_m_per_s": (0.0, _INF, True),
        "diffusivity_m2_per_s": (0.0, _INF, True),
        "duration_s": (0.0, _INF, False),
        "steady_ratio": (0.0, 1.0, False),
    }

    def __post_init__(self):
        for key, (low, high, open_low) in self._RANGES.items():
            arr = _validate.field(getattr(self, key), key, low, high, open_low=open_low)
            object.__setattr__(self, key, _validate.read_only(arr))

    def _arrays(self):
        """The fields in the order the kernels take them (d, I, K, D0, T, ratio)."""
        return [getattr(self, key) for key in self._RANGES]


def _storm_and_strength(function, fields, storm, strength=None, *, with_strength=False):
    """The StormInputs (and SoilStrength) of a call: the objects or built from loose keywords."""
    specs = [("storm", StormInputs, storm)]
    if with_strength:
        specs.append(("strength", SoilStrength, strength))
    out = _validate.parameter_objects(function, fields, *specs)
    if with_strength and out[1].saturated_unit_weight_kn_m3 is not None:
        raise InputError("saturated_unit_weight_kn_m3: the storm model uses one depth-averaged "
                         "unit weight (unit_weight_kn_m3); leave saturated_unit_weight_kn_m3 "
                         "unset")
    return out


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


def _strength_arrays(strength):
    """c', c_r, phi', gamma of a SoilStrength in the order the storm kernels take them."""
    return [strength.cohesion_kpa, strength.root_cohesion_kpa, strength.friction_deg,
            strength.unit_weight_kn_m3]


def _point_fields(depth_m, time_s, slope_deg):
    return [
        _validate.field(depth_m, "depth_m", 0.0, _INF, open_low=True),
        _validate.field(time_s, "time_s", 0.0, _INF),
        _validate.slope_field(slope_deg),
    ]


def storm_pressure_head(depth_m, time_s, *, slope_deg, storm=None, **storm_fields):
    """Pressure head at vertical depth Z and time t during and after a storm.

    Parameters
    ----------
    depth_m : array_like
        Vertical depth Z below the ground surface, m (> 0).
    time_s : array_like
        Time since the storm began, s (>= 0).
    slope_deg : array_like
        Slope angle alpha, degrees in [0, 90).
    storm : StormInputs
        Water table depth d, intensity I, conductivity K_Z, diffusivity D0,
        duration T and the steady ratio.
    **storm_fields
        Instead of ``storm``: its fields as loose keywords
        (``water_table_depth_m=..., intensity_m_per_s=...``, and so on), from
        which a :class:`StormInputs` is built.

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
    >>> storm = StormInputs(water_table_depth_m=1.0, intensity_m_per_s=5e-6,
    ...     conductivity_m_per_s=1e-5, diffusivity_m2_per_s=1e-4, duration_s=24 * 3600.0)
    >>> psi = storm_pressure_head(1.0, 12 * 3600.0, slope_deg=35.0, storm=storm)
    >>> round(float(psi), 4)  # 0.5 R(11.595), water table at Z
    0.5422

    The same call with the storm as loose keywords:

    >>> psi = storm_pressure_head(1.0, 12 * 3600.0, slope_deg=35.0, water_table_depth_m=1.0,
    ...     intensity_m_per_s=5e-6, conductivity_m_per_s=1e-5, diffusivity_m2_per_s=1e-4,
    ...     duration_s=24 * 3600.0)
    >>> round(float(psi), 4)
    0.5422
    """
    fields = _point_fields(depth_m, time_s, slope_deg)
    (storm,) = _storm_and_strength("storm_pressure_head", storm_fields, storm)
    shape, arrs, st = _validate.broadcast_flat(fields + storm._arrays())
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


def storm_factor_of_safety(depth_m, time_s, *, slope_deg, storm=None, strength=None,
                           count_suction=False, **fields):
    """Factor of safety FS(Z, t) on a slip plane at vertical depth Z during a storm.

    Parameters
    ----------
    depth_m, time_s, slope_deg : array_like
        As in :func:`storm_pressure_head`.
    storm : StormInputs
        The storm and the soil's hydraulic properties.
    strength : slopescreen.stability.SoilStrength
        c', basal c_r, phi' and the depth-averaged unit weight gamma_s
        (``unit_weight_kn_m3``); one unit weight, so no gamma_sat.
    count_suction : bool, keyword-only
        If False (default), negative pressure heads (above the water table)
        are taken as 0: suction is conservatively not counted as strength
        (docs/methods.md, "Infinite-slope factor of safety"). True uses Iverson's psi as it is.
    **fields
        Instead of ``storm`` or ``strength``: the fields of either as loose
        keywords, from which the object is built.

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
    >>> from slopescreen.stability import SoilStrength
    >>> dry = StormInputs(water_table_depth_m=5.0, intensity_m_per_s=0.0,
    ...     conductivity_m_per_s=1e-5, diffusivity_m2_per_s=1e-4, duration_s=0.0)
    >>> sand = SoilStrength(cohesion_kpa=0.0, root_cohesion_kpa=0.0, friction_deg=35.0,
    ...     unit_weight_kn_m3=18.0)
    >>> fs = storm_factor_of_safety(1.0, 0.0, slope_deg=30.0, storm=dry, strength=sand)
    >>> round(float(fs), 5)  # dry: tan 35 / tan 30
    1.2128

    The same call with loose keywords:

    >>> fs = storm_factor_of_safety(1.0, 0.0, slope_deg=30.0, water_table_depth_m=5.0,
    ...     intensity_m_per_s=0.0, conductivity_m_per_s=1e-5, diffusivity_m2_per_s=1e-4,
    ...     duration_s=0.0, cohesion_kpa=0.0, root_cohesion_kpa=0.0, friction_deg=35.0,
    ...     unit_weight_kn_m3=18.0)
    >>> round(float(fs), 5)
    1.2128
    """
    point = _point_fields(depth_m, time_s, slope_deg)
    storm, strength = _storm_and_strength("storm_factor_of_safety", fields, storm, strength,
                                          with_strength=True)
    shape, arrs, st = _validate.broadcast_flat(point + storm._arrays() + _strength_arrays(strength))
    out = np.empty(int(np.prod(shape)), dtype=np.float32)
    _storm_fs_kernel(*arrs[:13], bool(count_suction), st, out)
    return out.reshape(shape)
