"""Receivers and effective contour width of every cell (D-infinity, MFD, D8).

A row-parallel pass gives each sloping cell its receiver code, D-infinity
fraction and width; cells with no lower neighbour then take the
flat-drainage direction (:mod:`slopescreen.routing.flats`), or are outlets or
pits.

Receiver codes (one ``uint8`` per cell): ``j`` in 0..7 is D-infinity facet
``j`` (cardinal neighbour ``_FACET_CARD[j]``, diagonal neighbour
``_FACET_DIAG[j]``, diagonal share in ``frac``); ``8 + k`` sends everything to
neighbour ``k``; ``16`` is an MFD cell whose fractions are recomputed from the
surface when needed; ``255`` sends nothing (an outlet on the data edge, a pit,
or a flat with no outlet).
"""

import math

import numpy as np

from .._neighbours import NO_DIRECTION, linear_offsets
from .._numba import njit, njit_parallel, prange
from .._stoppable import call
from ._geometry import (
    _F_COS,
    _F_D1,
    _F_D2,
    _F_E1X,
    _F_E1Y,
    _F_EPX,
    _F_EPY,
    _F_INV_D1,
    _F_INV_D2,
    _F_INV_DD,
    _F_RATIO,
    _F_SIN,
    _F_THETA,
    _FACET_CARD,
    _FACET_DIAG,
    _MULTI,
    _NB_EX,
    _NB_EY,
    _NB_INV,
    _SINGLE,
    _tables,
)
from .flats import _flat_directions_padded


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
    call(_directions_kernel, flat, nrows, ncols, method_code, exponent, offsets, nb, facet,
         _FACET_CARD, _FACET_DIAG, dx * dy, lo, hi, codes, frac, width, stop=True)
    flat_dirs, _ = _flat_directions_padded(zp)
    _no_descent_kernel(flat, nrows, ncols, offsets, nb, flat_dirs.reshape(-1), dx * dy,
                       min(dx, dy), codes, width)
    return codes, frac, width, offsets, nb


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
                       area, lo, hi, codes, frac, width, stop):
    """Receivers (codes, D-infinity fraction) and effective width of each sloping cell.

    Cells with no strictly lower valid neighbour are left at code 255 and
    width NaN for :func:`_no_descent_kernel`. The eight drops z0 - zk are
    read once per cell (NaN for nodata neighbours). Rows left once ``stop[0]``
    is set (a signal) are skipped.
    """
    for r in prange(1, nrows - 1):
        if stop[0] != 0:
            continue
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
