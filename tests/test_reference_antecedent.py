"""A storm's initial water table from an antecedent recharge.

docs/methods.md, "Storm response (Iverson 2000)", antecedent water table:
d = z (1 - W) with the steady wetness W = min(1, q0 a / (K z sin cos))
(O'Loughlin 1986; Montgomery & Dietrich 1994), and Iverson's (2000) initial
head psi0 = (Z - d) cos^2(alpha). Checked against those formulas written out
here, the handbook infinite-slope FS with pore pressure, and a run on a DEM
with a hollow and a spur of the same slope.
"""

import json
import math

import numpy as np
import pytest

from slopescreen.cli import main
from slopescreen.errors import InputError
from slopescreen.hydrology import (
    StormInputs,
    StormRain,
    antecedent_table_depth,
    storm_minimum,
    storm_pressure_head,
)
from slopescreen.parameters import normal
from slopescreen.probability import encode_table, failure_probability, fosm_reliability
from slopescreen.grid import read_back
from slopescreen.stability import SoilStrength, factor_of_safety

from conftest import write_tif

GAMMA_W = 9.81  # kN/m^3 (from memory; the value the package states in docs/methods.md)


def _hand_wetness(q_mm_day, a, k_m_day, z, slope_deg):
    """Montgomery & Dietrich (1994): W = min(1, q a / (K z cos sin))."""
    t = math.radians(slope_deg)
    return min(1.0, q_mm_day * 1e-3 * a / (k_m_day * z * math.cos(t) * math.sin(t)))


def test_antecedent_table_depth_is_the_hand_steady_water_table():
    rng = np.random.default_rng(4)
    a = rng.uniform(1.0, 2000.0, 200)
    slope = rng.uniform(5.0, 45.0, 200)
    z = rng.uniform(0.3, 3.0, 200)
    k = rng.uniform(0.1, 5.0, 200)
    d = antecedent_table_depth(a, slope, recharge_mm_per_day=3.0, conductivity_m_per_day=k,
                               depth_m=z)
    hand = [zi * (1.0 - _hand_wetness(3.0, ai, ki, zi, si))
            for ai, si, zi, ki in zip(a, slope, z, k)]
    np.testing.assert_allclose(d, hand, rtol=1e-12, atol=1e-12)
    assert (d == 0.0).any() and (d > 0.0).any()  # h0 = W z capped at the soil depth
    # slope-normal thickness H: the same with z = H / cos(theta)
    h = z * np.cos(np.radians(slope))
    d_n = antecedent_table_depth(a, slope, recharge_mm_per_day=3.0, conductivity_m_per_day=k,
                                 depth_m=h, depth_measured="slope_normal")
    np.testing.assert_allclose(d_n, hand, rtol=1e-9, atol=1e-12)


def test_antecedent_head_before_the_storm_equals_the_steady_pore_pressure():
    # Iverson (2000): psi(Z, 0) = (Z - d) beta, beta = cos^2(alpha); at the soil base with
    # d = z (1 - W) that is W z cos^2(alpha), the pressure head of the steady map
    slope, a, z, k = 30.0, 150.0, 1.2, 1.0
    d = antecedent_table_depth(a, slope, recharge_mm_per_day=2.0, conductivity_m_per_day=k,
                               depth_m=z)
    w = _hand_wetness(2.0, a, k, z, slope)
    assert 0.1 < w < 0.9
    psi = storm_pressure_head(z, 0.0, slope_deg=slope, water_table_depth_m=float(d),
                              intensity_m_per_s=1e-6, conductivity_m_per_s=k / 86400.0,
                              diffusivity_m2_per_s=5e-5, duration_s=3600.0)
    assert float(psi) == pytest.approx(w * z * math.cos(math.radians(slope)) ** 2, rel=1e-6)


def test_no_rain_on_the_antecedent_table_gives_the_steady_fs():
    # c' = 0: FS(Z) falls with Z, so the least storm FS without rain is the infinite-slope FS
    # at the base with the antecedent wetness (Montgomery & Dietrich 1994; one unit weight)
    rng = np.random.default_rng(8)
    slope = rng.uniform(20.0, 40.0, 50)
    a = rng.uniform(5.0, 500.0, 50)
    z, k = 1.5, 0.8
    d = antecedent_table_depth(a, slope, recharge_mm_per_day=4.0, conductivity_m_per_day=k,
                               depth_m=z)
    storm = StormInputs(water_table_depth_m=d, intensity_m_per_s=0.0,
                        conductivity_m_per_s=k / 86400.0, diffusivity_m2_per_s=5e-5,
                        duration_s=3600.0)
    strength = SoilStrength(cohesion_kpa=0.0, root_cohesion_kpa=0.0, friction_deg=36.0,
                            unit_weight_kn_m3=19.0)
    least = storm_minimum(slope, soil_depth_m=z, storm=storm, strength=strength, n_depths=20,
                          min_failure_depth_m=0.3)
    for j in range(50):
        w = _hand_wetness(4.0, a[j], k, z, slope[j])
        t = math.radians(slope[j])
        tan_phi = math.tan(math.radians(36.0))
        # handbook infinite slope, pore pressure u = gamma_w W z cos^2
        fs = (tan_phi / math.tan(t)) * (1.0 - GAMMA_W * w / 19.0)
        assert least.fs[j] == pytest.approx(fs, rel=2e-6)
        if 0.0 < w < 1.0:  # saturated or dry columns have the same FS at every depth
            assert least.depth_m[j] == pytest.approx(z)
    wet = np.array([_hand_wetness(4.0, a[j], k, z, slope[j]) for j in range(50)])
    steady = factor_of_safety(slope, z, wet, cohesion_kpa=0.0, root_cohesion_kpa=0.0,
                              friction_deg=36.0, unit_weight_kn_m3=19.0)
    np.testing.assert_allclose(least.fs, steady, rtol=2e-6)


SOIL = {"cohesion_kpa": 1.0, "root_cohesion_kpa": 1.0, "friction_deg": 34.0,
        "unit_weight_kn_m3": 19.0, "conductivity_m_per_day": 0.864,
        "diffusivity_m2_per_s": 5e-5, "depth_m": 1.4}


def test_draw_at_median_reproduces_the_antecedent_storm_map():
    rng = np.random.default_rng(2)
    slope = rng.uniform(20.0, 42.0, (6, 8))
    a = rng.uniform(2.0, 800.0, (6, 8))
    rain = StormRain(12.0, 10.0, antecedent_mm_per_day=1.5)
    d = antecedent_table_depth(a, slope, recharge_mm_per_day=1.5,
                               conductivity_m_per_day=SOIL["conductivity_m_per_day"],
                               depth_m=SOIL["depth_m"])
    storm = StormInputs(water_table_depth_m=d, intensity_m_per_s=rain.intensity_m_per_s,
                        conductivity_m_per_s=SOIL["conductivity_m_per_day"] / 86400.0,
                        diffusivity_m2_per_s=SOIL["diffusivity_m2_per_s"],
                        duration_s=rain.duration_s)
    strength = SoilStrength(cohesion_kpa=SOIL["cohesion_kpa"],
                            root_cohesion_kpa=SOIL["root_cohesion_kpa"],
                            friction_deg=SOIL["friction_deg"],
                            unit_weight_kn_m3=SOIL["unit_weight_kn_m3"])
    least = storm_minimum(slope, soil_depth_m=SOIL["depth_m"], storm=storm, strength=strength,
                          n_depths=20, min_failure_depth_m=0.3)
    unit = np.zeros(slope.shape, int)
    r = fosm_reliability(slope, a, unit, encode_table([SOIL]), rain, n_depths=20,
                         min_failure_depth_m=0.3)
    # FOSM's FS at the means (every parameter fixed) is a draw at the median: the map's FS
    np.testing.assert_allclose(r.mean_fs, least.fs, rtol=1e-6)
    # a negligible spread: Monte Carlo fails exactly where the map fails
    p, _ = failure_probability(slope, a, unit,
                               encode_table([SOIL | {"friction_deg": normal(34.0, 1e-7)}]),
                               rain, samples=20, n_depths=20, min_failure_depth_m=0.3)
    clear = np.abs(least.fs - 1.0) > 1e-4
    assert (least.fs[clear] < 1).any() and (least.fs[clear] >= 1).any()
    np.testing.assert_array_equal(p[clear], (least.fs[clear] < 1.0).astype(np.float32))
    with pytest.raises(InputError, match="sca_m"):
        failure_probability(slope, None, unit, encode_table([SOIL]), rain, samples=4)


def test_storm_rain_takes_exactly_one_initial_water_table():
    with pytest.raises(InputError, match="exactly one"):
        StormRain(10.0, 5.0)
    with pytest.raises(InputError, match="exactly one"):
        StormRain(10.0, 5.0, 1.0, antecedent_mm_per_day=2.0)
    with pytest.raises(InputError, match="antecedent_mm_per_day"):
        StormRain(10.0, 5.0, antecedent_mm_per_day=-1.0)


def _hollow_and_spur(rows=40, cols=41, cell=5.0, fall=0.6, side=0.25):
    """A plane falling south with a V hollow on column 10 and a ridge (spur) on column 30.

    Horn's east-west gradient is zero on both axes by symmetry, so both have the slope
    atan(fall); the hollow gathers the flow of about 20 columns, the spur sheds it.
    """
    c = np.arange(cols)
    across = np.where(c <= 30, np.abs(c - 10), 50 - c) * cell * side
    r = np.arange(rows)[:, None]
    return (300.0 - fall * cell * r + across[None, :]).astype(np.float64)


RUN_SOIL = """
[soil]
[soil.units.1]
label = "colluvium"
depth_m = 1.2
cohesion_kpa = 1.0
root_cohesion_kpa = 1.0
friction_deg = 36.0
unit_weight_kn_m3 = 19.0
conductivity_m_per_day = 1.0
diffusivity_m2_per_s = 5.0e-5
"""


def _run(tmp_path, capsys, table_line):
    write_tif(tmp_path / "dem.tif", _hollow_and_spur())
    (tmp_path / "s.toml").write_text(
        'dem = "dem.tif"\noutput = "out"\n' + RUN_SOIL
        + f'[[rain]]\nname = "storm"\nstorm_mm_per_h = 8\nduration_h = 6\n{table_line}\n',
        encoding="utf-8")
    code = main(["-q", "run", str(tmp_path / "s.toml")])
    assert code == 0, capsys.readouterr().err
    out = tmp_path / "out"
    manifest = json.loads((out / "manifest.json").read_text())
    [entry] = [p for p in manifest["products"]
               if p["key"] == "factor_of_safety" and p["rain"] == "storm" and p["kind"] == "raster"]
    return read_back(out / entry["path"])[0], manifest


def test_hollow_has_a_lower_least_fs_than_a_spur_of_the_same_slope(tmp_path, capsys):
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    fs, manifest = _run(tmp_path / "a", capsys, "antecedent_mm_per_day = 3")
    rows = slice(15, 35)
    hollow, spur = fs[rows, 10], fs[rows, 30]
    assert np.isfinite(hollow).all() and np.isfinite(spur).all()
    assert (hollow < spur - 0.05).all()
    [case] = manifest["rain"]
    assert case["antecedent_mm_per_day"] == 3 and "water_table_depth_m" not in case
    # one water table under every cell: the map sees the slope only, hollow = spur
    fs_flat, _ = _run(tmp_path / "b", capsys, "water_table_depth_m = 0.6")
    np.testing.assert_allclose(fs_flat[rows, 10], fs_flat[rows, 30], rtol=1e-4)


@pytest.mark.parametrize("lines, field", [
    ("water_table_depth_m = 0.6\nantecedent_mm_per_day = 2", "antecedent_mm_per_day"),
    ("", "water_table_depth_m"),
    ("antecedent_mm_per_day = -2", "antecedent_mm_per_day"),
])
def test_a_storm_needs_exactly_one_initial_water_table(tmp_path, capsys, lines, field):
    write_tif(tmp_path / "dem.tif", _hollow_and_spur())
    (tmp_path / "s.toml").write_text(
        'dem = "dem.tif"\noutput = "out"\n' + RUN_SOIL
        + f'[[rain]]\nname = "storm"\nstorm_mm_per_h = 8\nduration_h = 6\n{lines}\n',
        encoding="utf-8")
    code = main(["check", str(tmp_path / "s.toml")])
    err = capsys.readouterr().err
    assert code == 2
    assert field in err and "s.toml" in err and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "out").exists()
