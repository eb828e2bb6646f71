"""Parameter objects: the object form and the loose-keyword form give bit-identical results.

Outside reference: the loose-keyword calls, the interface of the previous release, whose
numbers the reference tests (tests/test_reference_*.py) check against handbook formulas and
analytic surfaces. Here every object-form call is compared with its loose-keyword twin byte
for byte (dtype, shape and bits, NaN included), on random fields with fixed seeds. Defining
properties: a frozen object cannot be changed, not even through its arrays; a bad value is
refused when the object is built, with a message that starts with the field's name.
"""

import dataclasses

import numpy as np
import pytest

from slopescreen.clusters import (
    ClusterOptions,
    ClusterStrength,
    ClusterUncertainty,
    cluster_failure_probability,
    cluster_forces,
    failure_clusters,
)
from slopescreen.errors import InputError
from slopescreen.hydrology import (
    SteadyRain,
    StormInputs,
    StormRain,
    storm_factor_of_safety,
    storm_minimum,
    storm_pressure_head,
)
from slopescreen.parameters import normal
from slopescreen.probability import encode_table
from slopescreen.stability import SoilStrength, factor_of_safety

SHAPE = (9, 11)


def _same(a, b):
    """Bit-identical arrays: same dtype, shape and bytes (so NaN == NaN)."""
    a, b = np.asarray(a), np.asarray(b)
    assert a.dtype == b.dtype and a.shape == b.shape
    assert a.tobytes() == b.tobytes()


def _same_tuple(a, b):
    for x, y in zip(a, b, strict=True):
        if x is None or y is None:
            assert x is None and y is None
        else:
            _same(x, y)


@pytest.fixture(scope="module")
def cells():
    rng = np.random.default_rng(2024)
    slope = rng.uniform(5.0, 50.0, SHAPE)
    slope[0, 0] = np.nan
    storm = dict(water_table_depth_m=rng.uniform(0.2, 1.5, SHAPE),
                 intensity_m_per_s=rng.uniform(1e-6, 2e-5, SHAPE),
                 conductivity_m_per_s=rng.uniform(2e-6, 2e-5, SHAPE).astype(np.float32),
                 diffusivity_m2_per_s=1e-4, duration_s=5 * 3600.0, steady_ratio=0.1)
    strength = dict(cohesion_kpa=rng.uniform(0.0, 3.0, SHAPE), root_cohesion_kpa=0.5,
                    friction_deg=rng.uniform(28.0, 40.0, SHAPE), unit_weight_kn_m3=18.5)
    return dict(slope=slope, depth=rng.uniform(0.5, 2.0, SHAPE), storm=storm, strength=strength,
                wet=rng.uniform(0.0, 1.0, SHAPE), area=rng.uniform(10.0, 5e3, SHAPE))


# --- storm response and infinite slope -----------------------------------------------------


def test_storm_pressure_head_object_equals_loose(cells):
    storm = StormInputs(**cells["storm"])
    for t in (0.0, 3600.0, 9 * 3600.0):
        _same(storm_pressure_head(cells["depth"], t, slope_deg=cells["slope"], storm=storm),
              storm_pressure_head(cells["depth"], t, slope_deg=cells["slope"], **cells["storm"]))


@pytest.mark.parametrize("count_suction", [False, True])
def test_storm_factor_of_safety_object_equals_loose(cells, count_suction):
    storm, soil = StormInputs(**cells["storm"]), SoilStrength(**cells["strength"])
    args = (cells["depth"], 7200.0)
    _same(storm_factor_of_safety(*args, slope_deg=cells["slope"], storm=storm, strength=soil,
                                 count_suction=count_suction),
          storm_factor_of_safety(*args, slope_deg=cells["slope"], count_suction=count_suction,
                                 **cells["storm"], **cells["strength"]))


def test_storm_minimum_object_equals_loose(cells):
    storm, soil = StormInputs(**cells["storm"]), SoilStrength(**cells["strength"])
    opts = dict(soil_depth_m=cells["depth"], n_depths=6, contributing_area_m2=cells["area"],
                validity_ratio=0.2)
    by_object = storm_minimum(cells["slope"], storm=storm, strength=soil, **opts)
    loose = storm_minimum(cells["slope"], **opts, **cells["storm"], **cells["strength"])
    _same_tuple(by_object, loose)
    # one object of each kind with the other as loose keywords
    _same_tuple(by_object, storm_minimum(cells["slope"], storm=storm, **opts,
                                         **cells["strength"]))
    _same_tuple(by_object, storm_minimum(cells["slope"], strength=soil, **opts,
                                         **cells["storm"]))


@pytest.mark.parametrize("saturated", [None, 21.0])
def test_factor_of_safety_object_equals_loose(cells, saturated):
    soil = SoilStrength(**cells["strength"], saturated_unit_weight_kn_m3=saturated)
    args = (cells["slope"].astype(np.float32), cells["depth"], cells["wet"])
    _same(factor_of_safety(*args, strength=soil),
          factor_of_safety(*args, saturated_unit_weight_kn_m3=saturated, **cells["strength"]))


def test_one_strength_serves_the_infinite_slope_and_the_storm(cells):
    # a cluster strength is a soil strength: its lateral roots play no part on an infinite slope
    soil = SoilStrength(**cells["strength"])
    lateral = ClusterStrength(**cells["strength"], lateral_root_cohesion_kpa=4.0)
    args = (cells["slope"], cells["depth"], cells["wet"])
    _same(factor_of_safety(*args, strength=soil), factor_of_safety(*args, strength=lateral))


# --- clusters ------------------------------------------------------------------------------

SOIL = dict(cohesion_kpa=0.5, root_cohesion_kpa=0.5, lateral_root_cohesion_kpa=2.0,
            friction_deg=34.0, unit_weight_kn_m3=18.5)


def _hillside(seed=7, shape=(16, 16)):
    rng = np.random.default_rng(seed)
    slope = np.full(shape, 29.0) + rng.uniform(-2.0, 2.0, shape)
    slope[4:9, 5:9] = 46.0
    slope[12:15, 1:4] = 44.0
    aspect = 180.0 + rng.uniform(-10.0, 10.0, shape)
    return slope, aspect


def _unit_table():
    unit = {"depth_m": 1.0, "cohesion_kpa": 0.5, "root_cohesion_kpa": normal(0.5, 0.2),
            "friction_deg": normal(34.0, 2.0), "unit_weight_kn_m3": 18.5,
            "conductivity_m_per_day": 2.0, "diffusivity_m2_per_s": 1e-4}
    return encode_table([unit])


def _same_result(a, b):
    _same(a.labels, b.labels)
    _same(a.cluster_fs_bound, b.cluster_fs_bound)
    assert (a.bound_extent_cells, a.modular_faces, a.undecided_cells, a.dropped) == (
        b.bound_extent_cells, b.modular_faces, b.undecided_cells, b.dropped)
    assert tuple(a.table) == tuple(b.table)
    for k in a.table:
        _same(a.table[k], b.table[k])
    assert (a.size_resolved is None) == (b.size_resolved is None)
    if a.size_resolved is not None:
        for k in a.size_resolved.table:
            if k != "seconds":  # a measured time
                _same(a.size_resolved.table[k], b.size_resolved.table[k])
        for m, n in zip(a.size_resolved.masks, b.size_resolved.masks, strict=True):
            _same(m, n)


def test_cluster_forces_object_equals_loose():
    slope, aspect = _hillside()
    wet = np.random.default_rng(3).uniform(0.0, 1.0, slope.shape).astype(np.float32)
    soil = ClusterStrength(**SOIL, saturated_unit_weight_kn_m3=19.5)
    a = cluster_forces(slope, aspect, 1.1, wet, dx=5.0, dy=4.0, strength=soil,
                       passive_fraction=0.3, jaky_full=True)
    b = cluster_forces(slope, aspect, 1.1, wet, dx=5.0, dy=4.0, passive_fraction=0.3,
                       jaky_full=True, saturated_unit_weight_kn_m3=19.5, **SOIL)
    _same_tuple(a, b)


def test_failure_clusters_objects_equal_loose_keywords_and_the_mapping():
    slope, aspect = _hillside()
    unc = dict(unit_index=np.zeros(slope.shape, np.int8), table=_unit_table(),
               lateral_root_cohesion_kpa=normal(2.0, 0.5), samples=120, seed=4,
               rain=StormRain(20.0, 6.0, 0.8))
    options = dict(passive_fraction=0.4, min_area_m2=50.0, max_area_m2=500.0, tile_cells=6,
                   halo_cells=2, bound_window_cells=8, bound_stride_cells=4, size_resolved=True,
                   size_bands=2, size_time_limit_s=5.0, size_window_cells=10, size_n_least=2,
                   size_max_clusters=3)
    common = (slope, 1.0, 0.3)
    grid = dict(dx=5.0, dy=5.0, aspect_deg=aspect)
    by_objects = failure_clusters(*common, **grid, strength=ClusterStrength(**SOIL),
                                  options=ClusterOptions(**options),
                                  uncertainty=ClusterUncertainty(**unc))
    loose = failure_clusters(*common, **grid, uncertainty=unc, **options, **SOIL)
    assert by_objects.labels.max() >= 2 and by_objects.size_resolved is not None
    assert np.isfinite(by_objects.table["probability"]).all()
    _same_result(by_objects, loose)


def test_failure_clusters_default_options_and_a_fixed_wetness():
    slope, aspect = _hillside(seed=11)
    unc = ClusterUncertainty(unit_index=np.zeros(slope.shape, int), table=_unit_table(),
                             lateral_root_cohesion_kpa=[1.5], samples=80, seed=2)
    a = failure_clusters(slope, 1.0, 0.3, dx=5.0, dy=5.0, aspect_deg=aspect,
                         strength=ClusterStrength(**SOIL), uncertainty=unc)
    b = failure_clusters(slope, 1.0, 0.3, dx=5.0, dy=5.0, aspect_deg=aspect,
                         uncertainty=dict(unit_index=np.zeros(slope.shape, int),
                                          table=_unit_table(), lateral_root_cohesion_kpa=[1.5],
                                          samples=80, seed=2), **SOIL)
    _same_result(a, b)


@pytest.mark.parametrize("rain", [None, SteadyRain(90.0), StormRain(15.0, 4.0, 0.6,
                                                                      horizon_h=6.0)])
def test_cluster_failure_probability_object_equals_loose(rain):
    slope, aspect = _hillside(seed=5)
    lab = np.zeros(slope.shape, np.int32)
    lab[4:9, 5:9] = 1
    lab[12:15, 1:4] = 2
    sca = np.random.default_rng(1).uniform(5.0, 200.0, slope.shape) if rain is not None else None
    fields = dict(lateral_root_cohesion_kpa=1.0, samples=150, seed=9, rain=rain, sca_m=sca)
    wetness = 0.4 if rain is None else None
    unit, table = np.zeros(slope.shape, int), _unit_table()
    unc = ClusterUncertainty(unit_index=unit, table=table, **fields)
    a = cluster_failure_probability(lab, slope, aspect, dx=5.0, dy=5.0, uncertainty=unc,
                                    wetness=wetness, keep_samples=True)
    b = cluster_failure_probability(lab, slope, aspect, unit, table, dx=5.0, dy=5.0,
                                    wetness=wetness, keep_samples=True, **fields)
    _same_tuple(a, b)


# --- frozen --------------------------------------------------------------------------------


def _objects():
    return [
        StormInputs(water_table_depth_m=np.ones(3), intensity_m_per_s=1e-6,
                    conductivity_m_per_s=1e-5, diffusivity_m2_per_s=1e-4, duration_s=60.0),
        SoilStrength(cohesion_kpa=np.ones(3), root_cohesion_kpa=0.0, friction_deg=30.0,
                     unit_weight_kn_m3=18.0, saturated_unit_weight_kn_m3=20.0),
        ClusterStrength(**{**SOIL, "cohesion_kpa": np.ones(3)}),
        ClusterOptions(),
        ClusterUncertainty(unit_index=np.zeros((3, 3), int), table=_unit_table(),
                           lateral_root_cohesion_kpa=1.0, sca_m=np.ones((3, 3)),
                           rain=SteadyRain(50.0)),
    ]


@pytest.mark.parametrize("obj", _objects(), ids=lambda o: type(o).__name__)
def test_objects_are_frozen(obj):
    first = dataclasses.fields(obj)[0].name
    with pytest.raises(dataclasses.FrozenInstanceError):
        setattr(obj, first, 1.0)
    for f in dataclasses.fields(obj):
        value = getattr(obj, f.name)
        if isinstance(value, np.ndarray):
            assert not value.flags.writeable
            with pytest.raises(ValueError, match="read-only"):
                value[...] = 0


def test_the_callers_arrays_stay_writable():
    # float32 is kept as a view of the caller's array, anything else is a float64 copy
    # (the checks' conversion); in both cases the caller's array is not locked
    c32, c64 = np.ones(4, np.float32), np.ones(4)
    soil = SoilStrength(cohesion_kpa=c32, root_cohesion_kpa=c64, friction_deg=30.0,
                        unit_weight_kn_m3=18.0)
    assert np.shares_memory(soil.cohesion_kpa, c32) and soil.cohesion_kpa.dtype == np.float32
    assert not np.shares_memory(soil.root_cohesion_kpa, c64)
    assert c32.flags.writeable and c64.flags.writeable


# --- validation ----------------------------------------------------------------------------

STORM = dict(water_table_depth_m=1.0, intensity_m_per_s=5e-6, conductivity_m_per_s=1e-5,
             diffusivity_m2_per_s=1e-4, duration_s=3600.0)
STRENGTH = dict(cohesion_kpa=1.0, root_cohesion_kpa=0.0, friction_deg=35.0,
                unit_weight_kn_m3=18.0)


@pytest.mark.parametrize("field, value", [
    ("water_table_depth_m", -1.0), ("intensity_m_per_s", np.inf), ("conductivity_m_per_s", 0.0),
    ("diffusivity_m2_per_s", -1e-4), ("duration_s", np.nan), ("steady_ratio", 1.5),
])
def test_storm_inputs_name_the_field_as_the_loose_call_does(field, value):
    with pytest.raises(InputError, match=f"^{field}:") as built:
        StormInputs(**{**STORM, field: value})
    with pytest.raises(InputError, match=f"^{field}:") as called:
        storm_pressure_head(1.0, 0.0, slope_deg=30.0, **{**STORM, field: value})
    assert str(built.value) == str(called.value)


@pytest.mark.parametrize("cls, field, value", [
    (SoilStrength, "cohesion_kpa", -1.0),
    (SoilStrength, "root_cohesion_kpa", np.inf),
    (SoilStrength, "friction_deg", 61.0),
    (SoilStrength, "unit_weight_kn_m3", 0.0),
    (SoilStrength, "saturated_unit_weight_kn_m3", 9.0),
    (SoilStrength, "saturated_unit_weight_kn_m3", 17.0),   # lighter than the moist weight
    (ClusterStrength, "lateral_root_cohesion_kpa", -0.5),
    (ClusterStrength, "friction_deg", 60.5),
])
def test_strength_objects_name_the_field(cls, field, value):
    extra = {"lateral_root_cohesion_kpa": 1.0} if cls is ClusterStrength else {}
    with pytest.raises(InputError, match=f"^{field}:"):
        cls(**{**STRENGTH, **extra, field: value})


def test_strength_errors_match_the_loose_calls():
    for kw in ({"friction_deg": 61.0}, {"saturated_unit_weight_kn_m3": 17.0}):
        with pytest.raises(InputError) as built:
            SoilStrength(**{**STRENGTH, **kw})
        with pytest.raises(InputError) as called:
            factor_of_safety(30.0, 1.0, 0.5, **{**STRENGTH, **kw})
        assert str(built.value) == str(called.value)


@pytest.mark.parametrize("kw, field", [
    (dict(min_area_m2=-5.0), "min_area_m2"),
    (dict(max_area_m2=float("nan")), "max_area_m2"),
    (dict(min_area_m2=500.0, max_area_m2=50.0), "min_area_m2, max_area_m2"),
    (dict(passive_fraction=1.5), "passive_fraction"),
    (dict(tile_cells=0), "tile_cells"),
    (dict(halo_cells=2.5), "halo_cells"),
    (dict(bound_window_cells=1), "bound_window_cells, bound_stride_cells"),
    (dict(bound_stride_cells=40), "bound_window_cells, bound_stride_cells"),
    (dict(size_resolved=True, min_area_m2=50.0), "min_area_m2, max_area_m2"),
    (dict(size_bands=0), "size_bands"),
    (dict(size_bands=[(10.0,)]), "size_bands"),
    (dict(size_time_limit_s=0.0), "size_time_limit_s"),
    (dict(size_window_cells=0), "size_window_cells"),
    (dict(size_n_least=-1), "size_n_least"),
    (dict(size_max_clusters=1.5), "size_max_clusters"),
])
def test_cluster_options_name_the_field(kw, field):
    with pytest.raises(InputError, match=f"^{field}:"):
        ClusterOptions(**kw)


@pytest.mark.parametrize("kw, field", [
    (dict(unit_index=np.zeros((3, 3))), "unit_index"),          # not integers
    (dict(unit_index=np.full((3, 3), 2)), "unit_index"),        # no such unit
    (dict(table=np.zeros((1, 3, 5))), "table"),
    (dict(lateral_root_cohesion_kpa=[1.0, 2.0]), "lateral_root_cohesion_kpa"),
    (dict(samples=0), "samples"),
    (dict(seed=-1), "seed"),
    (dict(rain="monsoon"), "rain"),
    (dict(rain=SteadyRain(40.0)), "sca_m"),
    (dict(sca_m=-np.ones((3, 3))), "sca_m"),
])
def test_cluster_uncertainty_names_the_field(kw, field):
    base = dict(unit_index=np.zeros((3, 3), int), table=_unit_table(),
                lateral_root_cohesion_kpa=1.0)
    with pytest.raises(InputError, match=f"^{field}:"):
        ClusterUncertainty(**{**base, **kw})


def test_the_mapping_form_keeps_its_messages():
    base = dict(unit_index=np.zeros((3, 3), int), table=_unit_table(),
                lateral_root_cohesion_kpa=1.0)
    with pytest.raises(InputError, match="uncertainty: expected a mapping"):
        ClusterUncertainty.from_mapping(["unit_index"])
    with pytest.raises(InputError, match=r"uncertainty: unknown key\(s\) \['samplez'\]"):
        ClusterUncertainty.from_mapping({**base, "samplez": 3})
    with pytest.raises(InputError, match="uncertainty: missing 'table'"):
        ClusterUncertainty.from_mapping({k: v for k, v in base.items() if k != "table"})


def test_one_form_or_the_other():
    storm = StormInputs(**STORM)
    with pytest.raises(InputError, match="storm: given as a StormInputs and as the loose"):
        storm_pressure_head(1.0, 0.0, slope_deg=30.0, storm=storm, duration_s=60.0)
    with pytest.raises(InputError, match="storm: expected a StormInputs, got StormRain"):
        storm_pressure_head(1.0, 0.0, slope_deg=30.0, storm=StormRain(10.0, 1.0, 1.0))
    with pytest.raises(InputError, match="strength: expected a ClusterStrength, got SoilStrength"):
        cluster_forces(np.full((3, 3), 30.0), np.full((3, 3), 180.0), 1.0, 0.5, dx=5.0, dy=5.0,
                       strength=SoilStrength(**STRENGTH))
    with pytest.raises(TypeError, match="unexpected keyword argument 'duration_h'"):
        storm_pressure_head(1.0, 0.0, slope_deg=30.0, **STORM, duration_h=1.0)
    with pytest.raises(TypeError, match="missing required keyword argument.*'duration_s'"):
        storm_pressure_head(1.0, 0.0, slope_deg=30.0,
                            **{k: v for k, v in STORM.items() if k != "duration_s"})
    with pytest.raises(TypeError, match="unexpected keyword argument 'bound_window'"):
        failure_clusters(np.full((3, 3), 30.0), 1.0, 0.5, dx=5.0, dy=5.0,
                         aspect_deg=np.full((3, 3), 180.0), bound_window=8, **SOIL)


def test_the_storm_model_refuses_a_separate_saturated_unit_weight():
    soil = SoilStrength(**STRENGTH, saturated_unit_weight_kn_m3=20.0)
    with pytest.raises(InputError, match="^saturated_unit_weight_kn_m3: the storm model"):
        storm_minimum(30.0, soil_depth_m=1.0, storm=StormInputs(**STORM), strength=soil)
