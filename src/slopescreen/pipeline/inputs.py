"""Inputs of a run: reading and cross-checking the rasters, the soil-unit index, run records."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..grid import NO_CODE, Grid, read_codes, read_dem, warn_unusual_cells
from ..scenario import VERTICAL_UNITS, Scenario


@dataclass
class Product:
    """One entry of ``manifest.json``."""

    key: str
    path: str
    kind: str
    units: str
    rain: str | None = None

    def as_dict(self) -> dict:
        return {"key": self.key, "rain": self.rain, "path": self.path, "kind": self.kind,
                "units": self.units}


@dataclass(frozen=True)
class Inputs:
    """Everything read from disk for a run, checked (never changed after reading)."""

    z: np.ndarray
    grid: Grid
    soil_codes: np.ndarray | None = None
    corridor: object = None
    """:class:`~slopescreen.pipeline.corridor_stage.CorridorInputs` of a ``[corridor]``."""
    landslides: tuple = ()
    """Mapped landslides of an ``[inventory]`` (shapely polygons or points, DEM CRS): the
    features its ``event`` and ``types`` select."""
    inventory: object = None
    """:class:`~slopescreen.inventory.landslides.InventoryCells` of an ``[inventory]``."""


@dataclass
class RunResult:
    """What a run wrote: the output folder, the manifest and its products."""

    output: Path
    manifest: dict
    products: list[Product] = field(default_factory=list)
    timings_s: dict = field(default_factory=dict)


def read_inputs(scenario: Scenario) -> Inputs:
    """Read and cross-check every raster the scenario names.

    Raises
    ------
    InputError
        A raster cannot be used, or a soil map holds a code without a table.
    """
    from .guard import check_memory, check_output

    check_output(scenario)
    check_memory(scenario, _dem_shape(scenario.dem))
    vunit = None if scenario.dem_vertical_unit is None else VERTICAL_UNITS[scenario.dem_vertical_unit]
    z, grid = read_dem(scenario.dem, vertical_unit_m=vunit)
    warn_unusual_cells(grid)
    if scenario.clusters is not None:
        _check_area_band(scenario, grid)
    soil = scenario.soil
    soil_codes = None
    if soil is not None and soil.map is not None:
        codes, has_code = read_codes(soil.map, grid, name="soil map")
        used = np.unique(codes[grid.valid & has_code])
        missing = [int(c) for c in used if int(c) not in soil.units]
        if missing:
            raise InputError(
                f"{soil.map.name}: soil map holds code(s) {', '.join(map(str, missing[:5]))} with no "
                f"table [soil.units.CODE] in {scenario.path.name}; add a table for each code")
        if not (grid.valid & has_code).any():
            raise InputError(f"{soil.map.name}: soil map has no code on any valid DEM cell")
        soil_codes = np.where(grid.valid & has_code, codes, NO_CODE).astype(np.int32)
    corridor = None
    if scenario.corridor is not None:
        from .corridor_stage import read_corridor

        corridor = read_corridor(scenario, grid)
        unit = scenario.corridor.engineered_soil_unit
        if unit is not None and soil is not None:
            soil_codes = _with_engineered_unit(scenario, grid, soil_codes, corridor.engineered,
                                               unit)
    inventory = None
    if scenario.inventory is not None:
        from ..inventory.landslides import read_inventory

        inventory = read_inventory(scenario.inventory, grid, z)
    return Inputs(z=z, grid=grid, soil_codes=soil_codes, corridor=corridor,
                  landslides=() if inventory is None else inventory.geometries,
                  inventory=inventory)


def _check_area_band(scenario, grid) -> None:
    """Refuse a ``[clusters]`` area band that holds no whole number of the DEM's cells."""
    c = scenario.clusters
    cell = grid.dx_m * grid.dy_m
    kmin = max(1, math.ceil(c.min_area_m2 / cell - 1e-9))
    if math.floor(c.max_area_m2 / cell + 1e-9) < kmin:
        raise InputError(
            f"{scenario.path.name}: [clusters].min_area_m2, max_area_m2: the band "
            f"{c.min_area_m2:g}-{c.max_area_m2:g} m^2 holds no whole number of the DEM's "
            f"{cell:g} m^2 cells ({grid.dx_m:g} x {grid.dy_m:g} m); widen it to at least one cell")


def _with_engineered_unit(scenario, grid, soil_codes, engineered, unit):
    """Soil codes with the engineered ground's own unit on its cells (a new array)."""
    if soil_codes is None:  # no soil map: the one other unit everywhere
        base = next(c for c in sorted(scenario.soil.units) if c != unit)
        soil_codes = np.where(grid.valid, base, NO_CODE).astype(np.int32)
    return np.where(engineered & grid.valid, unit, soil_codes).astype(np.int32)


def check(scenario: Scenario) -> Inputs:
    """Validate the scenario's inputs without computing or writing anything."""
    return read_inputs(scenario)


def soil_of(scenario: Scenario, inputs: Inputs):
    """The run's :class:`~slopescreen.soil.SoilFields`, built once from the scenario and the map."""
    from ..soil import soil_fields

    units = [scenario.soil.units[c] for c in sorted(scenario.soil.units)]
    return soil_fields(units, inputs.soil_codes, inputs.grid.valid,
                       depth_measured=scenario.soil.depth_measured)


def _dem_shape(path) -> tuple[int, int]:
    """Rows and columns of the DEM from its header (read_dem reports an unreadable file)."""
    import rasterio
    from rasterio.errors import RasterioIOError

    try:
        with rasterio.open(path) as src:
            return src.height, src.width
    except RasterioIOError:
        return 0, 0
