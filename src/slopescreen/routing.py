"""Flow routing (D-infinity, MFD, D8), upslope area and specific catchment area.

The router works on the surface it is given; it does not fill depressions
(the pipeline fills first with :func:`slopescreen.terrain.fill_depressions`).
Flats are drained internally with :mod:`slopescreen.flats`.

Every method runs in four passes over a NaN-padded, flattened grid:

1. a row-parallel pass gives each cell its receivers in compact form (one
   ``uint8`` code, plus one ``float32`` fraction for D-infinity) and its
   effective contour width ``b``;
2. flats (cells with no strictly lower valid neighbour) get the D8 direction
   of the flat-drainage gradient;
3. a serial pass counts each cell's donors (``uint8`` in-degree);
4. a serial topological pass (Kahn's algorithm) accumulates the upslope area
   in float64.

Memory (D-infinity, per cell, padded grid): surface copy 4 B, code 1 B,
fraction 4 B, width 4 B, in-degree 1 B, area 8 B, plus 4 B for the output
of :func:`specific_catchment_area`; the flats step briefly needs 6 B and an
int32 queue as long as the flats. MFD and D8 need no fraction array; MFD
recomputes its fractions from the surface during accumulation.

Receiver codes: ``j`` in 0..7 is D-infinity facet ``j`` (cardinal neighbour
``_FACET_CARD[j]``, diagonal neighbour ``_FACET_DIAG[j]``, diagonal share in
``frac``); ``8 + k`` sends everything to neighbour ``k``; ``16`` is an MFD
cell whose fractions are recomputed from the surface when needed; ``255``
sends nothing (an outlet on the data edge, a pit, or a flat with no outlet).
"""

import math
from typing import NamedTuple

import numpy as np

from . import _checks
from ._neighbours import (
    DCOL,
    DROW,
    NO_DIRECTION,
    linear_offsets,
    neighbour_distances,
    pad_nan,
    unpad,
)
from ._numba import njit, njit_parallel, prange
from .errors import InputError
from .flats import _flat_directions_padded

__all__ = ["FlowResult", "flow_accumulation", "specific_catchment_area", "METHODS"]

METHODS = ("dinf", "mfd", "d8")
"""Accepted values of ``method``."""

_METHOD_CODE = {"dinf": 0, "mfd": 1, "d8": 2}

_FACET_CARD = np.array([0, 2, 2, 4, 4, 6, 6, 0], dtype=np.int64)
"""Cardinal neighbour code of D-infinity facet j."""

_FACET_DIAG = np.array([1, 1, 3, 3, 5, 5, 7, 7], dtype=np.int64)
"""Diagonal neighbour code of D-infinity facet j."""

_SINGLE = 8
_MULTI = 16
_DONE = 255


class FlowResult(NamedTuple):
    """Upslope area and effective contour width of every cell.

    Attributes
    ----------
    area_m2 : numpy.ndarray of float64, shape (rows, cols)
        Planimetric upslope contributing area A in m^2, the cell's own area
        ``dx * dy`` included; NaN on nodata.
    width_m : numpy.ndarray of float32, shape (rows, cols)
        Effective contour width b in metres (see
        :func:`specific_catchment_area`); NaN on nodata.
    outflow_m2 : float
        Total area in m^2 that left the grid at outlets on the data edge.
    undrained : numpy.ndarray of bool, shape (rows, cols)
        Valid cells that send no flow and are not outlets: pits, and flats
        with no outlet. Empty (all False) on a depression-filled surface.
    """

    area_m2: np.ndarray
    width_m: np.ndarray
    outflow_m2: float
    undrained: np.ndarray


def specific_catchment_area(z, dx, dy, method="dinf", valid=None, *, mfd_exponent=1.1):
    """Specific catchment area a = A / b with an orientation-unbiased width b.

    Parameters
    ----------
    z : array_like, shape (rows, cols)
        Elevations in metres, row 0 to the north; NaN marks nodata. Route a
        depression-filled surface: this function does not fill, and flow that
        enters a closed depression stays there (its cells are reported as
        undrained by :func:`flow_accumulation`). Flats are drained
        internally. Never modified; float32 stays float32 inside.
    dx, dy : float
        Cell width (east-west) and height (north-south) in metres, > 0.
    method : {"dinf", "mfd", "d8"}
        D-infinity (Tarboton 1997, the default), multiple flow direction
        (Freeman 1991) or single flow direction D8 (O'Callaghan & Mark 1984).
    valid : array_like of bool, optional
        Cells to use; False is treated as nodata (flow leaves the grid there).
    mfd_exponent : float
        Exponent p of the MFD partition, > 0 (default 1.1). Used by "mfd" only.

    Returns
    -------
    numpy.ndarray of float32, shape (rows, cols)
        a in metres (m^2 of upslope area per metre of contour), NaN on nodata.

    Raises
    ------
    InputError
        Bad surface or cell size (see :func:`slopescreen._checks.surface`),
        an unknown ``method``, or an ``mfd_exponent`` that is not a finite
        number > 0.

    Notes
    -----
    **Upslope area.** A(c) = dx dy + sum over donors d of f_{d->c} A(d), the
    cell's own area included, accumulated in topological order (float64).
    A cell k cells below the divide of a plane aligned with the grid gets
    a = k dx: the exact value at its downslope edge.

    **Receivers.** D8: all flow to the neighbour with the largest
    (z0 - zk) / dk (first in code order on ties). D-infinity: of the eight
    facets (centre, cardinal neighbour at distance d1, adjacent diagonal
    neighbour at d2 across; for east/west facets d1 = dx, d2 = dy, for
    north/south facets d1 = dy, d2 = dx), with s1 = (e0 - e1)/d1,
    s2 = (e1 - e2)/d2, r = atan2(s2, s1), s = hypot(s1, s2), r clamped to
    [0, atan(d2/d1)] (s then the slope along the clamped edge), the steepest
    facet with both neighbours valid wins; the diagonal gets
    f = r / atan(d2/d1), the cardinal 1 - f. If no facet descends, D8 among
    the valid lower neighbours. MFD: f_k = S_k^p / sum_j S_j^p over the valid
    neighbours with S_k = (z0 - zk)/dk > 0. A cell with no strictly lower
    valid neighbour gets the flat-drainage direction
    (:func:`slopescreen.flats.drainage_over_flats`); if it has none and it
    touches nodata or the grid border it is an outlet (its area leaves the
    grid), otherwise it is undrained.

    **Effective contour width.** A fixed width b = dx gives a/L = 1/sqrt(2)
    on a plane at 45 degrees to the grid. Here b is chosen so that an
    inclined plane gives a = L (horizontal distance from the divide) at
    every orientation, for every method. On a plane every cell has the same
    receivers, so translation invariance gives

    .. math:: A(p) = dx\\,dy + \\sum_k f_k\\,A(p - e_k),

    with e_k the horizontal step (m) to receiver k and f_k its fraction.
    With u the unit vector of steepest descent, a linear solution
    A = g (p . u) + c needs g = dx dy / sum_k f_k (e_k . u); a = A/b = L
    needs b = dA/dL = g, hence

    .. math:: b = \\frac{dx\\,dy}{\\sum_k f_k\\,(e_k \\cdot u)},

    the cell area over the mean advance of the flow along the fall line.
    For D-infinity, e_card . u = d1 cos r and e_diag . u = d1 cos r +
    d2 sin r, so b = dx dy / (d1 cos r + f d2 sin r), i.e.
    b = dx / (cos r + f sin r) on square cells. u is the D-infinity
    steepest-facet direction (exact on a plane) for all three methods; where
    no facet descends u follows the single receiver (D8 fallback or flat
    direction), giving b = dx dy / |e_k|. An outlet takes u toward a nodata
    neighbour (cardinal first): b is the length of the cell side the flow
    leaves through. A pit takes b = min(dx, dy). The mean advance is
    clamped to [min(dx, dy) cos 45 deg, hypot(dx, dy)], so
    b is always within [dx dy / hypot(dx, dy), dx dy / (min(dx, dy) cos 45 deg)]
    (on the test planes the clamp never binds).

    **Accuracy** (measured in ``tests/test_reference_sca.py``). Planes at 0 to
    45 degrees to the grid, square and 1 x 1.6 cells: a = L within 2 % for
    D-infinity and MFD from ~10 cells below the divide; D8 within one step
    along its path. The width cannot correct errors of transport between
    directions on curved slopes: on an outward cone D-infinity's
    angle-proportional split pulls flow toward the diagonals (sector means
    -7 % to +16 %, single cells on the axes and diagonals up to +59 %);
    MFD stays within 8 % on square cells, but on rectangular cells it pulls
    flow toward the long cell axis (sector means about +-35 % at
    dy/dx = 1.6). Ring means converge at first order in dx for all methods.

    References
    ----------
    Tarboton, D.G. (1997). A new method for the determination of flow
    directions and upslope areas in grid digital elevation models. Water
    Resources Research 33(2), 309-319. doi:10.1029/96WR03137.

    Freeman, T.G. (1991). Calculating catchment area with divergent flow
    based on a regular grid. Computers & Geosciences 17(3), 413-422 (from
    memory; p = 1.1 as the recommended exponent is also from memory).

    Quinn, P., Beven, K., Chevallier, P., Planchon, O. (1991). The prediction
    of hillslope flow paths for distributed hydrological modelling using
    digital terrain models. Hydrological Processes 5(1), 59-79 (the
    multiple-direction idea; volume and pages from memory).

    O'Callaghan, J.F., Mark, D.M. (1984). The extraction of drainage
    networks from digital elevation data. Computer Vision, Graphics, and
    Image Processing 28, 323-344 (from memory).

    Kahn, A.B. (1962). Topological sorting of large networks. Communications
    of the ACM 5(11), 558-562.

    Examples
    --------
    A plane falling east by 1 m per 10 m cell: each column adds one cell
    length, and the east column (an outlet) gets a = 5 cells.

    >>> import numpy as np
    >>> from slopescreen.routing import specific_catchment_area
    >>> z = np.tile(np.arange(5.0, 0.0, -1.0), (4, 1))
    >>> specific_catchment_area(z, 10.0, 10.0)[1]
    array([10., 20., 30., 40., 50.], dtype=float32)
    """
    zp, dx, dy, code, p = _prepare(z, dx, dy, method, valid, mfd_exponent)
    acc, width, _ = _route_padded(zp, dx, dy, code, p)
    out = np.empty((zp.shape[0] - 2, zp.shape[1] - 2), dtype=np.float32)
    _sca_kernel(acc.reshape(-1), width.reshape(-1), zp.shape[0], zp.shape[1], out)
    return out


def flow_accumulation(z, dx, dy, method="dinf", valid=None, *, mfd_exponent=1.1):
    """Route flow and return upslope area, effective width and outflow.

    Parameters
    ----------
    z : array_like, shape (rows, cols)
        Elevations in metres, row 0 to the north; NaN marks nodata. Not
        filled here (see :func:`specific_catchment_area`); never modified.
    dx, dy : float
        Cell width (east-west) and height (north-south) in metres, > 0.
    method : {"dinf", "mfd", "d8"}
        Routing method.
    valid : array_like of bool, optional
        Cells to use; False is treated as nodata.
    mfd_exponent : float
        Exponent p of the MFD partition, > 0 (default 1.1).

    Returns
    -------
    FlowResult
        ``area_m2`` (float64, m^2), ``width_m`` (float32, m), ``outflow_m2``
        (float, m^2) and ``undrained`` (bool). On a depression-filled
        surface ``outflow_m2`` equals the total valid area up to rounding.

    Raises
    ------
    InputError
        As :func:`specific_catchment_area`.

    Notes
    -----
    The equations are given in :func:`specific_catchment_area`, which returns
    ``area_m2 / width_m``. The accumulation is Kahn's topological sort: each
    cell's donor count is kept in a ``uint8``; cells whose count drops to zero
    are processed from a small ready stack, and a raster scan picks up the
    sources, so no queue as large as the grid is needed. Cost O(n), no
    recursion.

    References
    ----------
    See :func:`specific_catchment_area`.

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.routing import flow_accumulation
    >>> z = np.tile(np.arange(5.0, 0.0, -1.0), (4, 1))
    >>> res = flow_accumulation(z, 10.0, 10.0, method="d8")
    >>> res.area_m2[1]
    array([100., 200., 300., 400., 500.])
    >>> res.outflow_m2
    2000.0
    """
    zp, dx, dy, code, p = _prepare(z, dx, dy, method, valid, mfd_exponent)
    acc, width, codes = _route_padded(zp, dx, dy, code, p)
    nrows, ncols = zp.shape
    undrained = np.zeros((nrows - 2, ncols - 2), dtype=bool)
    outflow = _outlets_kernel(zp.reshape(-1), codes.reshape(-1), acc.reshape(-1),
                              nrows, ncols, linear_offsets(ncols), undrained)
    return FlowResult(
        area_m2=np.ascontiguousarray(unpad(acc)),
        width_m=np.ascontiguousarray(unpad(width)),
        outflow_m2=float(outflow),
        undrained=undrained,
    )


# --------------------------------------------------------------------------
# Internal entry points
# --------------------------------------------------------------------------


def _prepare(z, dx, dy, method, valid, mfd_exponent):
    """Validate the inputs; return the padded surface, cell sizes, method code and p."""
    if not isinstance(method, str) or method not in _METHOD_CODE:
        raise InputError(
            f"method: expected one of {', '.join(repr(m) for m in METHODS)}, got {method!r}"
        )
    try:
        p = float(mfd_exponent)
    except (TypeError, ValueError):
        raise InputError(f"mfd_exponent: expected a number > 0, got {mfd_exponent!r}") from None
    if not math.isfinite(p) or p <= 0.0:
        raise InputError(f"mfd_exponent: expected a finite number > 0, got {mfd_exponent!r}")
    arr, _ = _checks.surface(z, valid, name="z")
    dx, dy = _checks.cell_size(dx, dy)
    return pad_nan(arr), dx, dy, _METHOD_CODE[method], p


# Rows of the per-neighbour table (index k = neighbour code).
_NB_DIST, _NB_INV, _NB_EX, _NB_EY = range(4)
# Rows of the per-facet table (index j = facet).
(_F_INV_D1, _F_INV_D2, _F_INV_DD, _F_RATIO, _F_D1, _F_D2, _F_THETA, _F_COS, _F_SIN,
 _F_E1X, _F_E1Y, _F_EPX, _F_EPY) = range(13)


def _tables(dx, dy):
    """Per-neighbour and per-facet constants of a grid of dx by dy cells.

    Returns ``nb`` (4 x 8: distance, 1/distance, east and north step in m)
    and ``facet`` (13 x 8: 1/d1, 1/d2, 1/hypot(d1, d2), d2/d1, d1, d2,
    theta = atan(d2/d1), cos theta, sin theta, unit vector toward the
    cardinal neighbour (east, north), unit vector from the cardinal toward
    the diagonal neighbour (east, north)).
    """
    dist = neighbour_distances(dx, dy)
    ex = DCOL.astype(np.float64) * dx
    ey = -DROW.astype(np.float64) * dy
    nb = np.stack([dist, 1.0 / dist, ex, ey])
    card, diag = _FACET_CARD, _FACET_DIAG
    d1 = dist[card]
    px = ex[diag] - ex[card]
    py = ey[diag] - ey[card]
    d2 = np.hypot(px, py)
    dd = dist[diag]
    theta = np.arctan2(d2, d1)
    facet = np.stack([1.0 / d1, 1.0 / d2, 1.0 / dd, d2 / d1, d1, d2, theta, d1 / dd, d2 / dd,
                      ex[card] / d1, ey[card] / d1, px / d2, py / d2])
    return nb, facet


def _receiver_codes(zp, dx, dy, method_code, exponent):
    """Receiver codes, D-infinity fractions and widths of a padded surface (flats included)."""
    nrows, ncols = zp.shape
    flat = zp.reshape(-1)
    nb, facet = _tables(dx, dy)
    offsets = linear_offsets(ncols)
    codes = np.full(flat.size, NO_DIRECTION, dtype=np.uint8)
    frac = np.zeros(flat.size if method_code == 0 else 1, dtype=np.float32)
    width = np.full(flat.size, np.nan, dtype=np.float32)
    lo = min(dx, dy) * math.cos(math.pi / 4.0)
    hi = math.hypot(dx, dy)
    _directions_kernel(flat, nrows, ncols, method_code, exponent, offsets, nb, facet,
                       _FACET_CARD, _FACET_DIAG, dx * dy, lo, hi, codes, frac, width)
    flat_dirs, _ = _flat_directions_padded(zp)
    _no_descent_kernel(flat, nrows, ncols, offsets, nb, flat_dirs.reshape(-1), dx * dy,
                       min(dx, dy), codes, width)
    return codes, frac, width, offsets, nb


def _route_padded(zp, dx, dy, method_code, exponent):
    """Route a padded surface; return padded (area float64, width float32, codes uint8).

    ``method_code`` is 0 (D-infinity), 1 (MFD) or 2 (D8). The pipeline may
    call this directly on a padded array to avoid copies.
    """
    codes, frac, width, offsets, nb = _receiver_codes(zp, dx, dy, method_code, exponent)
    flat = zp.reshape(-1)
    indeg = np.zeros(flat.size, dtype=np.uint8)
    acc = np.empty(flat.size, dtype=np.float64)
    _indegree_kernel(flat, codes, frac, offsets, _FACET_CARD, _FACET_DIAG, dx * dy, indeg, acc)
    _accumulate_kernel(flat, codes, frac, indeg, offsets, nb, _FACET_CARD, _FACET_DIAG,
                       exponent, acc)
    return acc.reshape(zp.shape), width.reshape(zp.shape), codes.reshape(zp.shape)


def _receivers(z, dx, dy, method="dinf", valid=None, *, mfd_exponent=1.1):
    """Receiver lists for small grids (tests and diagnostics).

    Returns
    -------
    donor, receiver : numpy.ndarray of int64
        Flat (row-major, unpadded) indices of each flow link.
    fraction : numpy.ndarray of float64
        Share of the donor's area sent along the link.
    outlet : numpy.ndarray of bool, shape (rows, cols)
        Cells whose flow leaves the grid.
    """
    zp, dx, dy, code, p = _prepare(z, dx, dy, method, valid, mfd_exponent)
    nrows, ncols = zp.shape
    flat = zp.reshape(-1)
    codes, frac, width, offsets, nb = _receiver_codes(zp, dx, dy, code, p)
    n_links = 8 * flat.size
    donor = np.empty(n_links, dtype=np.int64)
    receiver = np.empty(n_links, dtype=np.int64)
    fraction = np.empty(n_links, dtype=np.float64)
    n = _links_kernel(flat, codes, frac, offsets, nb, _FACET_CARD, _FACET_DIAG, p,
                      donor, receiver, fraction)
    undrained = np.zeros((nrows - 2, ncols - 2), dtype=bool)
    _outlets_kernel(flat, codes, np.zeros(flat.size), nrows, ncols, offsets, undrained)
    outlet = np.isfinite(unpad(zp)) & ~undrained & (unpad(codes.reshape(zp.shape)) == 255)

    def unpadded(idx):
        r, c = np.divmod(idx, ncols)
        return (r - 1) * (ncols - 2) + (c - 1)

    return unpadded(donor[:n]), unpadded(receiver[:n]), fraction[:n].copy(), outlet


# --------------------------------------------------------------------------
# Kernels
# --------------------------------------------------------------------------


@njit
def _facet_direction(j, kind, s1, s2, s, facet):
    """cos r and sin r of the flow direction inside facet j."""
    if kind == 0:
        return 1.0, 0.0
    if kind == 2:
        return facet[_F_COS, j], facet[_F_SIN, j]
    return s1 / s, s2 / s


@njit
def _mfd_weight(slope, exponent):
    """Freeman's weight S^p (S > 0)."""
    if exponent == 1.0:
        return slope
    return math.exp(exponent * math.log(slope))


@njit
def _clamped_width(area, advance, lo, hi):
    if advance < lo:
        advance = lo
    elif advance > hi:
        advance = hi
    return area / advance


@njit_parallel
def _directions_kernel(zp, nrows, ncols, method, exponent, offsets, nb, facet, fcard, fdiag,
                       area, lo, hi, codes, frac, width):
    """Receivers (codes, D-infinity fraction) and effective width of each sloping cell.

    Cells with no strictly lower valid neighbour are left at code 255 and
    width NaN for :func:`_no_descent_kernel`. The eight drops z0 - zk are
    read once per cell (NaN for nodata neighbours).
    """
    for r in prange(1, nrows - 1):
        for c in range(1, ncols - 1):
            p = r * ncols + c
            z0 = np.float64(zp[p])
            if z0 != z0:
                continue
            drops = (z0 - np.float64(zp[p + offsets[0]]), z0 - np.float64(zp[p + offsets[1]]),
                     z0 - np.float64(zp[p + offsets[2]]), z0 - np.float64(zp[p + offsets[3]]),
                     z0 - np.float64(zp[p + offsets[4]]), z0 - np.float64(zp[p + offsets[5]]),
                     z0 - np.float64(zp[p + offsets[6]]), z0 - np.float64(zp[p + offsets[7]]))
            # D-infinity steepest facet among facets with both neighbours valid
            # (kind 0: clamped to the cardinal edge, 1: inside, 2: clamped to
            # the diagonal edge)
            j = -1
            kind = 0
            s = 0.0
            s1 = 0.0
            s2 = 0.0
            for jj in range(8):
                a = drops[fcard[jj]]
                b = drops[fdiag[jj]]
                if a != a or b != b:
                    continue
                t1 = a * facet[_F_INV_D1, jj]
                t2 = (b - a) * facet[_F_INV_D2, jj]
                if t2 > 0.0:
                    if t1 > 0.0 and t2 <= t1 * facet[_F_RATIO, jj]:
                        t = math.sqrt(t1 * t1 + t2 * t2)
                        tkind = 1
                    else:
                        t = b * facet[_F_INV_DD, jj]
                        tkind = 2
                else:
                    t = t1
                    tkind = 0
                if t > s:
                    s = t
                    j = jj
                    kind = tkind
                    s1 = t1
                    s2 = t2
            # D8 steepest neighbour (first on ties)
            k8 = -1
            best = 0.0
            for k in range(8):
                t = drops[k] * nb[_NB_INV, k]
                if t > best:
                    best = t
                    k8 = k
            if k8 < 0:
                continue  # no lower neighbour: flat, outlet or pit
            ux = 0.0
            uy = 0.0
            cos_r = 1.0
            sin_r = 0.0
            if j >= 0:
                cos_r, sin_r = _facet_direction(j, kind, s1, s2, s, facet)
                ux = cos_r * facet[_F_E1X, j] + sin_r * facet[_F_EPX, j]
                uy = cos_r * facet[_F_E1Y, j] + sin_r * facet[_F_EPY, j]
            if method == 0:
                if j >= 0:
                    if kind == 0:
                        f = 0.0
                    elif kind == 2:
                        f = 1.0
                    else:
                        f = min(math.atan2(s2, s1) / facet[_F_THETA, j], 1.0)
                    codes[p] = j
                    frac[p] = f
                    advance = facet[_F_D1, j] * cos_r + f * facet[_F_D2, j] * sin_r
                    width[p] = _clamped_width(area, advance, lo, hi)
                else:
                    codes[p] = _SINGLE + k8
                    width[p] = area * nb[_NB_INV, k8]
            elif method == 2:
                codes[p] = _SINGLE + k8
                if j >= 0:
                    advance = nb[_NB_EX, k8] * ux + nb[_NB_EY, k8] * uy
                    width[p] = _clamped_width(area, advance, lo, hi)
                else:
                    width[p] = area * nb[_NB_INV, k8]
            else:
                codes[p] = _MULTI
                if j >= 0:
                    total = 0.0
                    moment = 0.0
                    for k in range(8):
                        if drops[k] > 0.0:
                            w = _mfd_weight(drops[k] * nb[_NB_INV, k], exponent)
                            total += w
                            moment += w * (nb[_NB_EX, k] * ux + nb[_NB_EY, k] * uy)
                    width[p] = _clamped_width(area, moment / total, lo, hi)
                else:
                    width[p] = area * nb[_NB_INV, k8]


@njit_parallel
def _no_descent_kernel(zp, nrows, ncols, offsets, nb, flat_dirs, area, pit_width, codes, width):
    """Codes and widths of cells with no lower neighbour: flats, outlets, pits."""
    for r in prange(1, nrows - 1):
        for c in range(1, ncols - 1):
            p = r * ncols + c
            if zp[p] != zp[p] or codes[p] != NO_DIRECTION:
                continue
            k = flat_dirs[p]
            if k != NO_DIRECTION:
                codes[p] = _SINGLE + k
                width[p] = area * nb[_NB_INV, k]
                continue
            width[p] = pit_width
            # Outlet: the flow leaves through a nodata side, cardinal first.
            for i in range(8):
                kk = (2 * i) % 8 + i // 4
                if zp[p + offsets[kk]] != zp[p + offsets[kk]]:
                    width[p] = area * nb[_NB_INV, kk]
                    break


@njit
def _indegree_kernel(zp, codes, frac, offsets, fcard, fdiag, area, indeg, acc):
    """Donor count of each valid cell (255 on nodata) and the initial area (NaN on nodata).

    ``indeg`` must start at zero.
    """
    for p in range(zp.size):
        if zp[p] != zp[p]:
            indeg[p] = _DONE
            acc[p] = np.nan
        else:
            acc[p] = area
    for p in range(zp.size):
        cd = codes[p]
        if cd == NO_DIRECTION:
            continue
        if cd < _SINGLE:
            f = frac[p]
            if f < 1.0:
                indeg[p + offsets[fcard[cd]]] += 1
            if f > 0.0:
                indeg[p + offsets[fdiag[cd]]] += 1
        elif cd < _MULTI:
            indeg[p + offsets[cd - _SINGLE]] += 1
        else:
            z0 = zp[p]
            for k in range(8):
                if zp[p + offsets[k]] < z0:
                    indeg[p + offsets[k]] += 1


@njit
def _accumulate_kernel(zp, codes, frac, indeg, offsets, nb, fcard, fdiag, exponent, acc):
    """Kahn's topological accumulation of ``acc`` (in place).

    A raster scan finds the sources (in-degree 0); each is processed from a
    ready stack, and every receiver whose donor count reaches zero is pushed
    on it. A processed or stacked cell is marked 255 in ``indeg``.
    """
    stack = np.empty(1024, dtype=np.int64)
    link_k = np.empty(8, dtype=np.int64)
    link_w = np.empty(8, dtype=np.float64)
    for s in range(zp.size):
        if indeg[s] != 0:
            continue
        indeg[s] = _DONE
        stack[0] = s
        top = 1
        while top > 0:
            top -= 1
            p = stack[top]
            cd = codes[p]
            if cd == NO_DIRECTION:
                continue
            m = 0
            if cd < _SINGLE:
                f = np.float64(frac[p])
                if f < 1.0:
                    link_k[m] = fcard[cd]
                    link_w[m] = 1.0 - f
                    m += 1
                if f > 0.0:
                    link_k[m] = fdiag[cd]
                    link_w[m] = f
                    m += 1
            elif cd < _MULTI:
                link_k[0] = cd - _SINGLE
                link_w[0] = 1.0
                m = 1
            else:
                z0 = np.float64(zp[p])
                total = 0.0
                for k in range(8):
                    zk = np.float64(zp[p + offsets[k]])
                    if zk < z0:
                        w = _mfd_weight((z0 - zk) * nb[_NB_INV, k], exponent)
                        link_k[m] = k
                        link_w[m] = w
                        total += w
                        m += 1
                for i in range(m):
                    link_w[i] /= total
            a = acc[p]
            for i in range(m):
                q = p + offsets[link_k[i]]
                acc[q] += a * link_w[i]
                indeg[q] -= 1
                if indeg[q] == 0:
                    indeg[q] = _DONE
                    if top == stack.size:
                        bigger = np.empty(2 * stack.size, dtype=np.int64)
                        bigger[:top] = stack[:top]
                        stack = bigger
                    stack[top] = q
                    top += 1


@njit_parallel
def _outlets_kernel(zp, codes, acc, nrows, ncols, offsets, undrained):
    """Total area leaving at outlets; flag valid cells with no receiver that are not outlets."""
    total = 0.0
    for r in prange(1, nrows - 1):
        for c in range(1, ncols - 1):
            p = r * ncols + c
            if zp[p] != zp[p] or codes[p] != NO_DIRECTION:
                continue
            edge = False
            for k in range(8):
                if zp[p + offsets[k]] != zp[p + offsets[k]]:
                    edge = True
                    break
            if edge:
                total += acc[p]
            else:
                undrained[r - 1, c - 1] = True
    return total


@njit_parallel
def _sca_kernel(acc, width, nrows, ncols, out):
    """a = A / b into an unpadded float32 array."""
    for r in prange(1, nrows - 1):
        for c in range(1, ncols - 1):
            p = r * ncols + c
            out[r - 1, c - 1] = acc[p] / width[p]


@njit
def _links_kernel(zp, codes, frac, offsets, nb, fcard, fdiag, exponent, donor, receiver, fraction):
    """Every flow link (padded indices) with its share; returns the number of links."""
    n = 0
    for p in range(zp.size):
        cd = codes[p]
        if cd == NO_DIRECTION:
            continue
        if cd < _SINGLE:
            f = np.float64(frac[p])
            if f < 1.0:
                donor[n] = p
                receiver[n] = p + offsets[fcard[cd]]
                fraction[n] = 1.0 - f
                n += 1
            if f > 0.0:
                donor[n] = p
                receiver[n] = p + offsets[fdiag[cd]]
                fraction[n] = f
                n += 1
        elif cd < _MULTI:
            donor[n] = p
            receiver[n] = p + offsets[cd - _SINGLE]
            fraction[n] = 1.0
            n += 1
        else:
            z0 = np.float64(zp[p])
            total = 0.0
            first = n
            for k in range(8):
                zk = np.float64(zp[p + offsets[k]])
                if zk < z0:
                    w = _mfd_weight((z0 - zk) * nb[_NB_INV, k], exponent)
                    donor[n] = p
                    receiver[n] = p + offsets[k]
                    fraction[n] = w
                    total += w
                    n += 1
            for i in range(first, n):
                fraction[i] /= total
    return n
