"""The 16 cell pairs that carry margin forces, and their Cauchy-Crofton weights.

A margin force acts between a cell p of a cluster and a cell q = p + e_k
outside it, for the 16 steps e_k: the 8 neighbours of
:mod:`slopescreen._neighbours` (codes 0..7, counter-clockwise from east) and
the 8 knight moves (codes 8..15, counter-clockwise from 26.57 degrees). A
straight margin with outward normal n, of length l, is crossed by
l (e_k . n)_+ / (dx dy) such pairs in direction k; weighting pair k by

    a_k = r(phi_k) dphi_k dx dy / (2 |e_k|)

charges sum_k r(phi_k) (dphi_k / 2) cos_+(psi - phi_k) per metre, a
quadrature of the integral of r(phi)/2 cos_+(psi - phi) over the circle,
which is r(psi) for a uniform r and, for any r, does not depend on the
margin's angle to the grid beyond the quadrature error (Cauchy-Crofton
weights: Boykov and Kolmogorov 2003; docs/methods.md, "Multi-cell failure
clusters"). dphi_k is half the angle between the two directions next to
phi_k, so the dphi_k sum to 2 pi.

References
----------
Boykov, Y., Kolmogorov, V. (2003). Computing geodesics and minimal surfaces
via graph cuts. Proc. 9th IEEE International Conference on Computer Vision,
26-33 (from memory).
"""

import math

import numpy as np
from scipy import sparse
from scipy.sparse.csgraph import connected_components

N_FACES = 16
"""Directed cell pairs per cell."""

FACE_DROW = np.array([0, -1, -1, -1, 0, 1, 1, 1, -1, -2, -2, -1, 1, 2, 2, 1], dtype=np.int64)
"""Row step of pair k (row grows southward)."""

FACE_DCOL = np.array([1, 1, 0, -1, -1, -1, 0, 1, 2, 1, -1, -2, -2, -1, 1, 2], dtype=np.int64)
"""Column step of pair k (column grows eastward)."""

OPPOSITE = np.array([(k // 8) * 8 + (k % 8 + 4) % 8 for k in range(N_FACES)], dtype=np.int64)
"""The pair seen from the other cell: e_OPPOSITE[k] = -e_k."""

HALF = np.array([0, 1, 2, 3, 8, 9, 10, 11], dtype=np.int64)
"""One direction of each opposite pair (each unordered pair once)."""

REACH = 2
"""Largest row or column step of a pair."""

# pair codes ordered by (row step, column step): on a row-major index of the
# cells this visits the partners of a cell in ascending index order
ASCENDING = np.lexsort((FACE_DCOL, FACE_DROW)).astype(np.int64)

PAIR_STRUCTURE = np.zeros((2 * REACH + 1, 2 * REACH + 1), dtype=bool)
"""5 x 5 footprint of a cell and its 16 partners (for dilations)."""
PAIR_STRUCTURE[REACH + FACE_DROW, REACH + FACE_DCOL] = True
PAIR_STRUCTURE[REACH, REACH] = True


def face_geometry(dx, dy):
    """(east, north, factor): unit direction and weight factor of each pair, float64 (16,).

    ``factor`` is dphi_k dx dy / (2 |e_k|), m: the resistance charged to pair
    k is ``factor`` times the per-metre resistance r(phi_k) of a margin whose
    outward normal points along e_k.

    Examples
    --------
    >>> e, n, f = face_geometry(1.0, 1.0)
    >>> round(float(f[0]), 4), round(float(f[1]), 4), round(float(f[8]), 4)
    (0.2318, 0.1138, 0.0878)
    """
    ex = FACE_DCOL * float(dx)
    ny = -FACE_DROW * float(dy)
    length = np.hypot(ex, ny)
    ang = np.arctan2(ny, ex)
    order = np.argsort(ang)
    s = ang[order]
    prev = np.roll(s, 1)
    prev[0] -= 2.0 * math.pi
    nxt = np.roll(s, -1)
    nxt[-1] += 2.0 * math.pi
    dphi = np.empty(N_FACES)
    dphi[order] = 0.5 * (nxt - prev)
    factor = dphi * float(dx) * float(dy) / (2.0 * length)
    return ex / length, ny / length, factor


def pair_slices(k, rows, cols):
    """(p, q): slices of the cells p whose partner q = p + e_k lies on a rows x cols grid.

    ``grid[p]`` and ``grid[q]`` line up: element i of one is the partner of
    element i of the other.

    Examples
    --------
    >>> g = np.arange(12).reshape(3, 4)
    >>> p, q = pair_slices(8, 3, 4)   # knight move: one row up, two columns east
    >>> g[p].tolist(), g[q].tolist()
    ([[4, 5], [8, 9]], [[2, 3], [6, 7]])
    """
    dr, dc = int(FACE_DROW[k]), int(FACE_DCOL[k])
    p = (slice(max(0, -dr), rows - max(0, dr)), slice(max(0, -dc), cols - max(0, dc)))
    q = (slice(max(0, dr), rows - max(0, -dr)), slice(max(0, dc), cols - max(0, -dc)))
    return p, q


def pair_components(mask):
    """(labels, n) of the components of ``mask`` joined through the 16 pairs.

    Two cells of different components form no pair, so no margin force
    joins them (the form of :func:`scipy.ndimage.label`: labels 1..n, 0 off
    the mask).

    Examples
    --------
    >>> m = np.zeros((3, 4), bool); m[0, 0] = m[1, 2] = m[2, 3] = True
    >>> pair_components(m)[1]   # (0, 0) and (1, 2) are a knight move apart
    1
    """
    m = np.asarray(mask, dtype=bool)
    rows, cols = m.shape
    labels = np.zeros((rows, cols), dtype=np.int32)
    cells = np.flatnonzero(m)
    if cells.size == 0:
        return labels, 0
    index = -np.ones(rows * cols, dtype=np.int64)
    index[cells] = np.arange(cells.size)
    r, c = np.divmod(cells, cols)
    src, dst = [], []
    for k in HALF:
        rr = r + FACE_DROW[k]
        cc = c + FACE_DCOL[k]
        ok = (rr >= 0) & (rr < rows) & (cc >= 0) & (cc < cols)
        j = np.full(cells.size, -1, dtype=np.int64)
        j[ok] = index[rr[ok] * cols + cc[ok]]
        hit = j >= 0
        src.append(np.flatnonzero(hit))
        dst.append(j[hit])
    src = np.concatenate(src)
    dst = np.concatenate(dst)
    graph = sparse.coo_array((np.ones(src.size), (src, dst)), shape=(cells.size, cells.size))
    n, lab = connected_components(graph, directed=False)
    # number the components in raster order of their first cell, as ndimage.label does
    first = np.full(n, cells.size)
    np.minimum.at(first, lab, np.arange(cells.size))
    rank = np.empty(n, dtype=np.int32)
    rank[np.argsort(first)] = np.arange(1, n + 1, dtype=np.int32)
    labels.ravel()[cells] = rank[lab]
    return labels, int(n)
