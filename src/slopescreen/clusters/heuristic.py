"""Fast heuristic for the least-stable connected cluster in an area band.

It supplies the starting point (warm start) of the exact mixed-integer
program of :mod:`slopescreen.clusters.band`: an area-price sweep with the
exact minimum cut, then greedy repair and local search on connected sets
(:mod:`slopescreen.clusters.local_search`).

Terms of a window (:func:`band_terms`): with c_N[i] = R_i + sum_k W[k, i]
(every face of i charged) and p_N[k, i] = W[k, i] + W[k', j] for the face
between i and its in-window valid neighbour j across face k (0 otherwise),
and the same for D, H::

    N(S) = sum_{i in S} c_N[i] - sum_{faces (i, j), both in S} p_N
    FS(S) = N(S) / D(S)

which is :func:`~slopescreen.clusters.forces.cluster_factor_of_safety` of
the set with every cell outside the window counted as outside the set.
"""

import math
from typing import NamedTuple

import numpy as np
from scipy import ndimage

from .cut import integer_terms, magnitude, pair_terms, scale_for, solve_window
from ._faces import FACE_DCOL, FACE_DROW, HALF, N_FACES, OPPOSITE, REACH, pair_slices
from .local_search import local_search
from .search import FOUR_CONNECTED

__all__ = ["BandTerms", "band_terms", "set_ratio", "band_heuristic", "local_search",
           "rectangle_starts"]

class BandTerms(NamedTuple):
    """Additive terms of N(S) and D(S) on one window (float64)."""

    valid: np.ndarray
    """Cells that may join a set, (h, w) bool."""
    cn: np.ndarray
    """c_N: R_i plus every pair resistance of i, (h, w)."""
    cd: np.ndarray
    """c_D: D_i plus every active thrust of i, (h, w)."""
    pn: np.ndarray
    """p_N[k, i]: resistance given back when i and its partner i + e_k are both in S, (16, h, w)."""
    pd: np.ndarray
    """p_D[k, i]: thrust given back likewise, (16, h, w)."""
    driving: np.ndarray
    """D_i alone (basal driving force), (h, w); 0 at invalid cells."""


def band_terms(sub):
    """Window terms of N and D from the force terms of a window.

    Parameters
    ----------
    sub : ClusterForces
        Force terms cut to the window (its shape is the window's).

    Returns
    -------
    BandTerms

    Notes
    -----
    ``set_ratio(band_terms(f), S)`` equals ``N, D`` of
    :func:`~slopescreen.clusters.forces.cluster_factor_of_safety` for every
    set S of valid cells (each face with both cells in S is given back once).

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.clusters.forces import cluster_forces, cluster_factor_of_safety
    >>> f = cluster_forces(np.full((4, 4), 40.0), np.full((4, 4), 180.0), 1.0, 0.5, dx=5.0,
    ...     dy=5.0, cohesion_kpa=1.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=2.0,
    ...     friction_deg=33.0, unit_weight_kn_m3=18.0)
    >>> m = np.zeros((4, 4), bool); m[1:3, 1:4] = True
    >>> n, d = set_ratio(band_terms(f), m)
    >>> bool(abs(n / d - cluster_factor_of_safety(f, m)) < 1e-12)
    True
    """
    valid = np.ascontiguousarray(sub.valid)
    fw = np.where(valid, np.nan_to_num(sub.face_resistance), 0.0)
    fh = np.where(valid, np.nan_to_num(sub.face_thrust), 0.0)
    cn = np.where(valid, np.nan_to_num(sub.resisting) + fw.sum(axis=0), 0.0)
    cd = np.where(valid, np.nan_to_num(sub.driving) + fh.sum(axis=0), 0.0)
    pn = np.zeros_like(fw)
    pd = np.zeros_like(fh)
    rows, cols = valid.shape
    for k in HALF:
        ko = OPPOSITE[k]
        ps, qs = pair_slices(k, rows, cols)
        both = valid[ps] & valid[qs]
        pair_n = np.where(both, fw[k][ps] + fw[ko][qs], 0.0)
        pair_d = np.where(both, fh[k][ps] + fh[ko][qs], 0.0)
        pn[k][ps] = pair_n
        pn[ko][qs] = pair_n
        pd[k][ps] = pair_d
        pd[ko][qs] = pair_d
    drv = np.where(valid, np.nan_to_num(sub.driving), 0.0)
    return BandTerms(valid, cn, cd, pn, pd, drv)


def set_ratio(terms, mask):
    """(N, D) of a set from the window terms (plain numpy; example in :func:`band_terms`)."""
    m = np.asarray(mask, dtype=bool)
    n = float(terms.cn[m].sum())
    d = float(terms.cd[m].sum())
    # each pair with both cells in S appears twice over the 16 directions
    pad = np.pad(m, REACH)
    h, w = m.shape
    for k in range(N_FACES):
        r, c = REACH + FACE_DROW[k], REACH + FACE_DCOL[k]
        both = m & pad[r:r + h, c:c + w]
        n -= 0.5 * float(terms.pn[k][both].sum())
        d -= 0.5 * float(terms.pd[k][both].sum())
    return n, d


def rectangle_starts(terms, kmin, kmax, top=4):
    """The ``top`` rectangles of kmin..kmax valid cells with least FS (2-D prefix sums).

    Every h x w block of valid cells with kmin <= h w <= kmax at every
    position is scored in O(1) from prefix sums of c_N, c_D and of the face
    terms inside the block; slides on a plane slope are close to blocks, so
    these are good starts for the local search.

    Returns
    -------
    list of (float, numpy.ndarray of bool)
        (FS, mask), least FS first.

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.clusters.forces import cluster_forces
    >>> f = cluster_forces(np.full((6, 6), 40.0), np.full((6, 6), 180.0), 1.0, 0.5, dx=5.0,
    ...     dy=5.0, cohesion_kpa=1.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=2.0,
    ...     friction_deg=33.0, unit_weight_kn_m3=18.0)
    >>> fs, block = rectangle_starts(band_terms(f), 6, 6, top=1)[0]
    >>> int(block.sum())
    6
    """
    valid = terms.valid
    rows, cols = valid.shape

    def cum(a):
        out = np.zeros((a.shape[0] + 1, a.shape[1] + 1))
        out[1:, 1:] = a.cumsum(0).cumsum(1)
        return out

    def box(c, h, w):
        return c[h:, w:] - c[:-h, w:] - c[h:, :-w] + c[:-h, :-w]

    bad = cum((~valid).astype(float))
    cn, cd = cum(terms.cn), cum(terms.cd)
    # each unordered pair once, on its cell p (partner p + e_k, k in HALF)
    inner = [(int(FACE_DROW[k]), int(FACE_DCOL[k]), cum(terms.pn[k]), cum(terms.pd[k]))
             for k in HALF]
    found = []
    for h in range(1, rows + 1):
        for w in range(max(1, -(-int(kmin) // h)), min(cols, int(kmax) // h) + 1):
            ok = box(bad, h, w) == 0
            if not ok.any():
                continue
            n = box(cn, h, w)
            d = box(cd, h, w)
            for dr, dc, pn_k, pd_k in inner:
                # the cells p of the block whose partner lies in the block too
                hh, ww = h - abs(dr), w - abs(dc)
                if hh < 1 or ww < 1:
                    continue
                i, j = max(0, -dr), max(0, -dc)
                n = n - box(pn_k, hh, ww)[i:i + n.shape[0], j:j + n.shape[1]]
                d = d - box(pd_k, hh, ww)[i:i + d.shape[0], j:j + d.shape[1]]
            with np.errstate(divide="ignore", invalid="ignore"):
                q = np.where(ok & (d > 0), n / d, np.inf)
            k = int(np.argmin(q))
            if np.isfinite(q.ravel()[k]):
                r0, c0 = np.unravel_index(k, q.shape)
                found.append((float(q.ravel()[k]), int(r0), int(c0), h, w))
    found.sort()
    out = []
    for fs, r0, c0, h, w in found[:top]:
        m = np.zeros((rows, cols), dtype=bool)
        m[r0:r0 + h, c0:c0 + w] = True
        out.append((fs, m))
    return out


def _cut(unary, cap, valid):
    m = magnitude(unary, cap)
    scale = scale_for(float(m[valid].sum()))
    ui, ci = integer_terms(unary, cap, scale)
    mask, _ = solve_window(ui, ci, valid, (0, valid.shape[0], 0, valid.shape[1]))
    return mask


def band_heuristic(sub, terms, kmin, kmax, seeds, *, rounds=3, steps=14, polish=3,
                   starts=12):
    """Least-FS connected set of kmin..kmax cells found by price sweep, repair and local search.

    Parameters
    ----------
    sub : ClusterForces
        Force terms of the window.
    terms : BandTerms
        :func:`band_terms` of ``sub``.
    kmin, kmax : int
        Band in cells (1 <= kmin <= kmax).
    seeds : list of numpy.ndarray of bool
        Connected sets to start from (e.g. the least-stable cluster of the
        window without size limits).
    rounds : int
        Rounds of the sweep; lambda is lowered to the best FS after each.
    steps : int
        Bisection steps on the area price per target size.
    polish : int
        Best sweep components improved by local search per round.
    starts : int
        Lone cells of least FS (overall and within each seed) grown into the
        band by local search.

    Returns
    -------
    mask : numpy.ndarray of bool or None
        Best set found (None when no connected set of the band exists in
        the window).
    fs : float
        Its FS (inf when none).
    n_cuts : int
        Minimum cuts used.

    Notes
    -----
    Area-price sweep: for a price mu per cell, the exact cut (module
    :mod:`slopescreen.clusters.cut`) minimises g_lam(S) + mu |S|; its
    minimiser S_mu minimises g_lam among all sets of its own size (if T has
    |T| = |S_mu|, g_lam(T) + mu |T| >= g_lam(S_mu) + mu |S_mu|). mu is
    bisected so that |S_mu| meets the band's ends and its geometric middle;
    components of S_mu inside the band are candidates, the largest one is
    repaired. Repair and local search move one cell at a time and keep the
    set connected (articulation cells are never removed). Starts: the seeds,
    the least-FS lone cells grown into the band, and the least-FS blocks
    (:func:`rectangle_starts`).

    References
    ----------
    Dinkelbach, W. (1967). On nonlinear fractional programming. Management
    Science 13(7), 492-498 (from memory).

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.clusters.forces import cluster_forces
    >>> f = cluster_forces(np.full((6, 6), 40.0), np.full((6, 6), 180.0), 1.0, 0.5, dx=5.0,
    ...     dy=5.0, cohesion_kpa=1.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=2.0,
    ...     friction_deg=33.0, unit_weight_kn_m3=18.0)
    >>> mask, fs, cuts = band_heuristic(f, band_terms(f), 3, 5, [])
    >>> 3 <= int(mask.sum()) <= 5
    True
    """
    valid = terms.valid
    best_mask, best_fs = None, math.inf
    n_cuts = 0

    def consider(mask, fs):
        nonlocal best_mask, best_fs
        if mask is not None and fs < best_fs:
            best_mask, best_fs = mask, fs

    for seed in seeds:
        if seed is not None and seed.any():
            consider(*local_search(terms, seed, kmin, kmax))
    # multi-start growth: the least-FS lone cells, and the cells of the seeds, each grown
    # into the band (this finds compact sets when the upper limit binds)
    with np.errstate(divide="ignore", invalid="ignore"):
        single = np.where(valid & (terms.cd > 0), terms.cn / terms.cd, np.inf)
    order = np.argsort(single, axis=None, kind="stable")[:starts]
    picks = [np.unravel_index(int(i), single.shape) for i in order
             if np.isfinite(single.ravel()[i])]
    for seed in seeds:
        if seed is not None and seed.any():
            rr, cc = np.nonzero(seed)
            best_cells = np.argsort(single[rr, cc], kind="stable")[:starts]
            picks.extend((int(rr[j]), int(cc[j])) for j in best_cells)
    if not picks and valid.any():
        picks.append(tuple(int(v) for v in np.argwhere(valid)[0]))
    for cell in dict.fromkeys(picks):
        start = np.zeros(valid.shape, dtype=bool)
        start[cell] = True
        consider(*local_search(terms, start, kmin, kmax))
    for _, block in rectangle_starts(terms, kmin, kmax):
        consider(*local_search(terms, block, kmin, kmax))
    if best_mask is None:
        return None, math.inf, 0
    targets = sorted({int(kmin), int(round(math.sqrt(kmin * kmax))), int(kmax)})
    for _ in range(rounds):
        lam = best_fs
        before = best_fs
        unary, cap, _ = pair_terms(sub, lam)
        unary = np.where(valid, unary, 0.0)
        span = float(np.abs(unary[valid]).max() + cap.sum(axis=0)[valid].max()) + 1.0
        pool = []
        for target in targets:
            lo, hi = -span, span  # lo: every cell in; hi: the empty set
            last = None
            for _ in range(steps):
                mu = 0.5 * (lo + hi)
                mask = _cut(np.where(valid, unary + mu, 0.0), cap, valid)
                n_cuts += 1
                size = int(mask.sum())
                if size > target:
                    lo = mu
                else:
                    hi = mu
                if size == 0:
                    continue
                last = mask
                labels, nl = ndimage.label(mask, structure=FOUR_CONNECTED)
                sizes = np.bincount(labels.ravel(), minlength=nl + 1)
                for i in range(1, nl + 1):
                    if kmin <= sizes[i] <= kmax:
                        comp = labels == i
                        nn, dd = set_ratio(terms, comp)
                        fs = nn / dd if dd > 0 else math.inf
                        pool.append((fs, comp))
                        consider(comp, fs)
            if last is not None:
                labels, nl = ndimage.label(last, structure=FOUR_CONNECTED)
                sizes = np.bincount(labels.ravel(), minlength=nl + 1)
                sizes[0] = 0
                pool.append((math.inf, labels == int(np.argmax(sizes))))
        pool.sort(key=lambda t: t[0])
        seen = 0
        for fs, comp in pool:
            if seen >= polish and math.isfinite(fs):
                continue
            seen += 1
            consider(*local_search(terms, comp, kmin, kmax))
        if not best_fs < before * (1.0 - 1e-12):
            break
    return best_mask, best_fs, n_cuts
