r"""The clusters stage: failing clusters of one rain case, their table and the FS bound raster.

Optional parts: the size-resolved search (least-stable cluster per candidate window and area
band, :mod:`slopescreen.clusters.sizes`) and the probability that each cluster fails
(:mod:`slopescreen.clusters.probability`).

A cluster is a set S of grid cells. With the force terms of
:mod:`slopescreen.clusters.forces` (per cell D_i, R_i; per margin face a
resistance and, on head faces, an active thrust; docs/methods.md, "Multi-cell failure clusters")::

    FS(S) = (R(S) + B(S)) / (D(S) + H(S))
    g_lam(S) = R(S) + B(S) - lam (D(S) + H(S)),      FS(S) < lam  <=>  g_lam(S) < 0

The modules of the package: ``forces`` (force model; its numba kernels in ``_force_kernels``),
``cut`` (exact minimisation of g_lam by an s-t minimum cut with integer
capacities), ``search`` (tiles with halos at lam = 1, Dinkelbach least-stable
clusters in windows, the FS bound raster), ``heuristic`` (area-price sweep
and greedy repair for connected sets in an area band; its single-cell moves in
``local_search``), ``band`` (the exact mixed-integer program per window and
area band, with the relaxation and MILP bounds; ``_solve`` checks every cvxpy
solve and runs it in the killable child process of ``_highs_process``), ``sizes``
(candidate windows, area bands, the size-resolved table), ``probability``
(Monte Carlo probability that a found cluster fails), ``inputs`` (the parameter
objects: strength, options, uncertainty) and ``stage`` (the stage function and
the cluster table).
"""

from typing import NamedTuple

import math

import numpy as np
from scipy import ndimage

from .. import _validate
from .forces import _extent, cluster_factor_of_safety, cluster_forces, nonsubmodular_faces
from .inputs import ClusterOptions, ClusterStrength, ClusterUncertainty
from .probability import cluster_failure_probability
from ._faces import HALF, PAIR_STRUCTURE, pair_components, pair_slices
from .search import _sub, failing_set, fs_bound_map
from .sizes import candidate_windows, size_resolved_clusters

__all__ = ["ClusterResult", "TABLE_COLUMNS", "failure_clusters", "cluster_table"]

TABLE_COLUMNS = (
    "id", "fs", "area_m2", "volume_m3", "mean_depth_m", "length_m", "width_m", "n_cells",
    "min_cell_fs", "lower_bound", "proven", "in_area_band", "probability", "probability_se",
    "modular_faces",
)
"""Columns of the cluster table, in order (``probability`` and its standard error are NaN
unless ``uncertainty`` is given to :func:`failure_clusters`; ``modular_faces`` counts the faces
touching the cluster whose pair term was not submodular, which make ``proven`` False)."""


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
    size_resolved: object = None
    """:class:`~slopescreen.clusters.sizes.SizeResolved` when asked for, else None."""


def cluster_table(forces, labels, *, bound_map=None, extent_cells=0, min_area_m2=None,
                  max_area_m2=None, proven=None, modular_faces=None):
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
    modular_faces : array_like of int, optional
        Per cluster: faces touching it that the cut replaced by their modular
        lower bound (default 0).

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
        # work on the cluster's bounding box: faces across the box edge are margins
        # of the cluster, charged with their own values, exactly as on the whole grid
        comp = labels[sl] == i
        sub = _sub(forces, (sl[0].start, sl[0].stop, sl[1].start, sl[1].stop))
        fs = cluster_factor_of_safety(sub, comp)
        fits = (sl[0].stop - sl[0].start <= extent_cells
                and sl[1].stop - sl[1].start <= extent_cells)
        lb = float(np.min(bound_map[sl][comp])) if bound_map is not None and fits else np.nan
        ncell = int(comp.sum())
        area = ncell * cell_area
        depth = sub.depth_m[comp]
        length, width = _extent(sub, comp)
        band = (min_area_m2 is None or area >= min_area_m2) and (
            max_area_m2 is None or area <= max_area_m2)
        for k, v in zip(TABLE_COLUMNS, (
                i, fs, area, float(depth.sum()) * cell_area, float(depth.mean()), length, width,
                ncell, float(np.min(sub.cell_fs[comp])), lb,
                True if proven is None else bool(proven[i - 1]), band, math.nan, math.nan,
                0 if modular_faces is None else int(modular_faces[i - 1]))):
            out[k].append(v)
    dtypes = {"id": np.int32, "n_cells": np.int32, "proven": bool, "in_area_band": bool,
              "modular_faces": np.int32}
    return {k: np.asarray(v, dtype=dtypes.get(k, np.float64)) for k, v in out.items()}


def failure_clusters(slope_deg, depth_m, wetness, *, dx, dy, aspect_deg, strength=None,
                     options=None, uncertainty=None, depth_measured="vertical", **fields):
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
    strength : ClusterStrength
        c', basal and lateral root cohesion, phi' and the unit weights (the
        saturated one defaults to the moist one, the stability stage's
        convention).
    options : ClusterOptions, optional
        Passive share, area band, tiles, bound windows and the size-resolved
        search; default ``ClusterOptions()``.
    uncertainty : ClusterUncertainty, optional
        Fill the ``probability`` columns by
        :func:`~slopescreen.clusters.probability.cluster_failure_probability`
        with these distributions, samples and rain case (a SteadyRain with
        ``sca_m``, or a StormRain: wetness recomputed per sample); without a
        rain case the ``wetness`` given here is held fixed. A mapping of its
        fields (the form of earlier releases) is accepted and converted by
        :meth:`ClusterUncertainty.from_mapping`.
    **fields
        Instead of ``strength`` or ``options``: the fields of either as
        loose keywords (``cohesion_kpa=..., friction_deg=..., bound=False,
        size_resolved=True``, and so on), from which the objects are built.

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
    or ``options.bound`` is False); ``proven`` says that the
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
    >>> from slopescreen.clusters import ClusterOptions, ClusterStrength
    >>> slope = np.full((6, 8), 25.0); slope[1:4, 2:6] = 45.0
    >>> soil = ClusterStrength(cohesion_kpa=0.0, root_cohesion_kpa=0.0,
    ...     lateral_root_cohesion_kpa=0.0, friction_deg=35.0, unit_weight_kn_m3=19.0)
    >>> res = failure_clusters(slope, 1.0, 1.0, dx=5.0, dy=5.0, aspect_deg=np.full((6, 8), 180.0),
    ...     strength=soil, options=ClusterOptions(bound=False))
    >>> int(res.labels.max()), bool(res.table["fs"][0] < 1)
    (1, True)

    The same call with loose keywords:

    >>> res = failure_clusters(slope, 1.0, 1.0, dx=5.0, dy=5.0, aspect_deg=np.full((6, 8), 180.0),
    ...     cohesion_kpa=0.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=0.0,
    ...     friction_deg=35.0, unit_weight_kn_m3=19.0, bound=False)
    >>> int(res.labels.max())
    1
    """
    strength, opts = _validate.parameter_objects(
        "failure_clusters", fields, ("strength", ClusterStrength, strength),
        ("options", ClusterOptions, options))
    if uncertainty is not None and not isinstance(uncertainty, ClusterUncertainty):
        uncertainty = ClusterUncertainty.from_mapping(uncertainty)
    forces = cluster_forces(slope_deg, aspect_deg, depth_m, wetness, dx=dx, dy=dy,
                            strength=strength, passive_fraction=opts.passive_fraction,
                            depth_measured=depth_measured, nodata_faces=opts.nodata_faces)
    fset = failing_set(forces, tile_cells=opts.tile_cells, halo_cells=opts.halo_cells)
    undecided = fset.upper & ~fset.lower
    labels, n = pair_components(fset.lower)
    near_undecided = ndimage.binary_dilation(undecided, structure=PAIR_STRUCTURE)
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
    # a face replaced by its modular lower bound can make the cut report a set that is not the
    # least minimiser: a cluster it touches (either of its two cells inside) is not proven
    touching = _modular_face_counts(forces, out_labels, int(keep.sum()))
    proven = [p and touching[i] == 0 for i, p in enumerate(proven, start=1)]
    windows = None
    if opts.bound:
        bmap, windows, extent = fs_bound_map(forces, window_cells=opts.bound_window_cells,
                                             stride_cells=opts.bound_stride_cells)
    else:
        bmap = np.full(forces.valid.shape, np.nan, dtype=np.float32)
        extent = 0
    table = cluster_table(forces, out_labels, bound_map=bmap if opts.bound else None,
                          extent_cells=extent, min_area_m2=opts.min_area_m2,
                          max_area_m2=opts.max_area_m2, proven=proven,
                          modular_faces=touching[1:])
    sizes = None
    if opts.size_resolved:
        # windows around the least-stable failing clusters first; a cluster inside a window
        # already chosen adds none
        order = np.asarray(table["id"])[np.argsort(table["fs"], kind="stable")]
        cands = candidate_windows(forces.valid.shape, labels=out_labels, windows=windows,
                                  window_cells=opts.size_window_cells, n_least=opts.size_n_least,
                                  order=order, max_clusters=opts.size_max_clusters)
        sizes = size_resolved_clusters(forces, candidates=cands, min_area_m2=opts.min_area_m2,
                                       max_area_m2=opts.max_area_m2, bands=opts.size_bands,
                                       time_limit_s=opts.size_time_limit_s)
    if uncertainty is not None:
        _add_probability(table, out_labels, sizes, slope_deg, aspect_deg, wetness, dx, dy,
                         opts.passive_fraction, opts.nodata_faces, uncertainty)
    return ClusterResult(out_labels, table, bmap, extent, fset.modular_faces,
                         int(undecided.sum()), int(n - keep[1:].sum()), sizes)


def _add_probability(table, labels, sizes, slope_deg, aspect_deg, wetness, dx, dy,
                     passive_fraction, nodata_faces, uncertainty):
    """Fill the probability columns of the cluster table (and of the size-resolved table)."""
    common = dict(dx=dx, dy=dy, passive_fraction=passive_fraction, nodata_faces=nodata_faces,
                  uncertainty=uncertainty,
                  wetness=wetness if uncertainty.rain is None else None)
    if labels.max() > 0:
        res = cluster_failure_probability(labels, slope_deg, aspect_deg, **common)
        table["probability"][res.ids - 1] = res.p_f
        table["probability_se"][res.ids - 1] = res.standard_error
    if sizes is not None:
        rows = [i for i, m in enumerate(sizes.masks) if m.any()]
        if rows:
            shape = labels.shape
            res = cluster_failure_probability([sizes.grid_mask(i, shape) for i in rows],
                                              slope_deg, aspect_deg, **common)
            sizes.table["probability"][rows] = res.p_f
            sizes.table["probability_se"][rows] = res.standard_error


def _modular_face_counts(forces, labels, n):
    """Per cluster id 0..n: the cell pairs touching it whose pair term of g_1 is not submodular."""
    bad = nonsubmodular_faces(forces, 1.0)
    rows, cols = labels.shape
    counts = np.zeros(n + 1, dtype=np.int64)
    for j, k in enumerate(HALF):
        ps, qs = pair_slices(k, rows, cols)
        hit = bad[j][ps]  # False where either cell is nodata
        a = labels[ps][hit]
        b = labels[qs][hit]
        counts += np.bincount(a, minlength=n + 1)
        counts += np.bincount(np.where(b != a, b, 0), minlength=n + 1)  # a pair counts once
    counts[0] = 0
    return counts
