"""Grid algorithms run tile by tile: depression filling, drainage over flats and flow accumulation across tiles."""

from .accumulation import (
    TILED_METHODS,
    TileFlowMap,
    TiledAccumulation,
    accumulate_tiled,
    finish_tile_accumulation,
    perimeter_cells,
    solve_perimeter,
    tile_flow_map,
)
from .fill import TileFill, TileSummary, fill_tile, fill_tiled, finish_tile, spill_levels, tile_windows
from .flats import (
    FlatSummary,
    FlatTile,
    flat_directions_tiled,
    flat_groups,
    flat_tile,
    group_directions,
    group_window,
)

__all__ = [
    "TILED_METHODS", "TileFlowMap", "TiledAccumulation", "accumulate_tiled",
    "finish_tile_accumulation", "perimeter_cells", "solve_perimeter", "tile_flow_map",
    "TileFill", "TileSummary", "fill_tile", "spill_levels", "finish_tile", "fill_tiled",
    "tile_windows", "FlatSummary", "FlatTile", "flat_tile", "flat_groups", "group_window",
    "group_directions", "flat_directions_tiled",
]
