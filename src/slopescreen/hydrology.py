"""Wetness of the soil column under rain: steady recharge and storms.

Two models, both on the conventions of METHODS.md section 0 (vertical depths,
slope-parallel flow, angles in degrees at the interface):

* steady recharge (O'Loughlin 1986; Montgomery & Dietrich 1994):
  :func:`steady_wetness` gives W = h_w / z;
* a storm on near-saturated soil (Iverson 2000): :func:`iverson_response`,
  :func:`storm_pressure_head`, :func:`storm_factor_of_safety` and
  :func:`storm_minimum` (least FS over depth and time, per cell).

Rain cases are described by :class:`SteadyRain` and :class:`StormRain`, which
the probability module reuses.
"""

import dataclasses
import math
from typing import NamedTuple

import numpy as np

from ._numba import njit, njit_parallel, prange
from .errors import InputError
from .parameters import _field, _physical_field
from .stability import GAMMA_W, _flat, _fs_point, _rad, _slope_field

__all__ = [
    "SteadyRain",
    "StormRain",
    "StormMinimum",
    "steady_wetness",
    "iverson_response",
    "storm_pressure_head",
    "storm_factor_of_safety",
    "storm_minimum",
]

_INF = math.inf
_SQRT_PI = math.sqrt(math.pi)


def _positive(value, name, *, allow_zero=True):
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected a number, got {value!r}") from None
    if not math.isfinite(v) or v < 0.0 or (v == 0.0 and not allow_zero):
        rel = ">= 0" if allow_zero else "> 0"
        raise InputError(f"{name}: expected a finite number {rel}, got {value!r}")
    return v


@dataclasses.dataclass(frozen=True)
class SteadyRain:
    """A steady recharge case.

    Parameters
    ----------
    recharge_mm_per_day : float
        Steady recharge q per unit horizontal area, mm/day (>= 0).

    Examples
    --------
    >>> SteadyRain(60.0).recharge_mm_per_day
    60.0
    """

    recharge_mm_per_day: float

    def __post_init__(self):
        object.__setattr__(
            self, "recharge_mm_per_day", _positive(self.recharge_mm_per_day, "recharge_mm_per_day")
        )


@dataclasses.dataclass(frozen=True)
class StormRain:
    """A storm of constant intensity on near-saturated soil (Iverson 2000).

    Parameters
    ----------
    intensity_mm_per_h : float
        Rain intensity, mm/h (>= 0). Only min(I, K_s) infiltrates.
    duration_h : float
        Storm duration, h (>= 0).
    water_table_depth_m : float
        Vertical depth d of the water table before the storm, m (>= 0).
    steady_ratio : float, keyword-only
        Long-term steady infiltration ratio (I_Z/K_Z)_LT in [0, 1]; beta =
        cos^2(slope) - steady_ratio (clipped at 0). Default 0.
    horizon_h : float or None, keyword-only
        Latest time considered, h from the storm start. None: the whole
        response, up to the post-storm peak of the head at each depth.

    Examples
    --------
    >>> StormRain(15.0, 8.0, 1.2).duration_s
    28800.0
    """

    intensity_mm_per_h: float
    duration_h: float
    water_table_depth_m: float
    steady_ratio: float = dataclasses.field(default=0.0, kw_only=True)
    horizon_h: float | None = dataclasses.field(default=None, kw_only=True)

    def __post_init__(self):
        for key in ("intensity_mm_per_h", "duration_h", "water_table_depth_m", "steady_ratio"):
            object.__setattr__(self, key, _positive(getattr(self, key), key))
        if self.steady_ratio > 1.0:
            raise InputError(f"steady_ratio: expected a value in [0, 1], got {self.steady_ratio}")
        if self.horizon_h is not None:
            object.__setattr__(self, "horizon_h", _positive(self.horizon_h, "horizon_h"))

    @property
    def intensity_m_per_s(self):
        """Intensity in m/s."""
        return self.intensity_mm_per_h / 3.6e6

    @property
    def duration_s(self):
        """Duration in s."""
        return self.duration_h * 3600.0

    @property
    def horizon_s(self):
        """Horizon in s, or +inf when none is set."""
        return _INF if self.horizon_h is None else self.horizon_h * 3600.0


# ---------------------------------------------------------------------------
# steady wetness
# ---------------------------------------------------------------------------


@njit
def _wetness_point(inflow, k, depth, sin_t, cos_t):
    """W = min(1, q a / (K z cos sin)); ``inflow`` = q a in the units of K z.

    Flat ground (sin = 0) saturates when q a > 0 and stays dry when q a = 0.
    """
    cap = k * depth * cos_t * sin_t
    # selects and IEEE division so that loops over samples vectorise
    w = np.true_divide(inflow, cap)
    w = 1.0 if inflow >= cap else w
    w = 0.0 if inflow <= 0.0 else w
    return math.nan if math.isnan(cap) or math.isnan(inflow) else w


@njit_parallel
def _steady_wetness_kernel(sca, slope, q, k, depth, st, out):
    for i in prange(out.size):
        th = _rad(slope[i * st[1]])
        out[i] = _wetness_point(
            q[i * st[2]] * 1e-3 * sca[i * st[0]],
            k[i * st[3]],
            depth[i * st[4]],
            math.sin(th),
            math.cos(th),
        )


def steady_wetness(sca_m, slope_deg, *, recharge_mm_per_day, conductivity_m_per_day, depth_m):
    """Steady-state wetness W = h_w / z of the soil column.

    Parameters
    ----------
    sca_m : array_like
        Specific catchment area a = A/b, m (>= 0). NaN is nodata.
    slope_deg : array_like
        Slope angle theta, degrees in [0, 90). NaN is nodata.
    recharge_mm_per_day : array_like
        Steady recharge q per unit horizontal area, mm/day (>= 0).
    conductivity_m_per_day : array_like
        Saturated hydraulic conductivity K_s, m/day (> 0).
    depth_m : array_like
        Vertical soil depth z, m (> 0).

    All inputs broadcast against each other.

    Returns
    -------
    numpy.ndarray of float32
        W in [0, 1]; NaN where any input is NaN.

    Raises
    ------
    InputError
        Values out of range, infinite values, all-NaN input.

    Notes
    -----
    Steady slope-parallel Darcy flow with gradient sin(theta) (METHODS.md
    section 4)::

        W = min(1, q a / (T sin theta)),     T = K_s z cos(theta)

    W = 1 means saturated to the surface, the excess leaving as overland flow.
    On flat ground (theta = 0) no water can drain laterally, so any
    q a > 0 saturates the cell (W = 1); with q a = 0 it stays dry (W = 0).
    Valid only at steady state, with uniform q, K_s and z along the flow
    tube: not where the contributing area needs longer than the rain to
    drain (about A / D0, Iverson 2000).

    References
    ----------
    O'Loughlin, E.M. (1986). Prediction of surface saturation zones in natural
    catchments by topographic analysis. Water Resources Research 22(5),
    794-804. doi 10.1029/WR022i005p00794
    Montgomery, D.R., Dietrich, W.E. (1994). A physically based model for the
    topographic control on shallow landsliding. Water Resources Research
    30(4), 1153-1171. doi 10.1029/93WR02979 (DOI from memory)

    Examples
    --------
    >>> w = steady_wetness(100.0, 30.0, recharge_mm_per_day=5.0,
    ...                    conductivity_m_per_day=1.728, depth_m=1.0)
    >>> round(float(w), 4)  # 0.005 * 100 / (1.728 * cos 30 * sin 30)
    0.6682
    """
    sca = _field(sca_m, "sca_m", 0.0, _INF)
    slope = _slope_field(slope_deg)
    q = _field(recharge_mm_per_day, "recharge_mm_per_day", 0.0, _INF)
    k = _physical_field(conductivity_m_per_day, "conductivity_m_per_day")
    depth = _physical_field(depth_m, "depth_m")
    shape, arrs, st = _flat([sca, slope, q, k, depth])
    out = np.empty(int(np.prod(shape)), dtype=np.float32)
    _steady_wetness_kernel(*arrs, st, out)
    return out.reshape(shape)


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


# ---------------------------------------------------------------------------
# least FS over depth and time
# ---------------------------------------------------------------------------


@njit
def _storm_min_point(soil_depth, n_depths, sin_a, cos_a, d, intensity, k, d0, duration,
                     steady_ratio, horizon, cohesion, tan_phi, gamma, count_suction, want_time):
    """Least FS over Z in {z k/n, k = 1..n} and t in [0, horizon] for one cell.

    Returns (fs, depth, time, cap_bound). For each depth the head rises
    monotonically up to its post-storm peak (:func:`_peak_star`), so the
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
    cos2 = cos_a * cos_a
    rains = intensity > 0.0 and duration > 0.0
    best_fs = _INF
    best_z = math.nan
    best_t = math.nan
    best_cap = False
    for j in range(1, n_depths + 1):
        z = soil_depth * j / n_depths
        tz = z * z / (4.0 * d0 * cos2)
        t = 0.0
        if rains:
            t = _peak_star(duration / tz) * tz
            if t > horizon:
                t = horizon
        psi, capped = _head_point(z, t, cos_a, d, intensity, k, d0, duration, steady_ratio)
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


@njit_parallel
def _storm_minimum_kernel(slope, zs, d, intens, k, d0, dur, ratio, coh, root, phi, gam, area,
                          n_depths, horizon, validity, count_suction, st,
                          fs_out, z_out, t_out, cap_out, runoff_out, short_out):
    for i in prange(fs_out.size):
        a = _rad(slope[i * st[0]])
        kk = k[i * st[4]]
        dd0 = d0[i * st[5]]
        fs, z, t, cap = _storm_min_point(
            zs[i * st[1]], n_depths, math.sin(a), math.cos(a), d[i * st[2]], intens[i * st[3]],
            kk, dd0, dur[i * st[6]], ratio[i * st[7]], horizon, coh[i * st[8]] + root[i * st[9]],
            math.tan(_rad(phi[i * st[10]])), gam[i * st[11]], count_suction, True,
        )
        fs_out[i] = fs
        z_out[i] = z
        t_out[i] = t
        ok = not math.isnan(fs)
        cap_out[i] = ok and cap
        runoff_out[i] = ok and intens[i * st[3]] > kk
        ai = area[i * st[12]]
        short_out[i] = ok and not math.isnan(ai) and t > validity * ai / dd0


class StormMinimum(NamedTuple):
    """Result of :func:`storm_minimum` (arrays of the broadcast shape)."""

    fs: np.ndarray
    """Least factor of safety, float32 (NaN nodata, 100 = at least 100)."""
    depth_m: np.ndarray
    """Vertical depth of the least FS, m, float32."""
    time_s: np.ndarray
    """Time of the least FS since the storm began, s, float32 (first time when the cap bound)."""
    cap_bound: np.ndarray
    """bool: the head reached its cap beta Z (saturated to the surface) at the least FS."""
    runoff: np.ndarray
    """bool: rain intensity exceeded K_s, the excess ran off."""
    short_time_doubtful: np.ndarray
    """bool: the time of the least FS exceeds validity_ratio * A / D0 (needs the area)."""


def storm_minimum(
    slope_deg,
    *,
    soil_depth_m,
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
    horizon_s=None,
    n_depths=20,
    contributing_area_m2=None,
    validity_ratio=0.1,
    count_suction=False,
):
    """Least storm factor of safety per cell over depth and time.

    Parameters
    ----------
    slope_deg : array_like
        Slope angle alpha, degrees in [0, 90). NaN is nodata.
    soil_depth_m : array_like
        Vertical soil depth, m (> 0); depths z k / n_depths, k = 1..n_depths, are tried.
    water_table_depth_m, intensity_m_per_s, conductivity_m_per_s : array_like
        As in :func:`storm_pressure_head`.
    diffusivity_m2_per_s, duration_s, steady_ratio : array_like
        As in :func:`storm_pressure_head`.
    cohesion_kpa, root_cohesion_kpa, friction_deg, unit_weight_kn_m3 : array_like
        As in :func:`storm_factor_of_safety`.
    horizon_s : float, optional
        Latest time considered, s from the storm start. Default None: no limit,
        which amounts to the post-storm peak of the head at the soil base
        (the deepest, and so the latest, peak of the depth grid).
    n_depths : int
        Number of depths tried (>= 1); 1 tries the soil base only.
    contributing_area_m2 : array_like, optional
        Upslope contributing area A, m^2 (> 0). When given, cells whose least
        FS comes at t > validity_ratio * A / D0 are flagged.
    validity_ratio : float
        Fraction of A / D0 beyond which Iverson's short-time model is doubtful
        (default 0.1; Iverson asks for t << A / D0).
    count_suction : bool
        See :func:`storm_factor_of_safety`.

    Returns
    -------
    StormMinimum
        ``fs``, ``depth_m``, ``time_s`` (float32) and the flags ``cap_bound``,
        ``runoff``, ``short_time_doubtful`` (bool, False at nodata).

    Raises
    ------
    InputError
        Values out of range, infinite values, all-NaN input, n_depths < 1.

    Notes
    -----
    FS(Z, t) is that of :func:`storm_factor_of_safety`. At a fixed depth FS
    falls as the head psi rises, and psi rises monotonically through the
    storm and after it up to the peak of R(t*) - R(t* - T*), which comes where
    dR/dt* = exp(-1/t*) / (2 sqrt(pi t*)) takes equal values at t* and
    t* - T*. That time is solved for exactly (Newton iterations), so the
    least FS over time at each depth is found without a time grid; the
    depths form a grid. The peak comes after the rain stops: at depth the
    head keeps rising after the storm. Cells where I > K_s are flagged
    ``runoff``: only K_s infiltrates.

    References
    ----------
    Iverson, R.M. (2000). Landslide triggering by rain infiltration. Water
    Resources Research 36(7), 1897-1910. doi 10.1029/2000WR900090

    Examples
    --------
    >>> res = storm_minimum(35.0, soil_depth_m=1.0, water_table_depth_m=1.0,
    ...     intensity_m_per_s=5e-6, conductivity_m_per_s=1e-5, diffusivity_m2_per_s=1e-4,
    ...     duration_s=7200.0, cohesion_kpa=4.0, root_cohesion_kpa=0.0, friction_deg=38.0,
    ...     unit_weight_kn_m3=19.0, n_depths=10)
    >>> bool(res.time_s > 7200.0)  # the least FS comes after the rain stops
    True
    """
    fields = _storm_fields(soil_depth_m, 0.0, slope_deg, water_table_depth_m, intensity_m_per_s,
                           conductivity_m_per_s, diffusivity_m2_per_s, duration_s, steady_ratio,
                           depth_name="soil_depth_m")
    fields = [fields[2], fields[0]] + fields[3:]
    fields += _strength_fields(cohesion_kpa, root_cohesion_kpa, friction_deg, unit_weight_kn_m3)
    if contributing_area_m2 is None:
        area = np.array(np.nan)
    else:
        area = _field(contributing_area_m2, "contributing_area_m2", 0.0, _INF, open_low=True)
    fields.append(area)
    try:
        n = int(n_depths)
    except (TypeError, ValueError):
        raise InputError(f"n_depths: expected an integer >= 1, got {n_depths!r}") from None
    if n < 1 or n != n_depths:
        raise InputError(f"n_depths: expected an integer >= 1, got {n_depths!r}")
    horizon = _INF if horizon_s is None else _positive(horizon_s, "horizon_s")
    ratio = _positive(validity_ratio, "validity_ratio", allow_zero=False)
    shape, arrs, st = _flat(fields)
    size = int(np.prod(shape))
    fs = np.empty(size, dtype=np.float32)
    z = np.empty(size, dtype=np.float32)
    t = np.empty(size, dtype=np.float32)
    cap = np.empty(size, dtype=np.bool_)
    runoff = np.empty(size, dtype=np.bool_)
    short = np.empty(size, dtype=np.bool_)
    _storm_minimum_kernel(*arrs, n, horizon, ratio, bool(count_suction), st,
                          fs, z, t, cap, runoff, short)
    return StormMinimum(*(a.reshape(shape) for a in (fs, z, t, cap, runoff, short)))
