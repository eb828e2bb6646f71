"""Inputs of a run: reading and cross-checking the rasters, the soil-unit index, run records."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..grid import Grid, read_codes, read_dem, warn_unusual_cells
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


@dataclass
class Inputs:
    """Everything read from disk for a run, checked."""

    z: np.ndarray
    grid: Grid
    soil_codes: np.ndarray | None = None
    area_m2: np.ndarray | None = None  # upslope area, filled in by the routing stage
    aspect_deg: np.ndarray | None = None  # downslope azimuth, filled in by the slope stage


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
    vunit = None if scenario.dem_vertical_unit is None else VERTICAL_UNITS[scenario.dem_vertical_unit]
    z, grid = read_dem(scenario.dem, vertical_unit_m=vunit)
    warn_unusual_cells(grid)
    inputs = Inputs(z=z, grid=grid)
    soil = scenario.soil
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
        inputs.soil_codes = np.where(grid.valid & has_code, codes, -1)
    return inputs


def check(scenario: Scenario) -> Inputs:
    """Validate the scenario's inputs without computing or writing anything."""
    return read_inputs(scenario)


def unit_index_map(scenario: Scenario, inputs: Inputs) -> tuple[np.ndarray, list]:
    """Map each valid cell to the row of its soil unit (units sorted by code).

    Returns
    -------
    index : numpy.ndarray of int32
        Row in ``units`` per cell; -1 where nodata or without a soil code.
    units : list of SoilUnit
        Units sorted by code.
    """
    units = [scenario.soil.units[c] for c in sorted(scenario.soil.units)]
    valid = inputs.grid.valid
    if inputs.soil_codes is None:
        return np.where(valid, 0, -1).astype(np.int32), units
    codes = np.array(sorted(scenario.soil.units), dtype=np.int64)
    idx = np.searchsorted(codes, inputs.soil_codes)
    idx = np.clip(idx, 0, len(codes) - 1)
    ok = valid & (inputs.soil_codes >= 0) & (codes[idx] == inputs.soil_codes)
    return np.where(ok, idx, -1).astype(np.int32), units


def _central_maps(index: np.ndarray, units) -> dict:
    """Per-cell central (median) value of each soil property; NaN where no unit."""
    from ..probability import PARAMETER_ORDER

    maps = {}
    for key in PARAMETER_ORDER:
        values = np.array([np.nan if getattr(u, key) is None else getattr(u, key).central()
                           for u in units] + [np.nan], dtype=np.float64)
        maps[key] = values[index].astype(np.float32)  # index -1 picks the NaN at the end
    return maps
