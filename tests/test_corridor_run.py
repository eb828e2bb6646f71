"""Whole runs with [runout] and [corridor]: the segment table against outside references.

Outside references: shapely ``length`` of the centreline for the last chainage;
``rasterio.features.rasterize`` of each strip polygon (read back from the GeoPackage) for the
per-strip areas; pyproj for the line drawn in another CRS; the hazard sum P_f x V recomputed
from the ``runout_paths`` layer; the one-line, exit-2, nothing-written contract for bad input.
"""

import csv
import json
import math

import numpy as np
import pytest
from rasterio import features

from conftest import tilted_plane, write_line_geojson, write_tif
from slopescreen.cli import main
from slopescreen.grid import read_back
from slopescreen.vectors import read_layer

CELL = 5.0
X0, Y0 = 500000.0, 5100000.0
ROWS, COLS = 44, 30
ROAD_ROW = 34

UNIT = """
label = "{label}"
depth_m = 1.2
cohesion_kpa = {c}
root_cohesion_kpa = {root}
friction_deg = 35.0
unit_weight_kn_m3 = 18.5
conductivity_m_per_day = 2.0
diffusivity_m2_per_s = 5.0e-5
"""

SCENARIO = """
dem = "dem.tif"
output = "out"
[soil]
map = "soils.tif"
[soil.units.1]
""" + UNIT.format(label="firm", c=20.0, root=10.0) + """
[soil.units.2]
""" + UNIT.format(label="weak", c=0.5, root=0.5) + """
[[rain]]
name = "wet"
steady_mm_per_day = 80
[uncertainty]
samples = 20
seed = 5
[runout]
angle_of_reach_deg = 20
[corridor]
centreline = "road.geojson"
segment_m = 25
half_width_m = 6
"""


def road_xy():
    y = Y0 - (ROAD_ROW + 0.5) * CELL
    return [[X0 + 2.5, y], [X0 + 80.0, y + 3.0], [X0 + COLS * CELL - 2.5, y]]


def write_inputs(folder, text=SCENARIO, line=None, epsg=32633):
    write_tif(folder / "dem.tif", tilted_plane(rows=ROWS, cols=COLS, cell=CELL, gradient=0.75))
    soils = np.ones((ROWS, COLS), dtype=np.uint8)
    soils[6:12, 11:15] = 2                                     # a weak patch upslope of the road
    soils[4:8, 22:24] = 2
    write_tif(folder / "soils.tif", soils, nodata=0, dtype="uint8")
    write_line_geojson(folder / "road.geojson", line or road_xy(), epsg=epsg)
    p = folder / "s.toml"
    p.write_text(text, encoding="utf-8")
    return p


def table(out):
    lines = (out / "corridor_segments.csv").read_text(encoding="utf-8").splitlines()
    assert lines[0].startswith("# ") and "licensed" in lines[0]
    return list(csv.DictReader(lines[1:]))


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("corridor")
    path = write_inputs(folder)
    assert main(["-q", "run", str(path)]) == 0
    out = folder / "out"
    return folder, out, json.loads((out / "manifest.json").read_text())


def test_last_chainage_is_the_line_length(run):
    import shapely

    _, out, _ = run
    rows = table(out)
    length = shapely.LineString(road_xy()).length                # shapely as reference
    assert float(rows[-1]["to_m"]) == pytest.approx(length, abs=1e-4)
    assert len(rows) == math.ceil(length / 25)
    assert [float(r["from_m"]) for r in rows[1:]] == [float(r["to_m"]) for r in rows[:-1]]


def test_strip_areas_equal_an_independent_rasterised_count(run):
    _, out, manifest = run
    geoms, cols, _ = read_layer(out / "corridor_segments.gpkg")
    [fs_entry] = [p for p in manifest["products"] if p["key"] == "factor_of_safety" and p["kind"] == "raster"]
    fs = read_back(out / fs_entry["path"])[0]
    from rasterio.transform import from_origin

    transform = from_origin(X0, Y0, CELL, CELL)
    for g, below in zip(geoms, cols["area_fs_below_1_m2"]):
        inside = features.rasterize([(g, 1)], out_shape=fs.shape, transform=transform,
                                    fill=0, dtype="uint8").astype(bool)
        assert below == pytest.approx(np.sum(inside & (fs < 1.0)) * CELL * CELL)


def test_reached_segments_and_hazard_follow_the_paths(run):
    _, out, _ = run
    rows = table(out)
    _, paths, _ = read_layer(out / "runout_paths.gpkg")
    assert len(paths["source"]) >= 2
    hazard = {int(r["segment"]): 0.0 for r in rows}
    for segs, p, v in zip(paths["segments"], paths["source_failure_probability"],
                          paths["source_volume_m3"]):
        for s in [int(x) for x in segs.split(",") if x]:
            hazard[s] += (1.0 if np.isnan(p) else p) * v
    for r in rows:
        assert float(r["hazard"]) == pytest.approx(hazard[int(r["segment"])], rel=1e-3, abs=1e-3)
        assert int(r["reached"]) == int(hazard[int(r["segment"])] > 0)
    # the weak patches sit above chainage ~55-75 m and ~110-120 m: those segments are reached
    reached = {int(r["segment"]) for r in rows if r["reached"] == "1"}
    assert {3} <= reached and 1 not in reached
    ranks = sorted(int(r["hazard_rank"]) for r in rows)
    assert ranks == list(range(1, len(rows) + 1))
    worst = min(rows, key=lambda r: int(r["hazard_rank"]))
    assert float(worst["hazard"]) == max(float(r["hazard"]) for r in rows)
    assert all(s == "met a corridor strip" for s, n in zip(paths["stopped"], paths["segments_reached"]) if n)


def test_runout_rasters_are_in_the_manifest_with_the_registry_types(run):
    import rasterio

    _, out, manifest = run
    entries = {(p["key"], p["kind"]): p for p in manifest["products"]}
    with rasterio.open(out / entries[("runout_count", "raster")]["path"]) as src:
        assert src.dtypes[0] == "int32" and src.nodata == -1
        count = src.read(1)
    assert count.max() >= 1
    assert ("corridor_segments", "csv") in entries and ("corridor_segments", "vector") in entries


def test_a_line_in_another_crs_gives_the_same_table(run, tmp_path):
    import pyproj

    _, out, _ = run
    to_geo = pyproj.Transformer.from_crs("EPSG:32633", "EPSG:4326", always_xy=True)
    lonlat = [list(to_geo.transform(x, y)) for x, y in road_xy()]
    path = write_inputs(tmp_path, line=lonlat, epsg=4326)
    assert main(["-q", "run", str(path)]) == 0
    a, b = table(out), table(tmp_path / "out")
    assert len(a) == len(b)
    for ra, rb in zip(a, b):
        assert float(ra["to_m"]) == pytest.approx(float(rb["to_m"]), abs=1e-3)
        assert ra["reached"] == rb["reached"] and ra["sources"] == rb["sources"]
        assert ra["area_fs_below_1_m2"] == rb["area_fs_below_1_m2"]


def test_engineered_ground_takes_its_own_unit_and_is_counted(tmp_path):
    text = SCENARIO.replace('half_width_m = 6', 'half_width_m = 6\nengineered_ground = "fill.geojson"\n'
                            'engineered_soil_unit = 2')
    path = write_inputs(tmp_path, text=text)
    # fill below the road: cells of rows 36-37, columns 2-6 (centres inside the polygon)
    x0, x1 = X0 + 2 * CELL, X0 + 7 * CELL
    y0, y1 = Y0 - 38 * CELL, Y0 - 36 * CELL
    doc = {"type": "FeatureCollection",
           "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32633"}},
           "features": [{"type": "Feature", "properties": {}, "geometry": {
               "type": "Polygon", "coordinates": [[[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]]}}]}
    (tmp_path / "fill.geojson").write_text(json.dumps(doc), encoding="utf-8")
    assert main(["-q", "run", str(path)]) == 0
    out = tmp_path / "out"
    manifest = json.loads((out / "manifest.json").read_text())
    [e] = [p for p in manifest["products"] if p["key"] == "factor_of_safety" and p["kind"] == "raster"]
    fs = read_back(out / e["path"])[0]
    assert (fs[36:38, 2:7] < 1.0).all() and (fs[36:38, 8:10] >= 1.0).all()
    # the strip (6 m half width around row 34) holds none of it: rows 36-37 lie 10-15 m away
    assert sum(float(r["engineered_ground_m2"]) for r in table(out)) == 0.0
    text2 = text.replace("half_width_m = 6", "half_width_m = 18")
    path.write_text(text2, encoding="utf-8")
    assert main(["-q", "run", str(path)]) == 0
    # rows 36-37 now lie inside (centres 10-16.2 m from the line; row 38 at 20 m or more):
    # 2 rows x 5 columns of 25 m2 (hand count)
    assert sum(float(r["engineered_ground_m2"]) for r in table(out)) == pytest.approx(250.0)


def assert_bad(capsys, folder, names):
    before = sorted(p.name for p in folder.rglob("*"))
    for command in ("check", "run"):
        code = main([command, str(folder / "s.toml")])
        err = capsys.readouterr().err
        assert code == 2, err
        lines = err.strip().splitlines()
        assert len(lines) == 1 and "Traceback" not in err, err
        for name in names:
            assert name in lines[0], lines[0]
        assert sorted(p.name for p in folder.rglob("*")) == before      # nothing written


BAD_KEYS = {
    "segment_m": ("segment_m = 25", "segment_m = 0", ["s.toml", "corridor.segment_m"]),
    "half_width": ("half_width_m = 6", "half_width_m = -1", ["s.toml", "corridor.half_width_m"]),
    "angle_low": ("angle_of_reach_deg = 20", "angle_of_reach_deg = 4",
                  ["s.toml", "runout.angle_of_reach_deg"]),
    "angle_high": ("angle_of_reach_deg = 20", "angle_of_reach_deg = 46",
                   ["s.toml", "runout.angle_of_reach_deg"]),
    "crs": ("half_width_m = 6", 'half_width_m = 6\ncentreline_crs = "EPSG:99999999"',
            ["s.toml", "corridor.centreline_crs"]),
}


@pytest.mark.parametrize("case", sorted(BAD_KEYS))
def test_bad_corridor_keys_exit_2(tmp_path, capsys, case):
    old, new, names = BAD_KEYS[case]
    path = write_inputs(tmp_path)
    path.write_text(SCENARIO.replace(old, new), encoding="utf-8")
    assert_bad(capsys, tmp_path, names)


def test_empty_centreline_exit_2(tmp_path, capsys):
    write_inputs(tmp_path)
    (tmp_path / "road.geojson").write_text('{"type": "FeatureCollection", "features": []}')
    assert_bad(capsys, tmp_path, ["road.geojson", "centreline"])


def test_centreline_of_points_exit_2(tmp_path, capsys):
    write_inputs(tmp_path)
    doc = json.loads((tmp_path / "road.geojson").read_text())
    doc["features"][0]["geometry"] = {"type": "Point", "coordinates": road_xy()[0]}
    (tmp_path / "road.geojson").write_text(json.dumps(doc))
    assert_bad(capsys, tmp_path, ["road.geojson", "centreline", "Point"])


def test_centreline_outside_the_dem_exit_2_unless_clipped(tmp_path, capsys):
    xy = road_xy()
    xy[-1][0] += 40.0                             # 37.5 m past the east edge (x = X0 + 150)
    write_inputs(tmp_path, line=xy)
    line = main(["check", str(tmp_path / "s.toml")])
    err = capsys.readouterr().err
    assert line == 2 and "road.geojson" in err and "clip_to_dem" in err
    import re

    # says by how far: 37.5 m east of the edge along a piece rising 3 m in 77.5 m (hand)
    outside = float(re.search(r"centreline: ([\d.]+) m of", err).group(1))
    assert abs(outside - 37.5 * math.hypot(77.5, 3.0) / 77.5) <= 1.0
    (tmp_path / "s.toml").write_text(SCENARIO.replace("half_width_m = 6",
                                                      "half_width_m = 6\nclip_to_dem = true"))
    assert main(["-q", "run", str(tmp_path / "s.toml")]) == 0
    rows = table(tmp_path / "out")
    assert float(rows[-1]["to_m"]) < 185.0                      # the off-DEM segments are left out


def test_centreline_without_crs_exit_2(tmp_path, capsys):
    write_inputs(tmp_path)
    # GeoPackage without a CRS (GeoJSON without one is WGS 84 by its standard)
    import shapely
    from pyogrio.raw import write

    import warnings

    (tmp_path / "road.geojson").unlink()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)          # pyogrio: "'crs' was not provided"
        write(str(tmp_path / "road.gpkg"), np.array([shapely.to_wkb(shapely.LineString(road_xy()))],
                                                    dtype=object), [], [], driver="GPKG",
              geometry_type="LineString")
    (tmp_path / "s.toml").write_text(SCENARIO.replace("road.geojson", "road.gpkg"))
    assert_bad(capsys, tmp_path, ["road.gpkg", "centreline_crs"])


def test_report_names_the_worst_stretches_and_the_sensitivity(run):
    import html
    import re

    _, out, manifest = run
    text = html.unescape(re.sub(r"<[^>]+>", " ", (out / "report.html").read_text(encoding="utf-8")))
    text = re.sub(r"\s+", " ", text).replace("\u00a0", " ")
    glance = text[text.index("What fails where"):text.index("Cautions")]
    assert "Along the corridor under “wet”, runout can reach" in glance     # the first screen
    rows = table(out)
    [(a, b, _h)] = __import__("slopescreen.report.corridor", fromlist=["x"]).worst_stretches(
        [{k: float(v) if k in ("from_m", "to_m", "hazard") else v for k, v in r.items()}
         | {"hazard_rank": int(r["hazard_rank"])} for r in rows], most=1)
    assert f"chainage {a:,.0f}–{b:,.0f} m" in glance
    assert "Worst segments under “wet”" in text and "Hazard along the corridor" in text
    [record] = manifest["runout"]
    assert record["segments_reached_lower_angle"] >= record["segments_reached"]
    assert "with every angle of reach 3° lower" in text
    assert manifest["corridor"]["segment_m"] == 25 and manifest["runout_settings"][
        "angle_of_reach_deg"] == 20


def test_probability_threshold_sources_are_the_patches_scipy_labels(tmp_path):
    from scipy import ndimage

    text = SCENARIO.replace("angle_of_reach_deg = 20",
                            "angle_of_reach_deg = 20\nsource_failure_probability = 0.5")
    path = write_inputs(tmp_path, text=text)
    assert main(["-q", "run", str(path)]) == 0
    out = tmp_path / "out"
    manifest = json.loads((out / "manifest.json").read_text())
    [e] = [p for p in manifest["products"] if p["key"] == "failure_probability" and p["kind"] == "raster"]
    pf = read_back(out / e["path"])[0]
    _, n = ndimage.label(np.nan_to_num(pf) >= 0.5, structure=np.ones((3, 3)))   # scipy
    _, paths, _ = read_layer(out / "runout_paths.gpkg")
    assert len(paths["source"]) == n > 0
    assert set(paths["source_kind"]) == {"failure_probability"}
    assert (paths["source_failure_probability"] >= 0.5).all()


def test_a_culvert_breaches_the_road_fill_before_routing(tmp_path):
    # a ridge (road fill) 3 m high across the plane along the road row: without a culvert the
    # fill ponds the slope above; with one, the run's catchment area equals the area routed on
    # the DEM breached by the public functions (slopescreen.corridor.breach, then
    # Priority-Flood and specific_catchment_area), and differs from the run without it
    import rasterio

    from slopescreen.corridor import breach, crossing_cells, culvert_crossings
    from slopescreen.grid import Grid
    from slopescreen.routing import specific_catchment_area
    from slopescreen.terrain import fill_depressions

    z = tilted_plane(rows=ROWS, cols=COLS, cell=CELL, gradient=0.75)
    z[ROAD_ROW - 1:ROAD_ROW + 2] += 3.0
    write_inputs(tmp_path)
    write_tif(tmp_path / "dem.tif", z)
    y = Y0 - (ROAD_ROW + 0.5) * CELL
    straight = [[X0 + 2.5, y], [X0 + COLS * CELL - 2.5, y]]
    write_line_geojson(tmp_path / "road.geojson", straight)
    doc = {"type": "FeatureCollection",
           "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32633"}},
           "features": [{"type": "Feature", "properties": {}, "geometry": {
               "type": "Point", "coordinates": [X0 + 15.5 * CELL, y + 1.0]}}]}
    (tmp_path / "culverts.geojson").write_text(json.dumps(doc))
    plain = SCENARIO.replace("[uncertainty]\nsamples = 20\nseed = 5\n", "")
    with_culvert = plain.replace("half_width_m = 6", 'half_width_m = 6\nculverts = "culverts.geojson"')
    sca = {}
    for name, text in (("plain", plain), ("culvert", with_culvert)):
        (tmp_path / "s.toml").write_text(text.replace('output = "out"', f'output = "{name}"'))
        assert main(["-q", "run", str(tmp_path / "s.toml")]) == 0
        with rasterio.open(tmp_path / name / "specific_catchment_area.tif") as src:
            sca[name] = src.read(1, masked=True).filled(np.nan)
    import shapely

    grid = Grid.regular(z.shape, west=X0, north=Y0, cell_m=CELL)
    ends = culvert_crossings([(X0 + 15.5 * CELL, y + 1.0)], shapely.LineString(straight), 6.0,
                             grid).ends
    breached = breach(z, crossing_cells(ends, grid), dx=CELL, dy=CELL)
    expected = specific_catchment_area(fill_depressions(breached), CELL, CELL, method="dinf")
    np.testing.assert_allclose(sca["culvert"], np.asarray(expected, dtype=np.float32), rtol=1e-5)
    assert not np.allclose(sca["plain"], sca["culvert"], equal_nan=True)
