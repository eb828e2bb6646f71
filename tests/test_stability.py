"""factor_of_safety and critical_recharge: behaviour, nodata, validation, monotonicity."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from slopescreen.errors import InputError
from slopescreen.stability import CLASS_LABELS, FS_CAP, critical_recharge, factor_of_safety

GAMMA_W = 9.81
STRENGTH = dict(cohesion_kpa=2.0, root_cohesion_kpa=1.5, friction_deg=33.0, unit_weight_kn_m3=17.0)


def _numpy_fs(slope, z, w, c, cr, phi, gm, gs):
    # plain-numpy oracle of the general infinite-slope form (Duncan, Wright & Brandon 2014)
    th, ph = np.radians(slope), np.radians(phi)
    hw = w * z
    col = gm * (z - hw) + gs * hw
    sigma = col * np.cos(th) ** 2
    tau = col * np.sin(th) * np.cos(th)
    u = GAMMA_W * hw * np.cos(th) ** 2
    return (c + cr + (sigma - u) * np.tan(ph)) / tau


def test_general_form_against_numpy_oracle():
    # general infinite-slope form, two unit weights (Duncan, Wright & Brandon 2014), numpy
    rng = np.random.default_rng(5)
    n = 500
    args = dict(
        slope=rng.uniform(3, 65, n), z=rng.uniform(0.2, 4, n), w=rng.uniform(0, 1, n),
        c=rng.uniform(0, 8, n), cr=rng.uniform(0, 5, n), phi=rng.uniform(15, 45, n),
        gm=rng.uniform(13, 19, n),
    )
    args["gs"] = args["gm"] + rng.uniform(0, 4, n)
    out = factor_of_safety(
        args["slope"], args["z"], args["w"], cohesion_kpa=args["c"],
        root_cohesion_kpa=args["cr"], friction_deg=args["phi"], unit_weight_kn_m3=args["gm"],
        saturated_unit_weight_kn_m3=args["gs"],
    )
    expected = np.clip(_numpy_fs(**args), 0, FS_CAP)
    assert out.dtype == np.float32
    np.testing.assert_allclose(out, expected, rtol=1e-6)


def test_flat_ground_is_capped_and_nan_propagates():
    slope = np.array([[0.0, 0.5, np.nan], [30.0, 89.0, 1e-7]], dtype=np.float32)
    out = factor_of_safety(slope, 1.0, 0.5, **STRENGTH)
    assert out[0, 0] == FS_CAP  # no driving stress: documented cap
    assert out[1, 2] == FS_CAP  # nearly flat: FS far above the cap
    assert np.isnan(out[0, 2])
    assert np.isfinite(out[~np.isnan(slope)]).all()
    assert 0 < out[1, 0] < FS_CAP


def test_inputs_are_not_modified_and_shapes_broadcast():
    slope = np.linspace(10, 50, 12).reshape(3, 4)
    depth = np.array([[0.5], [1.0], [2.0]])
    before = slope.copy(), depth.copy()
    out = factor_of_safety(slope, depth, np.zeros(4), **STRENGTH)
    assert out.shape == (3, 4)
    np.testing.assert_array_equal(slope, before[0])
    np.testing.assert_array_equal(depth, before[1])


def test_root_cohesion_adds_to_soil_cohesion():
    a = factor_of_safety(35.0, 1.2, 0.3, cohesion_kpa=1.0, root_cohesion_kpa=3.0,
                         friction_deg=30.0, unit_weight_kn_m3=18.0)
    b = factor_of_safety(35.0, 1.2, 0.3, cohesion_kpa=4.0, root_cohesion_kpa=0.0,
                         friction_deg=30.0, unit_weight_kn_m3=18.0)
    assert float(a) == float(b)


@pytest.mark.parametrize(
    "kwargs,name",
    [
        (dict(depth_m=-1.0), "depth_m"),
        (dict(depth_m=0.0), "depth_m"),
        (dict(friction_deg=61.0), "friction_deg"),
        (dict(friction_deg=-1.0), "friction_deg"),
        (dict(wetness=1.5), "wetness"),
        (dict(slope_deg=90.0), "slope_deg"),
        (dict(cohesion_kpa=-0.1), "cohesion_kpa"),
        (dict(saturated_unit_weight_kn_m3=9.0), "saturated_unit_weight_kn_m3"),
        (dict(saturated_unit_weight_kn_m3=16.0), "saturated_unit_weight_kn_m3"),
        (dict(unit_weight_kn_m3=120.0), "unit_weight_kn_m3"),
        (dict(slope_deg=np.inf), "slope_deg"),
        (dict(slope_deg=np.full(3, np.nan)), "slope_deg"),
    ],
)
def test_bad_input_names_the_parameter(kwargs, name):
    args = dict(slope_deg=30.0, depth_m=1.0, wetness=0.2, **STRENGTH)
    args.update(kwargs)
    with pytest.raises(InputError, match=name):
        factor_of_safety(args.pop("slope_deg"), args.pop("depth_m"), args.pop("wetness"), **args)


@settings(max_examples=150, deadline=None)
@given(
    slope=st.floats(1.0, 70.0), z=st.floats(0.1, 5.0), w1=st.floats(0.0, 1.0),
    w2=st.floats(0.0, 1.0), c=st.floats(0.0, 20.0), phi=st.floats(0.0, 60.0),
    gm=st.floats(10.0, 22.0), extra=st.floats(0.0, 8.0),
)
def test_fs_never_rises_with_wetness(slope, z, w1, w2, c, phi, gm, extra):
    # defining property: raising the water table adds pore pressure (gamma_sat >= gamma_m)
    gs = max(gm + extra, 9.81)
    lo, hi = sorted((w1, w2))
    f = factor_of_safety(slope, z, np.array([lo, hi]), cohesion_kpa=c, root_cohesion_kpa=0.0,
                         friction_deg=phi, unit_weight_kn_m3=gm, saturated_unit_weight_kn_m3=gs)
    # float32 output: allow one rounding step
    assert f[1] <= f[0] * (1 + 2e-7) + 1e-30


@settings(max_examples=150, deadline=None)
@given(
    slope=st.floats(1.0, 70.0), z=st.floats(0.1, 5.0), w=st.floats(0.0, 1.0),
    c1=st.floats(0.0, 30.0), c2=st.floats(0.0, 30.0), phi=st.floats(0.0, 60.0),
    gm=st.floats(10.0, 22.0),
)
def test_fs_never_falls_with_cohesion(slope, z, w, c1, c2, phi, gm):
    # defining property: cohesion only adds resistance
    lo, hi = sorted((c1, c2))
    f = factor_of_safety(slope, z, w, cohesion_kpa=np.array([lo, hi]), root_cohesion_kpa=0.0,
                         friction_deg=phi, unit_weight_kn_m3=gm)
    assert f[1] >= f[0]


def test_critical_recharge_classes_agree_with_fs():
    # class 1: FS <= 1 when dry; class 3: FS >= 1 when saturated; class 2 neither
    rng = np.random.default_rng(3)
    n = 400
    slope = rng.uniform(0, 60, n)
    slope[:5] = 0.0
    sca = rng.uniform(1, 1000, n)
    z = rng.uniform(0.3, 3.0, n)
    c = rng.uniform(0, 6, n)
    phi = rng.uniform(25, 42, n)
    g = rng.uniform(15, 21, n)
    q, cls = critical_recharge(slope, sca, depth_m=z, cohesion_kpa=c, root_cohesion_kpa=0.0,
                               friction_deg=phi, unit_weight_kn_m3=g, conductivity_m_per_day=1.0)
    assert cls.dtype == np.uint8 and q.dtype == np.float32
    assert set(np.unique(cls)) <= {1, 2, 3}
    strength = dict(cohesion_kpa=c, root_cohesion_kpa=0.0, friction_deg=phi, unit_weight_kn_m3=g)
    dry = factor_of_safety(slope, z, 0.0, **strength)
    wet = factor_of_safety(slope, z, 1.0, **strength)
    assert (dry[cls == 1] <= 1 + 1e-6).all()
    assert (wet[cls == 3] >= 1 - 1e-6).all()
    two = cls == 2
    assert two.sum() > 50
    assert (dry[two] > 1 - 1e-6).all() and (wet[two] < 1 + 1e-6).all()
    assert np.isfinite(q[two]).all() and (q[two] > 0).all()
    assert np.isnan(q[~two]).all()  # no rate outside class 2
    assert (cls[:5] == 3).all()  # flat cells: stable


def test_critical_recharge_nodata_and_frictionless():
    q, cls = critical_recharge(np.array([np.nan, 30.0, 30.0, 30.0]),
                               np.array([10.0, np.nan, 10.0, 10.0]), depth_m=1.0,
                               cohesion_kpa=np.array([1.0, 1.0, 20.0, 1.0]), root_cohesion_kpa=0.0,
                               friction_deg=np.array([30.0, 30.0, 0.0, 0.0]),
                               unit_weight_kn_m3=18.0, conductivity_m_per_day=1.0)
    # phi = 0: FS = C/(g z sin cos) whatever W: 20/(18*0.433) > 1 -> 3, 1/(18*0.433) < 1 -> 1
    assert cls.tolist() == [0, 0, 3, 1]
    assert np.isnan(q).all()
    assert CLASS_LABELS[0] == "nodata" and set(CLASS_LABELS) == {0, 1, 2, 3}


def test_critical_recharge_scales_with_conductivity_over_area():
    # q_cr = W_c K z cos sin / a (docs/methods.md, "Critical steady recharge"): linear in K,
    # inverse in a
    base = dict(depth_m=1.0, cohesion_kpa=2.0, root_cohesion_kpa=0.0, friction_deg=35.0,
                unit_weight_kn_m3=18.0)
    q1, _ = critical_recharge(30.0, 100.0, conductivity_m_per_day=1.0, **base)
    q2, _ = critical_recharge(30.0, 50.0, conductivity_m_per_day=3.0, **base)
    assert float(q2) == pytest.approx(6 * float(q1), rel=1e-6)
    th = math.radians(30.0)
    assert float(q1) > 0 and math.isfinite(float(q1)) and math.cos(th) > 0


def test_critical_recharge_bad_input():
    base = dict(depth_m=1.0, cohesion_kpa=2.0, root_cohesion_kpa=0.0, friction_deg=35.0,
                unit_weight_kn_m3=18.0, conductivity_m_per_day=1.0)
    with pytest.raises(InputError, match="sca_m"):
        critical_recharge(30.0, 0.0, **base)
    with pytest.raises(InputError, match="conductivity_m_per_day"):
        critical_recharge(30.0, 10.0, **{**base, "conductivity_m_per_day": 0.0})
    with pytest.raises(InputError, match="depth_m"):
        critical_recharge(30.0, 10.0, **{**base, "depth_m": -0.5})


def test_float32_slope_keeps_float64_trigonometry():
    # regression: a float32 slope raster once made sin/cos/tan run in float32
    slope = np.linspace(5, 60, 200).astype(np.float32)
    a = factor_of_safety(slope, 1.1, 0.4, **STRENGTH)
    b = factor_of_safety(slope.astype(np.float64), 1.1, 0.4, **STRENGTH)
    np.testing.assert_array_equal(a, b)
