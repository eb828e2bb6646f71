"""Whole-grid computations done tile by tile (flow accumulation across tiles)."""

from .accumulation import (
    TILED_METHODS,
    TileFlowMap,
    TiledAccumulation,
    accumulate_tiled,
    finish_tile_accumulation,
    perimeter_cells,
    solve_perimeter,
    tile_flow_map,
    tile_windows,
)

__all__ = [
    "TILED_METHODS",
    "TileFlowMap",
    "TiledAccumulation",
    "accumulate_tiled",
    "finish_tile_accumulation",
    "perimeter_cells",
    "solve_perimeter",
    "tile_flow_map",
    "tile_windows",
]
