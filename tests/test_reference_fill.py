"""Depression filling checked against outside references.

Oracles:

* scikit-image's morphological reconstruction by erosion seeded from the
  data edge (``skimage.morphology.reconstruction(..., method="erosion")``):
  the smallest surface >= z that is connected to the edge without rising,
  which is what a depression fill must return (minimality).
* The defining properties of a fill (never lowers, no cell without a
  non-ascending path to the edge, idempotence), checked by plain Python.
* For the epsilon variant, the fixed-point equation of Priority-Flood+epsilon
  (Barnes, Lehman & Mulla 2014): each non-edge cell equals
  max(z, nextafter(min over its neighbours)). Its solution is unique, so the
  check is complete.
* A hand example (Priority-Flood worked by hand) and the USGS DEM shipped with
  matplotlib (jacksboro_fault_dem.npz).
"""

from collections import deque

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp
from matplotlib import cbook
from skimage.morphology import reconstruction

from slopescreen.errors import InputError
from slopescreen.terrain import fill_depressions

FOOTPRINT_8 = np.ones((3, 3), dtype=bool)


# --------------------------------------------------------------------------
# Reference helpers (plain numpy / Python / scikit-image)
# --------------------------------------------------------------------------


def skimage_fill(z):
    """Border-seeded reconstruction by erosion; NaN cells act as outlets.

    NaN cells get a value below every elevation in both seed and mask, so the
    valid cells next to them keep their own elevation (they are on the data
    edge) and water may leave through them, as through the grid border.
    """
    z = np.asarray(z, dtype=np.float64)
    nodata = np.isnan(z)
    low = np.nanmin(z) - 1.0
    high = np.nanmax(z)
    mask = np.where(nodata, low, z)
    seed = np.full(z.shape, high)
    seed[0, :] = mask[0, :]
    seed[-1, :] = mask[-1, :]
    seed[:, 0] = mask[:, 0]
    seed[:, -1] = mask[:, -1]
    seed[nodata] = low
    out = reconstruction(seed, mask, method="erosion", footprint=FOOTPRINT_8)
    out[nodata] = np.nan
    return out


def neighbours(r, c, shape):
    for dr in (-1, 0, 1):
        for dc in (-1, 0, 1):
            if dr or dc:
                rr, cc = r + dr, c + dc
                if 0 <= rr < shape[0] and 0 <= cc < shape[1]:
                    yield rr, cc


def data_edge(z):
    """Valid cells with a neighbour outside the grid or NaN (plain Python)."""
    edge = np.zeros(z.shape, dtype=bool)
    rows, cols = z.shape
    for r in range(rows):
        for c in range(cols):
            if np.isnan(z[r, c]):
                continue
            if r in (0, rows - 1) or c in (0, cols - 1):
                edge[r, c] = True
            elif any(np.isnan(z[p]) for p in neighbours(r, c, z.shape)):
                edge[r, c] = True
    return edge


def drains_to_edge(zf, strict=False):
    """True where a cell has a non-ascending (strict: descending) path to the edge.

    Breadth-first search backwards from the data edge: from a reached cell m
    we may step to a neighbour n with zf[n] >= zf[m] (> with ``strict``).
    """
    reached = data_edge(zf)
    queue = deque(zip(*np.nonzero(reached)))
    while queue:
        m = queue.popleft()
        for n in neighbours(*m, zf.shape):
            if reached[n] or np.isnan(zf[n]):
                continue
            if zf[n] > zf[m] or (not strict and zf[n] == zf[m]):
                reached[n] = True
                queue.append(n)
    return reached


def epsilon_fixed_point_violations(z, zf):
    """Cells breaking zf = max(z, nextafter(min neighbour zf)) (edge: zf = z)."""
    up = zf.dtype.type(np.inf)
    edge = data_edge(z)
    bad = []
    for r in range(z.shape[0]):
        for c in range(z.shape[1]):
            if np.isnan(z[r, c]):
                continue
            if edge[r, c]:
                expected = z[r, c]
            else:
                low = min(zf[p] for p in neighbours(r, c, z.shape) if not np.isnan(zf[p]))
                expected = max(z[r, c], np.nextafter(low, up))
            if zf[r, c] != expected:
                bad.append((r, c))
    return bad


def smooth_random_terrain(rng, shape, dtype=np.float64):
    """Seeded noise smoothed by a 3x3 box a few times: wide closed basins."""
    z = rng.standard_normal(shape)
    for _ in range(3):
        p = np.pad(z, 1, mode="edge")
        z = sum(
            p[1 + dr : 1 + dr + shape[0], 1 + dc : 1 + dc + shape[1]]
            for dr in (-1, 0, 1)
            for dc in (-1, 0, 1)
        ) / 9.0
    return (100.0 * z).astype(dtype)


def jacksboro():
    with cbook.get_sample_data("jacksboro_fault_dem.npz") as data:
        return np.asarray(data["elevation"])


# --------------------------------------------------------------------------
# Against scikit-image reconstruction by erosion
# --------------------------------------------------------------------------


@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("shape", [(3, 3), (7, 5), (40, 40), (23, 61), (90, 17)])
@pytest.mark.parametrize("dtype", [np.float64, np.float32])
def test_random_terrain_equals_reconstruction(seed, shape, dtype):
    # Oracle: scikit-image reconstruction by erosion, seeded from the border.
    rng = np.random.default_rng(seed)
    rough = rng.uniform(0.0, 50.0, shape).astype(dtype)
    for z in (rough, smooth_random_terrain(rng, shape, dtype)):
        filled = fill_depressions(z)
        assert filled.dtype == dtype
        np.testing.assert_array_equal(filled, skimage_fill(z).astype(dtype))
        if min(shape) >= 17:
            assert (filled > z).any()  # the case really has depressions


@pytest.mark.parametrize("seed", [3, 4])
def test_integer_terrain_with_flats_equals_reconstruction(seed):
    # Oracle: scikit-image reconstruction by erosion. Few distinct integer
    # levels make many ties and flats; integer input comes back as float64.
    rng = np.random.default_rng(seed)
    z = rng.integers(0, 4, size=(31, 47)).astype(np.int16)
    filled = fill_depressions(z)
    assert filled.dtype == np.float64
    np.testing.assert_array_equal(filled, skimage_fill(z))


def test_usgs_jacksboro_dem_equals_reconstruction():
    # Oracle: scikit-image reconstruction by erosion on the USGS DEM shipped
    # with matplotlib (344 x 403 cells, int16 metres).
    z = jacksboro()
    assert z.shape == (344, 403)
    filled = fill_depressions(z)
    reference = skimage_fill(z)
    np.testing.assert_array_equal(filled, reference)
    assert (filled > z).sum() > 0  # the DEM has closed depressions to fill
    filled32 = fill_depressions(z.astype(np.float32))
    np.testing.assert_array_equal(filled32, reference.astype(np.float32))


def test_usgs_jacksboro_epsilon_properties():
    # Defining property of Priority-Flood+epsilon (Barnes et al. 2014): a
    # strictly descending path from every cell to the edge, and the unique
    # solution of its fixed-point equation; never below the plain fill.
    z = jacksboro().astype(np.float32)[:120, :150]
    plain = fill_depressions(z)
    eps = fill_depressions(z, epsilon=True)
    assert (eps >= plain).all()
    assert drains_to_edge(eps, strict=True).all()
    assert epsilon_fixed_point_violations(z, eps) == []


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_interior_nodata_holes_act_as_outlets(seed):
    # Oracle: scikit-image reconstruction by erosion with NaN cells as
    # low outlets (see skimage_fill).
    rng = np.random.default_rng(seed)
    z = smooth_random_terrain(rng, (45, 38))
    holes = rng.random(z.shape) < 0.03
    holes[10:14, 20:25] = True  # one larger hole
    z[holes] = np.nan
    filled = fill_depressions(z)
    reference = skimage_fill(z)
    np.testing.assert_array_equal(filled, reference)
    assert np.isnan(filled[holes]).all()
    # Cells next to a hole are outlets and keep their elevation.
    edge = data_edge(z)
    np.testing.assert_array_equal(filled[edge], z[edge])


def test_valid_mask_equals_nan_holes():
    # Same oracle: valid=False must act exactly like NaN.
    rng = np.random.default_rng(11)
    z = smooth_random_terrain(rng, (30, 30))
    valid = rng.random(z.shape) > 0.05
    with_mask = fill_depressions(z, valid)
    z_nan = np.where(valid, z, np.nan)
    np.testing.assert_array_equal(with_mask, skimage_fill(z_nan))
    assert np.isfinite(z).all()  # input untouched


# --------------------------------------------------------------------------
# Priority-Flood hand example (derived by hand)
# --------------------------------------------------------------------------

HAND = np.array(
    [
        [9, 9, 9, 9, 9],
        [9, 5, 5, 5, 9],
        [9, 5, 1, 5, 9],
        [9, 5, 5, 5, 9],
        [9, 9, 4, 9, 9],
    ]
)


@pytest.mark.parametrize("dtype", [np.float32, np.float64, np.int32])
def test_hand_example_plain(dtype):
    # docs/methods.md, "Conditioning for routing" (derived by hand): the centre becomes 5,
    # nothing else moves.
    z = HAND.astype(dtype)
    filled = fill_depressions(z)
    expected = HAND.astype(filled.dtype)
    expected[2, 2] = 5
    np.testing.assert_array_equal(filled, expected)


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_hand_example_epsilon(dtype):
    # derived by hand: with epsilon the centre is
    # nextafter(5). Worked through by hand: the row next to the outlet (4)
    # stays 5 (each cell is above 4 and neighbours the outlet), the middle
    # row, centre included, is one ulp above 5, the top inner row two ulps.
    z = HAND.astype(dtype)
    filled = fill_depressions(z, epsilon=True)
    up = dtype(np.inf)
    one = np.nextafter(dtype(5), up)
    two = np.nextafter(one, up)
    assert filled[2, 2] == one
    expected = HAND.astype(dtype)
    expected[1, 1:4] = two
    expected[2, 1:4] = one
    np.testing.assert_array_equal(filled, expected)
    assert filled.dtype == dtype
    assert drains_to_edge(filled, strict=True).all()


def test_epsilon_pit_queue_yields_to_lower_heap_cell():
    # Regression (derived by hand): every inner cell neighbours an edge cell
    # at 5, so the minimal epsilon fill makes them all nextafter(5). A pit
    # queue drained before the heap (ignoring that pit values climb) would
    # reach (1, 3) and (1, 4) from the left at 5 + 2 and 5 + 3 ulps before the
    # edge cell (2, 4) at 5 is taken from the heap.
    z = np.array(
        [
            [9, 5, 9, 9, 9, 9],
            [9, 5, 5, 5, 5, 9],
            [9, 9, 9, 9, 5, 9],
        ],
        dtype=np.float32,
    )
    filled = fill_depressions(z, epsilon=True)
    one = np.nextafter(np.float32(5), np.float32(np.inf))
    np.testing.assert_array_equal(filled[1, 1:5], np.full(4, one, dtype=np.float32))
    assert epsilon_fixed_point_violations(z, filled) == []


# --------------------------------------------------------------------------
# Properties (hypothesis)
# --------------------------------------------------------------------------


@st.composite
def small_dems(draw):
    shape = draw(st.tuples(st.integers(3, 12), st.integers(3, 12)))
    kind = draw(st.sampled_from(["int", "float32", "float64"]))
    if kind == "int":
        z = draw(hnp.arrays(np.float64, shape, elements=st.integers(0, 6).map(float)))
    elif kind == "float32":
        z = draw(
            hnp.arrays(np.float32, shape, elements=st.floats(-50, 50, width=32, allow_nan=False))
        )
    else:
        z = draw(hnp.arrays(np.float64, shape, elements=st.floats(-1e3, 1e3, allow_nan=False)))
    holes = np.zeros(shape, dtype=bool)
    if draw(st.booleans()):
        holes = draw(hnp.arrays(np.bool_, shape, elements=st.sampled_from([False] * 6 + [True])))
    if holes.all():
        holes[0, 0] = False
    z = z.copy()
    z[holes] = np.nan
    return z


@settings(max_examples=150, deadline=None)
@given(small_dems())
def test_property_fill(z):
    before = z.copy()
    filled = fill_depressions(z)
    np.testing.assert_array_equal(z, before)  # input not modified
    nodata = np.isnan(z)
    np.testing.assert_array_equal(np.isnan(filled), nodata)
    assert (filled[~nodata] >= z[~nodata]).all()  # never lowers a cell
    assert drains_to_edge(filled)[~nodata].all()  # no pit remains (path check)
    np.testing.assert_array_equal(fill_depressions(filled), filled)  # idempotent
    # Minimality: equals scikit-image reconstruction by erosion.
    np.testing.assert_array_equal(filled, skimage_fill(z).astype(filled.dtype))


@settings(max_examples=150, deadline=None)
@given(small_dems())
def test_property_fill_epsilon(z):
    plain = fill_depressions(z)
    eps = fill_depressions(z, epsilon=True)
    nodata = np.isnan(z)
    assert eps.dtype == plain.dtype
    assert (eps[~nodata] >= plain[~nodata]).all()
    # Every valid cell off the data edge has a strictly lower neighbour.
    edge = data_edge(z)
    for r, c in zip(*np.nonzero(~nodata & ~edge)):
        assert any(eps[p] < eps[r, c] for p in neighbours(r, c, z.shape))
    assert drains_to_edge(eps, strict=True)[~nodata].all()
    # Unique solution of the Priority-Flood+epsilon fixed-point equation.
    assert epsilon_fixed_point_violations(z, eps) == []


# --------------------------------------------------------------------------
# Input handling
# --------------------------------------------------------------------------


@pytest.mark.parametrize(
    "bad",
    [
        np.full((4, 4), np.nan),
        np.zeros((2, 2)),
        np.array([[0.0, 1.0, 2.0], [1.0, np.inf, 1.0], [2.0, 1.0, 0.0]]),
        np.array([[0.0, 1.0, 2.0], [1.0, -np.inf, 1.0], [2.0, 1.0, 0.0]]),
        np.zeros((3, 3, 3)),
        np.zeros(9),
    ],
    ids=["all-nan", "2x2", "+inf", "-inf", "3-D", "1-D"],
)
def test_bad_input_raises(bad):
    with pytest.raises(InputError):
        fill_depressions(bad)


def test_valid_mask_of_wrong_shape_raises():
    with pytest.raises(InputError):
        fill_depressions(np.zeros((4, 4)), np.ones((4, 5), dtype=bool))


@pytest.mark.parametrize("epsilon", [False, True])
def test_input_not_modified_and_float32_kept(epsilon):
    rng = np.random.default_rng(5)
    z = smooth_random_terrain(rng, (25, 30), np.float32)
    z[3, 4] = np.nan
    before = z.copy()
    filled = fill_depressions(z, epsilon=epsilon)
    np.testing.assert_array_equal(z, before)
    assert filled.dtype == np.float32
    assert filled.shape == z.shape
    assert filled.flags.c_contiguous
    assert not np.shares_memory(filled, z)
