"""The one-way pipeline: the plan, frozen stage results, the registry and soil fields by unit.

The physics of each stage is checked elsewhere against outside references; here the checks
are the defining properties of the runner (every stage reads only results made before it,
results cannot be changed, every product is described by the registry) and, for the soil
fields, the public factor-of-safety function evaluated with per-cell parameter arrays as the
oracle (the handbook infinite-slope form of docs/methods.md, "Infinite-slope factor of
safety").
"""

import dataclasses
import json

import numpy as np
import pytest

from conftest import tilted_plane, write_line_geojson, write_tif
from slopescreen import pipeline, products
from slopescreen.cli import main
from slopescreen.grid import read_back
from slopescreen.parameters import fixed, uniform
from slopescreen.pipeline.order import Many, _last_uses
from slopescreen.scenario import load_scenario
from slopescreen.scenario.model import SoilUnit
from slopescreen.soil import soil_fields
from slopescreen.stability import factor_of_safety

SCENARIO = """
dem = "dem.tif"
output = "out"
[soil]
[soil.units.1]
label = "colluvium"
depth_m = 1.2
cohesion_kpa = 2.0
root_cohesion_kpa = { uniform = [1.0, 3.0] }
friction_deg = 34.0
unit_weight_kn_m3 = 18.0
conductivity_m_per_day = 2.0
diffusivity_m2_per_s = 5.0e-5
[[rain]]
name = "wet"
steady_mm_per_day = 40
[[rain]]
name = "storm"
storm_mm_per_h = 12
duration_h = 6
water_table_depth_m = 0.9
[uncertainty]
samples = 8
seed = 3
[clusters]
min_area_m2 = 25
max_area_m2 = 2500
size_windows = 0
[corridor]
centreline = "road.geojson"
segment_m = 50
"""


@pytest.fixture
def case(tmp_path):
    write_tif(tmp_path / "dem.tif", tilted_plane(rows=30, cols=24, cell=5.0, gradient=0.7))
    # across the plane along row 20 (5 m cells from 500000, 5100000)
    write_line_geojson(tmp_path / "road.geojson", [[500002.0, 5099897.5], [500118.0, 5099897.5]])
    path = tmp_path / "s.toml"
    path.write_text(SCENARIO, encoding="utf-8")
    return path


def test_every_stage_reads_only_results_made_before_it(case):
    stages = pipeline.plan(load_scenario(case))
    made = set()
    for st in stages:
        for need in st.needs.values():
            keys = need.keys if isinstance(need, Many) else (need,)
            for key in keys:
                assert key in made or key in (("written",), ("manifest",)), (st.name, key)
        assert st.key not in made                      # one stage per result
        made.add(st.key)
    names = [s.name for s in stages]
    assert names[:3] == ["conditioning", "routing", "slope"]
    assert names.index("routing") < names.index("critical recharge") < names.index("stability: wet")
    assert names.index("stability: storm") < names.index("clusters: storm")
    assert names[-2:] == ["maps", "report"]


def test_results_are_let_go_after_their_last_reader(case):
    stages = pipeline.plan(load_scenario(case))
    last = _last_uses(stages)
    index = {s.key: i for i, s in enumerate(stages)}
    assert last[("conditioned",)] == index[("runout", "storm")]   # the filled DEM serves runout last
    assert last[("stability", "wet")] < index[("stability", "storm")]


def test_plan_gives_progress_and_not_run_notes(case):
    scenario = load_scenario(case)
    assert pipeline.planned_stages(scenario) == [s.name for s in pipeline.plan(scenario) if s.show]
    assert pipeline.stages_not_run(scenario) == []


def test_stage_results_are_frozen(case, capsys):
    from slopescreen.pipeline.inputs import read_inputs
    from slopescreen.pipeline.terrain_stage import slope_stage

    scenario = load_scenario(case)
    inputs = read_inputs(scenario)
    result = slope_stage(scenario, inputs)
    with pytest.raises(dataclasses.FrozenInstanceError):
        result.slope_deg = None
    with pytest.raises(dataclasses.FrozenInstanceError):
        inputs.z = None


def test_every_product_written_is_in_the_registry_with_its_units_and_type(case, capsys):
    assert main(["-q", "run", str(case)]) == 0, capsys.readouterr().err
    out = case.parent / "out"
    manifest = json.loads((out / "manifest.json").read_text())
    keys = set()
    for entry in manifest["products"]:
        spec = products.spec(entry["key"])
        keys.add(entry["key"])
        assert entry["kind"] == spec.kind or entry["kind"] in spec.extra_kinds
        if entry["key"] != "map":
            assert (entry["rain"] is not None) == spec.per_rain
        if entry["kind"] == "raster":
            assert entry["units"] == spec.units
            import rasterio

            with rasterio.open(out / entry["path"]) as src:
                assert src.dtypes[0] == spec.dtype
                assert src.tags(1)["units"] == spec.units
                assert "Screening" in src.tags()["CAUTION"] or "screening" in src.tags()["CAUTION"]
    # storm extras, probability and clusters all ran
    assert {"storm_flags", "failure_probability", "cluster_fs_bound", "clusters", "report",
            "runout_count", "runout_volume", "runout_paths", "corridor_segments"} <= keys
    kinds = {e["kind"] for e in manifest["products"] if e["key"] == "corridor_segments"}
    assert kinds == {"vector", "csv"}
    maps = {e["path"] for e in manifest["products"] if e["key"] == "map"}
    assert {f"map_{k}.png" for k in ("slope", "specific_catchment_area", "critical_recharge")} <= maps


def _unit(code, depth, phi):
    return SoilUnit(code=code, label=f"u{code}", depth_m=fixed(depth), cohesion_kpa=fixed(1.5),
                    root_cohesion_kpa=uniform(0.0, 2.0), lateral_root_cohesion_kpa=fixed(3.0),
                    friction_deg=fixed(phi), unit_weight_kn_m3=fixed(18.0),
                    conductivity_m_per_day=fixed(2.0), diffusivity_m2_per_s=None)


def _fs(soil, slope, wet):
    return soil.by_unit(
        lambda **kw: factor_of_safety(kw.pop("slope_deg"), kw.pop("depth_m"), kw.pop("wet"), **kw),
        {"slope_deg": slope, "wet": wet},
        {"depth_m": "depth_m", "cohesion_kpa": "cohesion_kpa",
         "root_cohesion_kpa": "root_cohesion_kpa", "friction_deg": "friction_deg",
         "unit_weight_kn_m3": "unit_weight_kn_m3"})


def test_soil_fields_by_unit_match_per_cell_parameter_maps():
    rng = np.random.default_rng(11)
    units = [_unit(1, 1.0, 33.0), _unit(4, 1.8, 38.0), _unit(9, 0.7, 30.0)]
    codes = rng.choice([1, 4, 9, -1], size=(40, 50))
    valid = rng.random((40, 50)) > 0.05
    soil = soil_fields(units, codes, valid)
    assert soil.index.dtype == np.int8
    slope = np.where(soil.valid, rng.uniform(5, 45, codes.shape), np.nan).astype(np.float32)
    wet = rng.uniform(0, 1, codes.shape).astype(np.float32)
    got = _fs(soil, slope, wet)
    # oracle: the public function with a per-cell raster of each parameter
    lut = {c: u for c, u in zip((1, 4, 9), units)}

    def per_cell(key):
        out = np.full(codes.shape, np.nan, dtype=np.float32)
        for c, u in lut.items():
            out[(codes == c) & valid] = getattr(u, key).central()
        return out

    expected = factor_of_safety(
        slope, per_cell("depth_m"), wet, cohesion_kpa=per_cell("cohesion_kpa"),
        root_cohesion_kpa=per_cell("root_cohesion_kpa"), friction_deg=per_cell("friction_deg"),
        unit_weight_kn_m3=per_cell("unit_weight_kn_m3"))
    np.testing.assert_array_equal(got, expected)
    assert np.isnan(got[~soil.valid]).all()


def test_one_unit_passes_numbers_and_makes_no_parameter_raster():
    valid = np.ones((20, 30), dtype=bool)
    valid[0, :5] = False
    soil = soil_fields([_unit(2, 1.1, 35.0)], None, valid)
    assert soil.index is None
    seen = []

    def spy(slope_deg, depth_m):
        seen.append(np.ndim(depth_m))
        return slope_deg * depth_m

    slope = np.where(valid, 30.0, np.nan).astype(np.float32)
    out = soil.by_unit(spy, {"slope_deg": slope}, {"depth_m": "depth_m"})
    assert seen == [0]                                   # one call with a number
    assert np.isnan(out[0, 0]) and out[5, 5] == pytest.approx(33.0, rel=1e-6)
    assert soil.index_array().dtype == np.int8 and soil.index_array()[0, 0] == -1
    assert soil.varies                                   # root cohesion is a distribution


def test_products_written_in_strips_read_back_exactly(tmp_path):
    # a grid that is not a whole number of 256-cell tiles in either direction
    from slopescreen.grid import Grid, write_raster
    from rasterio.transform import from_origin
    from rasterio.crs import CRS

    rows, cols = 300, 530
    rng = np.random.default_rng(5)
    valid = rng.random((rows, cols)) > 0.1
    grid = Grid(transform=from_origin(0, 0, 2, 2), crs=CRS.from_epsg(32633), shape=(rows, cols),
                dx_m=2.0, dy_m=2.0, valid=valid, path=tmp_path / "dem.tif")
    data = rng.normal(size=(rows, cols)).astype(np.float32)
    data[3, 4] = np.nan
    write_raster(tmp_path / "p.tif", data, grid, description="d", units="1", caution="c")
    expected = np.where(valid & np.isfinite(data), data, np.nan)
    np.testing.assert_array_equal(read_back(tmp_path / "p.tif")[0], expected.astype(np.float64))
    classes = rng.integers(1, 4, size=(rows, cols)).astype(np.uint8)
    write_raster(tmp_path / "c.tif", classes, grid, description="d", units="class", caution="c")
    got = read_back(tmp_path / "c.tif")[0]
    np.testing.assert_array_equal(got, np.where(valid, classes, np.nan))


def test_figures_computed_in_memory_equal_figures_from_the_written_products(case, monkeypatch):
    # The run sums each array while it is in memory; a report made from the products alone
    # reads them back. Both must quote the same numbers (the products are the reference).
    from slopescreen.report import html
    from slopescreen.report.figures import figures_from_products
    from slopescreen.terrain import slope_aspect

    seen = {}
    real = html.render_report

    def capture(ctx):
        seen["ctx"] = ctx
        return real(ctx)

    monkeypatch.setattr(html, "render_report", capture)
    result = pipeline.run(load_scenario(case))
    ctx = seen["ctx"]
    out = result.output
    z, _ = read_back(case.parent / "dem.tif")
    _slope, aspect = slope_aspect(z.astype(np.float32), 5.0, 5.0)
    reread = dataclasses.replace(
        ctx, figures=None, read=lambda e: read_back(out / e["path"])[0].astype(np.float32),
        slope_deg=read_back(out / "slope.tif")[0].astype(np.float32), aspect_deg=aspect,
        unit_index=np.where(np.isfinite(z), 0, -1), unit_labels=["colluvium"])
    again = figures_from_products(reread)
    assert set(again.cases) == set(ctx.figures.cases) == {"wet", "storm"}
    for name, fig in ctx.figures.cases.items():
        assert again.cases[name].facts == fig.facts
        assert again.cases[name].bands == fig.bands
        assert again.cases[name].flag_shares == fig.flag_shares
    assert ctx.figures.cases["storm"].flag_shares is not None
    assert again.recharge == ctx.figures.recharge
    assert dict(again.terrain) == dict(ctx.figures.terrain)


def test_a_failed_background_write_fails_the_run_and_leaves_nothing(case, monkeypatch):
    # rasters are written on a background thread; its failure must surface and roll back
    from slopescreen.pipeline import staging

    real = staging.write_raster

    def failing(path, *args, **kwargs):
        if "wetness" in path.name:
            raise OSError("disk full (simulated)")
        return real(path, *args, **kwargs)

    monkeypatch.setattr(staging, "write_raster", failing)
    with pytest.raises(OSError, match="disk full"):
        pipeline.run(load_scenario(case))
    out = case.parent / "out"
    # nothing but the hidden lock file (never removed: docs/outputs.md)
    assert not out.exists() or sorted(p.name for p in out.iterdir()) in ([], [".slopescreen.lock"])


def test_modular_faces_reach_the_layer_the_manifest_and_the_report(case, capsys):
    # with no passive resistance (passive_fraction = 0) the head and toe faces fail the
    # submodularity check: the answer must say it is not proven, in every place a reader looks
    from slopescreen.vectors import read_layer

    text = case.read_text(encoding="utf-8").replace("size_windows = 0",
                                                    "size_windows = 0\npassive_fraction = 0.0")
    case.write_text(text, encoding="utf-8")
    assert main(["-q", "run", str(case)]) == 0, capsys.readouterr().err
    out = case.parent / "out"
    manifest = json.loads((out / "manifest.json").read_text())
    search = {r["rain"]: r for r in manifest["cluster_search"]}
    assert set(search) == {"wet", "storm"}
    assert any(r["modular_faces"] > 0 for r in search.values())
    _geoms, columns, _meta = read_layer(out / "clusters.gpkg", layer="clusters")
    touching = np.asarray(columns["modular_faces"])
    proven = np.asarray(columns["proven"]).astype(bool)
    assert (touching > 0).any() and not proven[touching > 0].any()
    report = (out / "report.html").read_text(encoding="utf-8")
    assert "submodularity check" in report
    assert sum(r["not_proven"] for r in search.values()) >= 1
