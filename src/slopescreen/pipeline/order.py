"""The one place that knows the order of the stages: :func:`run` and what it plans."""

from __future__ import annotations

import datetime as _dt
import logging
import shutil
import uuid

from .. import __version__
from ..scenario import Scenario
from .inputs import RunResult, read_inputs
from .records import _manifest, _run_record
from .report_stage import _report
from .stability_stage import _stability, _varies
from .staging import _commit, _Stages, _Writer
from .terrain_stage import _terrain

log = logging.getLogger("slopescreen.pipeline")


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
