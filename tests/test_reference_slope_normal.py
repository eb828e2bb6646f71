"""Soil depth measured normal to the slope ([soil] depth_measured = "slope_normal").

The reference is the handbook infinite-slope factor of safety written with
the slope-normal thickness H of the sliding layer, written out here
independently of the package (Skempton & DeLory 1957; Duncan, Wright &
Brandon 2014, "Soil Strength and Slope Stability", infinite slope, from
memory). For a layer of thickness H normal to a slope beta, with the
water table at m H above the slip plane (seepage parallel to the slope):

    tau     = gamma H sin(beta)
    sigma'  = (gamma - m gamma_w) H cos(beta)
    FS      = c' / (gamma H sin beta) + (1 - m gamma_w / gamma) tan(phi') / tan(beta)

which is the vertical form with z = H / cos(beta) (docs/methods.md,
"Slope-normal soil thickness").
"""

import math

import numpy as np
import pytest

from slopescreen.cli import main
from slopescreen.clusters import ClusterUncertainty, cluster_failure_probability, cluster_forces
from slopescreen.errors import InputError
from slopescreen.grid import read_back
from slopescreen.hydrology import StormRain, SteadyRain, steady_wetness, storm_minimum
from slopescreen.parameters import normal
from slopescreen.probability import encode_table, failure_probability, fosm_reliability
from slopescreen.stability import critical_recharge, factor_of_safety
from test_pipeline import SOIL as PIPELINE_SOIL
from test_pipeline import run_ok, write_case

GAMMA_W = 9.81  # kN/m^3, unit weight of water (handbook value)
SLOPES = np.array([10.0, 25.0, 35.0, 42.0, 50.0])


def handbook_fs_normal(c_kpa, phi_deg, gamma, H, beta_deg, m):
    """Infinite-slope FS with slope-normal thickness H (Duncan & Wright, from memory)."""
    b = np.radians(beta_deg)
    return (c_kpa / (gamma * H * np.sin(b))
            + (1.0 - m * GAMMA_W / gamma) * np.tan(np.radians(phi_deg)) / np.tan(b))


@pytest.mark.parametrize("m", [0.0, 0.5, 1.0])
def test_fs_from_slope_normal_thickness_matches_handbook_form(m):
    H, c, phi, gamma = 1.0, 5.0, 32.0, 18.0
    fs = factor_of_safety(SLOPES, H, m, depth_measured="slope_normal", cohesion_kpa=c,
                          root_cohesion_kpa=0.0, friction_deg=phi, unit_weight_kn_m3=gamma)
    # handbook form in H (Skempton & DeLory 1957; Duncan & Wright, from memory)
    np.testing.assert_allclose(fs, handbook_fs_normal(c, phi, gamma, H, SLOPES, m), rtol=1e-5)


def test_thickness_entered_as_vertical_overstates_cohesion_term_by_22_percent_at_35_deg():
    # dry, frictionless: FS is the cohesion term alone, c' / (gamma z sin cos)
    kw = dict(cohesion_kpa=5.0, root_cohesion_kpa=0.0, friction_deg=0.0, unit_weight_kn_m3=18.0)
    as_vertical = factor_of_safety(35.0, 1.0, 0.0, **kw)
    as_normal = factor_of_safety(35.0, 1.0, 0.0, depth_measured="slope_normal", **kw)
    # ratio 1 / cos 35 deg = 1.2208 (closed form): the 22 % of the issue
    assert float(as_vertical / as_normal) == pytest.approx(1.0 / math.cos(math.radians(35.0)),
                                                            rel=1e-5)
    assert float(as_vertical / as_normal) == pytest.approx(1.22, abs=0.005)


def test_steady_wetness_from_slope_normal_thickness_uses_transmissivity_k_h():
    # T = K z cos(beta) = K H for z = H / cos(beta) (docs/methods.md, "Steady wetness")
    q, a, k, H = 5.0, 40.0, 1.728, 0.9
    w = steady_wetness(a, SLOPES, recharge_mm_per_day=q, conductivity_m_per_day=k, depth_m=H,
                       depth_measured="slope_normal")
    expected = np.minimum(1.0, q * 1e-3 * a / (k * H * np.sin(np.radians(SLOPES))))
    np.testing.assert_allclose(w, expected, rtol=1e-5)


def test_critical_recharge_from_slope_normal_thickness_matches_closed_form():
    # FS = 1 in the handbook form in H solved for m, then q = m K H sin(beta) / a
    H, c, phi, gamma, k, a = 1.2, 4.0, 38.0, 18.0, 2.0, 60.0
    slopes = np.array([31.0, 33.0, 36.0])
    q, cls = critical_recharge(slopes, a, depth_m=H, cohesion_kpa=c, root_cohesion_kpa=0.0,
                               friction_deg=phi, unit_weight_kn_m3=gamma,
                               conductivity_m_per_day=k, depth_measured="slope_normal")
    b = np.radians(slopes)
    tp = math.tan(math.radians(phi))
    m_c = (gamma / GAMMA_W) * (1.0 + c / (gamma * H * np.sin(b)) * np.tan(b) / tp
                               - np.tan(b) / tp)
    assert np.all((m_c > 0) & (m_c < 1)), m_c  # the check needs class-2 cells
    assert np.all(cls == 2)
    # FS at m_c is 1 by the handbook form (a check of the algebra above)
    np.testing.assert_allclose(handbook_fs_normal(c, phi, gamma, H, slopes, m_c), 1.0, rtol=1e-9)
    np.testing.assert_allclose(q, m_c * k * H * np.sin(b) / a * 1000.0, rtol=1e-5)


def test_storm_minimum_with_slope_normal_thickness_is_the_vertical_run_at_h_over_cos():
    # the conversion z = H / cos(beta) is geometry; the vertical run is the landed,
    # checked model (tests/test_reference_iverson.py)
    kw = dict(water_table_depth_m=0.8, intensity_m_per_s=8e-6, conductivity_m_per_s=1e-5,
              diffusivity_m2_per_s=5e-5, duration_s=6 * 3600.0, cohesion_kpa=3.0,
              root_cohesion_kpa=0.0, friction_deg=33.0, unit_weight_kn_m3=19.0, n_depths=8)
    H = 1.5
    normal_run = storm_minimum(SLOPES, soil_depth_m=H, depth_measured="slope_normal", **kw)
    vertical_run = storm_minimum(SLOPES, soil_depth_m=H / np.cos(np.radians(SLOPES)), **kw)
    np.testing.assert_array_equal(normal_run.fs, vertical_run.fs)
    np.testing.assert_array_equal(normal_run.depth_m, vertical_run.depth_m)  # vertical depth
    assert np.all(normal_run.depth_m > H)  # at the base z = H / cos > H on these slopes


def _table(H, phi):
    return encode_table([{"depth_m": H, "cohesion_kpa": 6.0, "root_cohesion_kpa": 0.0,
                          "friction_deg": phi, "unit_weight_kn_m3": 18.0,
                          "conductivity_m_per_day": 1.0}])


def _cells_across_fs_one():
    """Slopes where the handbook FS in H is below 1, but H taken as vertical gives FS > 1."""
    slopes = np.linspace(30.0, 60.0, 61)
    true_fs = handbook_fs_normal(6.0, 30.0, 18.0, 1.0, slopes, 0.0)
    b = np.radians(slopes)
    as_vertical = 6.0 / (18.0 * np.sin(b) * np.cos(b)) + np.tan(np.radians(30.0)) / np.tan(b)
    pick = (true_fs < 0.97) & (as_vertical > 1.03)
    assert pick.sum() >= 3
    return slopes[pick], true_fs[pick]


def test_monte_carlo_at_negligible_spread_reproduces_handbook_form_in_h():
    slopes, true_fs = _cells_across_fs_one()
    grid = slopes[None, :]
    unit = np.zeros(grid.shape, int)
    sca = np.full(grid.shape, 10.0)
    t = _table(1.0, normal(30.0, 1e-6))
    p, _ = failure_probability(grid, sca, unit, t, SteadyRain(0.0), samples=200, seed=2,
                               depth_measured="slope_normal")
    # every sample has FS = handbook FS < 1 (written out above, from memory)
    np.testing.assert_array_equal(p[0], (true_fs < 1.0).astype(np.float32))
    p_vertical, _ = failure_probability(grid, sca, unit, t, SteadyRain(0.0), samples=200, seed=2)
    assert np.all(p_vertical == 0.0)  # the same H taken as vertical passes every cell
    p_unit, _ = failure_probability(grid, sca, unit, t, SteadyRain(0.0), samples=200, seed=2,
                                    correlation="unit", depth_measured="slope_normal")
    np.testing.assert_array_equal(p_unit, p)


def test_monte_carlo_converts_each_sampled_thickness():
    # dry, frictionless: FS = c / (gamma H sin beta) < 1 exactly when H > c / (gamma sin beta);
    # with H ~ U(0.5, 1.5), P_f = P(H > h*) = (1.5 - h*) / 1.0 (uniform cdf, closed form)
    from slopescreen.parameters import uniform

    beta = 40.0
    h_star = 6.0 / (18.0 * math.sin(math.radians(beta)))
    t = encode_table([{"depth_m": uniform(0.5, 1.5), "cohesion_kpa": 6.0,
                       "root_cohesion_kpa": 0.0, "friction_deg": 0.0, "unit_weight_kn_m3": 18.0,
                       "conductivity_m_per_day": 1.0}])
    n = 20000
    p, se = failure_probability(np.full((1, 1), beta), np.full((1, 1), 1.0),
                                np.zeros((1, 1), int), t, SteadyRain(0.0), samples=n, seed=5,
                                depth_measured="slope_normal")
    assert abs(float(p[0, 0]) - (1.5 - h_star)) < 4 * float(se[0, 0]) + 1e-9


def test_fosm_mean_fs_is_handbook_form_in_h():
    slopes, true_fs = _cells_across_fs_one()
    grid = slopes[None, :]
    r = fosm_reliability(grid, np.full(grid.shape, 10.0), np.zeros(grid.shape, int),
                         _table(1.0, normal(30.0, 0.5)), SteadyRain(0.0),
                         depth_measured="slope_normal")
    # FS at the mean parameters (handbook form in H, from memory)
    np.testing.assert_allclose(r.mean_fs[0], true_fs, rtol=1e-5)


def test_storm_probability_converts_thickness_before_the_depth_search():
    # negligible spread: P_f is 1 where the least storm FS of the vertical run at
    # z = H / cos(beta) is below 1, else 0 (the landed storm model as the reference)
    slopes = np.linspace(25.0, 45.0, 21)
    kw = dict(water_table_depth_m=1.0, intensity_m_per_s=1e-5, conductivity_m_per_s=1.0 / 86400.0,
              diffusivity_m2_per_s=5e-5, duration_s=12 * 3600.0, cohesion_kpa=6.0,
              root_cohesion_kpa=0.0, friction_deg=34.0, unit_weight_kn_m3=18.0, n_depths=1)
    least = storm_minimum(slopes, soil_depth_m=1.2 / np.cos(np.radians(slopes)), **kw)
    t = encode_table([{"depth_m": 1.2, "cohesion_kpa": 6.0, "root_cohesion_kpa": 0.0,
                       "friction_deg": normal(34.0, 1e-6), "unit_weight_kn_m3": 18.0,
                       "conductivity_m_per_day": 1.0, "diffusivity_m2_per_s": 5e-5}])
    rain = StormRain(36.0, 12.0, 1.0)
    p, _ = failure_probability(slopes[None, :], None, np.zeros((1, slopes.size), int), t, rain,
                               samples=50, seed=1, depth_measured="slope_normal")
    far = np.abs(least.fs - 1.0) > 1e-3
    assert far.sum() > 10 and (least.fs < 1).any() and (least.fs > 1).any()
    np.testing.assert_array_equal(p[0][far], (least.fs[far] < 1.0).astype(np.float32))


def test_cluster_forces_with_slope_normal_thickness_give_handbook_cell_fs():
    shape = (4, 5)
    slope = np.full(shape, 35.0)
    f = cluster_forces(slope, np.full(shape, 180.0), 1.0, 0.5, dx=5.0, dy=5.0,
                       depth_measured="slope_normal", cohesion_kpa=4.0, root_cohesion_kpa=0.0,
                       lateral_root_cohesion_kpa=0.0, friction_deg=33.0, unit_weight_kn_m3=18.0)
    np.testing.assert_allclose(f.depth_m, 1.0 / math.cos(math.radians(35.0)), rtol=1e-12)
    # a cell's basal FS is the infinite-slope FS (handbook form in H, from memory)
    np.testing.assert_allclose(f.cell_fs, handbook_fs_normal(4.0, 33.0, 18.0, 1.0, 35.0, 0.5),
                               rtol=1e-5)


def test_cluster_probability_on_a_plane_equals_the_vertical_run_at_h_over_cos():
    # on a uniform slope the per-unit depth H / cos(beta) is exact (geometry)
    shape = (6, 6)
    beta = 38.0
    slope = np.full(shape, beta)
    aspect = np.full(shape, 180.0)
    cluster = np.zeros(shape, int)
    cluster[2:4, 2:4] = 1

    def table(depth):
        return encode_table([{"depth_m": depth, "cohesion_kpa": normal(3.0, 1.0),
                              "root_cohesion_kpa": 0.0, "friction_deg": normal(32.0, 2.0),
                              "unit_weight_kn_m3": 18.0, "conductivity_m_per_day": 1.0}])

    common = dict(unit_index=np.zeros(shape, int), lateral_root_cohesion_kpa=2.0, samples=300,
                  seed=4)
    def run(depth, how):
        return cluster_failure_probability(
            cluster, slope, aspect, dx=5.0, dy=5.0, wetness=0.6, keep_samples=True,
            uncertainty=ClusterUncertainty(table=table(depth), depth_measured=how, **common))

    got = run(1.0, "slope_normal")
    want = run(1.0 / math.cos(math.radians(beta)), "vertical")
    np.testing.assert_allclose(got.fs_samples, want.fs_samples, rtol=1e-12)
    np.testing.assert_array_equal(got.p_f, want.p_f)
    # H taken as vertical is a thinner column: a larger cohesion share, a larger median FS
    assert float(run(1.0, "vertical").fs_median[0]) > float(got.fs_median[0]) + 0.01


def test_unknown_depth_measured_is_refused_naming_the_field():
    with pytest.raises(InputError, match="depth_measured"):
        factor_of_safety(30.0, 1.0, 0.0, depth_measured="normal", cohesion_kpa=0.0,
                         root_cohesion_kpa=0.0, friction_deg=30.0, unit_weight_kn_m3=18.0)


def soil_text(extra):
    """The [soil] of tests/test_pipeline.py with ``extra`` keys in [soil]."""
    return PIPELINE_SOIL.replace("[soil]\n", "[soil]\n" + extra + "\n", 1)


RAIN = """
[[rain]]
name = "steady 20"
steady_mm_per_day = 20
"""


def _write(tmp_path, extra):
    return write_case(tmp_path, soil=soil_text(extra), rain=RAIN, gradient=0.6)


def test_pipeline_with_slope_normal_thickness_matches_handbook_and_records_it(tmp_path, capsys):
    path = _write(tmp_path, 'depth_measured = "slope_normal"')
    manifest = run_ok(capsys, path)
    assert manifest["soil"]["depth_measured"] == "slope_normal"
    entry = next(p for p in manifest["products"]
                 if p["key"] == "factor_of_safety" and p["rain"] == "steady 20")
    fs = read_back(tmp_path / "out" / entry["path"])[0]
    beta = math.degrees(math.atan(0.6))
    b = math.radians(beta)
    a = (np.arange(40) + 1) * 5.0  # SCA on a plane: distance from the divide (exact geometry)
    m = np.minimum(1.0, 0.020 * a / (2.0 * 1.0 * math.sin(b)))  # q a / (K H sin beta)
    want = handbook_fs_normal(3.0, 35.0, 18.0, 1.0, beta, m)
    inner = slice(3, 35), slice(4, 26)
    np.testing.assert_allclose(fs[inner], np.broadcast_to(want[:, None], fs.shape)[inner],
                               rtol=2e-3)
    report = (tmp_path / "out" / "report.html").read_text(encoding="utf-8")
    assert "soil depth measured" in report and "normal to the slope" in report
    assert "Soil thickness normal to the slope H" in report


def test_pipeline_without_the_key_is_vertical_as_before(tmp_path, capsys):
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    m_default = run_ok(capsys, _write(tmp_path / "a", ""))
    m_vertical = run_ok(capsys, _write(tmp_path / "b", 'depth_measured = "vertical"'))
    assert m_default["soil"]["depth_measured"] == m_vertical["soil"]["depth_measured"] == "vertical"
    for key in ("factor_of_safety", "wetness", "critical_recharge"):
        e = next(p for p in m_default["products"] if p["key"] == key)
        first = read_back(tmp_path / "a" / "out" / e["path"])[0]
        second = read_back(tmp_path / "b" / "out" / e["path"])[0]
        np.testing.assert_array_equal(np.nan_to_num(first, nan=-1), np.nan_to_num(second, nan=-1))
    # the vertical handbook form with z = H (tests/test_pipeline.py's reference) still holds
    e = next(p for p in m_default["products"] if p["key"] == "factor_of_safety")
    fs = read_back(tmp_path / "a" / "out" / e["path"])[0]
    b = math.atan(0.6)
    a = (np.arange(40) + 1) * 5.0
    w = np.minimum(1.0, 0.020 * a / (2.0 * math.cos(b) * math.sin(b)))
    want = 3.0 / (18.0 * math.sin(b) * math.cos(b)) + (1 - w * GAMMA_W / 18.0) * math.tan(
        math.radians(35.0)) / math.tan(b)
    inner = slice(3, 35), slice(4, 26)
    np.testing.assert_allclose(fs[inner], np.broadcast_to(want[:, None], fs.shape)[inner],
                               rtol=2e-3)


def test_check_refuses_an_unknown_depth_measured(tmp_path, capsys):
    path = _write(tmp_path, 'depth_measured = "normal"')
    code = main(["check", str(path)])
    err = capsys.readouterr().err
    assert code == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "s.toml" in lines[0] and "soil.depth_measured" in lines[0], err
    assert not (tmp_path / "out").exists()


def test_pipeline_storm_and_clusters_use_the_vertical_depth_of_the_thickness(tmp_path, capsys):
    from slopescreen.vectors import read_layer

    rain = ('\n[[rain]]\nname = "very wet"\nsteady_mm_per_day = 400\n'
            '\n[[rain]]\nname = "storm"\nstorm_mm_per_h = 10\nduration_h = 6\n'
            'water_table_depth_m = 0.8\n')
    extra = ("\n[clusters]\nmin_area_m2 = 25\nmax_area_m2 = 2500\n"
             "[uncertainty]\nsamples = 50\nseed = 2\n")
    soil = soil_text('depth_measured = "slope_normal"').replace(
        "friction_deg = 35.0", "friction_deg = { normal = [35.0, 2.0] }")
    manifest = run_ok(capsys, write_case(tmp_path, soil=soil, rain=rain, extra=extra,
                                         gradient=0.85))
    assert "normal to the slope" in manifest["conventions"]["depth"]
    beta = math.atan(0.85)
    z_vertical = 1.0 / math.cos(beta)  # H = 1 m normal to the slope (geometry)
    out = tmp_path / "out"

    def raster(key, rain):
        e = next(p for p in manifest["products"] if p["key"] == key and p["rain"] == rain)
        return read_back(out / e["path"])[0]

    # the storm map is that of the checked vertical model at z = H / cos(beta)
    least = storm_minimum(math.degrees(beta), soil_depth_m=z_vertical, water_table_depth_m=0.8,
                          intensity_m_per_s=10 / 3.6e6, conductivity_m_per_s=2.0 / 86400.0,
                          diffusivity_m2_per_s=5e-5, duration_s=6 * 3600.0, cohesion_kpa=2.0,
                          root_cohesion_kpa=1.0, friction_deg=35.0, unit_weight_kn_m3=18.0)
    inner = slice(3, 35), slice(4, 26)
    np.testing.assert_allclose(raster("factor_of_safety", "storm")[inner], float(least.fs),
                               rtol=2e-3)
    np.testing.assert_allclose(raster("storm_failure_depth", "storm")[inner],
                               float(least.depth_m), rtol=2e-3)
    # steady clusters: columns of vertical depth z = H / cos(beta), volume = plan area x z
    e = next(p for p in manifest["products"] if p["key"] == "clusters")
    _, cols, _ = read_layer(out / e["path"], layer="clusters")
    steady = cols["rain"] == "very wet"
    assert steady.sum() >= 1
    np.testing.assert_allclose(cols["mean_depth_m"][steady], z_vertical, rtol=1e-5)
    np.testing.assert_allclose(cols["volume_m3"][steady], cols["area_m2"][steady] * z_vertical,
                               rtol=1e-5)
