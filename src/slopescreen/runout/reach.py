"""Runout reach of failure sources along steepest-descent paths (angle of reach).

From each source the path is measured from its crown: straight to the
source's lowest cell (its toe), then down the D8 steepest-descent path of the
conditioned DEM (flats drained towards their outlet). L is the horizontal
length accumulated along that path from the crown; the path goes on to the
next cell x while

    (z_crown - z_x) / L(x) >= tan(alpha),

alpha the source's angle of reach, and stops at the first cell where the
travel angle falls below it, at the data edge, or (by default) at the first
corridor strip it enters: a road bench interrupts runout. The deposit
footprint keeps the source's width: at each step, every valid cell whose
centre lies within half that width of the path cell, measured across the
step, and within half a step along it, is reached (the path cell always is;
the footprint ends square at the tip), and so is every cell of the source (docs/methods.md, "Runout reach").

References
----------
Corominas, J. (1996). The angle of reach as a mobility index for small and
large landslides. Canadian Geotechnical Journal 33(2), 260-271 (from memory).
Heim, A. (1932). Bergsturz und Menschenleben. Fretz & Wasmuth (from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._neighbours import DCOL, DROW, linear_offsets, neighbour_distances
from .._numba import njit
from .._stoppable import call
from .sources import Sources

STOP_REASONS = {0: "travel angle fell below the angle of reach", 1: "met a corridor strip",
                2: "left the data (outlet or data edge)"}
"""Why each path stopped (``Reach.stop``)."""


@dataclass(frozen=True)
class Strips:
    """Corridor strip cells for the path kernel: sorted flat cell indices and their segments.

    A cell may appear once per strip that holds it.
    """

    cell: np.ndarray
    segment: np.ndarray
    n_segments: int

    @staticmethod
    def none() -> "Strips":
        """No corridor."""
        return Strips(np.zeros(0, np.int64), np.zeros(0, np.int32), 0)


@dataclass(frozen=True)
class Reach:
    """Where the sources of one rain case reach.

    Attributes
    ----------
    count : numpy.ndarray of int32, shape (rows, cols)
        Sources reaching each cell (-1 outside the valid cells).
    volume_m3 : numpy.ndarray of float32
        Largest source volume reaching each cell, m^3 (NaN where none or nodata).
    angle_deg : numpy.ndarray of float64
        Angle of reach used per source.
    travel_m : numpy.ndarray of float64
        Horizontal path length from the crown to the tip, m.
    drop_m : numpy.ndarray of float64
        Drop from the crown to the tip, m.
    tip : numpy.ndarray of int64
        Flat index of the last reached path cell (the toe when the path stops at once).
    stop : numpy.ndarray of int8
        Key of :data:`STOP_REASONS`.
    path_ptr, path_cells : numpy.ndarray of int64
        Cells of the path of source ``i`` below its toe:
        ``path_cells[path_ptr[i]:path_ptr[i + 1]]`` (flat indices, in order).
    pair_source, pair_segment : numpy.ndarray
        Every (source, corridor segment) where the source reaches the segment's strip.
    """

    count: np.ndarray
    volume_m3: np.ndarray
    angle_deg: np.ndarray
    travel_m: np.ndarray
    drop_m: np.ndarray
    tip: np.ndarray
    stop: np.ndarray
    path_ptr: np.ndarray
    path_cells: np.ndarray
    pair_source: np.ndarray
    pair_segment: np.ndarray


def d8_receivers(zp, dx, dy) -> np.ndarray:
    """D8 steepest-descent neighbour code (0-7, 255 none) of every cell of a padded surface.

    Flats take the drainage direction towards their outlet
    (:mod:`slopescreen.routing.flats`).
    """
    from ..routing.directions import _receiver_codes

    codes, _frac, _width, _offsets, _nb = _receiver_codes(zp, dx, dy, 2, 0.0)
    del _frac, _width
    np.subtract(codes, np.uint8(8), out=codes, where=codes != 255)    # 8 + k -> k, in place
    return codes


def runout_reach(zp, sources: Sources, angle_deg, *, dx, dy, strips: Strips | None = None,
                 continue_past_corridor=False, receivers=None) -> Reach:
    """Reach of every source along its steepest-descent path.

    Parameters
    ----------
    zp : numpy.ndarray of float, shape (rows + 2, cols + 2)
        Conditioned DEM, NaN-padded (NaN ring and nodata), m.
    sources : Sources
        On the unpadded grid (rows, cols).
    angle_deg : array_like of float
        Angle of reach of each source (:func:`~slopescreen.runout.angle.angle_of_reach_deg`).
    dx, dy : float
        Cell size, m.
    strips : Strips, optional
        Corridor strip cells (flat indices on the unpadded grid).
    continue_past_corridor : bool
        Let paths run on past the first strip they enter.
    receivers : numpy.ndarray of uint8, optional
        :func:`d8_receivers` of ``zp`` (computed when not given).

    Returns
    -------
    Reach

    Examples
    --------
    A plane falling 1 m per 10 m cell to the south onto a level floor, one
    source cell near the top, angle of reach 45 degrees (H/L = 1): the slope
    itself is at H/L = 0.1, so the path stops at once.

    >>> import numpy as np
    >>> from slopescreen._neighbours import pad_nan
    >>> from slopescreen.runout.sources import patch_sources
    >>> z = np.add.outer(np.arange(10.0)[::-1], np.zeros(5))
    >>> mask = np.zeros(z.shape, bool); mask[1, 2] = True
    >>> s = patch_sources(mask, z, np.ones(z.shape), np.zeros(z.shape), np.full(z.shape, 180.0),
    ...                   dx=10.0, dy=10.0)
    >>> r = runout_reach(pad_nan(z), s, [45.0], dx=10.0, dy=10.0)
    >>> int(r.count.sum()), r.travel_m.tolist()
    (1, [0.0])
    >>> r = runout_reach(pad_nan(z), s, [5.0], dx=10.0, dy=10.0)   # H/L 0.087 < 0.1: to the edge
    >>> r.travel_m.tolist(), r.stop.tolist()
    ([80.0], [2])
    """
    zp = np.ascontiguousarray(zp)
    rows, cols = zp.shape[0] - 2, zp.shape[1] - 2
    if sources.labels.shape != (rows, cols):
        raise ValueError(f"sources on {sources.labels.shape}, surface padded from {(rows, cols)}")
    if receivers is None:
        receivers = d8_receivers(zp, dx, dy)
    strips = Strips.none() if strips is None else strips
    angle = np.broadcast_to(np.asarray(angle_deg, dtype=np.float64), sources.ids.shape).copy()
    n = len(sources)

    def padded(flat):
        flat = np.asarray(flat, dtype=np.int64)
        return (flat // cols + 1) * (cols + 2) + flat % cols + 1

    lab = sources.labels.reshape(-1)
    members = np.flatnonzero(lab > 0)
    order = members[np.argsort(lab[members], kind="stable")]
    ptr = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(np.bincount(lab[members], minlength=n + 1)[1:], out=ptr[1:])
    crown_r, crown_c = np.divmod(sources.crown, cols)
    toe_r, toe_c = np.divmod(sources.toe, cols)
    l0 = np.hypot((crown_r - toe_r) * dy, (crown_c - toe_c) * dx).astype(np.float64)
    strip_p = padded(strips.cell)
    sort = np.argsort(strip_p, kind="stable")
    out = call(
        _reach_kernel, zp.reshape(-1), receivers.reshape(-1), linear_offsets(cols + 2),
        neighbour_distances(dx, dy), DROW.astype(np.float64), DCOL.astype(np.float64), rows + 2, cols + 2, float(dx), float(dy),
        padded(order), ptr, padded(sources.toe), sources.z_crown.astype(np.float64), l0,
        np.tan(np.radians(angle)), sources.width_m.astype(np.float64) / 2.0,
        sources.volume_m3.astype(np.float64), strip_p[sort],
        strips.segment.astype(np.int32)[sort], int(strips.n_segments),
        bool(continue_past_corridor), stop=True)
    count, vmax, travel, drop, tip, stop, path_ptr, path_cells, ps, pg = out

    def unpad_index(p):
        r, c = np.divmod(p, cols + 2)
        return (r - 1) * cols + (c - 1)

    # nodata and "none" set in place on the padded arrays, then one unpadded copy of each
    nodata = np.isnan(zp[1:-1, 1:-1])
    count_view = count.reshape(rows + 2, cols + 2)[1:-1, 1:-1]
    vol_view = vmax.reshape(rows + 2, cols + 2)[1:-1, 1:-1]
    vol_view[nodata | (count_view == 0)] = np.nan
    count_view[nodata] = -1
    del nodata
    count = np.ascontiguousarray(count_view)
    del count_view
    vol = np.ascontiguousarray(vol_view)
    del vol_view, vmax
    return Reach(count=count, volume_m3=vol, angle_deg=angle, travel_m=travel, drop_m=drop,
                 tip=unpad_index(tip), stop=stop, path_ptr=path_ptr,
                 path_cells=unpad_index(path_cells), pair_source=ps, pair_segment=pg)


@njit
def _grow(a, n):
    out = np.empty(max(2 * a.size, n + 16), dtype=a.dtype)
    out[:a.size] = a
    return out


@njit
def _strip_lookup(strip_cell, cell):
    """First index of ``cell`` in the sorted strip cells, or -1."""
    j = np.searchsorted(strip_cell, cell)
    if j < strip_cell.size and strip_cell[j] == cell:
        return j
    return -1


@njit
def _mark_reached(strip_cell, strip_seg, cell, k, seg_last, ps, pg, npair):
    """Record (source k, segment) for every strip holding ``cell``; return the pair count."""
    j = _strip_lookup(strip_cell, cell)
    if j < 0:
        return ps, pg, npair, False
    while j < strip_cell.size and strip_cell[j] == cell:
        g = strip_seg[j]
        if seg_last[g] != k:
            seg_last[g] = k
            if npair >= ps.size:
                ps = _grow(ps, npair)
                pg = _grow(pg, npair)
            ps[npair] = k
            pg[npair] = g
            npair += 1
        j += 1
    return ps, pg, npair, True


@njit
def _reach_kernel(z, recv, offsets, dist, drow, dcol, nrp, ncp, dx, dy, members, ptr, toe, z_crown, l0,
                  tan_a, radius, volume, strip_cell, strip_seg, n_seg, keep_going, halt):
    # halt[0] set (a signal): the sources left are skipped; the result is not to be used
    n = toe.size
    count = np.zeros(z.size, dtype=np.int32)
    vmax = np.zeros(z.size, dtype=np.float32)
    last = np.full(z.size, -1, dtype=np.int32)
    in_strip = np.zeros(z.size, dtype=np.bool_)
    for j in range(strip_cell.size):
        in_strip[strip_cell[j]] = True
    seg_last = np.full(max(n_seg, 1), -1, dtype=np.int64)
    travel = np.zeros(n)
    drop = np.zeros(n)
    tip = np.zeros(n, dtype=np.int64)
    stop = np.zeros(n, dtype=np.int8)
    path_ptr = np.zeros(n + 1, dtype=np.int64)
    path = np.empty(1024, dtype=np.int64)
    npath = 0
    ps = np.empty(64, dtype=np.int64)
    pg = np.empty(64, dtype=np.int64)
    npair = 0
    for k in range(n):
        if halt[0] != 0:
            break
        v = np.float32(volume[k])
        for m in range(ptr[k], ptr[k + 1]):           # the source's own cells
            c = members[m]
            last[c] = k
            count[c] += 1
            if v > vmax[c]:
                vmax[c] = v
            if in_strip[c]:
                ps, pg, npair, _ = _mark_reached(strip_cell, strip_seg, c, k, seg_last, ps,
                                                 pg, npair)
        cur = toe[k]
        length = l0[k]
        rr = radius[k]
        br = int(rr / dy) + 1
        bc = int(rr / dx) + 1
        reason = 2
        for _guard in range(z.size):                 # a path never revisits a cell
            code = recv[cur]
            if code == 255:
                reason = 2
                break
            nxt = cur + offsets[code]
            if np.isnan(z[nxt]):
                reason = 2
                break
            step = length + dist[code]
            if (z_crown[k] - z[nxt]) < tan_a[k] * step:
                reason = 0
                break
            length = step
            cur = nxt
            if npath >= path.size:
                path = _grow(path, npath)
            path[npath] = cur
            npath += 1
            # the footprint: cells across the step within the source's half width
            r0 = cur // ncp
            c0 = cur % ncp
            tr = drow[code] * dy / dist[code]
            tc = dcol[code] * dx / dist[code]
            half_step = 0.5 * dist[code] + 1e-9
            hit_strip = False
            for dr in range(-br, br + 1):
                r = r0 + dr
                if r < 0 or r >= nrp:
                    continue
                for dc in range(-bc, bc + 1):
                    along = dr * dy * tr + dc * dx * tc
                    across = dr * dy * tc - dc * dx * tr
                    if (dr != 0 or dc != 0) and (abs(along) > half_step or abs(across) > rr):
                        continue
                    cc = c0 + dc
                    if cc < 0 or cc >= ncp:
                        continue
                    q = r * ncp + cc
                    if np.isnan(z[q]) or last[q] == k:
                        continue
                    last[q] = k
                    count[q] += 1
                    if v > vmax[q]:
                        vmax[q] = v
                    if in_strip[q]:
                        ps, pg, npair, _ = _mark_reached(strip_cell, strip_seg, q, k, seg_last,
                                                         ps, pg, npair)
            if in_strip[cur]:
                hit_strip = True
            if hit_strip and not keep_going:
                reason = 1
                break
        travel[k] = length
        drop[k] = z_crown[k] - z[cur]
        tip[k] = cur
        stop[k] = reason
        path_ptr[k + 1] = npath
    return (count, vmax, travel, drop, tip, stop, path_ptr, path[:npath].copy(),
            ps[:npair].copy(), pg[:npair].copy())
