"""The data of the report's pan-and-zoom map: block reduction, quantisation, PNG packing.

Outside references: block means, minima and maxima computed here independently with numpy
(a plain loop over blocks, NaN-aware numpy reductions), Pillow decoding the PNGs, and the
FS screening bands of common practice (the page must put a cell in the same band as the
PNG maps' ``fs_band``).
"""

import io
import math

import numpy as np
import pytest
from PIL import Image

from slopescreen.report import explorer as ex
from slopescreen.report.styles import fs_band


def _blocks_by_loop(values, k, reduce):
    """Each k x k block (edge blocks partial) reduced by ``reduce`` over its valid cells."""
    rows, cols = values.shape
    out = np.full((-(-rows // k), -(-cols // k)), np.nan)
    for i in range(out.shape[0]):
        for j in range(out.shape[1]):
            block = values[i * k:(i + 1) * k, j * k:(j + 1) * k].astype(np.float64)
            block = block[np.isfinite(block)]
            if block.size:
                out[i, j] = reduce(block)
    return out


@pytest.fixture
def field():
    rng = np.random.default_rng(7)
    v = (rng.gamma(2.0, 0.8, size=(53, 71))).astype(np.float32)
    v[rng.random(v.shape) < 0.15] = np.nan
    v[:9, :9] = np.nan                       # a whole block without a value
    return v


@pytest.mark.parametrize("k", [1, 2, 3, 8])
@pytest.mark.parametrize("rule, reduce", [("mean", np.mean), ("min", np.min), ("max", np.max)])
def test_block_reduction_matches_numpy_per_block(field, k, rule, reduce):
    got = ex.decimate(field, k, rule)
    want = _blocks_by_loop(field, k, reduce)
    assert got.dtype == np.float32 and got.shape == want.shape
    assert np.array_equal(np.isnan(got), np.isnan(want))
    np.testing.assert_allclose(got[np.isfinite(got)], want[np.isfinite(want)], rtol=1e-6)


def test_block_means_match_a_reshape_mean_on_a_whole_grid():
    # numpy's own nanmean over a reshape, the form the brief names: whole blocks only
    rng = np.random.default_rng(3)
    v = rng.normal(30.0, 8.0, size=(60, 84)).astype(np.float32)
    want = v.astype(np.float64).reshape(20, 3, 28, 3).mean(axis=(1, 3))
    np.testing.assert_allclose(ex.decimate(v, 3, "mean"), want, rtol=1e-6)


def test_reduction_in_strips_equals_one_pass(field):
    whole = ex.decimate(field, 3, "min", strip_cells=10 ** 9)
    strips = ex.decimate(field, 3, "min", strip_cells=200)       # one block row per strip
    assert np.array_equal(whole, strips, equal_nan=True)


def test_mode_takes_the_most_common_unit_and_the_smaller_on_a_tie():
    idx = np.array([[0, 0, 2, 2], [1, 0, 1, 2], [-1, -1, 3, 1], [-1, -1, 1, 3]], dtype=np.int8)
    assert ex.decimate(idx, 2, "mode").tolist() == [[0, 2], [-1, 1]]


def test_block_factor_keeps_the_layer_within_the_limit():
    for shape in [(2000, 2000), (2001, 2000), (4000, 4000), (10_000, 10_000), (7, 3_000_000)]:
        k = ex.block_factor(shape)
        cells = math.ceil(shape[0] / k) * math.ceil(shape[1] / k)
        assert cells <= ex.MAX_CELLS
        if k > 1:                                               # the smallest such k
            assert math.ceil(shape[0] / (k - 1)) * math.ceil(shape[1] / (k - 1)) > ex.MAX_CELLS
    assert ex.block_factor((10_000, 10_000)) == 5                # a 10^8-cell run: 2000 x 2000


@pytest.mark.parametrize("key, bound", [("failure_probability", 0.0005), ("wetness", 0.005),
                                        ("slope", 0.05)])
def test_rounded_layers_round_trip_within_half_a_step(key, bound):
    rng = np.random.default_rng(11)
    hi = 90.0 if key == "slope" else 1.0
    v = (rng.random(5000) * hi).astype(np.float32)
    v[::17] = np.nan
    q = ex.QUANTISERS[key]
    back = q.decode(q.encode(v))
    assert np.array_equal(np.isnan(back), np.isnan(v))
    ok = np.isfinite(v)
    assert np.max(np.abs(back[ok] - v[ok].astype(np.float64))) <= bound + 1e-9


def test_fs_is_truncated_to_0_01_and_keeps_its_screening_band():
    rng = np.random.default_rng(5)
    fs = np.concatenate([rng.random(20000) * 3.0,
                         [0.995, 0.999999, 1.0, 1.2999, 1.3, 1.49999, 1.5, 100.0]]).astype(np.float32)
    q = ex.QUANTISERS["factor_of_safety"]
    back = q.decode(q.encode(fs))
    err = fs.astype(np.float64) - back
    assert err.min() >= 0.0 and err.max() < 0.01 + 1e-7          # never above, less than 0.01 below
    assert np.array_equal(fs_band(back), fs_band(fs))             # the same band as the PNG maps


def test_log_layers_round_trip_within_half_a_percent():
    v = np.geomspace(1e-3, 1e7, 4001)
    q = ex.QUANTISERS["critical_recharge"]
    back = q.decode(q.encode(v))
    assert np.max(np.abs(back / v - 1.0)) < 5e-3
    assert q.encode(np.array([0.0, -1.0, np.nan])).tolist() == [0, 0, 0]


def test_pack_png_round_trips_through_pillow_with_no_colour_chunks():
    rng = np.random.default_rng(2)
    codes = rng.integers(0, 1 << 24, size=(37, 29)).astype(np.uint32)
    png = ex.pack_png(codes)
    im = Image.open(io.BytesIO(png))
    assert im.mode == "RGB"
    assert not {"gamma", "icc_profile", "srgb", "chromaticity"} & set(im.info)
    assert np.array_equal(ex.unpack_png(png), codes)


def test_explorer_copy_of_a_product_equals_block_minima_then_truncation(field):
    copy = ex.explorer_copy("factor_of_safety", field, 4)
    assert copy.shape == (14, 18) and copy.k == 4
    want = _blocks_by_loop(field, 4, np.min)
    got = copy.values()
    assert np.array_equal(np.isnan(got), np.isnan(want))
    d = want[np.isfinite(want)] - got[np.isfinite(got)]
    assert d.min() >= -1e-7 and d.max() < 0.01 + 1e-6


def test_explorer_copy_of_counts_and_classes_treats_nodata_as_none():
    counts = np.array([[-1, -1, 3, 0], [-1, -1, 1, 7]], dtype=np.int32)
    got = ex.explorer_copy("runout_count", counts, 2).values()
    assert np.isnan(got[0, 0]) and got[0, 1] == 7.0
    classes = np.array([[0, 3, 2, 2], [0, 1, 3, 3]], dtype=np.uint8)
    assert ex.explorer_copy("critical_recharge_class", classes, 2).values().tolist() == [[1.0, 2.0]]


def test_a_coarser_level_of_least_values_equals_a_direct_reduction(field):
    # least values compose: two levels of 2 x 2 are one level of 4 x 4
    two = ex.coarser(ex.explorer_copy("factor_of_safety", field, 2))
    four = ex.explorer_copy("factor_of_safety", field, 4)
    assert two.k == 4 and two.shape == four.shape
    assert np.array_equal(two.codes(), four.codes())


def test_a_coarser_level_of_means_is_the_block_mean_where_blocks_are_full():
    rng = np.random.default_rng(9)
    v = rng.normal(25.0, 6.0, size=(64, 48)).astype(np.float32)
    got = ex.coarser(ex.explorer_copy("slope", v, 2)).values()
    want = v.astype(np.float64).reshape(16, 4, 12, 4).mean(axis=(1, 3))
    assert np.max(np.abs(got - want)) <= 0.1 + 1e-6        # two roundings to 0.1 degree


def test_the_map_budget_coarsens_descriptive_layers_before_hazard_layers():
    from slopescreen.report.explorer_layers import within_budget

    rng = np.random.default_rng(4)
    copies = {name: ex.explorer_copy(key, rng.random((128, 128)) * hi, 1)
              for name, key, hi in [("slope", "slope", 60.0), ("wet", "wetness", 1.0),
                                    ("fs", "factor_of_safety", 3.0)]}
    size = sum(4 * -(-len(c.png) // 3) for c in copies.values())
    assert within_budget(copies, 0, budget=size) == copies           # fits: nothing changes
    small = within_budget(copies, 0, budget=size // 2)
    assert small["fs"].k == 1 and small["slope"].k > 1 and small["wet"].k > 1
    assert sum(4 * -(-len(c.png) // 3) for c in small.values()) <= size // 2
    tiny = within_budget(copies, 0, budget=1)                        # every group as far as it may
    assert tiny["fs"].k == 4 and tiny["slope"].k == 4
