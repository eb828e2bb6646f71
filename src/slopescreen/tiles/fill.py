"""Depression filling across tiles: the perimeter method (Barnes et al. 2016).

A grid too large for one Priority-Flood is cut into tiles (windows that touch
and do not overlap). The whole fill is then computed in three steps, each one
a plain function over numpy arrays and small frozen dataclasses (picklable,
so that a task scheduler can ship them between processes):

1. :func:`fill_tile`, once per tile, independently: Priority-Flood in which
   the tile's own edge cells are outlets besides the true ones (cells next to
   nodata or on the grid's outside). Every cell gets the filled value ``T``
   of this local flood and a *label*, the watershed of the tile edge cell it
   was flooded from. What leaves the tile is a :class:`TileSummary`: the
   labels and elevations of the tile's edge cells and the lowest pass between
   every two watersheds that touch inside the tile.
2. :func:`spill_levels`, once, over the summaries of all tiles: the *spill
   graph* whose nodes are the watersheds and the ocean (the grid's outside),
   whose edges are the passes inside tiles and the pairs of 8-neighbour
   cells across tile boundaries (weight: the higher of the two elevations),
   solved by Priority-Flood from the ocean. Each watershed gets its spill
   level ``S``, the lowest level at which water can leave it for the ocean.
3. :func:`finish_tile`, once per tile: each cell becomes ``max(T, S(label))``.

The result equals :func:`slopescreen.terrain.fill_depressions` on the whole
grid, bit for bit (every value is one of the input elevations; nothing is
computed by arithmetic). :func:`fill_tiled` runs the three steps serially in
memory. The method and the argument for the equality are in
``docs/methods.md``, "Depression filling across tiles".

Memory: a tile of ``h x w`` cells needs its padded copy, ``(h + 2)(w + 2)``
elements of the DEM's dtype, an int32 label and a uint8 state per padded
cell, and the flood's queues (at most one int per cell, usually far fewer):
about 9 bytes per cell for float32 besides the input tile, plus the result.
Between steps 1 and 3 a tile keeps its filled values and labels (dtype plus
4 bytes per cell). The summary holds ``2(h + w)`` perimeter labels and
elevations and the internal passes; a tile has at most one watershed per
perimeter cell (plus the ocean), so the spill graph has at most
``2(h + w) - 4`` nodes per tile, and as many edges as watersheds touch
(inside tiles and across their boundaries; in practice a few per node).

References
----------
Barnes, R. (2016). Parallel Priority-Flood depression filling for trillion
cell digital elevation models. Computers & Geosciences 96, 56-68.

Barnes, R., Lehman, C., Mulla, D. (2014). Priority-Flood: an optimal
depression-filling and watershed-labeling algorithm for digital elevation
models. Computers & Geosciences 62, 117-127.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np

from .. import _validate
from .._neighbours import DCOL, DROW, linear_offsets, pad_nan, unpad
from .._numba import njit
from .._stoppable import POLL, call
from ..errors import InputError, SlopescreenError
from ..terrain import (
    _heap_pop,
    _heap_push,
    _packed_key,
    _packed_pop,
    _packed_push,
    _flood_queues,
    _queue_grow,
)

__all__ = ["TileFill", "TileSummary", "fill_tile", "spill_levels", "finish_tile", "fill_tiled",
           "tile_windows"]

NODATA_LABEL = 0
"""Label of a nodata cell."""

OCEAN_LABEL = 1
"""Local label of the cells that drain to a true outlet inside the tile (the ocean)."""

_QUEUED = np.uint8(1)
_LABEL_SHIFT = np.int64(31)
_LABEL_MASK = np.int64((1 << 31) - 1)


@dataclass(frozen=True)
class TileSummary:
    """What one tile hands to the spill graph (small: its perimeter and passes).

    Attributes
    ----------
    shape : tuple of int
        (rows, cols) of the tile.
    n_labels : int
        Number of local labels, counting the nodata label 0 and the ocean
        label 1 (so the tile's own watersheds are ``2 .. n_labels - 1``).
    north_labels, south_labels : numpy.ndarray of int32, shape (cols,)
        Labels of the tile's first and last row (0 where nodata).
    west_labels, east_labels : numpy.ndarray of int32, shape (rows,)
        Labels of the tile's first and last column.
    north_z, south_z, west_z, east_z : numpy.ndarray of float64
        Elevations of the same cells (NaN where nodata). Edge cells are
        outlets of the tile's flood, so these are the input elevations.
    pass_a, pass_b : numpy.ndarray of int32
        Pairs of local labels (``pass_a < pass_b``) whose watersheds touch
        inside the tile.
    pass_z : numpy.ndarray of float64
        The lowest pass between each pair: the smallest, over 8-neighbour
        cell pairs across the two watersheds, of the higher of the two
        locally filled values.
    """

    shape: tuple
    n_labels: int
    north_labels: np.ndarray
    south_labels: np.ndarray
    west_labels: np.ndarray
    east_labels: np.ndarray
    north_z: np.ndarray
    south_z: np.ndarray
    west_z: np.ndarray
    east_z: np.ndarray
    pass_a: np.ndarray
    pass_b: np.ndarray
    pass_z: np.ndarray


@dataclass(frozen=True)
class TileFill:
    """The result of :func:`fill_tile` for one tile.

    Attributes
    ----------
    filled : numpy.ndarray, shape (rows, cols)
        The tile filled with its own edge as outlets (dtype of the input,
        NaN at nodata). Kept by the tile's worker until :func:`finish_tile`.
    labels : numpy.ndarray of int32, shape (rows, cols)
        Local watershed label of every cell (0 nodata, 1 ocean).
    summary : TileSummary
        The part sent to :func:`spill_levels`.
    """

    filled: np.ndarray
    labels: np.ndarray
    summary: TileSummary


def tile_windows(shape, tile_size):
    """Row and column bounds of the tiles that cover a grid, in row-major order.

    Parameters
    ----------
    shape : tuple of int
        (rows, cols) of the grid.
    tile_size : int
        Rows and columns of a tile (>= 3); the last tile of a row or column
        of tiles holds what is left (possibly fewer cells).

    Returns
    -------
    row_bounds, col_bounds : list of (int, int)
        ``[(r0, r1), ...]`` and ``[(c0, c1), ...]``: tile ``(i, j)`` is
        ``z[r0:r1, c0:c1]`` for ``row_bounds[i]`` and ``col_bounds[j]``.

    Raises
    ------
    InputError
        If ``tile_size`` is not an integer >= 3.

    Examples
    --------
    >>> tile_windows((7, 5), 3)
    ([(0, 3), (3, 6), (6, 7)], [(0, 3), (3, 5)])
    """
    if isinstance(tile_size, bool) or not isinstance(tile_size, (int, np.integer)) or tile_size < 3:
        raise InputError(f"tile_size: expected a whole number of cells >= 3, got {tile_size!r}")
    t = int(tile_size)
    rows, cols = (int(s) for s in shape)
    return ([(r, min(r + t, rows)) for r in range(0, rows, t)],
            [(c, min(c + t, cols)) for c in range(0, cols, t)])


def fill_tile(z_tile, outside=(False, False, False, False)):
    """Priority-Flood of one tile with its edge cells as outlets; label the watersheds.

    Parameters
    ----------
    z_tile : numpy.ndarray of float32 or float64, shape (rows, cols)
        The tile's elevations (NaN nodata, no +-inf); never modified.
        At least 1 x 1; every cell of a tile with one row or column is an
        edge cell.
    outside : tuple of 4 bool
        Whether the tile's (north, south, west, east) side is the grid's
        outside. Edge cells on such a side are true outlets (ocean label);
        on the other sides they are outlets of this tile only.

    Returns
    -------
    TileFill
        The locally filled tile, its labels and its :class:`TileSummary`.

    Raises
    ------
    InputError
        If ``z_tile`` is not a 2-D float32 or float64 array or holds +-inf.

    Notes
    -----
    Seeds: every valid tile edge cell, and every valid cell with a nodata
    neighbour inside the tile. Seeds next to nodata or on the grid's outside
    get the ocean label 1 at once. The other edge cells get a new label when
    they leave the queue unlabelled; an edge cell still waiting when a
    neighbour leaves the queue takes that neighbour's label instead (it sits
    at or above the neighbour's level, so both drain together). Each cell
    flooded from a labelled cell takes its label. A cell that meets a
    labelled neighbour of another label records the pass between the two
    watersheds, the higher of the two filled values; the lowest per pair is
    kept. Memory and graph size: see the module's docstring.

    Examples
    --------
    A pit in a 3 x 4 tile whose east side touches another tile: locally the
    pit drains east over the 3 to the tile's edge cell at 2, which starts a
    watershed of its own (label 2); the ring of 5 drains to the grid's
    outside (label 1).

    >>> import numpy as np
    >>> z = np.array([[5., 5., 5., 5.],
    ...               [5., 1., 3., 2.],
    ...               [5., 5., 5., 5.]])
    >>> t = fill_tile(z, outside=(True, True, True, False))
    >>> t.filled[1]
    array([5., 3., 3., 2.])
    >>> t.labels[:, 3].tolist(), t.summary.n_labels
    ([1, 2, 1], 3)
    """
    arr = np.asarray(z_tile)
    if arr.ndim != 2 or arr.shape[0] < 1 or arr.shape[1] < 1:
        raise InputError(f"z_tile: expected a 2-D array of at least 1x1 cells, got shape {arr.shape}")
    if arr.dtype not in (np.float32, np.float64):
        raise InputError(f"z_tile: expected float32 or float64 elevations, got {arr.dtype}")
    if np.isinf(arr).any():
        raise InputError("z_tile: holds infinite values; use NaN for nodata")
    sides = tuple(bool(s) for s in outside)
    if len(sides) != 4:
        raise InputError(f"outside: expected 4 flags (north, south, west, east), got {outside!r}")
    zp = pad_nan(arr, dtype=arr.dtype)
    h, w = arr.shape
    ncols = w + 2
    flat = zp.reshape(-1)
    packed, bits, heap, keys, idx, pit = _flood_queues(zp)
    labels = np.zeros(flat.size, dtype=np.int32)
    n_labels, pa, pb, pz = call(_tile_flood_kernel, flat, h, w, linear_offsets(ncols), sides[0],
                                sides[1], sides[2], sides[3], packed, bits, heap, keys, idx, pit,
                                labels, DROW, DCOL, stop=True)
    if n_labels < 0:  # stopped by a signal; the caller's exception follows
        raise SlopescreenError("fill_tile: stopped before the end (a stop signal)")
    lab = np.ascontiguousarray(unpad(labels.reshape(zp.shape)))
    filled = np.ascontiguousarray(unpad(zp))
    zf = filled.astype(np.float64)
    summary = TileSummary(
        shape=(h, w), n_labels=int(n_labels),
        north_labels=lab[0].copy(), south_labels=lab[-1].copy(),
        west_labels=lab[:, 0].copy(), east_labels=lab[:, -1].copy(),
        north_z=zf[0].copy(), south_z=zf[-1].copy(), west_z=zf[:, 0].copy(), east_z=zf[:, -1].copy(),
        pass_a=pa, pass_b=pb, pass_z=pz,
    )
    return TileFill(filled=filled, labels=lab, summary=summary)


@njit
def _tile_flood_kernel(zp, h, w, offsets, out_n, out_s, out_w, out_e, packed, bits, heap, keys,
                       idx, pit, labels, drow, dcol, stop):
    """Priority-Flood with labels on a padded tile, in place (``zp`` becomes ``T``).

    Returns (number of labels, pass_a, pass_b, pass_z); the number is -1 when
    ``stop[0]`` was set (``zp`` and ``labels`` unfinished).
    """
    ncols = w + 2
    state = np.zeros(zp.shape[0], dtype=np.uint8)
    size = 0
    for r in range(1, h + 1):
        for c in range(1, w + 1):
            i = r * ncols + c
            if np.isnan(zp[i]):
                continue
            ocean = (r == 1 and out_n) or (r == h and out_s) or (c == 1 and out_w) or (
                c == w and out_e)
            if not ocean:
                for k in range(8):
                    rr = r + drow[k]
                    cc = c + dcol[k]
                    if 1 <= rr <= h and 1 <= cc <= w and np.isnan(zp[rr * ncols + cc]):
                        ocean = True
                        break
            if ocean:
                labels[i] = 1
            elif not (r == 1 or r == h or c == 1 or c == w):
                continue
            state[i] = 1
            if packed:
                heap, size = _packed_push(heap, size, _packed_key(bits, i))
            else:
                keys, idx, size = _heap_push(keys, idx, size, zp[i], i)

    passes = numba.typed.Dict.empty(key_type=numba.types.int64, value_type=numba.types.float64)
    next_label = 2
    pmask = pit.shape[0] - 1
    phead = 0
    pcount = 0
    steps = 0
    while True:
        steps += 1
        if steps % POLL == 0 and stop[0] != 0:
            return -1, np.empty(0, np.int32), np.empty(0, np.int32), np.empty(0, np.float64)
        if pcount > 0:
            c = np.int64(pit[phead])
            phead = (phead + 1) & pmask
            pcount -= 1
        elif size > 0:
            if packed:
                c, size = _packed_pop(heap, size)
            else:
                c, size = _heap_pop(keys, idx, size)
        else:
            break
        lc = labels[c]
        if lc == 0:
            lc = next_label
            labels[c] = lc
            next_label += 1
        level = zp[c]
        for k in range(8):
            nb = c + offsets[k]
            zn = zp[nb]
            if np.isnan(zn):
                continue
            ln = labels[nb]
            if ln != 0:
                if ln != lc:
                    a = min(ln, lc)
                    b = max(ln, lc)
                    key = (np.int64(a) << _LABEL_SHIFT) | np.int64(b)
                    wgt = np.float64(max(zn, level))
                    old = passes.get(key, np.inf)
                    if wgt < old:
                        passes[key] = wgt
                continue
            labels[nb] = lc
            if state[nb] != 0:
                continue  # a waiting edge seed joins this watershed; it keeps its own level
            state[nb] = 1
            if zn <= level:
                zp[nb] = level
                if pcount == pit.shape[0]:
                    pit = _queue_grow(pit, phead, pcount)
                    phead = 0
                    pmask = pit.shape[0] - 1
                pit[(phead + pcount) & pmask] = nb
                pcount += 1
            elif packed:
                heap, size = _packed_push(heap, size, _packed_key(bits, nb))
            else:
                keys, idx, size = _heap_push(keys, idx, size, zn, nb)

    n = len(passes)
    pa = np.empty(n, dtype=np.int32)
    pb = np.empty(n, dtype=np.int32)
    pz = np.empty(n, dtype=np.float64)
    t = 0
    for key, wgt in passes.items():
        pa[t] = np.int32(key >> _LABEL_SHIFT)
        pb[t] = np.int32(key & _LABEL_MASK)
        pz[t] = wgt
        t += 1
    return next_label, pa, pb, pz


def _check_layout(summaries, n_tile_rows, n_tile_cols):
    if n_tile_rows < 1 or n_tile_cols < 1 or len(summaries) != n_tile_rows * n_tile_cols:
        raise InputError(
            f"summaries: expected {n_tile_rows} x {n_tile_cols} tile summaries in row-major "
            f"order, got {len(summaries)}"
        )
    for i in range(n_tile_rows):
        for j in range(n_tile_cols):
            s = summaries[i * n_tile_cols + j]
            if s.shape[0] != summaries[i * n_tile_cols].shape[0]:
                raise InputError(f"summaries: tile ({i}, {j}) has {s.shape[0]} rows, unlike its "
                                 f"row of tiles; tiles must form a grid")
            if s.shape[1] != summaries[j].shape[1]:
                raise InputError(f"summaries: tile ({i}, {j}) has {s.shape[1]} columns, unlike "
                                 f"its column of tiles; tiles must form a grid")


def _facing_tiles(summaries, n_tile_rows, n_tile_cols):
    """Every two tiles that touch (by a side or a corner), each pair once.

    Yields ``(t, u, side of t, side of u, pairs)`` with row-major tile
    indices; the sides are the facing lines (``"east"``/``"west"`` or
    ``"south"``/``"north"``) and ``pairs`` lists slices ``(of t's line, of
    u's line)`` that put 8-neighbours face to face: across a side, cell k
    faces cells k - 1, k and k + 1; tiles that meet at a corner face by
    their corner cells only.
    """
    for i in range(n_tile_rows):
        for j in range(n_tile_cols):
            t = i * n_tile_cols + j
            if j + 1 < n_tile_cols:
                yield t, t + 1, "east", "west", _shifts(summaries[t].shape[0])
            if i + 1 < n_tile_rows:
                u = t + n_tile_cols
                yield t, u, "south", "north", _shifts(summaries[t].shape[1])
                if j + 1 < n_tile_cols:  # south-east corner
                    yield t, u + 1, "south", "north", [(slice(-1, None), slice(0, 1))]
                if j > 0:  # south-west corner
                    yield t, u - 1, "south", "north", [(slice(0, 1), slice(-1, None))]


def _shifts(n):
    """Slices of two facing lines of ``n`` cells that pair cell k with k + d, d = -1, 0, 1."""
    out = []
    for d in (-1, 0, 1):
        lo, hi = max(0, -d), min(n, n - d)
        if lo < hi:
            out.append((slice(lo, hi), slice(lo + d, hi + d)))
    return out


def _edge_pairs(la, za, lb, zb, ga, gb, out):
    """Spill-graph edges (global a, global b, weight) of cells facing one to one."""
    va = la != NODATA_LABEL
    vb = lb != NODATA_LABEL
    both = va & vb
    out.append((ga[la[both]], gb[lb[both]], np.maximum(za[both], zb[both])))
    only_a = va & ~vb  # a valid cell next to nodata across the boundary drains there
    out.append((ga[la[only_a]], np.zeros(int(only_a.sum()), np.int64), za[only_a]))
    only_b = vb & ~va
    out.append((gb[lb[only_b]], np.zeros(int(only_b.sum()), np.int64), zb[only_b]))


def spill_levels(summaries, n_tile_rows, n_tile_cols):
    """Solve the spill graph: the level at which each watershed drains to the ocean.

    Parameters
    ----------
    summaries : sequence of TileSummary
        The summaries of all tiles (from :func:`fill_tile`), in row-major
        order of an ``n_tile_rows x n_tile_cols`` layout in which tiles of
        one row have equal rows and tiles of one column equal columns.
    n_tile_rows, n_tile_cols : int
        The layout.

    Returns
    -------
    list of numpy.ndarray of float64
        One array per tile, indexed by its local labels: the spill level of
        each watershed; ``-inf`` for the nodata label 0 and the ocean label 1
        (nothing to raise).

    Raises
    ------
    InputError
        If the summaries do not form the layout.

    Notes
    -----
    The nodes are the ocean (the grid's outside and its nodata) and every
    tile's own watersheds: at most ``2(h + w) - 4`` per ``h x w`` tile. The
    edges are the passes inside tiles and, across every tile boundary
    (sides and corners), each pair of 8-neighbour cells, weighted with the
    higher of their two elevations (the lowest per pair of watersheds
    counts); a valid cell facing nodata across a boundary links its
    watershed to the ocean at its own elevation. Priority-Flood from the
    ocean over this graph (Dijkstra's order with ``max`` in place of ``+``)
    gives every node the lowest level ``S`` over all paths to the ocean of
    the highest edge on the path. Cost O(E log V).

    Examples
    --------
    Two 3 x 3 tiles side by side; the west tile's pit (1) can only spill
    east, over the 4 on the shared boundary, to the outlet at 0 on the grid's
    east edge.

    >>> import numpy as np
    >>> z = np.array([[9., 9., 9., 9., 9., 9.],
    ...               [9., 1., 4., 3., 2., 0.],
    ...               [9., 9., 9., 9., 9., 9.]])
    >>> a = fill_tile(z[:, :3], outside=(True, True, True, False))
    >>> b = fill_tile(z[:, 3:], outside=(True, True, False, True))
    >>> spill = spill_levels([a.summary, b.summary], 1, 2)
    >>> float(spill[0][a.labels[1, 1]])
    4.0
    """
    summaries = list(summaries)
    n_tile_rows, n_tile_cols = int(n_tile_rows), int(n_tile_cols)
    _check_layout(summaries, n_tile_rows, n_tile_cols)
    gmaps = []
    base = 1  # global node 0 is the ocean
    for s in summaries:
        g = np.zeros(max(s.n_labels, 2), dtype=np.int64)
        own = max(s.n_labels - 2, 0)
        g[2:] = base + np.arange(own, dtype=np.int64)
        base += own
        gmaps.append(g)
    n_nodes = base
    parts = []
    for s, g in zip(summaries, gmaps):
        parts.append((g[s.pass_a], g[s.pass_b], s.pass_z))
    for t, u, side_a, side_b, shifts in _facing_tiles(summaries, n_tile_rows, n_tile_cols):
        a, b = summaries[t], summaries[u]
        la, za = getattr(a, side_a + "_labels"), getattr(a, side_a + "_z")
        lb, zb = getattr(b, side_b + "_labels"), getattr(b, side_b + "_z")
        for sa, sb in shifts:
            _edge_pairs(la[sa], za[sa], lb[sb], zb[sb], gmaps[t], gmaps[u], parts)
    ea = np.concatenate([p[0] for p in parts]).astype(np.int64)
    eb = np.concatenate([p[1] for p in parts]).astype(np.int64)
    ew = np.concatenate([p[2] for p in parts]).astype(np.float64)
    # undirected CSR adjacency
    src = np.concatenate([ea, eb])
    dst = np.concatenate([eb, ea])
    wgt = np.concatenate([ew, ew])
    order = np.argsort(src, kind="stable")
    dst, wgt = dst[order], wgt[order]
    start = np.zeros(n_nodes + 1, dtype=np.int64)
    np.add.at(start, src + 1, 1)
    np.cumsum(start, out=start)
    level = np.full(n_nodes, np.inf)
    done = call(_graph_flood_kernel, start, dst, wgt, level, stop=True)
    if done < 0:
        raise SlopescreenError("spill_levels: stopped before the end (a stop signal)")
    out = []
    for g in gmaps:
        s = level[g]
        s[:2] = -np.inf
        out.append(s)
    return out


@njit
def _graph_flood_kernel(start, dst, wgt, level, stop):
    """Minimax Priority-Flood over a CSR graph from node 0; ``level`` in place.

    Returns the number of nodes settled, or -1 once ``stop[0]`` is set.
    """
    n = level.shape[0]
    settled = np.zeros(n, dtype=np.uint8)
    keys = np.empty(1024, dtype=np.float64)
    idx = np.empty(1024, dtype=np.int64)
    level[0] = -np.inf
    keys, idx, size = _heap_push(keys, idx, 0, level[0], 0)
    count = 0
    steps = 0
    while size > 0:
        steps += 1
        if steps % POLL == 0 and stop[0] != 0:
            return -1
        u, size = _heap_pop(keys, idx, size)
        if settled[u] != 0:
            continue
        settled[u] = 1
        count += 1
        lu = level[u]
        for e in range(start[u], start[u + 1]):
            v = dst[e]
            if settled[v] != 0:
                continue
            cand = max(lu, wgt[e])
            if cand < level[v]:
                level[v] = cand
                keys, idx, size = _heap_push(keys, idx, size, cand, v)
    return count


def finish_tile(tile, spill):
    """Raise a locally filled tile to the spill levels of its watersheds.

    Parameters
    ----------
    tile : TileFill
        The tile's result of :func:`fill_tile`.
    spill : numpy.ndarray of float64
        The tile's spill levels from :func:`spill_levels`.

    Returns
    -------
    numpy.ndarray, shape (rows, cols)
        ``max(T, S(label))`` per cell, in the tile's dtype (NaN at nodata):
        this tile of the whole-grid fill.

    Raises
    ------
    InputError
        If ``spill`` does not cover the tile's labels.

    Examples
    --------
    The two tiles of :func:`spill_levels`' example, finished: the pit is
    raised to its spill level, 4.

    >>> import numpy as np
    >>> z = np.array([[9., 9., 9., 9., 9., 9.],
    ...               [9., 1., 4., 3., 2., 0.],
    ...               [9., 9., 9., 9., 9., 9.]])
    >>> tiles = [fill_tile(z[:, :3], (True, True, True, False)),
    ...          fill_tile(z[:, 3:], (True, True, False, True))]
    >>> spill = spill_levels([t.summary for t in tiles], 1, 2)
    >>> np.hstack([finish_tile(t, s) for t, s in zip(tiles, spill)])[1]
    array([9., 4., 4., 3., 2., 0.])
    """
    spill = np.asarray(spill, dtype=np.float64)
    if spill.ndim != 1 or spill.shape[0] < tile.summary.n_labels:
        raise InputError(
            f"spill: expected at least {tile.summary.n_labels} levels for this tile, got "
            f"shape {spill.shape}; pass the tile's own entry of spill_levels"
        )
    raise_to = spill[tile.labels].astype(tile.filled.dtype)
    return np.maximum(tile.filled, raise_to)


def fill_tiled(z, tile_size):
    """Fill depressions tile by tile (serial, in memory); equal to the whole-grid fill.

    Parameters
    ----------
    z : array_like, shape (rows, cols)
        Elevations (NaN nodata; integer input becomes float64), at least
        3 x 3.
    tile_size : int
        Rows and columns of a tile (>= 3; the last tiles of the grid hold
        what is left).

    Returns
    -------
    numpy.ndarray, shape (rows, cols)
        Equal to ``fill_depressions(z)`` bit for bit (float32 for float32
        input, else float64).

    Raises
    ------
    InputError
        As :func:`slopescreen.terrain.fill_depressions`, or a ``tile_size``
        that is not a whole number >= 3.

    Notes
    -----
    Tiles are taken in row-major order: :func:`fill_tile` on each, one
    :func:`spill_levels`, then :func:`finish_tile` on each. Peak memory is
    the input, the output, and every tile's filled values and labels (dtype
    plus 4 bytes per cell) held between the two passes; a scheduler that
    keeps tiles on disk or on workers needs only the summaries in one place.

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.terrain import fill_depressions
    >>> rng = np.random.default_rng(0)
    >>> z = rng.random((20, 17)).astype(np.float32)
    >>> bool((fill_tiled(z, 4) == fill_depressions(z)).all())
    True
    """
    arr, _ = _validate.surface(z, name="z")
    rows_b, cols_b = tile_windows(arr.shape, tile_size)
    nr, nc = len(rows_b), len(cols_b)
    tiles = []
    for i, (r0, r1) in enumerate(rows_b):
        for j, (c0, c1) in enumerate(cols_b):
            outside = (i == 0, i == nr - 1, j == 0, j == nc - 1)
            tiles.append(fill_tile(np.ascontiguousarray(arr[r0:r1, c0:c1]), outside))
    spill = spill_levels([t.summary for t in tiles], nr, nc)
    out = np.empty_like(arr)
    for i, (r0, r1) in enumerate(rows_b):
        for j, (c0, c1) in enumerate(cols_b):
            t = i * nc + j
            out[r0:r1, c0:c1] = finish_tile(tiles[t], spill[t])
            tiles[t] = None
    return out
