"""Runout reach of failure sources along flow paths, by the angle of reach."""

from .angle import angle_of_reach_deg
from .reach import STOP_REASONS, Reach, Strips, d8_receivers, runout_reach
from .sources import Sources, cluster_sources, patch_sources

__all__ = ["STOP_REASONS", "Reach", "Sources", "Strips", "angle_of_reach_deg",
           "cluster_sources", "d8_receivers", "patch_sources", "runout_reach"]
