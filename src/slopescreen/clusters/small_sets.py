"""Exact least-stable cluster of a few cells, by enumerating every connected shape.

Small area bands are the hardest for the mixed-integer program (its relaxation
cannot see an upper area limit) and the easiest to enumerate: a 4-connected set
of at most k cells is one of the fixed polyominoes of up to k cells placed
somewhere in the window (1, 2, 6, 19, 63 and 216 shapes of 1 to 6 cells;
Redelmeier 1981, from memory). For each shape the FS of every placement is
computed at once from the window terms of
:func:`~slopescreen.clusters.heuristic.band_terms`:
N = sum of c_N over the cells minus p_N over the pairs inside, likewise D
(docs/methods.md, "Multi-cell failure clusters").

References
----------
Redelmeier, D.H. (1981). Counting polyominoes: yet another attack. Discrete
Mathematics 36(2), 191-203 (from memory).
"""

from functools import lru_cache

import numpy as np

from ._faces import FACE_DCOL, FACE_DROW, HALF

__all__ = ["ENUMERATION_MAX_CELLS", "polyominoes", "least_stable_small"]

ENUMERATION_MAX_CELLS = 6
"""Bands whose upper limit is at most this many cells are solved by enumeration."""

_SIDES = ((0, 1), (-1, 0), (0, -1), (1, 0))


@lru_cache(maxsize=None)
def polyominoes(k):
    """Every fixed polyomino of k cells: a tuple of sorted (row, col) offset tuples, min 0.

    Grown cell by cell from the shapes of k - 1 cells and normalised, so
    translates are counted once and rotations or reflections apart.

    Examples
    --------
    >>> [len(polyominoes(k)) for k in range(1, 7)]
    [1, 2, 6, 19, 63, 216]
    """
    if k < 1:
        raise ValueError("k must be >= 1")
    if k == 1:
        return (((0, 0),),)
    out = set()
    for shape in polyominoes(k - 1):
        cells = set(shape)
        for r, c in shape:
            for dr, dc in _SIDES:
                cell = (r + dr, c + dc)
                if cell in cells:
                    continue
                grown = cells | {cell}
                r0 = min(p[0] for p in grown)
                c0 = min(p[1] for p in grown)
                out.add(tuple(sorted((p[0] - r0, p[1] - c0) for p in grown)))
    return tuple(sorted(out))


def _inner_pairs(shape):
    """(cell offset, pair code) of each unordered pair of the 16 with both cells in the shape."""
    cells = set(shape)
    out = []
    for r, c in shape:
        for k in HALF:
            if (r + int(FACE_DROW[k]), c + int(FACE_DCOL[k])) in cells:
                out.append(((r, c), int(k)))
    return out


def least_stable_small(terms, kmin, kmax):
    """Least FS over every 4-connected set of kmin..kmax valid cells of a window.

    Parameters
    ----------
    terms : BandTerms
        :func:`~slopescreen.clusters.heuristic.band_terms` of the window.
    kmin, kmax : int
        Band in cells, 1 <= kmin <= kmax <= :data:`ENUMERATION_MAX_CELLS`.

    Returns
    -------
    fs : float
        The least N / D (inf when no such set has a driving force).
    mask : numpy.ndarray of bool or None
        A set that reaches it (the first shape and placement in a fixed
        order).

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.clusters.forces import cluster_forces, cluster_factor_of_safety
    >>> from slopescreen.clusters.heuristic import band_terms
    >>> f = cluster_forces(np.full((5, 5), 40.0), np.full((5, 5), 180.0), 1.0, 0.5, dx=5.0,
    ...     dy=5.0, cohesion_kpa=1.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=2.0,
    ...     friction_deg=33.0, unit_weight_kn_m3=18.0)
    >>> fs, mask = least_stable_small(band_terms(f), 2, 4)
    >>> int(mask.sum()) in (2, 3, 4), abs(fs - cluster_factor_of_safety(f, mask)) < 1e-12
    (True, True)
    """
    kmin, kmax = int(kmin), int(kmax)
    if not 1 <= kmin <= kmax <= ENUMERATION_MAX_CELLS:
        raise ValueError(f"band {kmin}..{kmax} cells is outside 1..{ENUMERATION_MAX_CELLS}")
    valid = terms.valid
    rows, cols = valid.shape
    best_fs = np.inf
    best = None
    for k in range(kmin, kmax + 1):
        for shape in polyominoes(k):
            h = 1 + max(p[0] for p in shape)
            w = 1 + max(p[1] for p in shape)
            if h > rows or w > cols:
                continue
            pr, pc = rows - h + 1, cols - w + 1
            ok = np.ones((pr, pc), dtype=bool)
            n = np.zeros((pr, pc))
            d = np.zeros((pr, pc))
            for r, c in shape:
                ok &= valid[r:r + pr, c:c + pc]
                n += terms.cn[r:r + pr, c:c + pc]
                d += terms.cd[r:r + pr, c:c + pc]
            for (r, c), kk in _inner_pairs(shape):
                n -= terms.pn[kk][r:r + pr, c:c + pc]
                d -= terms.pd[kk][r:r + pr, c:c + pc]
            with np.errstate(divide="ignore", invalid="ignore"):
                q = np.where(ok & (d > 0.0), n / d, np.inf)
            i = int(np.argmin(q))
            if q.flat[i] < best_fs:
                best_fs = float(q.flat[i])
                r0, c0 = divmod(i, pc)
                best = np.zeros((rows, cols), dtype=bool)
                for r, c in shape:
                    best[r0 + r, c0 + c] = True
    return best_fs, best
