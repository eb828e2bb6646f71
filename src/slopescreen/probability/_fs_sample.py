"""Factor of safety of one cell for one set of parameter values (numba).

Shared by the Monte Carlo and FOSM kernels: steady wetness or the least FS
of Iverson's storm response.
"""

from .._kernels.rain_case import _STEADY
from .._kernels.slope_stability import _steady_fs_point
from .._kernels.storm import _storm_min_point
from .._kernels.wetness import _storm_table_depth, _wetness_point
from .._numba import njit


@njit
def _sample_fs(depth, cohesion, tan_phi, gamma, cond, diff, sin_t, cos_t, inflow, rain_kind,
               intensity, duration, wt_depth, steady_ratio, horizon, n_depths, z_min):
    """FS of one cell for one set of parameter values.

    Steady rain: ``inflow`` = q a in m^2/day, ``cond`` in m/day; FS with W from
    the steady wetness and one bulk unit weight. Storm: least FS over time
    (and over n_depths depths) of Iverson's model; intensity in m/s,
    duration and horizon in s, water-table depth in m (< 0: the steady water
    table of the antecedent ``inflow``), diffusivity in m^2/s.
    """
    if rain_kind == _STEADY:
        w = _wetness_point(inflow, cond, depth, sin_t, cos_t)
        return _steady_fs_point(cohesion, tan_phi, sin_t, cos_t, depth, w, gamma, gamma)
    fs, _, _, _ = _storm_min_point(
        depth, n_depths, z_min, sin_t, cos_t,
        _storm_table_depth(wt_depth, inflow, cond, depth, sin_t, cos_t), intensity, cond / 86400.0, diff, duration,
        steady_ratio, horizon, cohesion, tan_phi, gamma, False, False,
    )
    return fs
