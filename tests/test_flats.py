"""Drainage over flats (Barnes, Lehman & Mulla 2014; Garbrecht & Martz 1997).

Checks on hand-made flats: every flat cell drains to the outlet, flow turns
away from higher terrain, a flat with no outlet stays undirected, and the
path lengths agree with breadth-first distances computed by networkx.
"""

import networkx as nx
import numpy as np
import pytest

from slopescreen.errors import InputError
from slopescreen.routing import drainage_over_flats
from slopescreen.routing.flats import _flat_directions_padded
from slopescreen._neighbours import pad_nan

DROW = np.array([0, -1, -1, -1, 0, 1, 1, 1])
DCOL = np.array([1, 1, 0, -1, -1, -1, 0, 1])
NONE = 255


def has_lower_neighbour(z, i, j):
    for k in range(8):
        r, c = i + DROW[k], j + DCOL[k]
        if 0 <= r < z.shape[0] and 0 <= c < z.shape[1] and z[r, c] < z[i, j]:
            return True
    return False


def follow(dirs, z, i, j, limit=10_000):
    """Follow flat directions from (i, j) until a cell without one; return (end, steps)."""
    steps = 0
    while dirs[i, j] != NONE:
        k = dirs[i, j]
        ni, nj = i + DROW[k], j + DCOL[k]
        assert z[ni, nj] == z[i, j], "a flat direction must stay on the flat"
        i, j = ni, nj
        steps += 1
        assert steps < limit, "cycle"
    return (i, j), steps


def walled_flat(rows=9, cols=13, notch=None):
    """A flat at 1 m ringed by 3 m walls; optional 0 m notch in the wall."""
    z = np.full((rows, cols), 3.0)
    z[1:-1, 1:-1] = 1.0
    if notch is not None:
        z[notch] = 0.0
    return z


def bfs_distance_to_low_edge(z, flat_cells, low_edge):
    """networkx BFS: 8-connected steps over equal-elevation cells from the low edge."""
    g = nx.Graph()
    cells = set(flat_cells) | set(low_edge)
    for (i, j) in cells:
        for k in range(8):
            n = (i + DROW[k], j + DCOL[k])
            if n in cells and z[n] == z[i, j]:
                g.add_edge((i, j), n)
    return nx.multi_source_dijkstra_path_length(g, set(low_edge))


def test_flat_with_one_outlet_drains_every_cell_to_it():
    z = walled_flat(notch=(4, 12))  # notch in the east wall, on the grid edge
    dirs = drainage_over_flats(z)
    flat = [(i, j) for i in range(1, 8) for j in range(1, 12) if not has_lower_neighbour(z, i, j)]
    assert len(flat) == 7 * 11 - 3  # the three cells beside the notch have a lower neighbour
    for cell in flat:
        assert dirs[cell] != NONE
        (ei, ej), _ = follow(dirs, z, *cell)
        # the path ends on the low edge, next to the notch
        assert has_lower_neighbour(z, ei, ej) and max(abs(ei - 4), abs(ej - 12)) == 1
    # nothing outside the flat gets a direction
    assert (dirs[z != 1.0] == NONE).all()


def test_flow_turns_away_from_higher_terrain():
    # Garbrecht & Martz (1997): the gradient away from higher terrain makes
    # flow converge toward the flat's middle instead of hugging the walls.
    # Next to the north wall no direction may point north; next to the south
    # wall none may point south (walls are the only high terrain here).
    z = walled_flat(notch=(4, 12))
    dirs = drainage_over_flats(z)
    north = {1, 2, 3}
    south = {5, 6, 7}
    for j in range(1, 11):
        assert dirs[1, j] not in north and dirs[1, j] in {0, 7, 6}
        assert dirs[7, j] not in south and dirs[7, j] in {0, 1, 2}
    # and the cells along the walls are pushed toward the middle row: within
    # the western half (far from the notch) they move south/north, not east
    assert all(dirs[1, j] in {6, 7} for j in range(1, 6))
    assert all(dirs[7, j] in {1, 2} for j in range(1, 6))


def test_flat_between_high_and_low_terrain_flows_away_from_the_high_side():
    # A flat shelf: higher ground to the north, lower ground to the south.
    z = np.zeros((9, 10))
    z[:3] = np.array([9.0, 8.0, 7.0])[:, None]   # slope above the shelf
    z[3:6] = 5.0                                   # the flat shelf
    z[6:] = np.array([4.0, 3.0, 2.0])[:, None]    # lower ground
    z[3:6, [0, -1]] = 6.0                          # banks, so the shelf is not on the grid edge
    dirs = drainage_over_flats(z)
    # the shelf row touching lower ground has lower neighbours: no flat direction
    assert (dirs[5, 1:-1] == NONE).all()
    for i in (3, 4):
        for j in range(1, 9):
            # every shelf cell steps south, away from the high side
            assert DROW[dirs[i, j]] == 1


def test_flat_without_outlet_stays_undirected():
    # An unfilled closed flat: nothing lower around it and not on the data edge.
    z = walled_flat(rows=7, cols=8)
    z[0, :] = z[-1, :] = z[:, 0] = z[:, -1] = 3.0
    dirs = drainage_over_flats(z)
    assert (dirs == NONE).all()
    out, undrained = _flat_directions_padded(pad_nan(z))
    assert undrained == 5 * 6


def test_steps_equal_bfs_distance_when_no_higher_terrain():
    # Without higher terrain the mask is 2 t alone: every step lowers the BFS
    # distance t by one, so path length == BFS distance (networkx oracle).
    z = np.full((11, 14), 5.0)
    z[:, -1] = 4.0  # lower ground along the east edge
    z[3, 0] = 4.0   # and one low cell on the west edge
    dirs = drainage_over_flats(z)
    flat = [(i, j) for i in range(z.shape[0]) for j in range(z.shape[1])
            if z[i, j] == 5.0 and not has_lower_neighbour(z, i, j)]
    # low edge: cells with a lower neighbour, plus flat cells on the grid edge (outlets)
    low = [(i, j) for i in range(z.shape[0]) for j in range(z.shape[1]) if z[i, j] == 5.0
           and (has_lower_neighbour(z, i, j) or i in (0, 10) or j == 0)]
    interior = [c for c in flat if c not in low]
    dist = bfs_distance_to_low_edge(z, interior, low)
    for cell in interior:
        _, steps = follow(dirs, z, *cell)
        assert steps == dist[cell]
    for cell in low:
        assert dirs[cell] == NONE


def test_whole_grid_flat_drains_to_nearest_edge():
    # A constant grid: every edge cell is an outlet; an interior cell is as
    # many steps from the edge as its Chebyshev distance (8-connected BFS).
    z = np.full((9, 12), 7.0)
    dirs = drainage_over_flats(z)
    for i in range(9):
        for j in range(12):
            edge_dist = min(i, j, 8 - i, 11 - j)
            if edge_dist == 0:
                assert dirs[i, j] == NONE
            else:
                _, steps = follow(dirs, z, i, j)
                assert steps == edge_dist


def test_steps_bounded_with_higher_terrain():
    # With higher terrain, each step lowers the mask 2 t + (H - h) by at least
    # one while h changes by at most one per step, so t0 <= steps <= 2 t0 + H.
    z = walled_flat(rows=15, cols=21, notch=(7, 20))
    dirs = drainage_over_flats(z)
    flat = [(i, j) for i in range(1, 14) for j in range(1, 20) if not has_lower_neighbour(z, i, j)]
    low = [(i, j) for i in range(1, 14) for j in range(1, 20) if z[i, j] == 1.0
           and has_lower_neighbour(z, i, j)]
    dist = bfs_distance_to_low_edge(z, flat, low)
    high_dist = max(min(i, j, 14 - i) for (i, j) in flat)  # H: BFS distance from the walls
    for cell in flat:
        _, steps = follow(dirs, z, *cell)
        assert dist[cell] <= steps <= 2 * dist[cell] + high_dist


def test_nodata_acts_as_edge_and_input_is_not_modified():
    z = np.full((8, 8), 2.0)
    z[4, 4] = np.nan  # a hole inside a flat: its neighbours are outlets
    before = z.copy()
    valid = np.ones_like(z, dtype=bool)
    valid[0, :] = False
    dirs = drainage_over_flats(z, valid=valid)
    np.testing.assert_array_equal(z, before)
    for k in range(8):
        assert dirs[4 + DROW[k], 4 + DCOL[k]] == NONE
    assert (dirs[0] == NONE).all()
    assert dirs[2, 4] != NONE
    (ei, ej), _ = follow(dirs, z, 2, 4)
    assert (ei, ej) in {(1, 4), (3, 4), (3, 3), (3, 5), (1, 3), (1, 5)}


def test_float32_and_bad_input():
    z = walled_flat(notch=(4, 12)).astype(np.float32)
    np.testing.assert_array_equal(drainage_over_flats(z), drainage_over_flats(z.astype(float)))
    with pytest.raises(InputError):
        drainage_over_flats(np.zeros((2, 5)))
    with pytest.raises(InputError):
        drainage_over_flats(np.full((4, 4), np.nan))
