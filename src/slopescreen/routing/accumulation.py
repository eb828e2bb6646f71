"""Upslope area by Kahn's topological accumulation: :func:`flow_accumulation`.

Also the input checks shared by the routing functions (:func:`_prepare`) and
the padded entry point the pipeline may call (:func:`_route_padded`).

The router works on the surface it is given; it does not fill depressions
(the pipeline fills first with :func:`slopescreen.terrain.fill_depressions`).
Every method runs in four passes over a NaN-padded, flattened grid:

1. a row-parallel pass gives each cell its receivers in compact form (one
   ``uint8`` code, plus one ``float32`` fraction for D-infinity; see
   :mod:`slopescreen.routing.directions`) and its effective contour width ``b``;
2. flats (cells with no strictly lower valid neighbour) get the D8 direction
   of the flat-drainage gradient (:mod:`slopescreen.routing.flats`);
3. a serial pass counts each cell's donors (``uint8`` in-degree);
4. a serial topological pass (Kahn's algorithm) accumulates the upslope area
   in float64.

Memory (D-infinity, per cell, padded grid): surface copy 4 B, code 1 B,
fraction 4 B, width 4 B, in-degree 1 B, area 8 B, plus 4 B for the output
of :func:`~slopescreen.routing.specific_catchment_area`; the flats step
briefly needs 6 B and an int32 queue as long as the flats. MFD and D8 need no
fraction array; MFD recomputes its fractions from the surface during
accumulation.
"""

import math
from typing import NamedTuple

import numpy as np

from .. import _validate
from .._neighbours import NO_DIRECTION, linear_offsets, pad_nan, unpad
from .._numba import njit, njit_parallel, prange
from .._stoppable import POLL, call
from ..errors import InputError
from ._geometry import _DONE, _FACET_CARD, _FACET_DIAG, _MULTI, _NB_INV, _SINGLE
from .directions import _mfd_weight, _receiver_codes


METHODS = ("dinf", "mfd", "d8")
"""Accepted values of ``method``."""

_METHOD_CODE = {"dinf": 0, "mfd": 1, "d8": 2}


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
    del zp, codes  # let go of the padded surface and codes before the unpadded copies
    area = np.ascontiguousarray(unpad(acc))
    del acc
    return FlowResult(area_m2=area, width_m=np.ascontiguousarray(unpad(width)),
                      outflow_m2=float(outflow), undrained=undrained)


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
    arr, _ = _validate.surface(z, valid, name="z")
    dx, dy = _validate.cell_size(dx, dy)
    return pad_nan(arr), dx, dy, _METHOD_CODE[method], p


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
    call(_accumulate_kernel, flat, codes, frac, indeg, offsets, nb, _FACET_CARD, _FACET_DIAG,
         exponent, acc, stop=True)
    return acc.reshape(zp.shape), width.reshape(zp.shape), codes.reshape(zp.shape)


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
def _accumulate_kernel(zp, codes, frac, indeg, offsets, nb, fcard, fdiag, exponent, acc, stop):
    """Kahn's topological accumulation of ``acc`` (in place).

    A raster scan finds the sources (in-degree 0); each is processed from a
    ready stack, and every receiver whose donor count reaches zero is pushed
    on it. A processed or stacked cell is marked 255 in ``indeg``. Returns
    early, ``acc`` unfinished, once ``stop[0]`` is set (a signal).
    """
    stack = np.empty(1024, dtype=np.int64)
    done = 0
    link_k = np.empty(8, dtype=np.int64)
    link_w = np.empty(8, dtype=np.float64)
    for s in range(zp.size):
        if indeg[s] != 0:
            continue
        indeg[s] = _DONE
        stack[0] = s
        top = 1
        while top > 0:
            done += 1
            if done % POLL == 0 and stop[0] != 0:
                return
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
