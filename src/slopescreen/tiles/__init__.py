"""Grid algorithms run tile by tile: depression filling across tiles and flats across tiles."""

from .fill import TileFill, TileSummary, fill_tile, fill_tiled, finish_tile, spill_levels, tile_windows

__all__ = ["TileFill", "TileSummary", "fill_tile", "fill_tiled", "finish_tile", "spill_levels",
           "tile_windows"]
