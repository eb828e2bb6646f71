"""Terrain stages of a run: slope and aspect, conditioning, routing to specific catchment area.

The slope used in stability is the slope of the original DEM; the
conditioned (depression-filled) DEM serves routing only.
"""

from __future__ import annotations

import numpy as np

from .results import ConditionedDem, RoutingResult, SlopeResult


def slope_stage(scenario, inputs) -> SlopeResult:
    """Horn slope and aspect of the original DEM."""
    from ..terrain import slope_aspect

    slope_deg, aspect_deg = slope_aspect(inputs.z, inputs.grid.dx_m, inputs.grid.dy_m)
    return SlopeResult(slope_deg=slope_deg, aspect_deg=aspect_deg)


def conditioning_stage(scenario, inputs) -> ConditionedDem:
    """Priority-Flood depression filling of the DEM, for routing."""
    from ..terrain import fill_depressions

    return ConditionedDem(filled=fill_depressions(inputs.z))


def routing_stage(scenario, inputs, conditioned: ConditionedDem) -> RoutingResult:
    """Upslope area and specific catchment area a = A/b on the conditioned DEM."""
    from ..routing import flow_accumulation

    grid = inputs.grid
    flow = flow_accumulation(conditioned.filled, grid.dx_m, grid.dy_m,
                             method=scenario.routing.method,
                             mfd_exponent=scenario.routing.mfd_exponent)
    with np.errstate(invalid="ignore", divide="ignore"):
        sca = (flow.area_m2 / flow.width_m).astype(np.float32)
    return RoutingResult(area_m2=flow.area_m2.astype(np.float32), sca_m=sca,
                         method=scenario.routing.method)
