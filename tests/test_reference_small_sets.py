"""Enumeration of small connected clusters (slopescreen.clusters.small_sets).

Outside references: the number of fixed polyominoes of n cells, 1, 2, 6, 19, 63, 216 for
n = 1..6 (OEIS A001168; Redelmeier 1981; from memory), scipy.ndimage.label for connectivity,
and brute force over every subset of a small grid for the least FS.
"""

import itertools

import numpy as np
import pytest
from scipy import ndimage

from slopescreen.clusters import cluster_factor_of_safety, cluster_forces
from slopescreen.clusters.heuristic import band_terms
from slopescreen.clusters.small_sets import least_stable_small, polyominoes


def test_fixed_polyomino_counts():
    assert [len(polyominoes(n)) for n in range(1, 7)] == [1, 2, 6, 19, 63, 216]


@pytest.mark.parametrize("n", [3, 4, 5])
def test_every_shape_is_connected_and_distinct(n):
    seen = set()
    for shape in polyominoes(n):
        cells = np.array(shape)
        grid = np.zeros(cells.max(axis=0) + 1, dtype=bool)
        grid[cells[:, 0], cells[:, 1]] = True
        assert grid.sum() == n and ndimage.label(grid)[1] == 1
        assert cells.min(axis=0).tolist() == [0, 0]
        seen.add(shape)
    assert len(seen) == len(polyominoes(n))


def test_least_small_set_equals_brute_force():
    # every 4-connected subset of a 4 x 4 grid with 1..5 cells (ndimage.label decides
    # connectivity), FS from cluster_factor_of_safety, against the enumeration
    rng = np.random.default_rng(4)
    shape = (4, 4)
    slope = rng.uniform(30.0, 44.0, shape)
    aspect = rng.uniform(150.0, 210.0, shape)
    f = cluster_forces(slope, aspect, 1.2, rng.uniform(0.3, 1.0, shape), dx=5.0, dy=5.0,
                       cohesion_kpa=1.0, root_cohesion_kpa=0.5, lateral_root_cohesion_kpa=3.0,
                       friction_deg=34.0, unit_weight_kn_m3=18.5)
    terms = band_terms(f)
    cells = list(itertools.product(range(4), range(4)))
    best = {}
    for k in range(1, 6):
        for chosen in itertools.combinations(cells, k):
            m = np.zeros(shape, dtype=bool)
            m[tuple(np.array(chosen).T)] = True
            if ndimage.label(m)[1] != 1:
                continue
            fs = cluster_factor_of_safety(f, m)
            best[k] = min(best.get(k, np.inf), fs)
    for kmin, kmax in ((1, 1), (2, 3), (1, 5), (4, 5)):
        fs, mask = least_stable_small(terms, kmin, kmax)
        assert fs == pytest.approx(min(best[k] for k in range(kmin, kmax + 1)), rel=1e-12)
        assert kmin <= mask.sum() <= kmax and ndimage.label(mask)[1] == 1
        assert cluster_factor_of_safety(f, mask) == pytest.approx(fs, rel=1e-12)
