"""Least storm factor of safety per cell over depth and time (Iverson 2000).

:func:`storm_minimum` finds the post-storm peak of the head at each depth
exactly, so no time grid is needed.
"""

import math
from typing import NamedTuple

import numpy as np

from .. import _validate
from .._kernels.slope_stability import _rad, _vertical_depth
from .._kernels.storm import _storm_min_point
from .._numba import njit_parallel, prange
from .iverson import _storm_and_strength, _strength_arrays
from .rain import _INF

_CALL_DEPTHS = 2_500_000
"""Cell-depths per kernel call of :func:`storm_minimum` (about 0.3 s on 2 cores).

A compiled kernel does not see Ctrl-C: Python raises the KeyboardInterrupt only once the
kernel returns, so the cells go to the kernel in blocks, at least 4096 at a time. The results
do not depend on the blocks.
"""


@njit_parallel
def _storm_minimum_kernel(slope, zs, d, intens, k, d0, dur, ratio, coh, root, phi, gam, area,
                          n_depths, z_min, horizon, validity, count_suction, st, slope_normal,
                          start, stop, fs_out, z_out, t_out, cap_out, runoff_out, short_out):
    """The least storm FS of the cells start .. stop - 1 (flat indices of the broadcast shape)."""
    for i in prange(start, stop):
        a = _rad(slope[i * st[0]])
        kk = k[i * st[4]]
        dd0 = d0[i * st[5]]
        cos_a = math.cos(a)
        fs, z, t, cap = _storm_min_point(
            _vertical_depth(zs[i * st[1]], cos_a, slope_normal), n_depths, z_min, math.sin(a),
            cos_a, d[i * st[2]], intens[i * st[3]],
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


def storm_minimum(slope_deg, *, soil_depth_m, storm=None, strength=None, horizon_s=None,
                  n_depths=20, min_failure_depth_m=0.0, contributing_area_m2=None,
                  validity_ratio=0.1, count_suction=False, depth_measured="vertical", **fields):
    """Least storm factor of safety per cell over depth and time.

    Parameters
    ----------
    slope_deg : array_like
        Slope angle alpha, degrees in [0, 90). NaN is nodata.
    soil_depth_m : array_like
        Vertical soil depth, m (> 0); depths z k / n_depths, k = 1..n_depths, are tried.
    storm : StormInputs
        The storm and the soil's hydraulic properties.
    strength : slopescreen.stability.SoilStrength
        c', basal c_r, phi' and the depth-averaged unit weight (no gamma_sat),
        as in :func:`storm_factor_of_safety`.
    horizon_s : float, optional
        Latest time considered, s from the storm start. Default None: no limit,
        which amounts to the post-storm peak of the head at the soil base
        (the deepest, and so the latest, peak of the depth grid).
    min_failure_depth_m : float
        Minimum credible failure depth z_min, m (>= 0, default 0: the plain
        grid). The depths tried are z_min + (H - z_min) k / n_depths,
        k = 1..n_depths; where the soil depth H <= z_min, the base only.
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
    depth_measured : {"vertical", "slope_normal"}, keyword-only
        How ``soil_depth_m`` was measured. ``"slope_normal"``: it is the
        thickness H normal to the slope, and the kernel uses z = H / cos(alpha)
        per cell (docs/methods.md, "Slope-normal soil thickness").
        ``depth_m`` of the result is vertical either way.
    **fields
        Instead of ``storm`` or ``strength``: the fields of either as loose
        keywords, from which the object is built.

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
    >>> from slopescreen.hydrology import StormInputs
    >>> from slopescreen.stability import SoilStrength
    >>> storm = StormInputs(water_table_depth_m=1.0, intensity_m_per_s=5e-6,
    ...     conductivity_m_per_s=1e-5, diffusivity_m2_per_s=1e-4, duration_s=7200.0)
    >>> soil = SoilStrength(cohesion_kpa=4.0, root_cohesion_kpa=0.0, friction_deg=38.0,
    ...     unit_weight_kn_m3=19.0)
    >>> res = storm_minimum(35.0, soil_depth_m=1.0, storm=storm, strength=soil, n_depths=10)
    >>> bool(res.time_s > 7200.0)  # the least FS comes after the rain stops
    True

    The same call with loose keywords gives the same result:

    >>> loose = storm_minimum(35.0, soil_depth_m=1.0, water_table_depth_m=1.0,
    ...     intensity_m_per_s=5e-6, conductivity_m_per_s=1e-5, diffusivity_m2_per_s=1e-4,
    ...     duration_s=7200.0, cohesion_kpa=4.0, root_cohesion_kpa=0.0, friction_deg=38.0,
    ...     unit_weight_kn_m3=19.0, n_depths=10)
    >>> bool(loose.fs == res.fs and loose.time_s == res.time_s)
    True
    """
    depth = _validate.field(soil_depth_m, "soil_depth_m", 0.0, _INF, open_low=True)
    slope = _validate.slope_field(slope_deg)
    storm, strength = _storm_and_strength("storm_minimum", fields, storm, strength,
                                          with_strength=True)
    fields = [slope, depth] + storm._arrays() + _strength_arrays(strength)
    if contributing_area_m2 is None:
        area = np.array(np.nan)
    else:
        area = _validate.field(contributing_area_m2, "contributing_area_m2", 0.0, _INF,
                               open_low=True)
    fields.append(area)
    n = _validate.positive_int(n_depths, "n_depths")
    z_min = _validate.nonnegative(min_failure_depth_m, "min_failure_depth_m")
    horizon = _INF if horizon_s is None else _validate.nonnegative(horizon_s, "horizon_s")
    ratio = _validate.nonnegative(validity_ratio, "validity_ratio", allow_zero=False)
    shape, arrs, st = _validate.broadcast_flat(fields)
    size = int(np.prod(shape))
    fs = np.empty(size, dtype=np.float32)
    z = np.empty(size, dtype=np.float32)
    t = np.empty(size, dtype=np.float32)
    cap = np.empty(size, dtype=np.bool_)
    runoff = np.empty(size, dtype=np.bool_)
    short = np.empty(size, dtype=np.bool_)
    slope_normal = _validate.depth_measured(depth_measured)
    cells = max(4096, _CALL_DEPTHS // n)  # Ctrl-C is raised between two calls
    for start in range(0, size, cells):
        _storm_minimum_kernel(*arrs, n, z_min, horizon, ratio, bool(count_suction), st,
                              slope_normal, start, min(size, start + cells), fs, z, t, cap,
                              runoff, short)
    return StormMinimum(*(a.reshape(shape) for a in (fs, z, t, cap, runoff, short)))
