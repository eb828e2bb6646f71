"""slopescreen: screening of rainfall-triggered shallow landslides from a DEM.

The package maps where a soil mantle can fail under a rainfall scenario:
conditioned terrain, flow routing to specific catchment area, wetness,
infinite-slope factor of safety and the probability of failure.

Every product is a screening result, not a site investigation; see
:mod:`slopescreen.cautions`.
"""

__version__ = "0.1.0"

__all__ = ["__version__"]
