"""Drainage over flats across tiles: flats inside a tile per tile, the others gathered.

The flat directions of :mod:`slopescreen.routing.flats` (Barnes, Lehman &
Mulla 2014) need whole flats: the distances to a flat's low and high edges
run across the whole flat, which can be as large as the grid, so no halo of
bounded width suffices. On a filled grid cut into tiles:

1. :func:`flat_tile`, per tile, on the tile's filled values with a one-cell
   halo: the flat directions of the tile alone, which are those of the whole
   grid for every flat with no cell on the tile's edge (its cells and their
   neighbours are all inside the tile), and the cells of the flats that do
   touch the tile's edge, numbered per tile (a :class:`FlatSummary`).
2. :func:`flat_groups`, once, over the summaries: flats of neighbouring tiles
   whose edge cells are 8-neighbours of equal elevation are one flat
   (connected components over the tile-edge labels); each such gathered flat
   is returned as its list of cells in grid coordinates.
3. :func:`group_directions`, over the gathered flats, each on the window of
   the filled grid that holds the flat and its neighbours: the whole-grid
   method on that window, whose directions on the flat's cells equal the
   whole grid's.

:func:`flat_directions_tiled` runs the three steps serially in memory.

Memory: a tile needs its haloed copy plus a class byte, a mask int and a
direction byte per cell (the whole-grid method's arrays on the tile). A
gathered flat needs the window of its bounding box plus one cell; a flat the
size of the grid (a wide filled lake) costs as much as the whole-grid method.
The summaries hold one label per perimeter cell and the cells of the flats
that touch a tile edge.

References
----------
Barnes, R., Lehman, C., Mulla, D. (2014). An efficient assignment of
drainage direction over flat surfaces in raster digital elevation models.
Computers & Geosciences 62, 128-135.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from .. import _validate
from .._neighbours import linear_offsets, pad_nan
from .._numba import njit
from .._stoppable import POLL, call
from ..errors import InputError, SlopescreenError
from ..routing.flats import _FLAT, _flat_classes_kernel, _flat_directions_padded
from .fill import _facing_tiles, tile_windows

__all__ = ["FlatSummary", "FlatTile", "flat_tile", "flat_groups", "group_window",
           "group_directions", "flat_directions_tiled"]


@dataclass(frozen=True)
class FlatSummary:
    """The flats of one tile that touch its edge (what :func:`flat_groups` needs).

    Attributes
    ----------
    shape : tuple of int
        (rows, cols) of the tile.
    n_flats : int
        Number of flats that touch the tile's edge, numbered 1 to ``n_flats``.
    north, south : numpy.ndarray of int32, shape (cols,)
        Flat number of each cell of the tile's first and last row (0: the
        cell is not on such a flat).
    west, east : numpy.ndarray of int32, shape (rows,)
        The same for the first and last column.
    north_z, south_z, west_z, east_z : numpy.ndarray of float64
        Filled elevations of the same cells.
    cells : numpy.ndarray of int64
        Cells of those flats, ``row * cols + col`` in the tile, flat by flat.
    starts : numpy.ndarray of int64, shape (n_flats + 1,)
        Flat ``k``'s cells are ``cells[starts[k - 1]:starts[k]]``.
    """

    shape: tuple
    n_flats: int
    north: np.ndarray
    south: np.ndarray
    west: np.ndarray
    east: np.ndarray
    north_z: np.ndarray
    south_z: np.ndarray
    west_z: np.ndarray
    east_z: np.ndarray
    cells: np.ndarray
    starts: np.ndarray


@dataclass(frozen=True)
class FlatTile:
    """The result of :func:`flat_tile`.

    Attributes
    ----------
    directions : numpy.ndarray of uint8, shape (rows, cols)
        Flat directions as :func:`slopescreen.routing.drainage_over_flats`;
        final except on the cells listed in ``summary``.
    summary : FlatSummary
    """

    directions: np.ndarray
    summary: FlatSummary


def flat_tile(z_halo):
    """Flat directions of one tile, and the flats that touch its edge.

    Parameters
    ----------
    z_halo : numpy.ndarray of float32 or float64, shape (rows + 2, cols + 2)
        The tile's filled elevations with a one-cell ring of its neighbours'
        (NaN beyond the grid and at nodata); never modified.

    Returns
    -------
    FlatTile

    Raises
    ------
    InputError
        If ``z_halo`` is not a 2-D float array of at least 3 x 3 or holds +-inf.

    Examples
    --------
    A flat at 1 m that fills a 3 x 3 tile and runs on into the east halo
    (the outer ring is the halo): its 9 cells are listed for gathering.

    >>> import numpy as np
    >>> zh = np.full((5, 5), 3.0)
    >>> zh[1:4, 1:] = 1.0
    >>> zh[2, 4] = 1.0
    >>> t = flat_tile(zh)
    >>> t.summary.n_flats, t.summary.cells.size
    (1, 9)
    """
    arr = np.asarray(z_halo)
    if arr.ndim != 2 or arr.shape[0] < 3 or arr.shape[1] < 3:
        raise InputError(f"z_halo: expected a 2-D tile with a one-cell halo (at least 3x3), got "
                         f"shape {arr.shape}")
    if arr.dtype not in (np.float32, np.float64):
        raise InputError(f"z_halo: expected float32 or float64 elevations, got {arr.dtype}")
    if np.isinf(arr).any():
        raise InputError("z_halo: holds infinite values; use NaN for nodata")
    zp = np.ascontiguousarray(arr)
    h, w = zp.shape[0] - 2, zp.shape[1] - 2
    dirs, _ = _flat_directions_padded(zp)
    flat = zp.reshape(-1)
    ncols = w + 2
    offsets = linear_offsets(ncols)
    cls = np.zeros(flat.size, dtype=np.uint8)
    n_flat = _flat_classes_kernel(flat, h + 2, ncols, offsets, cls)
    comp = np.zeros(flat.size, dtype=np.int32)
    cells = np.empty(max(int(n_flat), 1), dtype=np.int64)
    out = call(_edge_flats_kernel, flat, cls, h, w, offsets, comp, cells, stop=True)
    n_flats, n_cells = int(out[0]), int(out[1])
    if n_flats < 0:
        raise SlopescreenError("flat_tile: stopped before the end (a stop signal)")
    starts = out[2:2 + n_flats + 1].copy()
    comp2 = comp.reshape(zp.shape)[1:-1, 1:-1]
    zin = zp[1:-1, 1:-1].astype(np.float64)
    summary = FlatSummary(
        shape=(h, w), n_flats=n_flats,
        north=comp2[0].copy(), south=comp2[-1].copy(), west=comp2[:, 0].copy(),
        east=comp2[:, -1].copy(),
        north_z=zin[0].copy(), south_z=zin[-1].copy(), west_z=zin[:, 0].copy(),
        east_z=zin[:, -1].copy(),
        cells=cells[:n_cells].copy(), starts=starts,
    )
    return FlatTile(directions=np.ascontiguousarray(dirs[1:-1, 1:-1]), summary=summary)


@njit
def _edge_flats_kernel(zp, cls, h, w, offsets, comp, cells, stop):
    """Number (in ``comp``) the flats with a cell on the tile's edge; list their cells.

    ``cells`` receives tile coordinates ``(r - 1) * w + (c - 1)``, flat by
    flat. Returns [number of flats, number of cells, starts...], or -1 first
    once ``stop[0]`` is set.
    """
    ncols = w + 2
    starts = np.zeros(2 * (h + w) + 2, dtype=np.int64)
    queue = np.empty(cells.shape[0], dtype=np.int64)
    n_flats = 0
    n_cells = 0
    steps = 0
    for r in range(1, h + 1):
        for c in range(1, w + 1):
            if not (r == 1 or r == h or c == 1 or c == w):
                continue
            p = r * ncols + c
            if cls[p] < _FLAT or comp[p] != 0:
                continue
            n_flats += 1
            comp[p] = n_flats
            head = 0
            tail = 1
            queue[0] = p
            z0 = zp[p]
            while head < tail:
                steps += 1
                if steps % POLL == 0 and stop[0] != 0:
                    out = np.empty(1, dtype=np.int64)
                    out[0] = -1
                    return out
                q = queue[head]
                head += 1
                cells[n_cells] = (q // ncols - 1) * w + (q % ncols - 1)
                n_cells += 1
                for k in range(8):
                    s = q + offsets[k]
                    if cls[s] >= _FLAT and comp[s] == 0 and zp[s] == z0:
                        comp[s] = n_flats
                        queue[tail] = s
                        tail += 1
            starts[n_flats] = n_cells
    out = np.empty(2 + n_flats + 1, dtype=np.int64)
    out[0] = n_flats
    out[1] = n_cells
    out[2:] = starts[:n_flats + 1]
    return out


def _same_flat(la, za, lb, zb, ga, gb, out):
    """Join facing edge cells that are both on edge flats and of equal elevation."""
    keep = (la > 0) & (lb > 0) & (za == zb)
    out.append((ga + la[keep].astype(np.int64), gb + lb[keep].astype(np.int64)))


def flat_groups(summaries, n_tile_rows, n_tile_cols, origins):
    """Gather the flats that touch tile edges into whole flats.

    Parameters
    ----------
    summaries : sequence of FlatSummary
        One per tile, row-major over an ``n_tile_rows x n_tile_cols`` layout.
    n_tile_rows, n_tile_cols : int
        The layout.
    origins : sequence of (int, int)
        Grid row and column of each tile's first cell.

    Returns
    -------
    list of (numpy.ndarray of int64, numpy.ndarray of int64)
        Per gathered flat, the grid rows and columns of its cells (sorted by
        tile, then as listed per tile).

    Raises
    ------
    InputError
        If the three inputs disagree in length.

    Notes
    -----
    Two edge cells of neighbouring tiles that are 8-neighbours, both on
    edge-touching flats and of equal elevation belong to one flat (a flat is
    an 8-connected set of equal cells without a lower or nodata neighbour),
    so the tiles' flat numbers are joined by connected components over these
    pairs (scipy's ``connected_components``).

    Examples
    --------
    A 3 x 6 grid in two tiles, padded: a flat at 1 m across both, its east
    column draining to a notch at 0 (so those 3 cells are not flat).

    >>> import numpy as np
    >>> zh = np.full((5, 8), 3.0)
    >>> zh[1:4, 1:7] = 1.0
    >>> zh[2, 7] = 0.0
    >>> a, b = flat_tile(zh[:, :5]), flat_tile(zh[:, 3:])
    >>> groups = flat_groups([a.summary, b.summary], 1, 2, [(0, 0), (0, 3)])
    >>> len(groups), groups[0][0].size
    (1, 15)
    """
    summaries = list(summaries)
    origins = list(origins)
    n_tiles = int(n_tile_rows) * int(n_tile_cols)
    if len(summaries) != n_tiles or len(origins) != n_tiles:
        raise InputError(f"summaries, origins: expected {n_tiles} of each in row-major order, got "
                         f"{len(summaries)} and {len(origins)}")
    base = np.zeros(n_tiles + 1, dtype=np.int64)  # node base[t] + k - 1 is flat k of tile t
    base[1:] = np.cumsum([s.n_flats for s in summaries])
    n_nodes = int(base[-1])
    if n_nodes == 0:
        return []
    pairs = []
    g = base[:-1] - 1
    for t, u, side_a, side_b, shifts in _facing_tiles(summaries, int(n_tile_rows),
                                                      int(n_tile_cols)):
        a, b = summaries[t], summaries[u]
        la, za = getattr(a, side_a), getattr(a, side_a + "_z")
        lb, zb = getattr(b, side_b), getattr(b, side_b + "_z")
        for sa, sb in shifts:
            _same_flat(la[sa], za[sa], lb[sb], zb[sb], g[t], g[u], pairs)
    ea = np.concatenate([p[0] for p in pairs]) if pairs else np.empty(0, np.int64)
    eb = np.concatenate([p[1] for p in pairs]) if pairs else np.empty(0, np.int64)
    graph = coo_matrix((np.ones(ea.size, dtype=np.int8), (ea, eb)), shape=(n_nodes, n_nodes))
    n_groups, node_group = connected_components(graph, directed=False)
    rows, cols, group = [], [], []
    for t, s in enumerate(summaries):
        if s.n_flats == 0:
            continue
        r0, c0 = origins[t]
        sizes = np.diff(s.starts)
        rows.append(s.cells // s.shape[1] + r0)
        cols.append(s.cells % s.shape[1] + c0)
        group.append(np.repeat(node_group[base[t]:base[t + 1]], sizes))
    rows, cols, group = np.concatenate(rows), np.concatenate(cols), np.concatenate(group)
    order = np.argsort(group, kind="stable")
    bounds = np.searchsorted(group[order], np.arange(n_groups + 1))
    return [(rows[order[bounds[k]:bounds[k + 1]]], cols[order[bounds[k]:bounds[k + 1]]])
            for k in range(n_groups)]


def group_window(rows, cols, shape):
    """Grid window that holds a gathered flat and its 8 neighbours.

    Parameters
    ----------
    rows, cols : numpy.ndarray of int
        The flat's cells (from :func:`flat_groups`).
    shape : tuple of int
        (rows, cols) of the grid.

    Returns
    -------
    (r0, r1, c0, c1) : tuple of int
        The window ``z[r0:r1, c0:c1]`` to pass to :func:`group_directions`.

    Examples
    --------
    >>> import numpy as np
    >>> group_window(np.array([0, 4]), np.array([3, 5]), (10, 6))
    (0, 6, 2, 6)
    """
    return (max(int(rows.min()) - 1, 0), min(int(rows.max()) + 2, shape[0]),
            max(int(cols.min()) - 1, 0), min(int(cols.max()) + 2, shape[1]))


def group_directions(items):
    """Flat directions of gathered flats, from the windows of the filled grid around them.

    Parameters
    ----------
    items : sequence of (window, rows, cols)
        Per gathered flat: the filled grid over :func:`group_window`'s
        bounds (float32 or float64, one dtype for all) and the flat's cells
        in window coordinates.

    Returns
    -------
    list of numpy.ndarray of uint8
        Per flat, the direction of each of its cells, equal to the whole
        grid's.

    Notes
    -----
    A window holds every cell of its flat and all their neighbours, so the
    classes of the flat's cells, its low and high edges and the distances
    across it are those of the whole grid. Cells at the window's border may
    change class (NaN beyond it), but only from "slope" to "outlet", both of
    which count alike as low edge, and directions only compare cells of one
    flat. Windows are stacked, NaN rows between them, into one grid per
    width class (widths within a factor of 2), so that a few calls of the
    whole-grid method serve thousands of small flats.

    Examples
    --------
    >>> import numpy as np
    >>> z = np.full((3, 4), 2.0)
    >>> z[1, 1:] = 1.0
    >>> [d.tolist() for d in group_directions([(z, np.array([1, 1]), np.array([1, 2]))])]
    [[0, 0]]
    """
    items = list(items)
    out = [None] * len(items)
    if not items:
        return out
    dtype = np.asarray(items[0][0]).dtype
    widths = np.array([np.asarray(w).shape[1] for w, _, _ in items])
    width_class = np.ceil(np.log2(widths)).astype(np.int64)
    for k in np.unique(width_class):
        members = np.flatnonzero(width_class == k)
        heights = np.array([np.asarray(items[m][0]).shape[0] for m in members])
        offsets = np.concatenate([[0], np.cumsum(heights + 1)])
        mosaic = np.full((int(offsets[-1]) - 1, int(widths[members].max())), np.nan, dtype=dtype)
        for m, o in zip(members, offsets):
            window = np.asarray(items[m][0], dtype=dtype)
            mosaic[o:o + window.shape[0], :window.shape[1]] = window
        dirs, _ = _flat_directions_padded(pad_nan(mosaic))
        for m, o in zip(members, offsets):
            _, rows, cols = items[m]
            out[m] = dirs[np.asarray(rows) + o + 1, np.asarray(cols) + 1]
    return out


def flat_directions_tiled(z, tile_size):
    """Flat directions tile by tile (serial, in memory); equal to the whole-grid method.

    Parameters
    ----------
    z : array_like, shape (rows, cols)
        Filled elevations (NaN nodata), at least 3 x 3.
    tile_size : int
        Rows and columns of a tile (>= 3).

    Returns
    -------
    numpy.ndarray of uint8, shape (rows, cols)
        Equal to :func:`slopescreen.routing.drainage_over_flats` of ``z``.

    Raises
    ------
    InputError
        As :func:`slopescreen.routing.drainage_over_flats`, or a bad
        ``tile_size``.

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.routing import drainage_over_flats
    >>> z = np.full((9, 11), 2.0)
    >>> z[1:8, 1:10] = 1.0
    >>> z[4, 10] = 0.0
    >>> bool((flat_directions_tiled(z, 4) == drainage_over_flats(z)).all())
    True
    """
    arr, _ = _validate.surface(z, name="z")
    rows_b, cols_b = tile_windows(arr.shape, tile_size)
    zp = pad_nan(arr)
    out = np.empty(arr.shape, dtype=np.uint8)
    summaries, origins = [], []
    for r0, r1 in rows_b:
        for c0, c1 in cols_b:
            t = flat_tile(zp[r0:r1 + 2, c0:c1 + 2])
            out[r0:r1, c0:c1] = t.directions
            summaries.append(t.summary)
            origins.append((r0, c0))
    groups = flat_groups(summaries, len(rows_b), len(cols_b), origins)
    items = []
    for rows, cols in groups:
        r0, r1, c0, c1 = group_window(rows, cols, arr.shape)
        items.append((zp[r0 + 1:r1 + 1, c0 + 1:c1 + 1], rows - r0, cols - c0))
    for (rows, cols), dirs in zip(groups, group_directions(items)):
        out[rows, cols] = dirs
    return out

