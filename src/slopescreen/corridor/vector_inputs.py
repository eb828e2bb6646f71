"""User vector files (centrelines, points, polygons) read onto the DEM grid.

A corridor run reads vector files that the user drew: a road or pipeline
centreline, and possibly points and polygons. :func:`read_vector` reads every
feature of a file's first layer (GeoJSON or GeoPackage, through GDAL's OGR with
pyogrio, without geopandas), checks the geometry family and brings the
coordinates into the DEM's CRS. The other functions put what was read on the
grid: :func:`chain_lines` makes one centreline of the line features,
:func:`outside_length` measures how much of it lies off the data,
:func:`polygon_mask` and :func:`point_cells` give the cells of polygons and
points.

Every problem with a file is an :class:`~slopescreen.errors.InputError` of one
line that names the file and the scenario key it came from, for example
``road.geojson: [corridor] centreline: holds no features``.

Coordinates are reprojected with pyproj (``Transformer``, ``always_xy``),
vertex by vertex: a straight edge of
the file stays a straight edge between the reprojected vertices. Z and M values
are dropped.

See docs/methods.md, "Corridor segments and strips".
"""

from __future__ import annotations

import logging
import math
import warnings
from pathlib import Path

import numpy as np

from ..errors import InputError, InputWarning
from ..grid import Grid

__all__ = ["read_vector", "read_features", "chain_lines", "outside_length", "polygon_mask", "point_cells"]

log = logging.getLogger(__name__)

_FAMILIES = {
    "Point": ("Point", "MultiPoint"),
    "LineString": ("LineString", "MultiLineString"),
    "Polygon": ("Polygon", "MultiPolygon"),
}
"""Geometry types accepted for each family named in ``kinds``."""


def read_vector(path, grid: Grid, *, kinds, key: str, crs: str | None = None,
                crs_key: str | None = None) -> list:
    """Read every feature of a vector file's first layer, in the DEM's CRS.

    The geometries of :func:`read_features` without attributes.

    Parameters
    ----------
    path : str or os.PathLike
        GeoJSON or GeoPackage file (any single-file format GDAL's OGR reads).
        Only the first layer is read (with an
        :class:`~slopescreen.errors.InputWarning` when there are more).
    grid : Grid
        The DEM grid; its CRS is the CRS of the returned geometries.
    kinds : tuple of str
        Accepted geometry families, from ``"Point"``, ``"LineString"`` and
        ``"Polygon"``; each family also accepts its multi-part type
        (``("LineString",)`` accepts LineString and MultiLineString).
    key : str
        The scenario key that named the file (e.g. ``"[corridor] centreline"``),
        quoted in every message.
    crs : str, optional
        CRS of the coordinates (anything :meth:`rasterio.crs.CRS.from_user_input`
        reads, e.g. ``"EPSG:32610"``). Used only when the file declares no CRS;
        when it declares one, the file's CRS is used and a different ``crs``
        is ignored with an :class:`~slopescreen.errors.InputWarning`.
    crs_key : str, optional
        The scenario key of ``crs`` (e.g. ``"[corridor] centreline_crs"``),
        named in the message when a CRS is missing or unknown.

    Returns
    -------
    list of shapely geometries
        One 2-D geometry per non-empty feature, in file order, in ``grid.crs``.
        Features with a null or empty geometry are skipped.

    Raises
    ------
    InputError
        The path is missing, a folder or not a readable vector file; the layer
        holds no features or only empty geometries; a feature has a geometry
        type outside ``kinds``; the file has no CRS and ``crs`` is not given;
        ``crs`` is unknown; coordinates are not finite, cannot be reprojected,
        or lie outside longitude/latitude in a geographic CRS.

    Notes
    -----
    A GeoJSON file without a ``"crs"`` member is read by GDAL as WGS 84
    longitude/latitude (as the GeoJSON standard says). Projected coordinates
    in such a file are reported as lying outside longitude/latitude.

    Examples
    --------
    >>> import json, tempfile
    >>> from pathlib import Path
    >>> grid = Grid.regular((10, 10), west=500000, north=5000100, cell_m=10, crs="EPSG:32610")
    >>> line = {"type": "LineString", "coordinates": [[500005, 5000005], [500095, 5000095]]}
    >>> doc = {"type": "FeatureCollection",
    ...        "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32610"}},
    ...        "features": [{"type": "Feature", "properties": {}, "geometry": line}]}
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = Path(folder) / "road.geojson"
    ...     _ = path.write_text(json.dumps(doc))
    ...     geoms = read_vector(path, grid, kinds=("LineString",), key="[corridor] centreline")
    >>> geoms[0].wkt
    'LINESTRING (500005 5000005, 500095 5000095)'
    """
    return read_features(path, grid, kinds=kinds, key=key, crs=crs, crs_key=crs_key)[0]


def read_features(path, grid: Grid, *, kinds, key: str, crs: str | None = None,
                  crs_key: str | None = None, columns=()) -> tuple[list, dict]:
    """Geometries and named attributes of every feature of a file's first layer.

    Parameters are those of :func:`read_vector`, and:

    columns : sequence of str
        Attribute names to read; each must exist in the layer.

    Returns
    -------
    geometries : list of shapely geometries
        As :func:`read_vector` returns them (empty features skipped).
    attributes : dict
        Name -> numpy array of the values of the returned features, in order.

    Raises
    ------
    InputError
        As :func:`read_vector`, and when a named attribute is not in the layer
        (the message lists those that are).

    Examples
    --------
    >>> import json, tempfile
    >>> from pathlib import Path
    >>> grid = Grid.regular((10, 10), west=500000, north=5000100, cell_m=10, crs="EPSG:32610")
    >>> point = {"type": "Point", "coordinates": [500005, 5000005]}
    >>> doc = {"type": "FeatureCollection",
    ...        "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32610"}},
    ...        "features": [{"type": "Feature", "properties": {"event": "2021 storm"},
    ...                      "geometry": point}]}
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = Path(folder) / "slides.geojson"
    ...     _ = path.write_text(json.dumps(doc))
    ...     geoms, attrs = read_features(path, grid, kinds=("Point",), key="[inventory] landslides",
    ...                                  columns=("event",))
    >>> attrs["event"].tolist()
    ['2021 storm']
    """
    import shapely
    from rasterio.crs import CRS
    from rasterio.errors import CRSError

    path = Path(path)
    where = f"{path.name}: {key}"
    accepted = _accepted_types(kinds)
    geoms, file_crs, table = _read_first_layer(path, where, tuple(columns))
    if not geoms:
        raise InputError(f"{where}: holds no features; draw the features and save the file again")
    kept = [(i, g) for i, g in enumerate(geoms) if g is not None and not g.is_empty]
    if not kept:
        raise InputError(f"{where}: holds {len(geoms)} features but every geometry is empty")
    for i, g in kept:
        if g.geom_type not in accepted:
            raise InputError(f"{where}: feature {i + 1} of {len(geoms)} is a {g.geom_type}; "
                             f"expected {' or '.join(accepted)}")
    if len(kept) < len(geoms):
        log.info("%s: %d features with an empty geometry skipped", where, len(geoms) - len(kept))
    out = shapely.force_2d(np.array([g for _, g in kept], dtype=object))
    rows = np.array([i for i, _ in kept], dtype=np.int64)
    table = {name: values[rows] for name, values in table.items()}

    named = None
    if crs is not None:
        try:
            named = CRS.from_user_input(crs)
        except CRSError:
            raise InputError(f"{path.name}: {crs_key or 'CRS'}: unknown CRS {crs!r}; give an "
                             "EPSG code such as \"EPSG:32610\"") from None
    if file_crs is not None:
        try:
            source = CRS.from_user_input(file_crs)
        except CRSError:
            raise InputError(f"{where}: the file's CRS cannot be read; save the file with an "
                             "EPSG CRS") from None
        if named is not None and named != source:
            warnings.warn(f"{where}: the file declares its CRS ({source.to_string()}); "
                          f"{crs_key or 'the CRS given'} = {crs!r} is ignored",
                          InputWarning, stacklevel=2)
    elif named is not None:
        source = named
    else:
        hint = f"add {crs_key} = \"EPSG:...\" to the scenario" if crs_key else "give its CRS"
        raise InputError(f"{where}: the file has no coordinate reference system; {hint} "
                         "or save the file with its CRS")

    xy = shapely.get_coordinates(out)
    if not np.isfinite(xy).all():
        raise InputError(f"{where}: holds coordinates that are not finite numbers")
    if source.is_geographic and (np.abs(xy[:, 0]).max() > 360.0 or np.abs(xy[:, 1]).max() > 90.0):
        raise InputError(f"{where}: the file's CRS {source.to_string()} is longitude/latitude but "
                         "its coordinates are not (a GeoJSON file without a \"crs\" member is read "
                         "as WGS 84); save the file with its projected CRS")
    if source != grid.crs:
        out = _reprojected(out, source, grid.crs, where)
    return list(out), table


def _accepted_types(kinds) -> tuple:
    if isinstance(kinds, str):
        kinds = (kinds,)
    unknown = [k for k in kinds if k not in _FAMILIES]
    if unknown or not kinds:
        raise ValueError(f"kinds: expected names from {sorted(_FAMILIES)}, got {kinds!r}")
    return tuple(t for k in kinds for t in _FAMILIES[k])


def _read_first_layer(path: Path, where: str, columns=()) -> tuple[list, str | None, dict]:
    """Geometries (None where null), CRS text and named attributes of the first layer."""
    import shapely
    from pyogrio import list_layers
    from pyogrio.errors import DataLayerError, DataSourceError
    from pyogrio.raw import read

    if path.is_dir():
        raise InputError(f"{where}: is a folder, not a vector file; name the GeoJSON or "
                         "GeoPackage file")
    if not path.is_file():
        raise InputError(f"{where}: file not found")
    try:
        layers = list_layers(str(path))
        meta, _fids, geometry, values = read(str(path), layer=0, columns=list(columns))
    except (DataSourceError, DataLayerError, OSError) as exc:
        raise InputError(f"{where}: cannot be read as a vector file ({_short(exc)}); "
                         "use GeoJSON or GeoPackage") from None
    if len(layers) > 1:
        warnings.warn(f"{where}: the file holds {len(layers)} layers; only the first, "
                      f"{str(layers[0][0])!r}, is read (save the features in a file of their own)",
                      InputWarning, stacklevel=3)
    if geometry is None:
        raise InputError(f"{where}: the first layer has no geometry column")
    names = [str(f) for f in meta.get("fields", [])]
    missing = [c for c in columns if c not in names]
    if missing:
        have = ", ".join(names) if names else "none"
        raise InputError(f"{where}: has no attribute {missing[0]!r} (its attributes: {have})")
    geoms = [None if g is None else shapely.from_wkb(g) for g in geometry]
    table = {name: np.asarray(values[names.index(name)], dtype=object) for name in columns}
    return geoms, meta.get("crs"), table


def _short(exc) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return text if len(text) < 160 else text[:157] + "..."


def _reprojected(geoms: np.ndarray, source, target, where: str) -> np.ndarray:
    """``geoms`` with every vertex moved from CRS ``source`` to ``target``."""
    import shapely
    from pyproj import Transformer
    from pyproj.exceptions import ProjError

    try:
        transformer = Transformer.from_crs(source.to_wkt(), target.to_wkt(), always_xy=True)
    except ProjError as exc:
        raise InputError(f"{where}: cannot be reprojected from {source.to_string()} to the DEM's "
                         f"{target.to_string()} ({_short(exc)})") from None

    def move(xy):
        x, y = transformer.transform(xy[:, 0], xy[:, 1])
        return np.column_stack([np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64)])

    try:
        out = shapely.transform(geoms, move)
    except ProjError as exc:
        raise InputError(f"{where}: cannot be reprojected from {source.to_string()} to the DEM's "
                         f"{target.to_string()} ({_short(exc)})") from None
    if not np.isfinite(shapely.get_coordinates(out)).all():
        raise InputError(f"{where}: some vertices have no position in the DEM's CRS "
                         f"{target.to_string()} (reprojected from {source.to_string()}); "
                         "check the file's CRS")
    log.info("%s: reprojected from %s to %s", where, source.to_string(), target.to_string())
    return out


def chain_lines(geoms, *, label: str = "line"):
    """The line parts of all features, in file order, as one MultiLineString.

    Parts are neither joined nor reversed: chainage starts at the first vertex
    of the first part and runs along each part in turn; the gaps between parts
    are not counted, so the length of the result is the sum of the lengths of
    its parts (shapely ``length``). A MultiLineString feature contributes its
    parts in their order. Parts of zero length are dropped.

    Parameters
    ----------
    geoms : sequence of shapely LineString or MultiLineString
        Features in file order (as :func:`read_vector` returns them).
    label : str
        What the line is, for the message (e.g. ``"road.geojson: [corridor]
        centreline"``).

    Returns
    -------
    shapely.MultiLineString

    Raises
    ------
    InputError
        If no part has a positive length.
    TypeError
        If a geometry is not a LineString or MultiLineString.

    Examples
    --------
    >>> import shapely
    >>> a = shapely.LineString([(0, 0), (3, 4)])
    >>> b = shapely.MultiLineString([[(10, 0), (10, 0)], [(10, 0), (10, 2)]])
    >>> line = chain_lines([a, b])
    >>> len(line.geoms), line.length
    (2, 7.0)
    """
    import shapely

    parts = []
    for g in geoms:
        if g.geom_type == "LineString":
            parts.append(g)
        elif g.geom_type == "MultiLineString":
            parts.extend(g.geoms)
        else:
            raise TypeError(f"{label}: expected LineString or MultiLineString, got {g.geom_type}")
    parts = [p for p in parts if not p.is_empty and p.length > 0.0]
    if not parts:
        raise InputError(f"{label}: has zero length; draw the line with at least two distinct "
                         "vertices")
    return shapely.MultiLineString(parts)


def _line_parts(line) -> list[np.ndarray]:
    """Vertex arrays (n, 2) of the parts of a LineString or MultiLineString, in order."""
    import shapely

    if line.geom_type == "LineString":
        parts = [line]
    elif line.geom_type == "MultiLineString":
        parts = list(line.geoms)
    else:
        raise TypeError(f"expected LineString or MultiLineString, got {line.geom_type}")
    return [shapely.get_coordinates(p) for p in parts if not p.is_empty]


def _cumulative(xy: np.ndarray) -> np.ndarray:
    """Distance from the first vertex to each vertex along the part (CRS units)."""
    steps = np.hypot(np.diff(xy[:, 0]), np.diff(xy[:, 1]))
    return np.concatenate([[0.0], np.cumsum(steps)])


def _points_at(xy: np.ndarray, cum: np.ndarray, t: np.ndarray) -> np.ndarray:
    """Points (m, 2) at distances ``t`` along the part with vertices ``xy`` (clamped to it)."""
    t = np.asarray(t, dtype=np.float64)
    i = np.clip(np.searchsorted(cum, t, side="right") - 1, 0, len(cum) - 2)
    step = cum[i + 1] - cum[i]
    frac = np.divide(t - cum[i], step, out=np.zeros_like(t), where=step > 0)
    pts = xy[i] + frac[:, None] * (xy[i + 1] - xy[i])
    pts[t <= 0.0] = xy[0]
    pts[t >= cum[-1]] = xy[-1]
    return pts


def _cells_of(grid: Grid, x, y):
    """(row, col, on_grid) of the cells holding map points (x, y)."""
    t = grid.transform
    col = np.floor((np.asarray(x, dtype=np.float64) - t.c) / t.a)
    row = np.floor((np.asarray(y, dtype=np.float64) - t.f) / t.e)
    rows, cols = grid.shape
    on = (row >= 0) & (row < rows) & (col >= 0) & (col < cols)
    return np.where(on, row, 0).astype(np.int64), np.where(on, col, 0).astype(np.int64), on


def outside_length(line, grid: Grid, *, start_chainage_m: float = 0.0) -> tuple[float, float | None]:
    """Length of a line over nodata cells or off the raster, and where it first leaves the data.

    Each part is cut into intervals of ``min(cell width, cell height) / 4``
    (the last interval of a part shorter) and each interval is judged by the
    cell holding its midpoint. The result is therefore accurate to the sample
    spacing: each crossing of the data's edge moves the length by at most half
    a spacing and the first chainage by at most half a spacing.

    Parameters
    ----------
    line : shapely LineString or MultiLineString
        In the grid's CRS (as :func:`chain_lines` returns it).
    grid : Grid
    start_chainage_m : float
        Chainage of the line's first vertex, m.

    Returns
    -------
    length_outside_m : float
        Length of the line off the valid cells, m (CRS length times
        ``grid.linear_unit_m``).
    first_chainage_m : float or None
        Chainage at which the line first lies off the valid cells, m;
        None when it never does.

    Examples
    --------
    >>> import shapely
    >>> grid = Grid.regular((10, 10), west=0, north=100, cell_m=10, crs="EPSG:32610")
    >>> outside_length(shapely.LineString([(50, 50), (130, 50)]), grid)
    (30.0, 50.0)
    """
    unit = float(grid.linear_unit_m)
    spacing = min(abs(grid.transform.a), abs(grid.transform.e)) / 4.0
    outside = 0.0
    first = None
    offset = 0.0
    for xy in _line_parts(line):
        cum = _cumulative(xy)
        length = float(cum[-1])
        if length <= 0.0:
            continue
        n = max(1, math.ceil(length / spacing))
        edges = np.minimum(np.arange(n + 1, dtype=np.float64) * spacing, length)
        edges[-1] = length
        mid = _points_at(xy, cum, 0.5 * (edges[:-1] + edges[1:]))
        rows, cols, on = _cells_of(grid, mid[:, 0], mid[:, 1])
        off = ~(on & grid.valid[rows, cols])
        if off.any():
            outside += float(np.diff(edges)[off].sum())
            if first is None:
                first = offset + float(edges[np.argmax(off)])
        offset += length
    return outside * unit, (None if first is None else start_chainage_m + first * unit)


def polygon_mask(geoms, grid: Grid) -> np.ndarray:
    """Cells whose centre lies inside any of the polygons.

    Parameters
    ----------
    geoms : sequence of shapely Polygon or MultiPolygon
        In the grid's CRS (as :func:`read_vector` returns them).
    grid : Grid

    Returns
    -------
    numpy.ndarray of bool, shape ``grid.shape``
        True at cells whose centre is inside a polygon (GDAL's rasterisation
        rule, :func:`rasterio.features.geometry_mask` without ``all_touched``),
        whether or not the cell holds data; combine with ``grid.valid`` as
        needed.

    Raises
    ------
    TypeError
        If a geometry is not polygonal.

    Examples
    --------
    >>> import shapely
    >>> grid = Grid.regular((4, 4), west=0, north=40, cell_m=10, crs="EPSG:32610")
    >>> polygon_mask([shapely.box(0, 0, 21, 12)], grid).astype(int)
    array([[0, 0, 0, 0],
           [0, 0, 0, 0],
           [0, 0, 0, 0],
           [1, 1, 0, 0]])
    """
    from rasterio.features import geometry_mask

    shapes = [g for g in geoms if not g.is_empty]
    for g in shapes:
        if g.geom_type not in _FAMILIES["Polygon"]:
            raise TypeError(f"expected Polygon or MultiPolygon, got {g.geom_type}")
    if not shapes:
        return np.zeros(grid.shape, dtype=bool)
    return geometry_mask(shapes, out_shape=tuple(grid.shape), transform=grid.transform,
                         invert=True, all_touched=False)


def point_cells(geoms, grid: Grid, *, path, key: str) -> tuple[np.ndarray, np.ndarray]:
    """The cell holding each point (a MultiPoint gives one cell per point, in order).

    Parameters
    ----------
    geoms : sequence of shapely Point or MultiPoint
        In the grid's CRS (as :func:`read_vector` returns them).
    grid : Grid
    path : str or os.PathLike
        The file the points came from, named in the message.
    key : str
        The scenario key that named the file, named in the message.

    Returns
    -------
    rows, cols : numpy.ndarray of int64
        Cell of each point. A point on the edge between two cells belongs to
        the cell east of it or south of it.

    Raises
    ------
    InputError
        If any point lies off the raster or on a nodata cell (the message
        gives how many).
    TypeError
        If a geometry is not a Point or MultiPoint.

    Examples
    --------
    >>> import shapely
    >>> grid = Grid.regular((4, 4), west=0, north=40, cell_m=10, crs="EPSG:32610")
    >>> rows, cols = point_cells([shapely.Point(15, 35), shapely.MultiPoint([(5, 5), (39, 1)])],
    ...                          grid, path="wells.geojson", key="[site] points")
    >>> rows.tolist(), cols.tolist()
    ([0, 3, 3], [1, 0, 3])
    """
    import shapely

    for g in geoms:
        if g.geom_type not in _FAMILIES["Point"]:
            raise TypeError(f"expected Point or MultiPoint, got {g.geom_type}")
    xy = shapely.get_coordinates(np.array(list(geoms), dtype=object)) if len(geoms) else np.zeros((0, 2))
    rows, cols, on = _cells_of(grid, xy[:, 0], xy[:, 1])
    good = on & grid.valid[rows, cols]
    if not good.all():
        bad = int((~good).sum())
        off = int((~on).sum())
        raise InputError(f"{Path(path).name}: {key}: {bad} of {len(good)} points lie off the DEM "
                         f"{grid.path.name} ({off} off the raster, {bad - off} on nodata cells); "
                         "move or delete them")
    return rows, cols
