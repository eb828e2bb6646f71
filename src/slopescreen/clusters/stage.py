"""The clusters stage: failing clusters of one rain case, their table and the FS bound raster."""

from typing import NamedTuple

import numpy as np
from scipy import ndimage

from ..errors import InputError
from .forces import cluster_factor_of_safety, cluster_forces
from .search import FOUR_CONNECTED, _sub, failing_set, fs_bound_map

__all__ = ["ClusterResult", "TABLE_COLUMNS", "failure_clusters", "cluster_table"]

TABLE_COLUMNS = (
    "id", "fs", "area_m2", "volume_m3", "mean_depth_m", "length_m", "width_m", "n_cells",
    "min_cell_fs", "lower_bound", "proven", "in_area_band",
)
"""Columns of the cluster table, in order."""


class ClusterResult(NamedTuple):
    """Result of :func:`failure_clusters`."""

    labels: np.ndarray
    """int32 raster: cluster id (1..n) of each cell, 0 outside clusters."""
    table: dict
    """Column name -> numpy array, one row per cluster (:data:`TABLE_COLUMNS`)."""
    cluster_fs_bound: np.ndarray
    """float32 raster: proven lower bound on the FS of any cluster of extent <= bound_extent_cells holding the cell."""
    bound_extent_cells: int
    """Bounding-box extent (rows and columns) up to which ``cluster_fs_bound`` holds."""
    modular_faces: int
    """Faces where g_1 was not submodular (replaced by their modular lower bound)."""
    undecided_cells: int
    """Cells the tiled cut could not decide (clusters touching them are not proven)."""
    dropped: int
    """Components of the cut with recomputed FS >= 1 (rounding), not reported."""


def _extent(forces, comp):
    """(length along slope, width across slope), m, of one cluster."""
    rr, cc = np.nonzero(comp)
    d = forces.downslope[:, rr, cc].sum(axis=1)
    norm = float(np.hypot(d[0], d[1]))
    de, dn = (d / norm) if norm > 0 else (0.0, -1.0)
    x = cc * forces.dx
    y = -rr * forces.dy
    along = x * de + y * dn
    across = -x * dn + y * de
    length = float(np.ptp(along)) + abs(de) * forces.dx + abs(dn) * forces.dy
    width = float(np.ptp(across)) + abs(dn) * forces.dx + abs(de) * forces.dy
    return length, width


def cluster_table(forces, labels, *, bound_map=None, extent_cells=0, min_area_m2=None,
                  max_area_m2=None, proven=None):
    """Table of clusters from a label raster (FS recomputed from the force terms).

    Parameters
    ----------
    forces : ClusterForces
    labels : numpy.ndarray of int, shape (rows, cols)
        Cluster ids 1..n, 0 elsewhere.
    bound_map : numpy.ndarray, optional
        ``cluster_fs_bound`` (:func:`~slopescreen.clusters.search.fs_bound_map`).
        A cluster's ``lower_bound`` is its least value over the cluster's
        cells when the cluster spans at most ``extent_cells`` rows and
        columns (then the bound covers it); NaN otherwise or without a map.
    extent_cells : int
        Extent up to which ``bound_map`` holds.
    min_area_m2, max_area_m2 : float, optional
        Area band for the ``in_area_band`` column.
    proven : array_like of bool, optional
        Per cluster: exact component of the global minimiser (default True).

    Returns
    -------
    dict
        :data:`TABLE_COLUMNS` -> numpy arrays.
    """
    cell_area = forces.dx * forces.dy
    out = {k: [] for k in TABLE_COLUMNS}
    for i, sl in enumerate(ndimage.find_objects(labels), start=1):
        if sl is None:
            continue
        comp = labels == i
        fs = cluster_factor_of_safety(forces, comp)
        fits = (sl[0].stop - sl[0].start <= extent_cells
                and sl[1].stop - sl[1].start <= extent_cells)
        lb = float(np.min(bound_map[comp])) if bound_map is not None and fits else np.nan
        ncell = int(comp.sum())
        area = ncell * cell_area
        depth = forces.depth_m[comp]
        length, width = _extent(forces, comp)
        band = (min_area_m2 is None or area >= min_area_m2) and (
            max_area_m2 is None or area <= max_area_m2)
        for k, v in zip(TABLE_COLUMNS, (
                i, fs, area, float(depth.sum()) * cell_area, float(depth.mean()), length, width,
                ncell, float(np.min(forces.cell_fs[comp])), lb,
                True if proven is None else bool(proven[i - 1]), band)):
            out[k].append(v)
    dtypes = {"id": np.int32, "n_cells": np.int32, "proven": bool, "in_area_band": bool}
    return {k: np.asarray(v, dtype=dtypes.get(k, np.float64)) for k, v in out.items()}


def failure_clusters(slope_deg, depth_m, wetness, *, dx, dy, aspect_deg, cohesion_kpa,
                     root_cohesion_kpa, lateral_root_cohesion_kpa, friction_deg,
                     unit_weight_kn_m3, saturated_unit_weight_kn_m3=None, passive_fraction=0.5,
                     min_area_m2=None, max_area_m2=None, tile_cells=200, halo_cells=24,
                     bound_window_cells=40, bound_stride_cells=20, bound=True):
    """Failing multi-cell clusters of one rain case and the cluster FS bound raster.

    Parameters
    ----------
    slope_deg : array_like, shape (rows, cols)
        Slope, degrees in [0, 90); NaN is nodata.
    depth_m, wetness : array_like
        Vertical soil depth z (m, > 0) and saturated fraction W in [0, 1] of
        the rain case, per cell or one value.
    dx, dy : float
        Cell sizes, m.
    aspect_deg : array_like, shape (rows, cols)
        Downslope direction, degrees clockwise from north (NaN on flats).
    cohesion_kpa, root_cohesion_kpa, lateral_root_cohesion_kpa : array_like
        c', basal and lateral root cohesion, kPa.
    friction_deg : array_like
        phi', degrees in [0, 60).
    unit_weight_kn_m3 : array_like
        Moist unit weight, kN/m^3.
    saturated_unit_weight_kn_m3 : array_like, optional
        Default: the moist unit weight (the stability stage's convention).
    passive_fraction : float
        Share of Rankine passive resistance at the toe (scenario
        ``[clusters] passive_fraction``, default 0.5).
    min_area_m2, max_area_m2 : float, optional
        Area band of the scenario; sets the ``in_area_band`` column only
        (the failing clusters of the exact cut have whatever size the
        physics gives them).
    tile_cells, halo_cells : int
        Tile core and halo of the tiled cut (see
        :func:`~slopescreen.clusters.search.failing_set`).
    bound_window_cells, bound_stride_cells : int
        Window side W and stride s of ``cluster_fs_bound``; the bound holds
        for clusters whose bounding box spans at most W - s rows and columns.
    bound : bool
        Compute ``cluster_fs_bound`` (the slower product); NaN raster if False.

    Returns
    -------
    ClusterResult

    Raises
    ------
    InputError
        Inputs out of range or of the wrong shape.

    Notes
    -----
    The failing clusters are the 4-connected components of the least
    minimiser of g_1(S) = R + B - (D + H) (exact s-t cut on integer
    capacities; module :mod:`slopescreen.clusters`). Each is rechecked by
    :func:`~slopescreen.clusters.forces.cluster_factor_of_safety` and kept
    only when FS < 1; ``dropped`` counts components removed by that check
    (possible only within the rounding error of the integer scale). The
    ``lower_bound`` column is the least ``cluster_fs_bound`` over the
    cluster's cells (NaN when the cluster is larger than the bound's extent
    or ``bound`` is False); ``proven`` says that the
    cluster is an exact component of the global minimiser (no undecided
    tile cell touches it).

    References
    ----------
    Milledge, D.G., Bellugi, D., McKean, J.A., Densmore, A.L., Dietrich,
    W.E. (2014). J. Geophys. Res. Earth Surface 119, 2481-2504.
    doi 10.1002/2014JF003135

    Examples
    --------
    >>> import numpy as np
    >>> slope = np.full((6, 8), 25.0); slope[1:4, 2:6] = 45.0
    >>> res = failure_clusters(slope, 1.0, 1.0, dx=5.0, dy=5.0, aspect_deg=np.full((6, 8), 180.0),
    ...     cohesion_kpa=0.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=0.0,
    ...     friction_deg=35.0, unit_weight_kn_m3=19.0, bound=False)
    >>> int(res.labels.max()), bool(res.table["fs"][0] < 1)
    (1, True)
    """
    forces = cluster_forces(slope_deg, aspect_deg, depth_m, wetness, dx=dx, dy=dy,
                            cohesion_kpa=cohesion_kpa, root_cohesion_kpa=root_cohesion_kpa,
                            lateral_root_cohesion_kpa=lateral_root_cohesion_kpa,
                            friction_deg=friction_deg, unit_weight_kn_m3=unit_weight_kn_m3,
                            saturated_unit_weight_kn_m3=saturated_unit_weight_kn_m3,
                            passive_fraction=passive_fraction)
    for name, v in (("tile_cells", tile_cells), ("halo_cells", halo_cells)):
        if int(v) != v or v < (1 if name == "tile_cells" else 0):
            raise InputError(f"{name}: expected a non-negative integer (tile >= 1), got {v!r}")
    fset = failing_set(forces, tile_cells=int(tile_cells), halo_cells=int(halo_cells))
    undecided = fset.upper & ~fset.lower
    labels, n = ndimage.label(fset.lower, structure=FOUR_CONNECTED)
    near_undecided = ndimage.binary_dilation(undecided, structure=FOUR_CONNECTED)
    keep = np.zeros(n + 1, dtype=bool)
    proven = []
    for i, sl in enumerate(ndimage.find_objects(labels), start=1):
        comp = labels[sl] == i
        sub = _sub(forces, (sl[0].start, sl[0].stop, sl[1].start, sl[1].stop))
        if cluster_factor_of_safety(sub, comp) < 1.0:
            keep[i] = True
            proven.append(not bool((near_undecided[sl] & comp).any()))
    relabel = np.zeros(n + 1, dtype=np.int32)
    relabel[keep] = np.arange(1, int(keep.sum()) + 1, dtype=np.int32)
    out_labels = relabel[labels]
    if bound:
        bmap, _, extent = fs_bound_map(forces, window_cells=bound_window_cells,
                                       stride_cells=bound_stride_cells)
    else:
        bmap = np.full(forces.valid.shape, np.nan, dtype=np.float32)
        extent = 0
    table = cluster_table(forces, out_labels, bound_map=bmap if bound else None,
                          extent_cells=extent, min_area_m2=min_area_m2, max_area_m2=max_area_m2,
                          proven=proven)
    return ClusterResult(out_labels, table, bmap, extent, fset.modular_faces,
                         int(undecided.sum()), int(n - keep[1:].sum()))
