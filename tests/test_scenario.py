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
