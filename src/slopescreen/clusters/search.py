r"""Failing clusters at lambda = 1 (tiles with halos) and least-stable clusters in windows.

Why the components of the lam = 1 minimiser are failing clusters
-----------------------------------------------------------------
Let S be the **least** minimiser of g = g_1 (the intersection of all
minimisers; it is itself a minimiser because g is submodular, and it is
the set reachable from the source in the residual graph of a maximum flow).
Split S into its components C_1 .. C_m joined through the 16 cell pairs
that carry margin forces (:func:`~slopescreen.clusters._faces.pair_components`).

1. Components share no pair: two cells of different components are never
   partners, so every margin pair of S has exactly one cell in exactly one
   component and the other cell outside S. The basal terms are sums over
   cells. Hence g(S) = sum_j g(C_j).
2. For the same reason g(S \ C_j) = g(S) - g(C_j).
3. If some g(C_j) >= 0, then g(S \ C_j) <= g(S), so S \ C_j is also a
   minimiser, strictly smaller than S: impossible for the least minimiser.
   So g(C_j) < 0 for every j, i.e. FS(C_j) < 1: each component fails.
4. Any failing set T (g(T) < 0) satisfies g(S) <= g(T) < 0, so failure
   anywhere implies a non-empty minimiser.

With integer capacities the argument holds for the rounded-down function
g~ <= sigma g; a component with g~ < 0 can have FS marginally >= 1 (within
the rounding bound of :mod:`slopescreen.clusters.cut`), which is why every
reported cluster is rechecked from the force terms and kept only if FS < 1.

Convexity and tightness (Lovasz 1983; the min-cut form of submodular
pseudo-boolean minimisation, e.g. Kolmogorov and Zabih 2004, both from
memory): when every pair has phi(1,0) + phi(0,1) >= 0, g_lam is a sum of
unary terms and nonnegative cut terms, its Lovasz extension is convex and
piecewise linear, the LP over [0,1]^n is tight and is the dual of the
s-t minimum cut solved here. The tests check this against every subset of
small grids, against the LP in cvxpy/HiGHS and against networkx.

References
----------
Milledge, D.G., Bellugi, D., McKean, J.A., Densmore, A.L., Dietrich, W.E.
(2014). A multidimensional stability model for predicting shallow landslide
size and shape across landscapes. J. Geophys. Res. Earth Surface 119,
2481-2504. doi 10.1002/2014JF003135
Lovasz, L. (1983). Submodular functions and convexity. In: Mathematical
Programming: The State of the Art, Springer, 235-257 (from memory).
Picard, J.-C., Queyranne, M. (1980). On the structure of all minimum cuts in
a network and applications. Math. Programming Study 13, 8-16 (from memory).
Kolmogorov, V., Zabih, R. (2004). What energy functions can be minimized via
graph cuts? IEEE TPAMI 26(2), 147-159 (from memory).
Topkis, D.M. (1978). Minimizing a submodular function on a lattice.
Operations Research 26(2), 305-321 (from memory).
Dinkelbach, W. (1967). On nonlinear fractional programming. Management
Science 13(7), 492-498 (from memory).
"""

from typing import NamedTuple

import numpy as np
from scipy import ndimage

from ..errors import InputError
from ..stability import FS_CAP
from .cut import (
    SCALE_TARGET,
    integer_terms,
    magnitude,
    max_box_sum,
    pair_terms,
    scale_for,
    solve_window,
)
from ._faces import REACH, pair_components
from .forces import ClusterForces, cluster_factor_of_safety

__all__ = [
    "FOUR_CONNECTED",
    "WindowResult",
    "least_stable_in_window",
    "fs_bound_map",
    "failing_set",
]

FOUR_CONNECTED = ndimage.generate_binary_structure(2, 1)
"""Cells that share a side: the connectivity of a size-resolved cluster (a modelling choice)."""


def _sub(forces, window):
    """The force terms of a window, as a ClusterForces of the window's shape."""
    r0, r1, c0, c1 = window
    s = (slice(r0, r1), slice(c0, c1))
    f = (slice(None),) + s
    return ClusterForces(forces.driving[s], forces.resisting[s], forces.face_resistance[f],
                         forces.face_thrust[f], forces.valid[s], forces.cell_fs[s],
                         forces.depth_m[s], forces.downslope[f], forces.dx, forces.dy)


def _window_cut(forces, lam, window):
    """Least minimiser of the rounded-down g_lam over sets inside the window (margins charged).

    Returns (mask of the window's shape, integer value, faces made modular).
    """
    r0, r1, c0, c1 = window
    unary, cap, n_mod = pair_terms(forces, lam, window)
    valid = np.ascontiguousarray(forces.valid[r0:r1, c0:c1])
    m = magnitude(unary, cap)
    scale = scale_for(float(m[valid].sum()))
    ui, ci = integer_terms(unary, cap, scale)
    mask, value = solve_window(ui, ci, valid, (0, r1 - r0, 0, c1 - c0))
    return mask, value, n_mod


class WindowResult(NamedTuple):
    """Least-stable cluster of one window (:func:`least_stable_in_window`)."""

    window: tuple
    """(r0, r1, c0, c1) of the window on the grid."""
    least_fs: float
    """FS of the best cluster found (an upper bound on the window's minimum)."""
    bound: float
    """Proven lower bound on the FS of every cluster inside the window."""
    mask: np.ndarray
    """The best cluster, bool array of the window's shape."""
    n_cuts: int
    """Minimum cuts used."""
    modular_faces: int
    """Most faces replaced by their modular lower bound in one cut (0: solved as given)."""


def least_stable_in_window(forces, window, *, max_iter=60):
    """Least-stable cluster of a window by Dinkelbach iterations over exact cuts.

    Parameters
    ----------
    forces : ClusterForces
        From :func:`~slopescreen.clusters.forces.cluster_forces`.
    window : tuple of int
        (r0, r1, c0, c1), rows r0..r1-1 and columns c0..c1-1.
    max_iter : int
        Most Dinkelbach iterations.

    Returns
    -------
    WindowResult
        ``least_fs`` is the FS of a real cluster inside the window; ``bound``
        is a proven lower bound on FS(S) for **every** set S of valid cells
        inside the window. Both are FS_CAP (100) when nothing goes below it;
        NaN when the window holds no valid cell.

    Raises
    ------
    InputError
        A window outside the grid or empty.

    Notes
    -----
    Dinkelbach (1967): start from the least FS of a single cell; at lambda_k
    find S = argmin g_lam (exact cut, :mod:`slopescreen.clusters.cut`) and
    set lambda_{k+1} = least FS among the connected components of S; stop
    when the minimiser is empty. Faces on the window's border are charged.
    Because the integer function is rounded down and non-submodular faces are
    replaced by a lower bound, an empty minimiser at lambda **proves**
    min g_lam >= 0, i.e. FS >= lambda for every set in the window. When
    rounding stalls the iteration, lambda is lowered by a relative 1e-7 ..
    1e-2 until it is proven, then by bisection.

    References
    ----------
    Dinkelbach, W. (1967). On nonlinear fractional programming. Management
    Science 13(7), 492-498 (from memory).

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.clusters.forces import cluster_forces
    >>> f = cluster_forces(np.full((6, 6), 38.0), np.full((6, 6), 180.0), 1.2, 0.8, dx=5.0,
    ...     dy=5.0, cohesion_kpa=1.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=2.0,
    ...     friction_deg=33.0, unit_weight_kn_m3=18.5)
    >>> res = least_stable_in_window(f, (0, 6, 0, 6))
    >>> res.bound <= res.least_fs
    True
    """
    rows, cols = forces.valid.shape
    r0, r1, c0, c1 = (int(v) for v in window)
    if not (0 <= r0 < r1 <= rows and 0 <= c0 < c1 <= cols):
        raise InputError(f"window: {window} is empty or outside the grid {rows}x{cols}")
    win = (r0, r1, c0, c1)
    sub = _sub(forces, win)
    empty = np.zeros((r1 - r0, c1 - c0), dtype=bool)
    if not sub.valid.any():
        return WindowResult(win, float("nan"), float("nan"), empty, 0, 0)
    num = sub.resisting + np.nansum(sub.face_resistance, axis=0)
    den = sub.driving + np.nansum(sub.face_thrust, axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        single = np.where(den > 0, num / den, FS_CAP)
    single = np.where(sub.valid, np.clip(single, 0.0, FS_CAP), np.inf)
    p = np.unravel_index(int(np.argmin(single)), single.shape)
    lam = float(single[p])
    best = empty.copy()
    best[p] = True
    n_cuts = 0
    n_mod = 0
    proven = None
    for _ in range(max_iter):
        mask, value, nm = _window_cut(forces, lam, win)
        n_cuts += 1
        n_mod = max(n_mod, nm)
        if value == 0:
            proven = lam
            break
        labels, n = pair_components(mask)
        found = None
        for i in range(1, n + 1):
            comp = labels == i
            fs = cluster_factor_of_safety(sub, comp)
            if fs < lam and (found is None or fs < found[0]):
                found = (fs, comp)
        if found is None or not found[0] < lam * (1.0 - 1e-13):
            break
        lam, best = found
    if proven is None:
        for tau in (1e-7, 1e-6, 1e-5, 1e-4, 1e-3, 1e-2):
            trial = lam * (1.0 - tau)
            _, value, nm = _window_cut(forces, trial, win)
            n_cuts += 1
            n_mod = max(n_mod, nm)
            if value == 0:
                proven = trial
                break
    if proven is None:  # bisection between a proven 0 and lam (1 - 1e-2)
        lo, hi = 0.0, lam * (1.0 - 1e-2)
        for _ in range(40):
            mid = 0.5 * (lo + hi)
            _, value, nm = _window_cut(forces, mid, win)
            n_cuts += 1
            n_mod = max(n_mod, nm)
            if value == 0:
                lo = mid
            else:
                hi = mid
            if hi - lo <= 1e-6 * hi:
                break
        proven = lo
    return WindowResult(win, float(lam), float(proven), best, n_cuts, n_mod)


def _starts(n, size, stride):
    if n <= size:
        return [0]
    s = list(range(0, n - size + 1, stride))
    if s[-1] != n - size:
        s.append(n - size)
    return s


def fs_bound_map(forces, *, window_cells=40, stride_cells=20):
    """Proven lower bound on the FS of any compact cluster containing each cell.

    Parameters
    ----------
    forces : ClusterForces
    window_cells : int
        Side W of the square windows, cells (>= 2).
    stride_cells : int
        Step s between window origins, cells (1 <= s < W).

    Returns
    -------
    bound : numpy.ndarray of float32, shape (rows, cols)
        Per cell, the least proven window bound over the windows holding the
        cell; NaN at nodata.
    windows : list of WindowResult
    extent_cells : int
        W - s: the guarantee holds for clusters whose bounding box spans at
        most this many rows and this many columns.

    Raises
    ------
    InputError
        Bad window size or stride.

    Notes
    -----
    Window origins are 0, s, 2s, ... and the last one is moved to n - W, in
    rows and columns. A cluster with bounding box rows [a, a + e) and
    e <= W - s lies in the window starting at k s with k = floor(a / s)
    (k s <= a and a + e < k s + s + e <= k s + W), or, when that window
    would pass the grid end, in the last window (origin n - W <= a). That
    window holds every cell of the cluster, and its proven bound is <= the
    cluster's FS; the per-cell minimum over windows holding the cell is
    therefore a lower bound on the FS of every cluster of extent <= W - s
    that contains the cell. Where it is >= 1, no such cluster can fail.

    References
    ----------
    Dinkelbach (1967), see :func:`least_stable_in_window`.

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.clusters.forces import cluster_forces
    >>> f = cluster_forces(np.full((8, 8), 20.0), np.full((8, 8), 180.0), 1.0, 0.0, dx=5.0,
    ...     dy=5.0, cohesion_kpa=2.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=2.0,
    ...     friction_deg=35.0, unit_weight_kn_m3=18.0)
    >>> b, wins, e = fs_bound_map(f, window_cells=6, stride_cells=2)
    >>> bool(np.nanmin(b) >= 1.0), e
    (True, 4)
    """
    w = int(window_cells)
    s = int(stride_cells)
    if w != window_cells or s != stride_cells or w < 2 or not 1 <= s < w:
        raise InputError(f"window_cells, stride_cells: expected integers with 1 <= stride < "
                         f"window and window >= 2, got {window_cells!r}, {stride_cells!r}")
    rows, cols = forces.valid.shape
    bound = np.full((rows, cols), np.inf)
    windows = []
    for r0 in _starts(rows, w, s):
        for c0 in _starts(cols, w, s):
            win = (r0, min(rows, r0 + w), c0, min(cols, c0 + w))
            if not forces.valid[win[0]:win[1], win[2]:win[3]].any():
                continue
            res = least_stable_in_window(forces, win)
            windows.append(res)
            view = bound[win[0]:win[1], win[2]:win[3]]
            np.minimum(view, res.bound, out=view)
    bound[~forces.valid] = np.nan
    # round down to float32 so that the stored value stays a lower bound
    out = bound.astype(np.float32)
    too_high = out.astype(np.float64) > bound
    out[too_high] = np.nextafter(out[too_high], np.float32(-np.inf))
    return out, windows, w - s


class FailingSet(NamedTuple):
    """Result of :func:`failing_set`."""

    lower: np.ndarray
    """Cells proven to be in the least minimiser of g~_1 (bool)."""
    upper: np.ndarray
    """Cells that may be in it; equal to ``lower`` where decided."""
    scale: float
    """Integer scale sigma (capacities = floor(sigma x kN))."""
    modular_faces: int
    """Faces whose pair term was not submodular at lambda = 1."""
    n_cuts: int
    """Minimum cuts solved."""


def failing_set(forces, *, tile_cells=200, halo_cells=24, max_rounds=4, scale=None):
    """Least minimiser of g_1 over the whole grid, solved in tiles with halos.

    Parameters
    ----------
    forces : ClusterForces
    tile_cells : int
        Side of the tile cores, cells.
    halo_cells : int
        Width of the halo added around each core, cells.
    max_rounds : int
        Rounds of re-solving merged windows around undecided cells.
    scale : float, optional
        Integer scale sigma. Default: 2**30 over the largest cut total of a
        block of twice the tile-plus-halo side, so that merged windows up to
        that size fit int32. Two runs minimise the same integer function
        only when they use the same scale.

    Returns
    -------
    FailingSet

    Notes
    -----
    One integer function g~ (one scale sigma for the whole grid) is
    minimised. For a window T and a set O of cells outside T fixed in S,
    F_O(X) = g~(O u X) over X within T is submodular, and for O within O'
    the least minimisers satisfy X_O within X_O' (if X, X' are the least
    minimisers, submodularity gives F_O(X) + F_O'(X') >=
    F_O(X n X') + F_O'(X u X'), so X n X' also minimises F_O and
    leastness gives X within X'; Topkis 1978, from memory). With S* the
    least global minimiser, O = S* \\ T gives X = S* n T, hence

        X_empty  within  S* n T  within  X_(all valid outside)

    Each tile is solved with its halo twice, outside out (margins charged)
    and outside in; core cells where both agree are decided. Undecided
    cells are re-solved in merged windows (bounding box plus halo) with the
    outside fixed to the current lower and upper sets, which again bracket
    S*. Cells still undecided after ``max_rounds`` stay in ``upper`` only.
    """
    valid = forces.valid
    rows, cols = valid.shape
    unary, cap, n_mod = pair_terms(forces, 1.0)
    m = np.where(valid, magnitude(unary, cap), 0.0)
    side = tile_cells + 2 * halo_cells + 2 * REACH
    if scale is None:
        scale = scale_for(max_box_sum(m, min(rows, 2 * side), min(cols, 2 * side)))
    # the scale may have been made from the very sum checked against it (a grid or window
    # smaller than a tile): SCALE_TARGET / scale gives that sum back only to within rounding,
    # so both checks below allow a few ulps (2**30 leaves room for far more)
    limit = SCALE_TARGET / scale * (1.0 + 1e-12)
    if max_box_sum(m, min(rows, side), min(cols, side)) > limit:
        raise InputError(f"scale: {scale} is too large for tiles of {side} cells (int32 overflow)")
    ui, ci = integer_terms(unary, cap, scale)
    lower = np.zeros((rows, cols), dtype=bool)
    upper = np.zeros((rows, cols), dtype=bool)
    n_cuts = 0
    for r0 in range(0, rows, tile_cells):
        for c0 in range(0, cols, tile_cells):
            r1, c1 = min(rows, r0 + tile_cells), min(cols, c0 + tile_cells)
            win = (max(0, r0 - halo_cells), min(rows, r1 + halo_cells),
                   max(0, c0 - halo_cells), min(cols, c1 + halo_cells))
            if not valid[r0:r1, c0:c1].any():
                continue
            core = (slice(r0 - win[0], r1 - win[0]), slice(c0 - win[2], c1 - win[2]))
            lo, _ = solve_window(ui, ci, valid, win)
            n_cuts += 1
            whole = win == (0, rows, 0, cols)
            hi = lo if whole else solve_window(ui, ci, valid, win, boundary_in=valid)[0]
            n_cuts += 0 if whole else 1
            lower[r0:r1, c0:c1] = lo[core]
            upper[r0:r1, c0:c1] = hi[core]
    for _ in range(max_rounds):
        undecided = upper & ~lower
        if not undecided.any():
            break
        grown = ndimage.binary_dilation(undecided, iterations=halo_cells)
        labels, n = ndimage.label(grown)
        progress = False
        for sl in ndimage.find_objects(labels):
            win = (sl[0].start, sl[0].stop, sl[1].start, sl[1].stop)
            ring = m[max(0, win[0] - REACH):win[1] + REACH,
                     max(0, win[2] - REACH):win[3] + REACH]
            if float(ring.sum()) > limit:
                continue  # too large for the scale: stays undecided
            lo, _ = solve_window(ui, ci, valid, win, boundary_in=lower)
            hi, _ = solve_window(ui, ci, valid, win, boundary_in=upper)
            n_cuts += 2
            s = (slice(win[0], win[1]), slice(win[2], win[3]))
            before = int((upper[s] & ~lower[s]).sum())
            lower[s] |= lo
            upper[s] &= hi
            progress |= int((upper[s] & ~lower[s]).sum()) < before
        if not progress:
            break
    return FailingSet(lower, upper, scale, n_mod, n_cuts)
