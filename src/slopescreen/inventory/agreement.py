"""Rank agreement of one hazard raster with the cells of mapped landslides.

docs/methods.md, "Agreement with mapped landslides". The inventory cells are
the positives, every other cell with data is a negative, and the hazard
product (probability of failure, factor of safety, critical recharge) ranks
them. Everything :func:`rank_agreement` reports follows exactly from one set
of counts: the sorted distinct values t_0 < ... < t_{m-1} of the positives cut
the value axis into 2m + 1 bins (each t_k, and the open intervals below, between
and above them), and a single pass of :func:`_bin_counts_kernel` counts the
cells of the raster in each bin. Subtracting the positives' own counts leaves
the negatives' counts; the Mann-Whitney placements of the positives, the AUC,
the DeLong variance, the exact ROC and success-rate vertices and the
per-landslide sums for the bootstrap are then sums over at most 2m + 1 bins.
No per-cell mask or float64 copy of the raster is made, so a call on 10^8
float32 cells costs one pass over them and memory of the order of the
positives.

The pass finds each value's bin through a bucket table over an
order-preserving integer key of the value (its float32 bit pattern with the
sign folded), so most cells need one table look-up and a few comparisons
instead of a binary search over the m edges; numba's threads each count a run
of the cells into counts of their own, summed at the end.

:func:`threshold_agreement` scores a map that has already been cut at a
threshold (for example FS < 1): rates of the flagged cells and the share of
landslides hit.
"""

import dataclasses
import math

import numba
import numpy as np

from .._numba import njit, njit_parallel, prange
from .._validate import read_only
from ..errors import InputError

__all__ = ["Agreement", "rank_agreement", "threshold_agreement"]

_PAD = 4
"""NaN sentinels after the edges: the short in-bucket count reads up to 4 edges ahead."""

_MAX_BUCKETS = 1 << 20
"""Largest bucket table of the binning pass (4 MB of int32)."""

_MIN_CHUNK = 1 << 20
"""Fewest cells a thread of the binning pass counts (small rasters run on one thread)."""

_BOOT_BLOCK = 1 << 22
"""Landslide draws held in memory at once by the bootstrap (32 MB of int64)."""


# ---------------------------------------------------------------------------
# kernels
# ---------------------------------------------------------------------------


@njit
def _order_key(v):
    """Integer key of a non-NaN value, non-decreasing in the value.

    The float32 bit pattern with the sign folded (negatives mirrored below 0);
    rounding to float32 is monotone, so the key orders float64 values too
    (beyond the float32 range they share the key of +-inf), and equal values
    (including -0.0 and +0.0) get equal keys.
    """
    bits = np.int64(np.float32(v).view(np.int32))
    if bits >= 0:
        return bits
    return -(bits & 0x7FFFFFFF)


@njit_parallel
def _bin_counts_kernel(values, edges, max_buckets, n_chunks):
    """Counts of the non-NaN values in the 2m + 1 bins cut by the sorted distinct edges.

    ``edges`` holds m >= 1 sorted distinct non-NaN float64 values (+-inf
    allowed) followed by ``_PAD`` NaN. ``counts[2k + 1]`` counts the values
    equal to ``edges[k]``; ``counts[2k]`` those strictly between
    ``edges[k - 1]`` and ``edges[k]`` (``counts[0]`` below ``edges[0]``,
    ``counts[2m]`` above ``edges[m - 1]``).
    The values are split into ``n_chunks`` runs counted in parallel.

    Bucket b of the table holds the edges whose key, shifted, is b; since the
    key is non-decreasing in the value, every edge of a lower bucket is below
    a value of bucket b and every edge of a higher bucket is above it, so the
    value's place lies in its bucket's range of edges.
    """
    m = edges.size - _PAD
    k0 = _order_key(edges[0])
    span = _order_key(edges[m - 1]) - k0
    shift = 0
    while (span >> shift) >= max_buckets:
        shift += 1
    n_buckets = (span >> shift) + 1
    first = np.zeros(n_buckets + 1, np.int32)
    for k in range(m):
        first[((_order_key(edges[k]) - k0) >> shift) + 1] += 1
    for b in range(n_buckets):
        first[b + 1] += first[b]
    top = n_buckets - 1
    size = values.size
    per_chunk = np.zeros((n_chunks, 2 * m + 1), np.int64)
    for c in prange(n_chunks):
        counts = per_chunk[c]
        for i in range(size * c // n_chunks, size * (c + 1) // n_chunks):
            v = np.float64(values[i])
            if math.isnan(v):
                continue
            b = (_order_key(v) - k0) >> shift
            if b < 0:
                lo = np.int64(0)
            elif b > top:
                lo = np.int64(m)
            else:
                lo = np.int64(first[b])
                hi = np.int64(first[b + 1])
                if hi - lo <= _PAD:
                    # edges past the bucket are above v (or NaN): they never count
                    lo += (int(edges[lo] < v) + int(edges[lo + 1] < v)
                           + int(edges[lo + 2] < v) + int(edges[lo + 3] < v))
                else:
                    while lo < hi:
                        mid = (lo + hi) >> 1
                        if edges[mid] < v:
                            lo = mid + 1
                        else:
                            hi = mid
            counts[2 * lo + int(edges[lo] == v)] += 1
    total = per_chunk[0].copy()
    for c in range(1, n_chunks):
        total += per_chunk[c]
    return total


# ---------------------------------------------------------------------------
# result
# ---------------------------------------------------------------------------


@dataclasses.dataclass(frozen=True)
class Agreement:
    """Rank agreement of one hazard raster with a landslide inventory.

    Returned by :func:`rank_agreement`; docs/methods.md, "Agreement with
    mapped landslides". The arrays are read-only.

    Attributes
    ----------
    n_positive : int
        Inventory cells scored (cells with data).
    n_negative : int
        Other cells with data.
    n_landslides : int
        Landslides with at least one scored cell.
    auc : float
        Mann-Whitney AUC: the probability that a random inventory cell ranks
        as more hazardous than a random other cell, ties counting one half.
    mann_whitney_u : float
        U of the positives, ``auc * n_positive * n_negative``.
    auc_ci : tuple of float
        Percentile bootstrap interval of the AUC over landslides (by default
        2.5 % and 97.5 %); NaN when no bootstrap was run.
    auc_bootstrap_se : float
        Standard deviation of the bootstrap AUCs; NaN when no bootstrap was run.
    delong_se : float
        DeLong standard error of the AUC, treating cells as independent; NaN
        with fewer than two positives or two negatives.
    roc_fpr, roc_tpr : numpy.ndarray of float64
        Vertices of the exact ROC curve from (0, 0) to (1, 1), thinned to at
        most ``max_points``.
    success_area_share : numpy.ndarray of float64
        Share of all scored cells ranked at least as hazardous as the
        threshold (x of the success-rate curve).
    success_captured_share : numpy.ndarray of float64
        Share of the inventory cells captured at that threshold (y).
    success_area : float
        Exact area under the success-rate curve, ties one half:
        ``(n_negative * auc + n_positive / 2) / (n_positive + n_negative)``.
    boot_samples : int
        Bootstrap replicates drawn.
    seed : int
        Seed of the bootstrap's generator.
    """

    n_positive: int
    n_negative: int
    n_landslides: int
    auc: float
    mann_whitney_u: float
    auc_ci: tuple[float, float]
    auc_bootstrap_se: float
    delong_se: float
    roc_fpr: np.ndarray
    roc_tpr: np.ndarray
    success_area_share: np.ndarray
    success_captured_share: np.ndarray
    success_area: float
    boot_samples: int
    seed: int


# ---------------------------------------------------------------------------
# input checks
# ---------------------------------------------------------------------------


def _hazard_values(values):
    """The values as a flat float32 or float64 array (a view when possible)."""
    try:
        arr = np.asarray(values)
    except (TypeError, ValueError):
        raise InputError(f"values: expected an array of numbers, got {values!r}") from None
    if arr.dtype not in (np.float32, np.float64):
        if arr.dtype.kind not in "biuf":
            raise InputError(f"values: expected float32 or float64 values, got dtype {arr.dtype}")
        arr = arr.astype(np.float64)
    elif not arr.dtype.isnative:
        arr = arr.astype(arr.dtype.newbyteorder("="))
    if arr.size == 0:
        raise InputError("values: empty array; nothing to score")
    return arr.reshape(-1)


def _cell_index(index, size, name, *, unique=True):
    """Flat cell indices as int64, checked to lie in [0, size) (and to be unique)."""
    idx = np.asarray(index)
    if idx.ndim != 1:
        raise InputError(f"{name}: expected a 1-D array of flat cell indices, got {idx.ndim}-D")
    if idx.size and idx.dtype.kind not in "iu":
        raise InputError(f"{name}: expected integer flat cell indices, got dtype {idx.dtype}")
    idx = idx.astype(np.int64, copy=False)
    if idx.size and (idx.min() < 0 or idx.max() >= size):
        bad = idx[(idx < 0) | (idx >= size)][0]
        raise InputError(
            f"{name}: index {bad} is outside the grid of {size} cells; expected flat "
            f"indices into values.ravel() in [0, {size})"
        )
    if unique and np.unique(idx).size != idx.size:
        raise InputError(f"{name}: holds repeated cells; list each inventory cell once")
    return idx


def _options(n_boot, seed, level, max_points):
    """Validated (n_boot, seed, level, max_points) of :func:`rank_agreement`."""
    try:
        nb = int(n_boot)
    except (TypeError, ValueError):
        nb = -1
    if nb != n_boot or nb < 0 or nb == 1:
        raise InputError(f"n_boot: expected 0 (no bootstrap) or an integer >= 2, got {n_boot!r}")
    try:
        sd = int(seed)
    except (TypeError, ValueError):
        sd = -1
    if sd != seed or not 0 <= sd < 2**64:
        raise InputError(f"seed: expected an integer in [0, 2**64), got {seed!r}")
    try:
        lv = float(level)
    except (TypeError, ValueError):
        lv = math.nan
    if not 0.0 < lv < 1.0:
        raise InputError(f"level: expected a confidence level in (0, 1), got {level!r}")
    try:
        mp = int(max_points)
    except (TypeError, ValueError):
        mp = 0
    if mp != max_points or mp < 2:
        raise InputError(f"max_points: expected an integer >= 2, got {max_points!r}")
    return nb, sd, lv, mp


# ---------------------------------------------------------------------------
# rank agreement
# ---------------------------------------------------------------------------


def _thin(x, y, max_points):
    """At most ``max_points`` vertices of a monotone curve, first and last kept.

    The vertices kept are those first reaching equal steps of x + y, which
    grows strictly along the curve, so the thinned curve follows its shape.
    """
    if x.size <= max_points:
        return x, y
    t = x + y
    keep = np.searchsorted(t, np.linspace(0.0, t[-1], max_points))
    keep = np.unique(np.concatenate(([0], np.minimum(keep, t.size - 1), [t.size - 1])))
    return x[keep], y[keep]


def _bootstrap(placement, groups, n_negative, n_boot, seed, level):
    """Percentile interval and standard deviation of the AUC over resampled landslides."""
    _, owner = np.unique(groups, return_inverse=True)
    sum_s = np.bincount(owner, weights=placement)
    n_cells = np.bincount(owner).astype(np.float64)
    n_land = sum_s.size
    rng = np.random.default_rng(seed)
    boot = np.empty(n_boot)
    rows = max(1, _BOOT_BLOCK // n_land)
    for start in range(0, n_boot, rows):
        stop = min(n_boot, start + rows)
        draw = rng.integers(0, n_land, size=(stop - start, n_land))
        boot[start:stop] = sum_s[draw].sum(axis=1) / (n_cells[draw].sum(axis=1) * n_negative)
    alpha = 50.0 * (1.0 - level)
    lo, hi = np.percentile(boot, [alpha, 100.0 - alpha])
    return (float(lo), float(hi)), float(boot.std(ddof=1))


def rank_agreement(values, positive_index, groups, *, higher_is_hazard, n_boot=1000,
                   seed=0, level=0.95, max_points=201):
    """Rank agreement (AUC, ROC, success rate) of a hazard raster with mapped landslides.

    The inventory cells with data are the positives, every other cell with
    data a negative. docs/methods.md, "Agreement with mapped landslides".

    Parameters
    ----------
    values : array_like of float32 or float64, any shape
        The hazard product; NaN marks cells without data (not scored). Only
        the order of the values matters, so +-inf are accepted as the
        extremes (e.g. a critical recharge of +inf for ground stable even
        when saturated). Other real dtypes are converted to float64. Not
        modified.
    positive_index : array_like of int64, shape (n,)
        Flat indices into ``values.ravel()`` of the inventory cells, each
        once. Cells whose value is NaN are dropped.
    groups : array_like of int64, shape (n,)
        Landslide id of each inventory cell (any integers). The bootstrap
        resamples landslides, not cells: the cells of one landslide are not
        independent.
    higher_is_hazard : bool
        True for a probability of failure; False for a factor of safety or a
        critical recharge, where lower values are more hazardous.
    n_boot : int
        Bootstrap replicates (0 for none, else >= 2).
    seed : int
        Seed of ``numpy.random.default_rng`` for the bootstrap.
    level : float
        Confidence level of the percentile interval.
    max_points : int
        Most vertices returned for each curve (>= 2). Thinning changes only
        the returned curves; the AUC and the areas come from the counts.

    Returns
    -------
    Agreement
        Counts, AUC and U, bootstrap interval and standard deviation, DeLong
        standard error, ROC and success-rate vertices and the success area.

    Raises
    ------
    InputError
        (a ``ValueError``) Empty or all-NaN values; indices out of the grid,
        repeated or not integer; ``groups`` of another
        length; no inventory cell or no other cell with data; a bad option.

    Notes
    -----
    With h the hazard order (v itself, or -v when lower is more hazardous),
    the placement of a positive of value t is

        s(t) = #{negatives with h < h(t)} + 1/2 #{negatives with h = h(t)},

    U = sum of s over the positives (Mann & Whitney 1947) and
    AUC = U / (n1 n0) (Hanley & McNeil 1982). DeLong's components are
    V10 = s / n0 for each positive and, for each negative,
    V01 = (#{positives more hazardous} + 1/2 #{positives equal}) / n1; with
    S10 and S01 their sample variances (divisor n - 1),

        Var(AUC) = S10 / n1 + S01 / n0        (DeLong et al. 1988).

    All are sums over the bins of the positives' distinct values, so no
    per-cell array is built. DeLong's formula treats cells as independent;
    neighbouring cells of one landslide are not, so it understates the
    uncertainty. The bootstrap instead draws the scored landslides with
    replacement (multinomial weights; Efron & Tibshirani 1993, percentile
    interval): a replicate's AUC is sum(w_l S_l) / (n0 sum(w_l n_l)), with S_l
    and n_l the summed placements and the scored cells of landslide l. The
    negatives are held fixed, so the bootstrap leaves out their share of the
    variance (S01 / n0 above), small when negatives far outnumber positives.

    The ROC vertices are, for each distinct positive value t from the most
    hazardous down, the rates of the cells strictly more hazardous than t and
    of those at least as hazardous as t, then (1, 1); a tie of positives and
    negatives is a diagonal segment, so the trapezoid area under the vertices
    equals the AUC exactly. The success-rate curve (Chung & Fabbri 2003) puts
    the share of all scored cells at least as hazardous as a threshold on x
    and the share of positives on y; with x = (n0 FPR + n1 TPR) / N its exact
    area is (n0 AUC + n1 / 2) / N, N = n0 + n1.

    References
    ----------
    Mann, H.B., Whitney, D.R. (1947). On a test of whether one of two random
    variables is stochastically larger than the other. Annals of
    Mathematical Statistics 18(1), 50-60. doi 10.1214/aoms/1177730491

    Hanley, J.A., McNeil, B.J. (1982). The meaning and use of the area under
    a receiver operating characteristic (ROC) curve. Radiology 143, 29-36.

    DeLong, E.R., DeLong, D.M., Clarke-Pearson, D.L. (1988). Comparing the
    areas under two or more correlated receiver operating characteristic
    curves: a nonparametric approach. Biometrics 44(3), 837-845.
    doi 10.2307/2531595

    Efron, B., Tibshirani, R.J. (1993). An Introduction to the Bootstrap.
    Chapman & Hall, New York.

    Chung, C.-J.F., Fabbri, A.G. (2003). Validation of spatial prediction
    models for landslide hazard mapping. Natural Hazards 30, 451-472.

    docs/methods.md, "Agreement with mapped landslides".

    Examples
    --------
    Two inventory cells (0.9 and 0.6) against three others (0.8, 0.3, 0.2):
    0.9 ranks above all three and 0.6 above two, so U = 5 of 6 pairs.

    >>> import numpy as np
    >>> p_fail = np.array([[0.9, 0.8, 0.3], [0.2, np.nan, 0.6]], dtype=np.float32)
    >>> a = rank_agreement(p_fail, np.array([0, 5]), np.array([1, 2]),
    ...                    higher_is_hazard=True, n_boot=200)
    >>> a.n_positive, a.n_negative, a.mann_whitney_u, round(a.auc, 4)
    (2, 3, 5.0, 0.8333)
    >>> a.roc_fpr.round(3), a.roc_tpr
    (array([0.   , 0.   , 0.333, 0.333, 1.   ]), array([0. , 0.5, 0.5, 1. , 1. ]))
    >>> round(a.success_area, 4)      # (3 * 5/6 + 2/2) / 5
    0.7

    A factor of safety ranks the other way: lower is more hazardous.

    >>> fs = np.array([0.8, 2.5, 1.1, 0.9, 3.0])
    >>> rank_agreement(fs, np.array([0, 3]), np.array([7, 7]), higher_is_hazard=False,
    ...                n_boot=0).auc
    1.0
    """
    flat = _hazard_values(values)
    idx = _cell_index(positive_index, flat.size, "positive_index")
    grp = np.asarray(groups)
    if grp.ndim != 1 or grp.size != idx.size:
        raise InputError(
            f"groups: expected one landslide id per inventory cell ({idx.size}), got shape "
            f"{grp.shape}"
        )
    if grp.size and grp.dtype.kind not in "iu":
        raise InputError(f"groups: expected integer landslide ids, got dtype {grp.dtype}")
    grp = grp.astype(np.int64, copy=False)
    if not isinstance(higher_is_hazard, (bool, np.bool_)):
        raise InputError(f"higher_is_hazard: expected True or False, got {higher_is_hazard!r}")
    n_boot, seed, level, max_points = _options(n_boot, seed, level, max_points)

    pos = flat[idx].astype(np.float64)
    scored = ~np.isnan(pos)
    pos, grp = pos[scored], grp[scored]
    if pos.size == 0:
        if np.isnan(flat).all():
            raise InputError("values: every cell is NaN (nodata); nothing to score")
        raise InputError("positive_index: no inventory cell has data in values; nothing to score")

    edges, pos_bin, n_at = np.unique(pos, return_inverse=True, return_counts=True)
    m = edges.size
    buckets = min(_MAX_BUCKETS, 1 << (2 * m - 1).bit_length())
    counts = _bin_counts_kernel(flat, np.concatenate([edges, np.full(_PAD, np.nan)]), buckets,
                                max(1, min(numba.get_num_threads(), flat.size // _MIN_CHUNK)))
    between = counts[0::2]                   # m + 1 bins, all negatives
    equal = counts[1::2] - n_at              # negatives equal to each edge
    if not higher_is_hazard:                 # hazard order: least hazardous first
        between, equal, n_at = between[::-1], equal[::-1], n_at[::-1]
        pos_bin = m - 1 - pos_bin
    n1 = int(pos.size)
    n0 = int(between.sum() + equal.sum())
    if n0 == 0:
        raise InputError("values: no cell outside the inventory has data; nothing to compare with")

    # placements (twice, as integers): negatives less hazardous + 1/2 equal
    below = np.cumsum(between)[:m] + np.cumsum(equal) - equal
    twice_s = 2 * below + equal
    u = 0.5 * float(np.dot(n_at, twice_s))
    auc = u / (n1 * n0)

    # DeLong components per bin, centred on the AUC
    pos_ge = np.concatenate([n1 - np.cumsum(n_at) + n_at, [0]])      # positives at t_j or above
    v10 = twice_s / (2.0 * n0)
    v01_between = pos_ge / n1
    v01_equal = (pos_ge[1:] + 0.5 * n_at) / n1
    if n1 > 1 and n0 > 1:
        s10 = float(np.dot(n_at, (v10 - auc) ** 2)) / (n1 - 1)
        s01 = (float(np.dot(between, (v01_between - auc) ** 2))
               + float(np.dot(equal, (v01_equal - auc) ** 2))) / (n0 - 1)
        delong_se = math.sqrt(s10 / n1 + s01 / n0)
    else:
        delong_se = math.nan

    # vertices, most hazardous first: strictly above t_k, then at or above t_k
    neg_ge = n0 - below
    fp = np.empty(2 * m + 2, np.int64)
    tp = np.empty(2 * m + 2, np.int64)
    fp[0], tp[0], fp[-1], tp[-1] = 0, 0, n0, n1
    fp[1:-1:2], fp[2:-1:2] = (neg_ge - equal)[::-1], neg_ge[::-1]
    tp[1:-1:2], tp[2:-1:2] = pos_ge[1:][::-1], pos_ge[:-1][::-1]
    new = np.ones(fp.size, bool)
    new[1:] = (fp[1:] != fp[:-1]) | (tp[1:] != tp[:-1])
    fp, tp = fp[new], tp[new]
    roc_fpr, roc_tpr = _thin(fp / n0, tp / n1, max_points)
    area_share, captured = _thin((fp + tp) / (n0 + n1), tp / n1, max_points)
    success_area = (u / n1 + 0.5 * n1) / (n0 + n1)

    landslides = int(np.unique(grp).size)
    if n_boot:
        auc_ci, boot_se = _bootstrap(twice_s[pos_bin] / 2.0, grp, n0, n_boot, seed, level)
    else:
        auc_ci, boot_se = (math.nan, math.nan), math.nan
    return Agreement(
        n_positive=n1, n_negative=n0, n_landslides=landslides, auc=auc,
        mann_whitney_u=u, auc_ci=auc_ci, auc_bootstrap_se=boot_se, delong_se=delong_se,
        roc_fpr=read_only(roc_fpr), roc_tpr=read_only(roc_tpr),
        success_area_share=read_only(area_share), success_captured_share=read_only(captured),
        success_area=success_area, boot_samples=n_boot, seed=seed,
    )


# ---------------------------------------------------------------------------
# threshold agreement
# ---------------------------------------------------------------------------


def _bool_grid(arr, name):
    a = np.asarray(arr)
    if a.dtype != np.bool_:
        raise InputError(f"{name}: expected a bool array, got dtype {a.dtype}")
    return a


def threshold_agreement(flag, positive_index, landslide_cells, *, scored):
    """Agreement of a map cut at a threshold (e.g. FS < 1) with mapped landslides.

    docs/methods.md, "Agreement with mapped landslides".

    Parameters
    ----------
    flag : array_like of bool, any shape
        Cells flagged hazardous. Flags outside ``scored`` are ignored.
    positive_index : array_like of int64, shape (n,)
        Flat indices into ``flag.ravel()`` of the inventory cells, each once
        (usually the union of ``landslide_cells``).
    landslide_cells : sequence of array_like of int64
        Flat indices of the cells of each landslide; a cell may belong to
        more than one landslide.
    scored : array_like of bool, shape of ``flag``
        Cells with data.

    Returns
    -------
    dict
        Plain Python numbers: ``n_positive`` and ``n_negative`` (scored
        inventory and other cells), ``n_landslides`` (landslides with a
        scored cell), ``true_positive_rate``, ``false_positive_rate``,
        ``true_skill_statistic`` (TPR - FPR), ``area_flagged_share``
        (flagged scored cells over scored cells) and ``landslides_hit_share``
        (share of those landslides with at least one flagged scored cell).

    Raises
    ------
    InputError
        (a ``ValueError``) Arrays not bool or of different shapes; indices out
        of the grid, repeated (``positive_index``) or not integer; no scored
        cell, no scored inventory cell, no other scored cell or no landslide
        with a scored cell.

    Notes
    -----
    TPR = TP / n_positive, FPR = FP / n_negative, and the true skill
    statistic TSS = TPR - FPR (Peirce 1884; Hanssen & Kuipers 1965), which
    does not depend on the share of positives (Allouche et al. 2006). The
    counts use one bool temporary of the grid's size (flagged and scored).

    References
    ----------
    Peirce, C.S. (1884). The numerical measure of the success of predictions.
    Science 4, 453-454 (volume and pages from memory).

    Hanssen, A.W., Kuipers, W.J.A. (1965). On the relationship between the
    frequency of rain and various meteorological parameters. Mededelingen en
    Verhandelingen, Koninklijk Nederlands Meteorologisch Instituut 81 (from
    memory).

    Allouche, O., Tsoar, A., Kadmon, R. (2006). Assessing the accuracy of
    species distribution models: prevalence, kappa and the true skill
    statistic (TSS). Journal of Applied Ecology 43, 1223-1232.

    Examples
    --------
    A 2 x 3 grid, one cell without data; landslide A covers cells 0 and 1,
    landslide B cell 4. Flagged: cells 0 and 2 (and 5, which has no data).

    >>> import numpy as np
    >>> flag = np.array([[True, False, True], [False, False, True]])
    >>> scored = np.array([[True, True, True], [True, True, False]])
    >>> r = threshold_agreement(flag, np.array([0, 1, 4]),
    ...                         [np.array([0, 1]), np.array([4])], scored=scored)
    >>> r["n_positive"], r["n_negative"], round(r["true_positive_rate"], 4)
    (3, 2, 0.3333)
    >>> r["false_positive_rate"], r["area_flagged_share"], r["landslides_hit_share"]
    (0.5, 0.4, 0.5)
    """
    fl = _bool_grid(flag, "flag")
    sc = _bool_grid(scored, "scored")
    if fl.shape != sc.shape:
        raise InputError(f"scored: shape {sc.shape} does not match flag shape {fl.shape}")
    if fl.size == 0:
        raise InputError("flag: empty array; nothing to score")
    fl, sc = fl.reshape(-1), sc.reshape(-1)
    idx = _cell_index(positive_index, fl.size, "positive_index")
    try:
        parts = [_cell_index(c, fl.size, f"landslide_cells[{i}]", unique=False)
                 for i, c in enumerate(landslide_cells)]
    except TypeError:
        raise InputError("landslide_cells: expected a sequence of index arrays, one per "
                         "landslide") from None

    n_scored = int(np.count_nonzero(sc))
    if n_scored == 0:
        raise InputError("scored: no cell has data; nothing to score")
    n_flagged = int(np.count_nonzero(np.logical_and(fl, sc)))
    pos_scored = sc[idx]
    n_pos = int(np.count_nonzero(pos_scored))
    tp = int(np.count_nonzero(fl[idx] & pos_scored))
    n_neg = n_scored - n_pos
    if n_pos == 0:
        raise InputError("positive_index: no inventory cell is scored; nothing to score")
    if n_neg == 0:
        raise InputError("scored: no cell outside the inventory is scored; nothing to compare with")
    fp = n_flagged - tp

    n_land = len(parts)
    if n_land == 0:
        raise InputError("landslide_cells: no landslide given")
    cells = np.concatenate(parts)
    owner = np.repeat(np.arange(n_land), [p.size for p in parts])
    cell_scored = sc[cells]
    has_scored = np.zeros(n_land, bool)
    has_scored[owner[cell_scored]] = True
    hit = np.zeros(n_land, bool)
    hit[owner[cell_scored & fl[cells]]] = True
    landslides = int(np.count_nonzero(has_scored))
    if landslides == 0:
        raise InputError("landslide_cells: no landslide has a scored cell; nothing to score")

    tpr = tp / n_pos
    fpr = fp / n_neg
    return {
        "n_positive": n_pos,
        "n_negative": n_neg,
        "n_landslides": landslides,
        "true_positive_rate": tpr,
        "false_positive_rate": fpr,
        "true_skill_statistic": tpr - fpr,
        "area_flagged_share": n_flagged / n_scored,
        "landslides_hit_share": int(np.count_nonzero(hit)) / landslides,
    }
