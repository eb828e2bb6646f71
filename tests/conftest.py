"""Shared fixtures: small GeoTIFFs and scenario files written into tmp_path."""

from pathlib import Path

import numpy as np
import pytest
import rasterio
from rasterio.transform import Affine, from_origin


def write_tif(path, array, *, crs="EPSG:32633", transform=None, nodata=-9999.0, dtype=None):
    """Write a one-band GeoTIFF (test input); returns the path."""
    array = np.asarray(array)
    dtype = dtype or array.dtype
    if transform is None:
        transform = from_origin(500000.0, 5100000.0, 5.0, 5.0)
    profile = {"driver": "GTiff", "height": array.shape[0], "width": array.shape[1], "count": 1,
               "dtype": dtype, "transform": transform, "nodata": nodata}
    if crs is not None:
        profile["crs"] = crs
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(array.astype(dtype), 1)
    return Path(path)


def write_line_geojson(path, coords, *, epsg=32633):
    """Write a one-feature GeoJSON LineString (test input) with a CRS member; returns the path."""
    import json

    doc = {"type": "FeatureCollection",
           "crs": {"type": "name", "properties": {"name": f"urn:ogc:def:crs:EPSG::{epsg}"}},
           "features": [{"type": "Feature", "properties": {},
                         "geometry": {"type": "LineString", "coordinates": coords}}]}
    Path(path).write_text(json.dumps(doc), encoding="utf-8")
    return Path(path)


def tilted_plane(rows=30, cols=40, cell=5.0, gradient=0.3):
    """A plane falling southward with the given gradient (dz/dy), elevations in metres."""
    r = np.arange(rows)[:, None] * np.ones((1, cols))
    return (500.0 - gradient * cell * r).astype(np.float32)


@pytest.fixture
def make_tif(tmp_path):
    def make(name, array, **kw):
        return write_tif(tmp_path / name, array, **kw)
    return make


@pytest.fixture
def make_scenario(tmp_path):
    def make(text, name="scenario.toml"):
        p = tmp_path / name
        p.write_text(text, encoding="utf-8")
        return p
    return make


@pytest.fixture
def plane_scenario(tmp_path):
    """A minimal terrain-only scenario over a tilted plane."""
    write_tif(tmp_path / "dem.tif", tilted_plane())
    p = tmp_path / "scenario.toml"
    p.write_text('title = "plane"\ndem = "dem.tif"\noutput = "out"\n', encoding="utf-8")
    return p


__all__ = ["write_tif", "tilted_plane", "Affine"]
