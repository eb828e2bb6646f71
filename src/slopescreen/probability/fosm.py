"""First-order second-moment reliability per cell: :func:`fosm_reliability`.

:func:`reliability_index` turns the mean and sd of FS into beta and P_f.
"""

import math
from typing import NamedTuple

import numpy as np

from .. import _validate
from .._kernels.rain_case import _STEADY, _area_rate
from .._kernels.slope_stability import _rad, _vertical_depth
from .._kernels.soil_table import _COH, _COND, _DEPTH, _DIFF, _GAMMA, _N_PAR, _PHI, _ROOT
from .._numba import njit, njit_parallel, prange
from ..errors import InputError
from ._fs_sample import _sample_fs
from ._inputs import _grid_inputs


class FosmResult(NamedTuple):
    """Result of :func:`fosm_reliability` (float32 arrays)."""

    mean_fs: np.ndarray
    """FS at the mean parameters."""
    sd_fs: np.ndarray
    """First-order standard deviation of FS."""
    beta: np.ndarray
    """Reliability index; NaN where sd_fs = 0."""
    p_f: np.ndarray
    """Phi(-beta) (or its lognormal variant); 0 or 1 where sd_fs = 0."""


def reliability_index(mean_fs, sd_fs, *, fs_distribution="normal"):
    """Reliability index beta and P_f from the mean and sd of FS.

    Parameters
    ----------
    mean_fs, sd_fs : array_like
        Mean and standard deviation (>= 0) of FS; the mean must be > 0 for
        a lognormal FS.
    fs_distribution : {"normal", "lognormal"}
        Distribution assumed for FS.

    Returns
    -------
    beta, p_f : numpy.ndarray of float64
        beta is NaN where sd_fs = 0 (P_f is then 0 or 1).

    Notes
    -----
    Normal: beta = (mu - 1) / sigma. Lognormal:
    beta_LN = ln(mu / sqrt(1 + V^2)) / sqrt(ln(1 + V^2)), V = sigma / mu.
    P_f = Phi(-beta) (docs/methods.md, "Probability of failure").

    References
    ----------
    Christian, J.T., Ladd, C.C., Baecher, G.B. (1994). Reliability applied to
    slope stability analysis. Journal of Geotechnical Engineering 120(12),
    2180-2207.

    Examples
    --------
    >>> b, p = reliability_index(1.5, 0.3)
    >>> round(float(b), 4), round(float(p), 5)
    (1.6667, 0.04779)
    """
    if fs_distribution not in ("normal", "lognormal"):
        raise InputError(
            f"fs_distribution: expected 'normal' or 'lognormal', got {fs_distribution!r}"
        )
    from scipy import special  # here, not at import: scipy.special costs 0.3 s to load

    mu = np.asarray(mean_fs, dtype=np.float64)
    sd = np.asarray(sd_fs, dtype=np.float64)
    if not (np.isfinite(mu).all() and np.isfinite(sd).all()) or (sd < 0).any():
        raise InputError("mean_fs and sd_fs must be finite, sd_fs >= 0")
    if fs_distribution == "lognormal" and (mu <= 0).any():
        raise InputError("mean_fs: a lognormal FS needs mean_fs > 0")
    with np.errstate(divide="ignore", invalid="ignore"):
        if fs_distribution == "normal":
            beta = (mu - 1.0) / sd
        else:
            v2 = np.log1p((sd / mu) ** 2)
            beta = np.log(mu / np.sqrt(1.0 + (sd / mu) ** 2)) / np.sqrt(v2)
        zero = sd == 0
        beta = np.where(zero, np.nan, beta)
        p_f = np.where(zero, (mu < 1.0).astype(np.float64), special.ndtr(-beta))
    return beta, p_f


@njit
def _fs_of_vector(x, sin_t, cos_t, inflow, rain_kind, rain, n_depths, z_min, slope_normal):
    return _sample_fs(
        _vertical_depth(x[_DEPTH], cos_t, slope_normal), x[_COH] + x[_ROOT],
        math.tan(_rad(x[_PHI])), x[_GAMMA], x[_COND], x[_DIFF], sin_t, cos_t, inflow, rain_kind,
        rain[0], rain[1], rain[2], rain[3], rain[4], n_depths, z_min,
    )


@njit_parallel
def _fosm_kernel(slope, sca, unit, means, sds, x_lo, x_hi, rain_kind, rain, n_depths, z_min,
                 slope_normal, start, stop, mean_out, sd_out):
    n_par = means.shape[1]
    for j in prange(stop - start):
        i = start + j
        u = unit[i]
        th = slope[i]
        a = sca[i] if rain_kind == _STEADY or rain[2] < 0.0 else 0.0
        if u < 0 or math.isnan(th) or math.isnan(a):
            mean_out[i] = math.nan
            sd_out[i] = math.nan
            continue
        rad = _rad(th)
        sin_t = math.sin(rad)
        cos_t = math.cos(rad)
        inflow = _area_rate(rain_kind, rain) * a
        x = means[u].copy()
        f0 = _fs_of_vector(x, sin_t, cos_t, inflow, rain_kind, rain, n_depths, z_min,
                           slope_normal)
        var = 0.0
        for p in range(n_par):
            sd = sds[u, p]
            hi = x_hi[u, p]
            lo = x_lo[u, p]
            # a spread below the precision of the mean (x +- sd == x) adds nothing
            if sd > 0.0 and hi > lo:
                x[p] = hi
                f_hi = _fs_of_vector(x, sin_t, cos_t, inflow, rain_kind, rain, n_depths, z_min,
                                     slope_normal)
                x[p] = lo
                f_lo = _fs_of_vector(x, sin_t, cos_t, inflow, rain_kind, rain, n_depths, z_min,
                                     slope_normal)
                x[p] = means[u, p]
                d = (f_hi - f_lo) / (hi - lo) * sd
                var += d * d
        mean_out[i] = f0
        sd_out[i] = math.sqrt(var)


_CALL_CELLS = 2_000_000
"""Cells of a steady case per kernel call (a storm's: this / (8 x depths)), so that Ctrl-C,
which a compiled kernel does not see, is acted on between calls within about a second."""


def fosm_reliability(slope_deg, sca_m, unit_index, table, rain, *, n_depths=1,
                     min_failure_depth_m=0.0, fs_distribution="normal",
                     depth_measured="vertical"):
    """First-order second-moment reliability of each cell (Duncan's Taylor-series variant).

    Parameters
    ----------
    slope_deg, sca_m, unit_index, table, rain, n_depths, min_failure_depth_m, depth_measured
        As in :func:`failure_probability` (a slope-normal depth is turned into
        the cell's vertical depth at every evaluation of FS).
    fs_distribution : {"normal", "lognormal"}, keyword-only
        Distribution assumed for FS when turning beta into P_f. Default normal.

    Returns
    -------
    FosmResult
        ``mean_fs``, ``sd_fs``, ``beta``, ``p_f`` as float32 arrays (NaN at
        nodata; beta NaN and P_f 0 or 1 where no parameter varies).

    Raises
    ------
    InputError
        As :func:`failure_probability`.

    Notes
    -----
    Means and standard deviations are those of the truncated distributions.
    With every parameter at its mean, mu_FS = FS(mu_x); for each uncertain
    parameter, FS is evaluated at x_i + sigma_i and x_i - sigma_i::

        sigma_FS = sqrt( sum_i ( (FS(x_i+) - FS(x_i-)) / 2 )^2 )
        beta = (mu_FS - 1) / sigma_FS,     P_f = Phi(-beta)

    A step that would reach past half the distance to a truncation bound is
    shortened to it, and the difference is then scaled to one sigma.
    Parameters are taken as uncorrelated. FOSM is first order: it is poor
    where FS is strongly nonlinear in a parameter (thin or cohesion-dominated
    soils, wetness capped at 1, the storm head reaching its cap, FS at the
    cap of 100) and in the tails, where P_f depends on the assumed
    distribution of FS; prefer :func:`failure_probability` there.

    References
    ----------
    Christian, J.T., Ladd, C.C., Baecher, G.B. (1994). Reliability applied to
    slope stability analysis. Journal of Geotechnical Engineering 120(12),
    2180-2207.
    Duncan, J.M. (2000). Factors of safety and reliability in geotechnical
    engineering. Journal of Geotechnical and Geoenvironmental Engineering
    126(4), 307-316 (volume, pages and DOI 10.1061/(ASCE)1090-0241(2000)126:4(307)
    from memory).

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.hydrology import SteadyRain
    >>> from slopescreen.parameters import normal
    >>> from slopescreen.probability import encode_table
    >>> t = encode_table([{"depth_m": 1.0, "cohesion_kpa": normal(5.0, 1.0),
    ...     "root_cohesion_kpa": 0.0, "friction_deg": 30.0, "unit_weight_kn_m3": 18.0,
    ...     "conductivity_m_per_day": 1.0}])
    >>> r = fosm_reliability(np.full((1, 1), 40.0), np.full((1, 1), 10.0),
    ...     np.zeros((1, 1), int), t, SteadyRain(0.0))
    >>> bool(r.sd_fs[0, 0] > 0)
    True
    """
    if fs_distribution not in ("normal", "lognormal"):
        raise InputError(
            f"fs_distribution: expected 'normal' or 'lognormal', got {fs_distribution!r}"
        )
    z_min = _validate.nonnegative(min_failure_depth_m, "min_failure_depth_m")
    shape, slope, sca, unit, encoded, params, rain_kind, rain_vec, nd = _grid_inputs(
        slope_deg, sca_m, unit_index, table, rain, n_depths
    )
    n_units = encoded.shape[0]
    means = np.zeros((n_units, _N_PAR))
    sds = np.zeros((n_units, _N_PAR))
    lo = np.zeros((n_units, _N_PAR))
    hi = np.zeros((n_units, _N_PAR))
    for u in range(n_units):
        for p in range(_N_PAR):
            par = params[u][p]
            if par is None:
                means[u, p] = np.nan
                continue
            m, s = par.mean(), par.sd()
            means[u, p], sds[u, p] = m, s
            lo[u, p] = max(m - s, m - 0.5 * (m - par.low))
            hi[u, p] = min(m + s, m + 0.5 * (par.high - m))
    size = slope.size
    mean_out = np.empty(size, dtype=np.float64)
    sd_out = np.empty(size, dtype=np.float64)
    slope_normal = _validate.depth_measured(depth_measured)
    cells = _CALL_CELLS if rain_kind == _STEADY else max(1024, _CALL_CELLS // (8 * nd))
    for start in range(0, size, cells):  # a pending Ctrl-C is raised between two calls
        _fosm_kernel(slope, sca, unit, means, sds, lo, hi, rain_kind, rain_vec, nd, z_min,
                     slope_normal, start, min(size, start + cells), mean_out, sd_out)
    valid = np.isfinite(mean_out)
    beta = np.full(size, np.nan)
    p_f = np.full(size, np.nan)
    if valid.any():
        mu = mean_out[valid]
        if fs_distribution == "lognormal":  # FS clipped at 0 fails surely
            mu = np.maximum(mu, np.finfo(np.float64).tiny)
        beta[valid], p_f[valid] = reliability_index(mu, sd_out[valid],
                                                    fs_distribution=fs_distribution)

    def f32(a):
        return a.astype(np.float32).reshape(shape)

    return FosmResult(f32(mean_out), f32(sd_out), f32(beta), f32(p_f))
