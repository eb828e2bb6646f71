"""Neighbour conventions shared by every grid kernel.

Axes are (row, col); row grows southward (down the raster), col eastward.
The eight neighbours are numbered counter-clockwise from east, so that even
codes are cardinal and odd codes are diagonal::

    3 2 1
    4 . 0
    5 6 7

Code ``k`` points at map angle ``k * 45`` degrees counter-clockwise from east.
:data:`NO_DIRECTION` (255) marks a cell that sends no flow (an outlet at the
data edge, a pit, or nodata).

Kernels work on a *padded, flattened* grid: the array gets a one-cell ring of
NaN so that every valid cell has eight addressable neighbours and no bounds
checks are needed. :func:`pad_nan` and :func:`unpad` convert at the boundary.
"""

import numpy as np

DROW = np.array([0, -1, -1, -1, 0, 1, 1, 1], dtype=np.int64)
"""Row step of neighbour code k."""

DCOL = np.array([1, 1, 0, -1, -1, -1, 0, 1], dtype=np.int64)
"""Column step of neighbour code k."""

NO_DIRECTION = np.uint8(255)
"""Direction code of a cell that sends no flow."""


def linear_offsets(ncols_padded):
    """Return the eight flat-index offsets on a padded grid of ``ncols_padded`` columns.

    Parameters
    ----------
    ncols_padded : int
        Number of columns of the padded array (original columns + 2).

    Returns
    -------
    numpy.ndarray of int64, shape (8,)
        ``offsets[k] = DROW[k] * ncols_padded + DCOL[k]``.
    """
    return DROW * np.int64(ncols_padded) + DCOL


def neighbour_distances(dx, dy):
    """Return the horizontal distance to each of the eight neighbours, in metres.

    Parameters
    ----------
    dx, dy : float
        Cell width (east-west) and height (north-south), in metres, both > 0.

    Returns
    -------
    numpy.ndarray of float64, shape (8,)
    """
    diag = float(np.hypot(dx, dy))
    return np.array([dx, diag, dy, diag, dx, diag, dy, diag], dtype=np.float64)


def pad_nan(z, valid=None, dtype=None):
    """Copy ``z`` into a NaN-ringed array, with NaN wherever ``valid`` is False.

    Parameters
    ----------
    z : numpy.ndarray, shape (rows, cols)
        Surface values; NaN marks nodata.
    valid : numpy.ndarray of bool, optional
        Cells to keep. Default: ``numpy.isfinite(z)``.
    dtype : numpy dtype, optional
        Output dtype; default float32 for float32 input, else float64.

    Returns
    -------
    numpy.ndarray, shape (rows + 2, cols + 2)
        A new array; ``z`` is never modified.
    """
    z = np.asarray(z)
    if dtype is None:
        dtype = np.float32 if z.dtype == np.float32 else np.float64
    out = np.full((z.shape[0] + 2, z.shape[1] + 2), np.nan, dtype=dtype)
    inner = out[1:-1, 1:-1]
    inner[...] = z
    if valid is not None:
        inner[~np.asarray(valid, dtype=bool)] = np.nan
    return out


def unpad(a):
    """Return the interior view of a padded array (drops the one-cell ring)."""
    return a[1:-1, 1:-1]
