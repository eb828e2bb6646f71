"""Stability stages of a run: critical recharge, wetness and FS per rain case, probability."""

from __future__ import annotations

import numpy as np

from ..scenario import Scenario
from .clusters_stage import _ClusterCollector, _clusters_for_case
from .inputs import Inputs, _central_maps, unit_index_map
from .staging import _Writer


def _rain_model(case):
    from ..hydrology import SteadyRain, StormRain

    if case.is_storm:
        return StormRain(case.storm_mm_per_h, case.duration_h, case.water_table_depth_m)
    return SteadyRain(case.steady_mm_per_day)


def _varies(units) -> bool:
    from ..probability import PARAMETER_ORDER

    return any(getattr(u, k) is not None and not getattr(u, k).is_fixed
               for u in units for k in PARAMETER_ORDER)


STORM_FLAGS = {1: "pressure head reached its cap (saturated to the surface)",
               2: "rain intensity exceeded the saturated conductivity; the excess ran off",
               4: "least FS comes late compared with A/D0: the short-time model is doubtful"}
"""Bits of the ``storm_flags`` band."""


def _stability(scenario: Scenario, inputs: Inputs, slope_deg, sca, w: "_Writer", stages) -> None:
    """Wetness, factor of safety, critical recharge and probability of failure per rain case."""
    from ..hydrology import steady_wetness, storm_minimum, storm_pressure_head
    from ..probability import encode_table, failure_probability, fosm_reliability
    from ..stability import CLASS_LABELS, FS_CAP, critical_recharge, factor_of_safety

    index, units = unit_index_map(scenario, inputs)
    has_unit = index >= 0
    slope = np.where(has_unit, slope_deg, np.nan).astype(np.float32)
    a = np.where(has_unit, sca, np.nan).astype(np.float32)
    m = _central_maps(index, units)
    strength = dict(cohesion_kpa=m["cohesion_kpa"], root_cohesion_kpa=m["root_cohesion_kpa"],
                    friction_deg=m["friction_deg"], unit_weight_kn_m3=m["unit_weight_kn_m3"])
    fs_tags = {"FS_CAP": f"{FS_CAP:g} means at least {FS_CAP:g} (and flat ground)",
               "PARAMETERS": "median of each soil-property distribution"}
    with stages.stage("critical recharge"):
        q_cr, klass = critical_recharge(slope, a, depth_m=m["depth_m"],
                                        conductivity_m_per_day=m["conductivity_m_per_day"],
                                        **strength)
        w.raster("critical_recharge", q_cr, units="mm/day",
                 description="Critical steady recharge for FS = 1 (Montgomery-Dietrich), mm/day; "
                             "nodata where the class band says no rate applies")
        w.raster("critical_recharge_class", klass.astype(np.uint8), units="class",
                 description="Stability class of the critical-recharge balance",
                 tags={f"CLASS_{k}": v for k, v in CLASS_LABELS.items()})
    table = encode_table([{k: getattr(u, k) for k in _table_keys(u)} for u in units])
    unc = scenario.uncertainty
    collector = None if scenario.clusters is None else _ClusterCollector(inputs.grid)
    for case in scenario.rain:
        rain = _rain_model(case)
        with stages.stage(f"stability: {case.name}"):
            if not case.is_storm:
                wet = steady_wetness(a, slope, recharge_mm_per_day=case.steady_mm_per_day,
                                     conductivity_m_per_day=m["conductivity_m_per_day"],
                                     depth_m=m["depth_m"])
                fs = factor_of_safety(slope, m["depth_m"], wet, **strength)
            else:
                hydro = dict(water_table_depth_m=case.water_table_depth_m,
                             intensity_m_per_s=case.storm_mm_per_h / 3.6e6,
                             conductivity_m_per_s=m["conductivity_m_per_day"] / 86400.0,
                             diffusivity_m2_per_s=m["diffusivity_m2_per_s"],
                             duration_s=case.duration_h * 3600.0)
                least = storm_minimum(slope, soil_depth_m=m["depth_m"],
                                      contributing_area_m2=np.where(has_unit, inputs.area_m2, np.nan),
                                      **hydro, **strength)
                fs = least.fs
                psi = storm_pressure_head(least.depth_m, least.time_s, slope_deg=slope, **hydro)
                cos2 = np.cos(np.radians(slope.astype(np.float64))) ** 2
                with np.errstate(invalid="ignore", divide="ignore"):
                    wet = np.clip(psi / (least.depth_m * cos2), 0.0, 1.0).astype(np.float32)
                flags = (least.cap_bound * 1 + least.runoff * 2
                         + least.short_time_doubtful * 4).astype(np.uint8)
                w.raster("storm_failure_depth", least.depth_m, units="m", rain=case,
                         description="Vertical depth of the least storm FS, m")
                w.raster("storm_failure_time", least.time_s / 3600.0, units="h", rain=case,
                         description="Time of the least storm FS since the storm began, h")
                w.raster("storm_flags", np.where(has_unit, flags + 8, 0).astype(np.uint8),
                         units="bit flags", rain=case,
                         description="Where the storm model's limits bind (bits; 8 = computed)",
                         tags={f"BIT_{k}": v for k, v in STORM_FLAGS.items()} | {"BIT_8": "computed"})
            w.raster("wetness", wet, units="1", rain=case,
                     description="Wetness h_w/z (saturated fraction of the soil column)")
            w.raster("factor_of_safety", fs, units="1", rain=case, tags=fs_tags,
                     description="Infinite-slope factor of safety (median parameters)")
        if collector is not None:
            depth = least.depth_m if case.is_storm else m["depth_m"]
            sampled = unc is not None or _varies(units)
            cluster_unc = None if not sampled else dict(
                unit_index=index, table=table,
                lateral_root_cohesion_kpa=[u.lateral_root_cohesion_kpa for u in units],
                samples=(unc or _default_uncertainty()).samples,
                seed=(unc or _default_uncertainty()).seed,
                rain=rain, sca_m=None if case.is_storm else a)
            with stages.stage(f"clusters: {case.name}"):
                _clusters_for_case(scenario, inputs, case, slope, depth, wet, m, index, units,
                                   w, collector, cluster_unc)
        if unc is None and not _varies(units):
            continue
        unc = unc or _default_uncertainty()
        with stages.stage(f"probability of failure: {case.name}"):
            if unc.method == "fosm":
                p_f = fosm_reliability(slope, a, index, table, rain).p_f
                how = "first-order second-moment (FOSM), FS taken as normal"
            else:
                p_f, _se = failure_probability(slope, a, index, table, rain, samples=unc.samples,
                                               seed=unc.seed, correlation=unc.correlation)
                how = (f"Monte Carlo, {unc.samples} samples, seed {unc.seed}, "
                       f"independent draws per {unc.correlation}")
            w.raster("failure_probability", p_f, units="1", rain=case,
                     description="Probability that FS < 1 given the parameter distributions",
                     tags={"METHOD": how})
    if collector is not None:
        with stages.stage("write clusters"):
            collector.write(w)


def _table_keys(unit):
    from ..probability import PARAMETER_ORDER

    return [k for k in PARAMETER_ORDER if getattr(unit, k) is not None]


def _effective_uncertainty(scenario: Scenario) -> dict | None:
    """The probability settings a run used (defaults when only distributions ask for it)."""
    if scenario.uncertainty is not None:
        return vars(scenario.uncertainty)
    if scenario.soil is not None and _varies(list(scenario.soil.units.values())):
        return vars(_default_uncertainty())
    return None


def _default_uncertainty():
    from ..scenario import Uncertainty

    return Uncertainty()
