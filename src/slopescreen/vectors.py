"""Vector output: GeoPackage layers in the DEM's CRS (the only module that writes vector files).

Polygons come from a label raster on the DEM grid (one id per feature, 0 =
none), traced along cell edges with :func:`rasterio.features.shapes` and
merged per id with shapely. Files are written with pyogrio (GDAL's OGR) to a
temporary name and renamed when complete; the screening caution goes into the
layer metadata.

A file holds no time of writing: GDAL stamps the ``last_change`` of
``gpkg_contents`` and the ``timestamp`` of ``gpkg_metadata_reference`` with the
current time unless its ``OGR_CURRENT_DATE`` option says otherwise, so every
write sets that option to :data:`FIXED_TIMESTAMP` for its own duration. Two
runs of one scenario then write byte-identical GeoPackages.
"""

from __future__ import annotations

import os
import threading
from contextlib import contextmanager
from pathlib import Path

import numpy as np

from .grid import Grid

FIXED_TIMESTAMP = "1970-01-01T00:00:00.000Z"
"""The time every GeoPackage records as its tables' last change: the Unix epoch, which no
file was really written at, in the form the GeoPackage standard asks for (ISO 8601, UTC,
milliseconds). The time of a run is in ``manifest.json`` (``created``), not in its products."""

_DATE_LOCK = threading.Lock()


@contextmanager
def _fixed_gdal_date():
    """Set GDAL's ``OGR_CURRENT_DATE`` for one write, then put back what was there.

    The option is process-wide in GDAL, so writes hold a lock while it is set
    (another thread's write cannot restore it in the middle of this one).
    """
    from pyogrio import get_gdal_config_option, set_gdal_config_options

    with _DATE_LOCK:
        before = get_gdal_config_option("OGR_CURRENT_DATE")
        set_gdal_config_options({"OGR_CURRENT_DATE": FIXED_TIMESTAMP})
        try:
            yield
        finally:
            set_gdal_config_options({"OGR_CURRENT_DATE": before})


def label_polygons(labels: np.ndarray, grid: Grid) -> dict[int, object]:
    """Trace the cells of each label as one (multi)polygon in map coordinates.

    Parameters
    ----------
    labels : numpy.ndarray of int, shape ``grid.shape``
        Feature id per cell; 0 (or negative) means no feature.
    grid : Grid
        Grid whose transform places the cells.

    Returns
    -------
    dict
        ``{id: shapely Polygon or MultiPolygon}`` for every id present.

    Raises
    ------
    ValueError
        If ``labels`` does not have the grid's shape.
    """
    import shapely
    from rasterio import features

    labels = np.asarray(labels)
    if labels.shape != tuple(grid.shape):
        raise ValueError(f"labels shape {labels.shape} does not match grid {grid.shape}")
    data = labels.astype(np.int32)
    parts: dict[int, list] = {}
    for geom, value in features.shapes(data, mask=data > 0, connectivity=4,
                                       transform=grid.transform):
        parts.setdefault(int(value), []).append(shapely.geometry.shape(geom))
    return {k: (v[0] if len(v) == 1 else shapely.union_all(v)) for k, v in sorted(parts.items())}


def write_polygons(path, polygons: dict, records: list[dict], grid: Grid, *, layer: str,
                   caution: str, metadata: dict | None = None, add_layer: bool = False) -> Path:
    """Write polygons with attributes as one GeoPackage layer, atomically.

    Parameters
    ----------
    path : path-like
        Target ``.gpkg``; the folder must exist.
    polygons : dict
        ``{id: geometry}`` (see :func:`label_polygons`).
    records : list of dict
        One attribute row per feature; each holds ``"id"`` matching a key of
        ``polygons``; all rows have the same keys (numbers, text or bools).
    grid : Grid
        Supplies the CRS.
    layer : str
        Layer name.
    caution : str
        Screening caution, stored in the layer metadata as ``CAUTION``.
    metadata : dict, optional
        More layer metadata (text values).
    add_layer : bool
        Add the layer to an existing GeoPackage at ``path`` (written in place;
        use it only on a file that is itself still in a staging folder).

    Returns
    -------
    pathlib.Path

    Raises
    ------
    ValueError
        A record without a polygon, or rows with different keys.
    """
    return write_features(path, polygons, records, grid, layer=layer, caution=caution,
                          geometry_type="MultiPolygon", metadata=metadata, add_layer=add_layer)


def write_features(path, geometries: dict, records: list[dict], grid: Grid, *, layer: str,
                   caution: str, geometry_type: str, metadata: dict | None = None,
                   add_layer: bool = False) -> Path:
    """Write features of one geometry type with attributes as a GeoPackage layer, atomically.

    As :func:`write_polygons`, for ``geometry_type`` ``"MultiPolygon"``
    (polygons are promoted), ``"LineString"`` or ``"MultiLineString"`` (lines
    are promoted); ``geometries`` maps each record's ``"id"`` to its geometry.
    """
    import shapely
    from pyogrio.raw import write

    path = Path(path)
    names = list(records[0]) if records else ["id"]
    for row in records:
        if list(row) != names:
            raise ValueError("every record must have the same fields in the same order")
        if row["id"] not in geometries:
            raise ValueError(f"record id {row['id']} has no polygon or line (no geometry)")
    promote = {"MultiPolygon": ("Polygon", shapely.geometry.MultiPolygon),
               "MultiLineString": ("LineString", shapely.geometry.MultiLineString)}
    geoms = []
    for r in records:
        g = geometries[r["id"]]
        if geometry_type in promote and g.geom_type == promote[geometry_type][0]:
            g = promote[geometry_type][1]([g])
        geoms.append(g)
    wkb = np.array([shapely.to_wkb(g) for g in geoms], dtype=object)
    columns = []
    for name in names:
        values = [r[name] for r in records]
        if values and all(isinstance(v, (bool, np.bool_)) for v in values):
            columns.append(np.array(values, dtype=bool))
        elif values and all(isinstance(v, (int, np.integer)) and not isinstance(v, bool) for v in values):
            columns.append(np.array(values, dtype=np.int64))
        elif values and all(isinstance(v, (int, float, np.integer, np.floating)) for v in values):
            columns.append(np.array(values, dtype=np.float64))
        else:
            columns.append(np.array(["" if v is None else str(v) for v in values], dtype=object))
    meta = {"CAUTION": caution} | {k: str(v) for k, v in (metadata or {}).items()}
    if add_layer:
        with _fixed_gdal_date():
            write(str(path), wkb, columns, names, layer=layer, driver="GPKG",
                  geometry_type=geometry_type, crs=grid.crs.to_wkt(), layer_metadata=meta)
        return path
    tmp = path.with_name(f".{path.stem}.partial{path.suffix}")
    try:
        with _fixed_gdal_date():
            write(str(tmp), wkb, columns, names, layer=layer, driver="GPKG",
                  geometry_type=geometry_type, crs=grid.crs.to_wkt(), layer_metadata=meta)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path


def read_layer(path, layer=None) -> tuple[list, dict, dict]:
    """Read a GeoPackage layer back: (shapely geometries, columns by name, layer metadata).

    ``layer`` names the layer (default: the first).

    A convenience for tests and notebooks.
    """
    import shapely
    from pyogrio import read_info
    from pyogrio.raw import read

    if layer is None:
        from pyogrio import list_layers

        layer = str(list_layers(str(path))[0][0])
    meta, _fids, geometry, field_data = read(str(path), layer=layer)
    geoms = [shapely.from_wkb(g) for g in geometry]
    columns = {name: values for name, values in zip(meta["fields"], field_data)}
    info = read_info(str(path), layer=layer)
    return geoms, columns, dict(info.get("layer_metadata") or {}) | {"crs": meta["crs"]}
