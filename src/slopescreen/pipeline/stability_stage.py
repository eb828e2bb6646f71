"""Stability stages of a run: soil cells, critical recharge, wetness and FS per rain case,
probability of failure per rain case.

Soil properties come from the run's :class:`~slopescreen.soil.SoilFields`
by unit: a one-unit scenario passes each property to the kernels as one
number, and no per-cell parameter raster is made.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import partial
from types import MappingProxyType

import numpy as np

from ..scenario.model import MIN_FAILURE_DEPTH_M, STORM_DEPTHS
from ..soil import SoilFields
from .inputs import soil_of
from .results import ProbabilityResult, RechargeResult, StabilityResult, StormExtras

STRENGTH = {"cohesion_kpa": "cohesion_kpa", "root_cohesion_kpa": "root_cohesion_kpa",
            "friction_deg": "friction_deg", "unit_weight_kn_m3": "unit_weight_kn_m3"}
"""Keywords of the strength parameters of the stability functions -> soil property."""


@dataclass(frozen=True)
class SoilCells:
    """The soil fields and the terrain on the cells that have a soil unit (NaN elsewhere).

    ``area_m2`` (the upslope area, for the storm model's time-scale check) is
    None when the scenario has no storm case: nothing reads it then.
    """

    soil: SoilFields
    slope_deg: np.ndarray
    sca_m: np.ndarray
    area_m2: np.ndarray | None

    def products(self):
        return ()


def soil_fields_stage(scenario, inputs) -> SoilFields:
    """The soil fields of the run, built once (a unit index and a per-unit table)."""
    return soil_of(scenario, inputs)


def soil_cells_stage(scenario, inputs, soil: SoilFields, slope, routing) -> SoilCells:
    """The terrain on the cells with a soil unit (masked only where a soil map leaves cells out)."""
    storms = any(case.is_storm for case in scenario.rain)
    arrays = (slope.slope_deg, routing.sca_m, routing.area_m2 if storms else None)
    if inputs.soil_codes is not None:  # cells without a code drop out
        arrays = tuple(None if a is None else np.where(soil.valid, a, np.nan).astype(np.float32)
                       for a in arrays)
    return SoilCells(soil, *arrays)


def rain_model(case):
    """The hydrology model object of a scenario rain case."""
    from ..hydrology import SteadyRain, StormRain

    if case.is_storm:
        return StormRain(case.storm_mm_per_h, case.duration_h, case.water_table_depth_m,
                         antecedent_mm_per_day=case.antecedent_mm_per_day)
    return SteadyRain(case.steady_mm_per_day)


def rain_needs_area(case) -> bool:
    """True when a rain case reads the specific catchment area (steady, or an antecedent storm)."""
    return not case.is_storm or case.antecedent_mm_per_day is not None


def recharge_stage(scenario, inputs, cells: SoilCells) -> RechargeResult:
    """Critical steady recharge (Montgomery-Dietrich with cohesion) and its class."""
    from ..stability import critical_recharge

    q_cr, klass = cells.soil.by_unit(
        partial(critical_recharge, depth_measured=cells.soil.depth_measured),
        {"slope_deg": cells.slope_deg, "sca_m": cells.sca_m},
        {"depth_m": "depth_m", "conductivity_m_per_day": "conductivity_m_per_day"} | STRENGTH,
        fill=(np.nan, 0))
    return RechargeResult(q_cr, klass.astype(np.uint8))


def _fs_tags():
    from ..stability import FS_CAP

    return MappingProxyType({"FS_CAP": f"{FS_CAP:g} means at least {FS_CAP:g} (and flat ground)",
                             "PARAMETERS": "median of each soil-property distribution"})


def _steady_cells(slope_deg, sca_m, *, recharge_mm_per_day, depth_measured, depth_m,
                  conductivity_m_per_day, cohesion_kpa, root_cohesion_kpa, friction_deg,
                  unit_weight_kn_m3):
    from ..hydrology import steady_wetness
    from ..stability import factor_of_safety

    wet = steady_wetness(sca_m, slope_deg, recharge_mm_per_day=recharge_mm_per_day,
                         conductivity_m_per_day=conductivity_m_per_day, depth_m=depth_m,
                         depth_measured=depth_measured)
    fs = factor_of_safety(slope_deg, depth_m, wet, depth_measured=depth_measured,
                          cohesion_kpa=cohesion_kpa,
                          root_cohesion_kpa=root_cohesion_kpa, friction_deg=friction_deg,
                          unit_weight_kn_m3=unit_weight_kn_m3)
    return wet, fs


def _storm_cells(slope_deg, area_m2, sca_m, *, case, depth_measured, min_failure_depth_m,
                 depth_m, conductivity_m_per_day, diffusivity_m2_per_s, cohesion_kpa,
                 root_cohesion_kpa, friction_deg, unit_weight_kn_m3):
    from ..hydrology import (StormInputs, antecedent_table_depth, storm_minimum,
                             storm_pressure_head)
    from ..stability import SoilStrength

    table = case.water_table_depth_m
    if case.antecedent_mm_per_day is not None:  # the steady water table of that recharge
        table = antecedent_table_depth(sca_m, slope_deg,
                                       recharge_mm_per_day=case.antecedent_mm_per_day,
                                       conductivity_m_per_day=conductivity_m_per_day,
                                       depth_m=depth_m, depth_measured=depth_measured)
    storm = StormInputs(water_table_depth_m=table,
                        intensity_m_per_s=case.storm_mm_per_h / 3.6e6,
                        conductivity_m_per_s=conductivity_m_per_day / 86400.0,
                        diffusivity_m2_per_s=diffusivity_m2_per_s,
                        duration_s=case.duration_h * 3600.0)
    strength = SoilStrength(cohesion_kpa=cohesion_kpa, root_cohesion_kpa=root_cohesion_kpa,
                            friction_deg=friction_deg, unit_weight_kn_m3=unit_weight_kn_m3)
    least = storm_minimum(slope_deg, soil_depth_m=depth_m, contributing_area_m2=area_m2,
                          storm=storm, strength=strength, n_depths=STORM_DEPTHS,
                          min_failure_depth_m=min_failure_depth_m, depth_measured=depth_measured)
    psi = storm_pressure_head(least.depth_m, least.time_s, slope_deg=slope_deg, storm=storm)
    cos2 = np.cos(np.radians(slope_deg.astype(np.float64))) ** 2
    with np.errstate(invalid="ignore", divide="ignore"):
        wet = np.clip(psi / (least.depth_m * cos2), 0.0, 1.0).astype(np.float32)
    flags = (least.cap_bound * 1 + least.runoff * 2 + least.short_time_doubtful * 4).astype(np.uint8)
    return least.fs, wet, least.depth_m, (least.time_s / 3600.0).astype(np.float32), flags


def min_failure_depth(scenario) -> float:
    """The minimum credible failure depth of the storm products, m (``[soil]``)."""
    return MIN_FAILURE_DEPTH_M if scenario.soil is None else scenario.soil.min_failure_depth_m


def stability_stage(scenario, inputs, cells: SoilCells, *, case) -> StabilityResult:
    """Wetness and infinite-slope FS of one rain case at the median parameters.

    Steady cases: Montgomery-Dietrich wetness; storms: the least FS over
    depth and time of Iverson's (2000) response, with its depth, time and
    the model's flags.
    """
    soil = cells.soil
    if not case.is_storm:
        wet, fs = soil.by_unit(
            lambda **kw: _steady_cells(recharge_mm_per_day=case.steady_mm_per_day,
                                       depth_measured=soil.depth_measured, **kw),
            {"slope_deg": cells.slope_deg, "sca_m": cells.sca_m},
            {"depth_m": "depth_m", "conductivity_m_per_day": "conductivity_m_per_day"} | STRENGTH)
        return StabilityResult(case, wet, fs, fs_tags=_fs_tags())
    fs, wet, depth, time_h, flags = soil.by_unit(
        lambda **kw: _storm_cells(case=case, depth_measured=soil.depth_measured,
                                  min_failure_depth_m=min_failure_depth(scenario), **kw),
        {"slope_deg": cells.slope_deg, "area_m2": cells.area_m2, "sca_m": cells.sca_m},
        {"depth_m": "depth_m", "conductivity_m_per_day": "conductivity_m_per_day",
         "diffusivity_m2_per_s": "diffusivity_m2_per_s"} | STRENGTH,
        fill=(np.nan, np.nan, np.nan, np.nan, 0))
    flags = np.where(soil.valid, flags + 8, 0).astype(np.uint8)
    return StabilityResult(case, wet, fs, StormExtras(depth, time_h, flags), fs_tags=_fs_tags())


def probability_stage(scenario, inputs, cells: SoilCells, *, case) -> ProbabilityResult:
    """Probability of failure of one rain case: Monte Carlo (default) or FOSM."""
    from ..probability import failure_probability, fosm_reliability

    unc = effective_uncertainty(scenario)
    soil = cells.soil
    index = soil.index_array()
    rain = rain_model(case)
    # the same failure depths as the storm FS map (docs/methods.md, "Storm response (Iverson 2000)")
    depths = {"n_depths": STORM_DEPTHS, "min_failure_depth_m": min_failure_depth(scenario)}
    if unc.method == "fosm":
        p_f = fosm_reliability(cells.slope_deg, cells.sca_m, index, soil.table, rain,
                               depth_measured=soil.depth_measured, **depths).p_f
        how = "first-order second-moment (FOSM), FS taken as normal"
    else:
        p_f, _se = failure_probability(cells.slope_deg, cells.sca_m, index, soil.table, rain,
                                       samples=unc.samples, seed=unc.seed,
                                       correlation=unc.correlation,
                                       depth_measured=soil.depth_measured, **depths)
        how = (f"Monte Carlo, {unc.samples} samples, seed {unc.seed}, "
               f"independent draws per {unc.correlation}")
    return ProbabilityResult(case, p_f.astype(np.float32), how)


def varies(scenario) -> bool:
    """True when a soil property of any unit is a distribution."""
    from ..probability import PARAMETER_ORDER

    return scenario.soil is not None and any(
        getattr(u, k) is not None and not getattr(u, k).is_fixed
        for u in scenario.soil.units.values() for k in PARAMETER_ORDER)


def effective_uncertainty(scenario):
    """The probability settings of a run: the scenario's, the defaults when only
    distributions ask for a probability, or None when no probability is computed."""
    from ..scenario import Uncertainty

    if scenario.uncertainty is not None:
        return scenario.uncertainty
    if varies(scenario):
        return Uncertainty()
    return None
