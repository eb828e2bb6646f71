"""Steady-state wetness W = h_w / z under steady recharge.

O'Loughlin (1986); Montgomery & Dietrich (1994): :func:`steady_wetness`, and
the steady water table it implies before a storm: :func:`antecedent_table_depth`.
"""

import math

import numpy as np

from .. import _validate
from .._kernels.slope_stability import _rad, _vertical_depth
from .._kernels.wetness import _wetness_point
from .._numba import njit_parallel, prange
from .rain import _INF


@njit_parallel
def _steady_kernel(sca, slope, q, k, depth, st, slope_normal, table_depth, out):
    """W per cell, or (``table_depth``) the water-table depth z (1 - W)."""
    for i in prange(out.size):
        th = _rad(slope[i * st[1]])
        cos_t = math.cos(th)
        z = _vertical_depth(depth[i * st[4]], cos_t, slope_normal)
        w = _wetness_point(q[i * st[2]] * 1e-3 * sca[i * st[0]], k[i * st[3]], z, math.sin(th),
                           cos_t)
        out[i] = z * (1.0 - w) if table_depth else w


def _steady_field(sca_m, slope_deg, recharge_mm_per_day, conductivity_m_per_day, depth_m,
                  depth_measured, table_depth, dtype):
    sca = _validate.field(sca_m, "sca_m", 0.0, _INF)
    slope = _validate.slope_field(slope_deg)
    q = _validate.field(recharge_mm_per_day, "recharge_mm_per_day", 0.0, _INF)
    k = _validate.physical_field(conductivity_m_per_day, "conductivity_m_per_day")
    depth = _validate.physical_field(depth_m, "depth_m")
    shape, arrs, st = _validate.broadcast_flat([sca, slope, q, k, depth])
    out = np.empty(int(np.prod(shape)), dtype=dtype)
    _steady_kernel(*arrs, st, _validate.depth_measured(depth_measured), table_depth, out)
    return out.reshape(shape)


def steady_wetness(sca_m, slope_deg, *, recharge_mm_per_day, conductivity_m_per_day, depth_m,
                   depth_measured="vertical"):
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
    depth_measured : {"vertical", "slope_normal"}, keyword-only
        How the soil depth was measured. ``"slope_normal"``: it is the
        thickness H normal to the slope, and the kernel uses z = H / cos(theta)
        per cell (docs/methods.md, "Slope-normal soil thickness").

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
    Steady slope-parallel Darcy flow with gradient sin(theta)
    (docs/methods.md, "Steady wetness")::

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
    return _steady_field(sca_m, slope_deg, recharge_mm_per_day, conductivity_m_per_day, depth_m,
                         depth_measured, False, np.float32)


def antecedent_table_depth(sca_m, slope_deg, *, recharge_mm_per_day, conductivity_m_per_day,
                           depth_m, depth_measured="vertical"):
    """Vertical depth of the steady water table under a background recharge, m.

    The initial water table of a storm that follows the terrain: under a
    steady background recharge q0 the saturated thickness is h0 = W z, capped
    at the soil depth (W <= 1), so the water table lies at d = z (1 - W)
    below the surface, shallower in hollows (large a) than on spurs.

    Parameters
    ----------
    sca_m, slope_deg, recharge_mm_per_day, conductivity_m_per_day, depth_m, depth_measured
        As in :func:`steady_wetness`; ``recharge_mm_per_day`` is q0.

    Returns
    -------
    numpy.ndarray of float64
        d in [0, z] (0: saturated to the surface; z: no water above the
        soil base), vertical, m; NaN where any input is NaN.

    Raises
    ------
    InputError
        As :func:`steady_wetness`.

    Notes
    -----
    docs/methods.md, "Storm response (Iverson 2000)": the steady state is
    that of O'Loughlin (1986) and Montgomery & Dietrich (1994)::

        W = min(1, q0 a / (K_s z sin theta cos theta)),     d = z (1 - W)

    Iverson's (2000) initial head psi0 = (Z - d) beta with beta = cos^2 theta
    is that of slope-parallel flow, the flow of the steady state, so the head
    at the soil base before the storm is W z cos^2 theta, the pore pressure
    of the steady map. The steady state needs the rain-free spell before the
    storm to last longer than the area takes to drain (about A / D0).

    Examples
    --------
    >>> d = antecedent_table_depth(100.0, 30.0, recharge_mm_per_day=5.0,
    ...                            conductivity_m_per_day=1.728, depth_m=1.0)
    >>> round(float(d), 4)  # 1 - 0.005 * 100 / (1.728 * cos 30 * sin 30)
    0.3318
    """
    return _steady_field(sca_m, slope_deg, recharge_mm_per_day, conductivity_m_per_day, depth_m,
                         depth_measured, True, np.float64)
