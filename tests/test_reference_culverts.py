"""Culverts through road fills checked against outside references.

Oracles:

* an analytic dam: a V-shaped valley of two planes crossed by a road
  embankment; the pond that depression filling makes behind it is summed by
  hand from the plane geometry and by scikit-image's reconstruction by
  erosion (the Priority-Flood result);
* after the breach: no pond (fill is the identity), the carved bed worked by
  hand, and the D8 catchment re-derived from the published rule
  (O'Callaghan & Mark 1984) as a networkx receiver graph;
* plane geometry and shapely (``distance``, ``intersects``) for the
  crossings and their cells;
* the defining properties of the breach (input unchanged, never raises a
  cell, cells off the crossings and outside ``valid`` unchanged).
"""

from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from rasterio.crs import CRS
from rasterio.transform import from_origin
from shapely.geometry import LineString, MultiLineString, Point, box
from skimage.morphology import reconstruction

from slopescreen.corridor.culverts import (
    _breach_padded,
    _padded_indices,
    breach,
    crossing_cells,
    culvert_crossings,
)
from slopescreen.errors import InputError
from slopescreen.grid import Grid
from slopescreen.routing import flow_accumulation
from slopescreen.terrain import fill_depressions
from slopescreen._neighbours import pad_nan, unpad

DROW = np.array([0, -1, -1, -1, 0, 1, 1, 1])
DCOL = np.array([1, 1, 0, -1, -1, -1, 0, 1])


def make_grid(shape, cell, *, x0=500000.0, y_top=4100000.0, unit=1.0, cell_y=None):
    """A north-up grid; ``cell`` (and ``cell_y``) in CRS units, ``unit`` metres per CRS unit."""
    cell_y = cell if cell_y is None else cell_y
    return Grid(shape=shape, transform=from_origin(x0, y_top, cell, cell_y), crs=CRS.from_epsg(32633),
                dx_m=cell * unit, dy_m=cell_y * unit, valid=np.ones(shape, dtype=bool),
                path=Path("dem.tif"), linear_unit_m=unit)


def cell_centre(grid, r, c):
    t = grid.transform
    return t.c + (c + 0.5) * t.a, t.f + (r + 0.5) * t.e


def reconstruction_fill(z):
    """Border-seeded reconstruction by erosion (scikit-image), the Priority-Flood result."""
    z = np.asarray(z, dtype=np.float64)
    seed = np.full(z.shape, z.max())
    seed[[0, -1], :] = z[[0, -1], :]
    seed[:, [0, -1]] = z[:, [0, -1]]
    return reconstruction(seed, z, method="erosion", footprint=np.ones((3, 3)))


def d8_graph(z, dx, dy):
    """Receiver graph of D8 (steepest drop over distance to one of 8 neighbours), networkx.

    A one-cell flat inside the grid (no lower neighbour) drains to an equal neighbour that
    has a lower one, the only direction a flat-drainage gradient can give it.
    """
    g = nx.DiGraph()
    rows, cols = z.shape
    stuck = no_lower_neighbour(z)
    for r in range(rows):
        for c in range(cols):
            g.add_node((r, c))
            best, target = 0.0, None
            for k in range(8):
                rr, cc = r + DROW[k], c + DCOL[k]
                if not (0 <= rr < rows and 0 <= cc < cols):
                    continue
                slope = (z[r, c] - z[rr, cc]) / np.hypot(DROW[k] * dy, DCOL[k] * dx)
                if slope > best:
                    best, target = slope, (rr, cc)
                elif target is None and slope == 0 and not stuck[rr, cc] and 0 < r < rows - 1 \
                        and 0 < c < cols - 1:
                    target = (rr, cc)
            if target is not None:
                g.add_edge((r, c), target)
    return g


def no_lower_neighbour(z):
    """Cells with no strictly lower 8-neighbour (plain numpy)."""
    zp = np.pad(z.astype(np.float64), 1, constant_values=np.inf)
    rows, cols = z.shape
    lowest = np.full(z.shape, np.inf)
    for k in range(8):
        lowest = np.minimum(lowest, zp[1 + DROW[k]:1 + DROW[k] + rows, 1 + DCOL[k]:1 + DCOL[k] + cols])
    return lowest >= z


# --------------------------------------------------------------------------
# Analytic dam: a V-shaped valley crossed by a road embankment
# --------------------------------------------------------------------------

ROWS, COLS, CELL = 41, 31, 10.0
FLOOR_COL = 15            # valley floor column
ROAD_ROW = 25             # embankment and centreline row
S_LONG, S_SIDE = 0.05, 0.2  # down-valley gradient (to the south), side-slope gradient
BASE, H = 100.0, 5.0      # floor elevation at the bottom row, embankment height
HALF_WIDTH = 10.0


def valley_floor(r):
    return BASE + S_LONG * CELL * (ROWS - 1 - r)


def dammed_valley():
    r, c = np.mgrid[0:ROWS, 0:COLS]
    z = BASE + S_LONG * CELL * (ROWS - 1 - r) + S_SIDE * CELL * np.abs(c - FLOOR_COL)
    z[ROAD_ROW, :] += H
    return z.astype(np.float32)


def hand_pond_volume():
    """Plane geometry: spill level L = floor at the road + H (the lowest point of the crest).

    Each row upstream of the road holds water of depth D_r - S_SIDE * CELL * |k| at
    k cells from the floor, D_r = L - floor(r), where positive; summed over whole cells.
    """
    level = valley_floor(ROAD_ROW) + H
    volume = 0.0
    for r in range(ROAD_ROW):
        depth = level - valley_floor(r)
        for k in range(-FLOOR_COL, COLS - FLOOR_COL):
            volume += max(0.0, depth - S_SIDE * CELL * abs(k)) * CELL * CELL
    return volume


@pytest.fixture(scope="module")
def dam():
    z = dammed_valley()
    grid = make_grid((ROWS, COLS), CELL)
    x, y = cell_centre(grid, ROAD_ROW, FLOOR_COL)
    road = LineString([(grid.transform.c, y), (grid.transform.c + COLS * CELL, y)])
    point = (x + 2.0, y - 4.0)  # digitised a little off the centreline
    crossings = culvert_crossings([point], road, HALF_WIDTH, grid)
    cells = crossing_cells(crossings.ends, grid)
    breached = breach(z, cells, dx=CELL, dy=CELL)
    return z, grid, crossings, cells, breached


def test_without_culvert_the_fill_makes_the_analytic_pond(dam):
    z = dam[0]
    filled = fill_depressions(z)
    volume = float(np.sum(filled.astype(np.float64) - z)) * CELL * CELL
    # reference: hand plane geometry (the pond below the embankment crest)
    assert volume == pytest.approx(hand_pond_volume(), rel=1e-5)
    assert hand_pond_volume() > 1000.0
    # reference: scikit-image reconstruction by erosion
    np.testing.assert_allclose(filled, reconstruction_fill(z), rtol=0, atol=1e-4)
    # the pond is flat at the spill level: its raised cells have no lower neighbour, and
    # apart from the outlet only cells at that level (the pond's rim) share this (plain numpy)
    raised = filled > z
    stuck = no_lower_neighbour(filled)
    level = np.float32(valley_floor(ROAD_ROW) + H)
    assert raised.sum() > 10 and np.all(stuck[raised]) and np.all(filled[raised] == level)
    rim = stuck & ~raised
    rim[ROWS - 1, FLOOR_COL] = False
    assert np.all(filled[rim] == level)


def test_crossing_runs_down_the_floor_column(dam):
    _, _, crossings, cells, _ = dam
    # reference: hand geometry, snap 4 m (the point is 4 m south of the centreline) and
    # ends 10 m + 2 cells = 30 m north and south of the snapped point
    assert crossings.snap_m.tolist() == pytest.approx([4.0])
    assert np.allclose(crossings.ends[0, :, 1] - crossings.centres[0, 1], [30.0, -30.0])
    rows, cols = cells[0]
    assert rows.tolist() == list(range(ROAD_ROW - 3, ROAD_ROW + 4))
    assert cols.tolist() == [FLOOR_COL] * 7


def test_breached_bed_is_the_hand_line(dam):
    z, _, _, cells, breached = dam
    rows, cols = cells[0]
    # reference: hand rule. Lowest of the 3x3 around the north end is the floor one row
    # south of it; around the south end, the floor one row south of that end. The bed runs
    # linearly between them over 6 cell steps.
    z_a = valley_floor(ROAD_ROW - 2)
    z_b = valley_floor(ROAD_ROW + 4)
    bed = z_a + np.arange(7) / 6.0 * (z_b - z_a)
    np.testing.assert_allclose(breached[rows, cols], np.minimum(z[rows, cols], bed), rtol=0, atol=1e-5)
    assert np.all(breached[rows, cols] < z[rows, cols])          # every crossing cell carved
    off = np.ones(z.shape, dtype=bool)
    off[rows, cols] = False
    assert np.array_equal(breached[off], z[off])


def test_breached_dam_has_no_pond_and_drains_to_the_outlet(dam):
    z, _, _, cells, breached = dam
    filled = fill_depressions(breached)
    # reference: the defining property of a fill; a surface that already drains is unchanged
    assert float(np.sum(filled.astype(np.float64) - breached)) * CELL * CELL <= 1e-6
    np.testing.assert_array_equal(filled, breached)
    # reference: scikit-image reconstruction by erosion agrees
    np.testing.assert_allclose(reconstruction_fill(breached), breached, rtol=0, atol=1e-5)
    # no flat left behind the road: apart from the outlet, the only cell without a strictly
    # lower neighbour is the low end of the crossing, lowered to the level of the lowest
    # cell around it (by the rule), which it drains to over a one-cell flat
    outlet = (ROWS - 1, FLOOR_COL)
    rows, cols = cells[0]
    low_end = (int(rows[-1]), int(cols[-1]))
    stuck = [tuple(int(v) for v in p) for p in np.argwhere(no_lower_neighbour(filled))]
    assert stuck == [low_end, outlet]
    assert filled[low_end] == filled[low_end[0] + 1, low_end[1]]

    res = flow_accumulation(filled, CELL, CELL, method="d8")
    total = ROWS * COLS * CELL * CELL
    # reference: analytic count, every cell of the valley drains to the outlet below the road
    assert res.area_m2[outlet] == pytest.approx(total)
    assert res.outflow_m2 == pytest.approx(total)
    # reference: networkx reachability on the D8 receiver graph (O'Callaghan & Mark 1984)
    g = d8_graph(filled.astype(np.float64), CELL, CELL)
    upstream = nx.ancestors(g, outlet)
    assert len(upstream) + 1 == ROWS * COLS
    area = np.array([[(len(nx.ancestors(g, (r, c))) + 1) * CELL * CELL for c in range(COLS)]
                     for r in range(ROWS)])
    np.testing.assert_allclose(res.area_m2, area)
    # the path from the head of the valley passes through the culvert cells
    path = nx.shortest_path(g, (0, FLOOR_COL), outlet)
    assert set(zip(rows.tolist(), cols.tolist())) <= set(path)


# --------------------------------------------------------------------------
# Geometry of the crossings
# --------------------------------------------------------------------------


def test_diagonal_road_crossing_is_perpendicular():
    grid = make_grid((40, 40), 5.0, x0=0.0, y_top=200.0)
    road = LineString([(0.0, 0.0), (200.0, 200.0)])
    normal = np.array([-1.0, 1.0]) / np.sqrt(2.0)              # left of the direction of digitising
    foot = np.array([80.0, 80.0])
    point = foot - 3.0 * normal                                # 3 m to the right of the road
    hw, extra = 8.0, 2
    c = culvert_crossings([point], road, hw, grid, extra_cells=extra)
    # reference: shapely's distance and the hand value
    assert c.snap_m[0] == pytest.approx(road.distance(Point(point)))
    assert c.snap_m[0] == pytest.approx(3.0)
    # reference: hand geometry; ends at +-(half width + extra cells) along the normal
    half = hw + extra * 5.0
    np.testing.assert_allclose(c.centres[0], foot, atol=1e-9)
    np.testing.assert_allclose(c.ends[0, 0], foot + half * normal, atol=1e-9)
    np.testing.assert_allclose(c.ends[0, 1], foot - half * normal, atol=1e-9)
    # both ends outside the road strip (shapely distance)
    for end in c.ends[0]:
        assert road.distance(Point(end)) > hw
    rows, cols = crossing_cells(c.ends, grid)[0]
    # reference: plane geometry, a 45-degree crossing steps diagonally (one row and one col)
    steps = np.stack([np.diff(rows), np.diff(cols)], axis=1)
    assert np.all(np.abs(steps) <= 1) and np.all(np.abs(steps).max(axis=1) == 1)


def test_crossing_on_a_bent_road_and_a_multiline():
    grid = make_grid((40, 40), 5.0, x0=0.0, y_top=200.0)
    far = LineString([(0.0, 190.0), (200.0, 190.0)])
    bent = LineString([(0.0, 50.0), (100.0, 50.0), (100.0, 150.0)])   # east, then north
    road = MultiLineString([far, bent])
    c = culvert_crossings([(50.0, 47.0), (103.0, 120.0)], road, 6.0, grid, extra_cells=1)
    # reference: hand geometry; the east leg gives a north-south culvert, the north leg an
    # east-west one (left of digitising: north, then west); shapely for the snap distances
    np.testing.assert_allclose(c.ends[0], [[50.0, 61.0], [50.0, 39.0]], atol=1e-9)
    np.testing.assert_allclose(c.ends[1], [[89.0, 120.0], [111.0, 120.0]], atol=1e-9)
    np.testing.assert_allclose(c.snap_m, [road.distance(Point(50, 47)), road.distance(Point(103, 120))])


def test_foot_crs_converts_the_half_width():
    foot = 0.3048
    grid = make_grid((30, 30), 10.0, x0=0.0, y_top=300.0, unit=foot)   # 10 ft cells
    road = LineString([(0.0, 150.0), (300.0, 150.0)])
    c = culvert_crossings([(145.0, 148.0)], road, 10 * foot, grid)    # 10 ft half width
    # reference: hand conversion, 10 ft + 2 cells of 10 ft = 30 ft each way; snap 2 ft in metres
    np.testing.assert_allclose(c.ends[0], [[145.0, 180.0], [145.0, 120.0]], atol=1e-9)
    assert c.snap_m[0] == pytest.approx(2 * foot)


def test_point_too_far_from_the_road_is_refused_on_one_line():
    grid = make_grid((20, 20), 5.0, x0=0.0, y_top=100.0)
    road = LineString([(0.0, 50.0), (100.0, 50.0)])
    limit = 10.0 + np.hypot(5.0, 5.0)                      # half width + one cell diagonal
    name = "culverts.gpkg: [corridor] culverts"
    ok = culvert_crossings([(20.0, 50.0 + limit - 0.01)], road, 10.0, grid, name=name)
    assert ok.snap_m[0] == pytest.approx(limit - 0.01)
    with pytest.raises(InputError) as info:
        culvert_crossings([(20.0, 52.0), (30.0, 50.0 - limit - 1.0)], road, 10.0, grid, name=name)
    message = str(info.value)
    assert "\n" not in message
    assert message.startswith(name + ": ")
    assert "culvert 1 " in message
    # reference: shapely's distance, as printed
    assert f"{road.distance(Point(30.0, 50.0 - limit - 1.0)):.1f} m" in message


def test_bad_inputs_are_refused():
    grid = make_grid((20, 20), 5.0, x0=0.0, y_top=100.0)
    road = LineString([(0.0, 50.0), (100.0, 50.0)])
    with pytest.raises(InputError, match="culvert 0 "):
        culvert_crossings([(np.nan, 50.0)], road, 10.0, grid)
    with pytest.raises(InputError, match="half_width_m"):
        culvert_crossings([(10.0, 50.0)], road, 0.0, grid)
    with pytest.raises(InputError, match="LineString"):
        culvert_crossings([(10.0, 50.0)], Point(0, 0), 10.0, grid)
    with pytest.raises(InputError, match="crossings\\[0\\]"):
        breach(np.zeros((5, 5)), [(np.array([0, 9]), np.array([0, 1]))])
    assert culvert_crossings([], road, 10.0, grid).ends.shape == (0, 2, 2)
    assert crossing_cells(np.empty((0, 2, 2)), grid) == []


def test_shapely_points_are_accepted():
    grid = make_grid((20, 20), 5.0, x0=0.0, y_top=100.0)
    road = LineString([(0.0, 50.0), (100.0, 50.0)])
    a = culvert_crossings([Point(20.0, 52.0), Point(40.0, 47.0)], road, 10.0, grid)
    b = culvert_crossings([(20.0, 52.0), (40.0, 47.0)], road, 10.0, grid)
    np.testing.assert_array_equal(a.ends, b.ends)


# --------------------------------------------------------------------------
# Cells along crossings
# --------------------------------------------------------------------------


def test_crossing_cells_are_8_connected_without_repeats():
    rng = np.random.default_rng(20240611)
    grid = make_grid((30, 25), 4.0, x0=1000.0, y_top=2000.0, cell_y=6.0)   # rectangular cells
    t = grid.transform
    lo = np.array([t.c - 20.0, t.f - 30 * 6.0 - 20.0])
    hi = np.array([t.c + 25 * 4.0 + 20.0, t.f + 20.0])
    ends = rng.uniform(lo, hi, size=(300, 2, 2))
    ends[:5, 1] = ends[:5, 0] + rng.uniform(-0.5, 0.5, size=(5, 2))           # very short ones
    seen = 0
    for e, (rows, cols) in zip(ends, crossing_cells(ends, grid)):
        if rows.size == 0:
            continue
        seen += 1
        # plain numpy: each step moves to one of the 8 neighbours, no cell twice, inside the grid
        steps = np.stack([np.diff(rows), np.diff(cols)], axis=1)
        assert np.all(np.abs(steps).max(axis=1, initial=0) == 1) if steps.size else True
        assert len(set(zip(rows.tolist(), cols.tolist()))) == rows.size
        assert rows.min() >= 0 and rows.max() < 30 and cols.min() >= 0 and cols.max() < 25
        # reference: shapely, every cell returned is touched by the segment
        seg = LineString(e)
        for r, c in zip(rows, cols):
            x0, y1 = t.c + c * t.a, t.f + r * t.e
            assert box(x0, y1 + t.e, x0 + t.a, y1).intersects(seg)
        # the run starts in the cell holding end A when end A is on the grid
        col_a, row_a = (e[0, 0] - t.c) / t.a, (e[0, 1] - t.f) / t.e
        if 0 <= row_a < 30 and 0 <= col_a < 25:
            assert (rows[0], cols[0]) == (int(row_a), int(col_a))
    assert seen > 100


# --------------------------------------------------------------------------
# Defining properties of the breach
# --------------------------------------------------------------------------


def random_case(seed, dtype):
    rng = np.random.default_rng(seed)
    grid = make_grid((40, 35), 5.0, x0=0.0, y_top=200.0)
    z = (rng.normal(size=grid.shape) * 3.0 + np.arange(40)[:, None] * -0.5 + 50.0).astype(dtype)
    z[rng.random(grid.shape) < 0.05] = np.nan
    valid = rng.random(grid.shape) > 0.1
    ends = rng.uniform([0.0, 0.0], [175.0, 200.0], size=(25, 2, 2))
    return z, valid, crossing_cells(ends, grid)


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_breach_never_raises_and_leaves_the_rest_alone(dtype):
    z, valid, cells = random_case(7, dtype)
    before = z.copy()
    out = breach(z, cells, valid, dx=5.0, dy=5.0)
    # reference: the defining properties (input unchanged; dtype kept; lowered only)
    assert np.array_equal(z, before, equal_nan=True)
    assert out.dtype == dtype and out is not z
    on = np.zeros(z.shape, dtype=bool)
    for rows, cols in cells:
        on[rows, cols] = True
    use = valid & np.isfinite(z)
    assert np.all(out[use] <= z[use])
    assert np.array_equal(out[~use | ~on], z[~use | ~on], equal_nan=True)
    assert np.any(out[use] < z[use])
    # the padded partner gives the same surface (on the cells in use)
    zp = pad_nan(z, valid)
    _breach_padded(zp, _padded_indices(cells, z.shape), dx=5.0, dy=5.0)
    assert np.array_equal(unpad(zp)[use], out[use])


def test_breach_of_integers_returns_float64():
    z = np.full((5, 5), 9, dtype=np.int32)
    z[1, 2], z[3, 2] = 4, 2
    out = breach(z, [(np.array([1, 2, 3]), np.array([2, 2, 2]))])
    assert out.dtype == np.float64
    # reference: hand rule, bed 4 -> 2 over two steps
    assert out[1:4, 2].tolist() == [4.0, 3.0, 2.0]
