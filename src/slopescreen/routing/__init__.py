"""Flow routing (D-infinity, MFD, D8), upslope area and specific catchment area.

The router works on the surface it is given; it does not fill depressions
(the pipeline fills first with :func:`slopescreen.terrain.fill_depressions`).
Flats are drained internally with :mod:`slopescreen.flats`.

Every method runs in four passes over a NaN-padded, flattened grid:

1. a row-parallel pass gives each cell its receivers in compact form (one
   ``uint8`` code, plus one ``float32`` fraction for D-infinity) and its
   effective contour width ``b``;
2. flats (cells with no strictly lower valid neighbour) get the D8 direction
   of the flat-drainage gradient;
3. a serial pass counts each cell's donors (``uint8`` in-degree);
4. a serial topological pass (Kahn's algorithm) accumulates the upslope area
   in float64.

Memory (D-infinity, per cell, padded grid): surface copy 4 B, code 1 B,
fraction 4 B, width 4 B, in-degree 1 B, area 8 B, plus 4 B for the output
of :func:`specific_catchment_area`; the flats step briefly needs 6 B and an
int32 queue as long as the flats. MFD and D8 need no fraction array; MFD
recomputes its fractions from the surface during accumulation.

Receiver codes: ``j`` in 0..7 is D-infinity facet ``j`` (cardinal neighbour
``_FACET_CARD[j]``, diagonal neighbour ``_FACET_DIAG[j]``, diagonal share in
``frac``); ``8 + k`` sends everything to neighbour ``k``; ``16`` is an MFD
cell whose fractions are recomputed from the surface when needed; ``255``
sends nothing (an outlet on the data edge, a pit, or a flat with no outlet).
"""

# Every name of the former single module stays importable from here: what it
# imported from elsewhere in the package,
from .._neighbours import (
    DCOL,
    DROW,
    NO_DIRECTION,
    linear_offsets,
    neighbour_distances,
    pad_nan,
    unpad,
)
from ..errors import InputError
from ..flats import _flat_directions_padded
# and what it defined, private names included (tests and other modules use some).
from ._geometry import (
    _DONE,
    _F_COS,
    _F_D1,
    _F_D2,
    _F_E1X,
    _F_E1Y,
    _F_EPX,
    _F_EPY,
    _F_INV_D1,
    _F_INV_D2,
    _F_INV_DD,
    _F_RATIO,
    _F_SIN,
    _F_THETA,
    _FACET_CARD,
    _FACET_DIAG,
    _MULTI,
    _NB_DIST,
    _NB_EX,
    _NB_EY,
    _NB_INV,
    _SINGLE,
    _tables,
)
from .accumulation import (
    _METHOD_CODE,
    METHODS,
    FlowResult,
    _accumulate_kernel,
    _indegree_kernel,
    _outlets_kernel,
    _prepare,
    _route_padded,
    flow_accumulation,
)
from .catchment_area import _sca_kernel, specific_catchment_area
from .directions import (
    _clamped_width,
    _directions_kernel,
    _facet_direction,
    _mfd_weight,
    _no_descent_kernel,
    _receiver_codes,
)
from .links import _links_kernel, _receivers

__all__ = ["FlowResult", "flow_accumulation", "specific_catchment_area", "METHODS"]
