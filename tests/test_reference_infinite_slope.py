"""Infinite-slope FS and critical recharge against handbook values.

The formulas are those of docs/methods.md, "Infinite-slope factor of safety" and "Critical
steady recharge"; the expected values are the handbook formulas evaluated by hand.
"""

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from slopescreen.hydrology import steady_wetness
from slopescreen.stability import critical_recharge, factor_of_safety

GAMMA_W = 9.81


def fs(slope, depth, wetness, c=0.0, phi=35.0, gamma=18.0, gamma_sat=None):
    return float(
        factor_of_safety(
            slope, depth, wetness, cohesion_kpa=c, root_cohesion_kpa=0.0, friction_deg=phi,
            unit_weight_kn_m3=gamma, saturated_unit_weight_kn_m3=gamma_sat,
        )
    )


# handbook formula evaluated: (slope, z, W, c', phi', gamma_m, gamma_sat, FS)
HANDBOOK_CASES = [
    # dry, c = 0: tan35 / tan30
    (30.0, 1.0, 0.0, 0.0, 35.0, 18.0, None, 1.2127950),
    # water table at the surface, c = 0, gamma_sat = 20: (10.19 / 20) * 1.2127950
    (30.0, 1.0, 1.0, 0.0, 35.0, 20.0, 20.0, 0.6179191),
    # c' = 5 kPa, theta 35, phi' 30, gamma 18, z = 2 m vertical, dry
    (35.0, 2.0, 0.0, 5.0, 30.0, 18.0, None, 1.120147),
    # same with h_w = 1 m (W = 0.5)
    (35.0, 2.0, 0.5, 5.0, 30.0, 18.0, None, 0.895459),
    # c' = 5, theta 30, phi' 35, gamma_m 17, gamma_sat 19, z = 1.2, h_w = 0.6
    (30.0, 1.2, 0.5, 5.0, 35.0, 17.0, 19.0, 1.416892),
]


@pytest.mark.parametrize("slope,z,w,c,phi,gm,gs,expected", HANDBOOK_CASES)
def test_handbook_cases(slope, z, w, c, phi, gm, gs, expected):
    # each case to 1e-6
    assert fs(slope, z, w, c=c, phi=phi, gamma=gm, gamma_sat=gs) == pytest.approx(expected, abs=1e-6)


def test_dry_cohesionless_fs_is_independent_of_depth_and_unit_weight():
    # docs/methods.md, "Infinite-slope factor of safety": dry, c = 0 gives tan(phi) / tan(theta)
    depth = np.array([[0.3], [1.0], [2.5], [7.0]])
    gamma = np.array([[12.0, 16.0, 19.0, 23.0]])
    out = factor_of_safety(27.0, depth, 0.0, cohesion_kpa=0.0, root_cohesion_kpa=0.0,
                           friction_deg=33.0, unit_weight_kn_m3=gamma)
    assert out.shape == (4, 4)
    expected = math.tan(math.radians(33.0)) / math.tan(math.radians(27.0))
    np.testing.assert_allclose(out, expected, rtol=2e-7)


def test_single_unit_weight_form_matches_general_form():
    # docs/methods.md, "Infinite-slope factor of safety", one unit weight:
    # FS = C/(g z sin cos) + (1 - m gw/g) tan(phi)/tan(theta)
    rng = np.random.default_rng(11)
    slope = rng.uniform(5, 60, 200)
    z = rng.uniform(0.3, 3, 200)
    m = rng.uniform(0, 1, 200)
    c = rng.uniform(0, 10, 200)
    phi = rng.uniform(20, 45, 200)
    g = rng.uniform(14, 22, 200)
    th, ph = np.radians(slope), np.radians(phi)
    expected = c / (g * z * np.sin(th) * np.cos(th)) + (1 - m * GAMMA_W / g) * np.tan(ph) / np.tan(th)
    expected = np.clip(expected, 0, 100)
    out = factor_of_safety(slope, z, m, cohesion_kpa=c, root_cohesion_kpa=0.0,
                           friction_deg=phi, unit_weight_kn_m3=g)
    np.testing.assert_allclose(out, expected, rtol=1e-6)


# worked example of docs/methods.md, "Critical steady recharge" (handbook formula evaluated)
EX = dict(theta=30.0, phi=35.0, c=2.0, z=1.0, gamma=18.0, k_m_per_s=2e-5, a=100.0)


def _wc(theta_deg):
    th, ph = math.radians(theta_deg), math.radians(EX["phi"])
    return (EX["c"] / (GAMMA_W * EX["z"] * math.cos(th) ** 2 * math.tan(ph))
            + EX["gamma"] / GAMMA_W * (1 - math.tan(th) / math.tan(ph)))


def _example(theta):
    return critical_recharge(
        theta, EX["a"], depth_m=EX["z"], cohesion_kpa=EX["c"], root_cohesion_kpa=0.0,
        friction_deg=EX["phi"], unit_weight_kn_m3=EX["gamma"],
        conductivity_m_per_day=EX["k_m_per_s"] * 86400.0,
    )


def test_worked_example_critical_recharge():
    # computed independently here: W_c = 0.710158, T = K z cos30, q = W_c T sin30 / a
    wc = _wc(30.0)
    assert wc == pytest.approx(0.710158, abs=1e-6)  # worked by hand
    q_indep = wc * EX["k_m_per_s"] * EX["z"] * math.cos(math.radians(30)) * 0.5 / EX["a"]
    q_indep_mm_day = q_indep * 1000 * 86400
    assert q_indep_mm_day == pytest.approx(5.3137, abs=1e-4)  # worked by hand: 5.3137 mm/day
    q, cls = _example(30.0)
    assert int(cls) == 2
    assert float(q) == pytest.approx(q_indep_mm_day, rel=1e-6)
    assert float(q) == pytest.approx(5.3137, abs=1e-4)


def test_worked_example_convention_is_sin_and_t_with_cos():
    # docs/methods.md, "Steady wetness": with T = K z (or tan instead of sin) q_cr is
    # 0.25566 mm/h, x 1/cos30
    q, _ = _example(30.0)
    wc = _wc(30.0)
    q_other_mm_h = wc * EX["k_m_per_s"] * EX["z"] * 0.5 / EX["a"] * 1000 * 3600
    assert q_other_mm_h == pytest.approx(0.25566, abs=1e-5)
    assert q_other_mm_h * 24 / float(q) == pytest.approx(1 / math.cos(math.radians(30)), rel=1e-6)


def _fs_dry(theta_deg):
    # infinite-slope FS, single unit weight, W = 0: C/(g z sin cos) + tan(phi)/tan(theta)
    th, ph = math.radians(theta_deg), math.radians(EX["phi"])
    return (EX["c"] / (EX["gamma"] * EX["z"] * math.sin(th) * math.cos(th))
            + math.tan(ph) / math.tan(th))


def _fs_saturated(theta_deg):
    # infinite-slope FS, single unit weight, W = 1
    th, ph = math.radians(theta_deg), math.radians(EX["phi"])
    return (EX["c"] / (EX["gamma"] * EX["z"] * math.sin(th) * math.cos(th))
            + (1 - GAMMA_W / EX["gamma"]) * math.tan(ph) / math.tan(th))


def test_worked_example_class_bounds():
    # The class bounds are where the dry FS (class 1 above it) and the saturated FS (class 3
    # below it) equal 1, found here by root finding on the infinite-slope formula.
    unstable = brentq(lambda t: _fs_dry(t) - 1.0, 30.0, 60.0, xtol=1e-12)
    stable = brentq(lambda t: _fs_saturated(t) - 1.0, 5.0, 30.0, xtol=1e-12)
    # the same bounds from W_c = 0 and W_c = 1 (critical recharge)
    assert brentq(_wc, 30.0, 60.0, xtol=1e-12) == pytest.approx(unstable, abs=1e-9)
    assert brentq(lambda t: _wc(t) - 1.0, 5.0, 30.0, xtol=1e-12) == pytest.approx(stable, abs=1e-9)
    assert unstable == pytest.approx(42.0394, abs=1e-4)
    assert stable == pytest.approx(24.3444, abs=1e-4)
    _, cls = _example(np.array([unstable - 1e-3, unstable + 1e-3, stable - 1e-3, stable + 1e-3]))
    assert cls.tolist() == [2, 1, 3, 2]


def test_worked_example_quoted_bounds_freeze_cos_at_30_degrees():
    # Regression note (docs/methods.md, "Critical steady recharge"): 40.310 and 25.020
    # degrees, the bounds once quoted for the worked example, come out when the cohesion
    # term keeps cos^2(30) = 0.75 while tan(theta) varies (computed here); with
    # cos^2(theta) at the slope itself the bounds are 42.039 and 24.344 (test above), and at
    # 40.310 degrees the dry FS is still above 1, so that cell is class 2, not 1.
    def wc_frozen(t):
        ph = math.radians(EX["phi"])
        return (EX["c"] / (GAMMA_W * EX["z"] * 0.75 * math.tan(ph))
                + EX["gamma"] / GAMMA_W * (1 - math.tan(math.radians(t)) / math.tan(ph)))

    assert brentq(wc_frozen, 30.0, 60.0) == pytest.approx(40.310, abs=5e-4)
    assert brentq(lambda t: wc_frozen(t) - 1.0, 5.0, 30.0) == pytest.approx(25.020, abs=5e-4)
    assert _fs_dry(40.310) > 1.04
    _, cls = _example(np.array([40.310, 25.020]))
    assert cls.tolist() == [2, 2]


def test_fs_is_one_at_critical_wetness():
    # docs/methods.md, "Critical steady recharge": FS(W = W_c) = 1 exactly (single unit
    # weight, any cohesion)
    for theta in (26.0, 30.0, 35.0, 40.0):
        wc = _wc(theta)
        assert 0 < wc < 1
        val = fs(theta, EX["z"], wc, c=EX["c"], phi=EX["phi"], gamma=EX["gamma"])
        assert val == pytest.approx(1.0, abs=1e-6)


def test_critical_recharge_brings_fs_to_one_through_steady_wetness():
    # defining property: the wetness produced by q_cr (steady wetness) gives FS = 1 (infinite slope)
    slope = np.array([26.0, 30.0, 33.0, 38.0, 40.0])
    sca = np.array([20.0, 100.0, 300.0, 55.0, 900.0])
    k = 1.728
    q, cls = critical_recharge(slope, sca, depth_m=1.0, cohesion_kpa=2.0, root_cohesion_kpa=0.0,
                               friction_deg=35.0, unit_weight_kn_m3=18.0,
                               conductivity_m_per_day=k)
    assert (cls == 2).all()
    w = steady_wetness(sca, slope, recharge_mm_per_day=q.astype(np.float64),
                       conductivity_m_per_day=k, depth_m=1.0)
    out = factor_of_safety(slope, 1.0, w, cohesion_kpa=2.0, root_cohesion_kpa=0.0,
                           friction_deg=35.0, unit_weight_kn_m3=18.0)
    np.testing.assert_allclose(out, 1.0, atol=2e-6)
