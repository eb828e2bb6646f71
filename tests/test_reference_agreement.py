"""Rank and threshold agreement with mapped landslides against outside references.

References named beside each check: scipy.stats.mannwhitneyu (reference library) for U and
the AUC; the null variance of U of Mann & Whitney (1947) for a random field; the DeLong et
al. (1988) variance written out pair by pair; the trapezoid rule on the ROC vertices;
numpy.searchsorted for the bin counts of the one pass; plain numpy counts for the threshold
scores.
"""

import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import mannwhitneyu

from slopescreen.inventory.agreement import (_PAD, _bin_counts_kernel, rank_agreement,
                                             threshold_agreement)


def _scipy_u(x, y):
    """U of x from scipy.stats.mannwhitneyu (its p-value may warn on all-tied samples)."""
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        return mannwhitneyu(x, y).statistic


def _split(values, positive_index):
    """Positive and negative values with data (plain numpy)."""
    flat = np.asarray(values, dtype=np.float64).ravel()
    is_pos = np.zeros(flat.size, bool)
    is_pos[positive_index] = True
    ok = ~np.isnan(flat)
    return flat[is_pos & ok], flat[~is_pos & ok]


def _delong_pairwise(pos, neg):
    """DeLong et al. (1988) standard error, straight from its definition: O(n1 n0)."""
    psi = (pos[:, None] > neg[None, :]) + 0.5 * (pos[:, None] == neg[None, :])
    auc = psi.mean()
    v10 = psi.mean(axis=1)                 # structural component of each positive
    v01 = psi.mean(axis=0)                 # and of each negative
    s10 = np.sum((v10 - auc) ** 2) / (pos.size - 1)
    s01 = np.sum((v01 - auc) ** 2) / (neg.size - 1)
    return np.sqrt(s10 / pos.size + s01 / neg.size)


def _null_se(n1, n0):
    """Standard error of the AUC under H0, from the Mann & Whitney (1947) variance of U
    (no-ties form): Var(U) = n1 n0 (n1 + n0 + 1) / 12."""
    return np.sqrt((n1 + n0 + 1) / (12.0 * n1 * n0))


# ---------------------------------------------------------------------------
# AUC and U
# ---------------------------------------------------------------------------


@settings(max_examples=80, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(2, 300), levels=st.integers(1, 6),
       nan_share=st.sampled_from([0.0, 0.1, 0.5]), f32=st.booleans(), higher=st.booleans())
def test_auc_equals_scipy_mann_whitney_u_with_heavy_ties(seed, n, levels, nan_share, f32,
                                                          higher):
    rng = np.random.default_rng(seed)
    values = np.round(rng.normal(size=n) * levels / 3) / levels     # a few levels: heavy ties
    values[rng.random(n) < nan_share] = np.nan
    values = values.astype(np.float32 if f32 else np.float64)
    n_pos = int(rng.integers(1, n))
    idx = rng.choice(n, n_pos, replace=False).astype(np.int64)
    pos, neg = _split(values, idx)
    if pos.size == 0 or neg.size == 0:
        with pytest.raises(ValueError):
            rank_agreement(values, idx, idx, higher_is_hazard=higher, n_boot=0)
        return
    a = rank_agreement(values, idx, idx, higher_is_hazard=higher, n_boot=0)
    sign = 1.0 if higher else -1.0        # lower is hazard: compare with the negated values
    ref = _scipy_u(sign * pos, sign * neg)                       # reference library
    assert a.n_positive == pos.size and a.n_negative == neg.size
    assert a.mann_whitney_u == ref
    assert a.auc == pytest.approx(ref / (pos.size * neg.size), abs=1e-15)


def test_auc_on_a_wide_range_with_negative_values_and_signed_zeros():
    # exercises the order key: negatives, -0.0 and +0.0, tiny and huge magnitudes, float64
    # values that round to one float32
    rng = np.random.default_rng(3)
    values = rng.choice([-1.0, 1.0], 4000) * np.exp(rng.normal(0.0, 20.0, 4000))
    values[:40] = 0.0
    values[40:80] = -0.0
    values[80:120] = 1.0 + np.arange(40) * 1e-12
    idx = rng.choice(4000, 600, replace=False)
    idx = np.unique(np.concatenate([idx, [0, 50, 90, 100]]))
    pos, neg = _split(values, idx)
    for higher, sign in ((True, 1.0), (False, -1.0)):
        a = rank_agreement(values, idx, idx, higher_is_hazard=higher, n_boot=0)
        assert a.mann_whitney_u == _scipy_u(sign * pos, sign * neg)


def test_infinities_rank_as_the_extremes():
    # a critical recharge of +inf (stable even when saturated) is the least hazardous value
    rng = np.random.default_rng(6)
    q = np.round(rng.lognormal(2.0, 1.0, 3000), 1)
    q[rng.random(3000) < 0.2] = np.inf
    q[:30] = -np.inf
    q[30:60] = np.nan
    idx = rng.choice(3000, 400, replace=False)
    pos, neg = _split(q, idx)
    for higher, sign in ((True, 1.0), (False, -1.0)):
        for dtype in (np.float32, np.float64):
            a = rank_agreement(q.astype(dtype), idx, idx, higher_is_hazard=higher, n_boot=0)
            assert a.mann_whitney_u == _scipy_u(sign * pos, sign * neg)   # reference library


def test_regression_clustered_positives_with_one_outlier_use_the_slow_search():
    # one far positive squeezes all the others into one bucket of the binning table
    rng = np.random.default_rng(4)
    values = 1.0 + rng.random(5000) * 1e-3
    values[17] = 1e30
    idx = np.concatenate([[17], rng.choice(np.arange(100, 5000), 300, replace=False)])
    pos, neg = _split(values, idx)
    a = rank_agreement(values, idx, np.zeros(idx.size, np.int64), higher_is_hazard=True,
                       n_boot=0)
    assert a.mann_whitney_u == _scipy_u(pos, neg)   # reference library


@pytest.mark.parametrize("n_chunks", [1, 2, 3, 7])
@pytest.mark.parametrize("buckets", [1, 8, 1 << 12])
def test_bin_counts_equal_numpy_searchsorted_for_any_split_and_table(n_chunks, buckets):
    # the binning pass against numpy.searchsorted (reference library): every bin count, for
    # parallel runs of any length and bucket tables from one bucket to many
    rng = np.random.default_rng(7)
    values = np.round(rng.normal(0.0, 3.0, 5000), 1).astype(np.float32)
    values[::17] = np.nan
    edges = np.unique(values[rng.choice(5000, 300)].astype(np.float64))
    edges = edges[~np.isnan(edges)]
    got = _bin_counts_kernel(values, np.concatenate([edges, np.full(_PAD, np.nan)]), buckets,
                             n_chunks)
    v = values[~np.isnan(values)].astype(np.float64)
    k = np.searchsorted(edges, v, side="left")
    equal = edges[np.minimum(k, edges.size - 1)] == v
    np.testing.assert_array_equal(got, np.bincount(2 * k + equal, minlength=2 * edges.size + 1))


def test_float32_gives_the_counts_of_its_float64_cast():
    # defining property: the result depends only on the values, not on their dtype
    rng = np.random.default_rng(5)
    v32 = np.round(rng.lognormal(0.0, 1.5, (60, 70)), 2).astype(np.float32)
    v32[rng.random(v32.shape) < 0.1] = np.nan
    idx = rng.choice(v32.size, 500, replace=False)
    a = rank_agreement(v32, idx, idx // 7, higher_is_hazard=False, n_boot=50, seed=2)
    b = rank_agreement(v32.astype(np.float64), idx, idx // 7, higher_is_hazard=False,
                       n_boot=50, seed=2)
    assert (a.mann_whitney_u, a.delong_se, a.auc_ci) == (b.mann_whitney_u, b.delong_se, b.auc_ci)
    np.testing.assert_array_equal(a.roc_fpr, b.roc_fpr)
    np.testing.assert_array_equal(a.success_captured_share, b.success_captured_share)


def test_perfect_and_reversed_ranking():
    values = np.arange(100.0).reshape(10, 10)
    top = np.arange(90, 100)
    up = rank_agreement(values, top, top, higher_is_hazard=True, n_boot=0)
    down = rank_agreement(values, top, top, higher_is_hazard=False, n_boot=0)
    assert up.auc == 1.0 and down.auc == 0.0
    assert up.mann_whitney_u == 10 * 90 and down.mann_whitney_u == 0.0
    # perfect ranking: the success curve climbs to (0.1, 1); area (90 * 1 + 5) / 100
    assert up.success_area == pytest.approx(0.95, abs=1e-15)
    assert down.success_area == pytest.approx(0.05, abs=1e-15)


def test_random_field_scores_one_half_within_three_null_standard_errors():
    rng = np.random.default_rng(11)
    values = rng.random((150, 200), dtype=np.float32)
    idx = rng.choice(values.size, 800, replace=False)
    a = rank_agreement(values, idx, idx // 10, higher_is_hazard=True, n_boot=0)
    tol = 3 * _null_se(a.n_positive, a.n_negative)        # Mann & Whitney (1947) null variance
    assert abs(a.auc - 0.5) < tol
    assert abs(a.success_area - 0.5) < tol


def test_success_area_identity_and_trapezoid():
    rng = np.random.default_rng(12)
    values = np.round(rng.normal(size=3000), 1)
    idx = rng.choice(3000, 250, replace=False)
    a = rank_agreement(values, idx, idx, higher_is_hazard=True, n_boot=0, max_points=10**5)
    n0, n1 = a.n_negative, a.n_positive
    # exact identity: x = (n0 FPR + n1 TPR) / N, so the area is (n0 AUC + n1 / 2) / N
    assert a.success_area == pytest.approx((n0 * a.auc + 0.5 * n1) / (n0 + n1), abs=1e-12)
    area = np.trapezoid(a.success_captured_share, a.success_area_share)   # trapezoid rule
    assert area == pytest.approx(a.success_area, abs=1e-12)
    assert a.success_area_share[0] == 0.0 and a.success_area_share[-1] == 1.0
    assert np.all(np.diff(a.success_area_share) >= 0)
    assert np.all(np.diff(a.success_captured_share) >= 0)


# ---------------------------------------------------------------------------
# DeLong standard error
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("higher", [True, False])
def test_delong_se_equals_the_pairwise_definition(higher):
    rng = np.random.default_rng(21)
    values = np.round(rng.normal(size=(20, 25)) * 2) / 2          # ties
    values[rng.random(values.shape) < 0.05] = np.nan
    idx = rng.choice(values.size, 60, replace=False)
    values.ravel()[idx] += 0.5                                    # some signal
    pos, neg = _split(values, idx)
    sign = 1.0 if higher else -1.0
    a = rank_agreement(values, idx, idx, higher_is_hazard=higher, n_boot=0)
    ref = _delong_pairwise(sign * pos, sign * neg)                # DeLong et al. (1988)
    assert a.delong_se == pytest.approx(ref, abs=1e-12)


def test_delong_se_is_nan_with_a_single_positive():
    a = rank_agreement(np.array([1.0, 2.0, 3.0]), [2], [0], higher_is_hazard=True, n_boot=0)
    assert a.auc == 1.0 and np.isnan(a.delong_se)


# ---------------------------------------------------------------------------
# ROC curve
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("higher", [True, False])
def test_trapezoid_area_of_the_roc_equals_the_auc_with_ties(higher):
    rng = np.random.default_rng(31)
    values = np.round(rng.normal(size=5000) * 3) / 3
    idx = rng.choice(5000, 400, replace=False)
    values[idx] += 0.4
    a = rank_agreement(values, idx, idx, higher_is_hazard=higher, n_boot=0, max_points=10**6)
    assert np.trapezoid(a.roc_tpr, a.roc_fpr) == pytest.approx(a.auc, abs=1e-12)   # trapezoid rule
    assert (a.roc_fpr[0], a.roc_tpr[0], a.roc_fpr[-1], a.roc_tpr[-1]) == (0.0, 0.0, 1.0, 1.0)
    assert np.all(np.diff(a.roc_fpr) >= 0) and np.all(np.diff(a.roc_tpr) >= 0)


def test_roc_vertices_of_a_hand_example():
    # positives 3, 2, 2 ; negatives 2, 1 (higher is hazard). Thresholds: t = 3 then t = 2.
    # > 3: (0, 0); >= 3: (0, 1/3); > 2: (0, 1/3) repeated, dropped; >= 2: (1/2, 1); then (1, 1).
    values = np.array([3.0, 2.0, 2.0, 2.0, 1.0])
    a = rank_agreement(values, [0, 1, 2], [0, 0, 1], higher_is_hazard=True, n_boot=0)
    np.testing.assert_array_equal(a.roc_fpr, [0.0, 0.0, 0.5, 1.0])
    np.testing.assert_array_equal(a.roc_tpr, [0.0, 1 / 3, 1.0, 1.0])
    # U: 3 beats both (2); each 2 beats 1 and ties 2 (1.5 each) -> 5 of 6
    assert a.mann_whitney_u == 5.0 and a.auc == pytest.approx(5 / 6, abs=1e-15)
    assert a.roc_fpr.dtype == np.float64 and not a.roc_fpr.flags.writeable


def test_thinning_keeps_the_ends_and_never_changes_the_auc():
    rng = np.random.default_rng(32)
    values = rng.normal(size=20000)
    idx = rng.choice(20000, 3000, replace=False)
    full = rank_agreement(values, idx, idx, higher_is_hazard=True, n_boot=0, max_points=10**6)
    thin = rank_agreement(values, idx, idx, higher_is_hazard=True, n_boot=0, max_points=50)
    assert full.roc_fpr.size > 1000 and 2 <= thin.roc_fpr.size <= 50
    assert thin.success_area_share.size <= 50
    assert (thin.roc_fpr[0], thin.roc_tpr[0], thin.roc_fpr[-1], thin.roc_tpr[-1]) == (0, 0, 1, 1)
    assert thin.auc == full.auc and thin.success_area == full.success_area
    # every kept vertex is a vertex of the full curve
    full_pts = set(zip(full.roc_fpr.tolist(), full.roc_tpr.tolist()))
    assert set(zip(thin.roc_fpr.tolist(), thin.roc_tpr.tolist())) <= full_pts


# ---------------------------------------------------------------------------
# bootstrap over landslides
# ---------------------------------------------------------------------------


def _binormal(rng, n_pos, n_neg, shift=1.0):
    values = np.concatenate([rng.normal(shift, 1.0, n_pos), rng.normal(0.0, 1.0, n_neg)])
    return values, np.arange(n_pos)


def test_bootstrap_is_reproducible_with_a_seed():
    rng = np.random.default_rng(41)
    values, idx = _binormal(rng, 200, 2000)
    groups = idx // 5
    a = rank_agreement(values, idx, groups, higher_is_hazard=True, n_boot=300, seed=9)
    b = rank_agreement(values, idx, groups, higher_is_hazard=True, n_boot=300, seed=9)
    c = rank_agreement(values, idx, groups, higher_is_hazard=True, n_boot=300, seed=10)
    assert (a.auc_ci, a.auc_bootstrap_se) == (b.auc_ci, b.auc_bootstrap_se)
    assert a.auc_ci != c.auc_ci
    assert a.boot_samples == 300 and a.seed == 9 and a.n_landslides == 40
    assert a.auc_ci[0] < a.auc < a.auc_ci[1]


def test_bootstrap_of_single_cell_landslides_matches_delong():
    # with one cell per landslide the bootstrap resamples independent positives; the negatives
    # are held fixed, so it leaves out S01 / n0, small here (n0 >> n1): DeLong et al. (1988)
    rng = np.random.default_rng(42)
    values, idx = _binormal(rng, 400, 5000)
    a = rank_agreement(values, idx, idx, higher_is_hazard=True, n_boot=2000, seed=1)
    assert a.auc_bootstrap_se == pytest.approx(a.delong_se, rel=0.15)


def test_correlated_cells_widen_the_interval():
    # 20 landslides of 20 cells sharing one value against the same 400 values as independent
    # landslides: resampling landslides must give the wider interval
    rng = np.random.default_rng(43)
    n_neg = 4000
    slide_value = rng.normal(1.0, 1.0, 20)
    values = np.concatenate([np.repeat(slide_value, 20), rng.normal(0.0, 1.0, n_neg)])
    idx = np.arange(400)
    clustered = rank_agreement(values, idx, idx // 20, higher_is_hazard=True, n_boot=1000)
    independent = rank_agreement(values, idx, idx, higher_is_hazard=True, n_boot=1000)
    assert clustered.auc == independent.auc
    width_clustered = clustered.auc_ci[1] - clustered.auc_ci[0]
    width_independent = independent.auc_ci[1] - independent.auc_ci[0]
    assert width_clustered > 2 * width_independent
    assert clustered.n_landslides == 20 and independent.n_landslides == 400


def test_no_bootstrap_gives_nan():
    a = rank_agreement(np.arange(10.0), [8, 9], [0, 1], higher_is_hazard=True, n_boot=0)
    assert np.isnan(a.auc_bootstrap_se) and all(np.isnan(a.auc_ci)) and a.boot_samples == 0


# ---------------------------------------------------------------------------
# nodata and bad input
# ---------------------------------------------------------------------------


def test_nan_cells_are_not_scored():
    rng = np.random.default_rng(51)
    values = rng.normal(size=(40, 50)).astype(np.float32)
    values[rng.random(values.shape) < 0.3] = np.nan
    idx = rng.choice(values.size, 300, replace=False)
    pos, neg = _split(values, idx)
    groups = np.arange(idx.size) // 3
    a = rank_agreement(values, idx, groups, higher_is_hazard=True, n_boot=0)
    assert a.n_positive == pos.size < 300 and a.n_negative == neg.size
    assert a.mann_whitney_u == _scipy_u(pos, neg)    # reference library
    assert a.n_landslides == np.unique(groups[~np.isnan(values.ravel()[idx])]).size


def test_non_contiguous_input_is_read_in_flat_c_order():
    rng = np.random.default_rng(52)
    base = rng.normal(size=(30, 40))
    view = base.T                                      # Fortran-ordered view
    idx = rng.choice(view.size, 100, replace=False)
    pos, neg = _split(np.ascontiguousarray(view), idx)
    a = rank_agreement(view, idx, idx, higher_is_hazard=True, n_boot=0)
    assert a.mann_whitney_u == _scipy_u(pos, neg)


@pytest.mark.parametrize("values, idx, groups, match", [
    (np.arange(10.0), [3, 10], [0, 0], "outside the grid"),
    (np.arange(10.0), [-1, 3], [0, 0], "outside the grid"),
    (np.arange(10.0), [3, 3], [0, 0], "repeated"),
    (np.arange(10.0), [3, 4], [0], "groups"),
    (np.arange(10.0), [2.0, 3.0], [0, 0], "integer"),
    (np.arange(10.0), [], [], "no inventory cell"),
    (np.array([1.0, np.nan, 3.0]), [1], [0], "no inventory cell has data"),
    (np.full(5, np.nan), [1], [0], "every cell is NaN"),
    (np.array([1.0, 2.0, np.nan]), [0, 1], [0, 0], "no cell outside the inventory"),
    (np.array([1.0, 2.0, 3.0]), [1], [0], None),
    (np.array([], dtype=np.float32), [], [], "empty"),
])
def test_bad_input_raises_value_error(values, idx, groups, match):
    if match is None:                                     # the valid neighbour of the cases
        assert rank_agreement(values, idx, groups, higher_is_hazard=True, n_boot=0).auc == 0.5
        return
    with pytest.raises(ValueError, match=match):
        rank_agreement(values, np.asarray(idx), np.asarray(groups), higher_is_hazard=True,
                       n_boot=0)


@pytest.mark.parametrize("options", [dict(n_boot=1), dict(n_boot=-3), dict(level=1.0),
                                     dict(max_points=1), dict(seed=-1), dict(seed=1.5)])
def test_bad_options_raise(options):
    with pytest.raises(ValueError):
        rank_agreement(np.arange(5.0), [4], [0], higher_is_hazard=True, **options)
    with pytest.raises(ValueError, match="higher_is_hazard"):
        rank_agreement(np.arange(5.0), [4], [0], higher_is_hazard="yes")


# ---------------------------------------------------------------------------
# threshold agreement
# ---------------------------------------------------------------------------


def test_threshold_agreement_hand_example():
    #   flag   scored    landslides: A = cells {0, 1, 3}, B = {3, 4} (shares cell 3), C = {8}
    #   T F F  T T T     positives: 0 1 3 4 8 ; cell 8 has no data -> C is not scored
    #   T F T  T T T
    #   F T T  T T F
    flag = np.array([[1, 0, 0], [1, 0, 1], [0, 1, 1]], bool)
    scored = np.array([[1, 1, 1], [1, 1, 1], [1, 1, 0]], bool)
    slides = [np.array([0, 1, 3]), np.array([3, 4]), np.array([8])]
    r = threshold_agreement(flag, np.array([0, 1, 3, 4, 8]), slides, scored=scored)
    # positives scored: 0 1 3 4 (4), flagged among them: 0 3 -> TPR 1/2
    # negatives scored: 2 5 6 7 (4), flagged: 5 7 -> FPR 1/2 ; flagged scored 4 of 8
    # A hit (0, 3), B hit (3), C not scored -> 2 landslides, both hit
    assert r == {"n_positive": 4, "n_negative": 4, "n_landslides": 2,
                 "true_positive_rate": 0.5, "false_positive_rate": 0.5,
                 "true_skill_statistic": 0.0, "area_flagged_share": 0.5,
                 "landslides_hit_share": 1.0}
    assert all(type(v) in (int, float) for v in r.values())


def test_threshold_agreement_against_plain_numpy():
    rng = np.random.default_rng(61)
    fs = rng.lognormal(0.3, 0.5, (80, 90))
    fs[rng.random(fs.shape) < 0.1] = np.nan
    scored = ~np.isnan(fs)
    flag = scored & (fs < 1.0)
    flag[~scored] = rng.random(np.count_nonzero(~scored)) < 0.5      # flags without data: ignored
    starts = rng.choice(fs.size - 10, 60, replace=False)
    slides = [s + np.arange(rng.integers(1, 10)) for s in starts]
    idx = np.unique(np.concatenate(slides))
    r = threshold_agreement(flag, idx, slides, scored=scored)

    inv = np.zeros(fs.size, bool)                                  # plain numpy reference
    inv[idx] = True
    f, s = flag.ravel(), scored.ravel()
    tpr = np.sum(f & s & inv) / np.sum(s & inv)
    fpr = np.sum(f & s & ~inv) / np.sum(s & ~inv)
    scored_slides = [c for c in slides if s[c].any()]
    assert r["n_positive"] == np.sum(s & inv) and r["n_negative"] == np.sum(s & ~inv)
    assert r["true_positive_rate"] == pytest.approx(tpr, abs=1e-15)
    assert r["false_positive_rate"] == pytest.approx(fpr, abs=1e-15)
    assert r["true_skill_statistic"] == pytest.approx(tpr - fpr, abs=1e-15)
    assert r["area_flagged_share"] == pytest.approx(np.sum(f & s) / np.sum(s), abs=1e-15)
    assert r["n_landslides"] == len(scored_slides)
    hit = sum(bool((f[c] & s[c]).any()) for c in scored_slides)
    assert r["landslides_hit_share"] == pytest.approx(hit / len(scored_slides), abs=1e-15)


def test_threshold_agreement_bad_input():
    flag = np.zeros((3, 3), bool)
    scored = np.ones((3, 3), bool)
    with pytest.raises(ValueError, match="bool"):
        threshold_agreement(flag.astype(float), [0], [np.array([0])], scored=scored)
    with pytest.raises(ValueError, match="shape"):
        threshold_agreement(flag, [0], [np.array([0])], scored=scored[:2])
    with pytest.raises(ValueError, match="outside the grid"):
        threshold_agreement(flag, [0], [np.array([9])], scored=scored)
    with pytest.raises(ValueError, match="no inventory cell"):
        threshold_agreement(flag, [0], [np.array([0])],
                            scored=scored & (np.arange(9) > 0).reshape(3, 3))
    with pytest.raises(ValueError, match="outside the inventory"):
        threshold_agreement(flag, np.arange(9), [np.arange(9)], scored=scored)
    with pytest.raises(ValueError, match="no landslide"):
        threshold_agreement(flag, [0], [], scored=scored)
