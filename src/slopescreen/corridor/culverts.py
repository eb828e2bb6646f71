"""Culverts through road fills: breach the DEM where water passes under a road.

A road embankment across a valley is a dam in a DEM. Depression filling
(Priority-Flood, :func:`slopescreen.terrain.fill_depressions`) then raises the
valley floor behind the fill into a pond that does not exist and moves the
flow paths, while in reality the water passes through a culvert. Users give
culvert locations as points; before filling, the DEM is *breached* through
the road fill at each of them:

1. :func:`culvert_crossings` snaps each culvert point to the road centreline
   and lays the culvert perpendicular to the centreline there, long enough
   that both ends lie beyond the road strip;
2. :func:`crossing_cells` turns each crossing into the 8-connected run of
   cells it passes through;
3. :func:`breach` carves a channel along those cells, from the lower of the
   two end elevations up to the higher one, never raising a cell.

The breached DEM is for flow routing only (it is filled next); the slope used
for stability comes from the original DEM and is not changed. The method is
described in docs/methods.md, "Culverts through road fills".
"""

from typing import NamedTuple

import numpy as np
import shapely
from shapely.geometry import LineString, MultiLineString, Point

from .. import _validate
from .._neighbours import linear_offsets, pad_nan, unpad
from ..errors import InputError

__all__ = ["CulvertCrossings", "culvert_crossings", "crossing_cells", "breach"]

_SAMPLES_PER_CELL = 4
"""Samples per cell along a crossing (a step of at most 1/4 cell in each axis)."""

_TANGENT_STEP_CELLS = 0.25
"""Half the chord used for the local tangent of the centreline, in cells."""


class CulvertCrossings(NamedTuple):
    """The crossing of each culvert through the road strip.

    Attributes
    ----------
    ends : numpy.ndarray of float64, shape (n, 2, 2)
        ``ends[i, 0]`` and ``ends[i, 1]`` are the map coordinates (x, y), in
        the DEM CRS, of end A and end B of culvert ``i``. End A lies to the
        left of the centreline's direction of digitising, end B to the right.
    centres : numpy.ndarray of float64, shape (n, 2)
        The point of the centreline nearest to each culvert point (the
        middle of its crossing), map coordinates.
    snap_m : numpy.ndarray of float64, shape (n,)
        Distance in metres from each culvert point to the centreline.
    """

    ends: np.ndarray
    centres: np.ndarray
    snap_m: np.ndarray


# --------------------------------------------------------------------------
# Geometry: where each culvert crosses the road
# --------------------------------------------------------------------------


def culvert_crossings(points_xy, line, half_width_m, grid, *, extra_cells=2, name="culverts"):
    r"""Lay each culvert across the road strip, perpendicular to the centreline.

    Parameters
    ----------
    points_xy : array_like, shape (n, 2), or sequence of shapely Points
        Culvert locations, map coordinates (x, y) in the DEM CRS.
    line : shapely.geometry.LineString or MultiLineString
        Road centreline in the DEM CRS.
    half_width_m : float
        Half width of the road strip (the fill) in metres, > 0.
    grid : slopescreen.grid.Grid
        The DEM grid; its cell size and ``linear_unit_m`` (CRS unit in
        metres; a foot CRS is allowed) are used.
    extra_cells : float, default 2
        How many cells each end of the culvert reaches beyond the strip,
        >= 0.
    name : str, default "culverts"
        What the points are, put first in error messages (for example
        ``"culverts.gpkg: [corridor] culverts"``).

    Returns
    -------
    CulvertCrossings
        ``ends`` (n, 2, 2), ``centres`` (n, 2) and ``snap_m`` (n,).

    Raises
    ------
    InputError
        A point that is not finite, or lies farther than ``half_width_m``
        plus one cell diagonal from the centreline (one line naming the
        culvert's index, counted from 0, and its distance); an empty or
        degenerate centreline; a bad ``half_width_m`` or ``extra_cells``.

    Notes
    -----
    Each point p is snapped to the nearest point c of the centreline. For a
    MultiLineString the part nearest to p is used. With d the distance of c
    along that part, the local tangent is the chord

    .. math:: \mathbf{t} = \frac{L(d + \delta) - L(d - \delta)}
                                {\lVert L(d + \delta) - L(d - \delta) \rVert}

    (``line.interpolate``; both arguments clipped to the part, δ a quarter of
    a cell), and the unit normal is :math:`\mathbf{n} = (-t_y, t_x)`. The
    culvert runs from :math:`c + \ell\,\mathbf{n}` (end A) to
    :math:`c - \ell\,\mathbf{n}` (end B) with

    .. math:: \ell = \frac{w + k\,s}{u}

    where w is ``half_width_m``, k ``extra_cells``, s the larger cell side in
    metres and u ``grid.linear_unit_m``, so that both ends lie outside the
    road strip: its length is 2 (w + k s) metres. A culvert point may lie off
    the centreline by at most w plus one cell diagonal (a point digitised at
    the toe of the fill or one cell off); farther, it probably belongs to
    another road or another CRS, and it is refused. See docs/methods.md,
    "Culverts through road fills".

    Examples
    --------
    >>> from shapely.geometry import LineString
    >>> from slopescreen.grid import Grid
    >>> grid = Grid.regular((20, 20), west=0.0, north=200.0, cell_m=10.0, crs="EPSG:32633")
    >>> road = LineString([(0.0, 105.0), (200.0, 105.0)])
    >>> c = culvert_crossings([(95.0, 100.0)], road, 10.0, grid)
    >>> c.ends[0].tolist(), c.snap_m.tolist()
    ([[95.0, 135.0], [95.0, 75.0]], [5.0])
    """
    pts = _points(points_xy, name)
    parts = _line_parts(line, name)
    w = _validate.nonnegative(half_width_m, "half_width_m", allow_zero=False)
    k = _validate.nonnegative(extra_cells, "extra_cells")
    unit = float(grid.linear_unit_m)
    cell_m = max(float(grid.dx_m), float(grid.dy_m))
    half_len = (w + k * cell_m) / unit
    limit_m = w + float(np.hypot(grid.dx_m, grid.dy_m))
    delta = _TANGENT_STEP_CELLS * min(float(grid.dx_m), float(grid.dy_m)) / unit

    n = pts.shape[0]
    ends = np.empty((n, 2, 2), dtype=np.float64)
    centres = np.empty((n, 2), dtype=np.float64)
    snap_m = np.empty(n, dtype=np.float64)
    for i in range(n):
        p = Point(pts[i, 0], pts[i, 1])
        dists = [part.distance(p) for part in parts]
        j = int(np.argmin(dists))
        part = parts[j]
        snap_m[i] = dists[j] * unit
        if snap_m[i] > limit_m:
            raise InputError(
                f"{name}: culvert {i} (counting from 0) lies {snap_m[i]:.1f} m from the road "
                f"centreline; at most {limit_m:.1f} m (half width {w:g} m + one cell diagonal) "
                "is accepted: move the point onto the road or check its CRS"
            )
        d = part.project(p)
        c = part.interpolate(d)
        before = part.interpolate(max(d - delta, 0.0))
        after = part.interpolate(min(d + delta, part.length))
        tx, ty = after.x - before.x, after.y - before.y
        norm = float(np.hypot(tx, ty))
        if not norm > 0.0:
            raise InputError(f"{name}: culvert {i} (counting from 0) snaps to a part of the road "
                             "centreline without length; remove the degenerate part")
        ux, uy = -ty / norm, tx / norm
        centres[i] = (c.x, c.y)
        ends[i, 0] = (c.x + half_len * ux, c.y + half_len * uy)
        ends[i, 1] = (c.x - half_len * ux, c.y - half_len * uy)
    return CulvertCrossings(ends=ends, centres=centres, snap_m=snap_m)


def _points(points_xy, name):
    """Culvert points as a float64 (n, 2) array; shapely Points are accepted."""
    arr = np.asarray(points_xy, dtype=object if _holds_geometries(points_xy) else None)
    if arr.dtype == object:
        arr = shapely.get_coordinates(arr)
    arr = np.asarray(arr, dtype=np.float64)
    if arr.size == 0:
        return np.empty((0, 2), dtype=np.float64)
    if arr.ndim != 2 or arr.shape[1] != 2:
        raise InputError(f"{name}: expected culvert points as (x, y) pairs, got an array of "
                         f"shape {arr.shape}")
    bad = np.flatnonzero(~np.isfinite(arr).all(axis=1))
    if bad.size:
        raise InputError(f"{name}: culvert {int(bad[0])} (counting from 0) has no finite "
                         "coordinates; fix or remove it")
    return arr


def _holds_geometries(points_xy):
    if isinstance(points_xy, np.ndarray):
        return points_xy.dtype == object
    try:
        return len(points_xy) > 0 and isinstance(points_xy[0], shapely.Geometry)
    except TypeError:
        return False


def _line_parts(line, name):
    """The LineString parts of the centreline (non-empty)."""
    if isinstance(line, LineString):
        parts = [line]
    elif isinstance(line, MultiLineString):
        parts = list(line.geoms)
    else:
        raise InputError(f"{name}: the road centreline must be a LineString or MultiLineString, "
                         f"got {type(line).__name__}")
    parts = [p for p in parts if not p.is_empty]
    if not parts:
        raise InputError(f"{name}: the road centreline is empty")
    return parts


# --------------------------------------------------------------------------
# Cells along each crossing
# --------------------------------------------------------------------------


def crossing_cells(ends, grid):
    """Cells along each crossing, from end A to end B, 8-connected without gaps.

    Parameters
    ----------
    ends : array_like, shape (n, 2, 2)
        End points (x, y) of each crossing in map coordinates of the DEM CRS,
        as :attr:`CulvertCrossings.ends`.
    grid : slopescreen.grid.Grid
        The DEM grid (``shape`` and ``transform`` are used).

    Returns
    -------
    list of (rows, cols)
        One pair of int64 arrays per crossing: the cells from end A to end B,
        each an 8-neighbour of the previous one, none repeated, clipped to
        the grid (empty arrays for a crossing wholly outside it).

    Raises
    ------
    InputError
        ``ends`` of another shape or holding non-finite coordinates.

    Notes
    -----
    The segment is sampled at equal steps of at most a quarter of a cell
    along each axis (end points included) and each sample is mapped to the
    cell that holds it; consecutive repeats are dropped. Two samples at most a
    quarter cell apart in each axis lie in the same cell or in 8-neighbours,
    and a straight segment enters each (convex) cell at most once, so the run
    is 8-connected with no repeats. The cells of a segment inside the grid
    form one stretch, so clipping keeps it connected.

    Examples
    --------
    >>> from slopescreen.grid import Grid
    >>> grid = Grid.regular((5, 5), west=0.0, north=50.0, cell_m=10.0, crs="EPSG:32633")
    >>> [(r.tolist(), c.tolist()) for r, c in crossing_cells([[(5.0, 45.0), (35.0, 15.0)]], grid)]
    [([0, 1, 2, 3], [0, 1, 2, 3])]
    """
    arr = np.asarray(ends, dtype=np.float64)
    if arr.size == 0:
        return []
    if arr.ndim != 3 or arr.shape[1:] != (2, 2):
        raise InputError(f"ends: expected shape (n, 2, 2) (two (x, y) ends per crossing), got {arr.shape}")
    if not np.isfinite(arr).all():
        raise InputError("ends: holds non-finite coordinates")
    inv = ~grid.transform
    nrows, ncols = int(grid.shape[0]), int(grid.shape[1])
    x, y = arr[..., 0], arr[..., 1]
    col_f = inv.a * x + inv.b * y + inv.c
    row_f = inv.d * x + inv.e * y + inv.f
    out = []
    for i in range(arr.shape[0]):
        r0, r1 = row_f[i]
        c0, c1 = col_f[i]
        steps = max(1, int(np.ceil(_SAMPLES_PER_CELL * max(abs(r1 - r0), abs(c1 - c0)))))
        t = np.linspace(0.0, 1.0, steps + 1)
        rows = np.floor(r0 + t * (r1 - r0)).astype(np.int64)
        cols = np.floor(c0 + t * (c1 - c0)).astype(np.int64)
        keep = np.ones(rows.size, dtype=bool)
        keep[1:] = (rows[1:] != rows[:-1]) | (cols[1:] != cols[:-1])
        keep &= (rows >= 0) & (rows < nrows) & (cols >= 0) & (cols < ncols)
        out.append((rows[keep], cols[keep]))
    return out


# --------------------------------------------------------------------------
# Carving the channel
# --------------------------------------------------------------------------


def breach(z, crossings, valid=None, *, dx=1.0, dy=1.0):
    r"""Carve a channel through the road fill along each culvert crossing.

    Parameters
    ----------
    z : array_like, shape (rows, cols)
        Elevations in metres; NaN marks nodata. Never modified.
    crossings : sequence of (rows, cols)
        Cells of each crossing in order from one end to the other, as
        returned by :func:`crossing_cells`.
    valid : array_like of bool, shape (rows, cols), optional
        Cells to use; cells where it is False are treated as nodata and are
        returned unchanged.
    dx, dy : float, default 1
        Cell width and height in metres (only their ratio matters: it
        weighs diagonal and cardinal steps along the channel).

    Returns
    -------
    numpy.ndarray, shape (rows, cols)
        A new array, float32 for float32 input and float64 otherwise: ``z``
        with the channels carved. Cells off the crossings and cells outside
        ``valid`` hold their input values.

    Raises
    ------
    InputError
        As :func:`slopescreen.terrain.fill_depressions` for ``z`` and
        ``valid``; a crossing whose rows and cols differ in length, are not
        integers or leave the grid.

    Notes
    -----
    The culvert is modelled as a channel carved through the fill along the
    perpendicular crossing (:func:`culvert_crossings`), before Priority-Flood
    (Barnes, Lehman & Mulla 2014) fills the depressions. For a crossing of
    cells :math:`c_0 \dots c_m` the end elevations are the lowest valid
    elevations in the 3x3 neighbourhoods of the end cells,

    .. math:: z_a = \min_{N_3(c_0)} z, \qquad z_b = \min_{N_3(c_m)} z

    (if an end cell has no valid cell around it, the nearest cell inward that
    has one serves as the end). With :math:`s_j` the distance along the
    crossing from :math:`c_0` to :math:`c_j` (cell-centre steps of
    :math:`\Delta x`, :math:`\Delta y` or the diagonal) and
    :math:`\tau_j = s_j / s_m`, the bed runs linearly from the higher end
    down to the lower one,

    .. math:: b_j = z_a + \tau_j (z_b - z_a),

    and every valid cell of the crossing becomes :math:`\min(z_j, b_j)`:
    cells are lowered, never raised. The bed descends without a rise from
    the upstream side of the fill to the downstream side, so the filled DEM
    has no fake pond behind the fill and flow crosses the road where the
    water does. Only the DEM used for routing is breached; the slope used for
    stability is computed from the original DEM and is not changed. See
    docs/methods.md, "Culverts through road fills".

    References
    ----------
    Barnes, R., Lehman, C., Mulla, D. (2014). Priority-Flood: an optimal
    depression-filling and watershed-labeling algorithm for digital
    elevation models. Computers & Geosciences 62, 117-127.

    Examples
    --------
    >>> import numpy as np
    >>> z = np.array([[9, 9, 9, 9, 9],
    ...               [9, 4, 4, 4, 9],
    ...               [9, 8, 8, 8, 9],
    ...               [9, 2, 2, 2, 9],
    ...               [9, 9, 9, 9, 9]], dtype=np.float32)
    >>> out = breach(z, [(np.array([1, 2, 3]), np.array([2, 2, 2]))])
    >>> out[:, 2].tolist(), out.dtype
    ([9.0, 4.0, 3.0, 2.0, 9.0], dtype('float32'))
    """
    arr, ok = _validate.surface(z, valid, name="z")
    dx, dy = _validate.cell_size(dx, dy)
    flats = _padded_indices(crossings, arr.shape)
    zp = pad_nan(arr)
    _breach_padded(zp, flats, dx=dx, dy=dy)
    out = np.array(z, dtype=arr.dtype, copy=True)
    out[ok] = unpad(zp)[ok]
    return out


def _padded_indices(crossings, shape):
    """Flat indices, on the NaN-padded grid, of the cells of each crossing.

    Parameters
    ----------
    crossings : sequence of (rows, cols)
        Cells of each crossing on the unpadded grid of shape ``shape``.
    shape : tuple of int
        (rows, cols) of the unpadded grid.

    Returns
    -------
    list of numpy.ndarray of int64

    Raises
    ------
    InputError
        Rows and cols of different lengths, not integers, or off the grid.
    """
    nrows, ncols = int(shape[0]), int(shape[1])
    out = []
    for i, crossing in enumerate(crossings):
        try:
            rows, cols = crossing
        except (TypeError, ValueError):
            raise InputError(f"crossings[{i}]: expected a pair (rows, cols)") from None
        rows = np.asarray(rows)
        cols = np.asarray(cols)
        if rows.ndim != 1 or rows.shape != cols.shape:
            raise InputError(f"crossings[{i}]: rows and cols must be 1-D of one length, got shapes "
                             f"{rows.shape} and {cols.shape}")
        if rows.size and not (np.issubdtype(rows.dtype, np.integer) and np.issubdtype(cols.dtype, np.integer)):
            raise InputError(f"crossings[{i}]: rows and cols must be integers, got {rows.dtype} and {cols.dtype}")
        rows = rows.astype(np.int64)
        cols = cols.astype(np.int64)
        if rows.size and (rows.min() < 0 or rows.max() >= nrows or cols.min() < 0 or cols.max() >= ncols):
            raise InputError(f"crossings[{i}]: cells leave the {nrows}x{ncols} grid; clip them "
                             "(crossing_cells does)")
        out.append((rows + 1) * (ncols + 2) + (cols + 1))
    return out


def _breach_padded(zp, crossings_flat, *, dx=1.0, dy=1.0):
    """Carve the culvert channels in place on a NaN-padded DEM.

    Parameters
    ----------
    zp : numpy.ndarray of float32 or float64, shape (rows + 2, cols + 2)
        C-contiguous padded DEM with a NaN outer ring (see
        :func:`slopescreen._neighbours.pad_nan`); NaN marks nodata.
        Overwritten with the breached surface.
    crossings_flat : sequence of numpy.ndarray of int
        Flat indices into ``zp`` of the cells of each crossing, in order
        (:func:`_padded_indices`); they must not lie on the outer ring.
    dx, dy : float
        Cell width and height in metres.

    Returns
    -------
    numpy.ndarray
        ``zp``, breached (the rule is that of :func:`breach`).
    """
    flat = zp.reshape(-1)
    ncols = zp.shape[1]
    around = np.concatenate(([0], linear_offsets(ncols)))
    for cells in crossings_flat:
        cells = np.asarray(cells, dtype=np.int64)
        if cells.size == 0:
            continue
        hood = flat[cells[:, None] + around[None, :]]
        has_data = ~np.isnan(hood).all(axis=1)
        if not has_data.any():
            continue
        first = int(np.argmax(has_data))
        last = cells.size - 1 - int(np.argmax(has_data[::-1]))
        z_a = float(np.nanmin(hood[first]))
        z_b = float(np.nanmin(hood[last]))
        rows, cols = np.divmod(cells, ncols)
        step = np.hypot(np.diff(rows) * dy, np.diff(cols) * dx)
        s = np.concatenate(([0.0], np.cumsum(step)))
        span = s[last] - s[first]
        tau = np.clip((s - s[first]) / span, 0.0, 1.0) if span > 0 else np.zeros(cells.size)
        bed = (z_a + tau * (z_b - z_a)).astype(zp.dtype)
        current = flat[cells]
        lower = ~np.isnan(current) & (bed < current)
        flat[cells[lower]] = bed[lower]
    return zp
