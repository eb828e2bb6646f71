"""The calibration sweep: a known parameter is found on held-out landslides.

Outside reference: the inventory is generated from a known factor-of-safety field (the run's
own FS at friction 34 deg, read back from its GeoTIFF), so the true value is known; the
suggested scenario is read back with ``tomllib``; the one-line, exit-2, nothing-written
contract for bad input.
"""

import json
import tomllib

import numpy as np
import pytest

from conftest import write_tif
from slopescreen.cli import main
from slopescreen.grid import Grid, read_back
from slopescreen.inventory.landslides import InventoryCells
from slopescreen.inventory.split import split_inventory
from slopescreen.scenario import load_scenario

CELL = 5.0
X0, Y0 = 500000.0, 5100000.0
ROWS, COLS = 48, 48

SCENARIO = """
title = "sweep test"
dem = "dem.tif"
output = "out"
[soil.units.1]
label = "till"
depth_m = 1.2
cohesion_kpa = 2.0
root_cohesion_kpa = 1.0
friction_deg = {phi}
unit_weight_kn_m3 = 18.5
conductivity_m_per_day = 2.0
[[rain]]
name = "wet"
steady_mm_per_day = 40
"""

INVENTORY = """
[inventory]
landslides = "slides.geojson"
score_part = "whole"
"""


def rough_slope(seed=8):
    """A rough hillside (test input): slopes from gentle to steep, with hollows."""
    rng = np.random.default_rng(seed)
    r, c = np.mgrid[0:ROWS, 0:COLS]
    z = 700.0 - 0.25 * CELL * r - 0.004 * CELL * r ** 2 + 4.0 * np.sin(c / 2.7) * np.cos(r / 3.9)
    return (z + rng.normal(0, 0.4, z.shape)).astype(np.float32)


def write_points(path, xy):
    feats = [{"type": "Feature", "properties": {"id": i + 1},
              "geometry": {"type": "Point", "coordinates": [float(x), float(y)]}}
             for i, (x, y) in enumerate(xy)]
    path.write_text(json.dumps({"type": "FeatureCollection", "features": feats,
                                "crs": {"type": "name", "properties": {
                                    "name": "urn:ogc:def:crs:EPSG::32633"}}}), encoding="utf-8")


@pytest.fixture(scope="module")
def known(tmp_path_factory):
    """A folder with a DEM, and points at every cell that fails under friction 34 deg."""
    folder = tmp_path_factory.mktemp("sweep")
    write_tif(folder / "dem.tif", rough_slope())
    (folder / "truth.toml").write_text(SCENARIO.format(phi=34.0).replace('"out"', '"truth"'),
                                       encoding="utf-8")
    assert main(["run", str(folder / "truth.toml"), "--quiet"]) == 0
    fs, _ = read_back(folder / "truth" / "factor_of_safety_wet.tif")
    rows, cols = np.nonzero(fs < 1.0)
    share = rows.size / np.isfinite(fs).sum()
    assert 0.05 < share < 0.5, share                  # the test slope has failing ground
    write_points(folder / "slides.geojson",
                 np.column_stack([X0 + (cols + 0.5) * CELL, Y0 - (rows + 0.5) * CELL]))
    (folder / "s.toml").write_text(SCENARIO.format(phi=30.0) + INVENTORY, encoding="utf-8")
    return folder


def test_sweep_finds_the_true_friction_on_the_held_out_half(known, capsys):
    before = (known / "s.toml").read_bytes()
    assert main(["sweep", str(known / "s.toml"), "--vary", "soil.units.1.friction_deg=30:38:9",
                 "--quiet"]) == 0
    assert (known / "s.toml").read_bytes() == before           # the user's file is unchanged
    out = known / "out-sweep"
    lines = (out / "sweep.csv").read_text(encoding="utf-8").splitlines()
    assert lines[0].startswith("# Screening result only")
    assert "overstate skill" in lines[1]
    header = lines[3].split(",")
    rows = [dict(zip(header, line.split(","))) for line in lines[4:]]
    assert len(rows) == 9
    phi = np.array([float(r["soil.units.1.friction_deg"]) for r in rows])
    tss_test = np.array([float(r["tss_test"]) for r in rows])
    assert phi[np.argmax(tss_test)] == 34.0
    assert tss_test.max() == pytest.approx(1.0)                # exactly the generating field
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["best"]["soil.units.1.friction_deg"] == 34.0
    assert manifest["best_at_edge"] == []
    assert manifest["warning"].startswith("Scores on the choosing half overstate skill")
    suggested = tomllib.loads((out / "suggested.toml").read_text(encoding="utf-8"))
    assert suggested["soil"]["units"]["1"]["friction_deg"] == 34.0
    s = load_scenario(out / "suggested.toml")
    assert s.dem == (known / "dem.tif").resolve()
    assert s.inventory.landslides == (known / "slides.geojson").resolve()
    assert "overstate skill" in (out / "sweep.html").read_text(encoding="utf-8")
    assert sorted(p.name for p in out.iterdir()) == [".slopescreen.lock", "manifest.json",
                                                     "suggested.toml", "sweep.csv", "sweep.html",
                                                     "sweep.png"]


def test_two_keys_and_a_random_split(known):
    out = known / "two"
    assert main(["sweep", str(known / "s.toml"), "--vary", "soil.units.1.friction_deg=32:36:3",
                 "--vary", "rain.wet.steady_mm_per_day=20:60:3", "--split", "random",
                 "--seed", "3", "--output", str(out), "--quiet"]) == 0
    lines = (out / "sweep.csv").read_text(encoding="utf-8").splitlines()
    assert len(lines) == 4 + 9
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["split"] == "random" and manifest["seed"] == 3
    best = manifest["best"]
    assert (best["soil.units.1.friction_deg"], best["rain.wet.steady_mm_per_day"]) == (34.0, 40.0)


@pytest.mark.parametrize("vary, message", [
    ("soil.units.1.cohesion=1:3:3", "soil.units.1.cohesion: not a key of the scenario"),
    ("soil.units.1.friction_deg=38:30:5", "LOW must be below HIGH"),
    ("soil.units.1.friction_deg=30:38", "s.toml: --vary soil.units.1.friction_deg=30:38: "
                                        "expected KEY=LOW:HIGH:N"),
    ("routing.mfd_exponent=1:2:3", "a sweep varies [soil] and [[rain]] values only"),
    ("rain.storm.steady_mm_per_day=1:2:3", "no rain case named 'storm'"),
    ("soil.units.1.friction_deg=10:70:4", "friction_deg"),
])
def test_bad_sweep_keys_exit_2_and_write_nothing(known, capsys, vary, message):
    out = known / "bad"
    assert main(["sweep", str(known / "s.toml"), "--vary", vary, "--output", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and message in err[0], err
    assert not out.exists()


def test_a_distribution_is_swept_through_its_parameters(known, capsys):
    text = (SCENARIO.format(phi="{ normal = [30.0, 2.0] }") + INVENTORY)
    (known / "dist.toml").write_text(text, encoding="utf-8")
    assert main(["sweep", str(known / "dist.toml"), "--vary",
                 "soil.units.1.friction_deg=30:38:5"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "is a distribution (normal), not a number; sweep one of its " \
        "parameters: soil.units.1.friction_deg.mean or soil.units.1.friction_deg.sd" in err[0]
    # the median of a normal is its mean: the maps at mean 34 are the maps at friction 34
    out = known / "dist-sweep"
    assert main(["sweep", str(known / "dist.toml"), "--vary",
                 "soil.units.1.friction_deg.mean=30:38:5", "--output", str(out), "-q"]) == 0
    best = json.loads((out / "manifest.json").read_text())["best"]
    assert best["soil.units.1.friction_deg.mean"] == 34.0
    suggested = tomllib.loads((out / "suggested.toml").read_text(encoding="utf-8"))
    assert suggested["soil"]["units"]["1"]["friction_deg"] == {"normal": [34.0, 2.0]}
    out = known / "edge-sweep"
    assert main(["sweep", str(known / "dist.toml"), "--vary",
                 "soil.units.1.friction_deg.mean=30:34:3", "--output", str(out)]) == 0
    assert "lies at the end of the swept range" in capsys.readouterr().out
    assert json.loads((out / "manifest.json").read_text())["best_at_edge"] == [
        "soil.units.1.friction_deg.mean"]
    assert main(["sweep", str(known / "dist.toml"), "--vary",
                 "soil.units.1.friction_deg.low=30:38:5"]) == 2
    assert "is not a distribution with a parameter 'low'" in capsys.readouterr().err


@pytest.mark.parametrize("args, message", [
    (["--output", "s.toml/x"], "s.toml: --output: s.toml is a file, not a folder"),
    (["--output", "/usr/lib/sweep"], "s.toml: --output: /usr/lib/sweep lies inside the system"),
    (["--block-m", "0"], "s.toml: --block-m: must be > 0"),
    (["--rain", "storm"], "s.toml: --rain: no rain case named 'storm'"),
])
def test_bad_sweep_options_exit_2_naming_the_scenario(known, capsys, args, message):
    args = [a.replace("s.toml/x", str(known / "s.toml" / "x")) for a in args]
    assert main(["sweep", str(known / "s.toml"), "--vary",
                 "soil.units.1.friction_deg=30:38:3"] + args) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and message in err[0], err


def test_a_sweep_needs_an_inventory(known, capsys):
    (known / "plain.toml").write_text(SCENARIO.format(phi=34.0), encoding="utf-8")
    assert main(["sweep", str(known / "plain.toml"), "--vary",
                 "soil.units.1.friction_deg=30:38:5"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "plain.toml: inventory: a sweep scores the map" in err[0]


def test_split_halves_never_share_a_landslide_cell():
    grid = Grid.regular((40, 40), west=0, north=400, cell_m=10, crs="EPSG:32633")
    rng = np.random.default_rng(2)
    flat = rng.choice(1600, size=60, replace=False)
    cells = tuple(np.array([f]) for f in np.sort(flat))
    inv = InventoryCells(cells, np.sort(flat), np.arange(60), (), "points", 60, 60, 0, 60, "whole")
    for method in ("blocks", "random"):
        a, b = split_inventory(inv, grid, method=method, seed=4)
        assert a.n_landslides + b.n_landslides == 60
        assert not np.intersect1d(a.positive_index, b.positive_index).size
        assert not a.domain.reshape(-1)[b.positive_index].any()
        assert not b.domain.reshape(-1)[a.positive_index].any()
        if method == "blocks":                    # the halves' negatives do not overlap either
            assert not (a.domain & b.domain).any()
            assert abs(a.n_landslides - b.n_landslides) <= 12
