"""Terrain stages of a run: slope and aspect, conditioning, routing to specific catchment area."""

from __future__ import annotations

import numpy as np


def _terrain(z, grid, scenario, stages, inputs):
    from ..routing import flow_accumulation
    from ..terrain import fill_depressions, slope_aspect

    with stages.stage("slope"):
        slope_deg, inputs.aspect_deg = slope_aspect(z, grid.dx_m, grid.dy_m)
    with stages.stage("conditioning"):
        filled = fill_depressions(z)
    with stages.stage("routing"):
        flow = flow_accumulation(filled, grid.dx_m, grid.dy_m, method=scenario.routing.method,
                                 mfd_exponent=scenario.routing.mfd_exponent)
    del filled
    with np.errstate(invalid="ignore", divide="ignore"):
        sca = (flow.area_m2 / flow.width_m).astype(np.float32)
    inputs.area_m2 = flow.area_m2.astype(np.float32)
    return slope_deg, sca
