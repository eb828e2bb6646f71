"""Monte Carlo probability of failure per cell: :func:`failure_probability`.

The soil of each cell belongs to a soil unit (``unit_index``, -1 = nodata);
each unit has one :class:`~slopescreen.parameters.Parameter` per entry of
:data:`~slopescreen.probability.PARAMETER_ORDER`, packed by
:func:`~slopescreen.probability.encode_table` into a float64 array of shape
(n_units, 7, 5). Every distribution is truncated to the physical range of its
quantity (:data:`slopescreen.parameters.PHYSICAL_RANGE`) before it is used, so
no negative depth or cohesion is ever drawn. A rain case is a
:class:`~slopescreen.hydrology.SteadyRain` (FS from the steady wetness) or a
:class:`~slopescreen.hydrology.StormRain` (least FS over time of Iverson's
storm response); :mod:`slopescreen.probability.fosm` takes the same inputs.

Parameters are drawn by inverse transform from a counter-based generator,
per cell or shared within a soil unit, and evaluated in blocks of samples.
P_f is per cell and conditional on the assumed distributions; parameters are
independent of each other, and between cells they are either independent
(``correlation="cell"``) or fully shared within a soil unit
(``correlation="unit"``). Spatial correlation in between is not modelled:
P_f of a cell is not the probability that some landslide occurs in an area.
"""

import math

import numba
import numpy as np

from .. import _validate
from .._kernels.counter_rng import _counter_key, _mix64, _seed_key, _stream_key, _uniform01
from .._kernels.friction import _tan_friction
from .._kernels.inverse_cdf import _quantile_block
from .._kernels.rain_case import _STEADY, _area_rate
from .._kernels.slope_stability import _rad, _steady_fs_point, _vertical_depth
from .._kernels.soil_table import _COH, _COND, _DEPTH, _DIFF, _GAMMA, _N_PAR, _PHI, _ROOT
from .._kernels.storm import _storm_fails, peak_table
from .._kernels.unit_draws import _TAN, _UNIT_DOMAIN, _prepare_table, _unit_draws_kernel
from .._kernels.wetness import _storm_table_depth, _wetness_point
from .._numba import njit, njit_parallel, prange
from ..errors import InputError
from ._inputs import _grid_inputs


_BLOCK = 128  # samples evaluated together (vectorised loops)
_CHUNK = 512  # cells per parallel task (at most)
_CALL_SAMPLES = 20_000_000
"""Cell-samples of a steady case per kernel call: about 0.3 s on 2 cores."""
_STORM_COST = 4
"""A storm sample costs about 4-5 steady ones (its search over depths)."""
_MIN_TASK = 8  # cells per parallel task (at least)


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
                    wt_depth, steady_ratio, horizon, n_depths, z_min, slope_normal, table, x0,
                    inv_h, eps):
    """Number of samples src[row, :, first + j] (j < nb) with FS < 1.

    ``inflow`` = q a, m^2/day: the steady recharge, or a storm's antecedent
    recharge (read where ``wt_depth`` < 0, see ``_storm_table_depth``).
    """
    fails = 0
    if rain_kind == _STEADY:
        for j in range(nb):
            s = first + j
            depth = _vertical_depth(src[row, _DEPTH, s], cos_t, slope_normal)
            gamma = src[row, _GAMMA, s]
            w = _wetness_point(inflow, src[row, _COND, s], depth, sin_t, cos_t)
            fs = _steady_fs_point(src[row, _COH, s] + src[row, _ROOT, s], src[row, _TAN, s],
                                  sin_t, cos_t, depth, w, gamma, gamma)
            fails += fs < 1.0
        return fails
    for j in range(nb):
        s = first + j
        depth = _vertical_depth(src[row, _DEPTH, s], cos_t, slope_normal)
        # the decision FS < 1 of the least storm FS, with its depths pruned by a bound
        fails += _storm_fails(
            depth, n_depths, z_min, sin_t, cos_t,
            _storm_table_depth(wt_depth, inflow, src[row, _COND, s], depth, sin_t, cos_t),
            intensity, src[row, _COND, s] / 86400.0, src[row, _DIFF, s],
            duration, steady_ratio, horizon, src[row, _COH, s] + src[row, _ROOT, s],
            src[row, _TAN, s], src[row, _GAMMA, s], table, x0, inv_h, eps,
        )
    return fails


@njit_parallel
def _failure_probability_kernel(slope, sca, unit, prep, draws, unit_mode, rain_kind, rain,
                                samples, n_depths, z_min, slope_normal, table, x0, inv_h, eps,
                                run_key, start, stop, chunk, p_out, se_out):
    """P_f and its standard error of the cells start .. stop - 1, ``chunk`` cells per task.

    Each cell's draws are keyed by its own flat index, so a cell's result does
    not depend on the range or the task it is computed in.
    """
    n_par = prep.shape[1]
    q = _area_rate(rain_kind, rain)
    needs_area = rain_kind == _STEADY or rain[2] < 0.0
    n_chunks = (stop - start + chunk - 1) // chunk
    for c in prange(n_chunks):
        vals = np.empty((1, n_par + 1, _BLOCK), dtype=np.float64)
        ubuf = np.empty(_BLOCK, dtype=np.float64)
        for i in range(start + c * chunk, min(stop, start + (c + 1) * chunk)):
            u = unit[i]
            th = slope[i]
            a = sca[i] if needs_area else 0.0
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
                                             rain[0], rain[1], rain[2], rain[3], rain[4], n_depths,
                                             z_min, slope_normal, table, x0, inv_h, eps)
                else:
                    _draw_block(prep, u, key, first, nb, ubuf, vals)
                    fails += _count_failures(vals, 0, 0, nb, sin_t, cos_t, q * a, rain_kind,
                                             rain[0], rain[1], rain[2], rain[3], rain[4], n_depths,
                                             z_min, slope_normal, table, x0, inv_h, eps)
            pf = fails / samples
            p_out[i] = pf
            se_out[i] = math.sqrt(pf * (1.0 - pf) / samples)


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
    min_failure_depth_m=0.0,
    depth_measured="vertical",
):
    """Monte Carlo probability of failure P(FS < 1) per cell.

    Parameters
    ----------
    slope_deg : array_like, shape (rows, cols)
        Slope angle, degrees in [0, 90); NaN is nodata.
    sca_m : array_like, shape (rows, cols), or None
        Specific catchment area a, m (>= 0); needed for steady rain and for
        a storm with ``antecedent_mm_per_day`` (each sample's initial water
        table is then the steady one of that recharge,
        :func:`slopescreen.hydrology.antecedent_table_depth`, with the drawn
        K_s and soil depth), ignored otherwise. NaN is nodata.
    unit_index : array_like of int, shape (rows, cols)
        Row of ``table`` holding each cell's soil unit; -1 is nodata.
    table : numpy.ndarray, shape (n_units, 7, 5)
        Encoded parameters (:func:`~slopescreen.probability.encode_table`, order
        :data:`~slopescreen.probability.PARAMETER_ORDER`).
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
        depth (1 = the soil base only); the same depth rule as
        :func:`slopescreen.hydrology.storm_minimum`.
    min_failure_depth_m : float, keyword-only
        Storm only: minimum credible failure depth z_min, m (default 0);
        the depths tried are z_min + (H - z_min) k / n_depths, k = 1..n_depths,
        at the sampled soil depth H (the base only where H <= z_min).
    depth_measured : {"vertical", "slope_normal"}, keyword-only
        How the table's ``depth_m`` was measured. ``"slope_normal"``: each
        sampled thickness H is turned into the vertical depth z = H / cos(theta)
        of the cell before FS is evaluated (docs/methods.md, "Slope-normal soil
        thickness").

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
    >>> from slopescreen.probability import encode_table
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
    z_min = _validate.nonnegative(min_failure_depth_m, "min_failure_depth_m")
    n, s = _validate.samples_and_seed(samples, seed)
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
    slope_normal = _validate.depth_measured(depth_measured)
    peak = peak_table()
    cells, chunk = _call_size(n, rain_kind, numba.get_num_threads())
    for start in range(0, size, cells):  # a pending Ctrl-C is raised between two calls
        _failure_probability_kernel(slope, sca, unit, prep, draws, correlation == "unit",
                                    rain_kind, rain_vec, n, nd, z_min, slope_normal, *peak, run_key,
                                    start, min(size, start + cells), chunk, p_out, se_out)
    return p_out.reshape(shape), se_out.reshape(shape)


def _call_size(samples, rain_kind, threads):
    """Cells per kernel call and per parallel task of :func:`failure_probability`.

    A compiled kernel does not see Ctrl-C: Python raises the KeyboardInterrupt
    only once the kernel returns. The cells are therefore handed to the kernel
    in blocks of about :data:`_CALL_SAMPLES` cell-samples (a quarter of that
    for a storm), about 0.3 s each on 2 cores, and never fewer than
    ``_MIN_TASK`` cells per thread, so every thread has work. The results do
    not depend on the blocks (the draws are keyed by cell).

    Examples
    --------
    >>> _call_size(400, _STEADY, 2)
    (50000, 512)
    >>> _call_size(100_000, _STEADY, 2)
    (200, 100)
    """
    work = _CALL_SAMPLES // (1 if rain_kind == _STEADY else _STORM_COST)
    cells = max(work // samples, _MIN_TASK * threads)
    return cells, min(_CHUNK, -(-cells // threads))
