"""Depression filling and drainage over flats across tiles (perimeter method, Barnes et al. 2016).

Oracles:

* the whole-grid ``fill_depressions`` and ``drainage_over_flats`` (themselves checked
  against scikit-image in tests/test_reference_fill.py and by hand in tests/test_flats.py):
  the tiled results must equal them bit for bit, cell for cell;
* scikit-image's morphological reconstruction by erosion seeded from the data edge
  (``skimage.morphology.reconstruction(seed, mask, method="erosion")``), used directly;
* hand-made grids whose fill is known (a depression across four tiles spilling in a
  third, an outlet that is a nodata hole).
"""

import pickle

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from skimage.morphology import reconstruction

from slopescreen.errors import InputError, SlopescreenError
from slopescreen.routing import drainage_over_flats
from slopescreen.terrain import fill_depressions
from slopescreen.tiles import (
    fill_tile,
    fill_tiled,
    finish_tile,
    flat_directions_tiled,
    spill_levels,
    tile_windows,
)

TILE_SIZES = (3, 4, 7, 16)


def skimage_fill(z):
    """Reconstruction by erosion seeded from the grid border and the nodata cells."""
    z = np.asarray(z, dtype=np.float64)
    nodata = np.isnan(z)
    low = np.nanmin(z) - 1.0
    mask = np.where(nodata, low, z)
    seed = np.full(z.shape, np.nanmax(z))
    for edge in (np.s_[0, :], np.s_[-1, :], np.s_[:, 0], np.s_[:, -1]):
        seed[edge] = mask[edge]
    seed[nodata] = low
    out = reconstruction(seed, mask, method="erosion", footprint=np.ones((3, 3), dtype=bool))
    out[nodata] = np.nan
    return out


def assert_same(a, b):
    assert a.dtype == b.dtype
    assert np.array_equal(a, b, equal_nan=True)
    assert np.array_equal(np.isnan(a), np.isnan(b))


@st.composite
def dems(draw):
    """Random DEMs: noise with pits, plateaus (rounded levels) and NaN holes."""
    rows = draw(st.integers(3, 26))
    cols = draw(st.integers(3, 26))
    seed = draw(st.integers(0, 2**32 - 1))
    dtype = draw(st.sampled_from([np.float32, np.float64]))
    levels = draw(st.sampled_from([0, 3, 6]))       # 0: continuous values
    holes = draw(st.sampled_from([0.0, 0.05, 0.2]))
    rng = np.random.default_rng(seed)
    z = rng.random((rows, cols)) * 10.0
    if levels:
        z = np.floor(z * levels / 10.0)              # wide plateaus and flats
    z[rng.random((rows, cols)) < holes] = np.nan
    if np.isnan(z).all():
        z[rows // 2, cols // 2] = 1.0
    return z.astype(dtype)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(dems())
def test_tiled_fill_equals_the_whole_grid_fill(z):
    # outside reference: whole-grid Priority-Flood (skimage-checked) and skimage directly
    whole = fill_depressions(z)
    for t in (*TILE_SIZES, max(z.shape)):
        assert_same(fill_tiled(z, t), whole)
    assert np.allclose(whole, skimage_fill(z).astype(z.dtype), equal_nan=True, rtol=0, atol=0)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(dems())
def test_tiled_flat_directions_equal_the_whole_grid(z):
    # outside reference: the whole-grid flat directions of the same filled grid
    filled = fill_depressions(z)
    whole = drainage_over_flats(filled)
    for t in (*TILE_SIZES, max(z.shape)):
        assert np.array_equal(flat_directions_tiled(filled, t), whole)


def test_jacksboro_dem_in_tiles_of_many_sizes():
    # real terrain (USGS DEM shipped with matplotlib) against the whole-grid fill and skimage
    from matplotlib import cbook

    with cbook.get_sample_data("jacksboro_fault_dem.npz") as f:
        z = np.asarray(f["elevation"], dtype=np.float32)[:120, :150].copy()
    z[40:44, 60:66] = np.nan
    whole = fill_depressions(z)
    assert np.array_equal(whole, skimage_fill(z).astype(np.float32), equal_nan=True)
    flats = drainage_over_flats(whole)
    for t in (3, 16, 37, 150):
        tiled = fill_tiled(z, t)
        assert_same(tiled, whole)
        if t > 3:
            assert np.array_equal(flat_directions_tiled(tiled, t), flats)


def test_a_depression_over_four_tiles_spills_in_a_third():
    # tiles of 4: the bowl covers the corner where tiles (0,0), (0,1), (1,0), (1,1) meet;
    # its only pass (5) is in tile (0,2), by hand the fill is the pass elevation
    z = np.full((12, 12), 9.0)
    z[1:7, 1:7] = 2.0
    z[3:5, 3:5] = 1.0            # the bottom, across the four-tile corner at (4, 4)
    z[2, 7:11] = 5.0             # a channel east into tile (0, 2) ...
    z[2, 11] = 0.0               # ... to the grid edge
    filled = fill_tiled(z, 4)
    assert (filled[1:7, 1:7] == 5.0).all()
    assert (filled[2, 7:11] == 5.0).all() and filled[2, 11] == 0.0
    assert_same(filled, fill_depressions(z))
    # the spill level reaches the bowl's watersheds in all four tiles
    rows_b, cols_b = tile_windows(z.shape, 4)
    tiles = [fill_tile(z[r0:r1, c0:c1], (i == 0, i == 2, j == 0, j == 2))
             for i, (r0, r1) in enumerate(rows_b) for j, (c0, c1) in enumerate(cols_b)]
    spill = spill_levels([t.summary for t in tiles], 3, 3)
    for t in (0, 1, 3, 4):
        cell = (3, 3) if t == 0 else (3, 0) if t == 1 else (0, 3) if t == 3 else (0, 0)
        assert spill[t][tiles[t].labels[cell]] == 5.0
        assert tiles[t].filled[cell] < 5.0            # locally it drained to the tile edge


def test_a_depression_whose_outlet_is_a_nodata_hole():
    # the bowl's lowest way out is a NaN hole in another tile, not the grid edge
    z = np.full((10, 10), 8.0)
    z[2:8, 2:8] = 3.0
    z[4, 4] = 1.0
    z[6, 7:9] = 3.0
    z[6, 9] = 8.0
    z[7:9, 8] = 3.0
    z[8, 8] = np.nan             # the hole, in the last tile of 3
    for t in (3, 4, 5):
        filled = fill_tiled(z, t)
        assert filled[4, 4] == 3.0
        assert_same(filled, fill_depressions(z))
        assert np.array_equal(filled, skimage_fill(z), equal_nan=True)


def test_a_flat_across_a_tile_corner():
    # a 5 x 5 flat at 1 centred on the corner where four tiles of 5 meet, one outlet
    z = np.full((10, 10), 4.0)
    z[3:8, 3:8] = 1.0
    z[5, 8:] = 0.0
    filled = fill_tiled(z, 5)
    whole = drainage_over_flats(fill_depressions(z))
    assert (whole[3:8, 3:8] != 255).sum() >= 20       # the flat drains
    assert np.array_equal(flat_directions_tiled(filled, 5), whole)


def test_one_tile_and_tiles_of_three():
    z = np.random.default_rng(5).random((13, 11)).astype(np.float32) * 5
    assert_same(fill_tiled(z, 13), fill_depressions(z))
    assert_same(fill_tiled(z, 3), fill_depressions(z))
    assert_same(fill_tiled(z, 100), fill_depressions(z))


def test_the_per_tile_results_pickle():
    z = np.random.default_rng(6).random((8, 8))
    t = fill_tile(z[:4, :4], (True, False, True, False))
    back = pickle.loads(pickle.dumps(t))
    assert np.array_equal(back.labels, t.labels)
    assert back.summary.n_labels == t.summary.n_labels
    spill = spill_levels([back.summary], 1, 1)
    assert np.array_equal(finish_tile(back, spill[0]), finish_tile(t, spill[0]))


def test_bad_inputs_are_refused_with_a_message():
    z = np.ones((6, 6))
    with pytest.raises(InputError, match="tile_size"):
        fill_tiled(z, 2)
    with pytest.raises(InputError, match="tile_size"):
        flat_directions_tiled(z, 2.5)
    with pytest.raises(InputError, match="infinite"):
        fill_tile(np.array([[1.0, np.inf]]))
    with pytest.raises(InputError, match="float32 or float64"):
        fill_tile(np.ones((3, 3), dtype=np.int16))
    t = fill_tile(z[:3, :3])
    with pytest.raises(InputError, match="row-major"):
        spill_levels([t.summary], 2, 1)
    with pytest.raises(InputError, match="spill"):
        finish_tile(t, np.zeros(1))


def test_a_raised_stop_flag_stops_the_tile_flood(monkeypatch):
    # the tile kernels poll the stop flag (slopescreen._stoppable) like the whole-grid fill
    from slopescreen import _stoppable

    monkeypatch.setattr(_stoppable, "new_flag", lambda: np.ones(1, dtype=np.uint8))
    z = np.random.default_rng(3).random((300, 300)).astype(np.float32)
    with pytest.raises(SlopescreenError, match="stopped"):
        fill_tile(z)
