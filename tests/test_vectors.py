"""GeoPackage output: polygons traced from labels keep area, CRS and attributes."""

import numpy as np
import pytest

from conftest import tilted_plane, write_tif
from slopescreen.grid import read_dem
from slopescreen.vectors import label_polygons, read_layer, write_polygons


@pytest.fixture
def grid(tmp_path):
    return read_dem(write_tif(tmp_path / "dem.tif", tilted_plane(rows=20, cols=20)))[1]


def test_polygons_round_trip(tmp_path, grid):
    labels = np.zeros((20, 20), dtype=np.int32)
    labels[2:5, 3:7] = 1            # 12 cells
    labels[10:12, 10:11] = 2        # 2 cells
    labels[10:12, 14:15] = 2        # a second part of feature 2
    polys = label_polygons(labels, grid)
    cell = grid.dx_m * grid.dy_m
    # traced area equals the number of cells times the cell area (exact geometry)
    assert polys[1].area == pytest.approx(12 * cell)
    assert polys[2].area == pytest.approx(4 * cell)
    records = [{"id": 1, "rain": "wet", "fs": 0.91, "n_cells": 12, "proven": True},
               {"id": 2, "rain": "wet", "fs": 0.97, "n_cells": 4, "proven": False}]
    out = write_polygons(tmp_path / "c.gpkg", polys, records, grid, layer="clusters",
                         caution="screening only")
    geoms, cols, meta = read_layer(out)
    assert [g.area for g in geoms] == pytest.approx([12 * cell, 4 * cell])
    assert list(cols["fs"]) == pytest.approx([0.91, 0.97])
    assert list(cols["rain"]) == ["wet", "wet"]
    assert meta["CAUTION"] == "screening only"
    assert "32633" in meta["crs"]
    # the polygon lies where the cells are: its bounds follow the transform
    x0, y0 = grid.transform * (3, 2)
    minx, miny, maxx, maxy = geoms[0].bounds
    assert (minx, maxy) == pytest.approx((x0, y0))
    assert not list(tmp_path.glob(".*partial*"))


def test_record_without_polygon_refused(tmp_path, grid):
    with pytest.raises(ValueError, match="no polygon"):
        write_polygons(tmp_path / "c.gpkg", {}, [{"id": 3}], grid, layer="x", caution="c")
    assert not (tmp_path / "c.gpkg").exists()
