"""Terrain conditioning: depression filling and Horn slope and aspect.

Two public functions:

* :func:`fill_depressions` raises every closed depression of a DEM to its
  spill elevation by Priority-Flood with a pit queue (Barnes et al. 2014),
  optionally with the epsilon variant that leaves a strict descent across
  filled areas and flats.
* :func:`slope_aspect` returns slope and aspect in degrees from Horn's (1981)
  3x3 finite differences, on square or rectangular cells.

Both have a private partner working on an already NaN-padded array
(:func:`_fill_depressions_padded`, :func:`_slope_aspect_padded`) so that the
pipeline can pad a large DEM once and avoid further copies.
"""

import numpy as np

from . import _validate
from ._stoppable import POLL, call
from ._neighbours import DCOL, DROW, linear_offsets, pad_nan, unpad
from ._numba import njit, njit_parallel, prange
from .errors import InputError

__all__ = ["fill_depressions", "slope_aspect"]

_HEAP_MIN_CAPACITY = 1024
_PIT_MIN_CAPACITY = 1024


# --------------------------------------------------------------------------
# Depression filling
# --------------------------------------------------------------------------


def fill_depressions(z, valid=None, *, epsilon=False):
    r"""Fill closed depressions so that every cell drains to the data edge.

    Parameters
    ----------
    z : array_like, shape (rows, cols)
        Elevations in metres (any linear unit works; values are never
        rescaled). NaN marks nodata. Integer input is converted to float64.
    valid : array_like of bool, shape (rows, cols), optional
        Cells to use; cells where it is False are treated as nodata.
    epsilon : bool, default False
        If True, raise each filled or flat cell to the next representable
        value above the cell it drains to (``numpy.nextafter`` in the
        array's own dtype), so that every cell not on the data edge has a
        strictly lower neighbour.

    Returns
    -------
    numpy.ndarray, shape (rows, cols)
        The filled DEM: a new array, float32 for float32 input and float64
        otherwise, NaN where the input is nodata.

    Raises
    ------
    InputError
        If ``z`` is not 2-D, is smaller than 3x3, holds +-inf, has no valid
        cell, or if ``valid`` has another shape.

    Notes
    -----
    The outlets (seeds) are the valid cells on the *data edge*: cells with at
    least one of their 8 neighbours outside the grid or nodata. Interior
    nodata holes therefore act as outlets too. Cells are connected to their
    8 neighbours.

    Priority-Flood visits cells from the seeds inward in order of rising
    filled elevation ``z_f``. When a cell ``c`` is taken, each unvisited
    neighbour ``n`` gets

    .. math:: z_f(n) = \max\bigl(z(n),\, z_f(c)\bigr)

    or, with ``epsilon=True``,

    .. math:: z_f(n) = \max\bigl(z(n),\, \mathrm{nextafter}(z_f(c), +\infty)\bigr).

    The result is the smallest surface with ``z_f >= z`` on which every valid
    cell has a non-ascending 8-connected path to the data edge (strictly
    descending with ``epsilon``). A neighbour that is raised (or equal to the
    level) enters a FIFO "pit queue" instead of the binary heap; only cells
    above the current level pay for a heap operation. A cell is taken from
    the pit queue only while its value is not above the top of the heap.
    Without epsilon this always holds (every pit cell sits at the level of
    the heap cell that spilled into it); with epsilon the pit values climb by
    one unit in the last place per step and can pass a cell waiting in the
    heap, so the check keeps the visiting order that of plain
    Priority-Flood+epsilon and the result minimal. Ties in the heap break on
    the flat cell index, so results are deterministic.

    With ``epsilon`` a filled area is raised by up to k units in the last
    place, k being the longest drainage path across it in cells; on a wide
    float32 flat at high elevation this can reach centimetres.

    Filling removes real closed depressions too (sinkholes, ponds behind road
    fills with culverts); the conditioned DEM is for flow routing only.

    References
    ----------
    Barnes, R., Lehman, C., Mulla, D. (2014). Priority-Flood: an optimal
    depression-filling and watershed-labeling algorithm for digital
    elevation models. Computers & Geosciences 62, 117-127.
    https://doi.org/10.1016/j.cageo.2013.04.024 (DOI from memory).

    Examples
    --------
    >>> import numpy as np
    >>> z = np.array([[9, 9, 9, 9, 9],
    ...               [9, 5, 5, 5, 9],
    ...               [9, 5, 1, 5, 9],
    ...               [9, 5, 5, 5, 9],
    ...               [9, 9, 4, 9, 9]], dtype=np.float32)
    >>> filled = fill_depressions(z)
    >>> float(filled[2, 2]), filled.dtype
    (5.0, dtype('float32'))
    """
    arr, _ = _validate.surface(z, valid, name="z")
    zp = pad_nan(arr)
    _fill_depressions_padded(zp, epsilon=epsilon)
    return np.ascontiguousarray(unpad(zp))


def _fill_depressions_padded(zp, *, epsilon=False, return_heap_count=False):
    """Fill depressions in place on a NaN-padded array.

    Parameters
    ----------
    zp : numpy.ndarray of float32 or float64, shape (rows + 2, cols + 2)
        C-contiguous padded DEM whose outer ring is NaN (see
        :func:`slopescreen._neighbours.pad_nan`); NaN marks nodata, no +-inf.
        Overwritten with the filled surface.
    epsilon : bool
        Use the epsilon variant (see :func:`fill_depressions`).
    return_heap_count : bool
        Also return how many cells went through the heap (the rest went
        through the pit queue).

    Returns
    -------
    zp : numpy.ndarray
        The same array, filled.
    heap_count : int
        Only with ``return_heap_count``.

    Raises
    ------
    InputError
        Wrong dtype, shape or layout, or an outer ring that is not NaN.
    """
    if not isinstance(zp, np.ndarray) or zp.ndim != 2:
        raise InputError("zp: expected a 2-D numpy array padded with a NaN ring")
    if zp.dtype not in (np.float32, np.float64):
        raise InputError(f"zp: expected float32 or float64, got {zp.dtype}")
    if not zp.flags.c_contiguous or not zp.flags.writeable:
        raise InputError("zp: expected a writeable C-contiguous array")
    if zp.shape[0] < 3 or zp.shape[1] < 3:
        raise InputError(f"zp: padded grid {zp.shape} is too small")
    ring_ok = (
        np.isnan(zp[0]).all()
        and np.isnan(zp[-1]).all()
        and np.isnan(zp[:, 0]).all()
        and np.isnan(zp[:, -1]).all()
    )
    if not ring_ok:
        raise InputError("zp: the outer ring must be NaN; pad with _neighbours.pad_nan")

    flat = zp.reshape(-1)
    ncols = zp.shape[1]
    packed, bits, heap, keys, idx, pit = _flood_queues(zp)
    up = zp.dtype.type(np.inf)
    heap_count = call(_fill_kernel, flat, ncols, linear_offsets(ncols), bool(epsilon), up,
                      packed, bits, heap, keys, idx, pit, DROW, DCOL, stop=True)
    if return_heap_count:
        return zp, int(heap_count)
    return zp


def _flood_queues(zp):
    """Empty heap and pit queue for a Priority-Flood over the padded grid ``zp``.

    float32 elevations and a 32-bit cell index pack into one uint64 heap key
    (order-preserving bits of the elevation, then the index as tie-break):
    one array and one integer comparison per heap step. Otherwise the heap
    keeps elevation and index in two arrays.

    Returns
    -------
    packed : bool
        Whether the heap is ``heap`` (packed keys from ``bits``, the uint32
        view of ``zp``) rather than the pair ``keys``/``idx``.
    bits, heap, keys, idx, pit : numpy.ndarray
        Storage (the unused ones one element long); all grow by doubling.
    """
    flat = zp.reshape(-1)
    index_dtype = np.int32 if flat.size <= np.iinfo(np.int32).max else np.int64
    capacity = _pow2_at_least(max(_HEAP_MIN_CAPACITY, 2 * (zp.shape[0] + zp.shape[1])))
    packed = zp.dtype == np.float32 and flat.size <= 2**32
    if packed:
        bits = flat.view(np.uint32)
        heap = np.empty(capacity, dtype=np.uint64)
        keys = np.empty(1, dtype=zp.dtype)
        idx = np.empty(1, dtype=index_dtype)
    else:
        bits = np.empty(1, dtype=np.uint32)
        heap = np.empty(1, dtype=np.uint64)
        keys = np.empty(capacity, dtype=zp.dtype)
        idx = np.empty(capacity, dtype=index_dtype)
    pit = np.empty(_PIT_MIN_CAPACITY, dtype=index_dtype)
    return packed, bits, heap, keys, idx, pit


def _pow2_at_least(n):
    p = 1
    while p < n:
        p *= 2
    return p


_SIGN32 = np.uint64(0x80000000)
_LOW32 = np.uint64(0xFFFFFFFF)
_SHIFT32 = np.uint64(32)


@njit
def _packed_key(bits, i):
    """uint64 key ordering like (float32 value, index); value from its bits.

    Positive floats get the sign bit set, negative ones have every bit
    flipped, so unsigned order equals numeric order (-0.0 sorts just below
    +0.0, which changes nothing as they spill to the same level).
    """
    b = np.uint64(bits[i])
    if b & _SIGN32:
        b = b ^ _LOW32
    else:
        b = b | _SIGN32
    return (b << _SHIFT32) | np.uint64(i)


@njit
def _packed_push(heap, size, key):
    """Push a packed key on a binary min-heap of uint64; grow if full."""
    if size == heap.shape[0]:
        new = np.empty(2 * size, dtype=heap.dtype)
        new[:size] = heap
        heap = new
    j = size
    while j > 0:
        p = (j - 1) >> 1
        hp = heap[p]
        if key < hp:
            heap[j] = hp
            j = p
        else:
            break
    heap[j] = key
    return heap, size + 1


@njit
def _packed_pop(heap, size):
    """Remove the top of a non-empty packed heap; return its cell index and the new size."""
    top = np.int64(heap[0] & _LOW32)
    size -= 1
    key = heap[size]
    j = 0
    while True:
        child = 2 * j + 1
        if child >= size:
            break
        right = child + 1
        if right < size and heap[right] < heap[child]:
            child = right
        hc = heap[child]
        if hc < key:
            heap[j] = hc
            j = child
        else:
            break
    heap[j] = key
    return top, size


@njit
def _heap_push(keys, idx, size, key, i):
    """Push (key, i) on a binary min-heap ordered by (key, i); grow if full."""
    if size == keys.shape[0]:
        new_keys = np.empty(2 * size, dtype=keys.dtype)
        new_idx = np.empty(2 * size, dtype=idx.dtype)
        new_keys[:size] = keys
        new_idx[:size] = idx
        keys = new_keys
        idx = new_idx
    j = size
    while j > 0:
        p = (j - 1) >> 1
        kp = keys[p]
        ip = idx[p]
        if key < kp or (key == kp and i < ip):
            keys[j] = kp
            idx[j] = ip
            j = p
        else:
            break
    keys[j] = key
    idx[j] = i
    return keys, idx, size + 1


@njit
def _heap_pop(keys, idx, size):
    """Remove the top of a non-empty heap; return its index and the new size."""
    top = np.int64(idx[0])
    size -= 1
    key = keys[size]
    i = idx[size]
    j = 0
    while True:
        child = 2 * j + 1
        if child >= size:
            break
        right = child + 1
        if right < size:
            kr = keys[right]
            kl = keys[child]
            if kr < kl or (kr == kl and idx[right] < idx[child]):
                child = right
        kc = keys[child]
        ic = idx[child]
        if kc < key or (kc == key and ic < i):
            keys[j] = kc
            idx[j] = ic
            j = child
        else:
            break
    keys[j] = key
    idx[j] = i
    return top, size


@njit
def _queue_grow(queue, head, count):
    """Double a full ring buffer, unrolling it so that the head is at 0."""
    cap = queue.shape[0]
    new = np.empty(2 * cap, dtype=queue.dtype)
    mask = cap - 1
    for t in range(count):
        new[t] = queue[(head + t) & mask]
    return new


@njit
def _fill_kernel(zp, ncols, offsets, epsilon, up, packed, bits, heap, keys, idx, pit, drow, dcol,
                 stop):
    """Priority-Flood + pit queue on a flat, NaN-padded grid, in place.

    With ``packed`` the heap is ``heap`` (uint64 keys from ``bits``, the
    uint32 view of ``zp``); otherwise it is the pair ``keys``/``idx``. ``pit``
    is the pit queue's storage (power-of-two length). All grow by doubling.
    Returns the number of cells taken from the heap, or -1 when ``stop[0]``
    was set (a signal; ``zp`` is then partly filled and not to be used).
    """
    n = zp.shape[0]
    nrows = n // ncols
    closed = np.zeros(n, dtype=np.uint8)
    size = 0

    # Seeds: valid cells with a NaN neighbour (the NaN ring covers cells on
    # the grid edge; interior NaN covers holes). NaN cells are closed.
    for r in range(nrows):
        base = r * ncols
        for col in range(ncols):
            i = base + col
            if not np.isnan(zp[i]):
                continue
            closed[i] = 1
            for k in range(8):
                rr = r + drow[k]
                cc = col + dcol[k]
                if rr < 0 or rr >= nrows or cc < 0 or cc >= ncols:
                    continue
                j = rr * ncols + cc
                if closed[j] != 0 or np.isnan(zp[j]):
                    continue
                closed[j] = 1
                if packed:
                    heap, size = _packed_push(heap, size, _packed_key(bits, j))
                else:
                    keys, idx, size = _heap_push(keys, idx, size, zp[j], j)

    pmask = pit.shape[0] - 1
    phead = 0
    pcount = 0
    heap_pops = 0
    steps = 0
    while True:
        steps += 1
        if steps % POLL == 0 and stop[0] != 0:
            return -1
        # Without epsilon every queued pit cell sits at the level of the heap
        # cell that spilled into it, which is <= the heap top: the pit queue
        # always goes first. With epsilon pit values climb one ulp per step,
        # so a pit cell goes first only while it is <= the heap top.
        take_pit = False
        if pcount > 0:
            if not epsilon or size == 0:
                take_pit = True
            else:
                if packed:
                    top = np.int64(heap[0] & _LOW32)
                else:
                    top = np.int64(idx[0])
                take_pit = zp[pit[phead]] <= zp[top]
        if take_pit:
            c = np.int64(pit[phead])
            phead = (phead + 1) & pmask
            pcount -= 1
        elif size > 0:
            if packed:
                c, size = _packed_pop(heap, size)
            else:
                c, size = _heap_pop(keys, idx, size)
            heap_pops += 1
        else:
            break
        zc = zp[c]
        if epsilon:
            level = np.nextafter(zc, up)
        else:
            level = zc
        for k in range(8):
            nb = c + offsets[k]
            if closed[nb] != 0:
                continue
            closed[nb] = 1
            zn = zp[nb]
            if zn <= level:
                zp[nb] = level
                if pcount == pit.shape[0]:
                    pit = _queue_grow(pit, phead, pcount)
                    phead = 0
                    pmask = pit.shape[0] - 1
                pit[(phead + pcount) & pmask] = nb
                pcount += 1
            elif packed:
                heap, size = _packed_push(heap, size, _packed_key(bits, nb))
            else:
                keys, idx, size = _heap_push(keys, idx, size, zn, nb)
    return heap_pops


# --------------------------------------------------------------------------
# Slope and aspect
# --------------------------------------------------------------------------


def slope_aspect(z, dx, dy, valid=None):
    r"""Slope and aspect in degrees by Horn's 3x3 finite differences.

    Parameters
    ----------
    z : array_like, shape (rows, cols)
        Elevations in metres; NaN marks nodata. Row 0 is north, column 0 west.
    dx : float
        Cell width east-west, in metres (> 0).
    dy : float
        Cell height north-south, in metres (> 0).
    valid : array_like of bool, shape (rows, cols), optional
        Cells to use; cells where it is False are treated as nodata.

    Returns
    -------
    slope_deg : numpy.ndarray of float32, shape (rows, cols)
        Slope from horizontal in degrees, 0 to 90; NaN at nodata.
    aspect_deg : numpy.ndarray of float32, shape (rows, cols)
        Direction the slope faces (downslope), in degrees clockwise from
        north in [0, 360): 0 north, 90 east, 180 south, 270 west. NaN at
        nodata and where the slope is exactly 0.

    Raises
    ------
    InputError
        If ``z`` is not 2-D, smaller than 3x3, holds +-inf or has no valid
        cell, if ``valid`` has another shape, or if ``dx`` or ``dy`` is not
        a finite number > 0.

    Notes
    -----
    With the 3x3 window ``a b c / d e f / g h i`` (row 0 north) and x east,
    y north:

    .. math::

        z_x = \frac{\partial z}{\partial x} = \frac{(c + 2f + i) - (a + 2d + g)}{8\,dx},\qquad
        z_y = \frac{\partial z}{\partial y} = \frac{(a + 2b + c) - (g + 2h + i)}{8\,dy}

    .. math::

        \text{slope} = \arctan\sqrt{z_x^2 + z_y^2},\qquad
        \text{aspect} = \operatorname{atan2}(-z_x,\, -z_y)

    the aspect taken modulo 360 degrees. Horn's estimate is the central
    difference smoothed with weights 1-2-1 across it; it is exact on planes.

    **Edges and nodata:** Horn's estimate is the weighted least-squares
    plane through the 3x3 window (weights 4 centre, 2 edge, 1 corner). Where
    neighbours are outside the grid or nodata, the same weighted plane is
    fitted to the cells that have values, a one-sided estimate that is exact
    on a plane whenever those cells are not all on one line: cells on a data
    edge, at a corner or beside a hole get the true slope of a plane.
    (Filling missing neighbours with the centre value instead halves the
    gradient across a straight edge and rings every clip or mask with cells
    that look stable.) Where the cells with values lie on one line (a
    one-cell-wide strip), only the gradient along the line is known and the
    component across it is taken as 0. Cells with all eight neighbours use
    Horn's formula as written above.

    The differences are taken in float64; the angles are computed and
    returned in float32 (within float32 rounding, a few 1e-5 degrees, of a
    float64 evaluation).

    References
    ----------
    Horn, B.K.P. (1981). Hill shading and the reflectance map. Proceedings
    of the IEEE 69(1), 14-47. https://doi.org/10.1109/PROC.1981.11918
    (volume, pages and DOI from memory).

    Examples
    --------
    >>> import numpy as np
    >>> x = np.arange(5) * 10.0
    >>> z = np.tile(-0.5 * x, (4, 1))      # falls 0.5 m per metre eastward
    >>> s, a = slope_aspect(z, dx=10.0, dy=10.0)
    >>> round(float(s[1, 2]), 3), round(float(a[1, 2]), 1)
    (26.565, 90.0)
    """
    arr, _ = _validate.surface(z, valid, name="z")
    dx, dy = _validate.cell_size(dx, dy)
    zp = pad_nan(arr)
    return _slope_aspect_padded(zp, dx, dy)


def _slope_aspect_padded(zp, dx, dy):
    """Horn slope and aspect from a NaN-padded DEM (not modified).

    Parameters
    ----------
    zp : numpy.ndarray of float32 or float64, shape (rows + 2, cols + 2)
        Padded DEM (outer ring NaN).
    dx, dy : float
        Cell sizes in metres, already validated.

    Returns
    -------
    slope_deg, aspect_deg : numpy.ndarray of float32, shape (rows, cols)
    """
    shape = (zp.shape[0] - 2, zp.shape[1] - 2)
    slope = np.empty(shape, dtype=np.float32)
    aspect = np.empty(shape, dtype=np.float32)
    _horn_kernel(zp, float(dx), float(dy), slope, aspect)
    return slope, aspect


@njit
def _edge_gradient(a, b, cc, d, e, f, g, h, i, dx, dy):
    """Gradient of a cell with missing neighbours: a weighted least-squares plane.

    The plane z = z0 + gx x + gy y is fitted to the centre and the neighbours
    that have values, with Horn's weights (4 centre, 2 edge, 1 corner). With
    all eight neighbours this is exactly Horn's estimate; with some missing it
    is a one-sided estimate that is exact on a plane as long as the points
    with values are not on one line. On one line (a one-cell-wide strip), the
    component along the strip comes from its row or column differences and
    the component across it is 0.
    """
    sw = 0.0
    sx = 0.0
    sy = 0.0
    sxx = 0.0
    syy = 0.0
    sxy = 0.0
    sz = 0.0
    sxz = 0.0
    syz = 0.0
    # (value, x, y, weight): x east in units of dx, y north in units of dy (row 0 is north)
    for v, x, y, w in ((a, -1.0, 1.0, 1.0), (b, 0.0, 1.0, 2.0), (cc, 1.0, 1.0, 1.0),
                       (d, -1.0, 0.0, 2.0), (e, 0.0, 0.0, 4.0), (f, 1.0, 0.0, 2.0),
                       (g, -1.0, -1.0, 1.0), (h, 0.0, -1.0, 2.0), (i, 1.0, -1.0, 1.0)):
        if np.isnan(v):
            continue
        sw += w
        sx += w * x
        sy += w * y
        sxx += w * x * x
        syy += w * y * y
        sxy += w * x * y
        sz += w * v
        sxz += w * x * v
        syz += w * y * v
    # eliminate the intercept: centred sums
    cxx = sxx - sx * sx / sw
    cyy = syy - sy * sy / sw
    cxy = sxy - sx * sy / sw
    cxz = sxz - sx * sz / sw
    cyz = syz - sy * sz / sw
    det = cxx * cyy - cxy * cxy
    if det > 1e-9 * max(cxx * cyy, 1e-300):
        gx = (cxz * cyy - cyz * cxy) / det
        gy = (cyz * cxx - cxz * cxy) / det
        return gx / dx, gy / dy
    # the points with values lie on one line
    gx = 0.0
    gy = 0.0
    if cxx > 0.0 and cyy == 0.0:
        gx = cxz / cxx
    elif cyy > 0.0 and cxx == 0.0:
        gy = cyz / cyy
    elif cxx > 0.0 and cyy > 0.0:  # a diagonal line: the gradient along it
        t = (cxz + (cyz if cxy > 0.0 else -cyz)) / (cxx + cyy)
        gx = t
        gy = t if cxy > 0.0 else -t
        gx, gy = 0.5 * gx, 0.5 * gy
    return gx / dx, gy / dy


@njit_parallel
def _horn_kernel(zp, dx, dy, slope, aspect):
    """Horn (1981) slope and aspect; one-sided differences where neighbours are missing.

    Differences in float64; the angles from float32 arctan/arctan2 of the
    float64 gradient rounded to float32 (the outputs are float32 anyway, and
    single-precision arctan is about twice as fast).
    """
    nrows, ncols = slope.shape
    rad2deg = np.float32(180.0 / np.pi)
    full_turn = np.float32(360.0)
    inv8dx = 1.0 / (8.0 * dx)
    inv8dy = 1.0 / (8.0 * dy)
    for r in prange(nrows):
        for c in range(ncols):
            e = np.float64(zp[r + 1, c + 1])
            if np.isnan(e):
                slope[r, c] = np.nan
                aspect[r, c] = np.nan
                continue
            a = np.float64(zp[r, c])
            b = np.float64(zp[r, c + 1])
            cc = np.float64(zp[r, c + 2])
            d = np.float64(zp[r + 1, c])
            f = np.float64(zp[r + 1, c + 2])
            g = np.float64(zp[r + 2, c])
            h = np.float64(zp[r + 2, c + 1])
            i = np.float64(zp[r + 2, c + 2])
            if np.isnan(a + b + cc + d + f + g + h + i):
                dzdx, dzdy = _edge_gradient(a, b, cc, d, e, f, g, h, i, dx, dy)
            else:
                dzdx = ((cc + 2.0 * f + i) - (a + 2.0 * d + g)) * inv8dx
                dzdy = ((a + 2.0 * b + cc) - (g + 2.0 * h + i)) * inv8dy
            s = np.arctan(np.float32(np.hypot(dzdx, dzdy))) * rad2deg
            slope[r, c] = s
            if s == 0.0:
                aspect[r, c] = np.nan
            else:
                deg = np.arctan2(np.float32(-dzdx), np.float32(-dzdy)) * rad2deg
                if deg < 0.0:
                    deg += full_turn
                if deg >= full_turn:  # -tiny + 360 rounds to 360 in float32
                    deg = np.float32(0.0)
                aspect[r, c] = deg
