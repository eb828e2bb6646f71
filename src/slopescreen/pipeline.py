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
    area_m2: np.ndarray | None = None  # upslope area, filled in by the routing stage
    aspect_deg: np.ndarray | None = None  # downslope azimuth, filled in by the slope stage


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
        self.cluster_records: list[dict] = []  # attribute rows of clusters.gpkg, for the report
        self.size_records: list[dict] = []

    def raster(self, key, array, *, units, description, rain=None, name=None, tags=None):
        name = name or (f"{key}_{rain.slug}.tif" if rain is not None else f"{key}.tif")
        write_raster(self.staging / name, array, self.grid, description=description, units=units,
                     caution=SHORT, tags=tags)
        self.products.append(Product(key=key, path=name, kind="raster", units=units,
                                     rain=None if rain is None else rain.name))

    def file(self, key, name, *, kind, units, rain=None):
        self.products.append(Product(key=key, path=name, kind=kind, units=units, rain=rain))

    def blob(self, key, name, data: bytes, *, kind, units, rain=None):
        """Write a non-raster product (PNG map, HTML report) into the staging folder."""
        (self.staging / name).write_bytes(data)
        self.file(key, name, kind=kind, units=units, rain=rain)


def _terrain(z, grid, scenario, stages, inputs):
    from .routing import flow_accumulation
    from .terrain import fill_depressions, slope_aspect

    with stages.stage("slope"):
        slope_deg, inputs.aspect_deg = slope_aspect(z, grid.dx_m, grid.dy_m)
    with stages.stage("conditioning"):
        filled = fill_depressions(z)
    with stages.stage("routing"):
        flow = flow_accumulation(filled, grid.dx_m, grid.dy_m, method=scenario.routing.method,
                                 mfd_exponent=scenario.routing.mfd_exponent)
    del filled
    with np.errstate(invalid="ignore", divide="ignore"):
        sca = (flow.area_m2 / flow.width_m).astype(np.float32)
    inputs.area_m2 = flow.area_m2.astype(np.float32)
    return slope_deg, sca


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
    from .probability import PARAMETER_ORDER

    maps = {}
    for key in PARAMETER_ORDER:
        values = np.array([np.nan if getattr(u, key) is None else getattr(u, key).central()
                           for u in units] + [np.nan], dtype=np.float64)
        maps[key] = values[index].astype(np.float32)  # index -1 picks the NaN at the end
    return maps


def _rain_model(case):
    from .hydrology import SteadyRain, StormRain

    if case.is_storm:
        return StormRain(case.storm_mm_per_h, case.duration_h, case.water_table_depth_m)
    return SteadyRain(case.steady_mm_per_day)


def _varies(units) -> bool:
    from .probability import PARAMETER_ORDER

    return any(getattr(u, k) is not None and not getattr(u, k).is_fixed
               for u in units for k in PARAMETER_ORDER)


STORM_FLAGS = {1: "pressure head reached its cap (saturated to the surface)",
               2: "rain intensity exceeded the saturated conductivity; the excess ran off",
               4: "least FS comes late compared with A/D0: the short-time model is doubtful"}
"""Bits of the ``storm_flags`` band."""


def _stability(scenario: Scenario, inputs: Inputs, slope_deg, sca, w: "_Writer", stages) -> None:
    """Wetness, factor of safety, critical recharge and probability of failure per rain case."""
    from .hydrology import steady_wetness, storm_minimum, storm_pressure_head
    from .probability import encode_table, failure_probability, fosm_reliability
    from .stability import CLASS_LABELS, FS_CAP, critical_recharge, factor_of_safety

    index, units = unit_index_map(scenario, inputs)
    has_unit = index >= 0
    slope = np.where(has_unit, slope_deg, np.nan).astype(np.float32)
    a = np.where(has_unit, sca, np.nan).astype(np.float32)
    m = _central_maps(index, units)
    strength = dict(cohesion_kpa=m["cohesion_kpa"], root_cohesion_kpa=m["root_cohesion_kpa"],
                    friction_deg=m["friction_deg"], unit_weight_kn_m3=m["unit_weight_kn_m3"])
    fs_tags = {"FS_CAP": f"{FS_CAP:g} means at least {FS_CAP:g} (and flat ground)",
               "PARAMETERS": "median of each soil-property distribution"}
    with stages.stage("critical recharge"):
        q_cr, klass = critical_recharge(slope, a, depth_m=m["depth_m"],
                                        conductivity_m_per_day=m["conductivity_m_per_day"],
                                        **strength)
        w.raster("critical_recharge", q_cr, units="mm/day",
                 description="Critical steady recharge for FS = 1 (Montgomery-Dietrich), mm/day; "
                             "nodata where the class band says no rate applies")
        w.raster("critical_recharge_class", klass.astype(np.uint8), units="class",
                 description="Stability class of the critical-recharge balance",
                 tags={f"CLASS_{k}": v for k, v in CLASS_LABELS.items()})
    table = encode_table([{k: getattr(u, k) for k in _table_keys(u)} for u in units])
    unc = scenario.uncertainty
    collector = None if scenario.clusters is None else _ClusterCollector(inputs.grid)
    for case in scenario.rain:
        rain = _rain_model(case)
        with stages.stage(f"stability: {case.name}"):
            if not case.is_storm:
                wet = steady_wetness(a, slope, recharge_mm_per_day=case.steady_mm_per_day,
                                     conductivity_m_per_day=m["conductivity_m_per_day"],
                                     depth_m=m["depth_m"])
                fs = factor_of_safety(slope, m["depth_m"], wet, **strength)
            else:
                hydro = dict(water_table_depth_m=case.water_table_depth_m,
                             intensity_m_per_s=case.storm_mm_per_h / 3.6e6,
                             conductivity_m_per_s=m["conductivity_m_per_day"] / 86400.0,
                             diffusivity_m2_per_s=m["diffusivity_m2_per_s"],
                             duration_s=case.duration_h * 3600.0)
                least = storm_minimum(slope, soil_depth_m=m["depth_m"],
                                      contributing_area_m2=np.where(has_unit, inputs.area_m2, np.nan),
                                      **hydro, **strength)
                fs = least.fs
                psi = storm_pressure_head(least.depth_m, least.time_s, slope_deg=slope, **hydro)
                cos2 = np.cos(np.radians(slope.astype(np.float64))) ** 2
                with np.errstate(invalid="ignore", divide="ignore"):
                    wet = np.clip(psi / (least.depth_m * cos2), 0.0, 1.0).astype(np.float32)
                flags = (least.cap_bound * 1 + least.runoff * 2
                         + least.short_time_doubtful * 4).astype(np.uint8)
                w.raster("storm_failure_depth", least.depth_m, units="m", rain=case,
                         description="Vertical depth of the least storm FS, m")
                w.raster("storm_failure_time", least.time_s / 3600.0, units="h", rain=case,
                         description="Time of the least storm FS since the storm began, h")
                w.raster("storm_flags", np.where(has_unit, flags + 8, 0).astype(np.uint8),
                         units="bit flags", rain=case,
                         description="Where the storm model's limits bind (bits; 8 = computed)",
                         tags={f"BIT_{k}": v for k, v in STORM_FLAGS.items()} | {"BIT_8": "computed"})
            w.raster("wetness", wet, units="1", rain=case,
                     description="Wetness h_w/z (saturated fraction of the soil column)")
            w.raster("factor_of_safety", fs, units="1", rain=case, tags=fs_tags,
                     description="Infinite-slope factor of safety (median parameters)")
        if collector is not None:
            depth = least.depth_m if case.is_storm else m["depth_m"]
            sampled = unc is not None or _varies(units)
            cluster_unc = None if not sampled else dict(
                unit_index=index, table=table,
                lateral_root_cohesion_kpa=[u.lateral_root_cohesion_kpa for u in units],
                samples=(unc or _default_uncertainty()).samples,
                seed=(unc or _default_uncertainty()).seed,
                rain=rain, sca_m=None if case.is_storm else a)
            with stages.stage(f"clusters: {case.name}"):
                _clusters_for_case(scenario, inputs, case, slope, depth, wet, m, index, units,
                                   w, collector, cluster_unc)
        if unc is None and not _varies(units):
            continue
        unc = unc or _default_uncertainty()
        with stages.stage(f"probability of failure: {case.name}"):
            if unc.method == "fosm":
                p_f = fosm_reliability(slope, a, index, table, rain).p_f
                how = "first-order second-moment (FOSM), FS taken as normal"
            else:
                p_f, _se = failure_probability(slope, a, index, table, rain, samples=unc.samples,
                                               seed=unc.seed, correlation=unc.correlation)
                how = (f"Monte Carlo, {unc.samples} samples, seed {unc.seed}, "
                       f"independent draws per {unc.correlation}")
            w.raster("failure_probability", p_f, units="1", rain=case,
                     description="Probability that FS < 1 given the parameter distributions",
                     tags={"METHOD": how})
    if collector is not None:
        with stages.stage("write clusters"):
            collector.write(w)


CLUSTER_FIELDS = ("id", "rain", "fs", "failure_probability", "area_m2", "volume_m3",
                  "mean_depth_m", "length_m", "width_m", "n_cells", "min_cell_fs", "lower_bound",
                  "proven", "in_area_band")
"""Attributes of the ``clusters`` layer, in order (units in the names; fs is dimensionless)."""

SIZE_FIELDS = ("id", "rain", "band_min_m2", "band_max_m2", "fs", "failure_probability",
               "lower_bound", "relaxation_bound", "heuristic_fs", "proven", "method", "area_m2",
               "volume_m3", "mean_depth_m", "length_m", "width_m", "n_cells", "min_cell_fs",
               "seconds")
"""Attributes of the ``size_resolved`` layer: the least-stable cluster per window and area band."""

_TABLE_NAMES = {"failure_probability": "probability"}


class _ClusterCollector:
    """Gathers the failing clusters of every rain case into one GeoPackage layer."""

    def __init__(self, grid: Grid):
        self.grid = grid
        self.polygons: dict = {}
        self.records: list[dict] = []
        self.next_id = 1
        self.size_polygons: dict = {}
        self.size_records: list[dict] = []

    @staticmethod
    def _row(table, i, fields) -> dict:
        row = {}
        for key in fields:
            value = table[_TABLE_NAMES.get(key, key)][i]
            if key in ("n_cells",):
                row[key] = int(value)
            elif key in ("proven", "in_area_band"):
                row[key] = bool(value)
            elif key == "method":
                row[key] = str(value)
            else:
                row[key] = float(value)
        return row

    def add_sizes(self, case_name: str, sizes) -> None:
        """Add the size-resolved answers of one case (rows with a cluster only)."""
        from .vectors import label_polygons

        for i, mask in enumerate(sizes.masks):
            if not mask.any():
                continue
            new_id = len(self.size_records) + 1
            grid_mask = sizes.grid_mask(i, self.grid.shape)
            self.size_polygons[new_id] = label_polygons(grid_mask.astype(np.int32), self.grid)[1]
            self.size_records.append({"id": new_id, "rain": case_name}
                                     | self._row(sizes.table, i, SIZE_FIELDS[2:]))

    def add(self, case_name: str, result) -> np.ndarray:
        """Add one case's clusters; return its label raster with layer-wide ids."""
        from .vectors import label_polygons

        table = result.table
        n = len(table["id"])
        offset = self.next_id - 1
        labels = np.where(result.labels > 0, result.labels + offset, 0).astype(np.int32)
        if n == 0:
            return labels
        polys = label_polygons(labels, self.grid)
        for i in range(n):
            new_id = int(table["id"][i]) + offset
            self.records.append({"id": new_id, "rain": case_name}
                                | self._row(table, i, CLUSTER_FIELDS[2:]))
            self.polygons[new_id] = polys[new_id]
        self.next_id += n
        return labels

    def write(self, w: "_Writer") -> None:
        from .vectors import write_polygons

        name = "clusters.gpkg"
        write_polygons(w.staging / name, self.polygons, self.records, self.grid, layer="clusters",
                       caution=SHORT, metadata={"FIELDS": ", ".join(CLUSTER_FIELDS)})
        if self.size_records:
            write_polygons(w.staging / name, self.size_polygons, self.size_records, self.grid,
                           layer="size_resolved", caution=SHORT, add_layer=True,
                           metadata={"FIELDS": ", ".join(SIZE_FIELDS)})
        w.file("clusters", name, kind="vector", units="attributes carry their units in their names")
        w.cluster_records = list(self.records)
        w.size_records = list(self.size_records)


def _clusters_for_case(scenario, inputs, case, slope, depth, wet, m, index, units, w, collector,
                       uncertainty=None):
    """Failing multi-cell clusters of one rain case, and the cluster FS bound raster."""
    from .clusters import failure_clusters

    lateral = np.array([u.lateral_root_cohesion_kpa.central() for u in units] + [np.nan],
                       dtype=np.float64)[index].astype(np.float32)
    c = scenario.clusters
    grid = inputs.grid
    result = failure_clusters(
        slope, depth, wet, dx=grid.dx_m, dy=grid.dy_m, aspect_deg=inputs.aspect_deg,
        cohesion_kpa=m["cohesion_kpa"], root_cohesion_kpa=m["root_cohesion_kpa"],
        lateral_root_cohesion_kpa=lateral, friction_deg=m["friction_deg"],
        unit_weight_kn_m3=m["unit_weight_kn_m3"], passive_fraction=c.passive_fraction,
        min_area_m2=c.min_area_m2, max_area_m2=c.max_area_m2,
        size_resolved=c.size_windows > 0, size_bands=c.size_bands,
        size_time_limit_s=c.size_time_limit_s, size_max_clusters=c.size_windows,
        size_n_least=min(2, c.size_windows), uncertainty=uncertainty)
    labels = collector.add(case.name, result)
    if result.size_resolved is not None:
        collector.add_sizes(case.name, result.size_resolved)
    extent = result.bound_extent_cells
    w.raster("cluster_fs_bound", result.cluster_fs_bound, units="1", rain=case,
             description=f"Proven lower bound on the FS of any cluster up to {extent} x {extent} "
                         "cells that holds the cell",
             tags={"EXTENT_CELLS": str(extent), "MEANING": "at least 1: no such cluster can fail"})
    w.raster("cluster_labels", labels.astype(np.float32), units="id", rain=case,
             description="Id of the failing cluster holding the cell (0 = none); see clusters.gpkg")


def _table_keys(unit):
    from .probability import PARAMETER_ORDER

    return [k for k in PARAMETER_ORDER if getattr(unit, k) is not None]


def _effective_uncertainty(scenario: Scenario) -> dict | None:
    """The probability settings a run used (defaults when only distributions ask for it)."""
    if scenario.uncertainty is not None:
        return vars(scenario.uncertainty)
    if scenario.soil is not None and _varies(list(scenario.soil.units.values())):
        return vars(_default_uncertainty())
    return None


def _default_uncertainty():
    from .scenario import Uncertainty

    return Uncertainty()


def run(scenario: Scenario, *, progress=None) -> RunResult:
    """Run every stage the scenario asks for and write its products.

    Parameters
    ----------
    scenario : Scenario
        A validated scenario (:func:`slopescreen.scenario.load_scenario`).
    progress : callable, optional
        Called with the name of each stage as it starts. If it also has a
        ``begin(stage_names)`` method, that is called once the inputs have
        been read (never on bad input), with :func:`planned_stages`; an
        ``end()`` method is called when the run finishes or fails.

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
    _progress_call(progress, "begin", planned_stages(scenario))
    try:
        w = _Writer(staging, grid)
        slope_deg, sca = _terrain(z, grid, scenario, stages, inputs)
        with stages.stage("write terrain products"):
            w.raster("slope", slope_deg, units="degrees",
                     description="Slope of the original DEM (Horn 1981), degrees")
            w.raster("specific_catchment_area", sca, units="m",
                     description=f"Specific catchment area a = A/b, m ({scenario.routing.method})")
        if scenario.soil is not None:
            _stability(scenario, inputs, slope_deg, sca, w, stages)
        not_run = stages_not_run(scenario, w.products)
        for item in not_run:
            log.warning("[%s] is configured, but %s; skipped (the report says so)",
                        item["section"], item["reason"])
        _report(scenario, inputs, slope_deg, w, stages, started, not_run)
        manifest = _manifest(scenario, grid, w.products, stages.timings, started) | _run_record(not_run)
        _commit(staging, out, w.products, manifest,
                protected={p.resolve() for p in scenario.input_files()})
    finally:
        shutil.rmtree(staging, ignore_errors=True)
        _progress_call(progress, "end")
    return RunResult(output=out, manifest=manifest, products=w.products,
                     timings_s=dict(stages.timings))


# ---------------------------------------------------------------------------
# Progress, the record of stages that did not run, maps and the report
# ---------------------------------------------------------------------------

STAGE_PRODUCTS = {
    "clusters": ("cluster_fs_bound", "clusters", "cluster_labels"),
    "corridor": ("corridor_segments",),
    "inventory": ("inventory_scores",),
}
"""Optional scenario sections and the product keys that show their stage ran."""


def planned_stages(scenario: Scenario) -> list[str]:
    """Names of the stages a run of ``scenario`` will show, in order (for progress bars).

    A stage added to :func:`run` adds its name here.
    """
    names = ["slope", "conditioning", "routing", "write terrain products"]
    if scenario.soil is not None:
        units = [scenario.soil.units[c] for c in sorted(scenario.soil.units)]
        sampled = scenario.uncertainty is not None or _varies(units)
        names.append("critical recharge")
        for case in scenario.rain:
            names.append(f"stability: {case.name}")
            if scenario.clusters is not None:
                names.append(f"clusters: {case.name}")
            if sampled:
                names.append(f"probability of failure: {case.name}")
        if scenario.clusters is not None:
            names.append("write clusters")
    return names + ["maps", "report"]


def _progress_call(progress, method, *args) -> None:
    fn = getattr(progress, method, None)
    if callable(fn):
        fn(*args)


def stages_not_run(scenario: Scenario, products) -> list[dict]:
    """Configured optional stages that wrote no product, with the reason.

    Returns
    -------
    list of dict
        ``{"section": name, "reason": text}`` per configured section of
        :data:`STAGE_PRODUCTS` without any of its products.
    """
    keys = {p.key for p in products}
    out = []
    for section, product_keys in STAGE_PRODUCTS.items():
        if getattr(scenario, section, None) is not None and not keys & set(product_keys):
            out.append({"section": section,
                        "reason": f"the {section} stage is not built in slopescreen {__version__}"})
    return out


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


def _run_record(not_run) -> dict:
    """Manifest fields beyond the contract: stages that did not run, software versions."""
    return {"not_run": list(not_run), "environment": _environment_record()}


def _report(scenario: Scenario, inputs: Inputs, slope_deg, w: _Writer, stages, started,
            not_run) -> None:
    """Maps of the products (PNG) and the self-contained report (HTML), into the staging folder."""
    from .grid import read_back
    from .report import html, maps
    from .scenario import slugify
    grid = inputs.grid
    cache: dict[str, np.ndarray] = {}

    def read(entry) -> np.ndarray:
        path = entry["path"]
        if path not in cache:
            if len(cache) >= 3:  # keep a few rasters only: large grids
                cache.pop(next(iter(cache)))
            cache[path] = read_back(w.staging / path)[0].astype(np.float32)
        return cache[path]

    rain_records = [{k: v for k, v in vars(r).items() if v is not None} for r in scenario.rain]
    rain_texts = {r["name"]: html.rain_text(r) for r in rain_records}
    marks = [(r.steady_mm_per_day, f"{r.name}: {r.steady_mm_per_day:g} mm/day")
             for r in scenario.rain if not r.is_storm]
    images = []
    with stages.stage("maps"):
        entries = [p.as_dict() for p in w.products]
        for shown, png in maps.product_maps(entries, read, z=inputs.z, grid=grid, title=scenario.title,
                                            rain_texts=rain_texts, marks=marks):
            rain = shown.get("rain")
            name = f"map_{shown['key']}" + (f"_{slugify(rain)}" if rain else "") + ".png"
            w.blob("map", name, png, kind="png", units=shown["units"], rain=rain)
            images.append(html.MapImage(entry=w.products[-1].as_dict(), shows=shown, png=png))
    with stages.stage("report"):
        manifest = _manifest(scenario, grid, w.products, stages.timings, started) | _run_record(not_run)
        unit_index, unit_labels = None, []
        if scenario.soil is not None:
            unit_index, units = unit_index_map(scenario, inputs)
            unit_labels = [u.label for u in units]
        aspect = inputs.aspect_deg
        ctx = html.ReportContext(manifest=manifest, read=read, cell_area_m2=grid.cell_area_m2,
                                 slope_deg=slope_deg, aspect_deg=aspect, unit_index=unit_index,
                                 unit_labels=unit_labels, maps=images,
                                 tables={"clusters": w.cluster_records,
                                         "size_resolved": w.size_records})
        text = html.render_report(ctx)
        w.blob("report", "report.html", text.encode("utf-8"), kind="html", units="n/a")


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
        "soil": _soil_record(scenario),
        "rain": [{k: v for k, v in vars(r).items() if v is not None} for r in scenario.rain],
        "uncertainty": _effective_uncertainty(scenario),
        "stage_seconds": timings,
    }


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
    from .scenario import SOIL_PROPERTIES

    units = []
    for code in sorted(scenario.soil.units):
        u = scenario.soil.units[code]
        units.append({"code": code, "label": u.label}
                     | {k: _parameter_record(getattr(u, k)) for k in SOIL_PROPERTIES})
    return {"map": None if scenario.soil.map is None else scenario.soil.map.name, "units": units}


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
