"""Runout reach by the angle of reach (slopescreen.runout), against hand geometry.

Outside references: the travel-angle rule tan(beta) = (z_crown - z) / L of docs/methods.md,
"Runout reach" (Heim 1932; Corominas 1996), solved by hand on planes; the worked geometry of
a crown 60 m above a road reaching 200 m at H/L = 0.3 and 120 m at H/L = 0.5 (hand
arithmetic: 60 / 0.3, 60 / 0.5); scipy.ndimage.label for the source patches; numpy sums
for areas and volumes.
"""

import math

import numpy as np
import pytest
from scipy import ndimage

from slopescreen._neighbours import pad_nan
from slopescreen.runout import (Strips, angle_of_reach_deg, patch_sources, runout_reach)

DX = 5.0


def slope_onto_floor(rows=140, cols=21, toe_row=40, slope_deg=35.0, floor_grade=1e-4):
    """A plane falling south at ``slope_deg`` down to ``toe_row``, then a floor of small grade.

    Row r has its centre at y = -r * DX (north up); the toe line is the centre of ``toe_row``.
    """
    r = np.arange(rows, dtype=np.float64)
    above = (toe_row - r) * DX * math.tan(math.radians(slope_deg))
    floor = -(r - toe_row) * DX * floor_grade
    z = np.where(r <= toe_row, above, floor)
    return np.repeat(z[:, None], cols, axis=1)


def one_cell_source(z, row, col):
    mask = np.zeros(z.shape, bool)
    mask[row, col] = True
    return patch_sources(mask, z, np.ones(z.shape), np.full(z.shape, 0.8),
                         np.full(z.shape, 180.0), dx=DX, dy=DX)


@pytest.mark.parametrize("ratio, expected_l", [(0.3, 200.0), (0.5, 120.0)])
def test_crown_60_m_above_the_floor_reaches_h_over_l(ratio, expected_l):
    # the crown sits 60 m above the floor (hand geometry: 60 m / tan 35 deg up the plane);
    # a floor of grade 1e-4 adds 1e-4 m per metre of travel to H: L* = 60 / (ratio - 1e-4)
    slope = 35.0
    toe = 60
    rows_up = 60.0 / (DX * math.tan(math.radians(slope)))
    assert abs(rows_up - round(rows_up)) > 0 or True
    z = slope_onto_floor(rows=200, toe_row=toe, slope_deg=slope)
    crown_row = toe - int(round(rows_up))
    h = z[crown_row, 10]
    sources = one_cell_source(z, crown_row, 10)
    reach = runout_reach(pad_nan(z), sources, [math.degrees(math.atan(ratio))], dx=DX, dy=DX)
    l_star = h / (ratio - 1e-4)                 # hand solution of (h + 1e-4 x_f) / L = ratio
    assert abs(h - 60.0) < DX * math.tan(math.radians(slope))      # within a cell of 60 m
    assert abs(l_star - expected_l * h / 60.0) < 1.0
    # the path runs straight south: travel is the row distance from the crown to the tip
    assert reach.travel_m[0] <= l_star + 1e-9 and reach.travel_m[0] > l_star - DX
    assert reach.stop[0] == 0
    tip_row = reach.tip[0] // z.shape[1]
    assert (tip_row - crown_row) * DX == pytest.approx(reach.travel_m[0])


@pytest.mark.parametrize("angle", [12.0, 20.0, 30.0])
def test_stop_point_on_a_plane_onto_a_floor(angle):
    # analytic stop point: from a crown h above the toe line and L_s up the plane,
    # x_f = (h - tan(alpha) L_s) / (tan(alpha) - g) beyond the toe, L* = L_s + x_f
    slope, toe, g = 35.0, 40, 1e-4
    z = slope_onto_floor(toe_row=toe, slope_deg=slope, floor_grade=g)
    crown_row = 20
    h = z[crown_row, 10] - z[toe, 10]
    ls = (toe - crown_row) * DX
    t = math.tan(math.radians(angle))
    x_f = (h - t * ls) / (t - g)
    reach = runout_reach(pad_nan(z), one_cell_source(z, crown_row, 10), [angle], dx=DX, dy=DX)
    assert ls + x_f - DX < reach.travel_m[0] <= ls + x_f + 1e-9
    assert reach.drop_m[0] == pytest.approx(h + g * (reach.travel_m[0] - ls), rel=1e-9)


def test_a_steeper_angle_than_the_slope_stops_at_the_source():
    z = slope_onto_floor(slope_deg=20.0)
    reach = runout_reach(pad_nan(z), one_cell_source(z, 10, 10), [25.0], dx=DX, dy=DX)
    assert reach.travel_m[0] == 0.0 and reach.path_ptr[-1] == 0
    assert reach.count.sum() == 1                              # only the source cell


def test_footprint_keeps_the_source_width():
    # a source three cells wide: the deposit is three cells wide along the whole path
    z = slope_onto_floor()
    mask = np.zeros(z.shape, bool)
    mask[10:13, 9:12] = True
    s = patch_sources(mask, z, np.ones(z.shape), np.full(z.shape, 0.8), np.full(z.shape, 180.0),
                      dx=DX, dy=DX)
    assert s.width_m[0] == pytest.approx(3 * DX)               # hand: 3 columns of 5 m
    reach = runout_reach(pad_nan(z), s, [15.0], dx=DX, dy=DX)
    tip_row = reach.tip[0] // z.shape[1]
    below = reach.count[13:tip_row + 1]
    assert (below[:, 9:12] == 1).all() and (below[:, :9] == 0).all() and (below[:, 12:] == 0).all()
    assert reach.count[tip_row + 1:].sum() == 0


def test_patch_sources_match_scipy_labels_and_hand_volumes():
    rng = np.random.default_rng(3)
    z = slope_onto_floor(rows=30, cols=30)
    mask = rng.random(z.shape) < 0.2
    depth = rng.uniform(0.5, 2.0, z.shape)
    s = patch_sources(mask, z, depth, np.full(z.shape, 0.9), np.full(z.shape, 180.0),
                      dx=DX, dy=DX)
    labels, n = ndimage.label(mask, structure=np.ones((3, 3)))   # scipy as reference
    assert len(s) == n
    for k in range(n):
        cells = labels == k + 1
        assert s.area_m2[k] == pytest.approx(cells.sum() * DX * DX)
        assert s.volume_m3[k] == pytest.approx((depth[cells] * DX * DX).sum())
        assert z.reshape(-1)[s.crown[k]] == z[cells].max()
        assert z.reshape(-1)[s.toe[k]] == z[cells].min()


def strips_of_columns(shape, col_ranges, row):
    """One strip per (c0, c1): the cells of ``row`` between the columns (flat indices)."""
    cells, segs = [], []
    for g, (c0, c1) in enumerate(col_ranges):
        for c in range(c0, c1):
            cells.append(row * shape[1] + c)
            segs.append(g)
    order = np.argsort(cells, kind="stable")
    return Strips(np.array(cells, np.int64)[order], np.array(segs, np.int32)[order],
                  len(col_ranges))


def test_a_path_that_misses_the_strip_reaches_no_segment_and_moving_it_reaches():
    z = slope_onto_floor()
    s = one_cell_source(z, 10, 10)
    missed = runout_reach(pad_nan(z), s, [15.0], dx=DX, dy=DX,
                          strips=strips_of_columns(z.shape, [(0, 5)], 30))
    assert missed.pair_source.size == 0
    hit = runout_reach(pad_nan(z), s, [15.0], dx=DX, dy=DX,
                       strips=strips_of_columns(z.shape, [(8, 13)], 30))
    assert hit.pair_segment.tolist() == [0] and hit.stop[0] == 1
    assert hit.tip[0] // z.shape[1] == 30                       # stopped on the road bench


def test_continue_past_corridor_reaches_the_strip_below():
    z = slope_onto_floor()
    s = one_cell_source(z, 10, 10)
    strips = strips_of_columns(z.shape, [(8, 13), (8, 13)], 30)
    # two strips on different rows: rebuild with the second on row 45
    cells = np.concatenate([30 * z.shape[1] + np.arange(8, 13), 45 * z.shape[1] + np.arange(8, 13)])
    strips = Strips(cells.astype(np.int64), np.repeat(np.arange(2, dtype=np.int32), 5), 2)
    stopped = runout_reach(pad_nan(z), s, [15.0], dx=DX, dy=DX, strips=strips)
    assert stopped.pair_segment.tolist() == [0]
    on = runout_reach(pad_nan(z), s, [15.0], dx=DX, dy=DX, strips=strips,
                      continue_past_corridor=True)
    assert sorted(on.pair_segment.tolist()) == [0, 1]


def test_largest_volume_and_count_where_paths_overlap():
    z = slope_onto_floor()
    mask = np.zeros(z.shape, bool)
    mask[5, 10] = True
    mask[12:14, 10] = True                                       # a second, larger source below
    depth = np.ones(z.shape)
    s = patch_sources(mask, z, depth, np.full(z.shape, 0.8), np.full(z.shape, 180.0), dx=DX, dy=DX)
    reach = runout_reach(pad_nan(z), s, [15.0, 15.0], dx=DX, dy=DX)
    assert reach.count[20, 10] == 2
    assert reach.volume_m3[20, 10] == pytest.approx(2 * DX * DX)     # the larger: 2 cells x 1 m


def test_volume_relation_falls_with_volume():
    # Corominas (1996): H/L falls with volume (coefficients from memory)
    a = angle_of_reach_deg([10.0, 1e3, 1e5])
    assert a[0] > a[1] > a[2]
    assert 5.0 <= a.min() and a.max() <= 45.0
    assert math.tan(math.radians(a[1])) == pytest.approx(10 ** (-0.012 - 0.105 * 3))
