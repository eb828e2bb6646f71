"""The one place that knows the order of the stages.

:func:`run` takes a validated :class:`~slopescreen.scenario.Scenario`, reads
its inputs, runs each stage the scenario asks for and writes the products.
Products are first written into a hidden staging folder inside the output
folder and moved into place only when every stage has succeeded, with
``manifest.json`` last: a failed run leaves no half-written product, and the
inputs are only ever read.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import logging
import os
import shutil
import time
import uuid
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import __version__
from .errors import InputError
from .grid import Grid, read_codes, read_dem, warn_unusual_cells, write_raster
from .report.cautions import CAUTIONS, SHORT
from .scenario import VERTICAL_UNITS, Scenario

log = logging.getLogger(__name__)

CONVENTIONS = {
    "slope": "Horn (1981) 3x3 slope of the original (unfilled) DEM, degrees from horizontal",
    "conditioning": "Priority-Flood depression filling (Barnes et al. 2014) and drainage over "
                    "flats (Barnes et al. 2014; Garbrecht and Martz 1997); routing only",
    "specific_catchment_area": "planimetric upslope area (own cell included) divided by the "
                               "orientation-unbiased effective contour width b = cell area / "
                               "mean advance of flow along the fall line; exact a = L on planes",
    "depth": "vertical depth to the failure plane",
}
"""Conventions recorded in the manifest and the report."""


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


@dataclass
class RunResult:
    """What a run wrote: the output folder, the manifest and its products."""

    output: Path
    manifest: dict
    products: list[Product] = field(default_factory=list)
    timings_s: dict = field(default_factory=dict)


class _Stages:
    """Times named stages and reports progress."""

    def __init__(self, progress):
        self.timings: dict[str, float] = {}
        self.progress = progress

    @contextmanager
    def stage(self, name: str, *, show: bool = True):
        if show and self.progress is not None:
            self.progress(name)
        log.info("stage %s: start", name)
        start = time.perf_counter()
        yield
        self.timings[name] = round(time.perf_counter() - start, 3)
        log.info("stage %s: %.2f s", name, self.timings[name])


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


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


class _Writer:
    """Writes products into the staging folder and lists them."""

    def __init__(self, staging: Path, grid: Grid):
        self.staging = staging
        self.grid = grid
        self.products: list[Product] = []

    def raster(self, key, array, *, units, description, rain=None, name=None, tags=None):
        name = name or (f"{key}_{rain.slug}.tif" if rain is not None else f"{key}.tif")
        write_raster(self.staging / name, array, self.grid, description=description, units=units,
                     caution=SHORT, tags=tags)
        self.products.append(Product(key=key, path=name, kind="raster", units=units,
                                     rain=None if rain is None else rain.name))

    def file(self, key, name, *, kind, units, rain=None):
        self.products.append(Product(key=key, path=name, kind=kind, units=units, rain=rain))


def _terrain(z, grid, scenario, stages):
    from .routing import specific_catchment_area
    from .terrain import fill_depressions, slope_aspect

    with stages.stage("slope"):
        slope_deg, _aspect = slope_aspect(z, grid.dx_m, grid.dy_m)
    with stages.stage("conditioning"):
        filled = fill_depressions(z)
    with stages.stage("routing"):
        sca = specific_catchment_area(filled, grid.dx_m, grid.dy_m, method=scenario.routing.method,
                                      mfd_exponent=scenario.routing.mfd_exponent)
    del filled
    return slope_deg, sca


def run(scenario: Scenario, *, progress=None) -> RunResult:
    """Run every stage the scenario asks for and write its products.

    Parameters
    ----------
    scenario : Scenario
        A validated scenario (:func:`slopescreen.scenario.load_scenario`).
    progress : callable, optional
        Called with the name of each stage as it starts.

    Returns
    -------
    RunResult

    Raises
    ------
    InputError
        Bad input; nothing is written.
    """
    stages = _Stages(progress)
    started = _dt.datetime.now(_dt.timezone.utc)
    with stages.stage("read inputs", show=False):  # silent: bad input must print one line only
        inputs = read_inputs(scenario)
    z, grid = inputs.z, inputs.grid
    out = scenario.output
    out.mkdir(parents=True, exist_ok=True)
    staging = out / f".slopescreen-partial-{uuid.uuid4().hex[:8]}"
    staging.mkdir()
    try:
        w = _Writer(staging, grid)
        slope_deg, sca = _terrain(z, grid, scenario, stages)
        with stages.stage("write terrain products"):
            w.raster("slope", slope_deg, units="degrees",
                     description="Slope of the original DEM (Horn 1981), degrees")
            w.raster("specific_catchment_area", sca, units="m",
                     description=f"Specific catchment area a = A/b, m ({scenario.routing.method})")
        if scenario.soil is not None:
            from .stages import stability_stage  # the stability stage, when configured

            stability_stage(scenario, inputs, slope_deg, sca, w, stages)
        manifest = _manifest(scenario, grid, w.products, stages.timings, started)
        _commit(staging, out, w.products, manifest,
                protected={p.resolve() for p in scenario.input_files()})
    finally:
        shutil.rmtree(staging, ignore_errors=True)
    return RunResult(output=out, manifest=manifest, products=w.products,
                     timings_s=dict(stages.timings))


def _manifest(scenario: Scenario, grid: Grid, products, timings, started) -> dict:
    inputs = {}
    for p in scenario.input_files():
        try:
            rel = os.path.relpath(p, scenario.output)
        except ValueError:  # another drive on Windows
            rel = str(p)
        inputs[rel] = _sha256(p)
    return {
        "tool": "slopescreen",
        "version": __version__,
        "scenario_sha256": scenario.sha256,
        "created": started.isoformat(timespec="seconds"),
        "title": scenario.title,
        "products": [p.as_dict() for p in products],
        "cautions": list(CAUTIONS),
        "inputs_sha256": inputs,
        "grid": {"rows": grid.shape[0], "cols": grid.shape[1], "dx_m": grid.dx_m,
                 "dy_m": grid.dy_m, "crs": grid.crs.to_string(),
                 "valid_cells": int(grid.valid.sum())},
        "routing": {"method": scenario.routing.method,
                    "mfd_exponent": scenario.routing.mfd_exponent
                    if scenario.routing.method == "mfd" else None},
        "conventions": CONVENTIONS,
        "stage_seconds": timings,
    }


def _commit(staging: Path, out: Path, products, manifest: dict, *, protected=frozenset()) -> None:
    """Move staged products into the output folder; the manifest goes last."""
    for p in products:
        target = out / p.path
        if target.exists() and target.resolve() in protected:
            raise InputError(f"{p.path}: a product would overwrite an input file; choose another output folder")
    for p in products:
        os.replace(staging / p.path, out / p.path)
    tmp = staging / "manifest.json"
    tmp.write_text(json.dumps(manifest, indent=2) + "\n", encoding="utf-8")
    os.replace(tmp, out / "manifest.json")
