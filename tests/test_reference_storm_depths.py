"""One failure-depth rule for every storm product.

docs/methods.md, "Storm response (Iverson 2000)": the storm FS map, Monte
Carlo and FOSM all try Z_k = z_min + (H - z_min) k / n, k = 1..n (the base
only where H <= z_min). Checked against Iverson's (2000) equations written
out here with scipy (erfc, bounded Brent search over time).
"""

import math

import numpy as np
import pytest
from scipy import optimize, special

from slopescreen.hydrology import StormInputs, StormRain, storm_minimum
from slopescreen.parameters import normal
from slopescreen.probability import encode_table, failure_probability, fosm_reliability
from slopescreen.stability import SoilStrength

GAMMA_W = 9.81  # kN/m^3 (from memory; the value the package states in docs/methods.md)


def _oracle(slope_deg, depth_m, *, wt_m, i_m_s, k_m_s, d0, dur_s, coh, phi_deg, gamma,
            z_min, n):
    """Least FS and its depth by Iverson (2000) eqs. (27a,b), (28) written out here."""
    a = math.radians(slope_deg)
    cos2 = math.cos(a) ** 2
    tan_phi = math.tan(math.radians(phi_deg))

    def r(ts):  # Iverson (2000) response function R(t*)
        if ts <= 0.0:
            return 0.0
        return math.sqrt(ts / math.pi) * math.exp(-1.0 / ts) - special.erfc(1.0 / math.sqrt(ts))

    if depth_m <= z_min:
        zs = [depth_m]
    else:
        zs = [z_min + (depth_m - z_min) * k / n for k in range(1, n + 1)]
    best = (math.inf, math.nan)
    for z in zs:
        tz = z * z / (4.0 * d0 * cos2)
        ratio = min(i_m_s, k_m_s) / k_m_s

        def neg_psi(t):
            resp = r(t / tz) - (r((t - dur_s) / tz) if t > dur_s else 0.0)
            return -(cos2 * (z - wt_m) + z * ratio * resp)

        res = optimize.minimize_scalar(neg_psi, bounds=(0.0, dur_s + 30.0 * tz),
                                       method="bounded", options={"xatol": 1e-3})
        psi = min(max(-res.fun, -neg_psi(0.0)), cos2 * z)  # capped at beta Z
        psi = max(psi, 0.0)  # suction not counted
        fs = tan_phi / math.tan(a) + (coh - psi * GAMMA_W * tan_phi) / (
            gamma * z * math.sin(a) * math.cos(a))  # infinite slope with pore pressure
        if fs < best[0]:
            best = (fs, z)
    return best


def _cases(n_cells, seed):
    rng = np.random.default_rng(seed)
    return {
        "slope_deg": rng.uniform(18.0, 42.0, n_cells),
        "depth_m": rng.uniform(0.2, 2.5, n_cells),
        "mm_h": rng.uniform(2.0, 50.0, n_cells),
        "dur_h": rng.uniform(2.0, 48.0, n_cells),
    }


SOIL = {"cohesion_kpa": 0.0, "root_cohesion_kpa": 1.0, "friction_deg": 33.0,
        "unit_weight_kn_m3": 19.0, "conductivity_m_per_day": 0.864,
        "diffusivity_m2_per_s": 5e-5}
WT_M = 1.2
Z_MIN = 0.3


def _map(case):
    storm = StormInputs(water_table_depth_m=WT_M, intensity_m_per_s=case["mm_h"] / 3.6e6,
                        conductivity_m_per_s=SOIL["conductivity_m_per_day"] / 86400.0,
                        diffusivity_m2_per_s=SOIL["diffusivity_m2_per_s"],
                        duration_s=case["dur_h"] * 3600.0)
    strength = SoilStrength(cohesion_kpa=SOIL["cohesion_kpa"],
                            root_cohesion_kpa=SOIL["root_cohesion_kpa"],
                            friction_deg=SOIL["friction_deg"],
                            unit_weight_kn_m3=SOIL["unit_weight_kn_m3"])
    return storm_minimum(case["slope_deg"], soil_depth_m=case["depth_m"], storm=storm,
                         strength=strength, n_depths=20, min_failure_depth_m=Z_MIN)


def _per_cell_probability(case, friction, method):
    """P_f (and FOSM mean FS) cell by cell: rain and soil depth differ per cell."""
    p_f, mean_fs = [], []
    for j in range(case["slope_deg"].size):
        table = encode_table([SOIL | {"depth_m": float(case["depth_m"][j]),
                                      "friction_deg": friction}])
        rain = StormRain(float(case["mm_h"][j]), float(case["dur_h"][j]), WT_M)
        args = (np.full((1, 1), case["slope_deg"][j]), np.full((1, 1), 1.0),
                np.zeros((1, 1), int), table, rain)
        if method == "fosm":
            r = fosm_reliability(*args, n_depths=20, min_failure_depth_m=Z_MIN)
            p_f.append(float(r.p_f[0, 0]))
            mean_fs.append(float(r.mean_fs[0, 0]))
        else:
            p, _ = failure_probability(*args, samples=20, seed=3, n_depths=20,
                                       min_failure_depth_m=Z_MIN)
            p_f.append(float(p[0, 0]))
    return np.array(p_f), np.array(mean_fs)


def test_draw_at_median_reproduces_map_least_fs_and_depth():
    case = _cases(40, seed=11)
    least = _map(case)
    for j in range(40):
        fs, z = _oracle(case["slope_deg"][j], case["depth_m"][j], wt_m=WT_M,
                        i_m_s=case["mm_h"][j] / 3.6e6,
                        k_m_s=SOIL["conductivity_m_per_day"] / 86400.0,
                        d0=SOIL["diffusivity_m2_per_s"], dur_s=case["dur_h"][j] * 3600.0,
                        coh=SOIL["root_cohesion_kpa"], phi_deg=SOIL["friction_deg"],
                        gamma=SOIL["unit_weight_kn_m3"], z_min=Z_MIN, n=20)
        # Iverson (2000) written out with scipy: same least FS (float32 map) and depth
        assert least.fs[j] == pytest.approx(fs, rel=2e-5)
        assert least.depth_m[j] == pytest.approx(z, rel=1e-6)
    # FOSM's FS at the means with every parameter fixed is one draw at the median:
    # the same least FS as the map on every cell
    _, mean_fs = _per_cell_probability(case, SOIL["friction_deg"], "fosm")
    np.testing.assert_allclose(mean_fs, least.fs, rtol=1e-6)


def test_storm_map_and_pf_never_contradict_with_negligible_spread():
    case = _cases(60, seed=5)
    least = _map(case)
    p_f, _ = _per_cell_probability(case, normal(SOIL["friction_deg"], 1e-7), "mc")
    clear = np.abs(least.fs - 1.0) > 1e-4
    assert clear.sum() > 40 and (least.fs[clear] < 1).any() and (least.fs[clear] >= 1).any()
    # a negligible spread: every draw fails exactly where the map fails (defining property)
    np.testing.assert_array_equal(p_f[clear], (least.fs[clear] < 1.0).astype(float))


def test_base_only_probability_missed_a_shallow_failure():
    # regression: a deep, c' = 0 soil under a long storm fails above its base; the
    # base-only Monte Carlo said P_f = 0 where the map said FS < 1
    case = {"slope_deg": np.array([21.4]), "depth_m": np.array([2.06]),
            "mm_h": np.array([36.0]), "dur_h": np.array([17.0])}
    least = _map(case)
    fs_base, _ = _oracle(21.4, 2.06, wt_m=WT_M, i_m_s=36.0 / 3.6e6,
                         k_m_s=SOIL["conductivity_m_per_day"] / 86400.0,
                         d0=SOIL["diffusivity_m2_per_s"], dur_s=17.0 * 3600.0,
                         coh=SOIL["root_cohesion_kpa"], phi_deg=SOIL["friction_deg"],
                         gamma=SOIL["unit_weight_kn_m3"], z_min=2.06, n=1)  # base only
    assert least.fs[0] < 1.0 <= fs_base and least.depth_m[0] < 2.0
    p_f, _ = _per_cell_probability(case, normal(SOIL["friction_deg"], 1e-7), "mc")
    assert p_f[0] == 1.0


def test_soil_thinner_than_the_minimum_uses_the_base_only():
    case = {"slope_deg": np.array([35.0, 35.0]), "depth_m": np.array([0.25, 0.3]),
            "mm_h": np.array([20.0, 20.0]), "dur_h": np.array([12.0, 12.0])}
    least = _map(case)
    # rule of docs/methods.md: H <= z_min -> the base only
    np.testing.assert_array_equal(least.depth_m, np.float32([0.25, 0.3]))


def test_no_failure_depth_shallower_than_the_minimum():
    case = _cases(200, seed=2)
    least = _map(case)
    thick = case["depth_m"] > Z_MIN
    # every depth tried lies in (z_min, H]
    assert (least.depth_m[thick] > Z_MIN).all()
    assert (least.depth_m <= case["depth_m"].astype(np.float32) * (1 + 1e-6)).all()


def test_pruned_failure_decision_equals_the_plain_depth_loop():
    # brute force: the plain loop over every depth (_storm_min_point) against the pruned,
    # early-exit, tabulated-peak decision the Monte Carlo uses; same answer on every random
    # case, with and without a horizon that cuts the rise of the head short
    from slopescreen._kernels.storm import _storm_fails, _storm_min_point, peak_table

    peak = peak_table()
    rng = np.random.default_rng(8)
    checked = 0
    for _ in range(6000):
        a = math.radians(rng.uniform(10.0, 50.0))
        horizon = math.inf if rng.random() < 0.7 else rng.uniform(0.5, 80.0) * 3600.0
        args = (rng.uniform(0.1, 3.0), 20, rng.choice([0.0, 0.3, 0.6]), math.sin(a),
                math.cos(a), rng.uniform(0.0, 2.0), rng.uniform(1.0, 60.0) / 3.6e6,
                rng.uniform(0.1, 5.0) / 86400.0, 10 ** rng.uniform(-6, -3),
                rng.uniform(1.0, 60.0) * 3600.0, 0.0, horizon)
        strength = (rng.uniform(0.0, 8.0), math.tan(math.radians(rng.uniform(25.0, 42.0))),
                    rng.uniform(16.0, 21.0))
        fs = _storm_min_point(*args, *strength, False, False)[0]
        if abs(fs - 1.0) < 1e-9:
            continue
        assert _storm_fails(*args, *strength, *peak) == (fs < 1.0)
        checked += 1
    assert checked > 5900


def test_pruned_least_depth_equals_the_plain_depth_loop():
    # brute force: the plain loop over every depth (_storm_min_point) against the pruned,
    # tabulated-peak search of the cluster Monte Carlo (_storm_least_depth): the same least FS,
    # the same depth and the same head on every random case, with and without a horizon,
    # cohesion down to zero (ties of capped heads) and antecedent-like deep tables
    from slopescreen._kernels.iverson import _head_point
    from slopescreen._kernels.storm import _storm_least_depth, _storm_min_point, peak_table

    peak = peak_table()
    rng = np.random.default_rng(9)
    for i in range(6000):
        a = math.radians(rng.uniform(10.0, 50.0))
        horizon = math.inf if rng.random() < 0.7 else rng.uniform(0.5, 80.0) * 3600.0
        args = (rng.uniform(0.1, 3.0), int(rng.choice([1, 5, 20])), rng.choice([0.0, 0.3, 0.6]),
                math.sin(a), math.cos(a), rng.uniform(0.0, 2.0),
                rng.uniform(0.0, 60.0) / 3.6e6 if i % 10 else 0.0,
                rng.uniform(0.1, 5.0) / 86400.0, 10 ** rng.uniform(-6, -3),
                rng.uniform(1.0, 60.0) * 3600.0, 0.0, horizon)
        cohesion = 0.0 if i % 7 == 0 else rng.uniform(0.0, 8.0)
        strength = (cohesion, math.tan(math.radians(rng.uniform(25.0, 42.0))),
                    rng.uniform(16.0, 21.0))
        fs, z, t, _ = _storm_min_point(*args, *strength, False, False)
        psi = _head_point(z, t, args[4], args[5], args[6], args[7], args[8], args[9],
                          args[10])[0]
        got = _storm_least_depth(*args, *strength, *peak)
        assert got[0] == fs and got[1] == z, (i, got, fs, z)
        assert got[2] == pytest.approx(psi, rel=1e-12, abs=1e-12)


def test_tabulated_peak_head_matches_a_bounded_search_within_its_bound():
    # the peak over t* of Iverson's (2000) R(t*) - R(t* - T*) found by scipy's bounded Brent
    # search (an independent optimiser) against the table's interpolated value; the table's
    # stated relative error bound eps must cover the difference
    from slopescreen._kernels.storm import _table_at, peak_table

    table, x0, inv_h, eps = peak_table()

    def r(ts):
        if ts <= 0.0:
            return 0.0
        return math.sqrt(ts / math.pi) * math.exp(-1.0 / ts) - special.erfc(1.0 / math.sqrt(ts))

    assert eps < 1e-5
    for storm_ts in np.geomspace(1e-5, 1e5, 61) * 1.0137:
        res = optimize.minimize_scalar(lambda t: -(r(t) - r(t - storm_ts)),
                                       bounds=(storm_ts, storm_ts + 50.0 * max(1.0, storm_ts)),
                                       method="bounded", options={"xatol": 1e-10 * storm_ts})
        exact = -res.fun
        tabulated = math.exp(_table_at(table, x0, inv_h, 0, math.log(storm_ts)))
        assert abs(tabulated / exact - 1.0) <= eps
