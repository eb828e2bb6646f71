"""End-to-end runs of the stability stages through the public contract.

The reference is the infinite-slope factor of safety with Montgomery-Dietrich
steady wetness written out here from the handbook formulas (docs/methods.md, "Steady
wetness" and "Infinite-slope factor of safety"; Montgomery & Dietrich 1994), on an inclined
plane whose specific catchment area is the distance from the divide (exact geometry).
"""

import json
import math

import numpy as np
import pytest

from conftest import tilted_plane, write_tif
from slopescreen.cli import main
from slopescreen.grid import read_back

GAMMA_W = 9.81  # kN/m^3, unit weight of water (handbook value)

SOIL = """
[soil]
[soil.units.1]
label = "test colluvium"
depth_m = 1.0
cohesion_kpa = 2.0
root_cohesion_kpa = 1.0
friction_deg = 35.0
unit_weight_kn_m3 = 18.0
conductivity_m_per_day = 2.0
diffusivity_m2_per_s = 5.0e-5
"""

RAIN = """
[[rain]]
name = "steady 20"
steady_mm_per_day = 20

[[rain]]
name = "storm"
storm_mm_per_h = 10
duration_h = 6
water_table_depth_m = 0.8
"""


def write_case(tmp_path, extra="", soil=SOIL, rain=RAIN, gradient=0.6):
    z = tilted_plane(rows=40, cols=30, cell=5.0, gradient=gradient)
    write_tif(tmp_path / "dem.tif", z)
    p = tmp_path / "s.toml"
    p.write_text('dem = "dem.tif"\noutput = "out"\n' + soil + rain + extra, encoding="utf-8")
    return p


def run_ok(capsys, path):
    code = main(["-q", "run", str(path)])
    err = capsys.readouterr().err
    assert code == 0, err
    return json.loads((path.parent / "out" / "manifest.json").read_text())


def product(manifest, out, key, rain=None):
    [entry] = [p for p in manifest["products"]
               if p["key"] == key and p["rain"] == rain and p["kind"] == "raster"]
    return read_back(out / entry["path"])[0], entry


def test_steady_fs_on_plane_matches_handbook(tmp_path, capsys):
    path = write_case(tmp_path)
    manifest = run_ok(capsys, path)
    out = tmp_path / "out"
    fs, entry = product(manifest, out, "factor_of_safety", "steady 20")
    assert entry["units"] == "1"
    wet, _ = product(manifest, out, "wetness", "steady 20")
    theta = math.atan(0.6)
    rows = np.arange(40)
    a = (rows + 1) * 5.0  # SCA at the cell's downslope edge on a plane (exact geometry)
    q = 0.020  # m/day
    T = 2.0 * 1.0 * math.cos(theta)  # K z cos(theta), m^2/day
    W = np.minimum(1.0, q * a / (T * math.sin(theta)))
    C = 3.0
    expected = C / (18.0 * 1.0 * math.sin(theta) * math.cos(theta)) + (
        1.0 - W * GAMMA_W / 18.0) * math.tan(math.radians(35.0)) / math.tan(theta)
    inner = slice(3, 35), slice(4, 26)  # away from the grid edges
    got = fs[inner]
    want = np.broadcast_to(expected[:, None], fs.shape)[inner]
    np.testing.assert_allclose(got, want, rtol=2e-3)
    np.testing.assert_allclose(wet[inner], np.broadcast_to(W[:, None], fs.shape)[inner], rtol=2e-3)


def test_products_units_and_cautions(tmp_path, capsys):
    manifest = run_ok(capsys, write_case(tmp_path))
    keys = {(p["key"], p["rain"]) for p in manifest["products"]}
    for rain in ("steady 20", "storm"):
        assert ("wetness", rain) in keys and ("factor_of_safety", rain) in keys
    assert ("critical_recharge", None) in keys
    units = {p["key"]: p["units"] for p in manifest["products"]}
    assert units["critical_recharge"] == "mm/day" and units["wetness"] == "1"
    # fixed parameters: no probability product unless [uncertainty] asks for one
    assert not any(k == "failure_probability" for k, _ in keys)
    fs, tags = read_back(tmp_path / "out" / "factor_of_safety_storm.tif")
    assert "licensed" in tags["CAUTION"]
    assert manifest["soil"]["units"][0]["friction_deg"] == 35.0


def test_probability_product(tmp_path, capsys):
    soil = SOIL.replace("friction_deg = 35.0", "friction_deg = { normal = [35.0, 3.0] }")
    path = write_case(tmp_path, soil=soil, extra="\n[uncertainty]\nsamples = 200\nseed = 3\n")
    manifest = run_ok(capsys, path)
    p, entry = product(manifest, tmp_path / "out", "failure_probability", "steady 20")
    assert entry["units"] == "1"
    finite = p[np.isfinite(p)]
    assert finite.size and finite.min() >= 0 and finite.max() <= 1
    # down the plane wetness rises, so P_f never falls (monotonicity, up to sampling noise)
    col = np.nanmean(p[:, 5:25], axis=1)
    assert col[-5] >= col[5] - 0.05
    # same seed, same bits
    first = p.copy()
    run_ok(capsys, path)
    again, _ = product(json.loads((tmp_path / "out" / "manifest.json").read_text()),
                       tmp_path / "out", "failure_probability", "steady 20")
    np.testing.assert_array_equal(np.nan_to_num(first, nan=-1), np.nan_to_num(again, nan=-1))


def test_critical_recharge_class_band(tmp_path, capsys):
    manifest = run_ok(capsys, write_case(tmp_path, gradient=1.5))  # 56 deg: fails even dry
    klass, entry = product(manifest, tmp_path / "out", "critical_recharge_class")
    q, _ = product(manifest, tmp_path / "out", "critical_recharge")
    inner = klass[3:35, 4:26]
    assert np.all(inner == 1)
    assert np.all(np.isnan(q[3:35, 4:26]))  # no rate where the slope fails dry


def expect_exit_2(capsys, path, *fragments):
    code = main(["run", str(path)])
    err = capsys.readouterr().err
    assert code == 2, err
    assert len(err.strip().splitlines()) == 1
    for f in fragments:
        assert f in err, err
    assert not (path.parent / "out").exists() or not any((path.parent / "out").iterdir())


@pytest.mark.parametrize("bad, where", [
    ("depth_m = -1.0", "depth_m"),
    ("friction_deg = 75.0", "friction_deg"),
    ("friction_deg = { uniform = [40.0, 30.0] }", "friction_deg.uniform"),
    ("cohesion_kpa = -2.0", "cohesion_kpa"),
    ("conductivity_m_per_day = 0.0", "conductivity_m_per_day"),
])
def test_bad_soil_values(tmp_path, capsys, bad, where):
    key = bad.split(" = ")[0]
    soil = "\n".join(bad if line.startswith(key + " ") else line for line in SOIL.splitlines())
    expect_exit_2(capsys, write_case(tmp_path, soil=soil), "s.toml", where)


def test_rain_without_values(tmp_path, capsys):
    rain = '\n[[rain]]\nname = "nothing"\n'
    expect_exit_2(capsys, write_case(tmp_path, rain=rain), "s.toml", "rain[0]")


def test_soil_map_code_without_table(tmp_path, capsys):
    codes = np.ones((40, 30), dtype=np.uint8)
    codes[10:20, 10:20] = 7
    write_tif(tmp_path / "soil.tif", codes, nodata=0)
    soil = SOIL.replace("[soil]\n", '[soil]\nmap = "soil.tif"\n')
    expect_exit_2(capsys, write_case(tmp_path, soil=soil), "soil.tif", "7", "s.toml")


def test_soil_map_on_another_grid(tmp_path, capsys):
    write_tif(tmp_path / "soil.tif", np.ones((20, 30), dtype=np.uint8), nodata=0)
    soil = SOIL.replace("[soil]\n", '[soil]\nmap = "soil.tif"\n')
    expect_exit_2(capsys, write_case(tmp_path, soil=soil), "soil.tif", "dem.tif")


def test_two_units_by_map(tmp_path, capsys):
    codes = np.ones((40, 30), dtype=np.uint8)
    codes[:, 15:] = 2
    write_tif(tmp_path / "soil.tif", codes, nodata=0)
    second = SOIL.split("[soil.units.1]")[1].replace("cohesion_kpa = 2.0", "cohesion_kpa = 8.0")
    soil = SOIL.replace("[soil]\n", '[soil]\nmap = "soil.tif"\n') + "[soil.units.2]" + second
    manifest = run_ok(capsys, write_case(tmp_path, soil=soil))
    fs, _ = product(manifest, tmp_path / "out", "factor_of_safety", "steady 20")
    # more cohesion in unit 2: higher FS on the same slope and wetness
    assert np.nanmedian(fs[5:35, 18:27]) > np.nanmedian(fs[5:35, 3:12])


def test_failing_clusters_product(tmp_path, capsys):
    # A steep, wet plane: the infinite-slope FS is below 1 almost everywhere, so the exact cut
    # finds failing clusters; each must report FS < 1 and an area equal to its cells' area.
    from slopescreen.vectors import read_layer

    rain = '\n[[rain]]\nname = "very wet"\nsteady_mm_per_day = 400\n'
    extra = ("\n[clusters]\nmin_area_m2 = 25\nmax_area_m2 = 2500\npassive_fraction = 0.5\n"
             "size_windows = 1\nsize_time_limit_s = 3\n[uncertainty]\nsamples = 100\nseed = 2\n")
    soil = SOIL.replace("friction_deg = 35.0", "friction_deg = { normal = [35.0, 2.0] }")
    manifest = run_ok(capsys, write_case(tmp_path, rain=rain, extra=extra, gradient=0.85, soil=soil))
    keys = {p["key"] for p in manifest["products"]}
    assert {"clusters", "cluster_fs_bound", "cluster_labels"} <= keys
    [entry] = [p for p in manifest["products"] if p["key"] == "clusters"]
    assert entry["kind"] == "vector" and entry["path"].endswith(".gpkg")
    geoms, cols, meta = read_layer(tmp_path / "out" / entry["path"], layer="clusters")
    assert len(geoms) >= 1
    assert np.all(cols["fs"] < 1.0)
    p = cols["failure_probability"]
    assert np.all((p >= 0.0) & (p <= 1.0))  # Monte Carlo over the parameter distributions
    np.testing.assert_allclose(cols["area_m2"], cols["n_cells"] * 25.0)
    np.testing.assert_allclose([g.area for g in geoms], cols["area_m2"])
    assert "licensed" in meta["CAUTION"]
    labels, _ = product(manifest, tmp_path / "out", "cluster_labels", "very wet")
    assert set(np.unique(labels[np.isfinite(labels)])) - {0.0} == set(cols["id"].astype(float))
    # centroid = mean of the cell centres (equal square cells); conftest's grid origin
    # (500000, 5100000), 5 m cells, north up
    for k, cid in enumerate(cols["id"]):
        rr, cc = np.nonzero(labels == cid)
        assert cols["centroid_easting"][k] == pytest.approx(500000.0 + 5.0 * (cc.mean() + 0.5))
        assert cols["centroid_northing"][k] == pytest.approx(5100000.0 - 5.0 * (rr.mean() + 0.5))
    assert not any(item["section"] == "clusters" for item in manifest["not_run"])
    # the size-resolved answers: least-stable connected cluster in the area band, with bounds
    sgeoms, scols, _ = read_layer(tmp_path / "out" / entry["path"], layer="size_resolved")
    assert len(sgeoms) >= 1
    assert np.all(scols["area_m2"] >= 25.0) and np.all(scols["area_m2"] <= 2500.0)
    assert np.all(scols["lower_bound"] <= scols["fs"] + 1e-9)
    proven = scols["proven"].astype(bool)
    np.testing.assert_allclose(scols["lower_bound"][proven], scols["fs"][proven], rtol=1e-5)


def test_dry_case_is_accepted_and_gives_the_dry_handbook_fs(tmp_path, capsys):
    # Handbook infinite-slope FS with no water (docs/methods.md, "Infinite-slope factor of
    # safety"): FS = C / (gamma z sin cos) + tan(phi') / tan(theta). Once refused ("> 0").
    rain = '\n[[rain]]\nname = "dry"\nsteady_mm_per_day = 0\n'
    path = write_case(tmp_path, rain=rain)
    manifest = run_ok(capsys, path)
    out = tmp_path / "out"
    fs, _ = product(manifest, out, "factor_of_safety", "dry")
    wet, _ = product(manifest, out, "wetness", "dry")
    theta = math.atan(0.6)
    expected = 3.0 / (18.0 * 1.0 * math.sin(theta) * math.cos(theta)) + math.tan(math.radians(35.0)) / 0.6
    np.testing.assert_allclose(fs[np.isfinite(fs)], expected, rtol=1e-5)
    assert np.nanmax(wet) == 0.0
    report = (out / "report.html").read_text(encoding="utf-8")
    assert "dry: no recharge" in report


def test_negative_recharge_is_still_refused(tmp_path, capsys):
    path = write_case(tmp_path, rain='\n[[rain]]\nname = "x"\nsteady_mm_per_day = -1\n')
    assert main(["-q", "run", str(path)]) == 2
    err = capsys.readouterr().err
    assert "steady_mm_per_day" in err and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "out").exists()
