"""Flow routing (D-infinity, MFD, D8), drainage over flats, upslope and specific catchment area."""

from .accumulation import METHODS, FlowResult, flow_accumulation
from .catchment_area import specific_catchment_area
from .flats import drainage_over_flats

__all__ = [
    "FlowResult",
    "flow_accumulation",
    "specific_catchment_area",
    "drainage_over_flats",
    "METHODS",
]
