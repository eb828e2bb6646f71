"""API behaviour of the clusters stage: validation, untouched inputs, table and rasters."""

import numpy as np
import pytest

from slopescreen.clusters import TABLE_COLUMNS, cluster_forces, failure_clusters, fs_bound_map
from slopescreen.errors import InputError

SOIL = dict(cohesion_kpa=0.5, root_cohesion_kpa=0.5, lateral_root_cohesion_kpa=8.0,
            friction_deg=34.0, unit_weight_kn_m3=18.5)


def _hill(rows=14, cols=16):
    slope = np.full((rows, cols), 28.0, dtype=np.float32)
    slope[3:8, 4:9] = 46.0
    slope[0, 0] = np.nan
    aspect = np.full((rows, cols), 180.0, dtype=np.float32)
    return slope, aspect


def test_stage_outputs_and_inputs_untouched():
    slope, aspect = _hill()
    s0, a0 = slope.copy(), aspect.copy()
    res = failure_clusters(slope, 1.0, 0.3, dx=5.0, dy=5.0, aspect_deg=aspect,
                           bound_window_cells=8, bound_stride_cells=4, min_area_m2=50.0,
                           max_area_m2=400.0, **SOIL)
    np.testing.assert_array_equal(slope, s0)
    np.testing.assert_array_equal(aspect, a0)
    assert res.labels.dtype == np.int32 and res.cluster_fs_bound.dtype == np.float32
    assert tuple(res.table) == TABLE_COLUMNS
    assert res.labels[0, 0] == 0 and np.isnan(res.cluster_fs_bound[0, 0])
    n = int(res.labels.max())
    assert n == 1 and len(res.table["id"]) == 1
    # area and volume from the cell count (5 m cells, 1 m depth)
    cells = int((res.labels == 1).sum())
    assert res.table["area_m2"][0] == pytest.approx(25.0 * cells)
    assert res.table["volume_m3"][0] == pytest.approx(25.0 * cells)
    assert res.table["in_area_band"][0] == (50.0 <= 25.0 * cells <= 400.0)
    # the cluster lies in the steep block, whose column width is 5 cells
    assert res.table["width_m"][0] <= 5 * 5.0 + 1e-9
    assert res.table["proven"][0]


def test_bound_at_least_one_means_no_failure():
    slope = np.full((12, 12), 20.0)
    res = failure_clusters(slope, 1.0, 0.0, dx=5.0, dy=5.0, aspect_deg=np.full((12, 12), 90.0),
                           bound_window_cells=6, bound_stride_cells=3, **SOIL)
    assert res.labels.max() == 0 and len(res.table["fs"]) == 0
    assert np.nanmin(res.cluster_fs_bound) >= 1.0


@pytest.mark.parametrize("kw, match", [
    (dict(friction_deg=60.5), "friction_deg"),
    (dict(lateral_root_cohesion_kpa=-1.0), "lateral_root_cohesion_kpa"),
    (dict(passive_fraction=1.5), "passive_fraction"),
])
def test_bad_inputs_raise(kw, match):
    slope, aspect = _hill(5, 5)
    args = dict(SOIL)
    args.update(kw)
    with pytest.raises(InputError, match=match):
        cluster_forces(slope, aspect, 1.0, 0.5, dx=5.0, dy=5.0, **args)


def test_bad_window_raises():
    slope, aspect = _hill(6, 6)
    f = cluster_forces(slope, aspect, 1.0, 0.5, dx=5.0, dy=5.0, **SOIL)
    with pytest.raises(InputError, match="stride"):
        fs_bound_map(f, window_cells=4, stride_cells=4)


@pytest.mark.parametrize("rows, cols, wet, slope", [(20, 20, 0.0, 34.99), (40, 30, 0.5, 38.0),
                                                    (12, 50, 0.5, 34.99), (12, 50, 1.0, 38.0)])
def test_regression_grid_smaller_than_a_tile_is_not_refused_for_overflow(rows, cols, wet, slope):
    # Once refused with "scale ... too large for tiles (int32 overflow)": on a grid smaller than
    # a tile the scale is made from the very sum it is checked against, and 2**30 / scale gave
    # that sum back 1 ulp low. Defining property of the result: every cluster has FS < 1.
    from slopescreen.clusters import failure_clusters

    s = np.full((rows, cols), slope, np.float32)
    result = failure_clusters(s, 1.2, wet, dx=5.0, dy=5.0, aspect_deg=np.full_like(s, 180.0),
                              cohesion_kpa=2.0, root_cohesion_kpa=2.0, lateral_root_cohesion_kpa=0.0,
                              friction_deg=34.0, unit_weight_kn_m3=18.0, bound=False)
    assert (np.asarray(result.table["fs"]) < 1.0).all()
