r"""Flow accumulation of a grid cut into tiles, equal to the whole-grid accumulation.

The grid's receivers (the compact codes and D-infinity fractions of
:mod:`slopescreen.routing.directions`, flats included) are cut into tiles:
windows that touch and do not overlap. Each tile is reduced to what its
neighbours need to know about it, one small system over the tile perimeters
is solved once, and each tile is then accumulated again with its inflows
(Barnes 2017's perimeter method; for D-infinity the tile's reduction is a
sparse linear map instead of one link per perimeter cell):

1. :func:`tile_flow_map` accumulates the tile alone (no inflow) and returns a
   :class:`TileFlowMap`: the local area reaching each perimeter cell, the
   links by which perimeter cells send flow into other tiles (receiving cell
   and share), and the tile's *map* M: ``M[o, i]`` is the area reaching
   perimeter cell ``o`` per unit of area entering the tile at perimeter cell
   ``i``. D8 and single-direction cells give one entry of weight 1 per
   column; D-infinity splits, so a column holds several entries whose leaving
   parts ``s(o) M[o, i]`` (``s(o)`` the share of ``o`` that leaves the tile)
   sum to at most 1.
2. :func:`solve_perimeter` links the tiles' perimeter cells into one graph
   (cross-tile receiver links and the tile maps) and sums it once in a
   topological order of that graph (Kahn's algorithm), which gives the total
   inflow entering every perimeter cell from other tiles.
3. :func:`finish_tile_accumulation` accumulates each tile again with those
   inflows added at its perimeter cells: the whole-grid upslope area of the
   tile's cells.

:func:`accumulate_tiled` runs the three steps in memory, one tile after the
other. Every argument and result is a numpy array or a :class:`TileFlowMap`
(a frozen dataclass of arrays), so each step can run per tile anywhere.

Receiver codes (one ``uint8`` per cell, row 0 to the north): ``j`` in 0..7 is
D-infinity facet ``j`` (diagonal share in ``frac``), ``8 + k`` sends
everything to neighbour ``k`` (codes of :mod:`slopescreen._neighbours`), 255
sends nothing. MFD cells (code 16) are refused.

Cost and memory of a tile of m cells and P perimeter cells: the map pass
holds 32 bytes per cell for D-infinity, 28 for D8 (code 1, fraction 4,
valid 1, in-degree 1, area 8, topological order 4, reach flag 1, and a start
and length into the entry arena, 8 + 4) plus 12 bytes per arena entry, and
visits each cell a constant number of times; the finishing pass needs 15
(11) bytes per cell. The perimeter system holds two nodes per perimeter cell
of every tile and one edge per cross-tile link and per map entry; its solve
is linear in its size. On a 4000 x 4000 fractal DEM the maps hold about 1.05
entries per perimeter cell that has any (D8: exactly 1), so the system is a
few MB (``docs/performance.md``, "Tiled flow accumulation").

References
----------
Barnes, R. (2017). Parallel non-divergent flow accumulation for trillion cell
digital elevation models on desktops or clusters. *Environmental Modelling &
Software* 92, 202-212, doi:10.1016/j.envsoft.2017.02.022.

Tarboton, D.G. (1997). A new method for the determination of flow directions
and upslope areas in grid digital elevation models. *Water Resources
Research* 33(2), 309-319.

Examples
--------
>>> import numpy as np
>>> from slopescreen.tiles import accumulate_tiled
>>> codes = np.full((4, 5), 8, dtype=np.uint8)   # every cell sends east (8 + 0)
>>> codes[:, -1] = 255                           # the east column: outlets
>>> res = accumulate_tiled(codes, None, (4, 5), 2, "d8", 10.0, 10.0)
>>> res.area_m2[1]
array([100., 200., 300., 400., 500.])
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from .._neighbours import DCOL, DROW, NO_DIRECTION
from .._numba import njit
from .._stoppable import POLL, call
from ..errors import InputError
from ..routing._geometry import _DONE, _FACET_CARD, _FACET_DIAG, _MULTI, _SINGLE

TILED_METHODS = ("dinf", "d8")
"""Routing methods the tiled accumulation accepts."""


@dataclass(frozen=True)
class TileFlowMap:
    """What the rest of the grid needs to know about one tile.

    Perimeter cells are numbered 0..P-1 in row-major order of the tile
    (:func:`perimeter_cells`).

    Attributes
    ----------
    origin : tuple of int
        (row, col) of the tile's first cell in the grid.
    shape : tuple of int
        (rows, cols) of the tile.
    grid_shape : tuple of int
        (rows, cols) of the whole grid.
    local_area_m2 : numpy.ndarray of float64, shape (P,)
        Area in m^2 reaching each perimeter cell from inside the tile (no
        inflow); NaN on nodata.
    map_ptr : numpy.ndarray of int64, shape (P + 1,)
        Column ``i`` of the map (area entering at perimeter cell ``i``) is
        held in ``map_out[map_ptr[i]:map_ptr[i + 1]]``.
    map_out : numpy.ndarray of int32
        Perimeter cell ``o`` of each map entry, increasing within a column.
    map_weight : numpy.ndarray of float64
        ``M[o, i]``: area reaching ``o`` per unit of area entering at ``i``.
    link_from : numpy.ndarray of int32
        Perimeter cell that sends each cross-tile link.
    link_to : numpy.ndarray of int64
        Receiving cell of each link, as a row-major index of the whole grid.
    link_weight : numpy.ndarray of float64
        Share of the sender's area carried by the link.
    arena_entries : int
        Sparse-vector entries the map pass wrote (its memory: 12 B each).
    work_bytes : int
        Bytes of the tile's working arrays at their largest (arena included).
    """

    origin: tuple
    shape: tuple
    grid_shape: tuple
    local_area_m2: np.ndarray
    map_ptr: np.ndarray
    map_out: np.ndarray
    map_weight: np.ndarray
    link_from: np.ndarray
    link_to: np.ndarray
    link_weight: np.ndarray
    arena_entries: int
    work_bytes: int

    @property
    def n_perimeter(self) -> int:
        """Number of perimeter cells P."""
        return int(self.local_area_m2.size)


class TiledAccumulation(NamedTuple):
    """Result of :func:`accumulate_tiled`.

    Attributes
    ----------
    area_m2 : numpy.ndarray of float64, shape (rows, cols)
        Upslope area in m^2, own cell included; NaN on nodata.
    perimeter_cells : int
        Perimeter cells of all tiles (the system has two nodes per cell).
    links : int
        Cross-tile receiver links.
    map_entries : int
        Non-zeros of all tile maps.
    peak_tile_bytes : int
        Largest working memory of one tile's map pass, in bytes.
    """

    area_m2: np.ndarray
    perimeter_cells: int
    links: int
    map_entries: int
    peak_tile_bytes: int


# --------------------------------------------------------------------------
# Tiles
# --------------------------------------------------------------------------


def tile_windows(shape, tile_size):
    """Windows of at most ``tile_size`` cells that cover a grid, row-major.

    Parameters
    ----------
    shape : tuple of int
        (rows, cols) of the grid, both >= 1.
    tile_size : int or tuple of int
        Rows and columns of a tile (one number for square tiles), >= 1.

    Returns
    -------
    list of tuple
        ``(row0, row1, col0, col1)`` of each window (ends excluded).

    Examples
    --------
    >>> tile_windows((3, 5), 2)
    [(0, 2, 0, 2), (0, 2, 2, 4), (0, 2, 4, 5), (2, 3, 0, 2), (2, 3, 2, 4), (2, 3, 4, 5)]
    """
    rows, cols = _grid_shape(shape)
    th, tw = _tile_size(tile_size)
    return [(r, min(r + th, rows), c, min(c + tw, cols))
            for r in range(0, rows, th) for c in range(0, cols, tw)]


def perimeter_cells(shape):
    """Tile-local row-major indices of the perimeter cells of a tile, in their numbering.

    Parameters
    ----------
    shape : tuple of int
        (rows, cols) of the tile.

    Returns
    -------
    numpy.ndarray of int64, shape (P,)

    Examples
    --------
    >>> perimeter_cells((3, 3))
    array([0, 1, 2, 3, 5, 6, 7, 8])
    """
    h, w = _grid_shape(shape)
    mask = np.zeros((h, w), dtype=bool)
    mask[[0, -1], :] = True
    mask[:, [0, -1]] = True
    return np.flatnonzero(mask).astype(np.int64)


def tile_flow_map(codes, frac, valid, origin, grid_shape, dx, dy, method="dinf"):
    """Reduce one tile to its perimeter: local areas, cross-tile links and the tile map.

    Parameters
    ----------
    codes : array_like of uint8, shape (h, w)
        The tile's receiver codes (see the module docstring).
    frac : array_like of float32, shape (h, w), or None
        D-infinity diagonal shares of the tile's cells; None for D8.
    valid : array_like of bool, shape (h, w)
        Cells with data; the others get NaN area.
    origin : tuple of int
        (row, col) of the tile's first cell in the grid.
    grid_shape : tuple of int
        (rows, cols) of the whole grid.
    dx, dy : float
        Cell width and height in metres, > 0.
    method : {"dinf", "d8"}
        Routing method the codes come from.

    Returns
    -------
    TileFlowMap

    Raises
    ------
    InputError
        If an array has another shape, a code is not one of ``method``, a
        receiver lies outside the grid, or the receivers form a cycle.

    Notes
    -----
    One topological pass (Kahn's algorithm) accumulates the tile with no
    inflow and records its order. A forward sweep of that order marks the
    cells downstream of a perimeter cell; a sweep in reverse order then gives
    each marked cell c its sparse vector R(c) = [c leaves the tile] e_c +
    sum_q f_q R(q) over its receivers q inside the tile: the perimeter cells
    that area at c reaches, with weights. The map's column i is R(i). A cell
    with one receiver of share 1 shares its receiver's vector (no copy), so
    D8 writes one entry per leaving cell. Vectors are merged sorted; cost is
    the total length of the vectors written, which on convergent terrain
    stays a few entries per cell because downstream sets narrow into
    channels. The other way round (carrying, per cell, the perimeter cells
    upstream of it) would grow along every channel with its catchment.

    Examples
    --------
    >>> import numpy as np
    >>> codes = np.full((2, 3), 8, dtype=np.uint8)     # all east
    >>> m = tile_flow_map(codes, None, np.ones((2, 3), bool), (0, 0), (2, 6), 1.0, 1.0, "d8")
    >>> m.local_area_m2                               # perimeter cells 0..5
    array([1., 2., 3., 1., 2., 3.])
    >>> m.link_from, m.link_to                        # cells 2 and 5 send into the next tile
    (array([2, 5], dtype=int32), array([3, 9]))
    >>> m.map_out[m.map_ptr[0]:m.map_ptr[1]]          # area entering at 0 reaches 2
    array([2], dtype=int32)
    """
    code, fr, ok, h, w = _tile_arrays(codes, frac, valid, method)
    r0, c0 = (int(v) for v in origin)
    rows, cols = _grid_shape(grid_shape)
    if r0 < 0 or c0 < 0 or r0 + h > rows or c0 + w > cols:
        raise InputError(f"origin: the tile {h} x {w} at {(r0, c0)} does not fit in the grid "
                         f"{rows} x {cols}; give the tile's first cell in the grid")
    dx, dy = _cell_size(dx, dy)
    indeg = np.zeros(h * w, dtype=np.uint8)
    acc = np.empty(h * w, dtype=np.float64)
    order = np.empty(h * w, dtype=np.int32)
    _tile_start_kernel(code, fr, ok, h, w, dx * dy, indeg, acc)
    n = call(_tile_kahn_kernel, code, fr, h, w, indeg, acc, order, stop=True)
    _check_acyclic(n, ok)
    perim = perimeter_cells((h, w))
    nlink, link_from, link_to, link_w = _tile_links_kernel(code, fr, h, w, r0, c0, rows, cols,
                                                           perim)
    if nlink < 0:
        raise InputError(f"codes: a cell of the tile at {(r0, c0)} sends flow outside the "
                         f"{rows} x {cols} grid; give the receiver codes of the whole grid")
    del indeg
    ptr, out, weight, used, cap = call(_tile_map_kernel, code, fr, h, w, order, n, perim,
                                       stop=True)
    work = h * w * (1 + 4 * (fr.size > 1) + 1 + 1 + 8 + 4 + 1 + 8 + 4) + 12 * cap
    return TileFlowMap(origin=(r0, c0), shape=(h, w), grid_shape=(rows, cols),
                       local_area_m2=acc[perim].copy(), map_ptr=ptr, map_out=out,
                       map_weight=weight, link_from=link_from[:nlink].copy(),
                       link_to=link_to[:nlink].copy(), link_weight=link_w[:nlink].copy(),
                       arena_entries=int(used), work_bytes=int(work))


def solve_perimeter(maps):
    """Total inflow entering each perimeter cell of each tile from the other tiles.

    Parameters
    ----------
    maps : sequence of TileFlowMap
        One per tile, the tiles covering the grid without overlap.

    Returns
    -------
    list of numpy.ndarray of float64
        For each tile, shape (P,): area in m^2 entering each of its perimeter
        cells from other tiles (0 where none).

    Raises
    ------
    InputError
        If the tiles overlap, a link reaches a cell that is not on a tile's
        perimeter, or the perimeter graph has a cycle.

    Notes
    -----
    The graph has an *in* node and an *out* node per perimeter cell: edges
    out(o) -> in(i) with the link's share (o in one tile sends to i in
    another) and in(i) -> out(o) with ``M[o, i]`` (inside a tile). Out nodes
    start at the local area, in nodes at zero; nodes are summed in Kahn's
    topological order of this graph, so every node is final before it is
    passed on. Elevation order would not do: over a drained flat, flow
    follows the flat's synthetic gradient between cells of one elevation.
    The graph is acyclic because every edge stands for a flow path of the
    (acyclic) cell graph.

    Examples
    --------
    >>> import numpy as np
    >>> codes = np.full((2, 4), 8, dtype=np.uint8)      # all east, outlets at the east edge
    >>> codes[:, -1] = 255
    >>> ok = np.ones((2, 2), bool)
    >>> west = tile_flow_map(codes[:, :2], None, ok, (0, 0), (2, 4), 1.0, 1.0, "d8")
    >>> east = tile_flow_map(codes[:, 2:], None, ok, (0, 2), (2, 4), 1.0, 1.0, "d8")
    >>> solve_perimeter([west, east])[1]                # two cells flow into each row
    array([2., 0., 2., 0.])
    """
    maps = list(maps)
    if not maps:
        raise InputError("maps: expected one TileFlowMap per tile, got none")
    grid = maps[0].grid_shape
    cols = grid[1]
    sizes = np.array([m.n_perimeter for m in maps], dtype=np.int64)
    base = np.concatenate([[0], np.cumsum(sizes)])
    total = int(base[-1])
    gid = np.empty(total, dtype=np.int64)
    for t, m in enumerate(maps):
        if m.grid_shape != grid:
            raise InputError(f"maps: tile {t} belongs to a grid {m.grid_shape}, tile 0 to "
                             f"{grid}; give the maps of one grid")
        loc = perimeter_cells(m.shape)
        w = m.shape[1]
        gid[base[t]:base[t + 1]] = (m.origin[0] + loc // w) * cols + m.origin[1] + loc % w
    by_cell = np.argsort(gid, kind="stable")
    sorted_gid = gid[by_cell]
    if total > 1 and (np.diff(sorted_gid) == 0).any():
        raise InputError("maps: two tiles share a cell; cut the grid into windows that do not "
                         "overlap (tile_windows)")
    src, dst, wgt = [], [], []
    for t, m in enumerate(maps):
        if m.link_to.size:
            pos = np.searchsorted(sorted_gid, m.link_to)
            pos = np.minimum(pos, total - 1)
            if (sorted_gid[pos] != m.link_to).any():
                raise InputError(f"maps: tile {t} sends flow to a cell that is on no tile's "
                                 "perimeter; give the maps of every tile of the grid")
            src.append(total + base[t] + m.link_from.astype(np.int64))
            dst.append(by_cell[pos])
            wgt.append(m.link_weight)
        counts = np.diff(m.map_ptr)
        src.append(base[t] + np.repeat(np.arange(m.n_perimeter, dtype=np.int64), counts))
        dst.append(total + base[t] + m.map_out.astype(np.int64))
        wgt.append(m.map_weight)
    src = np.concatenate(src)
    dst = np.concatenate(dst)
    wgt = np.concatenate(wgt).astype(np.float64)
    by_src = np.argsort(src, kind="stable")
    ptr = np.zeros(2 * total + 1, dtype=np.int64)
    np.cumsum(np.bincount(src, minlength=2 * total), out=ptr[1:])
    value = np.zeros(2 * total, dtype=np.float64)
    local = np.concatenate([m.local_area_m2 for m in maps])
    value[total:] = np.where(np.isnan(local), 0.0, local)
    done = call(_perimeter_kernel, ptr, dst[by_src], wgt[by_src], value, stop=True)
    if done != 2 * total:
        raise InputError("maps: the perimeter graph has a cycle, so the receivers do; route a "
                         "depression-filled surface whose flats are drained")
    return [value[base[t]:base[t + 1]].copy() for t in range(len(maps))]


def finish_tile_accumulation(codes, frac, valid, inflow, dx, dy, method="dinf"):
    """Upslope area of a tile's cells, given the inflow at its perimeter cells.

    Parameters
    ----------
    codes, frac, valid, dx, dy, method
        As :func:`tile_flow_map`.
    inflow : array_like of float64, shape (P,)
        Area in m^2 entering each perimeter cell from other tiles
        (:func:`solve_perimeter`).

    Returns
    -------
    numpy.ndarray of float64, shape (h, w)
        Upslope area in m^2, own cell included; NaN on nodata.

    Raises
    ------
    InputError
        As :func:`tile_flow_map`, or if ``inflow`` has another length or
        holds a negative or non-finite value.

    Examples
    --------
    >>> import numpy as np
    >>> codes = np.full((2, 2), 8, dtype=np.uint8)
    >>> codes[:, -1] = 255
    >>> ok = np.ones((2, 2), bool)
    >>> finish_tile_accumulation(codes, None, ok, [2.0, 0.0, 2.0, 0.0], 1.0, 1.0, "d8")
    array([[3., 4.],
           [3., 4.]])
    """
    code, fr, ok, h, w = _tile_arrays(codes, frac, valid, method)
    dx, dy = _cell_size(dx, dy)
    perim = perimeter_cells((h, w))
    add = np.asarray(inflow, dtype=np.float64).reshape(-1)
    if add.size != perim.size:
        raise InputError(f"inflow: expected {perim.size} values (one per perimeter cell of a "
                         f"{h} x {w} tile), got {add.size}")
    if not np.isfinite(add).all() or (add < 0.0).any():
        raise InputError("inflow: expected finite areas >= 0 (solve_perimeter's result)")
    indeg = np.zeros(h * w, dtype=np.uint8)
    acc = np.empty(h * w, dtype=np.float64)
    _tile_start_kernel(code, fr, ok, h, w, dx * dy, indeg, acc)
    acc[perim] += add
    n = call(_tile_kahn_kernel, code, fr, h, w, indeg, acc, np.empty(0, dtype=np.int32),
             stop=True)
    _check_acyclic(n, ok)
    return acc.reshape(h, w)


def accumulate_tiled(codes, frac, shape, tile_size, method="dinf", dx=1.0, dy=1.0, *,
                     valid=None):
    """Accumulate a whole grid tile by tile, in memory (for tests and measurements).

    Parameters
    ----------
    codes : array_like of uint8
        Receiver codes of the grid: shape ``shape``, or the padded grid
        (``(rows + 2) * (cols + 2)`` cells, flat or 2-D) as the router
        computes them.
    frac : array_like of float32 or None
        D-infinity diagonal shares, laid out like ``codes``; None for D8.
    shape : tuple of int
        (rows, cols) of the grid (unpadded).
    tile_size : int or tuple of int
        Rows and columns of a tile.
    method : {"dinf", "d8"}
    dx, dy : float
        Cell width and height in metres, > 0.
    valid : array_like of bool, shape (rows, cols), optional
        Cells with data (default all); the others get NaN area. Pass
        ``numpy.isfinite(z)`` to match the router's NaN nodata.

    Returns
    -------
    TiledAccumulation
        The area and the sizes of the perimeter system.

    Raises
    ------
    InputError
        As :func:`tile_flow_map` and :func:`solve_perimeter`.

    Examples
    --------
    >>> import numpy as np
    >>> codes = np.full((3, 4), 14, dtype=np.uint8)   # all south (8 + 6)
    >>> codes[-1] = 255
    >>> res = accumulate_tiled(codes, None, (3, 4), 2, "d8", 2.0, 5.0)
    >>> res.area_m2[:, 0]
    array([10., 20., 30.])
    >>> res.perimeter_cells, res.links
    (12, 4)
    """
    rows, cols = _grid_shape(shape)
    code = _grid_layout(codes, (rows, cols), "codes")
    fr = None if method == "d8" or frac is None else _grid_layout(frac, (rows, cols), "frac")
    ok = (np.ones((rows, cols), dtype=bool) if valid is None
          else _grid_layout(valid, (rows, cols), "valid"))
    windows = tile_windows((rows, cols), tile_size)
    cut = [(code[r0:r1, c0:c1], None if fr is None else fr[r0:r1, c0:c1], ok[r0:r1, c0:c1])
           for r0, r1, c0, c1 in windows]
    maps = [tile_flow_map(c, f, v, (r0, c0), (rows, cols), dx, dy, method)
            for (c, f, v), (r0, _, c0, _) in zip(cut, windows)]
    inflows = solve_perimeter(maps)
    area = np.empty((rows, cols), dtype=np.float64)
    for (c, f, v), (r0, r1, c0, c1), add in zip(cut, windows, inflows):
        area[r0:r1, c0:c1] = finish_tile_accumulation(c, f, v, add, dx, dy, method)
    return TiledAccumulation(
        area_m2=area, perimeter_cells=int(sum(m.n_perimeter for m in maps)),
        links=int(sum(m.link_to.size for m in maps)),
        map_entries=int(sum(m.map_out.size for m in maps)),
        peak_tile_bytes=int(max(m.work_bytes for m in maps)))


# --------------------------------------------------------------------------
# Input checks
# --------------------------------------------------------------------------


def _grid_shape(shape):
    try:
        rows, cols = (int(v) for v in shape)
    except (TypeError, ValueError):
        raise InputError(f"shape: expected (rows, cols), got {shape!r}") from None
    if rows < 1 or cols < 1:
        raise InputError(f"shape: expected at least one row and one column, got {shape!r}")
    return rows, cols


def _tile_size(tile_size):
    size = (tile_size, tile_size) if np.ndim(tile_size) == 0 else tuple(tile_size)
    try:
        th, tw = (int(v) for v in size)
        exact = all(float(v) == int(v) for v in size)
    except (TypeError, ValueError):
        raise InputError(f"tile_size: expected a whole number of cells or (rows, cols), "
                         f"got {tile_size!r}") from None
    if not exact or th < 1 or tw < 1:
        raise InputError(f"tile_size: expected whole numbers of cells >= 1, got {tile_size!r}")
    return th, tw


def _cell_size(dx, dy):
    try:
        dx, dy = float(dx), float(dy)
    except (TypeError, ValueError):
        raise InputError(f"dx, dy: expected cell sizes in metres, got {dx!r}, {dy!r}") from None
    if not (np.isfinite(dx) and np.isfinite(dy) and dx > 0.0 and dy > 0.0):
        raise InputError(f"dx, dy: expected finite cell sizes > 0 m, got {dx!r}, {dy!r}")
    return dx, dy


def _grid_layout(a, shape, name):
    """An unpadded (rows, cols) view of a grid array given unpadded or padded."""
    arr = np.asarray(a)
    rows, cols = shape
    if arr.size == rows * cols:
        return arr.reshape(rows, cols)
    if arr.size == (rows + 2) * (cols + 2):
        return arr.reshape(rows + 2, cols + 2)[1:-1, 1:-1]
    raise InputError(f"{name}: expected {rows} x {cols} cells, or the padded "
                     f"{rows + 2} x {cols + 2}, got {arr.size} cells")


def _tile_arrays(codes, frac, valid, method):
    """Flat contiguous copies (or views) of a tile's codes, shares and data mask."""
    if not isinstance(method, str) or method not in TILED_METHODS:
        raise InputError(f"method: the tiled accumulation takes one of "
                         f"{', '.join(repr(m) for m in TILED_METHODS)}, got {method!r}")
    code = np.asarray(codes)
    if code.ndim != 2 or code.size == 0:
        raise InputError(f"codes: expected a non-empty 2-D tile, got shape {code.shape}")
    if code.dtype != np.uint8:
        raise InputError(f"codes: expected uint8 receiver codes, got {code.dtype}")
    h, w = code.shape
    ok = np.asarray(valid, dtype=bool)
    if ok.shape != (h, w):
        raise InputError(f"valid: expected shape {(h, w)} like codes, got {ok.shape}")
    used = code[code != NO_DIRECTION]
    if (used >= _MULTI).any():
        raise InputError("codes: MFD cells (code 16) or unknown codes; the tiled accumulation "
                         "takes D-infinity or D8 receivers")
    if method == "d8":
        if (used < _SINGLE).any():
            raise InputError("codes: D-infinity facets in codes routed with method='d8'; give "
                             "method='dinf' and the fractions")
        fr = np.zeros(1, dtype=np.float32)
    else:
        if frac is None:
            fr = np.zeros(1, dtype=np.float32)
            if (used < _SINGLE).any():
                raise InputError("frac: D-infinity codes need their fractions; give frac")
        else:
            fr = np.asarray(frac, dtype=np.float32)
            if fr.shape != (h, w):
                raise InputError(f"frac: expected shape {(h, w)} like codes, got {fr.shape}")
            fr = np.ascontiguousarray(fr).reshape(-1)
    return (np.ascontiguousarray(code).reshape(-1), fr, np.ascontiguousarray(ok).reshape(-1),
            h, w)


def _check_acyclic(n, ok):
    if n < 0:
        return  # stopped by a signal; the caller's exception follows
    if n != int(np.count_nonzero(ok)):
        raise InputError("codes: the receivers form a cycle (some cells never become ready); "
                         "route a depression-filled surface whose flats are drained")


# --------------------------------------------------------------------------
# Kernels
# --------------------------------------------------------------------------
# The small helpers take and return scalars only: the neighbour and facet tables are read as
# module constants, so a call costs no reference counting and compiles inline.


@njit
def _targets(cd, f):
    """Receivers of a cell of code ``cd`` and diagonal share ``f``: (count, k0, w0, k1, w1)."""
    if cd == NO_DIRECTION:
        return 0, 0, 0.0, 0, 0.0
    if cd < _SINGLE:
        if f <= 0.0:
            return 1, _FACET_CARD[cd], 1.0 - f, 0, 0.0
        if f >= 1.0:
            return 1, _FACET_DIAG[cd], f, 0, 0.0
        return 2, _FACET_CARD[cd], 1.0 - f, _FACET_DIAG[cd], f
    return 1, np.int64(cd) - _SINGLE, 1.0, 0, 0.0


@njit
def _share(codes, frac, p):
    """D-infinity diagonal share of cell p (0 for single-direction cells)."""
    if codes[p] < _SINGLE:
        return np.float64(frac[p])
    return 0.0


@njit
def _inner(cd, f, p, h, w):
    """Receivers of tile cell p inside the tile: (count, q0, w0, q1, w1, leaves).

    ``q0``, ``q1`` are tile indices; ``leaves`` is True when some of p's flow
    goes to a cell outside the tile.
    """
    m, k0, w0, k1, w1 = _targets(cd, f)
    r = p // w
    c = p - r * w
    n = 0
    q0 = -1
    v0 = 0.0
    q1 = -1
    v1 = 0.0
    leaves = False
    for i in range(m):
        k = k0 if i == 0 else k1
        rr = r + DROW[k]
        cc = c + DCOL[k]
        if 0 <= rr < h and 0 <= cc < w:
            if n == 0:
                q0 = rr * w + cc
                v0 = w0 if i == 0 else w1
            else:
                q1 = rr * w + cc
                v1 = w1
            n += 1
        else:
            leaves = True
    return n, q0, v0, q1, v1, leaves


@njit
def _perimeter_index(r, c, h, w):
    """Number of perimeter cell (r, c) of an h x w tile (row-major among perimeter cells)."""
    middle = 2 if w >= 2 else 1
    if r == 0:
        return c
    if r == h - 1:
        return w + middle * (h - 2) + c
    return w + middle * (r - 1) + (0 if c == 0 else 1)


@njit
def _tile_start_kernel(codes, frac, valid, h, w, area, indeg, acc):
    """Initial area (NaN on nodata) and in-tile donor count (255 on nodata); indeg starts at 0."""
    for p in range(h * w):
        if valid[p]:
            acc[p] = area
        else:
            acc[p] = np.nan
            indeg[p] = _DONE
    for p in range(h * w):
        if not valid[p]:
            continue
        k, q0, _, q1, _, _ = _inner(codes[p], _share(codes, frac, p), p, h, w)
        if k > 0:
            indeg[q0] += 1
        if k > 1:
            indeg[q1] += 1


@njit
def _tile_kahn_kernel(codes, frac, h, w, indeg, acc, order, stop):
    """Kahn's accumulation of ``acc`` inside one tile (links leaving it are skipped).

    Records the order in ``order`` when it is not empty. Returns the number of
    cells processed, or -1 once ``stop[0]`` is set (a signal).
    """
    stack = np.empty(1024, dtype=np.int64)
    record = order.size > 0
    n = 0
    for s in range(h * w):
        if indeg[s] != 0:
            continue
        indeg[s] = _DONE
        stack[0] = s
        top = 1
        while top > 0:
            if n % POLL == POLL - 1 and stop[0] != 0:
                return -1
            top -= 1
            p = stack[top]
            if record:
                order[n] = p
            n += 1
            k, q0, v0, q1, v1, _ = _inner(codes[p], _share(codes, frac, p), p, h, w)
            a = acc[p]
            for i in range(k):
                q = q0 if i == 0 else q1
                acc[q] += a * (v0 if i == 0 else v1)
                indeg[q] -= 1
                if indeg[q] == 0:
                    indeg[q] = _DONE
                    if top == stack.size:
                        bigger = np.empty(2 * stack.size, dtype=np.int64)
                        bigger[:top] = stack[:top]
                        stack = bigger
                    stack[top] = q
                    top += 1
    return n


@njit
def _tile_links_kernel(codes, frac, h, w, r0, c0, rows, cols, perim):
    """Links from perimeter cells to cells of other tiles; count -1 if one leaves the grid."""
    link_from = np.empty(2 * perim.size, dtype=np.int32)
    link_to = np.empty(2 * perim.size, dtype=np.int64)
    link_w = np.empty(2 * perim.size, dtype=np.float64)
    n = 0
    for i in range(perim.size):
        p = perim[i]
        m, k0, w0, k1, w1 = _targets(codes[p], _share(codes, frac, p))
        r = p // w
        c = p - r * w
        for j in range(m):
            k = k0 if j == 0 else k1
            rr = r + DROW[k]
            cc = c + DCOL[k]
            if 0 <= rr < h and 0 <= cc < w:
                continue
            gr = r0 + rr
            gc = c0 + cc
            if gr < 0 or gr >= rows or gc < 0 or gc >= cols:
                return -1, link_from, link_to, link_w
            link_from[n] = i
            link_to[n] = gr * cols + gc
            link_w[n] = w0 if j == 0 else w1
            n += 1
    return n, link_from, link_to, link_w


@njit
def _tile_map_kernel(codes, frac, h, w, order, n, perim, stop):
    """The tile map M as columns (one per perimeter cell), from a reverse topological sweep.

    Returns ``(ptr, out, weight, entries written, arena capacity)``; the map
    is unfinished if ``stop[0]`` was set (a signal).
    """
    hw = h * w
    reach = np.zeros(hw, dtype=np.uint8)
    for i in range(perim.size):
        reach[perim[i]] = 1
    for t in range(n):
        p = order[t]
        if reach[p] == 0:
            continue
        k, q0, _, q1, _, _ = _inner(codes[p], _share(codes, frac, p), p, h, w)
        if k > 0:
            reach[q0] = 1
        if k > 1:
            reach[q1] = 1
    start = np.zeros(hw, dtype=np.int64)
    length = np.zeros(hw, dtype=np.int32)
    cap = max(1024, 4 * perim.size)
    ent_o = np.empty(cap, dtype=np.int32)
    ent_w = np.empty(cap, dtype=np.float64)
    used = 0
    for t in range(n - 1, -1, -1):
        if (n - 1 - t) % POLL == POLL - 1 and stop[0] != 0:
            return np.zeros(perim.size + 1, dtype=np.int64), ent_o[:0], ent_w[:0], used, cap
        p = order[t]
        if reach[p] == 0:
            continue
        k, q0, wa, q1, wb, leaves = _inner(codes[p], _share(codes, frac, p), p, h, w)
        if not leaves:
            if k == 0:
                continue  # an outlet or pit: the area stops here
            if k == 1 and wa == 1.0:
                start[p] = start[q0]  # same vector as the receiver
                length[p] = length[q0]
                continue
        # merge [p leaves] e_p, wa R(q0) and wb R(q1), sorted by perimeter cell
        a = start[q0] if k > 0 else 0
        a_end = a + (length[q0] if k > 0 else 0)
        b = start[q1] if k > 1 else 0
        b_end = b + (length[q1] if k > 1 else 0)
        need = (1 if leaves else 0) + (a_end - a) + (b_end - b)
        if used + need > cap:
            cap = max(2 * cap, used + need)
            bigger_o = np.empty(cap, dtype=np.int32)
            bigger_w = np.empty(cap, dtype=np.float64)
            bigger_o[:used] = ent_o[:used]
            bigger_w[:used] = ent_w[:used]
            ent_o = bigger_o
            ent_w = bigger_w
        self_key = _perimeter_index(p // w, p % w, h, w) if leaves else -1
        first = used
        while self_key >= 0 or a < a_end or b < b_end:
            key = 2147483647
            if self_key >= 0:
                key = self_key
            if a < a_end and ent_o[a] < key:
                key = ent_o[a]
            if b < b_end and ent_o[b] < key:
                key = ent_o[b]
            v = 0.0
            if self_key == key:
                v += 1.0
                self_key = -1
            if a < a_end and ent_o[a] == key:
                v += wa * ent_w[a]
                a += 1
            if b < b_end and ent_o[b] == key:
                v += wb * ent_w[b]
                b += 1
            ent_o[used] = key
            ent_w[used] = v
            used += 1
        start[p] = first
        length[p] = used - first
    ptr = np.zeros(perim.size + 1, dtype=np.int64)
    for i in range(perim.size):
        ptr[i + 1] = ptr[i] + length[perim[i]]
    out = np.empty(ptr[-1], dtype=np.int32)
    weight = np.empty(ptr[-1], dtype=np.float64)
    for i in range(perim.size):
        s = start[perim[i]]
        for j in range(length[perim[i]]):
            out[ptr[i] + j] = ent_o[s + j]
            weight[ptr[i] + j] = ent_w[s + j]
    return ptr, out, weight, used, cap


@njit
def _perimeter_kernel(ptr, dst, wgt, value, stop):
    """Kahn's sum over the perimeter graph (CSR by source) in place; returns nodes done."""
    nn = ptr.size - 1
    indeg = np.zeros(nn, dtype=np.int64)
    for e in range(dst.size):
        indeg[dst[e]] += 1
    stack = np.empty(nn, dtype=np.int64)
    top = 0
    for u in range(nn):
        if indeg[u] == 0:
            stack[top] = u
            top += 1
    done = 0
    while top > 0:
        if done % POLL == POLL - 1 and stop[0] != 0:
            return -1
        top -= 1
        u = stack[top]
        done += 1
        x = value[u]
        for e in range(ptr[u], ptr[u + 1]):
            v = dst[e]
            value[v] += wgt[e] * x
            indeg[v] -= 1
            if indeg[v] == 0:
                stack[top] = v
                top += 1
    return done
