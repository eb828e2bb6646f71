"""Size-resolved cluster search checked against outside references.

Brute force over every 4-connected subset of grids up to 4 x 5 (each band's optimum), with
the margin forces summed over the 16 cell pairs written out below, the exact cut without size
limits, scipy.ndimage for connectivity, and the scaling property of the convex relaxation
(docs/methods.md, "Multi-cell failure clusters": blind to the upper area limit).
"""

import math

import numpy as np
import pytest
from scipy import ndimage

from slopescreen.clusters import cluster_factor_of_safety, cluster_forces, least_stable_in_window
from slopescreen.clusters.band import WindowBands, least_stable_in_band, relaxation_bound
from slopescreen.clusters.heuristic import band_terms, local_search, set_ratio
from slopescreen.clusters.sizes import size_resolved_clusters
from pair_oracle import SIDE_STEPS, STEPS  # the pair steps written out by hand, not from the package

CELL = 25.0  # 5 m x 5 m cells


def _instance(seed, rows, cols, realistic=True, lateral_kpa=8.0):
    rng = np.random.default_rng(seed)
    if realistic:
        # a hollow facing roughly south, steeper and wetter down the middle
        c = np.arange(cols) - (cols - 1) / 2
        slope = 30 + 13 * np.exp(-(c[None, :] ** 2) / 2) + rng.normal(0, 2, (rows, cols))
        aspect = 180 + 15 * np.sign(c)[None, :] + rng.normal(0, 5, (rows, cols))
        wet = np.clip(0.2 + 0.8 * np.exp(-(c[None, :] ** 2)) + 0 * slope, 0, 1)
        depth = 1.0 + 0.3 * rng.random((rows, cols))
        # lateral roots of 8 kPa: head faces stay submodular on ground steeper than phi'
        kw = dict(cohesion_kpa=0.5, root_cohesion_kpa=0.5, lateral_root_cohesion_kpa=lateral_kpa,
                  friction_deg=33.0, unit_weight_kn_m3=18.5)
    else:
        slope = rng.uniform(15, 50, (rows, cols))
        aspect = rng.uniform(0, 360, (rows, cols))
        wet = rng.random((rows, cols))
        depth = rng.uniform(0.5, 2.0, (rows, cols))
        kw = dict(cohesion_kpa=rng.uniform(0, 3, (rows, cols)),
                  root_cohesion_kpa=rng.uniform(0, 2, (rows, cols)),
                  lateral_root_cohesion_kpa=rng.uniform(0, 6, (rows, cols)),
                  friction_deg=rng.uniform(28, 40, (rows, cols)),
                  unit_weight_kn_m3=rng.uniform(16, 20, (rows, cols)))
    return cluster_forces(slope, aspect % 360, depth, wet, dx=5.0, dy=5.0, passive_fraction=0.5,
                          **kw)


def _connected_subsets(rows, cols):
    """Every 4-connected set of cells of a rows x cols grid, as bit masks (grown cell by cell)."""
    n = rows * cols
    nb = [0] * n
    for p in range(n):
        r, c = divmod(p, cols)
        for dr, dc in SIDE_STEPS:
            if 0 <= r + dr < rows and 0 <= c + dc < cols:
                nb[p] |= 1 << ((r + dr) * cols + c + dc)
    seen = {1 << p for p in range(n)}
    frontier = list(seen)
    while frontier:
        grown = []
        for s in frontier:
            border, t = 0, s
            while t:
                low = t & -t
                border |= nb[low.bit_length() - 1]
                t ^= low
            border &= ~s
            while border:
                low = border & -border
                u = s | low
                if u not in seen:
                    seen.add(u)
                    grown.append(u)
                border ^= low
        frontier = grown
    return sorted(seen)


def _brute(forces, sets):
    """FS of every set (bit masks) summed pair by pair in plain numpy; returns (x, fs).

    Pair k of cell p counts when p is in the set and p + STEPS[k] is not or lies off the
    grid (the margin of the set, docs/methods.md, "Multi-cell failure clusters").
    """
    rows, cols = forces.valid.shape
    n = rows * cols
    x = ((np.array(sets, dtype=np.int64)[:, None] >> np.arange(n)) & 1).astype(bool)
    num = x @ forces.resisting.ravel()
    den = x @ forces.driving.ravel()
    for p in range(n):
        r, c = divmod(p, cols)
        for k, (dr, dc) in enumerate(STEPS):
            rr, cc = r + dr, c + dc
            inside = 0 <= rr < rows and 0 <= cc < cols
            margin = x[:, p] & (~x[:, rr * cols + cc] if inside else True)
            num = num + margin * forces.face_resistance[k, r, c]
            den = den + margin * forces.face_thrust[k, r, c]
    return x, num / den


@pytest.fixture(scope="module")
def subsets_4x5():
    return _connected_subsets(4, 5)


def test_connected_subset_enumeration_matches_ndimage():
    # scipy.ndimage.label as the outside check of the enumeration on a 3 x 3 grid
    sets = set(_connected_subsets(3, 3))
    for s in range(1, 2 ** 9):
        mask = ((s >> np.arange(9)) & 1).astype(bool).reshape(3, 3)
        assert (ndimage.label(mask)[1] == 1) == (s in sets)


@pytest.mark.parametrize("seed, realistic, bands", [
    (1, True, [(2, 4), (7, 11)]),
    (2, False, [(3, 6), (12, 20)]),
    (3, True, [(1, 1), (5, 9)]),
    (4, False, [(2, 2), (9, 14)]),
])
def test_band_optimum_equals_brute_force_4x5(subsets_4x5, seed, realistic, bands):
    f = _instance(seed, 4, 5, realistic)
    x, fs = _brute(f, subsets_4x5)
    size = x.sum(axis=1)
    state = WindowBands(f, (0, 4, 0, 5))
    for kmin, kmax in bands:
        sel = (size >= kmin) & (size <= kmax)
        best = float(fs[sel].min())
        res = least_stable_in_band(f, (0, 4, 0, 5), min_area_m2=kmin * CELL,
                                   max_area_m2=kmax * CELL, time_limit_s=20.0, state=state)
        assert res.proven and res.method in ("cut", "enumeration", "relaxation", "milp")
        assert res.fs == pytest.approx(best, rel=1e-9)
        assert res.lower_bound <= res.fs and res.lower_bound >= best * (1 - 1e-4)
        # the answer is a connected set of the band, and its FS recomputed from scratch
        assert ndimage.label(res.mask)[1] == 1 and kmin <= res.mask.sum() <= kmax
        assert cluster_factor_of_safety(f, res.mask) == pytest.approx(res.fs, rel=1e-12)
        # the relaxation is a lower bound on the band optimum
        assert res.relaxation_bound <= best * (1 + 1e-7) or math.isnan(res.relaxation_bound)


def test_milp_dinkelbach_from_a_poor_start_reaches_brute_force(subsets_4x5):
    # start the MILP from a deliberately poor connected set: Dinkelbach must walk to the optimum
    f = _instance(5, 4, 5, True, lateral_kpa=2.0)   # weak roots: the cut's answer is out of band
    x, fs = _brute(f, subsets_4x5)
    size = x.sum(axis=1)
    kmin, kmax = 6, 9
    sel = np.flatnonzero((size >= kmin) & (size <= kmax))
    best = float(fs[sel].min())
    worst = sel[np.argmax(fs[sel])]
    start = x[worst].reshape(4, 5)
    res = least_stable_in_band(f, (0, 4, 0, 5), min_area_m2=kmin * CELL, max_area_m2=kmax * CELL,
                               heuristic=(start, float(fs[worst]), 0), time_limit_s=20.0)
    assert res.method == "milp" and res.proven and res.milp_solves >= 3
    assert res.fs == pytest.approx(best, rel=1e-9)
    assert res.heuristic_fs == pytest.approx(float(fs[worst]), rel=1e-12)


@pytest.mark.parametrize("weak", [
    ((1, 0), (1, 4)),   # far apart: no pair of the 16 joins them
    ((1, 1), (2, 2)),   # a diagonal pair: joined by a margin pair, not by a side
    ((0, 1), (1, 3)),   # a knight's move apart: likewise
])
def test_connectivity_is_enforced_when_the_band_favours_pieces(weak):
    # two weak cells on strong ground: the best pair is not 4-connected (brute force over
    # every subset), the best 4-connected pair (scipy.ndimage.label, cross structure) is a
    # weak cell with a strong neighbour; clusters of the size-resolved search are 4-connected
    # sets even where a diagonal or knight pair links the two cells' margins
    slope = np.full((3, 5), 22.0)
    wet = np.zeros((3, 5))
    for r, c in weak:
        slope[r, c] = 48.0
        wet[r, c] = 1.0
    f = cluster_forces(slope, np.full((3, 5), 180.0), 1.0, wet, dx=5.0, dy=5.0,
                       cohesion_kpa=0.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=0.5,
                       friction_deg=35.0, unit_weight_kn_m3=18.0)
    every = list(range(1, 2 ** 15))
    x, fs = _brute(f, every)
    pairs = x.sum(axis=1) == 2
    conn = np.array([ndimage.label(m.reshape(3, 5))[1] == 1 for m in x])
    best_any = float(fs[pairs].min())
    best_conn = float(fs[pairs & conn].min())
    assert best_any < best_conn
    assert x[pairs][np.argmin(fs[pairs])].reshape(3, 5)[tuple(np.transpose(weak))].all()
    res = least_stable_in_band(f, (0, 3, 0, 5), min_area_m2=2 * CELL, max_area_m2=2 * CELL)
    assert res.proven and res.fs == pytest.approx(best_conn, rel=1e-9)
    assert ndimage.label(res.mask)[1] == 1 and res.mask.sum() == 2


def test_unlimited_band_equals_the_exact_cut():
    # band [0, inf): the answer is the window's least-stable cluster by exact cuts, and the
    # relaxation LP (HiGHS) equals it
    for seed, realistic in ((6, True), (7, False)):
        f = _instance(seed, 9, 8, realistic)
        cut = least_stable_in_window(f, (0, 9, 0, 8))
        res = least_stable_in_band(f, (0, 9, 0, 8), min_area_m2=0.0, max_area_m2=math.inf)
        comp = ndimage.label(cut.mask)[1]
        assert comp == 1 and res.method == "cut" and res.proven
        assert res.fs == pytest.approx(cut.least_fs, rel=1e-12)
        state = WindowBands(f, (0, 9, 0, 8))
        rb = relaxation_bound(state.ensure_model(res.fs), 1, 72)
        assert rb == pytest.approx(cut.least_fs, rel=1e-7)


def test_relaxation_is_blind_to_the_upper_limit_only():
    # docs/methods.md, "Multi-cell failure clusters": FS(alpha x) = FS(x), so A_max never
    # moves the bound; A_min does
    f = _instance(8, 8, 8, True)
    state = WindowBands(f, (0, 8, 0, 8))
    model = state.ensure_model(2.0)
    by_max = [relaxation_bound(model, 10, k) for k in (10, 20, 40, 64)]
    assert max(by_max) - min(by_max) <= 1e-7 * by_max[0]
    by_min = [relaxation_bound(model, k, 64) for k in (1, 10, 30, 50, 64)]
    assert all(b <= a * (1 + 1e-9) for a, b in zip(by_min[1:], by_min[:-1]))
    assert by_min[-1] > by_min[0] * (1 + 1e-3)
    # with kmin = all 64 cells the only set is the whole window: the bound is its FS
    whole = cluster_factor_of_safety(f, np.ones((8, 8), bool))
    assert by_min[-1] == pytest.approx(whole, rel=1e-7)


def test_local_search_keeps_sets_connected_and_in_band():
    f = _instance(9, 10, 10, False)
    terms = band_terms(f)
    start = np.zeros((10, 10), bool)
    start[2:8, 2:8] = True
    for kmin, kmax in ((3, 5), (40, 60), (10, 10)):
        mask, fs = local_search(terms, start, kmin, kmax)
        assert ndimage.label(mask)[1] == 1 and kmin <= mask.sum() <= kmax
        n, d = set_ratio(terms, mask)
        assert fs == pytest.approx(n / d, rel=1e-9)
        assert fs == pytest.approx(cluster_factor_of_safety(f, mask), rel=1e-9)


def test_size_resolved_table_rows_are_real_clusters():
    f = _instance(10, 14, 12, True)
    windows = [(0, 10, 0, 10), (4, 14, 2, 12)]
    res = size_resolved_clusters(f, candidates=windows, min_area_m2=50.0, max_area_m2=1500.0,
                                 bands=3, time_limit_s=10.0)
    t = res.table
    assert len(t["fs"]) == 6
    for i in range(6):
        mask = res.grid_mask(i, f.valid.shape)
        assert ndimage.label(mask)[1] == 1
        assert t["band_min_m2"][i] <= mask.sum() * CELL <= t["band_max_m2"][i]
        assert cluster_factor_of_safety(f, mask) == pytest.approx(t["fs"][i], rel=1e-12)
        assert t["lower_bound"][i] <= t["fs"][i]
        assert t["proven"][i] == (t["lower_bound"][i] >= t["fs"][i] * (1 - 1e-4))
        r0, r1, c0, c1 = t["row0"][i], t["row1"][i], t["col0"][i], t["col1"][i]
        assert not mask[:r0].any() and not mask[r1:].any()
        assert not mask[:, :c0].any() and not mask[:, c1:].any()


def test_minimum_perimeter_of_cell_sets_by_brute_force():
    # Harary and Harborth (1976), from memory: k grid cells have at least 2 ceil(2 sqrt k)
    # margin faces, so at most 2k - ceil(2 sqrt k) inner faces. Checked here over every
    # subset of a 4 x 4 grid, with equality for some set of each size (a near-square).
    from slopescreen.clusters.band import _isoperimetric_line

    s = np.arange(1, 2 ** 16)
    x = ((s[:, None] >> np.arange(16)) & 1).astype(bool).reshape(-1, 4, 4)
    k = x.reshape(-1, 16).sum(axis=1)
    inner = (x[:, :, :-1] & x[:, :, 1:]).sum(axis=(1, 2)) + (x[:, :-1, :] & x[:, 1:, :]).sum(
        axis=(1, 2))
    most = np.array([inner[k == j].max() for j in range(1, 17)])
    limit = np.array([2 * j - math.ceil(2 * math.sqrt(j) - 1e-12) for j in range(1, 17)])
    np.testing.assert_array_equal(most, limit)
    # the line of the cut lies below ceil(2 sqrt k) on every whole k of a band
    for kmin, kmax in ((1, 1), (1, 16), (3, 7), (7, 24), (25, 87), (88, 312), (9, 9)):
        a, b = _isoperimetric_line(kmin, kmax)
        ks = np.arange(kmin, kmax + 1)
        assert np.all(a + b * ks <= np.ceil(2 * np.sqrt(ks) - 1e-12) + 1e-9)


def _bounds_by_band(f, subsets, bands):
    """(best, plain, strong) per band: brute-force optimum and the two relaxation bounds."""
    x, fs = _brute(f, subsets)
    size = x.sum(axis=1)
    model = WindowBands(f, (0, 4, 0, 5)).ensure_model(float(fs.max()))
    return [(float(fs[(size >= kmin) & (size <= kmax)].min()),
             relaxation_bound(model, kmin, kmax),
             relaxation_bound(model, kmin, kmax, perimeter=True)) for kmin, kmax in bands]


@pytest.mark.parametrize("seed, realistic, lateral_kpa", [
    (1, True, 8.0), (2, False, 8.0), (5, True, 8.0), (1, True, 30.0), (3, True, 30.0),
    (5, True, 30.0)])
def test_perimeter_bound_is_valid(subsets_4x5, seed, realistic, lateral_kpa):
    # brute force over every connected subset: the perimeter-strengthened relaxation stays a
    # lower bound of each band's optimum and is never below the plain relaxation
    f = _instance(seed, 4, 5, realistic, lateral_kpa=lateral_kpa)
    bands = ((1, 1), (1, 2), (1, 4), (2, 6), (3, 9), (5, 12), (1, 20))
    for best, plain, strong in _bounds_by_band(f, subsets_4x5, bands):
        assert plain <= strong * (1 + 1e-7) and strong <= best * (1 + 1e-7)


@pytest.mark.parametrize("seed", [1, 3, 5])
def test_perimeter_bound_sees_the_upper_limit_in_part(subsets_4x5, seed):
    # Lateral roots of 30 kPa make margins dear, so the least-stable set of the 4 x 5 grid
    # has 11 or 12 cells and the band optimum rises as the upper limit falls (brute force);
    # the plain relaxation is blind to that rise (docs/methods.md, "Multi-cell failure
    # clusters"), the perimeter bound recovers part of it.
    #
    # The cut bounds only the pairs of side-sharing cells (Harary and Harborth's minimum
    # perimeter); the diagonal and knight pairs, with about 56 % of a lone cell's pair
    # factors (slopescreen.clusters._faces.face_geometry: 1.16 of 2.08 dx), stay free, so a
    # scaled-down large set keeps their give-back. Measured
    # share of the optimum's rise over the unlimited band that the bound recovers, these
    # three instances (all 8 realistic seeds at 30 kPa in brackets):
    #   kmax = 2: 0.80, 0.68, 0.59 (0.59-0.89)   former 4-face model: 0.87-0.89
    #   kmax = 4: 0.39, 0.31, 0.37 (0.31-0.41)                         0.69-0.85
    #   kmax = 6: 0.26, 0.14, 0.28 (0.14-0.28)                         0.73-0.94
    #   kmax = 9: 0.19, 0.00, 0.17 (0.00-0.19)                         0.73-1.00
    # so the bound still sees a tight upper limit well, a middling one weakly, and one near
    # the optimum's own size hardly. The thresholds below sit under the measured shares.
    f = _instance(seed, 4, 5, True, lateral_kpa=30.0)
    kmaxes = (2, 4, 6, 20)
    rows = _bounds_by_band(f, subsets_4x5, [(1, k) for k in kmaxes])
    best_all, plain_all, strong_all = rows[-1]
    least_share = {2: 0.5, 4: 0.25, 6: 0.1}
    for kmax, (best, plain, strong) in zip(kmaxes, rows):
        assert strong <= best * (1 + 1e-7)
        if kmax in least_share:
            assert plain == pytest.approx(plain_all, rel=1e-7)   # blind to the upper limit
            rise = best / best_all - 1.0
            assert rise > 0.02                                   # the upper limit matters
            assert strong / strong_all - 1.0 >= least_share[kmax] * rise
