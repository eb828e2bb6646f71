"""One-pass counts over whole products for the report's figures (numba).

The report quotes areas and shares of a rain case (cells failing, by soil
unit, by compass sector, saturated; cells in each FS band) and of the
critical recharge (cells per class, failing at each steady rate). Counting
each with its own numpy mask costs a pass and a boolean temporary per
condition; these kernels count every condition of one product in a single
pass and allocate nothing of the grid's size.

Every comparison is made in float64 (a float32 value is widened exactly), so
the counts equal those of the float64 numpy expressions they replace.
"""

import math

import numpy as np

from .._numba import njit


@njit
def _band_counts_kernel(values, edges, counts):
    """counts[b] += 1 for every finite value with exactly b edges at or below it."""
    n_edges = edges.size
    for i in range(values.size):
        v = np.float64(values[i])
        if math.isnan(v):
            continue
        b = 0
        for e in range(n_edges):
            if v >= edges[e]:
                b += 1
        counts[b] += 1


@njit
def _case_counts_kernel(fs, pf, wet, aspect, unit, unit_counts, sector_counts, out):
    """Counts of one rain case in one pass.

    ``pf``, ``wet``, ``aspect`` and ``unit`` are empty when not given. ``out``
    receives [cells with FS, cells with FS < 1, cells with P_f, cells with
    P_f >= 0.5, failing cells with wetness >= 0.999, cells with P_f >= 0.1]. ``unit_counts`` and
    ``sector_counts`` count the failing cells per unit row (rows outside the
    table are not counted) and per 45-degree sector of finite aspect.
    """
    has_pf = pf.size > 0
    has_wet = wet.size > 0
    has_aspect = aspect.size > 0
    has_unit = unit.size > 0
    n_units = unit_counts.size
    for i in range(fs.size):
        if has_pf:
            p = np.float64(pf[i])
            if not math.isnan(p):
                out[2] += 1
                if p >= 0.5:
                    out[3] += 1
                if p >= 0.1:
                    out[5] += 1
        f = np.float64(fs[i])
        if math.isnan(f):
            continue
        out[0] += 1
        if f >= 1.0:
            continue
        out[1] += 1
        if has_wet and np.float64(wet[i]) >= 0.999:
            out[4] += 1
        if has_unit:
            u = unit[i]
            if 0 <= u < n_units:
                unit_counts[u] += 1
        if has_aspect:
            a = np.float64(aspect[i])
            if not math.isnan(a):
                s = 0
                for k in range(8):
                    if a >= 22.5 + 45.0 * k:
                        s += 1
                sector_counts[s % 8] += 1


@njit
def _recharge_counts_kernel(q, classes, rates, class_counts, rate_counts, out):
    """Counts of the critical recharge in one pass.

    ``class_counts[c]`` counts cells of class c (0..3); for each steady rate r,
    ``rate_counts[j]`` counts class-2 cells with a finite q below r. ``out``
    receives [class-2 cells with a finite q, cells with a finite q].
    """
    n_rates = rates.size
    for i in range(q.size):
        c = classes[i]
        if 0 <= c <= 3:
            class_counts[c] += 1
        v = np.float64(q[i])
        if math.isnan(v):
            continue
        out[1] += 1
        if c != 2:
            continue
        out[0] += 1
        for j in range(n_rates):
            if v < rates[j]:
                rate_counts[j] += 1


@njit
def _edge_cells_kernel(values):
    """Cells with a value and at least one of their 8 neighbours without (or off the grid)."""
    rows, cols = values.shape
    n = 0
    for r in range(rows):
        for c in range(cols):
            if math.isnan(np.float64(values[r, c])):
                continue
            if r == 0 or c == 0 or r == rows - 1 or c == cols - 1:
                n += 1
                continue
            edge = False
            for dr in range(-1, 2):
                for dc in range(-1, 2):
                    if math.isnan(np.float64(values[r + dr, c + dc])):
                        edge = True
            if edge:
                n += 1
    return n


def edge_cells(values) -> int:
    """Cells with a value that touch a data edge: a neighbour of the 3 x 3 window is missing.

    These are the cells whose Horn slope comes from the one-sided plane fit
    (docs/methods.md, "Slope").

    Examples
    --------
    >>> import numpy as np
    >>> v = np.ones((4, 5), dtype=np.float32)
    >>> edge_cells(v), v.size - 2 * 3           # all but the 2 x 3 interior
    (14, 14)
    >>> v[2, 2] = np.nan
    >>> edge_cells(v)                           # the hole's 5 neighbours join the edge
    19
    """
    v = np.asarray(values)
    if v.ndim != 2:
        raise ValueError(f"edge_cells: a 2-D grid is needed, got shape {v.shape}")
    if not np.issubdtype(v.dtype, np.floating):
        v = v.astype(np.float64)
    return int(_edge_cells_kernel(v))


def band_counts(values, edges) -> np.ndarray:
    """Finite values per band of ``edges`` (band b: b edges at or below the value), int64.

    Examples
    --------
    >>> import numpy as np
    >>> band_counts(np.array([0.5, 1.0, 1.35, 2.0, np.nan], dtype=np.float32), [1.0, 1.3, 1.5]).tolist()
    [1, 1, 1, 1]
    """
    v = _flat(values)
    e = np.asarray(edges, dtype=np.float64)
    counts = np.zeros(e.size + 1, dtype=np.int64)
    _band_counts_kernel(v, e, counts)
    return counts


def case_counts(fs, *, pf=None, wetness=None, aspect_deg=None, unit_index=None, n_units=0):
    """(out, unit_counts, sector_counts) of :func:`_case_counts_kernel` for one rain case.

    Examples
    --------
    >>> import numpy as np
    >>> out, units, sectors = case_counts(np.array([0.8, 2.0, 0.9, 1.1]),
    ...                                   aspect_deg=np.array([10.0, 0.0, 200.0, 0.0]))
    >>> out.tolist(), sectors.tolist()
    ([4, 2, 0, 0, 0, 0], [1, 0, 0, 0, 1, 0, 0, 0])
    """
    f = _flat(fs)
    out = np.zeros(6, dtype=np.int64)
    unit_counts = np.zeros(max(int(n_units), 0), dtype=np.int64)
    sector_counts = np.zeros(8, dtype=np.int64)
    _case_counts_kernel(f, _flat_or_empty(pf, f.size), _flat_or_empty(wetness, f.size),
                        _flat_or_empty(aspect_deg, f.size),
                        _flat_or_empty(unit_index, f.size, np.int8),
                        unit_counts, sector_counts, out)
    return out, unit_counts, sector_counts


def recharge_counts(q_cr, classes, rates):
    """(class_counts, rate_counts, out) of :func:`_recharge_counts_kernel`.

    Examples
    --------
    >>> import numpy as np
    >>> c, r, out = recharge_counts(np.array([np.nan, 4.0, 9.0]), np.array([1, 2, 2]), [5.0])
    >>> c.tolist(), r.tolist(), out.tolist()
    ([0, 1, 2, 0], [1], [2, 2])
    """
    q = _flat(q_cr)
    c = _flat_or_empty(classes, q.size, np.int8)
    if c.size != q.size:
        raise ValueError(f"classes: {c.size} cells, the critical recharge has {q.size}")
    r = np.asarray(rates, dtype=np.float64).ravel()
    class_counts = np.zeros(4, dtype=np.int64)
    rate_counts = np.zeros(r.size, dtype=np.int64)
    out = np.zeros(2, dtype=np.int64)
    _recharge_counts_kernel(q, c, r, class_counts, rate_counts, out)
    return class_counts, rate_counts, out


def _flat(values) -> np.ndarray:
    """A float array as a flat view where possible (float32 stays float32)."""
    v = np.asarray(values)
    if not (np.issubdtype(v.dtype, np.floating) or np.issubdtype(v.dtype, np.integer)):
        v = v.astype(np.float64)
    return v.reshape(-1)


def _flat_or_empty(values, size, empty_dtype=np.float32) -> np.ndarray:
    if values is None:
        return np.empty(0, dtype=empty_dtype)
    v = _flat(values)
    if v.size != size:
        raise ValueError(f"an array of {v.size} cells beside a product of {size}")
    return v
