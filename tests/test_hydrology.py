"""Steady wetness and the storm functions: behaviour, flags, nodata and validation."""

import math

import numpy as np
import pytest

from slopescreen.errors import InputError
from slopescreen.hydrology import (
    SteadyRain,
    StormRain,
    steady_wetness,
    storm_factor_of_safety,
    storm_minimum,
    storm_pressure_head,
)

GAMMA_W = 9.81


def test_steady_wetness_formula():
    # docs/methods.md, "Steady wetness": W = min(1, q a / (K z cos sin)), q per horizontal area
    rng = np.random.default_rng(4)
    a = rng.uniform(1, 2000, 300)
    slope = rng.uniform(2, 60, 300)
    q, k, z = 20.0, 1.5, 1.2
    th = np.radians(slope)
    expected = np.minimum(1.0, q * 1e-3 * a / (k * z * np.cos(th) * np.sin(th)))
    got = steady_wetness(a, slope, recharge_mm_per_day=q, conductivity_m_per_day=k, depth_m=z)
    assert got.dtype == np.float32 and got.shape == (300,)
    np.testing.assert_allclose(got, expected, rtol=1e-6)
    assert (got == 1.0).any() and (got < 1.0).any()


def test_steady_wetness_flat_dry_and_nodata():
    sca = np.array([[10.0, 10.0, np.nan], [0.0, 10.0, 10.0]], dtype=np.float32)
    slope = np.array([[0.0, 30.0, 30.0], [30.0, np.nan, 0.0]], dtype=np.float32)
    w = steady_wetness(sca, slope, recharge_mm_per_day=np.array([[5.0], [0.0]]),
                       conductivity_m_per_day=1.0, depth_m=1.0)
    assert w[0, 0] == 1.0  # flat ground with inflow saturates (documented)
    assert w[1, 2] == 0.0  # flat ground without inflow stays dry
    assert w[1, 0] == 0.0  # no recharge
    assert np.isnan(w[0, 2]) and np.isnan(w[1, 1])


def test_steady_wetness_bad_input():
    base = dict(recharge_mm_per_day=5.0, conductivity_m_per_day=1.0, depth_m=1.0)
    with pytest.raises(InputError, match="depth_m"):
        steady_wetness(10.0, 30.0, **{**base, "depth_m": -1.0})
    with pytest.raises(InputError, match="recharge_mm_per_day"):
        steady_wetness(10.0, 30.0, **{**base, "recharge_mm_per_day": -1.0})
    with pytest.raises(InputError, match="sca_m"):
        steady_wetness(-3.0, 30.0, **base)
    with pytest.raises(InputError, match="slope_deg"):
        steady_wetness(10.0, 95.0, **base)


def test_rain_cases():
    rain = StormRain(15.0, 8.0, 1.2)
    assert rain.intensity_m_per_s == pytest.approx(15e-3 / 3600)
    assert rain.duration_s == 28800.0 and rain.horizon_s == math.inf
    assert StormRain(15.0, 8.0, 1.2, horizon_h=2.0).horizon_s == 7200.0
    assert SteadyRain(60).recharge_mm_per_day == 60.0
    with pytest.raises(InputError, match="recharge_mm_per_day"):
        SteadyRain(-1.0)
    with pytest.raises(InputError, match="duration_h"):
        StormRain(10.0, -1.0, 1.0)
    with pytest.raises(InputError, match="steady_ratio"):
        StormRain(10.0, 1.0, 1.0, steady_ratio=1.5)


HEAD = dict(slope_deg=32.0, water_table_depth_m=0.8, conductivity_m_per_s=1e-5,
            diffusivity_m2_per_s=5e-5, duration_s=4 * 3600.0)


def test_pressure_head_initial_state_and_runoff_limit():
    z = np.array([0.3, 0.8, 1.5])
    beta = math.cos(math.radians(32.0)) ** 2
    psi0 = storm_pressure_head(z, 0.0, intensity_m_per_s=5e-6, **HEAD)
    # docs/methods.md, "Storm response (Iverson 2000)": psi = beta (Z - d) before the storm,
    # negative above the water table
    np.testing.assert_allclose(psi0, beta * (z - 0.8), rtol=1e-12)
    # only min(I, K) infiltrates: rain above K gives the head of rain at K
    at_k = storm_pressure_head(z, 7200.0, intensity_m_per_s=1e-5, **HEAD)
    above = storm_pressure_head(z, 7200.0, intensity_m_per_s=4e-5, **HEAD)
    np.testing.assert_array_equal(at_k, above)
    # steady_ratio lowers beta = cos^2 - ratio
    low = storm_pressure_head(1.5, 0.0, intensity_m_per_s=5e-6, steady_ratio=0.2, **HEAD)
    assert float(low) == pytest.approx((beta - 0.2) * 0.7, rel=1e-12)


def test_storm_fs_is_the_infinite_slope_expression():
    # Iverson (2000): FS = tan(phi)/tan(a) + (C - psi gw tan(phi)) / (g Z sin cos), psi >= 0 here
    z = np.linspace(0.9, 2.0, 12)
    t = 3 * 3600.0
    psi = storm_pressure_head(z, t, intensity_m_per_s=6e-6, **HEAD)
    assert (psi > 0).all()
    fs = storm_factor_of_safety(z, t, intensity_m_per_s=6e-6, cohesion_kpa=2.0,
                                root_cohesion_kpa=1.0, friction_deg=35.0, unit_weight_kn_m3=19.0,
                                **HEAD)
    a, phi = math.radians(32.0), math.radians(35.0)
    expected = (math.tan(phi) / math.tan(a)
                + (3.0 - psi * GAMMA_W * math.tan(phi)) / (19.0 * z * math.sin(a) * math.cos(a)))
    np.testing.assert_allclose(fs, expected, rtol=1e-6)


def test_suction_is_not_counted_unless_asked():
    args = dict(intensity_m_per_s=0.0, cohesion_kpa=0.0, root_cohesion_kpa=0.0,
                friction_deg=35.0, unit_weight_kn_m3=18.0, **{**HEAD, "water_table_depth_m": 3.0})
    plain = storm_factor_of_safety(1.0, 0.0, **args)
    with_suction = storm_factor_of_safety(1.0, 0.0, count_suction=True, **args)
    dry = math.tan(math.radians(35.0)) / math.tan(math.radians(32.0))
    assert float(plain) == pytest.approx(dry, rel=1e-6)  # psi < 0 taken as 0: the dry FS
    assert float(with_suction) > float(plain)


STORM = dict(water_table_depth_m=1.0, intensity_m_per_s=7e-6, conductivity_m_per_s=1e-5,
             diffusivity_m2_per_s=5e-5, duration_s=2 * 3600.0, cohesion_kpa=2.5,
             root_cohesion_kpa=0.0, friction_deg=37.0, unit_weight_kn_m3=19.0)


def test_storm_minimum_against_a_dense_grid():
    # slow oracle: FS(Z, t) on the same depths and a dense time grid, minimum taken with numpy
    slope, soil, n = 36.0, 1.6, 8
    res = storm_minimum(slope, soil_depth_m=soil, n_depths=n, **STORM)
    depths = soil * np.arange(1, n + 1) / n
    times = np.linspace(0.0, 40 * 3600.0, 8001)
    fs = storm_factor_of_safety(depths[:, None], times[None, :], slope_deg=slope, **STORM)
    k = np.unravel_index(np.argmin(fs), fs.shape)
    assert float(res.fs) <= float(fs[k]) + 1e-6
    assert float(res.fs) == pytest.approx(float(fs[k]), abs=2e-6)
    assert float(res.depth_m) == pytest.approx(depths[k[0]], rel=1e-6)
    # the time, from the float64 head at that depth (the float32 FS is flat near its minimum)
    head = {key: STORM[key] for key in ("water_table_depth_m", "intensity_m_per_s",
                                        "conductivity_m_per_s", "diffusivity_m2_per_s",
                                        "duration_s")}
    psi = storm_pressure_head(depths[k[0]], times, slope_deg=slope, **head)
    assert float(res.time_s) == pytest.approx(times[np.argmax(psi)], abs=10.0)
    assert not res.cap_bound and not res.runoff and not res.short_time_doubtful


def test_storm_minimum_horizon_flags_and_nodata():
    slope = np.array([36.0, 36.0, np.nan, 0.0])
    res = storm_minimum(slope, soil_depth_m=1.6, n_depths=4, horizon_s=1800.0,
                        contributing_area_m2=np.array([1e6, 5.0, 1e6, 1e6]),
                        **{**STORM, "intensity_m_per_s": np.array([7e-6, 7e-6, 7e-6, 2e-5])})
    full = storm_minimum(36.0, soil_depth_m=1.6, n_depths=4, **STORM)
    # the head rises until its peak, so a horizon inside the storm is where the least FS is
    assert float(res.time_s[0]) == pytest.approx(1800.0)
    assert res.fs[0] >= float(full.fs)
    assert np.isnan(res.fs[2]) and not res.runoff[2] and not res.cap_bound[2]
    assert res.fs[3] == 100.0  # flat: the documented cap
    assert res.runoff.tolist() == [False, False, False, True]
    # A / D0 = 5 / 5e-5 = 1e5 s; 0.1 of it = 1e4 s > 1800 s: not flagged; a tiny area is
    tiny = storm_minimum(36.0, soil_depth_m=1.6, contributing_area_m2=0.5, **STORM)
    assert bool(tiny.short_time_doubtful) and not res.short_time_doubtful[1]


def test_storm_minimum_single_depth_is_the_soil_base():
    res = storm_minimum(np.full((2, 3), 34.0), soil_depth_m=1.3, n_depths=1, **STORM)
    assert res.fs.shape == (2, 3) and res.fs.dtype == np.float32
    np.testing.assert_array_equal(res.depth_m, np.float32(1.3))
    no_rain = storm_minimum(34.0, soil_depth_m=1.3, n_depths=1,
                            **{**STORM, "intensity_m_per_s": 0.0})
    assert float(no_rain.time_s) == 0.0 and float(no_rain.fs) > float(res.fs[0, 0])


def test_storm_bad_input():
    with pytest.raises(InputError, match="n_depths"):
        storm_minimum(30.0, soil_depth_m=1.0, n_depths=0, **STORM)
    with pytest.raises(InputError, match="soil_depth_m"):
        storm_minimum(30.0, soil_depth_m=-1.0, **STORM)
    with pytest.raises(InputError, match="horizon_s"):
        storm_minimum(30.0, soil_depth_m=1.0, horizon_s=-5.0, **STORM)
    with pytest.raises(InputError, match="diffusivity_m2_per_s"):
        storm_pressure_head(1.0, 0.0, **{**HEAD, "diffusivity_m2_per_s": 0.0},
                            intensity_m_per_s=1e-6)
    with pytest.raises(InputError, match="t_star"):
        from slopescreen.hydrology import iverson_response

        iverson_response(-1.0)
