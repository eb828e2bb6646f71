"""The built-in demo: a deterministic fictional valley and a full run to a readable report.

Outside references: the Laplacian of a surface is positive in concave (convergent) ground
(handbook calculus: a hollow is a local trough); the screening bands of common practice;
the GeoJSON structure of RFC 7946 (FeatureCollection of LineString / Polygon features,
closed polygon rings); areas are counted cell by cell from the GeoTIFF products.
"""

import json
from pathlib import Path

import numpy as np
import pytest
from scipy import ndimage

from slopescreen.demo import DEMO_SCENARIO, SOIL_UNITS, build_valley, run_demo
from slopescreen.grid import read_back
from slopescreen.scenario import load_scenario
from slopescreen.terrain import slope_aspect

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def valley():
    return build_valley()


def test_valley_is_deterministic(valley):
    again = build_valley()
    np.testing.assert_array_equal(valley.z, again.z)
    np.testing.assert_array_equal(valley.soil, again.soil)
    assert len(valley.landslides) == len(again.landslides)


def test_valley_has_crests_inside_the_grid_and_plausible_slopes(valley):
    z = valley.z
    rows, cols = z.shape
    north_crest = np.argmax(z[: rows // 2], axis=0)
    south_crest = rows // 2 + np.argmax(z[rows // 2:], axis=0)
    # the ground falls again beyond both crests: the crests run inside the grid
    assert north_crest.min() > 10 and south_crest.max() < rows - 10
    slope, _ = slope_aspect(z, valley.cell_m, valley.cell_m)
    p50, p90 = np.percentile(slope, [50, 90])
    assert 15.0 < p50 < 35.0 and p90 < 45.0
    assert set(np.unique(valley.soil)) == set(SOIL_UNITS)
    assert 0.1 < valley.cleared.mean() < 0.5                   # forest and clear-cut both present


def test_mapped_landslides_sit_in_hollows(valley):
    # a hollow is concave: the Laplacian of the (smoothed) surface is positive there
    lap = ndimage.laplace(ndimage.gaussian_filter(valley.z.astype(np.float64), 3.0))
    assert 5 <= len(valley.landslides) <= 12
    for ring in valley.landslides:
        cx, cy = ring[:-1].mean(axis=0)
        r, c = int(cy / valley.cell_m), int(cx / valley.cell_m)
        assert lap[r, c] > 0.0
        assert valley.soil[r, c] in (1, 2)                     # colluvium fills hollows


def test_road_is_benched_into_the_valley_side(valley):
    rows, cols = valley.z.shape
    assert valley.road[:, 0].min() <= 0.0 and valley.road[:, 0].max() >= (cols - 1) * valley.cell_m
    assert np.all((valley.road[:, 1] > 0) & (valley.road[:, 1] < rows * valley.cell_m))
    # across the 7 m bench the surface is level (a road), unlike the natural side slope
    r = (valley.road[:, 1] / valley.cell_m).astype(int)
    c = np.clip((valley.road[:, 0] / valley.cell_m).astype(int), 0, cols - 1)
    across = np.abs(valley.z[r, c] - valley.z[np.clip(r + 1, 0, rows - 1), c])
    assert np.median(across) < 0.6


def test_examples_hold_the_demo_scenario():
    assert (ROOT / "examples" / "verrow.toml").read_text(encoding="utf-8") == DEMO_SCENARIO


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo")
    result = run_demo(folder)
    return folder, result


def test_demo_inputs_are_valid_geojson_on_the_grid(demo):
    folder, result = demo
    grid = result.manifest["grid"]
    scenario = load_scenario(folder / "verrow.toml")
    _, tags = read_back(folder / "verrow_dem.tif")
    import rasterio

    with rasterio.open(folder / "verrow_dem.tif") as src:
        left, bottom, right, top = src.bounds
    road = json.loads(scenario.corridor.centreline.read_text())
    slides = json.loads(scenario.inventory.landslides.read_text())
    assert road["type"] == slides["type"] == "FeatureCollection"
    [line] = road["features"]
    assert line["geometry"]["type"] == "LineString"
    xy = np.array(line["geometry"]["coordinates"])
    assert xy[:, 0].min() >= left and xy[:, 1].max() <= top and xy[:, 1].min() >= bottom
    for f in slides["features"]:
        assert f["geometry"]["type"] == "Polygon"
        ring = f["geometry"]["coordinates"][0]
        assert ring[0] == ring[-1] and len(ring) >= 4            # closed ring (RFC 7946)
        xy = np.array(ring)
        assert left <= xy[:, 0].min() and xy[:, 0].max() <= right
        assert bottom <= xy[:, 1].min() and xy[:, 1].max() <= top
    assert grid["rows"] * grid["cols"] == grid["valid_cells"]


def test_demo_shows_a_realistic_mix_not_half_the_valley(demo):
    folder, result = demo
    out = result.output
    cases = [r["name"] for r in result.manifest["rain"]]
    assert len(cases) == 2 and any("storm_mm_per_h" in r for r in result.manifest["rain"])
    for case in cases:
        [e] = [p for p in result.manifest["products"] if p["key"] == "factor_of_safety" and p["rain"] == case and p["kind"] == "raster"]
        fs = read_back(out / e["path"])[0]
        below = np.mean(fs[np.isfinite(fs)] < 1.0)
        assert 0.005 < below < 0.10, (case, below)             # a screening mix, not a failing valley


def test_demo_writes_a_report_a_new_user_can_read(demo):
    folder, result = demo
    text = (result.output / "report.html").read_text(encoding="utf-8")
    assert "Verrow valley demo" in text
    assert "Under “wet season”" in text and "Under “design storm”" in text
    for section in ("runout", "corridor", "clusters", "inventory"):
        assert f"configures [{section}], but this stage did not run" not in text
    assert "Failing clusters per rain case" in text
    maps = [p for p in result.manifest["products"] if p["key"] == "map"]
    assert len(maps) == 13                                     # slope, SCA, q_cr, 5 per rain case
    # and the corridor chart, the agreement chart
    assert text.count("data:image/png;base64,") == len(maps) + 3   # and the overview map
    assert "mapped landslides (" in text and "Agreement with mapped landslides" in text
    assert "Hazard along the corridor" in text and "Along the corridor under “wet season”" in text
    assert "colluvium, clear-cut" in text
