"""Scenario validation: types, ranges, unknown keys, paths, messages."""

import pytest

from slopescreen.errors import InputError, ScenarioError
from slopescreen.scenario import load_scenario, slugify

BASE = 'dem = "dem.tif"\noutput = "out"\n'


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "dem.tif").write_bytes(b"placeholder raster bytes; not read by the validator")
    return tmp_path


def load(folder, text):
    p = folder / "s.toml"
    p.write_text(text, encoding="utf-8")
    return load_scenario(p)


def expect_error(folder, text, *fragments):
    with pytest.raises(ScenarioError) as info:
        load(folder, text)
    msg = str(info.value)
    assert "\n" not in msg
    assert msg.startswith("s.toml")
    for f in fragments:
        assert f in msg, msg
    return msg


def test_minimal_defaults(folder):
    s = load(folder, BASE)
    assert s.routing.method == "dinf"
    assert s.dem == (folder / "dem.tif").resolve()
    assert s.output == (folder / "out").resolve()
    assert s.soil is None and s.rain == ()
    assert len(s.sha256) == 64
    assert isinstance(ScenarioError("x"), InputError) and isinstance(ScenarioError("x"), ValueError)


def test_unknown_top_level_key(folder):
    expect_error(folder, BASE + "colour = 3\n", "colour", "unknown key")


def test_unknown_routing_method(folder):
    expect_error(folder, BASE + '[routing]\nmethod = "d16"\n', "routing.method", "dinf, mfd, d8")


def test_mfd_exponent_only_with_mfd(folder):
    s = load(folder, BASE + '[routing]\nmethod = "mfd"\nmfd_exponent = 1.0\n')
    assert s.routing.mfd_exponent == 1.0
    expect_error(folder, BASE + '[routing]\nmfd_exponent = 1.0\n', "mfd_exponent")


def test_missing_dem_file(folder):
    expect_error(folder, 'dem = "nothere.tif"\noutput = "out"\n', "dem", "not found")


def test_missing_required_key(folder):
    expect_error(folder, 'dem = "dem.tif"\n', "output", "required")


def test_not_toml(folder):
    expect_error(folder, "dem = [unclosed\n", "not valid TOML")


def test_wrong_type(folder):
    expect_error(folder, 'dem = 3\noutput = "out"\n', "dem", "expected a non-empty text")


def test_missing_scenario_file(tmp_path):
    with pytest.raises(ScenarioError, match="not found"):
        load_scenario(tmp_path / "absent.toml")


def test_output_may_not_be_an_input(folder):
    expect_error(folder, 'dem = "dem.tif"\noutput = "dem.tif"\n', "output")


def test_slugify():
    assert slugify("Forecast storm (8 h)") == "forecast-storm-8-h"
    assert slugify("***") == "case"


SOIL = """
[soil.units.1]
depth_m = {depth}
cohesion_kpa = 1.0
friction_deg = 34.0
unit_weight_kn_m3 = {gamma}
conductivity_m_per_day = 2.0
[[rain]]
name = "wet"
steady_mm_per_day = 50
"""


def soil(depth="1.0", gamma="18.0"):
    return BASE + "[soil]" + SOIL.format(depth=depth, gamma=gamma)


def test_soil_distributions_parsed(folder):
    s = load(folder, soil(depth="{ lognormal = [1.2, 0.3] }"))
    unit = s.soil.units[1]
    assert unit.depth_m.kind == "lognormal"
    assert unit.depth_m.central() == pytest.approx(1.2)  # median of a lognormal
    assert unit.root_cohesion_kpa.central() == 0.0  # default basal root cohesion
    assert unit.label == "unit 1"


@pytest.mark.parametrize("depth, fragment", [
    ("{ lognormal = [0.0, 0.3] }", "median must be > 0"),
    ("{ normal = [1.0, -0.1] }", "standard deviation"),
    ("{ gamma = [1.0, 2.0] }", "unknown distribution"),
    ("{ uniform = [1.0] }", "two numbers"),
    ("{ uniform = [2.0, 1.0] }", "greater than high"),
    ("0.0", "must be >"),
    ('"deep"', "expected a number"),
])
def test_bad_distributions(folder, depth, fragment):
    expect_error(folder, soil(depth=depth), "soil.units.1.depth_m", fragment)


def test_unusual_unit_weight_warns(folder):
    from slopescreen.errors import InputWarning

    with pytest.warns(InputWarning, match="unit_weight_kn_m3"):
        load(folder, soil(gamma="24.0"))
    expect_error(folder, soil(gamma="30.0"), "unit_weight_kn_m3")


def test_storm_needs_diffusivity(folder):
    text = soil() + '[[rain]]\nname = "storm"\nstorm_mm_per_h = 10\nduration_h = 4\nwater_table_depth_m = 1\n'
    expect_error(folder, text, "diffusivity_m2_per_s", "storm")


def test_rain_needs_soil(folder):
    expect_error(folder, BASE + '[[rain]]\nname = "r"\nsteady_mm_per_day = 5\n', "soil")


def test_duplicate_rain_names(folder):
    text = soil() + '[[rain]]\nname = "wet"\nsteady_mm_per_day = 5\n'
    expect_error(folder, text, "rain[1].name", "twice")


def test_several_units_need_a_map(folder):
    text = soil().replace("[[rain]]", "[soil.units.2]\ndepth_m = 1.0\ncohesion_kpa = 1.0\n"
                          "friction_deg = 30.0\nunit_weight_kn_m3 = 18.0\n"
                          "conductivity_m_per_day = 1.0\n[[rain]]")
    expect_error(folder, text, "soil.map", "2 soil units")


def test_clusters_defaults_and_limits(folder):
    s = load(folder, BASE + "[clusters]\nmin_area_m2 = 50\nmax_area_m2 = 2000\n")
    c = s.clusters
    assert (c.passive_fraction, c.size_windows, c.size_bands, c.size_time_limit_s) == (
        0.5, 5, 1, 10.0)   # the size-resolved search runs unless size_windows = 0
    assert load(folder, BASE + "[clusters]\nmin_area_m2 = 50\nmax_area_m2 = 2000\n"
                "size_windows = 0\n").clusters.size_windows == 0
    expect_error(folder, BASE + "[clusters]\nmin_area_m2 = 50\nmax_area_m2 = 2000\n"
                 "size_time_limit_s = 0\n", "clusters.size_time_limit_s")
    expect_error(folder, BASE + "[clusters]\nmin_area_m2 = 500\nmax_area_m2 = 200\n",
                 "clusters.min_area_m2")


def test_clusters_nodata_faces_key(folder):
    head = BASE + "[clusters]\nmin_area_m2 = 50\nmax_area_m2 = 2000\n"
    assert load(folder, head).clusters.nodata_faces == "free"
    assert load(folder, head + 'nodata_faces = "charged"\n').clusters.nodata_faces == "charged"
    expect_error(folder, head + 'nodata_faces = "open"\n', "clusters.nodata_faces")


def test_min_failure_depth_default_and_read(folder):
    # default 0.3 m: common practice (docs/methods.md, "Storm response (Iverson 2000)")
    assert load(folder, soil()).soil.min_failure_depth_m == 0.3
    text = soil().replace("[soil.units.1]", "min_failure_depth_m = 0.5\n[soil.units.1]", 1)
    assert load(folder, text).soil.min_failure_depth_m == 0.5


@pytest.mark.parametrize("value, fragment", [("-0.1", ">="), ('"deep"', "expected a number")])
def test_bad_min_failure_depth_names_the_field(folder, value, fragment):
    text = soil().replace("[soil.units.1]", f"min_failure_depth_m = {value}\n[soil.units.1]", 1)
    expect_error(folder, text, "soil.min_failure_depth_m", fragment)
