"""Monte Carlo and FOSM: reproducibility, correlation modes, consistency, validation."""

import math

import numba
import numpy as np
import pytest
from scipy import stats

from slopescreen._kernels.counter_rng import _counter_key, _seed_key, _stream_key, _uniform01
from slopescreen.errors import InputError
from slopescreen.hydrology import SteadyRain, StormRain, steady_wetness, storm_minimum
from slopescreen.parameters import Parameter, fixed, lognormal, normal, uniform
from slopescreen.probability import (
    PARAMETER_ORDER,
    encode_table,
    failure_probability,
    fosm_reliability,
)
from slopescreen.stability import factor_of_safety

UNIT = {
    "depth_m": uniform(0.8, 1.6),
    "cohesion_kpa": 1.0,
    "root_cohesion_kpa": uniform(2.0, 8.0),
    "friction_deg": normal(34.0, 2.0),
    "unit_weight_kn_m3": 18.5,
    "conductivity_m_per_day": lognormal(2.0, 0.3),
    "diffusivity_m2_per_s": 5e-5,
}


def _grid(shape=(6, 7), seed=0):
    rng = np.random.default_rng(seed)
    slope = rng.uniform(20, 45, shape)
    sca = rng.uniform(5, 300, shape)
    return slope, sca


def test_same_seed_same_bits_other_seed_other_result():
    slope, sca = _grid()
    table = encode_table([UNIT])
    unit = np.zeros(slope.shape, dtype=np.int32)
    a = failure_probability(slope, sca, unit, table, SteadyRain(40.0), samples=300, seed=7)
    b = failure_probability(slope, sca, unit, table, SteadyRain(40.0), samples=300, seed=7)
    c = failure_probability(slope, sca, unit, table, SteadyRain(40.0), samples=300, seed=8)
    assert a[0].dtype == np.float32 and a[1].dtype == np.float32
    assert np.array_equal(a[0], b[0]) and np.array_equal(a[1], b[1])
    assert not np.array_equal(a[0], c[0])
    assert 0 < a[0].mean() < 1


def test_result_does_not_depend_on_thread_count():
    slope, sca = _grid((40, 40), seed=1)
    table = encode_table([UNIT])
    unit = np.zeros(slope.shape, dtype=np.int64)
    before = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        one = failure_probability(slope, sca, unit, table, SteadyRain(40.0), samples=200, seed=3)
        numba.set_num_threads(numba.config.NUMBA_NUM_THREADS)
        many = failure_probability(slope, sca, unit, table, SteadyRain(40.0), samples=200, seed=3)
    finally:
        numba.set_num_threads(before)
    assert np.array_equal(one[0], many[0]) and np.array_equal(one[1], many[1])


def test_standard_error_formula():
    slope, sca = _grid()
    p, se = failure_probability(slope, sca, np.zeros(slope.shape, int), encode_table([UNIT]),
                                SteadyRain(40.0), samples=250, seed=2)
    np.testing.assert_allclose(se, np.sqrt(p * (1 - p) / 250), rtol=1e-6)


def test_counts_match_a_plain_python_oracle():
    # slow oracle: the package's counter keys, quantiles from scipy.stats, FS in numpy
    # (docs/methods.md, "Steady wetness" and "Infinite-slope factor of safety"); the count of
    # FS < 1 must agree sample for sample
    slope = np.array([[28.0, 33.0, 37.0], [41.0, 30.0, 35.0]])
    sca = np.array([[40.0, 120.0, 15.0], [60.0, 300.0, 80.0]])
    unit = np.zeros(slope.shape, dtype=np.int32)
    table = encode_table([UNIT])
    n, seed, q = 150, 11, 40.0
    p, _ = failure_probability(slope, sca, unit, table, SteadyRain(q), samples=n, seed=seed)
    ppf = {
        0: stats.uniform(0.8, 0.8).ppf,
        2: stats.uniform(2.0, 6.0).ppf,
        3: stats.truncnorm(-17.0, 13.0, loc=34.0, scale=2.0).ppf,  # truncated to [0, 60]
        5: stats.lognorm(s=0.3, scale=2.0).ppf,
    }
    run = np.uint64(_seed_key(np.uint64(seed)))
    for i in range(slope.size):
        key = np.uint64(_stream_key(run, i))
        fails = 0
        for s in range(n):
            x = [1.0, 1.0, 0.0, 0.0, 18.5, 0.0, 5e-5]
            for k, f in ppf.items():
                x[k] = float(f(_uniform01(np.uint64(_counter_key(key, s * 7 + k)))))
            z, c, cr, phi, g, cond, _ = x
            th = math.radians(slope.flat[i])
            w = min(1.0, q * 1e-3 * sca.flat[i] / (cond * z * math.cos(th) * math.sin(th)))
            fs = ((c + cr) / (g * z * math.sin(th) * math.cos(th))
                  + (1 - w * 9.81 / g) * math.tan(math.radians(phi)) / math.tan(th))
            fails += fs < 1.0
        assert p.flat[i] == np.float32(fails / n)


def test_unit_correlation_shares_draws_within_a_unit():
    # dry (no recharge), slope < 45 deg: FS falls with slope for any parameter set, so with
    # draws shared by the unit the set of failing samples grows with slope: P_f is monotone
    slope = np.linspace(25, 44, 40).reshape(5, 8)
    sca = np.full(slope.shape, 50.0)
    unit = np.zeros(slope.shape, dtype=np.int32)
    unit[:, 4:] = 1
    loose = {**UNIT, "cohesion_kpa": 0.0, "root_cohesion_kpa": uniform(0.0, 3.0),
             "friction_deg": normal(34.0, 3.0)}
    table = encode_table([loose, loose])
    kw = dict(samples=200, seed=5)
    p_unit, _ = failure_probability(slope, sca, unit, table, SteadyRain(0.0), correlation="unit", **kw)
    for u in (0, 1):
        vals = p_unit[unit == u]
        order = np.argsort(slope[unit == u])
        assert (np.diff(vals[order]) >= 0).all()
        assert vals.min() < vals.max()
    # identical cells of one unit get identical results; of the other unit, other draws
    same = np.full((2, 3), 38.0)
    sca2 = np.full((2, 3), 50.0)
    units2 = np.array([[0, 0, 0], [1, 1, 1]])
    pu, _ = failure_probability(same, sca2, units2, table, SteadyRain(0.0), correlation="unit", **kw)
    assert 0 < pu[0, 0] < 1
    assert (pu[0] == pu[0, 0]).all() and (pu[1] == pu[1, 0]).all() and pu[0, 0] != pu[1, 0]
    pc, _ = failure_probability(same, sca2, units2, table, SteadyRain(0.0), correlation="cell", **kw)
    assert len(np.unique(pc)) > 1


def test_fixed_parameters_reproduce_the_deterministic_maps():
    fixed_unit = {k: (v.central() if isinstance(v, Parameter) else v) for k, v in UNIT.items()}
    slope, sca = _grid((10, 10), seed=4)
    table = encode_table([fixed_unit])
    unit = np.zeros(slope.shape, dtype=np.int32)
    p, se = failure_probability(slope, sca, unit, table, SteadyRain(80.0), samples=3, seed=1)
    strength = dict(cohesion_kpa=fixed_unit["cohesion_kpa"],
                    root_cohesion_kpa=fixed_unit["root_cohesion_kpa"],
                    friction_deg=fixed_unit["friction_deg"],
                    unit_weight_kn_m3=fixed_unit["unit_weight_kn_m3"])
    w = steady_wetness(sca, slope, recharge_mm_per_day=80.0,
                       conductivity_m_per_day=fixed_unit["conductivity_m_per_day"],
                       depth_m=fixed_unit["depth_m"])
    fs = factor_of_safety(slope, fixed_unit["depth_m"], w, **strength)
    np.testing.assert_array_equal(p, (fs < 1).astype(np.float32))
    assert (se == 0).all() and 0 < p.mean() < 1
    rain = StormRain(30.0, 6.0, 0.6)
    ps, _ = failure_probability(slope, None, unit, table, rain, samples=2, seed=1)
    res = storm_minimum(slope, soil_depth_m=fixed_unit["depth_m"], water_table_depth_m=0.6,
                        intensity_m_per_s=rain.intensity_m_per_s,
                        conductivity_m_per_s=fixed_unit["conductivity_m_per_day"] / 86400,
                        diffusivity_m2_per_s=5e-5, duration_s=rain.duration_s, n_depths=1, **strength)
    np.testing.assert_array_equal(ps, (res.fs < 1).astype(np.float32))


def test_storm_over_more_depths_never_lowers_p():
    # the depth grid always holds the soil base, and the draws are the same: P can only grow
    slope, _ = _grid((6, 6), seed=9)
    unit = np.zeros(slope.shape, dtype=np.int32)
    table = encode_table([UNIT])
    rain = StormRain(20.0, 4.0, 0.8)
    base, _ = failure_probability(slope, None, unit, table, rain, samples=60, seed=2)
    deep, _ = failure_probability(slope, None, unit, table, rain, samples=60, seed=2, n_depths=4)
    assert (deep >= base).all()


def test_nodata_cells():
    slope, sca = _grid((3, 4))
    slope[0, 0] = np.nan
    sca[1, 1] = np.nan
    unit = np.zeros(slope.shape, dtype=np.int16)
    unit[2, 2] = -1
    p, se = failure_probability(slope, sca, unit, encode_table([UNIT]), SteadyRain(10.0),
                                samples=20, seed=0)
    nan = np.isnan(p)
    assert nan.sum() == 3 and nan[0, 0] and nan[1, 1] and nan[2, 2]
    assert np.array_equal(nan, np.isnan(se))
    fo = fosm_reliability(slope, sca, unit, encode_table([UNIT]), SteadyRain(10.0))
    assert np.array_equal(np.isnan(fo.mean_fs), nan)


def test_encode_table_truncates_and_validates():
    table = encode_table([{**UNIT, "depth_m": normal(0.5, 1.0)}])
    assert table.shape == (1, len(PARAMETER_ORDER), 5)
    assert table[0, 0, 3] == 0.0  # depth truncated at 0: never a negative depth
    assert table[0, 3, 4] == 60.0  # friction truncated at 60 degrees
    with pytest.raises(InputError, match="unit 0 friction_deg"):
        encode_table([{**UNIT, "friction_deg": 70.0}])
    with pytest.raises(InputError, match="unit 1 depth_m"):
        encode_table([UNIT, {**UNIT, "depth_m": -1.0}])
    with pytest.raises(InputError, match="root_cohesion_kpa: uniform low"):
        uniform(8.0, 2.0, name="root_cohesion_kpa")
    with pytest.raises(InputError, match="unit 0 root_cohesion_kpa.*physical"):
        encode_table([{**UNIT, "root_cohesion_kpa": uniform(-8.0, -2.0)}])
    with pytest.raises(InputError, match="unknown"):
        encode_table([{**UNIT, "porosity": 0.3}])
    with pytest.raises(InputError, match="cohesion_kpa: missing"):
        encode_table([{k: v for k, v in UNIT.items() if k != "cohesion_kpa"}])


def test_bad_inputs():
    slope, sca = _grid((3, 3))
    unit = np.zeros((3, 3), dtype=np.int32)
    table = encode_table([UNIT])
    steady = SteadyRain(10.0)
    with pytest.raises(InputError, match="sca_m"):
        failure_probability(slope, sca[:2], unit, table, steady)
    with pytest.raises(InputError, match="sca_m"):
        failure_probability(slope, None, unit, table, steady)
    with pytest.raises(InputError, match="unit_index"):
        failure_probability(slope, sca, unit + 1, table, steady)
    with pytest.raises(InputError, match="unit_index"):
        failure_probability(slope, sca, unit.astype(float), table, steady)
    with pytest.raises(InputError, match="correlation"):
        failure_probability(slope, sca, unit, table, steady, correlation="grid")
    with pytest.raises(InputError, match="samples"):
        failure_probability(slope, sca, unit, table, steady, samples=0)
    with pytest.raises(InputError, match="seed"):
        failure_probability(slope, sca, unit, table, steady, seed=-1)
    with pytest.raises(InputError, match="table"):
        failure_probability(slope, sca, unit, table[:, :5], steady)
    with pytest.raises(InputError, match="rain"):
        failure_probability(slope, sca, unit, table, 10.0)
    with pytest.raises(InputError, match="slope_deg"):
        failure_probability(slope + 60, sca, unit, table, steady)
    no_d0 = encode_table([{k: v for k, v in UNIT.items() if k != "diffusivity_m2_per_s"}])
    failure_probability(slope, sca, unit, no_d0, steady, samples=5)  # steady: not needed
    with pytest.raises(InputError, match="unit 0 diffusivity_m2_per_s"):
        failure_probability(slope, None, unit, no_d0, StormRain(10.0, 2.0, 1.0))
    bad = table.copy()
    bad[0, 3] = fixed(75.0).encode()  # a hand-made table is checked against the physical range
    with pytest.raises(InputError, match="unit 0 friction_deg"):
        failure_probability(slope, sca, unit, bad, steady)
    with pytest.raises(InputError, match="fs_distribution"):
        fosm_reliability(slope, sca, unit, table, steady, fs_distribution="beta")


def test_friction_tangent_series():
    # the branch-free tan used for sampled friction angles, against numpy on [0, 60] degrees
    from slopescreen._kernels.friction import _tan_friction

    deg = np.linspace(0.0, 60.0, 6001)
    got = np.array([_tan_friction(d) for d in deg])
    np.testing.assert_allclose(got, np.tan(np.radians(deg)), rtol=2e-15, atol=1e-300)


def test_fosm_in_blocks_equals_one_call(monkeypatch):
    # the kernel is called over blocks of cells so that Ctrl-C is seen between calls; each
    # cell is computed on its own, so the blocks change nothing (compared bit for bit)
    from slopescreen.probability import fosm

    slope, sca = _grid((9, 13))
    unit = np.zeros(slope.shape, dtype=np.int16)
    table = encode_table([{**UNIT, "friction_deg": normal(33.0, 2.0)}])
    storm = StormRain(intensity_mm_per_h=20.0, duration_h=6.0, water_table_depth_m=1.0)
    for rain, depths in ((SteadyRain(10.0), 1), (storm, 5)):
        whole = fosm_reliability(slope, sca, unit, table, rain, n_depths=depths)
        monkeypatch.setattr(fosm, "_CALL_CELLS", 7)
        blocks = fosm_reliability(slope, sca, unit, table, rain, n_depths=depths)
        monkeypatch.undo()
        assert np.array_equal(whole.mean_fs, blocks.mean_fs, equal_nan=True)
        assert np.array_equal(whole.sd_fs, blocks.sd_fs, equal_nan=True)
