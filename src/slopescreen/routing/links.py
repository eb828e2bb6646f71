"""Flow links (donor, receiver, share) of small grids, for tests and diagnostics."""

import numpy as np

from .._neighbours import NO_DIRECTION, unpad
from .._numba import njit
from ._geometry import _FACET_CARD, _FACET_DIAG, _MULTI, _NB_INV, _SINGLE
from .accumulation import _outlets_kernel, _prepare
from .directions import _mfd_weight, _receiver_codes


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
