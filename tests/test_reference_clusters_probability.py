"""Probability that a cluster fails, checked against exact answers.

A rectangular slab whose FS is linear in a root cohesion (block force balance worked by hand,
docs/methods.md, "Multi-cell failure clusters"; force model of Milledge et al. 2014): P(FS < 1)
is a normal (or truncated normal) probability from scipy.stats, and the Monte Carlo estimate must
lie within 4 standard errors of it. The margin of the slab is charged on the 16 directed cell
pairs (8 neighbours, 8 knight moves) with Cauchy-Crofton weights (Boykov and Kolmogorov 2003,
from memory), written out here from the weight formula with the pairs counted on the raster.
"""

import math

import numba
import numpy as np
import pytest
from scipy import optimize, stats

from earth_pressure_oracle import inclined_rankine
from pair_oracle import STEPS, pair_geometry
from slopescreen.clusters import cluster_factor_of_safety, cluster_forces
from slopescreen.clusters.probability import cluster_failure_probability, cluster_parameter_draws
from slopescreen.hydrology import SteadyRain, StormRain, storm_pressure_head
from slopescreen.parameters import lognormal, normal, uniform
from slopescreen.probability import encode_table

GW = 9.81
THETA, PHI, GAMMA, Z, ETA = 38.0, 33.0, 17.0, 1.3, 0.5
DX, DY = 4.0, 5.0


def _margin_pairs(mask):
    """Per step k, the number of ordered pairs (i in S, i + e_k not in S or off the grid)."""
    rows, cols = mask.shape
    rr, cc = np.nonzero(mask)
    counts = []
    for dr, dc in STEPS:
        r2, c2 = rr + dr, cc + dc
        on = (r2 >= 0) & (r2 < rows) & (c2 >= 0) & (c2 < cols)
        inside = np.zeros(rr.size, bool)
        inside[on] = mask[r2[on], c2[on]]
        counts.append(int((~inside).sum()))
    return counts


def _slab_terms(mask, w, c_lat):
    """Hand force balance of a slab (cells of ``mask``) facing south, c' = 0, bulk unit weight.

    Uniform fields, so every margin pair has the same per-metre values; pair k is charged
    factor_k [c+^2 toe + c-^2 head + (1 - c^2) side] and an active thrust factor_k c-^2 P_a,
    c = e_k . downslope (Milledge et al. 2014 force model on the pairs of docs/methods.md).
    Returns (resistance without basal roots, driving + active, basal root coefficient),
    all kN, so that FS = (res0 + c_r * coef) / drive.
    """
    t, p = math.radians(THETA), math.radians(PHI)
    hw = w * Z
    col = GAMMA * Z
    u = GW * hw * math.cos(t) ** 2
    area = int(mask.sum()) * DX * DY
    drive = col * area * math.sin(t)
    basal0 = (col * math.cos(t) ** 2 - u) * math.tan(p) * area / math.cos(t)
    s = math.sin(p)
    ka, kp = inclined_rankine(THETA, PHI)     # closed form, ground parallel to the slip plane
    k0 = 1 - s
    dry = Z - hw
    sv = GAMMA * dry ** 2 / 2 + GAMMA * dry * hw + (GAMMA - GW) * hw ** 2 / 2
    toe = ETA * kp * sv                        # per metre of margin
    head = c_lat * Z
    side = c_lat * Z + k0 * math.tan(p) * sv
    active = ka * sv                           # c' = 0: no tension zone
    down_e, down_n = 0.0, -1.0                 # aspect 180: downslope is south
    margin = thrust = 0.0
    for n_k, (ue, un, a_k) in zip(_margin_pairs(mask), pair_geometry(DX, DY)):
        c = ue * down_e + un * down_n
        cp, cm = max(c, 0.0), max(-c, 0.0)
        margin += n_k * a_k * (cp * cp * toe + cm * cm * head + (1 - c * c) * side)
        thrust += n_k * a_k * cm * cm * active
    return basal0 + margin, drive + thrust, area / math.cos(t)


def _grid(nr=5, nc=4, rows=12, cols=10):
    lab = np.zeros((rows, cols), np.int32)
    lab[3:3 + nr, 2:2 + nc] = 1
    return lab, np.full((rows, cols), THETA), np.full((rows, cols), 180.0)


def _unit(**kw):
    base = {"depth_m": Z, "cohesion_kpa": 0.0, "root_cohesion_kpa": 0.0, "friction_deg": PHI,
            "unit_weight_kn_m3": GAMMA, "conductivity_m_per_day": 1.0}
    base.update(kw)
    return base


def _run(lab, slope, aspect, units, lateral, samples, seed=11, **kw):
    unit = np.zeros(lab.shape, int) if "unit_index" not in kw else kw.pop("unit_index")
    return cluster_failure_probability(lab, slope, aspect, unit, encode_table(units),
                                       lateral_root_cohesion_kpa=lateral, dx=DX, dy=DY,
                                       samples=samples, seed=seed, passive_fraction=ETA, **kw)


def test_basal_root_cohesion_truncated_normal_slab():
    lab, slope, aspect = _grid()
    res0, drive, coef = _slab_terms(lab == 1, 0.6, 6.0)
    c_star = (drive - res0) / coef            # FS = 1 at c_r = c*
    assert c_star > 0
    mean, sd = c_star + 0.8, 2.0              # truncated at 0 (physical range)
    res = _run(lab, slope, aspect, [_unit(root_cohesion_kpa=normal(mean, sd))], 6.0, 4000,
               wetness=0.6)
    # scipy.stats.truncnorm: the normal conditioned on c_r >= 0
    exact = stats.truncnorm.cdf(c_star, (0 - mean) / sd, np.inf, loc=mean, scale=sd)
    assert 0.05 < exact < 0.95
    assert abs(res.p_f[0] - exact) < 4 * math.sqrt(exact * (1 - exact) / 4000)
    assert res.standard_error[0] == pytest.approx(math.sqrt(res.p_f[0] * (1 - res.p_f[0]) / 4000))


def test_lateral_root_cohesion_normal_slab():
    # FS is linear in the lateral root cohesion too (sides and head): the scenario key that the
    # encoded table lacks, drawn from its own streams
    lab, slope, aspect = _grid(6, 3)
    r_a, d_a, coef = _slab_terms(lab == 1, 0.8, 0.0)
    r_b, _, _ = _slab_terms(lab == 1, 0.8, 1.0)
    per_kpa = r_b - r_a                        # resistance per kPa of lateral root cohesion
    c_star = (d_a - r_a - 3.0 * coef) / per_kpa    # basal roots fixed at 3 kPa
    mean, sd = c_star + 1.5, 4.0
    res = _run(lab, slope, aspect, [_unit(root_cohesion_kpa=3.0)], normal(mean, sd), 4000,
               wetness=0.8)
    exact = stats.truncnorm.cdf(c_star, (0 - mean) / sd, np.inf, loc=mean, scale=sd)
    assert 0.05 < exact < 0.95
    assert abs(res.p_f[0] - exact) < 4 * math.sqrt(exact * (1 - exact) / 4000)


def test_two_units_inside_one_cluster():
    # the slab spans two soil units (west and east halves): each unit's basal root cohesion is
    # drawn once per sample and shared by its cells, so FS < 1 <=> a1 c1 + a2 c2 < gamma, a
    # normal variable (scipy.stats.norm; truncation at 0 is > 8 sd away and ignored)
    lab, slope, aspect = _grid(5, 4)
    unit = np.zeros(lab.shape, int)
    unit[:, 4:] = 1                           # columns 2-3 unit 0, columns 4-5 unit 1
    res0, drive, coef = _slab_terms(lab == 1, 1.0, 5.0)
    a1 = a2 = coef / 2
    threshold = drive - res0
    cbar = threshold / coef                   # mean basal root cohesion at FS = 1
    s1, s2 = 0.4, 0.3
    m1, m2 = cbar + 0.15 + 0.6, cbar + 0.15 - 0.6
    assert m2 > 8 * s2 and m1 > 8 * s1        # truncation at 0 negligible
    mu = a1 * m1 + a2 * m2
    sigma = math.hypot(a1 * s1, a2 * s2)
    units = [_unit(root_cohesion_kpa=normal(m1, s1)), _unit(root_cohesion_kpa=normal(m2, s2))]
    res = _run(lab, slope, aspect, units, 5.0, 4000, wetness=1.0, unit_index=unit)
    exact = stats.norm.cdf((threshold - mu) / sigma)
    assert 0.05 < exact < 0.95
    assert abs(res.p_f[0] - exact) < 4 * math.sqrt(exact * (1 - exact) / 4000)


def test_steady_rain_wetness_from_sampled_conductivity():
    # W = q a / (K z sin cos) per sample; FS falls as W rises, so FS < 1 <=> K < K*, with W* from
    # the hand balance (brentq) and P(K < K*) of the lognormal from scipy.stats.norm
    lab, slope, aspect = _grid(5, 4)
    sca = np.full(lab.shape, 60.0)
    q = 40.0  # mm/day

    def fs_of(w):
        r, d, _ = _slab_terms(lab == 1, w, 15.0)   # roots hold the dry slab (FS 1.02)
        return r / d - 1.0

    assert fs_of(0.0) > 0 > fs_of(1.0)
    assert np.all(np.diff([fs_of(w) for w in np.linspace(0.0, 1.0, 101)]) < 0)  # monotone
    w_star = optimize.brentq(fs_of, 0.0, 1.0, xtol=1e-14)
    t = math.radians(THETA)
    k_star = q * 1e-3 * 60.0 / (w_star * Z * math.sin(t) * math.cos(t))
    median, sd_log = k_star * 1.3, 0.6
    res = _run(lab, slope, aspect, [_unit(conductivity_m_per_day=lognormal(median, sd_log))],
               15.0, 4000, rain=SteadyRain(q), sca_m=sca)
    exact = stats.norm.cdf((math.log(k_star) - math.log(median)) / sd_log)
    assert 0.05 < exact < 0.95
    assert abs(res.p_f[0] - exact) < 4 * math.sqrt(exact * (1 - exact) / 4000)


def test_storm_wetness_from_sampled_conductivity():
    # Iverson (2000): the head at the soil base, highest over time (found here by scipy's bounded
    # scalar search over time of the public head function, not by the kernel's peak formula),
    # W = psi / (Z cos^2). The rise scales with I/K (I < K), so FS < 1 <=> K < K* (brentq on
    # the hand balance) and P(K < K*) of the lognormal comes from scipy.stats.norm.
    lab, slope, aspect = _grid(5, 4)
    rain = StormRain(20.0, 24.0, Z)           # mm/h (0.48 m/day), h, water table at the base
    d0 = 2e-4                                  # m^2/s
    cos2 = math.cos(math.radians(THETA)) ** 2

    def wetness(k_m_per_day):
        def minus_head(t):
            return -float(storm_pressure_head(
                Z, t, slope_deg=THETA, water_table_depth_m=Z,
                intensity_m_per_s=rain.intensity_m_per_s,
                conductivity_m_per_s=k_m_per_day / 86400.0, diffusivity_m2_per_s=d0,
                duration_s=rain.duration_s))
        best = optimize.minimize_scalar(minus_head, bounds=(0.0, 40.0 * rain.duration_s),
                                        method="bounded", options={"xatol": 1e-3})
        return min(1.0, max(0.0, -best.fun / (Z * cos2)))

    def fs_minus_one(log_k):
        r, d, _ = _slab_terms(lab == 1, wetness(math.exp(log_k)), 20.0)
        return r / d - 1.0

    lo, hi = math.log(0.5), math.log(50.0)   # W = 1 (head at its cap) at the low end
    assert fs_minus_one(lo) < 0 < fs_minus_one(hi)
    k_star = math.exp(optimize.brentq(fs_minus_one, lo, hi, xtol=1e-12))
    median, sd_log = k_star * 1.4, 0.7
    units = [_unit(conductivity_m_per_day=lognormal(median, sd_log), diffusivity_m2_per_s=d0)]
    res = _run(lab, slope, aspect, units, 20.0, 4000, rain=rain)
    exact = stats.norm.cdf((math.log(k_star) - math.log(median)) / sd_log)
    assert 0.05 < exact < 0.95
    assert abs(res.p_f[0] - exact) < 4 * math.sqrt(exact * (1 - exact) / 4000)


def test_every_sample_equals_the_force_model():
    # the defining property: each FS sample is cluster_factor_of_safety of cluster_forces built
    # from that sample's per-unit draws (two units, an irregular cluster, varied terrain)
    rng = np.random.default_rng(4)
    rows, cols = 9, 8
    slope = rng.uniform(25, 45, (rows, cols))
    aspect = rng.uniform(150, 220, (rows, cols))
    unit = np.zeros((rows, cols), int)
    unit[:, 4:] = 1
    unit[0, 0] = -1
    lab = np.zeros((rows, cols), np.int32)
    lab[2:7, 2:6] = 1
    lab[4, 6] = 1
    lab[2, 2] = 0
    units = [_unit(depth_m=uniform(0.8, 1.5), cohesion_kpa=uniform(0.0, 3.0),
                   root_cohesion_kpa=normal(2.0, 1.0), friction_deg=normal(34.0, 2.0),
                   unit_weight_kn_m3=uniform(16.0, 20.0)),
             _unit(depth_m=1.1, cohesion_kpa=1.0, friction_deg=uniform(30.0, 38.0))]
    lateral = [uniform(1.0, 5.0), normal(3.0, 1.0)]
    wet = rng.uniform(0.2, 0.9, (rows, cols))
    res = _run(lab, slope, aspect, units, lateral, 5, seed=2, unit_index=unit, wetness=wet,
               keep_samples=True)
    draws, lat = cluster_parameter_draws(encode_table(units), lateral, samples=5, seed=2)
    for s in range(5):
        per = {k: np.where(unit >= 0, draws[np.maximum(unit, 0), i, s], np.nan)
               for i, k in enumerate(("depth_m", "cohesion_kpa", "root_cohesion_kpa",
                                      "friction_deg", "unit_weight_kn_m3"))}
        f = cluster_forces(slope, aspect, per["depth_m"], wet, dx=DX, dy=DY,
                           cohesion_kpa=per["cohesion_kpa"],
                           root_cohesion_kpa=per["root_cohesion_kpa"],
                           lateral_root_cohesion_kpa=np.where(unit >= 0,
                                                              lat[np.maximum(unit, 0), s], np.nan),
                           friction_deg=per["friction_deg"],
                           unit_weight_kn_m3=per["unit_weight_kn_m3"], passive_fraction=ETA)
        assert res.fs_samples[0, s] == pytest.approx(cluster_factor_of_safety(f, lab == 1),
                                                     rel=1e-12)


def test_reproducible_bit_for_bit_and_thread_independent():
    lab, slope, aspect = _grid()
    lab[9:11, 6:9] = 2
    units = [_unit(root_cohesion_kpa=normal(5.0, 2.0), friction_deg=normal(33.0, 2.0))]
    args = (lab, slope, aspect, units, normal(4.0, 1.5), 300)
    a = _run(*args, seed=5, wetness=0.6, keep_samples=True)
    b = _run(*args, seed=5, wetness=0.6, keep_samples=True)
    assert np.array_equal(a.fs_samples, b.fs_samples) and np.array_equal(a.p_f, b.p_f)
    before = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        c = _run(*args, seed=5, wetness=0.6, keep_samples=True)
    finally:
        numba.set_num_threads(before)
    assert np.array_equal(a.fs_samples, c.fs_samples)
    d = _run(*args, seed=6, wetness=0.6, keep_samples=True)
    assert not np.array_equal(a.fs_samples, d.fs_samples)
    assert a.ids.tolist() == [1, 2]


def test_basal_and_lateral_root_cohesion_come_from_one_quantile():
    # The same roots cross the base and the margins: each sample draws both at one quantile
    # (perfect rank correlation, scipy.stats.spearmanr = 1), each from its own distribution
    # (Kolmogorov-Smirnov against scipy's distribution); with equal distributions they are equal.
    t = encode_table([_unit(root_cohesion_kpa=normal(5.0, 1.0))])
    draws, lat = cluster_parameter_draws(t, normal(5.0, 1.0), samples=2000, seed=9)
    np.testing.assert_array_equal(draws[0, 2], lat[0])
    t = encode_table([_unit(root_cohesion_kpa=uniform(2.0, 8.0))])
    draws, lat = cluster_parameter_draws(t, lognormal(20.0, 0.4), samples=4000, seed=9)
    assert stats.spearmanr(draws[0, 2], lat[0]).statistic == pytest.approx(1.0)
    assert stats.kstest(lat[0], stats.lognorm(0.4, scale=20.0).cdf).pvalue > 1e-3
    assert stats.kstest(draws[0, 2], stats.uniform(2.0, 6.0).cdf).pvalue > 1e-3


def test_correlated_root_cohesions_slab_probability():
    # FS is linear in the basal (c_b) and lateral (c_l) root cohesion of the slab. With
    # c_l = m_l + s_l (c_b - m_b) / s_b (one quantile), FS < 1 <=> coef c_b + per_kpa c_l <
    # threshold, a normal variable whose sd adds the two terms (independent draws would add
    # them in quadrature and give another probability); exact value from scipy.stats.norm.
    lab, slope, aspect = _grid(6, 3)
    r_a, d_a, coef = _slab_terms(lab == 1, 0.8, 0.0)
    r_b, _, _ = _slab_terms(lab == 1, 0.8, 1.0)
    per_kpa = r_b - r_a
    threshold = d_a - r_a
    mb, sl = 4.0, 0.7
    sb = per_kpa * sl / coef                           # the two terms equally uncertain
    sd = coef * sb + per_kpa * sl
    ml = (threshold - coef * mb + sd) / per_kpa        # mean resistance one sd above failure
    assert ml > 8 * sl and mb > 8 * sb                 # truncation at 0 negligible
    mu = coef * mb + per_kpa * ml
    exact = stats.norm.cdf((threshold - mu) / (coef * sb + per_kpa * sl))
    independent = stats.norm.cdf((threshold - mu) / math.hypot(coef * sb, per_kpa * sl))
    res = _run(lab, slope, aspect, [_unit(root_cohesion_kpa=normal(mb, sb))], normal(ml, sl),
               4000, wetness=0.8)
    se = math.sqrt(exact * (1 - exact) / 4000)
    assert 0.05 < exact < 0.95 and abs(exact - independent) > 8 * se
    assert abs(res.p_f[0] - exact) < 4 * se


@pytest.mark.parametrize("antecedent", [None, 1.0])
def test_storm_cluster_samples_take_the_maps_failure_depths(antecedent):
    # item: every storm product uses one failure-depth rule (docs/methods.md, "Storm response
    # (Iverson 2000)"). Each FS sample of a storm cluster must equal the force model built from
    # the storm FS map of that sample's draws: each cell at the depth of its least storm FS
    # (storm_minimum, itself checked against Iverson's equations written out with scipy in
    # test_reference_storm_depths.py) and W = psi / (Z cos^2) there. With an antecedent
    # recharge, each cell's initial water table is the steady one of the sample's draws
    # (antecedent_table_depth, checked by hand in test_reference_antecedent.py).
    from slopescreen.hydrology import StormInputs, antecedent_table_depth, storm_minimum
    from slopescreen.stability import SoilStrength

    rng = np.random.default_rng(12)
    rows, cols = 9, 8
    slope = rng.uniform(28.0, 42.0, (rows, cols))
    aspect = rng.uniform(160.0, 200.0, (rows, cols))
    sca = rng.uniform(5.0, 600.0, (rows, cols))
    lab = np.zeros((rows, cols), np.int32)
    lab[2:7, 2:6] = 1
    lab[4, 6] = 1
    if antecedent is None:
        rain = StormRain(30.0, 20.0, 1.8)     # water table 1.8 m down, 30 mm/h for 20 h
        extra = {}
    else:
        rain = StormRain(30.0, 20.0, antecedent_mm_per_day=antecedent)
        extra = {"sca_m": sca}
    z_min, n_depths = 0.3, 20
    units = [_unit(depth_m=uniform(2.0, 2.6), cohesion_kpa=2.0,
                   conductivity_m_per_day=lognormal(0.8, 0.5), diffusivity_m2_per_s=1e-4,
                   friction_deg=normal(34.0, 2.0))]
    samples = 6
    res = _run(lab, slope, aspect, units, 2.0, samples, seed=5, rain=rain, keep_samples=True,
               n_depths=n_depths, min_failure_depth_m=z_min, **extra)
    draws, lat = cluster_parameter_draws(encode_table(units), 2.0, samples=samples, seed=5)
    above_base = 0
    for s in range(samples):
        h, c, cr, phi, gam, k, d0 = draws[0, :, s]
        table = 1.8 if antecedent is None else antecedent_table_depth(
            sca, slope, recharge_mm_per_day=antecedent, conductivity_m_per_day=k, depth_m=h)
        storm = StormInputs(water_table_depth_m=table, intensity_m_per_s=rain.intensity_m_per_s,
                            conductivity_m_per_s=k / 86400.0, diffusivity_m2_per_s=d0,
                            duration_s=rain.duration_s)
        least = storm_minimum(slope, soil_depth_m=h, storm=storm,
                              strength=SoilStrength(cohesion_kpa=c, root_cohesion_kpa=cr,
                                                    friction_deg=phi, unit_weight_kn_m3=gam),
                              n_depths=n_depths, min_failure_depth_m=z_min)
        depth = least.depth_m.astype(np.float64)
        above_base += int((depth < h - 1e-6).sum())
        psi = storm_pressure_head(depth, least.time_s.astype(np.float64), slope_deg=slope,
                                  storm=storm)
        cos2 = np.cos(np.radians(slope)) ** 2
        wet = np.clip(psi / (depth * cos2), 0.0, 1.0)
        f = cluster_forces(slope, aspect, depth, wet, dx=DX, dy=DY, cohesion_kpa=c,
                           root_cohesion_kpa=cr, lateral_root_cohesion_kpa=lat[0, s],
                           friction_deg=phi, unit_weight_kn_m3=gam, passive_fraction=ETA)
        # float32 map depth and time against the kernel's float64: agreement to ~1e-6
        assert res.fs_samples[0, s] == pytest.approx(cluster_factor_of_safety(f, lab == 1),
                                                     rel=2e-5)
    # the rule matters here: many cells have their least FS above the soil base
    assert above_base > samples * 10
