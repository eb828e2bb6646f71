"""Drainage directions over flat areas (Barnes, Lehman & Mulla 2014).

A depression-filled DEM is full of flats: 8-connected cells of one elevation
with no strictly lower neighbour, across which no steepest-descent direction
exists. Following Garbrecht & Martz (1997) in the O(n) breadth-first form of
Barnes, Lehman & Mulla (2014), every flat gets a synthetic gradient made of a
gradient *toward lower terrain* and a gradient *away from higher terrain*,
and each flat cell gets the D8 direction down that combined gradient. The DEM
itself is never changed; only directions are produced.

Cell classes used by the kernels (one ``uint8`` per padded cell):

* ``0`` nodata (and the padding ring);
* ``1`` a valid cell with a strictly lower valid neighbour (routes normally);
* ``2`` an *outlet*: no strictly lower valid neighbour but at least one
  nodata or outside neighbour; its flow leaves the grid;
* ``3`` an interior flat cell: no strictly lower valid neighbour and no
  nodata neighbour. These are the cells that need a synthetic direction;
  class ``4`` is the same with a higher neighbour (the flat's high edge).
"""

import numpy as np

from .. import _validate
from .._neighbours import NO_DIRECTION, linear_offsets, neighbour_distances, pad_nan, unpad
from .._numba import njit, njit_parallel, prange
from .._stoppable import POLL, call

__all__ = ["drainage_over_flats"]

_NODATA = 0
_SLOPE = 1
_OUTLET = 2
_FLAT = 3


def drainage_over_flats(z, valid=None):
    """Return D8 directions that drain every flat toward its outlets.

    Parameters
    ----------
    z : array_like, shape (rows, cols)
        Elevations in metres (usually depression-filled); NaN marks nodata.
        Rows run north to south. Never modified.
    valid : array_like of bool, optional
        Cells to use; False is treated as nodata.

    Returns
    -------
    numpy.ndarray of uint8, shape (rows, cols)
        For every interior flat cell that can drain, the neighbour code
        (0..7, counter-clockwise from east, see :mod:`slopescreen._neighbours`)
        of the next cell on its way off the flat; ``NO_DIRECTION`` (255)
        everywhere else: cells with a lower neighbour, outlets on the data
        edge, nodata, pits, and flats that have no outlet at all.

    Raises
    ------
    InputError
        If ``z`` is not a 2-D grid of at least 3 x 3 cells, holds infinite
        values or has no valid cell, or if ``valid`` has another shape.

    Notes
    -----
    A *flat* is a set of 8-connected cells of exactly equal elevation with no
    strictly lower valid neighbour. Its *low edge* is made of the cells of the
    same elevation that do have a lower neighbour, plus (our rule) the flat's
    own cells on the data edge, which drain off the grid (outlets, left
    without a direction). Its *high edge* is made of flat cells next to
    higher terrain. Two breadth-first searches (8-connected, restricted to
    the flat) give, for each flat cell c, the step distance t(c) from the low
    edge (t = 1 next to it) and the step distance h(c) from the high edge
    (h = 1 on it; h = 0 if the flat touches no higher terrain). The combined
    mask of Barnes et al. (2014) is

    .. math:: m(c) = 2\\,t(c) + \\bigl(H - h(c)\\bigr),

    with H the largest h on the flat; we use one constant H for all flats,
    which changes no comparison inside a flat. Each flat cell points to the
    neighbour of the same flat with the smallest mask, a low-edge neighbour
    first (ties: the shorter step, then the lower code). Because t falls by
    1 and h changes by at most 1 per step, m falls by at least 1 along every
    direction, so the directions form no cycle and every path ends on the
    low edge. Flow converges toward the flat's outlets instead of running in
    parallel lines. A flat with no low edge (possible only on an unfilled
    surface) stays without direction. Cost O(n); the queues hold int32
    indices (int64 on grids above 2**31 cells) and only as many entries as
    there are flat cells.

    References
    ----------
    Barnes, R., Lehman, C., Mulla, D. (2014). An efficient assignment of
    drainage direction over flat surfaces in raster digital elevation
    models. Computers & Geosciences 62, 128-135.
    doi:10.1016/j.cageo.2013.01.009 (arXiv:1511.04433).

    Garbrecht, J., Martz, L.W. (1997). The assignment of drainage direction
    over flat surfaces in raster digital elevation models. Journal of
    Hydrology 193, 204-213 (volume and pages from memory).

    Examples
    --------
    A 3 x 5 flat at 1 m ringed by 2 m walls, with a 0 m notch in the east
    wall. The flat's last column has a lower neighbour (the notch) and routes
    normally (255 here); the rest drains toward it and away from the walls,
    so the paths converge on the middle row (0 = east, 1 = north-east,
    7 = south-east).

    >>> import numpy as np
    >>> from slopescreen.routing import drainage_over_flats
    >>> z = np.full((5, 7), 2.0)
    >>> z[1:4, 1:6] = 1.0
    >>> z[2, 6] = 0.0
    >>> drainage_over_flats(z)[1:4, 1:6]
    array([[  7,   7,   7,   0, 255],
           [  0,   0,   0,   0, 255],
           [  1,   1,   1,   0, 255]], dtype=uint8)
    """
    arr, _ = _validate.surface(z, valid, name="z")
    zp = pad_nan(arr)
    dirs, _ = _flat_directions_padded(zp)
    return np.ascontiguousarray(unpad(dirs))


def _flat_directions_padded(zp):
    """Flat directions on a NaN-padded grid (internal entry point of the router).

    Parameters
    ----------
    zp : numpy.ndarray, shape (rows + 2, cols + 2), float32 or float64
        Padded surface with NaN for nodata and on the ring; not modified.

    Returns
    -------
    dirs : numpy.ndarray of uint8, same shape as ``zp``
        Neighbour code for each interior flat cell that drains, else 255.
    undrained : int
        Number of interior flat cells left without a direction (flats with
        no outlet).
    """
    nrows, ncols = zp.shape
    flat = zp.reshape(-1)
    offsets = linear_offsets(ncols)
    cls = np.zeros(flat.size, dtype=np.uint8)
    n_flat = _flat_classes_kernel(flat, nrows, ncols, offsets, cls)
    dirs = np.full(zp.shape, NO_DIRECTION, dtype=np.uint8)
    if n_flat == 0:
        return dirs, 0
    flat_dirs = dirs.reshape(-1)
    _low_edge_kernel(flat, cls, nrows, ncols, offsets, flat_dirs)
    index_type = np.int32 if flat.size < 2**31 else np.int64
    # m = 2 t + H + 1 - h stays below 3 n, which must fit the mask type.
    mask_type = np.int32 if 3 * flat.size < 2**31 else np.int64
    queue = np.empty(n_flat, dtype=index_type)
    mask = np.zeros(flat.size, dtype=mask_type)
    drained = call(_flat_gradients_kernel, flat, cls, offsets, queue, mask, flat_dirs, stop=True)
    del queue
    # Distances only break ties, so unit cells are enough and keep the
    # choice independent of the cell size.
    dist = neighbour_distances(1.0, 1.0)
    _flat_dirs_kernel(flat, cls, nrows, ncols, offsets, dist, mask, flat_dirs)
    return dirs, int(n_flat - drained)


_FLAT_HIGH = 4
"""Class of an interior flat cell next to higher terrain (a high-edge cell)."""

_LOW_MARK = 254
"""Temporary mark in ``dirs``: a flat cell next to the flat's low edge."""


@njit_parallel
def _flat_classes_kernel(zp, nrows, ncols, offsets, cls):
    """Class of each padded cell: 0 nodata, 1 slope, 2 outlet, 3 flat, 4 flat on the high edge.

    Returns the number of flat cells (classes 3 and 4).
    """
    count = 0
    for r in prange(1, nrows - 1):
        for c in range(1, ncols - 1):
            p = r * ncols + c
            z0 = zp[p]
            if not (z0 == z0):
                continue
            lower = False
            edge = False
            higher = False
            for k in range(8):
                zk = zp[p + offsets[k]]
                if zk != zk:
                    edge = True
                elif zk < z0:
                    lower = True
                    break
                elif zk > z0:
                    higher = True
            if lower:
                cls[p] = _SLOPE
            elif edge:
                cls[p] = _OUTLET
            else:
                cls[p] = _FLAT_HIGH if higher else _FLAT
                count += 1
    return count


@njit_parallel
def _low_edge_kernel(zp, cls, nrows, ncols, offsets, dirs):
    """Mark (254 in ``dirs``) the flat cells next to a same-elevation cell that drains."""
    for r in prange(1, nrows - 1):
        for c in range(1, ncols - 1):
            p = r * ncols + c
            if cls[p] < _FLAT:
                continue
            z0 = zp[p]
            for k in range(8):
                q = p + offsets[k]
                cq = cls[q]
                if (cq == _SLOPE or cq == _OUTLET) and zp[q] == z0:
                    dirs[p] = _LOW_MARK
                    break


@njit
def _flat_gradients_kernel(zp, cls, offsets, queue, mask, dirs, stop):
    """Two breadth-first searches over the flats, combined into ``mask``.

    ``mask`` starts at zero. The away-from-higher search stores ``-h`` (h >= 1)
    on the cells it reaches; the toward-lower search then overwrites each
    cell it reaches with the combined value ``2 t + H + 1 - h`` (> 0), so a
    positive mask marks a drained flat cell. Returns the number of drained
    flat cells, or -1 once ``stop[0]`` is set (a signal; ``mask`` unfinished).
    """
    # -- gradient away from higher terrain: BFS from the high edge --------
    tail = 0
    for p in range(zp.size):
        if cls[p] == _FLAT_HIGH:
            mask[p] = -1
            queue[tail] = p
            tail += 1
    head = 0
    level = 1
    height = 0
    while head < tail:
        height = level
        level_end = tail
        while head < level_end:
            if head % POLL == 0 and stop[0] != 0:
                return -1
            p = queue[head]
            head += 1
            z0 = zp[p]
            for k in range(8):
                q = p + offsets[k]
                if cls[q] >= _FLAT and mask[q] == 0 and zp[q] == z0:
                    mask[q] = -(level + 1)
                    queue[tail] = q
                    tail += 1
        level += 1
    base = height + 1

    # -- gradient toward lower terrain: BFS from the low edge -------------
    tail = 0
    for p in range(zp.size):
        if dirs[p] == _LOW_MARK:
            mask[p] = 2 + base + mask[p]
            queue[tail] = p
            tail += 1
    head = 0
    level = 1
    while head < tail:
        level_end = tail
        while head < level_end:
            if head % POLL == 0 and stop[0] != 0:
                return -1
            p = queue[head]
            head += 1
            z0 = zp[p]
            for k in range(8):
                q = p + offsets[k]
                if cls[q] >= _FLAT and mask[q] <= 0 and zp[q] == z0:
                    mask[q] = 2 * (level + 1) + base + mask[q]
                    queue[tail] = q
                    tail += 1
        level += 1
    return tail


@njit_parallel
def _flat_dirs_kernel(zp, cls, nrows, ncols, offsets, dist, mask, dirs):
    """D8 down the combined mask for every drained flat cell (255 for the rest)."""
    for r in prange(1, nrows - 1):
        for c in range(1, ncols - 1):
            p = r * ncols + c
            if cls[p] < _FLAT:
                continue
            if mask[p] <= 0:
                dirs[p] = NO_DIRECTION
                continue
            z0 = zp[p]
            best_key = np.int64(-1)
            best_d = np.inf
            best_k = -1
            for k in range(8):
                q = p + offsets[k]
                if zp[q] != z0:
                    continue
                cq = cls[q]
                if cq == _SLOPE or cq == _OUTLET:
                    key = np.int64(0)
                elif cq >= _FLAT:
                    key = np.int64(mask[q])
                else:
                    continue
                if best_k < 0 or key < best_key or (key == best_key and dist[k] < best_d):
                    best_key = key
                    best_d = dist[k]
                    best_k = k
            dirs[p] = best_k
