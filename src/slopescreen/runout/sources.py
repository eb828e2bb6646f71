"""Failure sources of a rain case: where runout starts.

A source is a failure cluster of the clusters stage, or, where that stage did
not run, a connected patch (8-connected) of cells with FS < 1 (or with a
probability of failure at least a threshold). Each source has a crown (its
highest cell on the conditioned DEM), a toe (its lowest cell), an area, a
volume (cell area times vertical failure depth, summed), a width across the
slope, its factor of safety and its probability of failure (docs/methods.md,
"Runout reach").
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._numba import njit


@dataclass(frozen=True)
class Sources:
    """The failure sources of one rain case.

    Attributes
    ----------
    labels : numpy.ndarray of int32, shape (rows, cols), or None
        ``i + 1`` on the cells of source ``i``, 0 elsewhere (None after
        :meth:`sparse`).
    ids : numpy.ndarray of int64
        Id of each source, unique over the run (a cluster keeps its cluster id).
    kind : str
        ``"cluster"``, ``"fs_below_1"`` or ``"failure_probability"``.
    crown, toe : numpy.ndarray of int64
        Flat index (``row * cols + col``) of the highest and the lowest cell.
    z_crown, z_toe : numpy.ndarray of float64
        Their elevations on the conditioned DEM, m.
    area_m2, volume_m3, width_m : numpy.ndarray of float64
        Plan area, failed volume and width across the slope.
    fs : numpy.ndarray of float64
        Factor of safety of the cluster, or the least cell FS of a patch.
    failure_probability : numpy.ndarray of float64
        Of the cluster, or the largest cell value of a patch; NaN without one.
    """

    labels: np.ndarray
    ids: np.ndarray
    kind: str
    crown: np.ndarray
    toe: np.ndarray
    z_crown: np.ndarray
    z_toe: np.ndarray
    area_m2: np.ndarray
    volume_m3: np.ndarray
    width_m: np.ndarray
    fs: np.ndarray
    failure_probability: np.ndarray
    cells: np.ndarray | None = None
    """Flat indices of the source cells when ``labels`` was let go (:meth:`sparse`)."""

    def __len__(self) -> int:
        return int(self.ids.size)

    def cell_indices(self) -> np.ndarray:
        """Flat indices of every source cell (from ``labels``, or as kept by :meth:`sparse`)."""
        if self.labels is None:
            return self.cells
        return np.flatnonzero(self.labels.reshape(-1) > 0)

    def sparse(self) -> "Sources":
        """The same sources without the label raster (its cells kept as flat indices)."""
        from dataclasses import replace

        return replace(self, labels=None, cells=self.cell_indices())

    def hazard_probability(self) -> np.ndarray:
        """P_f of each source for the corridor hazard: its own, or 1 where none was estimated."""
        return np.where(np.isnan(self.failure_probability), 1.0, self.failure_probability)


def patch_sources(mask, z, depth_m, fs, aspect_deg, *, dx, dy, failure_probability=None,
                  kind="fs_below_1", first_id=1) -> Sources:
    """Connected patches of failing cells as sources.

    Parameters
    ----------
    mask : numpy.ndarray of bool, shape (rows, cols)
        Cells that fail (FS < 1, or P_f at least the threshold).
    z : numpy.ndarray of float, shape (rows, cols)
        Conditioned DEM, m (crown and toe).
    depth_m : numpy.ndarray of float
        Vertical failure depth per cell, m.
    fs : numpy.ndarray of float
        Factor of safety per cell.
    aspect_deg : numpy.ndarray of float
        Downslope azimuth per cell (clockwise from north), degrees.
    dx, dy : float
        Cell size, m.
    failure_probability : numpy.ndarray of float, optional
        Per cell.
    kind : str
        What made a cell a source (``Sources.kind``).
    first_id : int
        Id of the first patch (ids run on from it in raster order).

    Returns
    -------
    Sources

    Examples
    --------
    >>> import numpy as np
    >>> z = np.add.outer(np.arange(4.0)[::-1], np.zeros(3)) * 10   # falls to the south
    >>> mask = np.zeros((4, 3), bool); mask[0:2, 1] = True; mask[3, 0] = True
    >>> s = patch_sources(mask, z, np.ones((4, 3)), np.full((4, 3), 0.9),
    ...                   np.full((4, 3), 180.0), dx=5.0, dy=5.0)
    >>> len(s), s.crown.tolist(), s.toe.tolist(), s.volume_m3.tolist()
    (2, [1, 9], [4, 9], [50.0, 25.0])
    >>> s.width_m.round(9).tolist()      # one column wide, across a slope that falls south
    [5.0, 5.0]
    """
    from scipy import ndimage

    mask = np.asarray(mask, dtype=bool)
    labels = np.zeros(mask.shape, dtype=np.int32)
    n = ndimage.label(mask, structure=np.ones((3, 3), dtype=bool), output=labels)
    p = np.full(1, np.nan) if failure_probability is None else failure_probability
    out = _patch_table(labels.reshape(-1), n, np.asarray(z).reshape(-1), _per_cell(depth_m),
                       np.asarray(fs).reshape(-1), _per_cell(p),
                       np.asarray(aspect_deg).reshape(-1), mask.shape[1], float(dx), float(dy))
    crown, toe, z_crown, z_toe, count, volume, width, fs_min, p_max = out
    return Sources(labels=labels, ids=np.arange(first_id, first_id + n, dtype=np.int64),
                   kind=kind, crown=crown, toe=toe, z_crown=z_crown, z_toe=z_toe,
                   area_m2=count * dx * dy, volume_m3=volume, width_m=width, fs=fs_min,
                   failure_probability=p_max)


def _per_cell(values) -> np.ndarray:
    """A flat view of a per-cell array, or a one-element array for one value everywhere
    (a number or a broadcast array: no per-cell copy)."""
    a = np.asarray(values)
    if a.ndim == 0 or (a.size > 1 and all(st == 0 for st in a.strides)):
        return np.asarray(a.reshape(-1)[:1] if a.ndim else a.reshape(1), dtype=np.float64)
    return a.reshape(-1)


def cluster_sources(labels, records, z) -> Sources:
    """The failing clusters of the clusters stage as sources.

    Parameters
    ----------
    labels : numpy.ndarray, shape (rows, cols)
        Cluster id per cell (0 = none), as in the ``cluster_labels`` product.
    records : sequence of dict
        The cluster rows (``id``, ``fs``, ``failure_probability``, ``area_m2``,
        ``volume_m3``, ``width_m``).
    z : numpy.ndarray, shape (rows, cols)
        Conditioned DEM, m.

    Returns
    -------
    Sources
        In the order of ``records``; a cluster keeps its id.
    """
    ids = np.array([int(r["id"]) for r in records], dtype=np.int64)
    lab = np.asarray(labels)
    local = np.zeros(lab.shape, dtype=np.int32)
    if ids.size:
        index = {int(i): k + 1 for k, i in enumerate(ids)}
        present = np.unique(lab[lab > 0]).astype(np.int64)
        lut = np.zeros(int(max(present.max(initial=0), ids.max())) + 1, dtype=np.int32)
        for i, k in index.items():
            lut[i] = k
        local = np.where(lab > 0, lut[np.clip(lab, 0, lut.size - 1).astype(np.int64)],
                         0).astype(np.int32)
    n = ids.size
    zf = np.asarray(z).reshape(-1)
    one = np.zeros(1)
    crown, toe, z_crown, z_toe, *_ = _patch_table(
        local.reshape(-1), n, zf, one, one, np.full(1, np.nan), one, lab.shape[1], 1.0, 1.0)

    def col(key):
        return np.array([float(r[key]) for r in records], dtype=np.float64)

    return Sources(labels=local, ids=ids, kind="cluster", crown=crown, toe=toe, z_crown=z_crown,
                   z_toe=z_toe, area_m2=col("area_m2"), volume_m3=col("volume_m3"),
                   width_m=col("width_m"), fs=col("fs"),
                   failure_probability=col("failure_probability"))


@njit
def _patch_table(labels, n, z, depth, fs, p, aspect, ncols, dx, dy):
    """Per label 1..n: crown, toe, their z, cell count, volume, width, least FS, largest P_f.

    Among cells of equal elevation the crown and the toe are the cells nearest
    the source's centroid (then the first in raster order), so that a path
    leaves a level toe from its middle. ``depth``, ``fs``, ``p`` and ``aspect``
    hold one value per cell, or one value for every cell.
    """
    crown = np.full(n, -1, dtype=np.int64)
    toe = np.full(n, -1, dtype=np.int64)
    zc = np.full(n, -np.inf)
    zt = np.full(n, np.inf)
    count = np.zeros(n)
    volume = np.zeros(n)
    fs_min = np.full(n, np.inf)
    p_max = np.full(n, np.nan)
    de = np.zeros(n)
    dn = np.zeros(n)
    sr = np.zeros(n)
    sc = np.zeros(n)
    for i in range(labels.size):
        k = labels[i] - 1
        if k < 0:
            continue
        zi = z[i]
        zc[k] = max(zc[k], zi)
        zt[k] = min(zt[k], zi)
        count[k] += 1.0
        sr[k] += i // ncols
        sc[k] += i % ncols
        volume[k] += depth[i if depth.size > 1 else 0] * dx * dy
        f = fs[i if fs.size > 1 else 0]
        if f < fs_min[k]:
            fs_min[k] = f
        pi = p[i if p.size > 1 else 0]
        if not np.isnan(pi) and (np.isnan(p_max[k]) or pi > p_max[k]):
            p_max[k] = pi
        a = aspect[i if aspect.size > 1 else 0]
        if not np.isnan(a):
            de[k] += np.sin(np.radians(a))
            dn[k] += np.cos(np.radians(a))
    for k in range(n):
        norm = np.hypot(de[k], dn[k])
        if norm > 0.0:
            de[k] /= norm
            dn[k] /= norm
        else:
            de[k] = 0.0
            dn[k] = -1.0
        if count[k] > 0:
            sr[k] /= count[k]
            sc[k] /= count[k]
    # crown and toe (ties: nearest the centroid); width across the mean downslope direction
    dcrown = np.full(n, np.inf)
    dtoe = np.full(n, np.inf)
    lo = np.full(n, np.inf)
    hi = np.full(n, -np.inf)
    for i in range(labels.size):
        k = labels[i] - 1
        if k < 0:
            continue
        r = i // ncols
        c = i % ncols
        d2 = ((r - sr[k]) * dy) ** 2 + ((c - sc[k]) * dx) ** 2
        if z[i] == zc[k] and d2 < dcrown[k]:
            dcrown[k] = d2
            crown[k] = i
        if z[i] == zt[k] and d2 < dtoe[k]:
            dtoe[k] = d2
            toe[k] = i
        x = c * dx
        y = -r * dy
        across = -x * dn[k] + y * de[k]
        lo[k] = min(lo[k], across)
        hi[k] = max(hi[k], across)
    width = np.zeros(n)
    for k in range(n):
        width[k] = hi[k] - lo[k] + abs(dn[k]) * dx + abs(de[k]) * dy
    return crown, toe, zc, zt, count, volume, width, fs_min, p_max
