"""Chainage segments of a corridor centreline and the strip of cells each one covers.

The centreline (one MultiLineString, :func:`~slopescreen.corridor.vector_inputs.chain_lines`)
is cut into segments of ``segment_m`` metres of chainage, the last one shorter.
Chainage is measured along the parts in order and the gaps between parts are
not counted, so a segment may span a gap; its piece of line is then a
MultiLineString of the sub-pieces in order. Each piece is widened into a strip
(buffered by the half-width with flat ends and round joins) and the strip's
cells are the cells whose centre lies inside it, listed once per strip: a cell
inside a tight bend, or between two legs of a switchback closer than twice the
half-width, belongs to each strip that covers it.

With a half-width of zero the strip is the cells the piece passes over
(GDAL's line rasterisation with ``all_touched``), and the strip polygon is the
union of those cells' squares, so it too holds exactly its cells' centres.

Segments are always built on the whole line. A segment whose strip holds no
valid cell is marked ``on_dem = False``; clipping the corridor to the DEM
means dropping those segments, and the chainage of the others stays that of
the full line. A segment partly off the data keeps its full length and lists
only its valid cells.

See docs/methods.md, "Corridor segments and strips".
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._validate import nonnegative, read_only
from ..errors import InputError
from ..grid import Grid
from .vector_inputs import _cumulative, _line_parts, _points_at

__all__ = ["Segments", "split_line", "strip_cells", "build_segments"]

MERGE_FRACTION = 1e-9
"""A last segment shorter than this fraction of ``segment_m`` is merged into the one
before it (it would only be floating-point residue of a length that is a whole
number of segments)."""


@dataclass(frozen=True)
class Segments:
    """The chainage segments of a centreline and the cells of their strips.

    Attributes
    ----------
    from_m, to_m : numpy.ndarray of float64, shape (n,)
        Chainage of each segment's start and end, m; ``to_m[i] == from_m[i + 1]``.
    lines : tuple of shapely LineString or MultiLineString
        The piece of centreline each segment covers (a MultiLineString when it
        spans a gap between parts), in the grid's CRS.
    strips : tuple of shapely Polygon or MultiPolygon
        Each piece buffered by ``half_width_m`` with flat ends and round joins;
        with ``half_width_m == 0`` the squares of the cells the piece passes
        over (only cells on the raster; an empty Polygon for a piece off it).
    cell : numpy.ndarray of int64, shape (m,)
        Flat index ``row * cols + col`` of each (cell, strip) pair, sorted by
        cell and then by segment. Only valid cells are listed; a cell in two
        strips is listed twice.
    segment : numpy.ndarray of int32, shape (m,)
        Segment index (0-based) of each pair.
    counts : numpy.ndarray of int64, shape (n,)
        Number of valid cells in each strip.
    on_dem : numpy.ndarray of bool, shape (n,)
        True where the strip holds at least one valid cell.
    segment_m, half_width_m : float
        The segment length and strip half-width, m.

    The arrays are read-only views.
    """

    from_m: np.ndarray
    to_m: np.ndarray
    lines: tuple
    strips: tuple
    cell: np.ndarray
    segment: np.ndarray
    counts: np.ndarray
    on_dem: np.ndarray
    segment_m: float
    half_width_m: float

    def __post_init__(self):
        n = len(self.from_m)
        if not (len(self.to_m) == len(self.lines) == len(self.strips) == len(self.counts)
                == len(self.on_dem) == n):
            raise ValueError("Segments: every per-segment field must have one entry per segment")
        if len(self.cell) != len(self.segment):
            raise ValueError("Segments: cell and segment must have the same length")
        for name in ("from_m", "to_m", "cell", "segment", "counts", "on_dem"):
            object.__setattr__(self, name, read_only(np.asarray(getattr(self, name))))

    def __len__(self) -> int:
        return len(self.from_m)


def split_line(line, *, segment_m: float, start_chainage_m: float = 0.0,
               linear_unit_m: float = 1.0) -> tuple[np.ndarray, np.ndarray, tuple]:
    """Cut a line into segments of ``segment_m`` metres of chainage.

    Parameters
    ----------
    line : shapely LineString or MultiLineString
        The centreline in a projected CRS; chainage runs along its parts in
        order, gaps between parts not counted.
    segment_m : float
        Segment length, m (> 0).
    start_chainage_m : float
        Chainage of the first vertex, m.
    linear_unit_m : float
        Size of the CRS unit in metres (``Grid.linear_unit_m``).

    Returns
    -------
    from_m, to_m : numpy.ndarray of float64
        Chainage of each segment's ends, m. There are ``ceil(L / segment_m)``
        segments, ``L`` the line's length in metres (shapely ``length`` times
        ``linear_unit_m``); ``to_m[-1] == start_chainage_m + L``.
    pieces : tuple of shapely LineString or MultiLineString
        The piece of line of each segment (a MultiLineString of sub-pieces in
        order when the segment spans a gap).

    Notes
    -----
    A last segment shorter than :data:`MERGE_FRACTION` times ``segment_m`` is
    merged into the one before it, so a line that is a whole number of
    segments long (up to rounding) gets no sliver at its end. Points along a
    part are interpolated linearly between its vertices; sub-pieces shorter
    than that fraction of a segment (rounding residue where a cut falls on the
    end of a part) are left out of a multi-part piece.

    Examples
    --------
    >>> import shapely
    >>> from_m, to_m, pieces = split_line(shapely.LineString([(0, 0), (250, 0)]), segment_m=100)
    >>> from_m.tolist(), to_m.tolist()
    ([0.0, 100.0, 200.0], [100.0, 200.0, 250.0])
    >>> pieces[2].wkt
    'LINESTRING (200 0, 250 0)'
    """
    import shapely

    segment_m = nonnegative(segment_m, "segment_m", allow_zero=False)
    unit = nonnegative(linear_unit_m, "linear_unit_m", allow_zero=False)
    start = float(start_chainage_m)
    if not math.isfinite(start):
        raise InputError(f"start_chainage_m: expected a finite number, got {start_chainage_m!r}")
    parts = [xy for xy in _line_parts(line) if len(xy) >= 2]
    cums = [_cumulative(xy) for xy in parts]
    keep = [i for i, c in enumerate(cums) if c[-1] > 0.0]
    parts, cums = [parts[i] for i in keep], [cums[i] for i in keep]
    if not parts:
        raise InputError("line: has zero length; nothing to cut into segments")
    lengths = np.array([c[-1] for c in cums])
    ends = np.cumsum(lengths)
    starts = ends - lengths

    total_m = float(shapely.length(line)) * unit
    n = max(1, math.ceil(total_m / segment_m))
    while n > 1 and total_m - (n - 1) * segment_m < MERGE_FRACTION * segment_m:
        n -= 1
    from_m = start + segment_m * np.arange(n, dtype=np.float64)
    to_m = np.append(from_m[1:], start + total_m)

    step = segment_m / unit
    cuts = step * np.arange(n + 1, dtype=np.float64)
    cuts[-1] = ends[-1]
    tiny = MERGE_FRACTION * step
    pieces = []
    for i in range(n):
        da, db = cuts[i], cuts[i + 1]
        first = int(np.searchsorted(ends, da, side="right"))
        last = int(np.searchsorted(starts, db, side="left")) - 1
        if i == n - 1:
            last = len(parts) - 1
        first = min(first, last)
        subs = []
        for p in range(first, last + 1):
            a = max(da - starts[p], 0.0)
            b = lengths[p] if (i == n - 1 and p == last) else min(db - starts[p], lengths[p])
            if b > a:
                subs.append((b - a, _substring(parts[p], cums[p], a, b)))
        long = [s for length, s in subs if length > tiny]
        if not long:  # a segment of rounding size: keep its longest sub-piece
            long = [max(subs, key=lambda s: s[0])[1]]
        pieces.append(shapely.LineString(long[0]) if len(long) == 1
                      else shapely.MultiLineString(long))
    return from_m, to_m, tuple(pieces)


def _substring(xy: np.ndarray, cum: np.ndarray, a: float, b: float) -> np.ndarray:
    """Vertices of the part between distances ``a < b`` along it."""
    ends = _points_at(xy, cum, np.array([a, b]))
    j0 = int(np.searchsorted(cum, a, side="right"))
    j1 = int(np.searchsorted(cum, b, side="left"))
    return np.vstack([ends[:1], xy[j0:j1], ends[1:]])


def _window(bounds, grid: Grid):
    """Rows and columns (r0, r1, c0, c1) of the cells around ``bounds``, clipped to the grid,
    or None when the bounds lie off the raster. One cell of margin on each side."""
    minx, miny, maxx, maxy = bounds
    t = grid.transform
    rows, cols = grid.shape
    c0 = max(int(math.floor((minx - t.c) / t.a)) - 1, 0)
    c1 = min(int(math.floor((maxx - t.c) / t.a)) + 2, cols)
    r0 = max(int(math.floor((maxy - t.f) / t.e)) - 1, 0)
    r1 = min(int(math.floor((miny - t.f) / t.e)) + 2, rows)
    if c0 >= c1 or r0 >= r1:
        return None
    return r0, r1, c0, c1


def _window_transform(grid: Grid, r0: int, c0: int):
    from rasterio.transform import Affine

    t = grid.transform
    return Affine(t.a, 0.0, t.c + c0 * t.a, 0.0, t.e, t.f + r0 * t.e)


def strip_cells(strips, grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    """The valid cells whose centre lies inside each strip, as (cell, segment) pairs.

    Each strip is rasterised on the window of its bounds only (GDAL's rule:
    cell centre inside the polygon, :func:`rasterio.features.geometry_mask`
    without ``all_touched``).

    Parameters
    ----------
    strips : sequence of shapely Polygon or MultiPolygon
        In the grid's CRS; empty geometries hold no cell.
    grid : Grid

    Returns
    -------
    cell : numpy.ndarray of int64
        Flat cell index ``row * cols + col``.
    segment : numpy.ndarray of int32
        Index of the strip in ``strips``.

    Both sorted by cell, then by segment; a cell inside two strips appears
    once for each.

    Examples
    --------
    >>> import shapely
    >>> grid = Grid.regular((3, 3), west=0, north=30, cell_m=10, crs="EPSG:32610")
    >>> cell, segment = strip_cells([shapely.box(0, 20, 21, 30), shapely.box(12, 12, 30, 30)], grid)
    >>> cell.tolist(), segment.tolist()
    ([0, 1, 1, 2, 4, 5], [0, 0, 1, 1, 1, 1])
    """
    from rasterio.features import geometry_mask

    cols = grid.shape[1]
    cells, segs = [], []
    for k, strip in enumerate(strips):
        if strip is None or strip.is_empty:
            continue
        win = _window(strip.bounds, grid)
        if win is None:
            continue
        r0, r1, c0, c1 = win
        inside = geometry_mask([strip], out_shape=(r1 - r0, c1 - c0),
                               transform=_window_transform(grid, r0, c0),
                               invert=True, all_touched=False)
        inside &= grid.valid[r0:r1, c0:c1]
        r, c = np.nonzero(inside)
        cells.append((r + r0).astype(np.int64) * cols + (c + c0))
        segs.append(np.full(len(r), k, dtype=np.int32))
    if not cells:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int32)
    cell = np.concatenate(cells)
    segment = np.concatenate(segs)
    order = np.lexsort((segment, cell))
    return cell[order], segment[order]


def _touched_squares(piece, grid: Grid):
    """Union of the squares of the cells a line passes over (on the raster), as a polygon."""
    import shapely
    from rasterio.features import rasterize, shapes

    win = _window(piece.bounds, grid)
    if win is None:
        return shapely.Polygon()
    r0, r1, c0, c1 = win
    wt = _window_transform(grid, r0, c0)
    touched = rasterize([(piece, 1)], out_shape=(r1 - r0, c1 - c0), transform=wt, fill=0,
                        all_touched=True, dtype=np.uint8)
    if not touched.any():
        return shapely.Polygon()
    polys = [shapely.geometry.shape(g) for g, _ in shapes(touched, mask=touched > 0,
                                                          connectivity=4, transform=wt)]
    return polys[0] if len(polys) == 1 else shapely.union_all(polys)


def build_segments(line, grid: Grid, *, segment_m: float, half_width_m: float,
                   start_chainage_m: float = 0.0) -> Segments:
    """Cut a centreline into chainage segments and list the valid cells of each strip.

    Parameters
    ----------
    line : shapely LineString or MultiLineString
        The centreline in the grid's CRS (:func:`~slopescreen.corridor.vector_inputs.chain_lines`).
    grid : Grid
    segment_m : float
        Segment length, m (> 0).
    half_width_m : float
        Half-width of each strip, m (>= 0). Zero means the cells the
        centreline passes over.
    start_chainage_m : float
        Chainage of the line's first vertex, m.

    Returns
    -------
    Segments

    Notes
    -----
    Strips are shapely buffers; a round join is a polygon of 8 edges per
    quarter circle (shapely's default), so a cell centre within
    ``0.005 * half_width_m`` of the true arc may fall either way. Flat ends
    meet square to the line at each cut: where a cut falls on a
    bend, the wedge outside the bend between the two ends belongs to neither
    strip and the overlap inside it belongs to both. See docs/methods.md,
    "Corridor segments and strips".

    Examples
    --------
    >>> import shapely
    >>> grid = Grid.regular((10, 10), west=0, north=100, cell_m=10, crs="EPSG:32610")
    >>> seg = build_segments(shapely.LineString([(0, 52), (100, 52)]), grid,
    ...                      segment_m=40, half_width_m=5)
    >>> seg.to_m.tolist(), seg.counts.tolist()
    ([40.0, 80.0, 100.0], [4, 4, 2])
    >>> (seg.cell[seg.segment == 2] // 10).tolist(), (seg.cell[seg.segment == 2] % 10).tolist()
    ([4, 4], [8, 9])
    """
    import shapely

    half = nonnegative(half_width_m, "half_width_m")
    unit = float(grid.linear_unit_m)
    from_m, to_m, pieces = split_line(line, segment_m=segment_m, start_chainage_m=start_chainage_m,
                                      linear_unit_m=unit)
    if half > 0.0:
        strips = tuple(shapely.buffer(np.array(pieces, dtype=object), half / unit,
                                      cap_style="flat", join_style="round"))
    else:
        strips = tuple(_touched_squares(p, grid) for p in pieces)
    cell, segment = strip_cells(strips, grid)
    counts = np.bincount(segment, minlength=len(pieces)).astype(np.int64)
    return Segments(from_m=from_m, to_m=to_m, lines=pieces, strips=strips, cell=cell,
                    segment=segment, counts=counts, on_dem=counts > 0,
                    segment_m=float(segment_m), half_width_m=half)
