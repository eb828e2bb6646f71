"""Terrain stages of a run: conditioning, routing to specific catchment area, slope and aspect.

The DEM is validated once and padded once for routing: the conditioning
stage fills its own NaN-padded copy in place and the routing stage routes
that padded surface directly, so neither re-validates nor re-pads it. The
slope used in stability is the slope of the original DEM (the conditioned
DEM serves routing only); it is computed last, so that its two rasters are
not yet held while routing, the most memory-hungry stage, runs.
"""

from __future__ import annotations

import numpy as np

from .results import ConditionedDem, RoutingResult, SlopeResult

_ROWS = 512
"""Rows per block when the specific catchment area is formed (keeps float64 temporaries small)."""


def conditioning_stage(scenario, inputs) -> ConditionedDem:
    """Priority-Flood depression filling of the DEM, for routing (padded, NaN ring).

    Culverts of a ``[corridor]`` are carved through the road fill first
    (docs/methods.md, "Culverts through road fills").
    """
    from .. import _validate
    from .._neighbours import pad_nan
    from ..terrain import _fill_depressions_padded

    z, _ = _validate.surface(inputs.z, name=f"{scenario.dem.name}: DEM")
    zp = pad_nan(z)
    corridor = inputs.corridor
    if corridor is not None and corridor.culverts:
        from ..corridor.culverts import _breach_padded, _padded_indices

        _breach_padded(zp, _padded_indices(corridor.culverts, inputs.grid.shape),
                       dx=inputs.grid.dx_m, dy=inputs.grid.dy_m)
    _fill_depressions_padded(zp)
    return ConditionedDem(filled=zp)


def routing_stage(scenario, inputs, conditioned: ConditionedDem) -> RoutingResult:
    """Upslope area and specific catchment area a = A/b on the conditioned DEM."""
    from ..routing.accumulation import _METHOD_CODE, _route_padded

    grid = inputs.grid
    r = scenario.routing
    acc, width, _codes = _route_padded(conditioned.filled, grid.dx_m, grid.dy_m,
                                       _METHOD_CODE[r.method], float(r.mfd_exponent))
    del _codes
    rows, cols = grid.shape
    area = np.empty((rows, cols), dtype=np.float32)
    sca = np.empty((rows, cols), dtype=np.float32)
    for r0 in range(0, rows, _ROWS):
        block = slice(r0 + 1, min(r0 + _ROWS, rows) + 1)
        a = acc[block, 1:-1]
        area[r0:r0 + a.shape[0]] = a
        with np.errstate(invalid="ignore", divide="ignore"):
            sca[r0:r0 + a.shape[0]] = a / width[block, 1:-1]
    return RoutingResult(area_m2=area, sca_m=sca, method=r.method)


def slope_stage(scenario, inputs) -> SlopeResult:
    """Horn slope and aspect of the original DEM."""
    from .._neighbours import pad_nan
    from ..terrain import _slope_aspect_padded

    slope_deg, aspect_deg = _slope_aspect_padded(pad_nan(inputs.z), inputs.grid.dx_m,
                                                 inputs.grid.dy_m)
    return SlopeResult(slope_deg=slope_deg, aspect_deg=aspect_deg)
