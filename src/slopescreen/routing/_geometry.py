"""Receiver codes and the per-neighbour and per-facet tables of the router.

A receiver code ``j`` in 0..7 is D-infinity facet ``j`` (cardinal neighbour
``_FACET_CARD[j]``, diagonal neighbour ``_FACET_DIAG[j]``); ``_SINGLE + k``
sends everything to neighbour ``k``; ``_MULTI`` is an MFD cell. :func:`_tables`
gives the distances and unit vectors of a grid of dx by dy cells.
"""

import numpy as np

from .._neighbours import DCOL, DROW, neighbour_distances


_FACET_CARD = np.array([0, 2, 2, 4, 4, 6, 6, 0], dtype=np.int64)
"""Cardinal neighbour code of D-infinity facet j."""

_FACET_DIAG = np.array([1, 1, 3, 3, 5, 5, 7, 7], dtype=np.int64)
"""Diagonal neighbour code of D-infinity facet j."""

_SINGLE = 8
_MULTI = 16
_DONE = 255


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
