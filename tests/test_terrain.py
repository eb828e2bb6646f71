"""Unit tests of slopescreen.terrain internals and contracts.

Outside references used here: numpy's sort (heap order) and scikit-image
reconstruction by erosion (fill results on grids that force the heap and the
pit queue to grow). The docstring examples run in test_docstring_examples.py.
"""

import numpy as np
import pytest
from skimage.morphology import reconstruction

from slopescreen._neighbours import pad_nan
from slopescreen.errors import InputError
from slopescreen.terrain import (
    _fill_depressions_padded,
    _heap_pop,
    _heap_push,
    _packed_key,
    _packed_pop,
    _packed_push,
    _queue_grow,
    _slope_aspect_padded,
    fill_depressions,
    slope_aspect,
)


def border_reconstruction(z):
    # Oracle: scikit-image reconstruction by erosion seeded from the border.
    z = np.asarray(z, dtype=np.float64)
    seed = np.full(z.shape, z.max())
    seed[0], seed[-1], seed[:, 0], seed[:, -1] = z[0], z[-1], z[:, 0], z[:, -1]
    return reconstruction(seed, z, method="erosion", footprint=np.ones((3, 3), dtype=bool))


# --------------------------------------------------------------------------
# Heaps and queue
# --------------------------------------------------------------------------


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_pair_heap_pops_in_key_then_index_order(dtype):
    # Oracle: numpy.lexsort of (index, key). Starting capacity 1 forces
    # repeated doubling; few distinct keys force ties.
    rng = np.random.default_rng(0)
    values = rng.integers(-3, 4, 500).astype(dtype)
    order_in = rng.permutation(500)
    keys = np.empty(1, dtype=dtype)
    idx = np.empty(1, dtype=np.int32)
    size = 0
    for i in order_in:
        keys, idx, size = _heap_push(keys, idx, size, values[i], i)
    popped = []
    while size > 0:
        top, size = _heap_pop(keys, idx, size)
        popped.append(top)
    expected = np.lexsort((np.arange(500), values))
    np.testing.assert_array_equal(popped, expected)


def test_packed_heap_orders_like_float_then_index():
    # Oracle: numpy.lexsort on the float32 values; covers negative, zero,
    # subnormal and large values, and ties.
    rng = np.random.default_rng(1)
    special = np.array([-3.4e38, -1.0, -1e-40, 0.0, 1e-40, 1.0, 3.4e38], dtype=np.float32)
    values = np.concatenate(
        [
            special,
            rng.normal(0, 100, 300).astype(np.float32),
            rng.integers(-2, 3, 200).astype(np.float32),
        ]
    )
    bits = values.view(np.uint32)
    heap = np.empty(1, dtype=np.uint64)
    size = 0
    for i in rng.permutation(values.size):
        heap, size = _packed_push(heap, size, np.uint64(_packed_key(bits, i)))
    popped = []
    while size > 0:
        top, size = _packed_pop(heap, size)
        popped.append(top)
    expected = np.lexsort((np.arange(values.size), values))
    np.testing.assert_array_equal(popped, expected)


def test_queue_grow_unrolls_a_wrapped_ring():
    # A full ring buffer of 8 whose head sits at 5 holds 5, 6, 7, 0, 1, ...
    ring = np.array([13, 14, 15, 16, 17, 10, 11, 12], dtype=np.int32)
    grown = _queue_grow(ring, 5, 8)
    assert grown.shape == (16,) and grown.dtype == np.int32
    np.testing.assert_array_equal(grown[:8], np.arange(10, 18))


def test_large_flat_and_long_front_force_growth():
    # A 300 x 300 closed bowl floor at 0 under a rim at 1 (pit queue front
    # well over its 1024 starting slots) and a noisy rising surface (heap
    # front over its starting capacity). Oracle: scikit-image.
    z = np.zeros((300, 300), dtype=np.float32)
    z[0, :] = z[-1, :] = z[:, 0] = z[:, -1] = 1.0
    filled = fill_depressions(z)
    np.testing.assert_array_equal(filled, 1.0)
    rng = np.random.default_rng(2)
    r = np.hypot(*np.meshgrid(np.arange(300) - 150, np.arange(300) - 150))
    z2 = (-r + rng.uniform(0, 5, r.shape)).astype(np.float32)
    reference = border_reconstruction(z2).astype(np.float32)
    np.testing.assert_array_equal(fill_depressions(z2), reference)
    eps = fill_depressions(z, epsilon=True)
    # Strict descent from the centre of the flat to the rim: rings of ulps.
    assert eps[150, 150] > eps[100, 150] > eps[10, 150] > 1.0


# --------------------------------------------------------------------------
# Padded entry points
# --------------------------------------------------------------------------


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
@pytest.mark.parametrize("epsilon", [False, True])
def test_padded_fill_matches_public_function_in_place(dtype, epsilon):
    rng = np.random.default_rng(3)
    z = rng.uniform(0, 10, (40, 30)).astype(dtype)
    z[5:8, 5:9] = np.nan
    zp = pad_nan(z)
    out, heap_count = _fill_depressions_padded(zp, epsilon=epsilon, return_heap_count=True)
    assert out is zp
    np.testing.assert_array_equal(zp[1:-1, 1:-1], fill_depressions(z, epsilon=epsilon))
    valid = int(np.isfinite(z).sum())
    assert 0 < heap_count <= valid


def test_packed_and_pair_heaps_agree():
    # float32 uses the packed heap, float64 the pair heap; the same values
    # must fill to the same surface.
    rng = np.random.default_rng(4)
    z32 = rng.uniform(0, 10, (60, 45)).astype(np.float32)
    np.testing.assert_array_equal(
        fill_depressions(z32).astype(np.float64), fill_depressions(z32.astype(np.float64))
    )


@pytest.mark.parametrize(
    "bad",
    [
        np.zeros((5, 5)),  # ring not NaN
        np.full((5, 5), np.nan, dtype=np.float16),
        np.full((5, 5), np.nan)[:, ::2],  # not C-contiguous
        np.full((2, 5), np.nan),
        np.full(25, np.nan),
    ],
    ids=["ring", "float16", "strided", "small", "1-D"],
)
def test_padded_fill_rejects_bad_layout(bad):
    with pytest.raises(InputError):
        _fill_depressions_padded(bad)


def test_padded_slope_matches_public_function():
    rng = np.random.default_rng(6)
    z = rng.uniform(0, 10, (12, 9)).astype(np.float32)
    zp = pad_nan(z)
    before = zp.copy()
    s, a = _slope_aspect_padded(zp, 2.0, 3.0)
    np.testing.assert_array_equal(zp, before)
    s2, a2 = slope_aspect(z, 2.0, 3.0)
    np.testing.assert_array_equal(s, s2)
    np.testing.assert_array_equal(a, a2)


# --------------------------------------------------------------------------
# Contracts
# --------------------------------------------------------------------------


def test_fill_is_deterministic():
    rng = np.random.default_rng(7)
    z = rng.integers(0, 3, (50, 50)).astype(np.float32)
    first = fill_depressions(z, epsilon=True)
    for _ in range(3):
        np.testing.assert_array_equal(fill_depressions(z, epsilon=True), first)


def test_fill_accepts_lists_and_keeps_seed_cells():
    z = [[3, 3, 3, 3], [3, 0, 1, 3], [3, 2, 0, 3], [3, 3, 3, 3]]
    filled = fill_depressions(z)
    assert filled.dtype == np.float64
    np.testing.assert_array_equal(filled, np.full((4, 4), 3.0))


def test_slope_aspect_contract():
    rng = np.random.default_rng(9)
    z = rng.uniform(0, 10, (10, 11))
    before = z.copy()
    s, a = slope_aspect(z, 1.0, 1.0)
    np.testing.assert_array_equal(z, before)
    assert s.shape == z.shape and a.shape == z.shape
    assert s.dtype == np.float32 and a.dtype == np.float32
    assert ((s >= 0) & (s < 90)).all()
    assert ((a >= 0) & (a < 360)).all()
    s_int, _ = slope_aspect(np.arange(30, dtype=np.int16).reshape(5, 6), 1.0, 1.0)
    assert s_int.dtype == np.float32 and np.isfinite(s_int).all()


def test_aspect_never_reaches_360():
    # Regression guard: a downslope direction a hair west of north gives
    # atan2 a tiny negative angle; +360 then rounds to 360.0 in float32,
    # which must be reported as 0.
    z = np.array([[0.0, 0.0, 1e-12], [1.0, 1.0, 1.0 + 1e-12], [2.0, 2.0, 2.0 + 1e-12]])
    _, a = slope_aspect(z, 1.0, 1.0)
    assert ((a >= 0.0) & (a < 360.0)).all()
