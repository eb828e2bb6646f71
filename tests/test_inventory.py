"""Mapped landslides on the grid and whole runs with [inventory].

Outside references: ``rasterio.features.rasterize`` of the same polygons on the whole grid
(cell-centre and all-touched rules); shapely distances for buffered points; pyproj for an
inventory drawn in another CRS; ``scipy.stats.mannwhitneyu`` on the factor of safety read back
from the run's GeoTIFF for the AUC in ``inventory_scores.json``; the one-line, exit-2,
nothing-written contract for bad input.
"""

import json

import numpy as np
import pytest
import shapely
from pyproj import Transformer
from rasterio import features
from scipy import stats

from conftest import write_tif
from slopescreen.cli import main
from slopescreen.errors import InputError, InputWarning
from slopescreen.grid import Grid, read_back
from slopescreen.inventory.landslides import landslide_cells, read_inventory
from slopescreen.scenario.model import Inventory

CELL = 5.0
X0, Y0 = 500000.0, 5100000.0
ROWS, COLS = 40, 36


def grid_of(rows=ROWS, cols=COLS, valid=None):
    g = Grid.regular((rows, cols), west=X0, north=Y0, cell_m=CELL, crs="EPSG:32633")
    if valid is not None:
        from dataclasses import replace

        g = replace(g, valid=valid)
    return g


def write_features(path, geoms, *, epsg=32633, props=None, crs=True):
    """GeoJSON FeatureCollection of shapely geometries (test input)."""
    feats = []
    for i, g in enumerate(geoms):
        p = {"id": i + 1} | ({} if props is None else props[i])
        feats.append({"type": "Feature", "properties": p, "geometry": shapely.geometry.mapping(g)})
    doc = {"type": "FeatureCollection", "features": feats}
    if crs:
        doc["crs"] = {"type": "name", "properties": {"name": f"urn:ogc:def:crs:EPSG::{epsg}"}}
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path


def random_polygons(rng, n):
    out = []
    for _ in range(n):
        cx = X0 + rng.uniform(-20, COLS * CELL + 20)
        cy = Y0 - rng.uniform(-20, ROWS * CELL + 20)
        k = rng.integers(3, 9)
        ang = np.sort(rng.uniform(0, 2 * np.pi, k))
        rad = rng.uniform(3, 25, k)
        out.append(shapely.Polygon(np.column_stack([cx + rad * np.cos(ang),
                                                    cy + rad * np.sin(ang)])).buffer(0))
    return [g for g in out if not g.is_empty]


@pytest.mark.parametrize("all_touched", [False, True])
def test_polygon_cells_equal_rasterio_rasterize_on_the_whole_grid(all_touched):
    # outside reference: rasterio.features.rasterize of each polygon on the full grid
    rng = np.random.default_rng(11)
    grid = grid_of()
    polys = random_polygons(rng, 40)
    polys.append(shapely.MultiPolygon([shapely.box(X0 + 10, Y0 - 40, X0 + 31, Y0 - 12),
                                       shapely.box(X0 + 60, Y0 - 90, X0 + 72.5, Y0 - 61)]))
    for g in polys:
        ours = landslide_cells(g, grid, all_touched=all_touched)
        ref = features.rasterize([(g, 1)], out_shape=grid.shape, transform=grid.transform,
                                 all_touched=all_touched, fill=0, dtype="uint8")
        assert ours.tolist() == np.flatnonzero(ref.reshape(-1)).tolist()


def test_points_take_their_cell_and_the_cells_within_the_buffer():
    # outside reference: shapely distance from each cell centre to the point
    grid = grid_of()
    p = shapely.Point(X0 + 52.3, Y0 - 71.9)
    assert landslide_cells(p, grid).tolist() == [int((71.9 // CELL) * COLS + 52.3 // CELL)]
    rows, cols = np.mgrid[0:ROWS, 0:COLS]
    centres = shapely.points(X0 + (cols.ravel() + 0.5) * CELL, Y0 - (rows.ravel() + 0.5) * CELL)
    near = np.flatnonzero(shapely.distance(centres, p) <= 12.0)
    own = int((71.9 // CELL) * COLS + 52.3 // CELL)
    got = landslide_cells(p, grid, point_buffer_m=12.0)
    assert got.tolist() == sorted(set(near.tolist()) | {own})


def test_nodata_cells_never_count():
    valid = np.ones((ROWS, COLS), dtype=bool)
    valid[:, :10] = False
    grid = grid_of(valid=valid)
    cells = landslide_cells(shapely.box(X0, Y0 - 50, X0 + 100, Y0), grid)
    assert cells.size and (cells % COLS >= 10).all()


def _plane(rows=ROWS, cols=COLS, gradient=0.7):
    r = np.arange(rows)[:, None] * np.ones((1, cols))
    return (600.0 - gradient * CELL * r).astype(np.float32)


def test_scar_keeps_the_upper_half_of_the_relief(tmp_path):
    # hand geometry: a box over rows 4..13 on a plane falling southward keeps rows 4..8
    # (z >= (z_min + z_max) / 2), the whole box with score_part = "whole"
    grid = grid_of()
    z = _plane()
    box = shapely.box(X0 + 20, Y0 - 14 * CELL, X0 + 40, Y0 - 4 * CELL)
    path = write_features(tmp_path / "slides.geojson", [box])
    scar = read_inventory(Inventory(landslides=path), grid, z)
    whole = read_inventory(Inventory(landslides=path, score_part="whole"), grid, z)
    rows = np.unique(scar.positive_index // COLS)
    assert rows.tolist() == [4, 5, 6, 7, 8]
    assert np.unique(whole.positive_index // COLS).tolist() == list(range(4, 14))
    assert scar.whole_cells == whole.positive_index.size == 40


def test_inventory_in_another_crs_gives_the_cells_of_the_reprojected_polygons(tmp_path):
    # outside reference: pyproj moves the vertices to the DEM's CRS first
    grid = grid_of()
    z = _plane()
    rng = np.random.default_rng(3)
    polys = [g for g in random_polygons(rng, 12) if g.geom_type == "Polygon"]
    to_ll = Transformer.from_crs("EPSG:32633", "EPSG:4326", always_xy=True)
    back = Transformer.from_crs("EPSG:4326", "EPSG:32633", always_xy=True)
    ll = [shapely.transform(g, lambda xy: np.column_stack(to_ll.transform(xy[:, 0], xy[:, 1])))
          for g in polys]
    moved = [shapely.transform(g, lambda xy: np.column_stack(back.transform(xy[:, 0], xy[:, 1])))
             for g in ll]
    path = write_features(tmp_path / "ll.geojson", ll, epsg=4326)
    with pytest.warns(InputWarning, match="3 of 12 selected landslides lie off"):
        got = read_inventory(Inventory(landslides=path, score_part="whole"), grid, z)
    on = [c for c in (landslide_cells(g, grid) for g in moved)]
    assert [c.tolist() for c in got.landslide_cells] == [c.tolist() for c in on]


def test_event_and_type_select_features(tmp_path):
    grid = grid_of()
    z = _plane()
    boxes = [shapely.box(X0 + 5 + 30 * i, Y0 - 60, X0 + 25 + 30 * i, Y0 - 40) for i in range(4)]
    props = [{"storm": "2021-01-15", "kind": "Debris slide"}, {"storm": "2019", "kind": "rockfall"},
             {"storm": "2021-01-15", "kind": "rockfall"}, {"storm": 2019, "kind": "debris slide"}]
    path = write_features(tmp_path / "s.geojson", boxes, props=props)
    inv = read_inventory(Inventory(landslides=path, event_field="storm", event="2021-01-15",
                                   type_field="kind", types=("debris slide",),
                                   score_part="whole"), grid, z)
    assert inv.n_features == 4 and inv.n_selected == 1
    assert inv.positive_index.tolist() == landslide_cells(boxes[0], grid).tolist()
    inv = read_inventory(Inventory(landslides=path, event_field="storm", event="2019",
                                   score_part="whole"), grid, z)
    assert inv.n_selected == 2
    with pytest.raises(InputError, match=r"s.geojson: \[inventory\] event: no feature has storm"):
        read_inventory(Inventory(landslides=path, event_field="storm", event="2020"), grid, z)
    with pytest.raises(InputError, match=r"has no attribute 'date'"):
        read_inventory(Inventory(landslides=path, event_field="date", event="2020"), grid, z)


# ---------------------------------------------------------------------------------------------
# Whole runs
# ---------------------------------------------------------------------------------------------

UNIT = """
label = "{label}"
depth_m = 1.2
cohesion_kpa = {c}
root_cohesion_kpa = 1.0
friction_deg = {phi}
unit_weight_kn_m3 = 18.5
conductivity_m_per_day = 2.0
"""

SCENARIO = """
dem = "dem.tif"
output = "out"
dem_date = 2022-06-01
[soil]
map = "soils.tif"
[soil.units.1]
""" + UNIT.format(label="till", c=3.0, phi=36.0) + """
[soil.units.2]
""" + UNIT.format(label="colluvium", c=0.5, phi=33.0) + """
[[rain]]
name = "wet"
steady_mm_per_day = 60
[[rain]]
name = "dry"
steady_mm_per_day = 0
[inventory]
landslides = "slides.geojson"
score_part = "whole"
date = 2021-02-01
"""


def hummocky(seed=4):
    """A rough slope (test input): a plane with seeded bumps, so FS varies from cell to cell."""
    rng = np.random.default_rng(seed)
    r, c = np.mgrid[0:ROWS, 0:COLS]
    z = 600.0 - 0.55 * CELL * r + 3.0 * np.sin(c / 3.1) * np.cos(r / 4.3)
    return (z + rng.normal(0, 0.3, z.shape)).astype(np.float32)


def write_run(folder, text=SCENARIO, slides=None):
    write_tif(folder / "dem.tif", hummocky())
    soils = np.ones((ROWS, COLS), dtype=np.uint8)
    soils[:, 18:] = 2
    write_tif(folder / "soils.tif", soils, nodata=0, dtype="uint8")
    if slides is None:
        slides = [shapely.box(X0 + 10 + 25 * (i % 5), Y0 - 30 - 60 * (i // 5),
                              X0 + 22 + 25 * (i % 5), Y0 - 12 - 60 * (i // 5)) for i in range(10)]
    write_features(folder / "slides.geojson", slides)
    p = folder / "s.toml"
    p.write_text(text, encoding="utf-8")
    return p, slides


def test_run_scores_the_factor_of_safety_as_mann_whitney(tmp_path):
    # outside references: rasterio.features.rasterize of the polygons, and
    # scipy.stats.mannwhitneyu on the factor of safety read back from the GeoTIFF
    path, slides = write_run(tmp_path)
    assert main(["run", str(path), "--quiet"]) == 0
    out = tmp_path / "out"
    manifest = json.loads((out / "manifest.json").read_text())
    entry = [p for p in manifest["products"] if p["key"] == "inventory_scores"]
    assert entry == [{"key": "inventory_scores", "rain": None, "path": "inventory_scores.json",
                      "kind": "json", "units": "1"}]
    doc = json.loads((out / "inventory_scores.json").read_text())
    grid = grid_of()
    mask = features.rasterize([(g, 1) for g in slides], out_shape=grid.shape,
                              transform=grid.transform, fill=0, dtype="uint8").astype(bool)
    assert doc["inventory"]["cells"] == int(mask.sum())
    assert doc["inventory"]["landslides_scored"] == 10
    for rain in ("wet", "dry"):
        fs, _ = read_back(out / f"factor_of_safety_{rain}.tif")
        have = np.isfinite(fs)
        pos, neg = fs[mask & have], fs[~mask & have]
        u = stats.mannwhitneyu(-pos.astype(np.float64), -neg.astype(np.float64)).statistic
        row = next(r for r in doc["scores"]
                   if r["product"] == "factor_of_safety" and r["rain"] == rain)
        assert row["n_positive_cells"] == pos.size and row["n_negative_cells"] == neg.size
        assert row["auc"] == pytest.approx(u / (pos.size * neg.size), abs=1e-12)
        lo, hi = row["auc_interval"]
        assert lo <= row["auc"] <= hi
        t = row["threshold"]
        assert t["true_positive_rate"] == pytest.approx(np.mean(pos < 1.0))
        assert t["area_flagged_share"] == pytest.approx(np.mean(fs[have] < 1.0))
        assert t["true_skill_statistic"] == pytest.approx(np.mean(pos < 1.0) - np.mean(neg < 1.0))
    recharge = next(r for r in doc["scores"] if r["product"] == "critical_recharge")
    assert recharge["rain"] is None
    # the DEM (2022) postdates the landslides (2021): a caution in the manifest and the report
    assert any("DEM after the landslides" in c for c in manifest["cautions"])
    report = (out / "report.html").read_text(encoding="utf-8")
    assert "Agreement with mapped landslides" in report
    assert "DEM after the landslides" in report
    assert "Against the 10 mapped landslides" in report


def test_units_with_enough_landslides_are_scored_on_their_own(tmp_path):
    path, slides = write_run(tmp_path)
    assert main(["run", str(path), "--quiet"]) == 0
    doc = json.loads((tmp_path / "out" / "inventory_scores.json").read_text())
    row = next(r for r in doc["scores"] if r["product"] == "factor_of_safety" and r["rain"] == "wet")
    # 10 boxes: columns 10..22, 35..47, 60..72 m lie in unit 1 (x < 90 m), 85..97 straddles,
    # 110..122 in unit 2: neither unit holds 10 landslides
    assert row["units"] == []
    assert {u["unit"] for u in row["units_not_scored"]} == {1, 2}


def _bad(tmp_path, capsys, text=SCENARIO, slides=None, write=None):
    path, _ = write_run(tmp_path, text, slides)
    if write is not None:
        write(tmp_path / "slides.geojson")
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir() if p.is_file()}
    code = main(["run", str(path), "--quiet"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2
    assert len(err) == 1
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").iterdir())
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir() if p.is_file()} == before
    return err[0]


def test_empty_inventory_is_refused(tmp_path, capsys):
    line = _bad(tmp_path, capsys, write=lambda p: p.write_text(json.dumps(
        {"type": "FeatureCollection", "features": [],
         "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32633"}}})))
    assert "slides.geojson: [inventory] landslides: holds no features" in line


def test_inventory_of_lines_is_refused(tmp_path, capsys):
    line = _bad(tmp_path, capsys, slides=[shapely.LineString([(X0 + 5, Y0 - 5), (X0 + 50, Y0 - 50)])])
    assert "[inventory] landslides: feature 1 of 1 is a LineString" in line


def test_inventory_without_crs_is_refused(tmp_path, capsys):
    line = _bad(tmp_path, capsys, write=lambda p: write_features(
        p, [shapely.box(X0 + 10, Y0 - 40, X0 + 40, Y0 - 10)], crs=False))
    assert "slides.geojson: [inventory] landslides" in line


def test_inventory_outside_the_dem_is_refused(tmp_path, capsys):
    far = [shapely.box(X0 - 900, Y0 - 900, X0 - 800, Y0 - 800)]
    line = _bad(tmp_path, capsys, slides=far)
    assert "none of the 1 selected landslides lies on a valid cell" in line


def test_inventory_of_too_few_cells_is_refused(tmp_path, capsys):
    small = [shapely.box(X0 + 10, Y0 - 20, X0 + 20, Y0 - 10)]            # 4 cells
    line = _bad(tmp_path, capsys, slides=small)
    assert "cover 4 valid DEM cells; at least 10" in line


def test_check_finds_an_unknown_event_before_computing(tmp_path, capsys):
    text = SCENARIO.replace('score_part = "whole"', 'event_field = "id"\nevent = "99"')
    path, _ = write_run(tmp_path, text)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "[inventory] event: no feature has id = '99'" in err[0]


def test_inventory_keys_are_checked_when_the_scenario_is_read(tmp_path, capsys):
    for old, bad, message in (
            ('score_part = "whole"', 'event = "x"', "needs event_field as well"),
            ('score_part = "whole"', 'score_part = "toe"', "expected one of scar, whole"),
            ('score_part = "whole"', "point_buffer_m = -1", "must be >= 0"),
            ("date = 2021-02-01", 'date = "yesterday"', "expected a date")):
        text = SCENARIO.replace(old, bad)
        path, _ = write_run(tmp_path, text)
        assert main(["check", str(path)]) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and message in err[0], err


def test_a_unit_with_ten_landslides_is_scored_on_its_own_cells(tmp_path):
    # outside reference: scipy.stats.mannwhitneyu on the cells of soil unit 2 only
    slides = [shapely.box(X0 + 100 + 20 * (i % 4), Y0 - 20 - 45 * (i // 4),
                          X0 + 110 + 20 * (i % 4), Y0 - 10 - 45 * (i // 4)) for i in range(12)]
    slides += [shapely.box(X0 + 10, Y0 - 60, X0 + 30, Y0 - 40)]            # one in unit 1
    path, slides = write_run(tmp_path, slides=slides)
    assert main(["run", str(path), "--quiet"]) == 0
    out = tmp_path / "out"
    doc = json.loads((out / "inventory_scores.json").read_text())
    row = next(r for r in doc["scores"] if r["product"] == "factor_of_safety" and r["rain"] == "wet")
    assert [u["unit"] for u in row["units"]] == [2]
    assert row["units_not_scored"] == [{"unit": 1, "label": "till", "landslides": 1,
                                        "reason": "fewer than 10 landslides"}]
    grid = grid_of()
    mask = features.rasterize([(g, 1) for g in slides], out_shape=grid.shape,
                              transform=grid.transform, fill=0, dtype="uint8").astype(bool)
    fs, _ = read_back(out / "factor_of_safety_wet.tif")
    east = np.zeros(grid.shape, bool)
    east[:, 18:] = True
    pos, neg = fs[mask & east], fs[~mask & east & np.isfinite(fs)]
    u = stats.mannwhitneyu(-pos.astype(np.float64), -neg.astype(np.float64)).statistic
    unit = row["units"][0]
    assert (unit["n_positive_cells"], unit["n_negative_cells"]) == (pos.size, neg.size)
    assert unit["n_landslides"] == 12
    assert unit["auc"] == pytest.approx(u / (pos.size * neg.size), abs=1e-12)
    assert unit["threshold"]["true_positive_rate"] == pytest.approx(np.mean(pos < 1.0))
