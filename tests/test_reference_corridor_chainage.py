"""Corridor chainage and strips against outside references.

* shapely (``length``, ``interpolate``, ``shapely.ops.substring``) for where the segments cut
  the line;
* pyproj (its own PROJ build) for the reprojection of a centreline into the DEM's CRS;
* rasterio.features (GDAL's rasteriser over the whole grid) for the cells of each strip;
* the definition of the US survey foot (1200/3937 m) for chainage on a foot grid;
* analytic lengths for the part of a line off the data.

Every line and grid is synthetic.
"""

import math

import numpy as np
import pytest
import shapely
from rasterio.features import rasterize
from shapely.ops import substring

from slopescreen.corridor.segments import build_segments, split_line
from slopescreen.corridor.vector_inputs import chain_lines, outside_length
from test_corridor_segments import X0, Y0, line_json, make_grid, read_line, write_geojson, write_gpkg

US_FOOT_M = 1200.0 / 3937.0


def arc(cx, cy, radius, a0_deg, a1_deg, n):
    t = np.radians(np.linspace(a0_deg, a1_deg, n))
    return shapely.LineString(np.column_stack([cx + radius * np.cos(t), cy + radius * np.sin(t)]))


def _check_partition(from_m, to_m, start, length):
    assert from_m[0] == start
    assert np.array_equal(to_m[:-1], from_m[1:])
    # shapely length as the reference for the total
    assert to_m[-1] == pytest.approx(start + length, rel=1e-12)
    assert np.all(to_m > from_m)


def test_arc_segments_partition_the_line():
    line = arc(X0 + 1000.0, Y0 - 1000.0, 812.3, 10.0, 260.0, 700)
    start = 1234.5
    from_m, to_m, pieces = split_line(line, segment_m=100.0, start_chainage_m=start)
    _check_partition(from_m, to_m, start, line.length)
    assert len(from_m) == math.ceil(line.length / 100.0)
    for a, b, piece in zip(from_m, to_m, pieces):
        # shapely length of each piece equals its chainage interval
        assert piece.length == pytest.approx(b - a, rel=1e-9)
        # shapely interpolate gives its first and last points
        assert piece.coords[0] == pytest.approx(line.interpolate(a - start).coords[0], abs=1e-6)
        assert piece.coords[-1] == pytest.approx(line.interpolate(b - start).coords[0], abs=1e-6)
        # shapely.ops.substring gives the same piece (vertices within 1 micrometre)
        ref = substring(line, a - start, b - start)
        assert shapely.hausdorff_distance(piece, ref) < 1e-6
        assert len(piece.coords) == len(ref.coords)


def test_multipart_segments_partition_the_line():
    parts = [arc(X0, Y0, 300.0, 0.0, 75.0, 120),
             shapely.LineString([(X0 + 500.0, Y0), (X0 + 520.0, Y0 + 3.0), (X0 + 731.7, Y0 + 40.0)]),
             arc(X0 + 900.0, Y0 + 200.0, 150.0, 200.0, 10.0, 90)]
    line = chain_lines(parts)
    start = 0.0
    from_m, to_m, pieces = split_line(line, segment_m=85.0, start_chainage_m=start)
    _check_partition(from_m, to_m, start, line.length)
    offsets = np.concatenate([[0.0], np.cumsum([p.length for p in parts])])
    spanning = 0
    for a, b, piece in zip(from_m, to_m, pieces):
        # the reference cut by hand: shapely substring on each part the segment overlaps
        ref = []
        for part, off in zip(parts, offsets):
            lo, hi = max(a - off, 0.0), min(b - off, part.length)
            if hi - lo > 1e-9:
                ref.append(substring(part, lo, hi))
        ours = list(piece.geoms) if piece.geom_type == "MultiLineString" else [piece]
        assert len(ours) == len(ref)
        spanning += len(ref) > 1
        for got, want in zip(ours, ref):
            assert shapely.hausdorff_distance(got, want) < 1e-6
            assert got.coords[0] == pytest.approx(want.coords[0], abs=1e-6)
        assert sum(g.length for g in ours) == pytest.approx(b - a, rel=1e-9)
    assert spanning == 2                      # two segments span the two gaps


def test_line_in_another_crs_gives_the_same_segments(tmp_path):
    import pyproj
    grid = make_grid(rows=200, cols=200, x0=X0 + 0.37, y0=Y0 + 0.21)
    x = X0 + np.linspace(50.0, 1950.0, 400)
    y = Y0 - 1000.0 + 600.0 * np.sin(x / 300.0) + 0.03 * (x - X0)
    # the line drawn in longitude/latitude (pyproj: DEM CRS to WGS 84)
    to_geographic = pyproj.Transformer.from_crs("EPSG:32610", "EPSG:4326", always_xy=True)
    lon, lat = to_geographic.transform(x, y)
    geographic = write_geojson(tmp_path / "road_lonlat.geojson",
                               [line_json(zip(lon, lat))], crs="urn:ogc:def:crs:OGC:1.3:CRS84")
    # the same line reprojected by pyproj into the DEM's CRS and written there
    to_dem = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32610", always_xy=True)
    xr, yr = to_dem.transform(lon, lat)
    projected = write_gpkg(tmp_path / "road_utm.gpkg", [shapely.LineString(np.column_stack([xr, yr]))])

    got = build_segments(chain_lines(read_line(geographic, grid)), grid, segment_m=100.0,
                         half_width_m=15.0, start_chainage_m=50.0)
    ref = build_segments(chain_lines(read_line(projected, grid)), grid, segment_m=100.0,
                         half_width_m=15.0, start_chainage_m=50.0)
    assert len(got) == len(ref) > 20
    assert np.allclose(got.from_m, ref.from_m, rtol=0, atol=1e-6)
    assert np.allclose(got.to_m, ref.to_m, rtol=0, atol=1e-6)
    assert np.array_equal(got.cell, ref.cell) and np.array_equal(got.segment, ref.segment)


def _reference_cells(shape, grid, *, all_touched):
    """Flat valid cells of one shape, rasterised by rasterio over the whole grid."""
    burned = rasterize([(shape, 1)], out_shape=grid.shape, transform=grid.transform, fill=0,
                       all_touched=all_touched, dtype=np.uint8).astype(bool)
    return np.flatnonzero(burned & grid.valid)


def _hairpin():
    """East 400 m, a half circle of radius 5 m, back west: legs 10 m apart."""
    east = np.column_stack([np.linspace(X0 + 33.3, X0 + 433.3, 9), np.full(9, Y0 - 151.7)])
    t = np.radians(np.linspace(90.0, -90.0, 25))
    turn = np.column_stack([X0 + 433.3 + 5.0 * np.cos(t), Y0 - 156.7 + 5.0 * np.sin(t)])
    west = np.column_stack([np.linspace(X0 + 433.3, X0 + 133.3, 7), np.full(7, Y0 - 161.7)])
    return shapely.LineString(np.vstack([east, turn[1:], west[1:]]))


@pytest.mark.parametrize("half_width_m", [10.0, 3.7])
def test_strip_cells_match_rasterio_over_the_whole_grid(half_width_m):
    valid = np.ones((40, 60), dtype=bool)
    valid[12:15, 20:34] = False               # a nodata hole under the east leg
    grid = make_grid(valid=valid)
    seg = build_segments(_hairpin(), grid, segment_m=70.0, half_width_m=half_width_m)
    for k, strip in enumerate(seg.strips):
        # rasterio.features: cell centre inside the strip polygon, over the whole grid
        ref = _reference_cells(strip, grid, all_touched=False)
        assert seg.counts[k] == len(ref)
        assert np.array_equal(np.sort(seg.cell[seg.segment == k]), ref)
    shared = np.unique(seg.cell[:-1][np.diff(seg.cell) == 0])
    if half_width_m > 5.0:
        # the legs' strips overlap: those cells are listed once for each strip
        assert shared.size > 0
        east = {int(k) for k in np.unique(seg.segment) if seg.from_m[k] < 400.0}
        pairs = [set(seg.segment[seg.cell == c].tolist()) for c in shared]
        assert any(p & east and p - east for p in pairs)
    assert seg.counts.sum() == len(seg.cell)


def test_zero_half_width_strips_match_rasterio_all_touched():
    valid = np.ones((40, 60), dtype=bool)
    valid[12:15, 20:34] = False
    grid = make_grid(valid=valid)
    seg = build_segments(_hairpin(), grid, segment_m=70.0, half_width_m=0.0)
    for k, piece in enumerate(seg.lines):
        # rasterio.features with all_touched: the cells the piece passes over
        ref = _reference_cells(piece, grid, all_touched=True)
        assert np.array_equal(np.sort(seg.cell[seg.segment == k]), ref)


def test_foot_crs_chainage_in_metres():
    # a grid in a projected CRS in US survey feet; 10 ft cells
    fx, fy = 1_000_003.3, 600_007.7
    grid = make_grid(rows=120, cols=160, x0=fx, y0=fy, epsg=2927, unit=US_FOOT_M)
    # the definition of the US survey foot as the reference for the unit
    assert grid.crs.linear_units_factor[1] == pytest.approx(US_FOOT_M, rel=1e-15)
    line = shapely.LineString([(fx + 20.0, fy - 600.0), (fx + 1020.0, fy - 600.0)])  # 1000 ft
    seg = build_segments(line, grid, segment_m=50.0, half_width_m=6.0)
    length_m = 1000.0 * US_FOOT_M                                     # 304.8006... m
    assert len(seg) == 7
    assert seg.from_m.tolist() == [0.0, 50.0, 100.0, 150.0, 200.0, 250.0, 300.0]
    assert seg.to_m[-1] == pytest.approx(length_m, rel=1e-12)
    for a, b, piece, strip in zip(seg.from_m, seg.to_m, seg.lines, seg.strips):
        assert piece.length * US_FOOT_M == pytest.approx(b - a, rel=1e-12)
        # flat-ended strip of a straight piece: (2 x half-width) x length, in square feet
        assert strip.area == pytest.approx(2 * 6.0 / US_FOOT_M * (b - a) / US_FOOT_M, rel=1e-9)
    # a full 50 m segment: 50 m / 10 ft = 16.4 cells long, 12 m / 10 ft = 3.9 cells wide
    assert 3 * 16 <= seg.counts[1] <= 4 * 17


def test_outside_length_of_a_line_past_the_data():
    grid = make_grid(rows=20, cols=30)                # 300 m x 200 m
    spacing = 10.0 / 4
    # analytic: the line runs 30 m beyond the east edge of the raster
    line = shapely.LineString([(X0 + 12.3, Y0 - 101.7), (X0 + 330.0, Y0 - 101.7)])
    length, first = outside_length(line, grid, start_chainage_m=500.0)
    assert abs(length - 30.0) <= spacing
    assert abs(first - (500.0 + 300.0 - 12.3)) <= spacing
    # analytic: a nodata block 40 m wide across the line, and the same line on a foot grid
    valid = np.ones((20, 30), dtype=bool)
    valid[:, 10:14] = False
    length, first = outside_length(line, make_grid(rows=20, cols=30, valid=valid))
    assert abs(length - (40.0 + 30.0)) <= 2 * spacing
    assert abs(first - (100.0 - 12.3)) <= spacing
    foot = make_grid(rows=20, cols=30, epsg=2927, unit=US_FOOT_M)
    length, _ = outside_length(line, foot)
    assert abs(length - 30.0 * US_FOOT_M) <= spacing * US_FOOT_M
