"""Corridor inputs and segments: reading user vector files, chaining lines, strips of cells.

Checks against outside references (shapely, pyproj, rasterio.features, analytic lengths) are
in tests/test_reference_corridor_chainage.py; this file checks the behaviour the contract
promises (messages, order, flags) with known answers on synthetic lines.
"""

import json
from pathlib import Path

import numpy as np
import pytest
import shapely
from rasterio.crs import CRS
from rasterio.transform import from_origin

from slopescreen.corridor.segments import Segments, build_segments, split_line, strip_cells
from slopescreen.corridor.vector_inputs import (chain_lines, outside_length, point_cells,
                                                polygon_mask, read_vector)
from slopescreen.errors import InputError, InputWarning
from slopescreen.grid import Grid

KEY = "[corridor] centreline"
CRS_KEY = "[corridor] centreline_crs"
X0, Y0 = 500000.0, 5002000.0


def make_grid(rows=40, cols=60, cell=10.0, *, x0=X0, y0=Y0, epsg=32610, valid=None, unit=1.0):
    """A DEM grid on a synthetic origin (nothing is read from disk)."""
    valid = np.ones((rows, cols), dtype=bool) if valid is None else valid
    return Grid((rows, cols), from_origin(x0, y0, cell, cell), CRS.from_epsg(epsg),
                cell * unit, cell * unit, valid, Path("dem.tif"), unit)


def write_geojson(path, geometries, *, crs="urn:ogc:def:crs:EPSG::32610"):
    """A GeoJSON FeatureCollection of the given geometry mappings (None = null geometry)."""
    doc = {"type": "FeatureCollection",
           "features": [{"type": "Feature", "properties": {"n": i}, "geometry": g}
                        for i, g in enumerate(geometries)]}
    if crs is not None:
        doc["crs"] = {"type": "name", "properties": {"name": crs}}
    Path(path).write_text(json.dumps(doc), encoding="utf-8")
    return Path(path)


def write_gpkg(path, geoms, *, crs="EPSG:32610", geometry_type="LineString"):
    """A GeoPackage layer of shapely geometries (crs None: a layer without CRS)."""
    from pyogrio.raw import write

    wkb = np.array([shapely.to_wkb(g) for g in geoms], dtype=object)
    if crs is None:
        with pytest.warns(UserWarning, match="crs"):
            write(str(path), wkb, [], [], layer="line", driver="GPKG",
                  geometry_type=geometry_type, crs=None)
    else:
        write(str(path), wkb, [], [], layer="line", driver="GPKG",
              geometry_type=geometry_type, crs=crs)
    return Path(path)


def line_json(coords):
    return {"type": "LineString", "coordinates": [list(map(float, c)) for c in coords]}


def read_line(path, grid, **kw):
    return read_vector(path, grid, kinds=("LineString",), key=KEY, crs_key=CRS_KEY, **kw)


# ---------------------------------------------------------------------------
# read_vector: one-line errors naming the file and the key
# ---------------------------------------------------------------------------


def _one_line_error(path, grid, match, **kw):
    with pytest.raises(InputError, match=match) as info:
        read_line(path, grid, **kw)
    text = str(info.value)
    assert "\n" not in text
    assert text.startswith(f"{Path(path).name}: {KEY}:")
    return text


def test_empty_feature_collection_refused(tmp_path):
    path = write_geojson(tmp_path / "road.geojson", [])
    _one_line_error(path, make_grid(), "holds no features")


def test_only_null_geometries_refused(tmp_path):
    path = write_geojson(tmp_path / "road.geojson", [None, None])
    _one_line_error(path, make_grid(), "every geometry is empty")


def test_point_file_as_centreline_refused(tmp_path):
    path = write_geojson(tmp_path / "road.geojson", [{"type": "Point", "coordinates": [X0, Y0]}])
    text = _one_line_error(path, make_grid(), "is a Point")
    assert "LineString or MultiLineString" in text


def test_file_without_crs_needs_the_crs_key(tmp_path):
    line = shapely.LineString([(X0 + 5, Y0 - 5), (X0 + 95, Y0 - 95)])
    path = write_gpkg(tmp_path / "road.gpkg", [line], crs=None)
    text = _one_line_error(path, make_grid(), "no coordinate reference system")
    assert 'add [corridor] centreline_crs = "EPSG:...' in text
    # with the key, the coordinates are taken in that CRS
    (got,) = read_line(path, make_grid(), crs="EPSG:32610")
    assert got.equals(line)


def test_unknown_crs_string_refused(tmp_path):
    line = shapely.LineString([(X0 + 5, Y0 - 5), (X0 + 95, Y0 - 95)])
    path = write_gpkg(tmp_path / "road.gpkg", [line], crs=None)
    with pytest.raises(InputError, match="unknown CRS") as info:
        read_line(path, make_grid(), crs="EPSG:999999")
    assert str(info.value).startswith(f"road.gpkg: {CRS_KEY}:")


def test_folder_refused(tmp_path):
    folder = tmp_path / "road.geojson"
    folder.mkdir()
    _one_line_error(folder, make_grid(), "is a folder")


def test_unreadable_file_refused(tmp_path):
    path = tmp_path / "road.geojson"
    path.write_text("this is not a vector file", encoding="utf-8")
    _one_line_error(path, make_grid(), "cannot be read as a vector file")


def test_missing_file_refused(tmp_path):
    _one_line_error(tmp_path / "road.geojson", make_grid(), "file not found")


def test_projected_coordinates_in_geojson_without_crs_member_refused(tmp_path):
    # GDAL reads a GeoJSON file without "crs" as WGS 84 longitude/latitude
    path = write_geojson(tmp_path / "road.geojson", [line_json([(X0, Y0), (X0 + 100, Y0)])], crs=None)
    _one_line_error(path, make_grid(), "longitude/latitude")


def test_crs_key_ignored_when_the_file_has_a_crs(tmp_path):
    path = write_geojson(tmp_path / "road.geojson", [line_json([(X0 + 5, Y0 - 5), (X0 + 95, Y0 - 5)])])
    with pytest.warns(InputWarning, match="is ignored"):
        (got,) = read_line(path, make_grid(), crs="EPSG:32611")
    assert got.coords[0] == (X0 + 5, Y0 - 5)


def test_kinds_must_be_known_families(tmp_path):
    path = write_geojson(tmp_path / "road.geojson", [line_json([(X0, Y0), (X0 + 1, Y0)])])
    with pytest.raises(ValueError, match="kinds"):
        read_vector(path, make_grid(), kinds=("Curve",), key=KEY)


def test_features_kept_in_file_order_and_null_skipped(tmp_path):
    a = [(X0 + 300, Y0 - 100), (X0 + 200, Y0 - 100)]
    b = [(X0 + 10, Y0 - 10), (X0 + 50, Y0 - 10)]
    multi = {"type": "MultiLineString", "coordinates": [[list(p) for p in b], [[X0 + 60, Y0 - 20], [X0 + 90, Y0 - 20]]]}
    path = write_geojson(tmp_path / "road.geojson", [line_json(a), None, multi])
    geoms = read_line(path, make_grid())
    assert [g.geom_type for g in geoms] == ["LineString", "MultiLineString"]
    line = chain_lines(geoms)
    # parts in file order, a MultiLineString's parts in their order, none reversed
    assert [p.coords[0] for p in line.geoms] == [a[0], b[0], (X0 + 60, Y0 - 20)]
    assert line.length == pytest.approx(100 + 40 + 30, rel=1e-12)


def test_only_the_first_layer_is_read_with_a_warning(tmp_path):
    from pyogrio.raw import write

    path = tmp_path / "roads.gpkg"
    for layer, y in (("centreline", Y0 - 5), ("verges", Y0 - 25)):
        wkb = np.array([shapely.to_wkb(shapely.LineString([(X0 + 5, y), (X0 + 95, y)]))], dtype=object)
        write(str(path), wkb, [], [], layer=layer, driver="GPKG", geometry_type="LineString",
              crs="EPSG:32610", append=layer != "centreline")
    with pytest.warns(InputWarning, match="holds 2 layers; only the first, 'centreline', is read"):
        (got,) = read_line(path, make_grid())
    assert got.coords[0] == (X0 + 5, Y0 - 5)


def test_geopackage_with_z_read_as_2d(tmp_path):
    line = shapely.LineString([(X0 + 5, Y0 - 5, 12.0), (X0 + 95, Y0 - 95, 14.0)])
    path = write_gpkg(tmp_path / "road.gpkg", [line], geometry_type="LineString Z")
    (got,) = read_line(path, make_grid())
    assert not got.has_z and got.coords[1] == (X0 + 95, Y0 - 95)


def test_polygon_and_point_families(tmp_path):
    grid = make_grid(rows=4, cols=4)
    box = shapely.box(X0, Y0 - 20, X0 + 20, Y0)
    polys = write_gpkg(tmp_path / "fills.gpkg", [box], geometry_type="Polygon")
    geoms = read_vector(polys, grid, kinds=("Polygon",), key="[corridor] fills")
    assert polygon_mask(geoms, grid).sum() == 4
    points = write_geojson(tmp_path / "pts.geojson",
                           [{"type": "MultiPoint", "coordinates": [[X0 + 5, Y0 - 5], [X0 + 35, Y0 - 25]]}])
    geoms = read_vector(points, grid, kinds=("Point",), key="[corridor] culverts")
    rows, cols = point_cells(geoms, grid, path=points, key="[corridor] culverts")
    assert rows.tolist() == [0, 2] and cols.tolist() == [0, 3]


# ---------------------------------------------------------------------------
# chain_lines, point_cells, polygon_mask
# ---------------------------------------------------------------------------


def test_chain_lines_drops_zero_length_parts():
    zero = shapely.LineString([(1, 1), (1, 1)])
    line = chain_lines([zero, shapely.LineString([(0, 0), (0, 5)]), zero])
    assert len(line.geoms) == 1 and line.length == 5.0
    with pytest.raises(InputError, match="road.geojson: centreline: has zero length"):
        chain_lines([zero], label="road.geojson: centreline")
    with pytest.raises(TypeError):
        chain_lines([shapely.Point(0, 0)])


def test_point_cells_off_the_dem_counted():
    valid = np.ones((4, 4), dtype=bool)
    valid[0, 0] = False
    grid = make_grid(rows=4, cols=4, valid=valid)
    pts = [shapely.Point(X0 + 5, Y0 - 5), shapely.Point(X0 - 5, Y0 - 5), shapely.Point(X0 + 15, Y0 - 5)]
    with pytest.raises(InputError, match=r"^culverts.gpkg: \[corridor\] culverts: 2 of 3 points "
                                         r"lie off the DEM dem.tif \(1 off the raster, 1 on nodata"):
        point_cells(pts, grid, path="culverts.gpkg", key="[corridor] culverts")


def test_polygon_mask_empty_input_is_all_false():
    grid = make_grid(rows=3, cols=3)
    assert not polygon_mask([], grid).any()
    with pytest.raises(TypeError):
        polygon_mask([shapely.Point(X0, Y0)], grid)


# ---------------------------------------------------------------------------
# segments
# ---------------------------------------------------------------------------


def test_last_sliver_merged_into_the_previous_segment():
    # regression guard: a line a whole number of segments long up to rounding gets no
    # segment of a few nanometres at its end
    line = shapely.LineString([(0.0, 0.0), (300.0 + 1e-8, 0.0)])
    from_m, to_m, pieces = split_line(line, segment_m=100.0)
    assert from_m.tolist() == [0.0, 100.0, 200.0]
    assert to_m[-1] == pytest.approx(300.0 + 1e-8, abs=1e-12)
    assert pieces[-1].length == pytest.approx(100.0 + 1e-8, abs=1e-9)
    # a genuine short last segment is kept
    from_m, to_m, _ = split_line(shapely.LineString([(0.0, 0.0), (300.001, 0.0)]), segment_m=100.0)
    assert len(from_m) == 4 and to_m[-1] - from_m[-1] == pytest.approx(0.001)


def test_segment_spanning_a_gap_is_multipart():
    line = shapely.MultiLineString([[(0, 0), (60, 0)], [(100, 0), (200, 0)]])
    from_m, to_m, pieces = split_line(line, segment_m=100.0, start_chainage_m=1000.0)
    assert from_m.tolist() == [1000.0, 1100.0] and to_m.tolist() == [1100.0, 1160.0]
    assert pieces[0].geom_type == "MultiLineString"
    assert [list(p.coords) for p in pieces[0].geoms] == [[(0, 0), (60, 0)], [(100, 0), (140, 0)]]
    assert list(pieces[1].coords) == [(140, 0), (200, 0)]


def test_cut_on_the_end_of_a_part_leaves_no_empty_piece():
    line = shapely.MultiLineString([[(0, 0), (100, 0)], [(0, 50), (100, 50)]])
    _, _, pieces = split_line(line, segment_m=100.0)
    assert [p.geom_type for p in pieces] == ["LineString", "LineString"]
    assert list(pieces[1].coords) == [(0, 50), (100, 50)]


def test_bad_segment_length_refused():
    line = shapely.LineString([(0, 0), (10, 0)])
    for bad in (0.0, -5.0, float("nan")):
        with pytest.raises(InputError, match="segment_m"):
            split_line(line, segment_m=bad)
    with pytest.raises(InputError, match="half_width_m"):
        build_segments(line, make_grid(), segment_m=5.0, half_width_m=-1.0)


def test_strip_cells_sorted_and_only_valid():
    valid = np.ones((40, 60), dtype=bool)
    valid[:, 30:] = False                       # the east half is nodata
    grid = make_grid(valid=valid)
    line = shapely.LineString([(X0 + 3.3, Y0 - 200.7), (X0 + 597.1, Y0 - 200.7)])
    seg = build_segments(line, grid, segment_m=100.0, half_width_m=10.0)
    assert len(seg) == 6
    cols = seg.cell % 60
    assert (cols < 30).all()
    assert np.all(np.diff(seg.cell) >= 0)
    same = np.diff(seg.cell) == 0
    assert np.all(np.diff(seg.segment)[same] > 0)
    # the three western segments hold data, the three eastern ones none
    assert seg.on_dem.tolist() == [True, True, True, False, False, False]
    assert seg.counts.tolist()[3:] == [0, 0, 0]
    assert seg.cell.dtype == np.int64 and seg.segment.dtype == np.int32


def test_segments_are_read_only():
    seg = build_segments(shapely.LineString([(X0 + 5, Y0 - 5), (X0 + 95, Y0 - 5)]), make_grid(),
                         segment_m=30.0, half_width_m=4.0)
    assert isinstance(seg, Segments)
    with pytest.raises(ValueError):
        seg.from_m[0] = 3.0


def test_zero_half_width_is_the_cells_the_line_crosses():
    grid = make_grid(rows=10, cols=10)
    # a diagonal from the centre of cell (0, 0) to the centre of cell (9, 9)
    line = shapely.LineString([(X0 + 5, Y0 - 5), (X0 + 95, Y0 - 95)])
    seg = build_segments(line, grid, segment_m=1000.0, half_width_m=0.0)
    rows, cols = np.divmod(seg.cell, 10)
    assert set(zip(rows.tolist(), cols.tolist())) >= {(i, i) for i in range(10)}
    # the strip polygon is the union of those cells' squares
    assert seg.strips[0].area == pytest.approx(100.0 * seg.counts[0])


def test_strip_off_the_raster_holds_no_cell():
    grid = make_grid(rows=5, cols=5)
    far = shapely.box(X0 + 1000, Y0 + 1000, X0 + 1100, Y0 + 1100)
    cell, segment = strip_cells([far, shapely.Polygon()], grid)
    assert cell.size == 0 and segment.size == 0


def test_outside_length_zero_inside():
    grid = make_grid()
    assert outside_length(shapely.LineString([(X0 + 5, Y0 - 5), (X0 + 95, Y0 - 95)]), grid) == (0.0, None)
