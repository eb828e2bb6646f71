"""Corridor screening: a road or pipeline centreline, its chainage segments and strips,
culverts through its fill, and the ranked segment table."""

from .culverts import breach, crossing_cells, culvert_crossings
from .segments import Segments, build_segments, split_line, strip_cells
from .table import CORRIDOR_FIELDS, nearest_distances, segment_rows, strip_recharge
from .vector_inputs import chain_lines, outside_length, point_cells, polygon_mask, read_vector

__all__ = ["CORRIDOR_FIELDS", "Segments", "breach", "build_segments", "chain_lines",
           "crossing_cells", "culvert_crossings", "nearest_distances", "outside_length",
           "point_cells", "polygon_mask", "read_vector", "segment_rows", "split_line",
           "strip_cells", "strip_recharge"]
