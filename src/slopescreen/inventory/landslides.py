"""Mapped landslides on the DEM grid: the cells an inventory says have failed.

:func:`read_inventory` reads an ``[inventory]`` file (polygons or points, any
CRS), keeps the features the scenario selects by attribute, and puts each
landslide on the grid:

* a polygon covers the cells whose centre lies inside it (GDAL's rule, as
  :func:`rasterio.features.rasterize`), or every cell it touches with
  ``all_touched``;
* a point covers the cell that holds it, and with ``point_buffer_m`` every
  cell whose centre lies within that distance of it;
* with ``score_part = "scar"`` a polygon keeps only its upper part: the cells
  whose elevation lies in the upper half of the polygon's relief on the DEM,
  ``z >= (z_min + z_max) / 2``, so that the runout deposit mapped with a scar
  does not count as a source (points are sources already and keep their cells).

Only valid DEM cells count. Each landslide keeps its own cells, so a cell
under two overlapping polygons belongs to both; the scored set is their union.

See docs/methods.md, "Agreement with mapped landslides".
"""

from __future__ import annotations

import datetime as _dt
import math
import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import InputError, InputWarning
from ..grid import Grid

__all__ = ["MIN_CELLS", "InventoryCells", "read_inventory", "landslide_cells"]

MIN_CELLS = 10
"""Fewest valid DEM cells an inventory must cover to be scored."""

KEY = "[inventory] landslides"


@dataclass(frozen=True)
class InventoryCells:
    """The landslides of an inventory on the grid.

    Attributes
    ----------
    landslide_cells : tuple of numpy.ndarray of int64
        Flat cell indices (into the grid, row-major) of the scored part of
        each landslide, valid cells only; empty for a landslide off the data.
    positive_index : numpy.ndarray of int64
        The union of those cells, sorted.
    groups : numpy.ndarray of int64
        For each cell of ``positive_index``, the first landslide (index into
        ``landslide_cells``) that holds it.
    geometries : tuple
        The selected features (shapely, DEM CRS), for the maps.
    kind : str
        ``"polygons"``, ``"points"`` or ``"polygons and points"``.
    n_features : int
        Features with a geometry in the file.
    n_selected : int
        Features kept by ``event`` and ``types``.
    n_off_dem : int
        Selected features with no valid DEM cell.
    whole_cells : int
        Cells of the union of the whole footprints (before ``score_part``).
    score_part : str
        ``"scar"`` or ``"whole"``, as applied (points are always whole).
    """

    landslide_cells: tuple
    positive_index: np.ndarray
    groups: np.ndarray
    geometries: tuple
    kind: str
    n_features: int
    n_selected: int
    n_off_dem: int
    whole_cells: int
    score_part: str

    @property
    def n_landslides(self) -> int:
        """Selected landslides with at least one valid cell."""
        return sum(1 for c in self.landslide_cells if c.size)


def read_inventory(inventory, grid: Grid, z: np.ndarray) -> InventoryCells:
    """Read an ``[inventory]`` and put its landslides on the grid (no other computation).

    Parameters
    ----------
    inventory : slopescreen.scenario.model.Inventory
    grid : Grid
    z : numpy.ndarray
        The DEM (NaN off the data), for the scar rule.

    Returns
    -------
    InventoryCells

    Raises
    ------
    InputError
        One line naming the file and the key: the file's own problems (see
        :func:`slopescreen.corridor.vector_inputs.read_features`), an attribute
        that is missing, a selection that keeps no feature, no landslide on
        a valid DEM cell, or fewer than :data:`MIN_CELLS` cells in all.
    """
    from ..corridor.vector_inputs import read_features

    inv = inventory
    name = inv.landslides.name
    columns = tuple(c for c in (inv.event_field, inv.type_field) if c is not None)
    geoms, attrs = read_features(inv.landslides, grid, kinds=("Polygon", "Point"), key=KEY,
                                 crs=inv.landslides_crs, crs_key="[inventory] landslides_crs",
                                 columns=columns)
    keep = np.ones(len(geoms), dtype=bool)
    if inv.event_field is not None:
        keep &= _matches(attrs[inv.event_field], (inv.event,))
        if not keep.any():
            raise InputError(f"{name}: [inventory] event: no feature has {inv.event_field} = "
                             f"{inv.event!r} (values in the file: "
                             f"{_some_values(attrs[inv.event_field])})")
    if inv.type_field is not None:
        chosen = keep & _matches(attrs[inv.type_field], inv.types)
        if not chosen.any():
            raise InputError(f"{name}: [inventory] types: no selected feature has "
                             f"{inv.type_field} in {list(inv.types)} (values in the file: "
                             f"{_some_values(attrs[inv.type_field][keep])})")
        keep = chosen
    selected = [g for g, k in zip(geoms, keep) if k]
    whole = [landslide_cells(g, grid, all_touched=inv.all_touched,
                             point_buffer_m=inv.point_buffer_m) for g in selected]
    polygonal = [g.geom_type in ("Polygon", "MultiPolygon") for g in selected]
    cells = tuple(_upper_part(c, z) if poly and inv.score_part == "scar" else c
                  for c, poly in zip(whole, polygonal))
    off = sum(1 for c in cells if c.size == 0)
    if off == len(cells):
        raise InputError(f"{name}: {KEY}: none of the {len(cells)} selected landslides lies on a "
                         f"valid cell of the DEM {grid.path.name}; check the file's CRS and the DEM")
    if off:
        warnings.warn(f"{name}: {KEY}: {off} of {len(cells)} selected landslides lie off the "
                      "DEM's valid cells and are not scored", InputWarning, stacklevel=2)
    positive, groups = _union(cells)
    if positive.size < MIN_CELLS:
        raise InputError(f"{name}: {KEY}: the landslides cover {positive.size} valid DEM cells; "
                         f"at least {MIN_CELLS} are needed to score the maps against them")
    kinds = {"polygons" if p else "points" for p in polygonal}
    return InventoryCells(
        landslide_cells=cells, positive_index=positive, groups=groups,
        geometries=tuple(selected), kind=" and ".join(sorted(kinds)),
        n_features=len(geoms), n_selected=len(selected), n_off_dem=off,
        whole_cells=int(_union(whole)[0].size),
        score_part=inv.score_part if any(polygonal) else "whole")


def landslide_cells(geom, grid: Grid, *, all_touched: bool = False,
                    point_buffer_m: float = 0.0) -> np.ndarray:
    """Flat indices of the valid cells a landslide polygon or point covers.

    Parameters
    ----------
    geom : shapely Polygon, MultiPolygon, Point or MultiPoint
        In the grid's CRS.
    grid : Grid
    all_touched : bool
        Polygons: every cell the polygon touches, not only those whose
        centre lies inside (:func:`rasterio.features.rasterize`).
    point_buffer_m : float
        Points: also every cell whose centre lies within this distance, m.

    Returns
    -------
    numpy.ndarray of int64
        Sorted flat (row-major) indices of valid cells.

    Examples
    --------
    >>> import shapely
    >>> grid = Grid.regular((4, 4), west=0, north=40, cell_m=10, crs="EPSG:32610")
    >>> landslide_cells(shapely.box(0, 0, 21, 12), grid).tolist()
    [12, 13]
    >>> landslide_cells(shapely.Point(15, 25), grid, point_buffer_m=10).tolist()
    [1, 4, 5, 6, 9]
    """
    kind = geom.geom_type
    if kind in ("Polygon", "MultiPolygon"):
        flat = _polygon_cells(geom, grid, all_touched)
    elif kind in ("Point", "MultiPoint"):
        points = getattr(geom, "geoms", [geom])
        flat = np.concatenate([_point_cells(p.x, p.y, grid, point_buffer_m) for p in points])
    else:
        raise TypeError(f"expected a polygon or a point, got {kind}")
    flat = np.unique(flat)
    return flat[grid.valid.reshape(-1)[flat]]


def _window(grid: Grid, minx, miny, maxx, maxy, margin: int):
    """(row0, row1, col0, col1) of the cells around a box, clipped to the grid."""
    t = grid.transform
    rows, cols = grid.shape
    cx = sorted(((minx - t.c) / t.a, (maxx - t.c) / t.a))
    ry = sorted(((miny - t.f) / t.e, (maxy - t.f) / t.e))
    c0 = max(0, math.floor(cx[0]) - margin)
    c1 = min(cols, math.ceil(cx[1]) + margin)
    r0 = max(0, math.floor(ry[0]) - margin)
    r1 = min(rows, math.ceil(ry[1]) + margin)
    return r0, r1, c0, c1


def _polygon_cells(geom, grid: Grid, all_touched: bool) -> np.ndarray:
    from affine import Affine
    from rasterio.features import rasterize

    r0, r1, c0, c1 = _window(grid, *geom.bounds, margin=1)
    if r1 <= r0 or c1 <= c0:
        return np.zeros(0, dtype=np.int64)
    mask = rasterize([(geom, 1)], out_shape=(r1 - r0, c1 - c0),
                     transform=grid.transform @ Affine.translation(c0, r0),
                     all_touched=all_touched, fill=0, dtype="uint8")
    rr, cc = np.nonzero(mask)
    return (rr.astype(np.int64) + r0) * grid.shape[1] + cc + c0


def _point_cells(x: float, y: float, grid: Grid, buffer_m: float) -> np.ndarray:
    t = grid.transform
    rows, cols = grid.shape
    col = math.floor((x - t.c) / t.a)
    row = math.floor((y - t.f) / t.e)
    out = [row * cols + col] if 0 <= row < rows and 0 <= col < cols else []
    if buffer_m > 0:
        r = buffer_m / grid.linear_unit_m
        r0, r1, c0, c1 = _window(grid, x - r, y - r, x + r, y + r, margin=1)
        rr, cc = np.mgrid[r0:r1, c0:c1]
        xc = t.c + (cc + 0.5) * t.a
        yc = t.f + (rr + 0.5) * t.e
        near = (xc - x) ** 2 + (yc - y) ** 2 <= r * r
        out = np.concatenate([np.asarray(out, dtype=np.int64),
                              (rr[near].astype(np.int64) * cols + cc[near])])
    return np.asarray(out, dtype=np.int64)


def _upper_part(cells: np.ndarray, z: np.ndarray) -> np.ndarray:
    """The cells in the upper half of the landslide's relief (all of a one-level landslide)."""
    if cells.size == 0:
        return cells
    h = z.reshape(-1)[cells].astype(np.float64)
    lo, hi = float(h.min()), float(h.max())
    return cells[h >= 0.5 * (lo + hi)]


def _union(cells) -> tuple[np.ndarray, np.ndarray]:
    """Sorted union of the landslides' cells, and the first landslide holding each."""
    if not cells:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    flat = np.concatenate(cells)
    owner = np.repeat(np.arange(len(cells), dtype=np.int64), [c.size for c in cells])
    union, first = np.unique(flat, return_index=True)
    return union.astype(np.int64), owner[first]


def _text(value) -> str | None:
    """An attribute value as comparable text (dates as YYYY-MM-DD, 2021.0 as 2021)."""
    if value is None:
        return None
    if isinstance(value, float):
        if math.isnan(value):
            return None
        if value.is_integer():
            return str(int(value))
    if isinstance(value, np.datetime64):
        return None if np.isnat(value) else str(value.astype("datetime64[D]"))
    if isinstance(value, (_dt.datetime, _dt.date)):
        return value.isoformat()[:10]
    return str(value).strip()


def _matches(values, wanted) -> np.ndarray:
    """Features whose attribute equals one of ``wanted`` (case and edge blanks ignored)."""
    want = {w.strip().casefold() for w in wanted}
    out = []
    for v in values:
        text = _text(v)
        out.append(text is not None and text.casefold() in want)
    return np.array(out, dtype=bool)


def _some_values(values, n: int = 5) -> str:
    seen = []
    for v in values:
        text = _text(v)
        if text is not None and text not in seen:
            seen.append(text)
    if not seen:
        return "none"
    more = f", ... ({len(seen)} in all)" if len(seen) > n else ""
    return ", ".join(repr(s) for s in seen[:n]) + more
