"""Input checks shared by the public array functions.

Every public function that takes a surface calls :func:`surface` before a
kernel runs, so kernels can assume clean input.
"""

import numpy as np

from .errors import InputError


def surface(z, valid=None, *, name="z", min_size=3):
    """Validate a 2-D surface and return it as float with NaN as nodata.

    Parameters
    ----------
    z : array_like, shape (rows, cols)
        Elevations or another surface; NaN marks nodata.
    valid : array_like of bool, optional
        Cells to use; cells where it is False are treated as nodata.
    name : str
        Name used in error messages.
    min_size : int
        Smallest accepted number of rows and of columns.

    Returns
    -------
    z : numpy.ndarray
        float32 if the input was float32, else float64. A new array only when
        a conversion or masking was needed; the input is never modified.
    valid : numpy.ndarray of bool
        ``isfinite(z) & valid``.

    Raises
    ------
    InputError
        Not 2-D, smaller than ``min_size`` in either axis, holding +-inf, or
        with no valid cell; ``valid`` of another shape.
    """
    arr = np.asarray(z)
    if arr.ndim != 2:
        raise InputError(f"{name}: expected a 2-D array (rows, cols), got {arr.ndim}-D")
    if arr.shape[0] < min_size or arr.shape[1] < min_size:
        raise InputError(
            f"{name}: grid is {arr.shape[0]}x{arr.shape[1]} cells; at least "
            f"{min_size}x{min_size} is needed"
        )
    if arr.dtype != np.float32:
        arr = arr.astype(np.float64)
    if np.isinf(arr).any():
        raise InputError(f"{name}: holds infinite values; use NaN for nodata")
    finite = np.isfinite(arr)
    if valid is not None:
        mask = np.asarray(valid, dtype=bool)
        if mask.shape != arr.shape:
            raise InputError(
                f"valid: shape {mask.shape} does not match {name} shape {arr.shape}"
            )
        finite &= mask
        if not mask.all():
            arr = np.where(mask, arr, np.nan).astype(arr.dtype, copy=False)
    if not finite.any():
        raise InputError(f"{name}: every cell is nodata; nothing to compute")
    return arr, finite


def cell_size(dx, dy):
    """Validate cell sizes in metres and return them as floats.

    Raises
    ------
    InputError
        If either size is not a finite number > 0.
    """
    out = []
    for label, value in (("dx", dx), ("dy", dy)):
        try:
            v = float(value)
        except (TypeError, ValueError):
            raise InputError(f"{label}: expected a cell size in metres, got {value!r}") from None
        if not np.isfinite(v) or v <= 0:
            raise InputError(f"{label}: cell size must be > 0 m, got {value!r}")
        out.append(v)
    return out[0], out[1]
