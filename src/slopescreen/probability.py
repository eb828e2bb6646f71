"""Probability of failure from uncertain soil parameters: Monte Carlo and FOSM.

The soil of each cell belongs to a soil unit (``unit_index``, -1 = nodata);
each unit has one :class:`~slopescreen.parameters.Parameter` per entry of
:data:`PARAMETER_ORDER`, packed by :func:`encode_table` into a float64 array
of shape (n_units, 7, 5). Every distribution is truncated to the physical
range of its quantity (:data:`slopescreen.parameters.PHYSICAL_RANGE`) before
it is used, so no negative depth or cohesion is ever drawn.

A rain case is a :class:`~slopescreen.hydrology.SteadyRain` (FS from the
steady wetness) or a :class:`~slopescreen.hydrology.StormRain` (least FS over
time of Iverson's storm response).

P_f is per cell and conditional on the assumed distributions; parameters are
independent of each other, and between cells they are either independent
(``correlation="cell"``) or fully shared within a soil unit
(``correlation="unit"``). Spatial correlation in between is not modelled:
P_f of a cell is not the probability that some landslide occurs in an area.
"""

import math
from typing import NamedTuple

import numpy as np
from scipy import special

from . import _checks
from ._numba import njit, njit_parallel, prange
from .errors import InputError
from .hydrology import SteadyRain, StormRain, _storm_min_point, _wetness_point
from .parameters import (
    PREPARED_WIDTH,
    Parameter,
    _counter_key,
    _field,
    _mix64,
    _physical,
    _prepare_into,
    _quantile_at,
    _quantile_block,
    _seed_key,
    _stream_key,
    _uniform01,
    fixed,
)
from .stability import _rad, _steady_fs_point

__all__ = [
    "PARAMETER_ORDER",
    "encode_table",
    "failure_probability",
    "fosm_reliability",
    "reliability_index",
    "FosmResult",
]

PARAMETER_ORDER = (
    "depth_m",
    "cohesion_kpa",
    "root_cohesion_kpa",
    "friction_deg",
    "unit_weight_kn_m3",
    "conductivity_m_per_day",
    "diffusivity_m2_per_s",
)
"""Order of the parameters along axis 1 of an encoded table."""

_N_PAR = len(PARAMETER_ORDER)
_DEPTH, _COH, _ROOT, _PHI, _GAMMA, _COND, _DIFF = range(_N_PAR)
_ABSENT = np.array([0.0, np.nan, 0.0, -np.inf, np.inf])
_UNIT_DOMAIN = np.uint64(0x0C0FFEE5A1DE5EED)
_STEADY, _STORM = 0, 1


def encode_table(units):
    """Pack the soil units' parameters into a float64 table (n_units, 7, 5).

    Parameters
    ----------
    units : sequence of mapping
        One mapping per soil unit (its position is its unit index), from each
        name of :data:`PARAMETER_ORDER` to a
        :class:`~slopescreen.parameters.Parameter` or a number (fixed).
        ``diffusivity_m2_per_s`` may be left out when only steady rain is run.

    Returns
    -------
    numpy.ndarray of float64, shape (n_units, 7, 5)
        Row [u, p] is ``Parameter.encode()``, truncated to the physical range.

    Raises
    ------
    InputError
        Unknown or missing names, invalid parameters, values outside the
        physical range (the message names the unit and the parameter).

    Examples
    --------
    >>> from slopescreen.parameters import uniform, normal
    >>> t = encode_table([{"depth_m": uniform(0.8, 1.6), "cohesion_kpa": 1.0,
    ...     "root_cohesion_kpa": uniform(2.0, 8.0), "friction_deg": normal(34.0, 2.0),
    ...     "unit_weight_kn_m3": 18.5, "conductivity_m_per_day": 2.0}])
    >>> t.shape
    (1, 7, 5)
    """
    if isinstance(units, dict) or not hasattr(units, "__len__") or len(units) == 0:
        raise InputError("units: expected a non-empty sequence of mappings, one per soil unit")
    table = np.empty((len(units), _N_PAR, 5), dtype=np.float64)
    for u, unit in enumerate(units):
        unknown = set(unit) - set(PARAMETER_ORDER)
        if unknown:
            raise InputError(
                f"unit {u}: unknown parameter(s) {sorted(unknown)}; "
                f"expected {list(PARAMETER_ORDER)}"
            )
        for p, key in enumerate(PARAMETER_ORDER):
            name = f"unit {u} {key}"
            if key not in unit:
                if key == "diffusivity_m2_per_s":
                    table[u, p] = _ABSENT
                    continue
                raise InputError(f"{name}: missing; every soil unit needs {key}")
            value = unit[key]
            if isinstance(value, Parameter):
                value = Parameter(value.kind, value.a, value.b, value.low, value.high, name=name)
            else:
                value = fixed(value, name=name)
            table[u, p] = _physical(value, key).encode()
    return table


def _absent(row):
    return row[0] == 0.0 and np.isnan(row[1])


def _checked_table(table, storm):
    """Validate an encoded table; return (encoded, truncated) and its parameters."""
    try:
        t = np.asarray(table, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError("table: expected a float array of shape (n_units, 7, 5)") from None
    if t.ndim != 3 or t.shape[1:] != (_N_PAR, 5) or t.shape[0] < 1:
        raise InputError(f"table: expected shape (n_units, {_N_PAR}, 5), got {t.shape}")
    out = np.empty_like(t)
    params = []
    for u in range(t.shape[0]):
        row_params = []
        for p, key in enumerate(PARAMETER_ORDER):
            name = f"unit {u} {key}"
            if _absent(t[u, p]):
                if key != "diffusivity_m2_per_s" or storm:
                    raise InputError(f"{name}: missing; a storm case needs it")
                out[u, p] = _ABSENT
                row_params.append(None)
                continue
            par = _physical(Parameter.decode(t[u, p], name=name), key)
            out[u, p] = par.encode()
            row_params.append(par)
        params.append(row_params)
    return out, params


@njit
def _prepare_table(table):
    n_units, n_par = table.shape[0], table.shape[1]
    prep = np.empty((n_units, n_par, PREPARED_WIDTH), dtype=np.float64)
    for u in range(n_units):
        for p in range(n_par):
            _prepare_into(table[u, p], prep[u, p])
    return prep


@njit
def _sample_fs(depth, cohesion, tan_phi, gamma, cond, diff, sin_t, cos_t, inflow, rain_kind,
               intensity, duration, wt_depth, steady_ratio, horizon, n_depths):
    """FS of one cell for one set of parameter values.

    Steady rain: ``inflow`` = q a in m^2/day, ``cond`` in m/day; FS with W from
    the steady wetness and one bulk unit weight. Storm: least FS over time
    (and over n_depths depths) of Iverson's model; intensity in m/s,
    duration and horizon in s, water-table depth in m, diffusivity in m^2/s.
    """
    if rain_kind == _STEADY:
        w = _wetness_point(inflow, cond, depth, sin_t, cos_t)
        return _steady_fs_point(cohesion, tan_phi, sin_t, cos_t, depth, w, gamma, gamma)
    fs, _, _, _ = _storm_min_point(
        depth, n_depths, sin_t, cos_t, wt_depth, intensity, cond / 86400.0, diff, duration,
        steady_ratio, horizon, cohesion, tan_phi, gamma, False, False,
    )
    return fs


# Taylor coefficients of sin and cos (1/n! with alternating signs)
_SIN_C = tuple((-1.0) ** k / math.factorial(2 * k + 1) for k in range(10))
_COS_C = tuple((-1.0) ** k / math.factorial(2 * k) for k in range(11))


@njit
def _tan_friction(phi_deg):
    """tan of a friction angle in [0, 60] degrees, branch free (vectorisable).

    sin and cos by their Taylor series to x^19 and x^20: for x <= pi/3 the
    truncation error is below 1e-19 and the result agrees with math.tan to a
    few units in the last place. Valid only on [0, 60] degrees, the physical
    range every friction distribution is truncated to.
    """
    x = phi_deg * (math.pi / 180.0)
    x2 = x * x
    s = _SIN_C[9]
    s = s * x2 + _SIN_C[8]
    s = s * x2 + _SIN_C[7]
    s = s * x2 + _SIN_C[6]
    s = s * x2 + _SIN_C[5]
    s = s * x2 + _SIN_C[4]
    s = s * x2 + _SIN_C[3]
    s = s * x2 + _SIN_C[2]
    s = s * x2 + _SIN_C[1]
    s = (s * x2 + _SIN_C[0]) * x
    c = _COS_C[10]
    c = c * x2 + _COS_C[9]
    c = c * x2 + _COS_C[8]
    c = c * x2 + _COS_C[7]
    c = c * x2 + _COS_C[6]
    c = c * x2 + _COS_C[5]
    c = c * x2 + _COS_C[4]
    c = c * x2 + _COS_C[3]
    c = c * x2 + _COS_C[2]
    c = c * x2 + _COS_C[1]
    c = c * x2 + _COS_C[0]
    return np.true_divide(s, c)


_TAN = _N_PAR  # row of the sample block holding tan(phi)
_BLOCK = 128  # samples evaluated together (vectorised loops)
_CHUNK = 512  # cells per parallel task


@njit_parallel
def _unit_draws_kernel(prep, samples, run_key, out):
    """Draws shared by every cell of a unit: out[u, p, s] (p < 7), tan(phi) in out[u, 7, s]."""
    n_units, n_par = prep.shape[0], prep.shape[1]
    for u in prange(n_units):
        key = _stream_key(run_key, u)
        for s in range(samples):
            for p in range(n_par):
                uni = _uniform01(_counter_key(key, s * n_par + p))
                out[u, p, s] = _quantile_at(prep, u, p, uni)
            out[u, _TAN, s] = _tan_friction(out[u, _PHI, s])


@njit
def _draw_block(prep, u, key, first, nb, ubuf, vals):
    """Fill vals[0, p, j] with the draws of samples first .. first + nb - 1 of one cell."""
    n_par = prep.shape[1]
    for p in range(n_par):
        if prep[u, p, 0] != 0.0:
            for j in range(nb):
                ubuf[j] = _uniform01(_counter_key(key, (first + j) * n_par + p))
        _quantile_block(prep, u, p, ubuf, vals, p, nb)
    if prep[u, _PHI, 0] != 0.0:
        for j in range(nb):
            vals[0, _TAN, j] = _tan_friction(vals[0, _PHI, j])
    else:
        t = math.tan(_rad(prep[u, _PHI, 1]))
        for j in range(nb):
            vals[0, _TAN, j] = t


@njit
def _count_failures(src, row, first, nb, sin_t, cos_t, inflow, rain_kind, intensity, duration,
                    wt_depth, steady_ratio, horizon, n_depths):
    """Number of samples src[row, :, first + j] (j < nb) with FS < 1."""
    fails = 0
    if rain_kind == _STEADY:
        for j in range(nb):
            s = first + j
            depth = src[row, _DEPTH, s]
            gamma = src[row, _GAMMA, s]
            w = _wetness_point(inflow, src[row, _COND, s], depth, sin_t, cos_t)
            fs = _steady_fs_point(src[row, _COH, s] + src[row, _ROOT, s], src[row, _TAN, s],
                                  sin_t, cos_t, depth, w, gamma, gamma)
            fails += fs < 1.0
        return fails
    for j in range(nb):
        s = first + j
        fs = _sample_fs(
            src[row, _DEPTH, s], src[row, _COH, s] + src[row, _ROOT, s], src[row, _TAN, s],
            src[row, _GAMMA, s], src[row, _COND, s], src[row, _DIFF, s], sin_t, cos_t, inflow,
            rain_kind, intensity, duration, wt_depth, steady_ratio, horizon, n_depths,
        )
        fails += fs < 1.0
    return fails


@njit_parallel
def _failure_probability_kernel(slope, sca, unit, prep, draws, unit_mode, rain_kind, rain,
                                samples, n_depths, run_key, p_out, se_out):
    n_par = prep.shape[1]
    n = slope.size
    q = rain[0]
    n_chunks = (n + _CHUNK - 1) // _CHUNK
    for c in prange(n_chunks):
        vals = np.empty((1, n_par + 1, _BLOCK), dtype=np.float64)
        ubuf = np.empty(_BLOCK, dtype=np.float64)
        for i in range(c * _CHUNK, min(n, (c + 1) * _CHUNK)):
            u = unit[i]
            th = slope[i]
            a = sca[i] if rain_kind == _STEADY else 0.0
            if u < 0 or math.isnan(th) or math.isnan(a):
                p_out[i] = math.nan
                se_out[i] = math.nan
                continue
            rad = _rad(th)
            sin_t = math.sin(rad)
            cos_t = math.cos(rad)
            key = _stream_key(run_key, i)
            fails = 0
            for first in range(0, samples, _BLOCK):
                nb = min(_BLOCK, samples - first)
                if unit_mode:
                    fails += _count_failures(draws, u, first, nb, sin_t, cos_t, q * a, rain_kind,
                                             rain[0], rain[1], rain[2], rain[3], rain[4], n_depths)
                else:
                    _draw_block(prep, u, key, first, nb, ubuf, vals)
                    fails += _count_failures(vals, 0, 0, nb, sin_t, cos_t, q * a, rain_kind,
                                             rain[0], rain[1], rain[2], rain[3], rain[4], n_depths)
            pf = fails / samples
            p_out[i] = pf
            se_out[i] = math.sqrt(pf * (1.0 - pf) / samples)


def _rain_vector(rain):
    if isinstance(rain, SteadyRain):
        # recharge in m/day, to be multiplied by a (m): inflow in m^2/day
        return _STEADY, np.array([rain.recharge_mm_per_day * 1e-3, 0.0, 0.0, 0.0, 0.0])
    if isinstance(rain, StormRain):
        return _STORM, np.array([
            rain.intensity_m_per_s, rain.duration_s, rain.water_table_depth_m,
            rain.steady_ratio, rain.horizon_s,
        ])
    raise InputError(f"rain: expected a SteadyRain or a StormRain, got {type(rain).__name__}")


def _grid_inputs(slope_deg, sca_m, unit_index, table, rain, n_depths):
    """Validate the inputs shared by the Monte Carlo and FOSM functions."""
    rain_kind, rain_vec = _rain_vector(rain)
    slope, _ = _checks.surface(slope_deg, name="slope_deg", min_size=1)
    _field(slope, "slope_deg", 0.0, 90.0, open_high=True)
    shape = slope.shape
    if rain_kind == _STEADY:
        if sca_m is None:
            raise InputError("sca_m: a steady rain case needs the specific catchment area")
        sca = _field(sca_m, "sca_m", 0.0, math.inf)
        if sca.shape != shape:
            raise InputError(f"sca_m: shape {sca.shape} does not match slope_deg shape {shape}")
    else:
        sca = np.zeros(1, dtype=np.float64)
    unit = np.asarray(unit_index)
    if unit.shape != shape:
        raise InputError(f"unit_index: shape {unit.shape} does not match slope_deg shape {shape}")
    if not np.issubdtype(unit.dtype, np.integer):
        raise InputError(f"unit_index: expected an integer array, got {unit.dtype}")
    encoded, params = _checked_table(table, rain_kind == _STORM)
    n_units = encoded.shape[0]
    if unit.size and (unit.min() < -1 or unit.max() >= n_units):
        raise InputError(
            f"unit_index: values must lie in [-1, {n_units - 1}] (-1 = nodata, else a row of "
            f"the table), got [{unit.min()}, {unit.max()}]"
        )
    try:
        nd = int(n_depths)
    except (TypeError, ValueError):
        raise InputError(f"n_depths: expected an integer >= 1, got {n_depths!r}") from None
    if nd < 1 or nd != n_depths:
        raise InputError(f"n_depths: expected an integer >= 1, got {n_depths!r}")
    flat_sca = sca.reshape(-1) if rain_kind == _STEADY else sca
    return (shape, slope.reshape(-1), flat_sca, unit.astype(np.int64, copy=False).reshape(-1),
            encoded, params, rain_kind, rain_vec, nd)


def failure_probability(
    slope_deg,
    sca_m,
    unit_index,
    table,
    rain,
    *,
    samples=400,
    seed=0,
    correlation="cell",
    n_depths=1,
):
    """Monte Carlo probability of failure P(FS < 1) per cell.

    Parameters
    ----------
    slope_deg : array_like, shape (rows, cols)
        Slope angle, degrees in [0, 90); NaN is nodata.
    sca_m : array_like, shape (rows, cols), or None
        Specific catchment area a, m (>= 0); needed for steady rain, ignored
        for a storm. NaN is nodata.
    unit_index : array_like of int, shape (rows, cols)
        Row of ``table`` holding each cell's soil unit; -1 is nodata.
    table : numpy.ndarray, shape (n_units, 7, 5)
        Encoded parameters (:func:`encode_table`, order :data:`PARAMETER_ORDER`).
    rain : SteadyRain or StormRain
        The rain case.
    samples : int, keyword-only
        Number of parameter sets N per cell (>= 1). Default 400.
    seed : int, keyword-only
        Seed in [0, 2**64). The same seed gives bit-identical results, with
        any number of threads.
    correlation : {"cell", "unit"}, keyword-only
        "cell": independent draws in every cell (default). "unit": one set of
        draws per soil unit and sample, shared by all cells of that unit
        (the soil of a unit is uniform but unknown).
    n_depths : int, keyword-only
        Storm only: depths tried between the surface and the sampled soil
        depth (1 = the soil base only).

    Returns
    -------
    p_f : numpy.ndarray of float32
        Fraction of samples with FS < 1; NaN at nodata.
    standard_error : numpy.ndarray of float32
        sqrt(P_f (1 - P_f) / N).

    Raises
    ------
    InputError
        Shapes that differ, values out of range, bad table, unknown
        correlation, samples < 1.

    Notes
    -----
    For each sample the parameters are drawn by inverse transform from a
    counter-based generator keyed by (seed, cell or unit, sample, parameter),
    then FS is evaluated as in :func:`slopescreen.stability.factor_of_safety`
    with W from :func:`slopescreen.hydrology.steady_wetness` (one bulk unit
    weight for the whole column), or as the least FS over time of
    :func:`slopescreen.hydrology.storm_minimum` at the sampled soil depth::

        P_f = (1/N) sum_i 1[FS_i < 1],     s.e. = sqrt(P_f (1 - P_f) / N)

    Memory is O(cells): samples are never stored per cell.

    References
    ----------
    Baecher, G.B., Christian, J.T. (2003). Reliability and Statistics in
    Geotechnical Engineering. Wiley.

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.hydrology import SteadyRain
    >>> from slopescreen.parameters import normal
    >>> t = encode_table([{"depth_m": 1.0, "cohesion_kpa": 0.0, "root_cohesion_kpa": 0.0,
    ...     "friction_deg": normal(35.0, 3.0), "unit_weight_kn_m3": 18.0,
    ...     "conductivity_m_per_day": 1.0}])
    >>> p, se = failure_probability(np.full((2, 2), 35.0), np.full((2, 2), 10.0),
    ...     np.zeros((2, 2), int), t, SteadyRain(0.0), samples=2000, seed=1)
    >>> bool(abs(p[0, 0] - 0.5) < 4 * se[0, 0])  # dry: fails when phi' < 35
    True
    """
    shape, slope, sca, unit, encoded, _, rain_kind, rain_vec, nd = _grid_inputs(
        slope_deg, sca_m, unit_index, table, rain, n_depths
    )
    try:
        n = int(samples)
    except (TypeError, ValueError):
        raise InputError(f"samples: expected an integer >= 1, got {samples!r}") from None
    if n < 1 or n != samples:
        raise InputError(f"samples: expected an integer >= 1, got {samples!r}")
    try:
        s = int(seed)
    except (TypeError, ValueError):
        raise InputError(f"seed: expected an integer in [0, 2**64), got {seed!r}") from None
    if s != seed or not 0 <= s < 2**64:
        raise InputError(f"seed: expected an integer in [0, 2**64), got {seed!r}")
    if correlation not in ("cell", "unit"):
        raise InputError(f"correlation: expected 'cell' or 'unit', got {correlation!r}")
    prep = _prepare_table(encoded)
    # numba hands uint64 results back as Python ints: keep them uint64
    run_key = np.uint64(_seed_key(np.uint64(s)))
    if correlation == "unit":
        draws = np.empty((encoded.shape[0], _N_PAR + 1, n), dtype=np.float64)
        _unit_draws_kernel(prep, n, np.uint64(_mix64(run_key ^ _UNIT_DOMAIN)), draws)
    else:
        draws = np.empty((1, 1, _N_PAR + 1), dtype=np.float64)
    size = slope.size
    p_out = np.empty(size, dtype=np.float32)
    se_out = np.empty(size, dtype=np.float32)
    _failure_probability_kernel(slope, sca, unit, prep, draws, correlation == "unit", rain_kind,
                                rain_vec, n, nd, run_key, p_out, se_out)
    return p_out.reshape(shape), se_out.reshape(shape)


# ---------------------------------------------------------------------------
# FOSM
# ---------------------------------------------------------------------------


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
    P_f = Phi(-beta) (METHODS.md section 8.2).

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
def _fs_of_vector(x, sin_t, cos_t, inflow, rain_kind, rain, n_depths):
    return _sample_fs(
        x[_DEPTH], x[_COH] + x[_ROOT], math.tan(_rad(x[_PHI])), x[_GAMMA], x[_COND],
        x[_DIFF], sin_t, cos_t, inflow, rain_kind, rain[0], rain[1], rain[2], rain[3], rain[4],
        n_depths,
    )


@njit_parallel
def _fosm_kernel(slope, sca, unit, means, sds, x_lo, x_hi, rain_kind, rain, n_depths,
                 mean_out, sd_out):
    n_par = means.shape[1]
    for i in prange(slope.size):
        u = unit[i]
        th = slope[i]
        a = sca[i] if rain_kind == _STEADY else 0.0
        if u < 0 or math.isnan(th) or math.isnan(a):
            mean_out[i] = math.nan
            sd_out[i] = math.nan
            continue
        rad = _rad(th)
        sin_t = math.sin(rad)
        cos_t = math.cos(rad)
        inflow = rain[0] * a
        x = means[u].copy()
        f0 = _fs_of_vector(x, sin_t, cos_t, inflow, rain_kind, rain, n_depths)
        var = 0.0
        for p in range(n_par):
            sd = sds[u, p]
            if sd > 0.0:
                hi = x_hi[u, p]
                lo = x_lo[u, p]
                x[p] = hi
                f_hi = _fs_of_vector(x, sin_t, cos_t, inflow, rain_kind, rain, n_depths)
                x[p] = lo
                f_lo = _fs_of_vector(x, sin_t, cos_t, inflow, rain_kind, rain, n_depths)
                x[p] = means[u, p]
                d = (f_hi - f_lo) / (hi - lo) * sd
                var += d * d
        mean_out[i] = f0
        sd_out[i] = math.sqrt(var)


def fosm_reliability(slope_deg, sca_m, unit_index, table, rain, *, n_depths=1,
                     fs_distribution="normal"):
    """First-order second-moment reliability of each cell (Duncan's Taylor-series variant).

    Parameters
    ----------
    slope_deg, sca_m, unit_index, table, rain, n_depths
        As in :func:`failure_probability`.
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
    _fosm_kernel(slope, sca, unit, means, sds, lo, hi, rain_kind, rain_vec, nd, mean_out, sd_out)
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

