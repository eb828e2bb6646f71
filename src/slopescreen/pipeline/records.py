"""What a run records: the manifest, the software environment, the soil parameters."""

from __future__ import annotations

import hashlib
import os
from pathlib import Path

import numpy as np

from .. import __version__
from ..grid import Grid
from ..report.cautions import run_cautions
from ..scenario import Scenario
from .stability_stage import effective_uncertainty


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


def _conventions(scenario: Scenario):
    """:data:`CONVENTIONS`, with the depth as the run's ``[soil] depth_measured`` reads it."""
    if scenario.soil is None or scenario.soil.depth_measured == "vertical":
        return CONVENTIONS
    return CONVENTIONS | {"depth": "soil thickness H measured normal to the slope "
                                   "([soil] depth_measured = \"slope_normal\"); every model "
                                   "uses the vertical depth z = H / cos(slope) of each cell"}


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _environment_record() -> dict:
    import platform
    from importlib import metadata

    rec = {"python": platform.python_version()}
    for dist in ("numpy", "numba", "scipy", "rasterio", "matplotlib", "jinja2"):
        try:
            rec[dist] = metadata.version(dist)
        except metadata.PackageNotFoundError:  # pragma: no cover - every one is a dependency
            rec[dist] = "not installed"
    return rec


def run_record(not_run) -> dict:
    """Manifest fields beyond the contract: stages that did not run, software versions."""
    return {"not_run": list(not_run), "environment": _environment_record()}


def inputs_sha256(scenario: Scenario) -> dict:
    """SHA-256 of every input file, keyed by its path relative to the output folder."""
    inputs = {}
    for p in scenario.input_files():
        try:
            rel = os.path.relpath(p, scenario.output)
        except ValueError:  # another drive on Windows
            rel = str(p)
        inputs[rel] = _sha256(p)
    return inputs


def manifest(scenario: Scenario, grid: Grid, products, timings, started, inputs=None) -> dict:
    """The manifest of a run (``inputs``: :func:`inputs_sha256`, computed once per run)."""
    if inputs is None:
        inputs = inputs_sha256(scenario)
    return {
        "tool": "slopescreen",
        "version": __version__,
        "scenario_sha256": scenario.sha256,
        "created": started.isoformat(timespec="seconds"),
        "title": scenario.title,
        "products": [p.as_dict() for p in products],
        "cautions": list(run_cautions(scenario)),
        "inputs_sha256": inputs,
        "grid": {"rows": grid.shape[0], "cols": grid.shape[1], "dx_m": grid.dx_m,
                 "dy_m": grid.dy_m, "crs": grid.crs.to_string(),
                 "valid_cells": int(grid.valid.sum())},
        "routing": {"method": scenario.routing.method,
                    "mfd_exponent": scenario.routing.mfd_exponent
                    if scenario.routing.method == "mfd" else None},
        "conventions": _conventions(scenario),
        "soil": _soil_record(scenario),
        "rain": [{k: v for k, v in vars(r).items() if v is not None} for r in scenario.rain],
        "uncertainty": _uncertainty_record(scenario),
        "runout_settings": _runout_record(scenario),
        "corridor": _corridor_record(scenario),
        "clusters_settings": None if scenario.clusters is None else dict(vars(scenario.clusters)),
        "project": None if scenario.project is None else scenario.project.record(),
        "stage_seconds": timings,
    }


def _runout_record(scenario) -> dict | None:
    """The runout options the run used (``[runout]``, or its defaults under a ``[corridor]``)."""
    from .runout_stage import effective_runout

    r = effective_runout(scenario)
    return None if r is None else dict(vars(r))


def _corridor_record(scenario) -> dict | None:
    """The ``[corridor]`` settings, files by name."""
    c = scenario.corridor
    if c is None:
        return None
    return {k: (v.name if isinstance(v, Path) else v) for k, v in vars(c).items()}


def _uncertainty_record(scenario) -> dict | None:
    unc = effective_uncertainty(scenario)
    return None if unc is None else dict(vars(unc))


def _parameter_record(p) -> dict | float | None:
    if p is None:
        return None
    if p.is_fixed:
        return p.central()
    names = {"uniform": ("low", "high"), "normal": ("mean", "sd"),
             "lognormal": ("median", "sd_of_log")}[p.kind]
    rec = {"distribution": p.kind, names[0]: p.a, names[1]: p.b}
    if p.kind != "uniform":
        rec["truncated_to"] = [v if np.isfinite(v) else None for v in (p.low, p.high)]
    return rec


def _soil_record(scenario: Scenario):
    if scenario.soil is None:
        return None
    from ..scenario import SOIL_PROPERTIES

    units = []
    for code in sorted(scenario.soil.units):
        u = scenario.soil.units[code]
        units.append({"code": code, "label": u.label}
                     | {k: _parameter_record(getattr(u, k)) for k in SOIL_PROPERTIES})
    return {"map": None if scenario.soil.map is None else scenario.soil.map.name,
            "depth_measured": scenario.soil.depth_measured,
            "min_failure_depth_m": scenario.soil.min_failure_depth_m, "units": units}
