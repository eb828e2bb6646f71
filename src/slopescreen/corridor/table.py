"""The corridor segment table: per segment and rain case, what reaches it and how much.

For each segment of the centreline (docs/methods.md, "Corridor segments and
strips") and each rain case, the row gathers the failure sources whose
runout reaches the segment's strip (docs/methods.md, "Runout reach"), the
stability of the strip itself, and the hazard: the expected volume of failed
soil that reaches the segment, the sum over reaching sources of P_f x volume
(m^3), where a source without a probability of failure counts with P_f = 1.
"""

from __future__ import annotations

import numpy as np

CORRIDOR_FIELDS = (
    "segment", "from_m", "to_m", "rain", "reached", "sources", "max_source_area_m2",
    "max_source_volume_m3", "min_source_fs", "max_source_failure_probability",
    "area_fs_below_1_m2", "max_failure_probability", "min_critical_recharge_mm_per_day",
    "nearest_source_m", "engineered_ground_m2", "hazard", "hazard_rank")
"""Columns of ``corridor_segments`` (CSV and GeoPackage), in order; units in the names,
``hazard`` in m^3. Empty (CSV) or NaN (GeoPackage) where a value does not exist."""

FAILS_DRY = 1
"""Critical-recharge class of a cell that fails even when dry (its rate counts as 0)."""

STABLE_SATURATED = 3
"""Critical-recharge class of a cell that is stable even when saturated (no rate)."""


def _reduce(fn, index, values, n, init):
    out = np.full(n, init, dtype=np.float64)
    if index.size:
        fn.at(out, index, values)
    return out


def strip_recharge(q_cr_mm_per_day, stability_class):
    """Critical recharge as the corridor table counts it: 0 where a cell fails even when dry.

    Cells stable even when saturated, and nodata, have no rate (NaN).

    Examples
    --------
    >>> import numpy as np
    >>> strip_recharge(np.array([np.nan, 12.0, np.nan, np.nan]), np.array([1, 2, 3, 0]))
    array([ 0., 12., nan, nan])
    """
    q = np.asarray(q_cr_mm_per_day, dtype=np.float64)
    k = np.asarray(stability_class)
    return np.where(k == FAILS_DRY, 0.0, np.where(k == STABLE_SATURATED, np.nan, q))


def nearest_distances(lines, points_xy, *, spacing, unit_m=1.0) -> np.ndarray:
    """Least horizontal distance from each line to any of the points, m (NaN without points).

    The lines are sampled every ``spacing`` (CRS units) to find the nearest
    points through a k-d tree (scipy); the distance of each candidate is then
    exact (shapely), so the answer is the exact least distance.

    Examples
    --------
    >>> import numpy as np, shapely
    >>> line = shapely.LineString([(0, 0), (100, 0)])
    >>> nearest_distances([line], np.array([[50.0, 30.0], [150.0, 0.0]]), spacing=1.0).tolist()
    [30.0]
    """
    import shapely
    from scipy.spatial import cKDTree

    out = np.full(len(lines), np.nan)
    pts = np.asarray(points_xy, dtype=np.float64).reshape(-1, 2)
    if pts.shape[0] == 0:
        return out
    tree = cKDTree(pts)
    for i, line in enumerate(lines):
        n = max(int(np.ceil(line.length / spacing)), 1)
        samples = shapely.get_coordinates(
            shapely.line_interpolate_point(line, np.linspace(0.0, line.length, n + 1)))
        d, _ = tree.query(samples)
        reach = float(d.min()) + spacing
        near = sorted(set(j for group in tree.query_ball_point(samples, reach) for j in group))
        exact = shapely.distance(line, shapely.points(pts[near]))
        out[i] = float(exact.min()) * unit_m
    return out


def segment_rows(segments, *, rain, sources, reach, factor_of_safety, cell_area_m2,
                 failure_probability=None, recharge=None, engineered=None, grid=None) -> list:
    """Rows of the corridor table for one rain case.

    Parameters
    ----------
    segments : slopescreen.corridor.segments.Segments
        Segments and their strip cells (flat indices).
    rain : str
        Rain case name.
    sources : slopescreen.runout.Sources
    reach : slopescreen.runout.Reach
        ``pair_source``/``pair_segment``: which sources reach which strips.
    factor_of_safety : numpy.ndarray, shape (rows, cols)
    cell_area_m2 : float
    failure_probability : numpy.ndarray, optional
    recharge : numpy.ndarray, optional
        :func:`strip_recharge` per cell.
    engineered : numpy.ndarray of bool, optional
        Cut and fill cells.
    grid : slopescreen.grid.Grid, optional
        For ``nearest_source_m`` (NaN without it).

    Returns
    -------
    list of dict
        One row per segment on the DEM, keys :data:`CORRIDOR_FIELDS`; ``segment``
        numbers from 1 along the chainage.
    """
    n = segments.from_m.size
    seg = segments.segment.astype(np.int64)
    cell = segments.cell
    fs = np.asarray(factor_of_safety).reshape(-1)[cell].astype(np.float64)
    below = np.bincount(seg, weights=(fs < 1.0).astype(np.float64), minlength=n) * cell_area_m2
    nan = np.nan
    if failure_probability is not None:
        pf = np.asarray(failure_probability).reshape(-1)[cell].astype(np.float64)
        max_pf = _reduce(np.fmax, seg, pf, n, nan)
    else:
        max_pf = np.full(n, nan)
    if recharge is not None:
        q = np.asarray(recharge).reshape(-1)[cell]
        min_q = _reduce(np.fmin, seg, q, n, nan)
    else:
        min_q = np.full(n, nan)
    eng = (np.zeros(n) if engineered is None else np.bincount(
        seg, weights=np.asarray(engineered).reshape(-1)[cell].astype(np.float64),
        minlength=n) * cell_area_m2)
    k, g = reach.pair_source.astype(np.int64), reach.pair_segment.astype(np.int64)
    count = np.bincount(g, minlength=n)
    max_area = _reduce(np.fmax, g, sources.area_m2[k], n, nan)
    max_vol = _reduce(np.fmax, g, sources.volume_m3[k], n, nan)
    min_fs = _reduce(np.fmin, g, sources.fs[k], n, nan)
    max_spf = _reduce(np.fmax, g, sources.failure_probability[k], n, nan)
    hazard = np.bincount(g, weights=sources.hazard_probability()[k] * sources.volume_m3[k],
                         minlength=n)
    nearest = np.full(n, nan)
    if grid is not None and len(sources):
        r, c = np.divmod(sources.cell_indices(), grid.shape[1])
        x, y = grid.transform * (c + 0.5, r + 0.5)
        nearest = nearest_distances(segments.lines, np.column_stack([x, y]),
                                    spacing=min(grid.dx_m, grid.dy_m) / grid.linear_unit_m / 2,
                                    unit_m=grid.linear_unit_m)
    keep = np.flatnonzero(segments.on_dem)
    rank_key = np.lexsort((segments.from_m[keep], -below[keep],
                           -np.nan_to_num(max_pf[keep], nan=-1.0), -hazard[keep]))
    rank = np.empty(keep.size, dtype=np.int64)
    rank[rank_key] = np.arange(1, keep.size + 1)
    rows = []
    for j, i in enumerate(keep):
        rows.append({
            "segment": int(i) + 1, "from_m": float(segments.from_m[i]),
            "to_m": float(segments.to_m[i]), "rain": rain, "reached": int(count[i] > 0),
            "sources": int(count[i]), "max_source_area_m2": float(max_area[i]),
            "max_source_volume_m3": float(max_vol[i]), "min_source_fs": float(min_fs[i]),
            "max_source_failure_probability": float(max_spf[i]),
            "area_fs_below_1_m2": float(below[i]), "max_failure_probability": float(max_pf[i]),
            "min_critical_recharge_mm_per_day": float(min_q[i]),
            "nearest_source_m": float(nearest[i]), "engineered_ground_m2": float(eng[i]),
            "hazard": float(hazard[i]), "hazard_rank": int(rank[j])})
    return rows


def rows_csv(rows, caution: str = "") -> bytes:
    """The rows as CSV text (UTF-8; the caution as a first ``#`` line, then a header line;
    numbers to 4 decimals, empty where a value is NaN).

    Examples
    --------
    >>> rows_csv([{"segment": 1, "hazard": float("nan")}]).decode()
    'segment,hazard\\r\\n1,\\r\\n'
    """
    import csv
    import io

    buf = io.StringIO()
    if caution:
        buf.write("# " + " ".join(caution.split()) + "\r\n")
    names = list(rows[0]) if rows else list(CORRIDOR_FIELDS)
    writer = csv.writer(buf)
    writer.writerow(names)
    for row in rows:
        writer.writerow(["" if isinstance(v, float) and v != v else
                         (repr(round(v, 4)) if isinstance(v, float) else v)
                         for v in row.values()])
    return buf.getvalue().encode("utf-8")
