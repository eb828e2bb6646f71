"""Size-resolved search: least-stable connected cluster per candidate window and area band."""

import math
from typing import NamedTuple

import numpy as np
from scipy import ndimage

from .. import _validate
from ..errors import InputError
from .band import WindowBands, _connected, band_cells, least_stable_in_band
from .forces import _extent

__all__ = ["SIZE_COLUMNS", "SizeResolved", "area_bands", "candidate_windows",
           "size_resolved_clusters"]

SIZE_COLUMNS = (
    "candidate", "band", "band_min_m2", "band_max_m2", "row0", "row1", "col0", "col1", "fs",
    "area_m2", "volume_m3", "mean_depth_m", "length_m", "width_m", "n_cells", "min_cell_fs",
    "heuristic_fs", "relaxation_bound", "lower_bound", "proven", "method", "seconds",
    "probability", "probability_se",
)
"""Columns of the size-resolved table, in order (one row per candidate window and band;
``probability`` and its standard error are NaN unless the stage fills them)."""


class SizeResolved(NamedTuple):
    """Result of :func:`size_resolved_clusters`."""

    table: dict
    """Column name -> numpy array (:data:`SIZE_COLUMNS`)."""
    masks: list
    """Per row, the cluster as a bool array of its window's shape (rows row0:row1, cols col0:col1)."""

    def grid_mask(self, i, shape):
        """The cluster of row ``i`` as a bool array of the whole grid's shape."""
        out = np.zeros(shape, dtype=bool)
        t = self.table
        out[t["row0"][i]:t["row1"][i], t["col0"][i]:t["col1"][i]] = self.masks[i]
        return out


def area_bands(min_area_m2, max_area_m2, cell_area_m2, bands=1):
    """Split an area range into bands of whole cells.

    Parameters
    ----------
    min_area_m2, max_area_m2 : float
        The scenario's area range, m^2.
    cell_area_m2 : float
        Plan area of one cell, m^2.
    bands : int or sequence of (float, float)
        Number of bands with geometrically spaced edges, or explicit
        (min, max) pairs in m^2.

    Returns
    -------
    list of (int, int)
        (kmin, kmax) in cells; geometric bands do not overlap and together
        cover every whole cell count of the range.

    Raises
    ------
    InputError
        A range holding no whole cell, bands < 1.

    Examples
    --------
    >>> area_bands(25.0, 2500.0, 25.0, 2)
    [(1, 9), (10, 100)]
    """
    if isinstance(bands, (int, np.integer)):
        if bands < 1:
            raise InputError(f"bands: expected an integer >= 1 or (min, max) pairs, got {bands}")
        kmin, kmax = band_cells(min_area_m2, max_area_m2, cell_area_m2)
        edges = [kmin]
        for j in range(1, int(bands)):
            e = int(round(kmin * (kmax / kmin) ** (j / bands)))
            if e > edges[-1] and e <= kmax:
                edges.append(e)
        return [(edges[j], (edges[j + 1] - 1) if j + 1 < len(edges) else kmax)
                for j in range(len(edges))]
    out = []
    for pair in bands:
        try:
            lo, hi = (float(v) for v in pair)
        except (TypeError, ValueError):
            raise InputError(f"bands: expected (min_area_m2, max_area_m2) pairs, got {pair!r}")
        out.append(band_cells(lo, hi, cell_area_m2))
    if not out:
        raise InputError("bands: no band given")
    return out


def _window_around(r, c, size, rows, cols):
    h = min(size, rows)
    w = min(size, cols)
    r0 = min(max(0, r - h // 2), rows - h)
    c0 = min(max(0, c - w // 2), cols - w)
    return (r0, r0 + h, c0, c0 + w)


def candidate_windows(shape, *, labels=None, windows=None, window_cells=40, n_least=4,
                      order=None, max_clusters=None):
    """Candidate windows for the size-resolved search.

    Parameters
    ----------
    shape : tuple of int
        (rows, cols) of the grid.
    labels : numpy.ndarray of int, optional
        Failing clusters (ids 1..n, 0 elsewhere), e.g.
        ``ClusterResult.labels``: one window centred on each cluster's
        bounding box, except for a cluster whose bounding box lies inside a
        window already chosen (that window was searched and holds it).
    windows : list of WindowResult, optional
        Windows of the FS bound map: the ``n_least`` with the least FS are
        added as they are.
    window_cells : int
        Side of the windows centred on clusters, cells (clipped to the grid).
    n_least : int
        How many of the least-stable bound-map windows to add.
    order : sequence of int, optional
        Cluster ids in the order they are taken (e.g. least FS first);
        default id order.
    max_clusters : int, optional
        Most windows centred on clusters (default: one per cluster not
        already covered).

    Returns
    -------
    list of tuple
        Distinct (r0, r1, c0, c1), clusters first, in ``order``, then the
        bound-map windows from least FS up.

    Raises
    ------
    InputError
        Bad window size or label raster.

    Examples
    --------
    >>> import numpy as np
    >>> lab = np.zeros((50, 50), np.int32); lab[30:33, 40:44] = 1
    >>> candidate_windows(lab.shape, labels=lab, window_cells=20)
    [(21, 41, 30, 50)]
    """
    rows, cols = (int(v) for v in shape)
    _validate.positive_int(window_cells, "window_cells")
    out = []
    if labels is not None:
        lab = np.asarray(labels)
        if lab.shape != (rows, cols) or not np.issubdtype(lab.dtype, np.integer):
            raise InputError(f"labels: expected an integer array of shape {(rows, cols)}")
        boxes = ndimage.find_objects(lab)
        ids = range(1, len(boxes) + 1) if order is None else [int(i) for i in order]
        limit = len(boxes) if max_clusters is None else int(max_clusters)
        taken = 0
        for i in ids:
            sl = boxes[i - 1] if 1 <= i <= len(boxes) else None
            if sl is None or taken >= limit:
                continue
            if any(w[0] <= sl[0].start and sl[0].stop <= w[1] and w[2] <= sl[1].start
                   and sl[1].stop <= w[3] for w in out):
                continue
            r = (sl[0].start + sl[0].stop - 1) // 2
            c = (sl[1].start + sl[1].stop - 1) // 2
            out.append(_window_around(r, c, int(window_cells), rows, cols))
            taken += 1
    if windows is not None:
        ranked = sorted((w for w in windows if np.isfinite(w.least_fs)),
                        key=lambda w: w.least_fs)
        out.extend(tuple(int(v) for v in w.window) for w in ranked[:int(n_least)])
    seen = set()
    unique = []
    for w in out:
        if w not in seen:
            seen.add(w)
            unique.append(w)
    return unique


def size_resolved_clusters(forces, *, candidates, min_area_m2, max_area_m2, bands=1,
                           time_limit_s=10.0):
    """Least-stable connected cluster in each area band of each candidate window.

    Parameters
    ----------
    forces : ClusterForces
        From :func:`~slopescreen.clusters.forces.cluster_forces` (one rain case).
    candidates : sequence of tuple
        Windows (r0, r1, c0, c1), e.g. from :func:`candidate_windows`. The
        mixed-integer program grows fast with the window: 40 x 40 cells is
        the size it was measured on.
    min_area_m2, max_area_m2 : float
        The scenario's area range, m^2.
    bands : int or sequence of (float, float)
        Area bands (:func:`area_bands`); default one band, the whole range.
    time_limit_s : float
        Time limit of the mixed-integer solves per window and band, s.

    Returns
    -------
    SizeResolved
        One row per window and band. ``fs`` is the FS of a real connected
        cluster of the band (recomputed from the force terms); NaN when the
        window holds no connected set of the band. ``lower_bound`` is a
        proven lower bound on the FS of every connected cluster of the band
        inside the window; ``relaxation_bound`` the convex relaxation's
        bound (it sees the lower area limit only); ``proven`` is True when
        ``lower_bound`` meets ``fs`` within a relative 1e-4; ``method`` says
        what settled it ("cut", "enumeration", "relaxation", "milp"; "time_limit" for an
        unproven answer; "none" when no set exists). A cluster that is the
        answer of a band in several windows is listed once, with the first
        window.

    Raises
    ------
    InputError
        Bad windows, band or time limit.
    SolverError
        HiGHS ends with a status other than optimal or a time-limit stop.

    Notes
    -----
    Per window and band (:func:`~slopescreen.clusters.band.least_stable_in_band`)::

        minimise FS(S) = (R + B) / (D + H)   over connected S in the window,
                                             A_min <= |S| dx dy <= A_max

    exactly, by Dinkelbach iterations over mixed-integer programs solved by
    HiGHS through cvxpy, warm-started from an area-price sweep with the
    exact cut plus greedy repair and local search. Faces on a window's
    border are charged, as in the least-stable map. Clusters of different
    rows may overlap.

    References
    ----------
    Milledge, D.G., Bellugi, D., McKean, J.A., Densmore, A.L., Dietrich,
    W.E. (2014). J. Geophys. Res. Earth Surface 119, 2481-2504.
    doi 10.1002/2014JF003135
    Dinkelbach, W. (1967). Management Science 13(7), 492-498 (from memory).

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.clusters.forces import cluster_forces
    >>> f = cluster_forces(np.full((6, 6), 38.0), np.full((6, 6), 180.0), 1.2, 0.8, dx=5.0,
    ...     dy=5.0, cohesion_kpa=1.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=2.0,
    ...     friction_deg=33.0, unit_weight_kn_m3=18.5)
    >>> res = size_resolved_clusters(f, candidates=[(0, 6, 0, 6)], min_area_m2=25.0,
    ...     max_area_m2=400.0, bands=2)
    >>> [int(k) for k in res.table["n_cells"]], bool(res.table["proven"].all())
    ([3, 16], True)
    """
    cell_area = forces.dx * forces.dy
    pairs = area_bands(min_area_m2, max_area_m2, cell_area, bands)
    if not (isinstance(time_limit_s, (int, float)) and math.isfinite(time_limit_s)
            and time_limit_s > 0):
        raise InputError(f"time_limit_s: expected a positive number of seconds, got "
                         f"{time_limit_s!r}")
    out = {k: [] for k in SIZE_COLUMNS}
    masks = []
    found = set()
    for ci, window in enumerate(candidates):
        st = WindowBands(forces, window)
        # heuristics first, so that one model serves every band (built for the largest lam)
        heur = {}
        for bi, (kmin, kmax) in enumerate(pairs):
            cut = st.cut
            if cut is None or st.largest < kmin:
                continue
            size = int(cut.mask.sum())
            if kmin <= size <= min(kmax, int(st.terms.valid.sum())) and _connected(cut.mask):
                continue
            heur[bi] = st.heuristic(kmin, min(kmax, int(st.terms.valid.sum())))
        lam_max = max((h[1] for h in heur.values() if math.isfinite(h[1])), default=None)
        for bi, (kmin, kmax) in enumerate(pairs):
            res = least_stable_in_band(forces, st.window, min_area_m2=kmin * cell_area,
                                       max_area_m2=kmax * cell_area, time_limit_s=time_limit_s,
                                       state=st, lam_max=lam_max, heuristic=heur.get(bi))
            m = res.mask
            r0, r1, c0, c1 = st.window
            if m.any():
                rr, cc = np.nonzero(m)
                key = (bi, (rr + r0).tobytes(), (cc + c0).tobytes())
                if key in found:
                    continue  # the same cluster already answers this band in another window
                found.add(key)
                n = int(m.sum())
                depth = st.sub.depth_m[m]
                length, width = _extent(st.sub, m)
                row = (float(depth.sum()) * cell_area, float(depth.mean()), length, width, n,
                       float(np.min(st.sub.cell_fs[m])))
            else:
                n = 0
                row = (math.nan, math.nan, math.nan, math.nan, 0, math.nan)
            vals = (ci, bi, kmin * cell_area, kmax * cell_area, r0, r1, c0, c1, res.fs,
                    n * cell_area) + row + (res.heuristic_fs, res.relaxation_bound,
                                            res.lower_bound, res.proven, res.method,
                                            res.seconds, math.nan, math.nan)
            for k, v in zip(SIZE_COLUMNS, vals):
                out[k].append(v)
            masks.append(m)
    ints = {"candidate", "band", "row0", "row1", "col0", "col1", "n_cells"}
    table = {}
    for k, v in out.items():
        if k in ints:
            table[k] = np.asarray(v, dtype=np.int32)
        elif k == "proven":
            table[k] = np.asarray(v, dtype=bool)
        elif k == "method":
            table[k] = np.asarray(v, dtype=str) if v else np.asarray([], dtype="<U10")
        else:
            table[k] = np.asarray(v, dtype=np.float64)
    return SizeResolved(table, masks)
