"""Exact minimisation of g_lam(S) = R + B - lam (D + H) by an s-t minimum cut.

Representation (docs/methods.md, "Multi-cell failure clusters"). With
t[k, p] = W[k, p] - lam H[k, p] the term of cell p towards its partner
q = p + e_k (one of 16: :mod:`slopescreen.clusters._faces`; k' the opposite
step), the pair term of two valid cells takes
a = t[k, p] when only p is in S and b = t[k', q] when only q is. Written as

    phi = (a - b)/2 (x_p - x_q) + (a + b)/2 ([x_p=1, x_q=0] + [x_q=1, x_p=0])

its linear part joins the unary terms and each direction becomes an arc of
capacity (a + b)/2 >= 0 when the face is submodular. A face with a + b < 0
(see :func:`~slopescreen.clusters.forces.nonsubmodular_faces`) is replaced
by its modular lower bound a x_p + b x_q (it under-counts only sets that
hold both cells), so the function solved is never above g. A pair towards
nodata or off the grid is charged in full in the unary term.

Integer capacities: every unary coefficient and arc capacity is multiplied
by a scale sigma and rounded **down** (floor). The integer function
g~(S) = sum_{p in S} floor(sigma u_p) + sum_{arcs cut} floor(sigma c) then
satisfies sigma g(S) - n_terms(S) < g~(S) <= sigma g(S) for every S, where
n_terms(S) counts the cells of S and the arcs leaving it; g~(empty) = 0
exactly. sigma is chosen so that the largest possible cut total of the
problem is 2**30, which keeps every capacity and the flow value inside
int32 (scipy's maximum_flow casts capacities to int32; int64 values would
wrap silently). The least minimiser of g~ is the set of nodes reachable
from the source in the residual graph of a maximum flow.
"""

import numpy as np
from scipy import sparse
from scipy.sparse.csgraph import breadth_first_order, maximum_flow

from .._numba import njit, njit_parallel, prange
from ._faces import ASCENDING, FACE_DCOL, FACE_DROW, N_FACES, OPPOSITE

__all__ = ["pair_terms", "integer_terms", "solve_window", "SCALE_TARGET"]

SCALE_TARGET = float(2**30)
"""Largest cut total after scaling (fits int32 with room for rounding)."""


@njit  # serial: windows are small, and a parallel launch per window costs more than it saves
def _pair_terms_kernel(driving, resisting, face_w, face_h, valid, lam, unary, cap):
    """Fill ``unary`` and ``cap``; return the pairs made modular (each unordered pair once)."""
    rows, cols = valid.shape
    n_mod = 0
    for r in range(rows):
        for c in range(cols):
            for k in range(N_FACES):
                cap[k, r, c] = 0.0
            if not valid[r, c]:
                unary[r, c] = 0.0
                continue
            u = resisting[r, c] - lam * driving[r, c]
            for k in range(N_FACES):
                a = face_w[k, r, c] - lam * face_h[k, r, c]
                rr = r + FACE_DROW[k]
                cc = c + FACE_DCOL[k]
                if 0 <= rr < rows and 0 <= cc < cols and valid[rr, cc]:
                    ko = OPPOSITE[k]
                    b = face_w[ko, rr, cc] - lam * face_h[ko, rr, cc]
                    if a + b >= 0.0:
                        u += 0.5 * (a - b)
                        cap[k, r, c] = 0.5 * (a + b)
                    else:
                        u += a
                        if k < ko:
                            n_mod += 1
                else:
                    u += a
            unary[r, c] = u
    return n_mod


def pair_terms(forces, lam, window=None):
    """Unary coefficients and arc capacities of g_lam (float64).

    Parameters
    ----------
    forces : ClusterForces
    lam : float
        Threshold lambda.
    window : tuple of int, optional
        (r0, r1, c0, c1): compute on this block only, with neighbours outside
        it treated as charged margins.

    Returns
    -------
    unary : numpy.ndarray, shape (rows, cols)
        u_p; 0 at nodata.
    cap : numpy.ndarray, shape (16, rows, cols)
        Capacity of the arc from p to its partner across step k (0 where
        there is no arc).
    n_modular : int
        Pairs replaced by their modular lower bound (counted once each).
    """
    if window is None:
        sl = (slice(None), slice(None))
    else:
        r0, r1, c0, c1 = window
        sl = (slice(r0, r1), slice(c0, c1))
    valid = np.ascontiguousarray(forces.valid[sl])
    d = np.ascontiguousarray(forces.driving[sl])
    rs = np.ascontiguousarray(forces.resisting[sl])
    fw = np.ascontiguousarray(forces.face_resistance[(slice(None),) + sl])
    fh = np.ascontiguousarray(forces.face_thrust[(slice(None),) + sl])
    unary = np.empty(valid.shape)
    cap = np.empty((N_FACES,) + valid.shape)
    n_mod = _pair_terms_kernel(d, rs, fw, fh, valid, float(lam), unary, cap)
    return unary, cap, int(n_mod)


def magnitude(unary, cap):
    """Per-cell bound |u_p| + sum_k cap[k, p] on what a cell adds to any cut total."""
    return np.abs(unary) + cap.sum(axis=0)


def integer_terms(unary, cap, scale):
    """floor(scale u) and floor(scale cap) as int64 (the rounded-down function g~)."""
    return (np.floor(unary * scale).astype(np.int64), np.floor(cap * scale).astype(np.int64))


def scale_for(total):
    """Scale sigma that maps a cut total ``total`` (kN) to 2**30."""
    return SCALE_TARGET / total if total > 0.0 else 1.0


@njit
def _graph_kernel(uint, cint, valid, r0, r1, c0, c1, boundary_in, use_boundary):
    """CSR arrays of the window [r0, r1) x [c0, c1) of a grid of integer terms.

    Outside the window a valid neighbour is in S when ``boundary_in`` says so
    (arc q -> p cut when p is out: unary -cap[k', q]) and out otherwise
    (arc p -> q cut when p is in: unary +cap[k, p]).
    """
    rows, cols = valid.shape
    h = r1 - r0
    w = c1 - c0
    index = -np.ones((h, w), dtype=np.int64)
    n = 0
    for r in range(h):
        for c in range(w):
            if valid[r0 + r, c0 + c]:
                index[r, c] = n
                n += 1
    # node n is the source (its row comes last), n + 1 the sink
    snk = n + 1
    # rows of the CSR matrix: cells (<= 16 arcs + sink), then the source
    indptr = np.zeros(n + 3, dtype=np.int32)
    indices = np.empty((N_FACES + 2) * n, dtype=np.int32)
    data = np.empty((N_FACES + 2) * n, dtype=np.int32)
    unary = np.zeros(n, dtype=np.int64)
    pos = 0
    for r in range(h):
        for c in range(w):
            p = index[r, c]
            if p < 0:
                continue
            gr = r0 + r
            gc = c0 + c
            u = uint[gr, gc]
            for j in range(N_FACES):
                k = ASCENDING[j]  # partners in ascending node index
                rr = gr + FACE_DROW[k]
                cc = gc + FACE_DCOL[k]
                if not (0 <= rr < rows and 0 <= cc < cols and valid[rr, cc]):
                    continue
                if r0 <= rr < r1 and c0 <= cc < c1:
                    cp = cint[k, gr, gc]
                    if cp > 0:
                        indices[pos] = index[rr - r0, cc - c0]
                        data[pos] = cp
                        pos += 1
                elif use_boundary and boundary_in[rr, cc]:
                    u -= cint[OPPOSITE[k], rr, cc]
                else:
                    u += cint[k, gr, gc]
            unary[p] = u
            if u > 0:
                indices[pos] = snk
                data[pos] = u
                pos += 1
            indptr[p + 1] = pos
    for p in range(n):
        if unary[p] < 0:
            indices[pos] = p
            data[pos] = -unary[p]
            pos += 1
    indptr[n + 1] = pos
    indptr[n + 2] = pos
    return indptr, indices[:pos], data[:pos], index, unary


def solve_window(uint, cint, valid, window, boundary_in=None):
    """Least minimiser of the integer function g~ restricted to a window.

    Parameters
    ----------
    uint, cint : numpy.ndarray of int64
        Integer unary terms (rows, cols) and arc capacities (16, rows, cols).
    valid : numpy.ndarray of bool
    window : tuple of int
        (r0, r1, c0, c1).
    boundary_in : numpy.ndarray of bool, optional
        Cells outside the window fixed in S (default: none; every outside
        cell is out and the window's margin pairs are charged).

    Returns
    -------
    mask : numpy.ndarray of bool, shape (r1 - r0, c1 - c0)
        The least minimiser.
    value : int
        min g~ over sets inside the window (plus the constant of the
        boundary, 0 when ``boundary_in`` is None); <= 0.
    """
    r0, r1, c0, c1 = window
    use_b = boundary_in is not None
    b = boundary_in if use_b else np.zeros((1, 1), dtype=bool)
    indptr, indices, data, index, unary = _graph_kernel(uint, cint, valid, r0, r1, c0, c1, b,
                                                        use_b)
    n = index.max() + 1 if index.size else 0
    mask = np.zeros((r1 - r0, c1 - c0), dtype=bool)
    if n <= 0:
        return mask, 0
    neg = -int(unary[unary < 0].sum())
    if neg == 0:  # no cell gains by joining: the empty set is the least minimiser
        return mask, 0
    if neg >= 2**31 or int(unary[unary > 0].sum()) >= 2**31:
        raise OverflowError("cut total exceeds int32; use a smaller scale")
    graph = sparse.csr_array((data, indices, indptr), shape=(n + 2, n + 2))
    res = maximum_flow(graph, n, n + 1)
    value = int(res.flow_value) - neg
    if value == 0:
        return mask, 0
    resid = (graph - res.flow).tocsr()
    resid.data[resid.data < 0] = 0
    resid.eliminate_zeros()
    reach = breadth_first_order(resid, n, directed=True, return_predecessors=False)
    reach = reach[reach < n]
    inside = np.zeros(n + 2, dtype=bool)
    inside[reach] = True
    sel = index >= 0
    mask[sel] = inside[index[sel]]
    return mask, value


@njit_parallel
def _box_sum_kernel(cum, h, w, out):
    rows = out.shape[0]
    cols = out.shape[1]
    for r in prange(rows):
        for c in range(cols):
            r1 = min(r + h, cum.shape[0] - 1)
            c1 = min(c + w, cum.shape[1] - 1)
            out[r, c] = cum[r1, c1] - cum[r, c1] - cum[r1, c] + cum[r, c]


def max_box_sum(values, h, w):
    """Largest sum of ``values`` over any h x w block (clipped at the grid edge)."""
    cum = np.zeros((values.shape[0] + 1, values.shape[1] + 1))
    cum[1:, 1:] = np.nan_to_num(values).cumsum(0).cumsum(1)
    out = np.empty(values.shape)
    _box_sum_kernel(cum, h, w, out)
    return float(out.max()) if out.size else 0.0


def float_minimiser(unary, cap, valid, window):
    """Least minimiser of the float function on a window, via scaling (helper for small problems).

    Returns (mask, scale, integer value).
    """
    r0, r1, c0, c1 = window
    m = magnitude(unary, cap)[r0:r1, c0:c1]
    scale = scale_for(float(m[valid[r0:r1, c0:c1]].sum()))
    ui, ci = integer_terms(unary, cap, scale)
    mask, value = solve_window(ui, ci, valid, window)
    return mask, scale, value
