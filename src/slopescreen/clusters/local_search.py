"""Local search on connected sets of cells: repair into an area band, improve by single moves.

Part of the heuristic of :mod:`slopescreen.clusters.heuristic` (the warm start of
the exact program). A move adds a cell next to the set or removes one that is not
an articulation cell, so the set stays 4-connected; it is taken when it lowers
FS = N / D (or brings the set into the band). The terms N, D are those of
:func:`~slopescreen.clusters.heuristic.band_terms`.
"""

import math

import numpy as np

from .._numba import njit
from ._faces import FACE_DCOL, FACE_DROW, HALF, N_FACES

__all__ = ["local_search"]

_DR = (0, -1, 0, 1)
_DC = (1, 0, -1, 0)
"""Row and column steps to the four cells that share a side (the set's connectivity)."""


@njit
def _touches(mask, r, c):
    """True when a 4-neighbour of cell (r, c) is in the set."""
    h, w = mask.shape
    for k in range(4):
        rr = r + _DR[k]
        cc = c + _DC[k]
        if 0 <= rr < h and 0 <= cc < w and mask[rr, cc]:
            return True
    return False


@njit
def _ratio(n, d):
    if d <= 0.0:
        return math.inf
    return n / d


@njit
def _articulation_kernel(mask, art, disc, low, parent, it, stack):
    """Mark the articulation cells of the 4-connected set ``mask`` (iterative Tarjan).

    A cell is an articulation cell when removing it splits its component.
    """
    h, w = mask.shape
    for r in range(h):
        for c in range(w):
            art[r, c] = False
            disc[r, c] = -1
    t = 0
    for r0 in range(h):
        for c0 in range(w):
            if not mask[r0, c0] or disc[r0, c0] >= 0:
                continue
            root = r0 * w + c0
            disc[r0, c0] = t
            low[r0, c0] = t
            t += 1
            parent[r0, c0] = -1
            it[r0, c0] = 0
            children = 0
            top = 0
            stack[0] = root
            while top >= 0:
                v = stack[top]
                vr = v // w
                vc = v - vr * w
                if it[vr, vc] < 4:
                    k = it[vr, vc]
                    it[vr, vc] += 1
                    rr = vr + _DR[k]
                    cc = vc + _DC[k]
                    if not (0 <= rr < h and 0 <= cc < w and mask[rr, cc]):
                        continue
                    u = rr * w + cc
                    if disc[rr, cc] < 0:
                        parent[rr, cc] = v
                        disc[rr, cc] = t
                        low[rr, cc] = t
                        t += 1
                        it[rr, cc] = 0
                        if v == root:
                            children += 1
                        top += 1
                        stack[top] = u
                    elif u != parent[vr, vc]:
                        if disc[rr, cc] < low[vr, vc]:
                            low[vr, vc] = disc[rr, cc]
                else:
                    top -= 1
                    p = parent[vr, vc]
                    if p >= 0:
                        pr = p // w
                        pc = p - pr * w
                        if low[vr, vc] < low[pr, pc]:
                            low[pr, pc] = low[vr, vc]
                        if p != root and low[vr, vc] >= disc[pr, pc]:
                            art[pr, pc] = True
            if children > 1:
                art[r0, c0] = True


@njit
def _toggle_delta(cn, cd, pn, pd, mask, r, c):
    """(dN, dD) of adding cell (r, c) to the set (minus them for removing it)."""
    h, w = mask.shape
    dn = cn[r, c]
    dd = cd[r, c]
    for k in range(N_FACES):
        rr = r + FACE_DROW[k]
        cc = c + FACE_DCOL[k]
        if 0 <= rr < h and 0 <= cc < w and mask[rr, cc]:
            dn -= pn[k, r, c]
            dd -= pd[k, r, c]
    return dn, dd


@njit
def _best_swap(cn, cd, pn, pd, valid, mask, n, d, art, disc, low, parent, it, stack):
    """Best (ratio, N, D, jr, jc, ir, ic) over swaps: add neighbour j, remove a cell i != j.

    i must not be an articulation cell of S u {j}, so the result stays connected.
    """
    h, w = mask.shape
    best = math.inf
    bn = 0.0
    bd = 0.0
    jr = -1
    jc = -1
    ir = -1
    ic = -1
    for r in range(h):
        for c in range(w):
            if mask[r, c] or not valid[r, c]:
                continue
            if not _touches(mask, r, c):
                continue
            an, ad = _toggle_delta(cn, cd, pn, pd, mask, r, c)
            mask[r, c] = True
            _articulation_kernel(mask, art, disc, low, parent, it, stack)
            for r2 in range(h):
                for c2 in range(w):
                    if not mask[r2, c2] or art[r2, c2] or (r2 == r and c2 == c):
                        continue
                    rn, rd = _toggle_delta(cn, cd, pn, pd, mask, r2, c2)
                    q = _ratio(n + an - rn, d + ad - rd)
                    if q < best:
                        best = q
                        bn = n + an - rn
                        bd = d + ad - rd
                        jr = r
                        jc = c
                        ir = r2
                        ic = c2
            mask[r, c] = False
    return best, bn, bd, jr, jc, ir, ic


@njit
def _local_search_kernel(cn, cd, pn, pd, valid, mask, kmin, kmax, max_moves):
    """Repair ``mask`` (connected, modified in place) into [kmin, kmax] cells, then improve.

    Repair removes the non-articulation cell (or adds the neighbouring cell)
    that leaves the least FS until the size fits; improvement applies the
    best single add or remove that keeps the set connected, in the band and
    lowers FS, then the best swap of one cell for another, until none
    helps. Returns (ok, N, D).
    """
    h, w = mask.shape
    art = np.zeros((h, w), dtype=np.bool_)
    disc = np.empty((h, w), dtype=np.int64)
    low = np.empty((h, w), dtype=np.int64)
    parent = np.empty((h, w), dtype=np.int64)
    it = np.empty((h, w), dtype=np.int64)
    stack = np.empty(h * w + 1, dtype=np.int64)
    size = 0
    n = 0.0
    d = 0.0
    for r in range(h):
        for c in range(w):
            if mask[r, c]:
                size += 1
                n += cn[r, c]
                d += cd[r, c]
                for k in HALF:  # each pair inside the set once
                    rr = r + FACE_DROW[k]
                    cc = c + FACE_DCOL[k]
                    if 0 <= rr < h and 0 <= cc < w and mask[rr, cc]:
                        n -= pn[k, r, c]
                        d -= pd[k, r, c]
    if size == 0:
        return False, n, d
    moves = 0
    while moves < max_moves:
        cur = _ratio(n, d)
        can_add = size < kmax
        can_remove = size > kmin and size > 1
        must_add = size < kmin
        must_remove = size > kmax
        if can_remove:
            _articulation_kernel(mask, art, disc, low, parent, it, stack)
        best = math.inf
        br = -1
        bc = -1
        badd = False
        bn = 0.0
        bd = 0.0
        for r in range(h):
            for c in range(w):
                if mask[r, c]:
                    if not can_remove or art[r, c] or must_add:
                        continue
                    dn, dd = _toggle_delta(cn, cd, pn, pd, mask, r, c)
                    q = _ratio(n - dn, d - dd)
                    if q < best:
                        best = q
                        br = r
                        bc = c
                        badd = False
                        bn = n - dn
                        bd = d - dd
                elif valid[r, c] and can_add and not must_remove:
                    if not _touches(mask, r, c):
                        continue
                    dn, dd = _toggle_delta(cn, cd, pn, pd, mask, r, c)
                    q = _ratio(n + dn, d + dd)
                    if q < best:
                        best = q
                        br = r
                        bc = c
                        badd = True
                        bn = n + dn
                        bd = d + dd
        if br < 0:
            break
        if not (must_add or must_remove) and not best < cur * (1.0 - 1e-12):
            # no single move helps: try the best swap (add j, then remove i), which
            # keeps the size, so it also works at either end of the band
            sw, sn, sd, jr, jc, ir, ic = _best_swap(cn, cd, pn, pd, valid, mask, n, d, art,
                                                     disc, low, parent, it, stack)
            if jr < 0 or not sw < cur * (1.0 - 1e-12):
                break
            mask[jr, jc] = True
            mask[ir, ic] = False
            n = sn
            d = sd
            moves += 1
            continue
        mask[br, bc] = badd
        size += 1 if badd else -1
        n = bn
        d = bd
        moves += 1
    ok = kmin <= size <= kmax
    return ok, n, d


def local_search(terms, mask, kmin, kmax, max_moves=None):
    """Repair a connected set into [kmin, kmax] cells and improve it by single-cell moves.

    Parameters
    ----------
    terms : BandTerms
    mask : numpy.ndarray of bool
        A connected set of valid cells (not modified).
    kmin, kmax : int
        Band in cells.
    max_moves : int, optional
        Most moves (default 4 (kmax + cells of the window)).

    Returns
    -------
    mask : numpy.ndarray of bool or None
        The repaired, improved set (None when the band cannot be reached).
    fs : float
        Its FS (N / D; inf when D = 0).

    Notes
    -----
    A move never removes an articulation cell (Tarjan's depth-first search,
    from memory: Tarjan, R.E. (1972). Depth-first search and linear graph
    algorithms. SIAM J. Computing 1(2), 146-160), so the set stays
    4-connected; see :func:`_local_search_kernel`.

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.clusters.forces import cluster_forces
    >>> f = cluster_forces(np.full((6, 6), 40.0), np.full((6, 6), 180.0), 1.0, 0.5, dx=5.0,
    ...     dy=5.0, cohesion_kpa=1.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=2.0,
    ...     friction_deg=33.0, unit_weight_kn_m3=18.0)
    >>> start = np.zeros((6, 6), bool); start[2, 2] = True
    >>> from slopescreen.clusters.heuristic import band_terms
    >>> mask, fs = local_search(band_terms(f), start, 4, 6)
    >>> 4 <= int(mask.sum()) <= 6
    True
    """
    m = np.array(mask, dtype=np.bool_, copy=True)
    if max_moves is None:
        max_moves = 4 * (int(kmax) + m.size)
    ok, n, d = _local_search_kernel(terms.cn, terms.cd, terms.pn, terms.pd, terms.valid, m,
                                    int(kmin), int(kmax), int(max_moves))
    if not ok:
        return None, math.inf
    return m, (n / d if d > 0 else math.inf)
