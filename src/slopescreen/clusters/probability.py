r"""Probability that a found cluster fails: its FS re-evaluated over Monte Carlo parameter samples.

The soil parameters of the stability stage (an encoded table, one row per
soil unit: :func:`slopescreen.probability.encode_table`) plus the lateral
root cohesion of each unit are drawn per sample; for each cluster the force
model of :mod:`slopescreen.clusters.forces` is evaluated with the drawn
values and FS(S) = (R + B) / (D + H) recomputed::

    P_f = (1/N) sum_s 1[FS_s(S) < 1],     s.e. = sqrt(P_f (1 - P_f) / N)

Correlation inside a cluster
----------------------------
Each parameter is drawn **once per soil unit and sample**, and that value is
used by every cell of the cluster that belongs to the unit (and by the
cluster's neighbours for the face terms). A cluster is one coherent mass
that moves together: its depth, strength and weight are properties of the
same body of soil, usually over a few tens of metres, shorter than the
correlation length of soil properties on a hillslope. Independent draws per
cell would average the uncertainty away over the cluster (the variance of
a mean of n independent cells falls as 1/n) and make large clusters look
far more certain than the soil data allow. Parameters are independent of
one another, as in the stability stage. The draws of the encoded table are
the stability stage's draws with ``correlation="unit"`` for the same seed
(same counter-based streams: stream u for unit u). The lateral root
cohesion, which the encoded table has no entry for, is drawn at the same
quantile as the basal root cohesion of its unit and sample: basal and
lateral root cohesion come from the same roots, so a sample with strong
roots at the base has strong roots on the margins (perfect rank
correlation; each keeps its own distribution).

Wetness
-------
The wetness of each cell is recomputed per sample from the drawn
parameters, as in the stability stage's Monte Carlo. Steady rain:
W = min(1, q a / (K z sin cos)). Storm (Iverson 2000): each cell's failure
depth is the depth of its least storm FS over the failure depths of
docs/methods.md, "Storm response (Iverson 2000)" (z_min + (H - z_min) k / n
at the drawn soil depth H, the base only where H <= z_min), with the drawn
parameters, and its wetness W = psi / (Z cos^2 theta), clipped to [0, 1],
with psi the head at that depth and time: the rule of the storm FS map,
whose least-FS depth and wetness the deterministic storm clusters take, so
a draw at the median parameters gives the deterministic cluster's FS.
Each cell takes its own depth and peak time (the same per-cell envelope as
the deterministic storm clusters, conservative for a cluster whose cells
peak at different times). A storm with an antecedent recharge starts each
cell from the steady water table of that recharge with the drawn K_s and
soil depth (docs/methods.md, "Storm response (Iverson 2000)").
A fixed wetness raster may be passed instead (held while depth, strength
and weight vary).
"""

import math
from typing import NamedTuple

import numba
import numpy as np

from .. import _validate
from .._kernels.counter_rng import _counter_key, _mix64, _seed_key, _stream_key, _uniform01
from .._kernels.inverse_cdf import _quantile_at
from .._kernels.rain_case import _STEADY, _STORM, _needs_area, _rain_vector
from .._kernels.slope_stability import FS_CAP, _rad, _vertical_depth
from .._kernels.soil_table import (
    _COH,
    _COND,
    _DEPTH,
    _DIFF,
    _GAMMA,
    _N_PAR,
    _PHI,
    _ROOT,
    _checked_table,
)
from .._kernels.storm import _storm_least_depth, peak_table
from .._kernels.unit_draws import _UNIT_DOMAIN, _prepare_table, _unit_draws_kernel
from .._kernels.wetness import _storm_table_depth, _wetness_point
from .._numba import njit, njit_parallel, prange
from ..errors import InputError
from ._faces import FACE_DCOL, FACE_DROW, N_FACES, REACH, face_geometry
from ._force_kernels import _basal_forces, _face_force
from .forces import downslope_vectors
from .inputs import ClusterUncertainty, _encode_lateral, _nodata_faces_free

__all__ = ["ClusterProbability", "cluster_parameter_draws", "cluster_failure_probability"]


class ClusterProbability(NamedTuple):
    """Result of :func:`cluster_failure_probability` (one entry per cluster)."""

    ids: np.ndarray
    """Cluster ids (label values; 1..n for a list of masks), int32."""
    p_f: np.ndarray
    """Fraction of samples with FS < 1, float64."""
    standard_error: np.ndarray
    """sqrt(P_f (1 - P_f) / N), float64."""
    fs_median: np.ndarray
    """Median FS over the samples, float64."""
    fs_samples: np.ndarray | None = None
    """FS per cluster and sample, (n_clusters, N), when ``keep_samples`` is set."""


@njit_parallel
def _lateral_draws_kernel(prep, samples, run_key, n_units, out):
    """out[u, s]: lateral root cohesion of unit u, sample s, at the quantile of the basal one.

    The uniform number is the one the basal root cohesion of unit u and
    sample s is drawn at (stream u, counter s * 7 + root), so the two are
    perfectly rank-correlated: they come from the same roots.
    """
    for u in prange(prep.shape[0]):
        key = _stream_key(run_key, u)
        for s in range(samples):
            uni = _uniform01(_counter_key(key, s * _N_PAR + _ROOT))
            out[u, s] = _quantile_at(prep, u, 0, uni)


def cluster_parameter_draws(table, lateral_root_cohesion_kpa, *, samples, seed):
    """Per-unit parameter draws used by :func:`cluster_failure_probability`.

    Parameters
    ----------
    table : numpy.ndarray, shape (n_units, 7, 5)
        Encoded soil parameters (:func:`slopescreen.probability.encode_table`).
    lateral_root_cohesion_kpa : float, Parameter or sequence
        Lateral root cohesion of each unit, kPa (one value or Parameter for
        all units, or one per unit).
    samples : int
        Number of samples N (>= 1).
    seed : int
        Seed in [0, 2**64).

    Returns
    -------
    draws : numpy.ndarray, shape (n_units, 7, N)
        Values in :data:`slopescreen.probability.PARAMETER_ORDER` (depth m,
        c' kPa, basal c_r kPa, phi' degrees, gamma kN/m^3, K m/day,
        diffusivity m^2/s; NaN where a parameter is absent).
    lateral : numpy.ndarray, shape (n_units, N)
        Lateral root cohesion, kPa.

    Raises
    ------
    InputError
        A bad table, lateral cohesion, sample count or seed.

    Notes
    -----
    Counter-based generator: the draw of parameter p of unit u in sample s
    is the inverse CDF at a uniform number keyed by (seed, stream u,
    counter s * 7 + p), the same as the stability stage's draws with
    ``correlation="unit"``; the lateral root cohesion is the inverse CDF of
    its own distribution at the basal root cohesion's uniform number
    (stream u, counter s * 7 + 2), so the two are perfectly rank-correlated. Results are reproducible bit for bit and do
    not depend on the number of threads.

    Examples
    --------
    >>> from slopescreen.parameters import normal
    >>> from slopescreen.probability import encode_table
    >>> t = encode_table([{"depth_m": 1.0, "cohesion_kpa": 0.0, "root_cohesion_kpa": 0.0,
    ...     "friction_deg": normal(35.0, 2.0), "unit_weight_kn_m3": 18.0,
    ...     "conductivity_m_per_day": 1.0}])
    >>> d, lat = cluster_parameter_draws(t, 3.0, samples=4, seed=1)
    >>> d.shape, lat.shape, float(lat[0, 0])
    ((1, 7, 4), (1, 4), 3.0)
    """
    encoded, _ = _checked_table(table, False)
    n, s = _validate.samples_and_seed(samples, seed)
    n_units = encoded.shape[0]
    prep = _prepare_table(encoded)
    prep_lat = _prepare_table(_encode_lateral(lateral_root_cohesion_kpa, n_units))
    unit_key = np.uint64(_mix64(np.uint64(_seed_key(np.uint64(s))) ^ _UNIT_DOMAIN))
    draws = np.empty((n_units, _N_PAR + 1, n), dtype=np.float64)
    _unit_draws_kernel(prep, n, unit_key, draws)
    lateral = np.empty((n_units, n), dtype=np.float64)
    _lateral_draws_kernel(prep_lat, n, unit_key, n_units, lateral)
    return np.ascontiguousarray(draws[:, :_N_PAR]), lateral


_FIXED = -1  # rain kind: the wetness raster is held

_CALL_CELL_SAMPLES = 250_000
"""Cluster cells x samples per kernel call: about 0.3 s (steady) to 0.6 s (storm) on 2 cores."""


@njit
def _sample_values(out, r, c, s, unit, draws, lateral, slope, sca, wet_fixed, rain_kind, rain,
                   down, slope_normal, n_depths, z_min, peak):
    """Face inputs of cell (r, c) in sample s (see ``_face_force``).

    Storm: the depth and head of the least FS over the failure depths, from
    the drawn parameters (``peak`` is :func:`~slopescreen._kernels.storm.peak_table`).
    """
    u = unit[r, c]
    th = _rad(slope[r, c])
    cos_t = math.cos(th)
    z = _vertical_depth(draws[u, _DEPTH, s], cos_t, slope_normal)
    if rain_kind == _STEADY:
        w = _wetness_point(rain[0] * sca[r, c], draws[u, _COND, s], z, math.sin(th), cos_t)
    elif rain_kind == _STORM:
        k = draws[u, _COND, s] / 86400.0
        sin_t = math.sin(th)
        # the case's water table, or the steady one of its antecedent recharge (rain[2] < 0)
        d = _storm_table_depth(rain[2], rain[5] * sca[r, c] if rain[2] < 0.0 else 0.0,
                               draws[u, _COND, s], z, sin_t, cos_t)
        _, z, psi = _storm_least_depth(
            z, n_depths, z_min, sin_t, cos_t, d, rain[0], k, draws[u, _DIFF, s], rain[1],
            rain[3], rain[4], draws[u, _COH, s] + draws[u, _ROOT, s],
            math.tan(_rad(draws[u, _PHI, s])), draws[u, _GAMMA, s], peak[0], peak[1], peak[2],
            peak[3])
        w = min(1.0, max(0.0, psi / (z * cos_t * cos_t)))
    else:
        w = wet_fixed[r, c]
    gamma = draws[u, _GAMMA, s]
    out[0] = z
    out[1] = w
    out[2] = gamma
    out[3] = gamma
    out[4] = draws[u, _COH, s]
    out[5] = lateral[u, s]
    out[6] = draws[u, _PHI, s]
    out[7] = down[0, r, c]
    out[8] = down[1, r, c]
    out[9] = slope[r, c]


@njit
def _values_at(cache, stamp, r, c, r0, c0, s, unit, draws, lateral, slope, sca, wet_fixed,
               rain_kind, rain, down, slope_normal, n_depths, z_min, peak):
    """The face inputs of cell (r, c) in sample s, computed once per sample and cluster.

    ``cache`` and ``stamp`` cover the cluster's bounding box with a one-cell
    halo of the pairs' reach (origin r0 - REACH, c0 - REACH): a cell shared by several pairs, or by its own
    base and its neighbours' faces, has its storm depth search done once.
    """
    i = r - r0 + REACH
    j = c - c0 + REACH
    out = cache[i, j]
    if stamp[i, j] != s:
        _sample_values(out, r, c, s, unit, draws, lateral, slope, sca, wet_fixed, rain_kind,
                       rain, down, slope_normal, n_depths, z_min, peak)
        stamp[i, j] = s
    return out


@njit_parallel
def _cluster_fs_kernel(ptr, cells_r, cells_c, slope, down, unit, valid, sca, wet_fixed,
                       rain_kind, rain, draws, lateral, dx, dy, geometry, eta, jaky_full,
                       slope_normal,
                       free_nodata, n_depths, z_min, peak, first, last, out):
    """FS per sample of the clusters first .. last - 1 (rows of ``out``)."""
    rows, cols = unit.shape
    samples = out.shape[1]
    area = dx * dy
    for j in prange(first, last):
        lo, hi = ptr[j], ptr[j + 1]
        r0 = rows
        c0 = cols
        r1 = 0
        c1 = 0
        for t in range(lo, hi):
            r0 = min(r0, cells_r[t])
            r1 = max(r1, cells_r[t] + 1)
            c0 = min(c0, cells_c[t])
            c1 = max(c1, cells_c[t] + 1)
        member = np.zeros((r1 - r0, c1 - c0), dtype=np.bool_)
        for t in range(lo, hi):
            member[cells_r[t] - r0, cells_c[t] - c0] = True
        cache = np.empty((r1 - r0 + 2 * REACH, c1 - c0 + 2 * REACH, 10))
        stamp = np.full((r1 - r0 + 2 * REACH, c1 - c0 + 2 * REACH), -1, dtype=np.int64)
        nb = np.empty(10)
        for s in range(samples):
            num = 0.0
            den = 0.0
            for t in range(lo, hi):
                r = cells_r[t]
                c = cells_c[t]
                own = _values_at(cache, stamp, r, c, r0, c0, s, unit, draws, lateral, slope, sca,
                                 wet_fixed, rain_kind, rain, down, slope_normal, n_depths, z_min,
                                 peak)
                d_i, r_i, _ = _basal_forces(slope[r, c], own[0], own[1], own[2], own[3], own[4],
                                            draws[unit[r, c], _ROOT, s], own[6], area)
                num += r_i
                den += d_i
                for k in range(N_FACES):
                    rr = r + FACE_DROW[k]
                    cc = c + FACE_DCOL[k]
                    inside = 0 <= rr < rows and 0 <= cc < cols
                    if (inside and r0 <= rr < r1 and c0 <= cc < c1
                            and member[rr - r0, cc - c0]):
                        continue  # an inner face: no margin force
                    has_nb = inside and valid[rr, cc]
                    if inside and not has_nb and free_nodata:
                        continue  # a free face towards nodata
                    face_nb = nb
                    if has_nb:
                        face_nb = _values_at(cache, stamp, rr, cc, r0, c0, s, unit, draws,
                                             lateral, slope, sca, wet_fixed, rain_kind, rain,
                                             down, slope_normal, n_depths, z_min, peak)
                    w, h = _face_force(geometry[0, k], geometry[1, k], geometry[2, k], own,
                                       face_nb, has_nb, eta, jaky_full)
                    num += w
                    den += h
            if den <= 0.0 or num >= FS_CAP * den:
                out[j, s] = FS_CAP
            else:
                out[j, s] = max(0.0, num / den)


def _cluster_blocks(ptr, samples, threads):
    """Cluster bounds of the kernel calls: calls k covers clusters bounds[k] .. bounds[k + 1] - 1.

    A compiled kernel does not see Ctrl-C: Python raises the KeyboardInterrupt
    only once the kernel returns. Each call therefore takes about
    :data:`_CALL_CELL_SAMPLES` cluster cells x samples, and at least
    ``threads`` clusters (a cluster is one parallel task). The FS of a
    cluster does not depend on the calls.

    Examples
    --------
    >>> _cluster_blocks(np.array([0, 10, 20, 30, 40]), 25_000, 1)
    [0, 1, 2, 3, 4]
    >>> _cluster_blocks(np.array([0, 10, 20, 30, 40]), 25_000, 2)
    [0, 2, 4]
    """
    n_c = ptr.size - 1
    cells = max(1, _CALL_CELL_SAMPLES // samples)
    bounds = [0]
    while bounds[-1] < n_c:
        j = bounds[-1]
        bounds.append(min(n_c, max(int(np.searchsorted(ptr, ptr[j] + cells)), j + threads)))
    return bounds


def _cluster_cells(clusters, shape):
    """(ids, CSR pointer, rows, cols) of the clusters: a label raster or a list of masks."""
    if isinstance(clusters, np.ndarray) and clusters.ndim == 2 and np.issubdtype(
            clusters.dtype, np.integer):
        if clusters.shape != shape:
            raise InputError(f"clusters: label raster of shape {clusters.shape} does not match "
                             f"the grid {shape}")
        flat = clusters.ravel()
        cells = np.flatnonzero(flat > 0)
        labs = flat[cells]
        order = np.argsort(labs, kind="stable")
        cells, labs = cells[order], labs[order]
        ids, starts = np.unique(labs, return_index=True)
        ptr = np.append(starts, labs.size).astype(np.int64)
        rr, cc = np.divmod(cells, shape[1])
        return ids.astype(np.int32), ptr, rr.astype(np.int64), cc.astype(np.int64)
    masks = [np.asarray(m, dtype=bool) for m in clusters]
    ptr = [0]
    rs, cs = [], []
    for i, m in enumerate(masks):
        if m.shape != shape:
            raise InputError(f"clusters: mask {i} has shape {m.shape}, expected the grid {shape}")
        if not m.any():
            raise InputError(f"clusters: mask {i} holds no cell")
        r, c = np.nonzero(m)
        rs.append(r)
        cs.append(c)
        ptr.append(ptr[-1] + r.size)
    rr = np.concatenate(rs).astype(np.int64) if rs else np.zeros(0, np.int64)
    cc = np.concatenate(cs).astype(np.int64) if cs else np.zeros(0, np.int64)
    return (np.arange(1, len(masks) + 1, dtype=np.int32), np.asarray(ptr, dtype=np.int64), rr,
            cc)


def cluster_failure_probability(clusters, slope_deg, aspect_deg, unit_index=None, table=None, *,
                                dx, dy, uncertainty=None, wetness=None, passive_fraction=0.5,
                                jaky_full=False, keep_samples=False, nodata_faces="free",
                                **uncertainty_fields):
    """Probability that each cluster fails, from Monte Carlo samples of the soil parameters.

    Parameters
    ----------
    clusters : numpy.ndarray of int or sequence of bool arrays
        A label raster (cluster ids > 0, 0 elsewhere; e.g.
        ``ClusterResult.labels``) or a list of grid-shaped masks (clusters
        may overlap, e.g. rows of the size-resolved table).
    slope_deg : array_like, shape (rows, cols)
        Slope, degrees in [0, 90); NaN is nodata.
    aspect_deg : array_like, shape (rows, cols)
        Downslope direction, degrees clockwise from north (NaN on flats).
    unit_index, table : optional
        The first two fields of ``uncertainty``, positionally (the form of
        earlier releases); give ``uncertainty`` instead.
    dx, dy : float
        Cell sizes, m.
    uncertainty : ClusterUncertainty
        Unit index, encoded soil table, lateral root cohesion, samples, seed,
        and the rain case (with ``sca_m`` for a steady one), or None for a
        fixed ``wetness``.
    wetness : array_like, optional
        Fixed wetness W in [0, 1], held over the samples. Give either a rain
        case in ``uncertainty`` or ``wetness``.
    passive_fraction : float
        Share of Rankine passive resistance at the toe, in [0, 1].
    jaky_full : bool
        Jaky's full K_0 on the sides.
    keep_samples : bool
        Also return every FS sample.
    nodata_faces : {"free", "charged"}
        Margin faces towards nodata cells: free (no force, the default) or
        charged with the cell's own values, as in
        :func:`~slopescreen.clusters.forces.cluster_forces`.
    **uncertainty_fields
        Instead of ``uncertainty``: its fields as loose keywords
        (``lateral_root_cohesion_kpa=..., samples=..., seed=..., rain=...,
        sca_m=...``), from which a :class:`ClusterUncertainty` is built.

    Returns
    -------
    ClusterProbability

    Raises
    ------
    InputError
        Shapes that differ, values out of range, a cluster cell without a
        soil unit or with nodata, both or neither of ``rain`` and
        ``wetness``, a storm without diffusivity.

    Notes
    -----
    Per sample s, with parameters drawn once per soil unit (module text)::

        FS_s(S) = (R_s(S) + B_s(S)) / (D_s(S) + H_s(S))
        P_f = (1/N) sum_s 1[FS_s < 1],   s.e. = sqrt(P_f (1 - P_f) / N)

    R, D per cell and B, H per margin face as in
    :func:`~slopescreen.clusters.forces.cluster_forces` (one bulk unit
    weight, as in the stability stage's Monte Carlo). P_f is conditional on
    the assumed distributions and on the cluster's shape, which is held
    fixed.

    References
    ----------
    Baecher, G.B., Christian, J.T. (2003). Reliability and Statistics in
    Geotechnical Engineering. Wiley.
    Milledge, D.G., Bellugi, D., McKean, J.A., Densmore, A.L., Dietrich,
    W.E. (2014). J. Geophys. Res. Earth Surface 119, 2481-2504.
    doi 10.1002/2014JF003135

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.parameters import normal
    >>> from slopescreen.clusters import ClusterUncertainty
    >>> from slopescreen.probability import encode_table
    >>> t = encode_table([{"depth_m": 1.0, "cohesion_kpa": 0.0, "root_cohesion_kpa": 0.0,
    ...     "friction_deg": normal(33.0, 3.0), "unit_weight_kn_m3": 18.0,
    ...     "conductivity_m_per_day": 1.0}])
    >>> unc = ClusterUncertainty(unit_index=np.zeros((6, 6), int), table=t,
    ...     lateral_root_cohesion_kpa=1.0, samples=200, seed=3)
    >>> lab = np.zeros((6, 6), np.int32); lab[1:5, 1:4] = 1
    >>> res = cluster_failure_probability(lab, np.full((6, 6), 30.0), np.full((6, 6), 180.0),
    ...     dx=5.0, dy=5.0, uncertainty=unc, wetness=0.3)
    >>> res.ids.tolist(), float(res.p_f[0])
    ([1], 0.56)

    The same call in the loose form:

    >>> res = cluster_failure_probability(lab, np.full((6, 6), 30.0), np.full((6, 6), 180.0),
    ...     np.zeros((6, 6), int), t, lateral_root_cohesion_kpa=1.0, dx=5.0, dy=5.0,
    ...     wetness=0.3, samples=200, seed=3)
    >>> float(res.p_f[0])
    0.56
    """
    slope, _ = _validate.surface(slope_deg, name="slope_deg", min_size=1)
    dx, dy = _validate.cell_size(dx, dy)
    _validate.slope_field(slope)
    shape = slope.shape
    slope = np.ascontiguousarray(slope, dtype=np.float64)
    aspect = np.asarray(aspect_deg, dtype=np.float64)
    if aspect.shape != shape:
        raise InputError(f"aspect_deg: shape {aspect.shape} does not match slope_deg {shape}")
    if np.isinf(aspect).any():
        raise InputError("aspect_deg: holds infinite values; use NaN for no direction")
    loose = dict(uncertainty_fields)
    for key, value in (("unit_index", unit_index), ("table", table)):
        if value is not None:
            loose[key] = value
    (unc,) = _validate.parameter_objects("cluster_failure_probability", loose,
                                         ("uncertainty", ClusterUncertainty, uncertainty))
    unit = unc.unit_index
    if unit.shape != shape:
        raise InputError(f"unit_index: expected an integer array of shape {shape}")
    rain = unc.rain
    if (rain is None) == (wetness is None):
        raise InputError("rain, wetness: give either a rain case (wetness per sample) or a "
                         "fixed wetness raster, not both or neither")
    rain_kind, rain_vec = (_FIXED, np.zeros(6)) if rain is None else _rain_vector(rain)
    encoded = unc.table
    n, s = unc.samples, unc.seed
    eta = float(_validate.field(passive_fraction, "passive_fraction", 0.0, 1.0, allow_nan=False))
    free_nodata = _nodata_faces_free(nodata_faces)
    valid = np.isfinite(slope) & (unit >= 0)
    wet = np.zeros((1, 1))
    sca = np.zeros((1, 1))
    if rain is None:
        w = np.asarray(_validate.field(wetness, "wetness", 0.0, 1.0), dtype=np.float64)
        try:
            wet = np.ascontiguousarray(np.broadcast_to(w, shape))
        except ValueError:
            raise InputError(f"wetness: shape {w.shape} does not broadcast to {shape}") from None
        valid &= np.isfinite(wet)
    if rain is not None and _needs_area(rain_kind, rain_vec):
        sca = np.asarray(unc.sca_m, dtype=np.float64)
        if sca.shape != shape:
            raise InputError(f"sca_m: shape {sca.shape} does not match slope_deg {shape}")
        valid &= np.isfinite(sca)
    ids, ptr, rr, cc = _cluster_cells(clusters, shape)
    if rr.size and not valid[rr, cc].all():
        raise InputError("clusters: some cluster cells have no soil unit or hold nodata "
                         "(slope, wetness or catchment area)")
    draws, lateral = cluster_parameter_draws(encoded, unc.lateral_root_cohesion_kpa, samples=n,
                                             seed=s)
    down = downslope_vectors(slope, aspect)
    out = np.empty((ids.size, n), dtype=np.float64)
    unit64 = unit.astype(np.int64)
    geometry = np.array(face_geometry(dx, dy))
    slope_normal = _validate.depth_measured(unc.depth_measured)
    peak = peak_table()
    bounds = _cluster_blocks(ptr, n, numba.get_num_threads())
    for first, last in zip(bounds[:-1], bounds[1:]):  # Ctrl-C is raised between two calls
        _cluster_fs_kernel(ptr, rr, cc, slope, down, unit64, valid, sca, wet, rain_kind,
                           rain_vec, draws, lateral, dx, dy, geometry, eta, bool(jaky_full),
                           slope_normal, free_nodata, unc.n_depths, unc.min_failure_depth_m,
                           peak, first, last, out)
    p = (out < 1.0).mean(axis=1) if ids.size else np.zeros(0)
    se = np.sqrt(p * (1.0 - p) / n)
    med = np.median(out, axis=1) if ids.size else np.zeros(0)
    return ClusterProbability(ids, p, se, med, out if keep_samples else None)
