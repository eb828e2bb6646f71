"""Probability of failure against exact normal results (handbook formulas evaluated).

The methods are those of docs/methods.md, "Probability of failure".
"""

import math

import numpy as np
import pytest
from scipy import stats

from slopescreen.hydrology import SteadyRain
from slopescreen.parameters import normal
from slopescreen.probability import (
    encode_table,
    failure_probability,
    fosm_reliability,
    reliability_index,
)

DRY = SteadyRain(0.0)
BASE = {
    "depth_m": 1.0,
    "cohesion_kpa": 0.0,
    "root_cohesion_kpa": 0.0,
    "friction_deg": 30.0,
    "unit_weight_kn_m3": 18.0,
    "conductivity_m_per_day": 1.0,
}


def _pooled(slope_value, unit, cells, samples, seed):
    slope = np.full((cells, 1), slope_value)
    p, _ = failure_probability(slope, np.full(slope.shape, 10.0), np.zeros(slope.shape, int),
                               encode_table([unit]), DRY, samples=samples, seed=seed)
    n = cells * samples
    est = float(p.astype(np.float64).mean())
    return est, n


def test_monte_carlo_cohesion_only_matches_exact_truncated_normal():
    # FS = C/(g z sin cos) + tan(phi)/tan(theta) is linear in C (infinite slope); C ~ N(4, 1.5)
    # truncated at 0 (physical range), so P_f = P(C < c*) exactly (scipy.stats.truncnorm)
    unit = {**BASE, "cohesion_kpa": normal(4.0, 1.5)}
    ref = stats.truncnorm(-4.0 / 1.5, np.inf, loc=4.0, scale=1.5)
    for k, theta in enumerate((35.0, 40.0, 45.0)):
        th = math.radians(theta)
        c_star = (1 - math.tan(math.radians(30)) / math.tan(th)) * 18.0 * math.sin(th) * math.cos(th)
        exact = ref.cdf(c_star)
        est, n = _pooled(theta, unit, cells=100, samples=1000, seed=20 + k)
        se = math.sqrt(exact * (1 - exact) / n)
        assert abs(est - exact) < 4 * se, (theta, est, exact, se)


def test_dry_cohesionless_case_exact_normal():
    # handbook formula evaluated: FS = tan(phi)/tan(theta), tan(theta) = 0.6,
    # P_f = Phi(-1) = 0.158655.
    # phi is normal in degrees with median atan(0.7) and atan(0.6) one sd below it; FS < 1 iff
    # phi < atan(0.6), and a monotone map keeps quantiles, so P_f = Phi(-1) as for
    # tan(phi) ~ N(0.7, 0.1). Truncation to [0, 60] removes < 1e-9 of the mass.
    mean = math.degrees(math.atan(0.7))
    sd = mean - math.degrees(math.atan(0.6))
    unit = {**BASE, "friction_deg": normal(mean, sd)}
    est, n = _pooled(math.degrees(math.atan(0.6)), unit, cells=250, samples=4000, seed=12345)
    assert n == 10**6
    exact = 0.158655  # Phi(-1), standard normal table
    assert stats.norm.cdf(-1) == pytest.approx(exact, abs=1e-6)  # scipy.stats check of Phi(-1)
    se = math.sqrt(exact * (1 - exact) / n)
    assert abs(est - exact) < 4 * se


def test_fosm_equals_exact_and_monte_carlo_on_a_linear_case():
    # FS linear in C: FOSM mean and sd are exact, beta = (mu - 1)/sigma, P_f = Phi(-beta)
    theta = 40.0
    unit = {**BASE, "cohesion_kpa": normal(5.0, 1.0)}
    slope = np.full((200, 1), theta)
    args = (slope, np.full(slope.shape, 10.0), np.zeros(slope.shape, int), encode_table([unit]), DRY)
    fo = fosm_reliability(*args)
    th = math.radians(theta)
    k = 18.0 * math.sin(th) * math.cos(th)
    ref = stats.truncnorm(-5.0, np.inf, loc=5.0, scale=1.0)  # truncated at 0: mass 2.9e-7 cut
    mu = ref.mean() / k + math.tan(math.radians(30)) / math.tan(th)
    sd = ref.std() / k
    np.testing.assert_allclose(fo.mean_fs, mu, rtol=1e-6)
    np.testing.assert_allclose(fo.sd_fs, sd, rtol=1e-6)
    np.testing.assert_allclose(fo.beta, (mu - 1) / sd, rtol=1e-5)
    p_exact = stats.norm.cdf(-(mu - 1) / sd)
    np.testing.assert_allclose(fo.p_f, p_exact, rtol=1e-5)
    p, _ = failure_probability(*args, samples=2000, seed=4)
    n = p.size * 2000
    assert abs(float(p.astype(np.float64).mean()) - p_exact) < 4 * math.sqrt(p_exact * (1 - p_exact) / n)


def test_fosm_uses_duncan_half_differences():
    # Duncan (2000) Taylor-series variant: sigma_FS = |FS(x + s) - FS(x - s)| / 2, written here
    theta = 33.0
    unit = {**BASE, "friction_deg": normal(34.0, 3.0)}
    slope = np.full((1, 1), theta)
    fo = fosm_reliability(slope, np.full((1, 1), 10.0), np.zeros((1, 1), int), encode_table([unit]), DRY)
    s = normal(34.0, 3.0).truncated(0.0, 60.0).sd()
    tan_t = math.tan(math.radians(theta))
    expected = (math.tan(math.radians(34.0 + s)) - math.tan(math.radians(34.0 - s))) / 2 / tan_t
    assert float(fo.sd_fs[0, 0]) == pytest.approx(expected, rel=1e-6)
    assert float(fo.mean_fs[0, 0]) == pytest.approx(math.tan(math.radians(34.0)) / tan_t, rel=1e-6)


def test_reliability_index_normal_values():
    # standard normal table: Phi(-1), Phi(-2), Phi(-3)
    _, p = reliability_index(np.array([2.0, 3.0, 4.0]), 1.0)
    np.testing.assert_allclose(p, [0.158655, 0.0227501, 0.0013499], atol=5e-7)
    # mu = 1.5, COV = 0.2: normal beta 1.6667, P 0.04779; lognormal beta 1.9483, P 0.02569
    b, p = reliability_index(1.5, 0.3)
    assert float(b) == pytest.approx(1.6667, abs=5e-5) and float(p) == pytest.approx(0.04779, abs=5e-6)
    b, p = reliability_index(1.5, 0.3, fs_distribution="lognormal")
    assert float(b) == pytest.approx(1.9483, abs=5e-5) and float(p) == pytest.approx(0.02569, abs=5e-6)
    b, p = reliability_index(np.array([0.8, 1.2]), 0.0)
    assert np.isnan(b).all() and p.tolist() == [1.0, 0.0]
