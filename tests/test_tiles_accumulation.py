"""Flow accumulation across tiles equals the whole-grid accumulation.

Oracles outside the tiled code:

* the whole-grid accumulation ``_route_padded`` (itself checked against networkx and scipy
  sparse solves in test_reference_routing_graph.py), on the same receivers;
* networkx directly: a DiGraph of the receiver links of a small grid, D8 areas as the cell
  area times (1 + number of ancestors), D-infinity areas summed over networkx's topological
  order;
* the defining property of the tile map: the part of a unit of inflow that leaves the tile
  is at most 1 (D8: one entry of weight 1).

Random terrain comes from hypothesis (seeded relief, optionally rounded to make flats,
nodata holes), filled with ``slopescreen.terrain.fill_depressions``.
"""

import networkx as nx
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.ndimage import gaussian_filter

from slopescreen import _stoppable
from slopescreen._neighbours import DCOL, DROW, pad_nan, unpad
from slopescreen.errors import InputError
from slopescreen.routing.accumulation import _route_padded
from slopescreen.routing.directions import _receiver_codes
from slopescreen.routing.links import _receivers
from slopescreen.terrain import fill_depressions
from slopescreen.tiles import (
    accumulate_tiled,
    finish_tile_accumulation,
    perimeter_cells,
    solve_perimeter,
    tile_flow_map,
)
from slopescreen.tiles import accumulation as tiled
from slopescreen.tiles.accumulation import tile_windows

METHOD_CODE = {"dinf": 0, "d8": 2}


def routed(z, dx, dy, method):
    """Whole-grid area (unpadded) and the padded codes and fractions it was computed from."""
    zp = pad_nan(z)
    acc, _, _ = _route_padded(zp, dx, dy, METHOD_CODE[method], 1.1)
    codes, frac, *_ = _receiver_codes(zp, dx, dy, METHOD_CODE[method], 1.1)
    return np.ascontiguousarray(unpad(acc)), codes, (frac if method == "dinf" else None)


def tiled_area(z, codes, frac, tile_size, method, dx, dy):
    return accumulate_tiled(codes, frac, z.shape, tile_size, method, dx, dy,
                            valid=np.isfinite(z)).area_m2


def assert_equal_to_whole_grid(z, dx, dy, method, sizes):
    expected, codes, frac = routed(z, dx, dy, method)
    for size in sizes:
        got = tiled_area(z, codes, frac, size, method, dx, dy)
        if method == "d8" and float(dx * dy).is_integer():
            # integer cell area: every partial sum is exact in float64, in any order
            np.testing.assert_array_equal(got, expected, err_msg=f"tile {size}")
        else:
            np.testing.assert_allclose(got, expected, rtol=1e-12, equal_nan=True,
                                       err_msg=f"tile {size}")
    return expected, codes, frac


def random_terrain(seed, rows, cols, step, holes):
    rng = np.random.default_rng(seed)
    z = gaussian_filter(rng.normal(size=(rows, cols)), 1.5) * 20.0
    z += 0.2 * np.arange(rows)[:, None] - 0.1 * np.arange(cols)[None, :]
    if step > 0:
        z = np.round(z / step) * step           # plateaus: flats to drain after filling
    if holes:
        z[rng.integers(0, rows, 4), rng.integers(0, cols, 4)] = np.nan
        r, c = rng.integers(0, rows - 2), rng.integers(0, cols - 2)
        z[r:r + 3, c:c + 2] = np.nan
    if np.isfinite(z).sum() < 3:
        z[0, :3] = [3.0, 2.0, 1.0]
    return fill_depressions(z)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 2**32 - 1), rows=st.integers(3, 22), cols=st.integers(3, 22),
       step=st.sampled_from([0.0, 0.5, 3.0]), holes=st.booleans(),
       method=st.sampled_from(["dinf", "d8"]),
       cell=st.sampled_from([(2.0, 3.0), (2.5, 1.3)]),
       odd=st.tuples(st.integers(1, 9), st.integers(1, 9)))
def test_random_terrain_tiled_equals_whole_grid(seed, rows, cols, step, holes, method, cell,
                                               odd):
    # Oracle: the whole-grid accumulation on the same receivers.
    z = random_terrain(seed, rows, cols, step, holes)
    dx, dy = cell
    assert_equal_to_whole_grid(z, dx, dy, method, [3, 4, 7, 16, max(rows, cols), odd])


@pytest.mark.parametrize("method", ["d8", "dinf"])
@pytest.mark.parametrize("size", [3, 4, 7, 16, (5, 2)])
def test_tiled_area_equals_networkx_sums(method, size):
    # Oracle: networkx DiGraph of the receiver links; D8 area = dx dy (1 + #ancestors),
    # D-infinity area summed over networkx's topological order.
    z = random_terrain(7, 19, 23, 0.5, True)
    dx, dy = 2.0, 1.5
    _, codes, frac = routed(z, dx, dy, method)
    got = tiled_area(z, codes, frac, size, method, dx, dy).ravel()
    donor, receiver, share, _ = _receivers(z, dx, dy, method)
    g = nx.DiGraph()
    g.add_nodes_from(np.flatnonzero(np.isfinite(z)).tolist())
    g.add_weighted_edges_from(zip(donor.tolist(), receiver.tolist(), share.tolist()))
    if method == "d8":
        expected = {n: dx * dy * (1 + len(nx.ancestors(g, n))) for n in g.nodes}
    else:
        expected = {n: dx * dy for n in g.nodes}
        for n in nx.topological_sort(g):
            for m in g.successors(n):
                expected[m] += expected[n] * g[n][m]["weight"]
    want = np.full(z.size, np.nan)
    want[list(expected)] = list(expected.values())
    np.testing.assert_allclose(got, want, rtol=1e-12, equal_nan=True)


def tile_of(cell, size):
    return (cell[0] // size, cell[1] // size)


def d8_path(codes2, start):
    path = [start]
    while codes2[path[-1]] != 255:
        k = int(codes2[path[-1]]) - 8
        path.append((path[-1][0] + DROW[k], path[-1][1] + DCOL[k]))
    return path


@pytest.mark.parametrize("method", ["d8", "dinf"])
def test_a_river_that_leaves_a_tile_and_comes_back(method):
    # A channel carved through high ground: east across the tile edge at column 4, south,
    # west back into the first column of tiles, then south to the grid edge.
    rows, cols = 12, 10
    z = 100.0 + 0.5 * np.arange(rows)[:, None] + np.zeros((1, cols))
    channel = ([(1, c) for c in range(1, 6)] + [(r, 5) for r in range(2, 6)]
               + [(5, c) for c in range(4, 0, -1)] + [(r, 1) for r in range(6, rows)])
    for i, cell in enumerate(channel):
        z[cell] = 50.0 - i
    z = fill_depressions(z)
    expected, codes, frac = assert_equal_to_whole_grid(z, 2.0, 3.0, method, [3, 4, 7, 16, 12])
    c2 = codes.reshape(rows + 2, cols + 2)[1:-1, 1:-1]
    if method == "d8":
        tiles = [tile_of(cell, 4) for cell in d8_path(c2, (1, 1))]
        # the river enters tile column 1 and comes back into tile column 0
        assert tiles.index((0, 1)) < max(i for i, t in enumerate(tiles) if t[1] == 0)
    # the whole upstream channel and the hillslopes above it reach the outlet
    assert expected[rows - 1, 1] > len(channel) * 6.0


@pytest.mark.parametrize("method", ["d8", "dinf"])
def test_flow_through_a_tile_corner(method):
    # A plane falling to the south-east at 45 degrees: every cell sends its flow to the
    # diagonal neighbour, so at each tile corner the flow steps into the diagonal tile.
    n = 9
    r, c = np.mgrid[0:n, 0:n]
    z = 100.0 - (r + c).astype(np.float64)
    _, codes, frac = assert_equal_to_whole_grid(z, 1.0, 1.0, method, [3, 4, 7, 16, n])
    c2 = codes.reshape(n + 2, n + 2)[1:-1, 1:-1]
    f2 = None if frac is None else frac.reshape(n + 2, n + 2)[1:-1, 1:-1]
    m = tile_flow_map(c2[:4, :4], None if f2 is None else f2[:4, :4], np.ones((4, 4), bool),
                      (0, 0), (n, n), 1.0, 1.0, method)
    corner = m.link_to == 4 * n + 4
    assert corner.sum() == 1
    assert m.link_weight[corner][0] == 1.0
    assert m.local_area_m2[m.link_from[corner][0]] == 4.0    # the diagonal (0,0)..(3,3)


@pytest.mark.parametrize("method", ["d8", "dinf"])
def test_a_drained_flat_across_a_tile_edge(method):
    # A flat channel (one elevation) along rows 3-4 drains west to its outlet at (3, 0);
    # its cells get the flat-drainage directions, which cross the tile edges at 4 and 8.
    z = np.full((8, 12), 10.0)
    z[3:5, 0:11] = 5.0
    z = fill_depressions(z)
    _, codes, frac = assert_equal_to_whole_grid(z, 2.0, 3.0, method, [3, 4, 7, 16, 12])
    c2 = codes.reshape(10, 14)[1:-1, 1:-1]
    # a flat cell in column 4 sends west into column 3 (codes 8 + 3, 8 + 4, 8 + 5)
    assert np.isin(c2[3:5, 4], [11, 12, 13]).any()
    # one elevation on both sides of the edge: elevation gives no order here
    assert z[3, 3] == z[3, 4]


@pytest.mark.parametrize("method", ["d8", "dinf"])
def test_nodata_holes_on_tile_edges_and_a_tile_of_nodata(method):
    z = random_terrain(11, 20, 20, 0.0, False)
    z[4:8, 4:8] = np.nan                     # one whole 4 x 4 tile
    z[:, 11] = np.nan                        # a column along a tile edge of 3 and 4
    z[[12, 13], 2:7] = np.nan
    z = fill_depressions(z)
    expected, _, _ = assert_equal_to_whole_grid(z, 2.0, 3.0, method, [3, 4, 7, 16, 20])
    assert np.isnan(expected[4:8, 4:8]).all()


@pytest.mark.parametrize("method", ["d8", "dinf"])
def test_tile_maps_move_at_most_the_inflow(method):
    # Property of the map: a unit entering at perimeter cell i reaches outflow cell o with
    # weight M[o, i]; the part leaving the tile there is s(o) M[o, i] (s(o) the leaving
    # share of o), and these parts sum to at most 1. D8: one entry of weight 1.
    z = random_terrain(3, 30, 30, 0.5, True)
    _, codes, frac = routed(z, 1.0, 1.0, method)
    c2 = codes.reshape(32, 32)[1:-1, 1:-1]
    f2 = None if frac is None else frac.reshape(32, 32)[1:-1, 1:-1]
    for r0, r1, c0, c1 in tile_windows(z.shape, 10):
        m = tile_flow_map(c2[r0:r1, c0:c1], None if f2 is None else f2[r0:r1, c0:c1],
                          np.isfinite(z[r0:r1, c0:c1]), (r0, c0), z.shape, 1.0, 1.0, method)
        s = np.zeros(m.n_perimeter)
        np.add.at(s, m.link_from, m.link_weight)
        for i in range(m.n_perimeter):
            out = m.map_out[m.map_ptr[i]:m.map_ptr[i + 1]]
            w = m.map_weight[m.map_ptr[i]:m.map_ptr[i + 1]]
            assert (np.diff(out) > 0).all() and (w > 0).all()
            assert (s[out] > 0).all()                  # rows are cells that send flow out
            assert (s[out] * w).sum() <= 1.0 + 1e-12
            if method == "d8":
                assert out.size <= 1 and (w == 1.0).all()


def test_per_tile_steps_by_hand_match_the_driver():
    z = random_terrain(5, 17, 13, 0.5, True)
    expected, codes, frac = routed(z, 2.0, 3.0, "dinf")
    c2 = codes.reshape(19, 15)[1:-1, 1:-1]
    f2 = frac.reshape(19, 15)[1:-1, 1:-1]
    ok = np.isfinite(z)
    wins = tile_windows(z.shape, (6, 5))
    maps = [tile_flow_map(c2[a:b, c:d], f2[a:b, c:d], ok[a:b, c:d], (a, c), z.shape, 2.0, 3.0)
            for a, b, c, d in wins]
    inflows = solve_perimeter(reversed(maps))[::-1]     # the order of the tiles is free
    got = np.empty(z.shape)
    for (a, b, c, d), add in zip(wins, inflows):
        assert add.size == perimeter_cells((b - a, d - c)).size
        got[a:b, c:d] = finish_tile_accumulation(c2[a:b, c:d], f2[a:b, c:d], ok[a:b, c:d],
                                                 add, 2.0, 3.0)
    np.testing.assert_allclose(got, expected, rtol=1e-12, equal_nan=True)


def test_cycles_and_bad_inputs_are_refused():
    loop = np.full((2, 2), 255, dtype=np.uint8)
    loop[0, 0], loop[0, 1] = 8 + 0, 8 + 4             # two cells sending to each other
    with pytest.raises(InputError, match="cycle"):
        accumulate_tiled(loop, None, (2, 2), 2, "d8")
    with pytest.raises(InputError, match="cycle"):       # the cycle crosses a tile edge
        accumulate_tiled(loop, None, (2, 2), 1, "d8")
    with pytest.raises(InputError, match="MFD"):
        accumulate_tiled(np.full((2, 2), 16, np.uint8), None, (2, 2), 1, "dinf")
    with pytest.raises(InputError, match="method"):
        accumulate_tiled(loop, None, (2, 2), 1, "mfd")
    with pytest.raises(InputError, match="tile_size"):
        accumulate_tiled(loop, None, (2, 2), 0, "d8")
    with pytest.raises(InputError, match="outside"):
        accumulate_tiled(np.full((2, 2), 8 + 2, np.uint8), None, (2, 2), 1, "d8")
    with pytest.raises(InputError, match="frac"):
        accumulate_tiled(np.zeros((2, 2), np.uint8), None, (2, 2), 1, "dinf")
    one = np.full((2, 2), 255, dtype=np.uint8)
    ok = np.ones((2, 2), bool)
    m = tile_flow_map(one, None, ok, (0, 0), (2, 2), 1.0, 1.0, "d8")
    with pytest.raises(InputError, match="share a cell"):
        solve_perimeter([m, m])
    with pytest.raises(InputError, match="inflow"):
        finish_tile_accumulation(one, None, ok, [1.0], 1.0, 1.0, "d8")


def test_a_raised_stop_flag_stops_the_tile_kernels():
    # each long kernel polls its flag every POLL steps and returns at once when it is set
    n, w = 300, 260                          # a tile of 78,000 cells: more than one poll
    assert n * w > _stoppable.POLL
    z = random_terrain(2, n, n, 0.0, False)
    _, codes, frac = routed(z, 1.0, 1.0, "dinf")
    code = np.ascontiguousarray(codes.reshape(n + 2, n + 2)[1:-1, 1:1 + w]).reshape(-1)
    fr = np.ascontiguousarray(frac.reshape(n + 2, n + 2)[1:-1, 1:1 + w]).reshape(-1)
    args = (code, fr, n, w)
    indeg = np.zeros(code.size, np.uint8)
    acc = np.empty(code.size)
    tiled._tile_start_kernel(*args[:2], np.ones(code.size, bool), n, w, 1.0, indeg, acc)
    order = np.empty(code.size, np.int32)
    up, down = np.ones(1, np.uint8), np.zeros(1, np.uint8)
    assert tiled._tile_kahn_kernel(*args, indeg.copy(), acc.copy(), order, up) == -1
    assert tiled._tile_kahn_kernel(*args, indeg, acc, order, down) == code.size
    perim = perimeter_cells((n, w))
    full = tiled._tile_map_kernel(*args, order, code.size, perim, down)[3]
    assert full > 0
    assert tiled._tile_map_kernel(*args, order, code.size, perim, up)[3] < full
    nodes = _stoppable.POLL + 1
    assert tiled._perimeter_kernel(np.zeros(nodes + 1, np.int64), np.zeros(0, np.int64),
                                   np.zeros(0), np.zeros(nodes), up) == -1
