"""API behaviour of the cluster failure probability: inputs, cluster forms, fixed parameters."""

import numpy as np
import pytest

from slopescreen.clusters import cluster_factor_of_safety, cluster_forces
from slopescreen.clusters.probability import cluster_failure_probability
from slopescreen.errors import InputError
from slopescreen.hydrology import SteadyRain, StormRain
from slopescreen.parameters import normal
from slopescreen.probability import encode_table

UNIT = {"depth_m": 1.2, "cohesion_kpa": 1.0, "root_cohesion_kpa": 1.0, "friction_deg": 34.0,
        "unit_weight_kn_m3": 18.5, "conductivity_m_per_day": 2.0}


def _grid():
    slope = np.full((10, 10), 30.0)
    slope[2:7, 3:7] = 44.0
    aspect = np.full((10, 10), 180.0)
    lab = np.zeros((10, 10), np.int32)
    lab[2:7, 3:7] = 1
    lab[8:10, 0:3] = 2
    return slope, aspect, lab


def _call(lab, slope, aspect, table, **kw):
    args = dict(lateral_root_cohesion_kpa=2.0, dx=5.0, dy=5.0, samples=50, seed=1)
    args.update(kw)
    unit = args.pop("unit_index", np.zeros(slope.shape, int))
    return cluster_failure_probability(lab, slope, aspect, unit, table, **args)


def test_fixed_parameters_give_the_deterministic_answer():
    # every parameter fixed: P_f is 0 or 1, as FS of the force model says
    slope, aspect, lab = _grid()
    t = encode_table([UNIT])
    for wet in (0.2, 1.0):
        res = _call(lab, slope, aspect, t, wetness=wet, keep_samples=True)
        f = cluster_forces(slope, aspect, 1.2, wet, dx=5.0, dy=5.0, cohesion_kpa=1.0,
                           root_cohesion_kpa=1.0, lateral_root_cohesion_kpa=2.0,
                           friction_deg=34.0, unit_weight_kn_m3=18.5)
        for j, i in enumerate(res.ids):
            fs = cluster_factor_of_safety(f, lab == i)
            assert np.all(res.fs_samples[j] == res.fs_samples[j, 0])
            assert res.fs_samples[j, 0] == pytest.approx(fs, rel=1e-12)
            assert res.p_f[j] == float(fs < 1.0) and res.standard_error[j] == 0.0


def test_masks_and_labels_agree_and_inputs_untouched():
    slope, aspect, lab = _grid()
    t = encode_table([dict(UNIT, friction_deg=normal(34.0, 3.0))])
    copies = [a.copy() for a in (slope, aspect, lab, t)]
    a = _call(lab, slope, aspect, t, wetness=0.5)
    b = _call([lab == 1, lab == 2], slope, aspect, t, wetness=0.5)
    for x, y in zip(copies, (slope, aspect, lab, t)):
        np.testing.assert_array_equal(x, y)
    assert a.ids.tolist() == [1, 2] and b.ids.tolist() == [1, 2]
    np.testing.assert_array_equal(a.p_f, b.p_f)
    # overlapping masks are allowed (rows of the size-resolved table)
    c = _call([lab == 1, (lab == 1) | (lab == 2)], slope, aspect, t, wetness=0.5)
    assert c.p_f[0] == a.p_f[0]


def test_bad_inputs_raise():
    slope, aspect, lab = _grid()
    t = encode_table([UNIT])
    with pytest.raises(InputError, match="either"):
        _call(lab, slope, aspect, t)
    with pytest.raises(InputError, match="either"):
        _call(lab, slope, aspect, t, wetness=0.5, rain=SteadyRain(10.0), sca_m=np.ones((10, 10)))
    with pytest.raises(InputError, match="diffusivity_m2_per_s"):   # a storm needs D0
        _call(lab, slope, aspect, t, rain=StormRain(10.0, 8.0, 1.0))
    with pytest.raises(InputError, match="SteadyRain or a StormRain"):
        _call(lab, slope, aspect, t, rain=0.5)
    with pytest.raises(InputError, match="sca_m"):
        _call(lab, slope, aspect, t, rain=SteadyRain(10.0))
    with pytest.raises(InputError, match="lateral_root_cohesion_kpa"):
        _call(lab, slope, aspect, t, wetness=0.5, lateral_root_cohesion_kpa=[1.0, 2.0])
    unit = np.zeros((10, 10), int)
    unit[4, 4] = -1
    with pytest.raises(InputError, match="soil unit"):
        _call(lab, slope, aspect, t, wetness=0.5, unit_index=unit)
    with pytest.raises(InputError, match="samples"):
        _call(lab, slope, aspect, t, wetness=0.5, samples=0)
    with pytest.raises(InputError, match="seed"):
        _call(lab, slope, aspect, t, wetness=0.5, seed=-1)
    with pytest.raises(InputError, match="mask 0"):
        _call([np.zeros((10, 10), bool)], slope, aspect, t, wetness=0.5)
