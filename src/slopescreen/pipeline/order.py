"""The one place that knows the order of the stages.

:func:`plan` lists the stages a scenario asks for, in order, each with the
results it reads; :func:`run` runs them one way: each stage takes the
results it names and returns a frozen result, whose products the writer
writes at once. A result is let go as soon as no later stage reads it. The
progress bar (:func:`planned_stages`) and the report's notes on configured
stages that did not run (:func:`stages_not_run`) are derived from the plan.

Products are written into a hidden staging folder inside the output folder
and committed as a whole only when every stage has succeeded
(:mod:`slopescreen.pipeline.commit`: a journal, the manifest last, the
earlier run's unreplaced products removed when unchanged), under a lock
held for the whole run: a failed run leaves no half-written product, and
the inputs are only ever read.
"""

from __future__ import annotations

import datetime as _dt
import logging
import shutil
import uuid
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Callable

from .. import __version__
from ..scenario import Scenario
from .clusters_stage import cluster_layers_stage, clusters_stage
from .figures_stage import case_figures_stage, recharge_figures_stage, terrain_figures_stage
from .inputs import RunResult, read_inputs
from .records import inputs_sha256
from .records import manifest as manifest_of
from .records import run_record
from .corridor_stage import corridor_layers_stage, corridor_stage
from .inventory_stage import inventory_case_stage, inventory_recharge_stage, inventory_scores_stage
from .report_stage import explorer_soil_stage, maps_stage, report_stage, summary_stage
from .runout_stage import effective_runout, runout_layers_stage, runout_stage
from .stability_stage import (
    effective_uncertainty, probability_stage, recharge_stage, soil_cells_stage, soil_fields_stage,
    stability_stage,
)
from .commit import STAGING_PREFIX, commit, output_lock, recover
from .staging import _release_memory, _Stages, _Writer
from .terrain_stage import conditioning_stage, routing_stage, slope_stage

log = logging.getLogger("slopescreen.pipeline")

WRITTEN = ("written",)
"""A stage input that is what the writer has written so far (not a stage result)."""
MANIFEST = ("manifest",)
"""A stage input that is the manifest of the run so far (not a stage result)."""


@dataclass(frozen=True)
class Many:
    """A stage input that is a tuple of several earlier results."""

    keys: tuple


@dataclass(frozen=True)
class Stage:
    """One stage of a run.

    Attributes
    ----------
    name : str
        What the progress bar and the provenance table show.
    key : tuple
        Name of its result, for the stages that read it.
    fn : callable
        ``fn(scenario, inputs, **needs, [case=...]) -> result``.
    needs : mapping
        Keyword of ``fn`` -> key of an earlier result (or :class:`Many`).
    case : RainCase or None
        The rain case of a per-rain stage (passed as ``case=``).
    section : str or None
        Optional scenario section the stage belongs to.
    show : bool
        Shown on the progress bar.
    """

    name: str
    key: tuple
    fn: Callable
    needs: MappingProxyType = field(default_factory=lambda: MappingProxyType({}))
    case: object = None
    section: str | None = None
    show: bool = True


def _stage(name, key, fn, needs=None, **kw) -> Stage:
    return Stage(name, key, fn, MappingProxyType(dict(needs or {})), **kw)


OPTIONAL_SECTIONS = ("clusters", "runout", "corridor", "inventory")
"""Optional scenario sections that turn a stage on, in report order."""

BUILT_SECTIONS = ("clusters", "runout", "corridor", "inventory")
"""Optional sections whose stage exists in this version."""


def plan(scenario: Scenario) -> tuple[Stage, ...]:
    """The stages a run of ``scenario`` runs, in order, with what each reads."""
    slope, soil = ("slope",), ("soil",)
    stages = [
        _stage("conditioning", ("conditioned",), conditioning_stage),
        _stage("routing", ("routing",), routing_stage, {"conditioned": ("conditioned",)}),
        _stage("slope", slope, slope_stage),
    ]
    stages.append(_stage("terrain figures", ("terrain figures",), terrain_figures_stage,
                         {"slope": slope, "routing": ("routing",)}, show=False))
    report_needs = {"written": WRITTEN, "manifest": MANIFEST, "maps": ("maps",),
                    "terrain": ("terrain figures",)}
    if scenario.soil is not None:
        fields = ("soil fields",)
        stages += [
            _stage("soil units", fields, soil_fields_stage, show=False),
            _stage("soil cells", soil, soil_cells_stage,
                   {"soil": fields, "slope": slope, "routing": ("routing",)}, show=False),
            _stage("explorer soil units", ("explorer soil",), explorer_soil_stage,
                   {"soil": fields}, show=False),
            _stage("critical recharge", ("recharge",), recharge_stage, {"cells": soil}),
            _stage("recharge figures", ("recharge figures",), recharge_figures_stage,
                   {"recharge": ("recharge",)}, show=False),
        ]
        report_needs["recharge"] = ("recharge figures",)
        report_needs["explorer"] = ("explorer soil",)
        scores = []
        if scenario.inventory is not None:
            scores.append(("inventory", "critical recharge"))
            stages.append(_stage("inventory: critical recharge", scores[0],
                                 inventory_recharge_stage, {"recharge": ("recharge",)},
                                 section="inventory", show=False))
        sampled = effective_uncertainty(scenario) is not None
        earlier, figures = [], []
        reach = effective_runout(scenario) is not None
        runs, corridors = [], []
        for case in scenario.rain:
            stability = ("stability", case.name)
            stages.append(_stage(f"stability: {case.name}", stability, stability_stage,
                                 {"cells": soil}, case=case))
            if scenario.clusters is not None:
                key = ("clusters", case.name)
                stages.append(_stage(f"clusters: {case.name}", key, clusters_stage,
                                     {"cells": soil, "slope": slope, "stability": stability,
                                      "earlier": Many(tuple(earlier))},
                                     case=case, section="clusters"))
                earlier.append(key)
            case_needs = {"stability": stability, "slope": slope, "soil": fields}
            if sampled:
                stages.append(_stage(f"probability of failure: {case.name}",
                                     ("probability", case.name), probability_stage,
                                     {"cells": soil}, case=case))
                case_needs["probability"] = ("probability", case.name)
            if scenario.inventory is not None:
                stages.append(_case_inventory_stage(scenario, case, sampled, scores))
            stages.append(_stage(f"figures: {case.name}", ("figures", case.name),
                                 case_figures_stage, case_needs, case=case, show=False))
            figures.append(("figures", case.name))
            if reach:
                stages += _case_reach_stages(scenario, case, sampled, runs, corridors)
        report_needs["cases"] = Many(tuple(figures))
        if scenario.clusters is not None:
            stages.append(_stage("write clusters", ("cluster layers",), cluster_layers_stage,
                                 {"cases": Many(tuple(earlier))}, section="clusters"))
            report_needs["clusters"] = ("cluster layers",)
        if reach:
            stages += _reach_layer_stages(scenario, runs, corridors, report_needs)
        if scores:
            stages.append(_stage("write inventory scores", ("inventory scores",),
                                 inventory_scores_stage, {"cases": Many(tuple(scores))},
                                 section="inventory", show=False))
            report_needs["inventory"] = ("inventory scores",)
    if scenario.soil is not None:
        stages.append(_stage("summary", ("summary",), summary_stage,
                             {k: v for k, v in report_needs.items()
                              if k in ("manifest", "cases", "clusters", "corridor")},
                             show=False))
    map_needs = {"written": WRITTEN}
    if scenario.clusters is not None and scenario.rain:
        map_needs["clusters"] = Many(tuple(("clusters", c.name) for c in scenario.rain))
    if "runout" in report_needs:
        map_needs["runout"] = report_needs["runout"]
    stages += [_stage("maps", ("maps",), maps_stage, map_needs),
               _stage("report", ("report",), report_stage, report_needs)]
    return tuple(stages)


def _case_inventory_stage(scenario: Scenario, case, sampled: bool, scores: list) -> Stage:
    """The products of one rain case scored against the mapped landslides."""
    needs = {"stability": ("stability", case.name)}
    if sampled:
        needs["probability"] = ("probability", case.name)
    if scenario.clusters is not None:
        needs["clusters"] = ("clusters", case.name)
    key = ("inventory", case.name)
    scores.append(key)
    return _stage(f"inventory: {case.name}", key, inventory_case_stage, needs, case=case,
                  section="inventory")


def _case_reach_stages(scenario: Scenario, case, sampled: bool, runs: list,
                       corridors: list) -> list[Stage]:
    """Runout of one rain case and its corridor rows (right after the case's stability)."""
    needs = {"conditioned": ("conditioned",), "cells": ("soil",), "slope": ("slope",),
             "stability": ("stability", case.name), "earlier": Many(tuple(runs))}
    if sampled:
        needs["probability"] = ("probability", case.name)
    if scenario.clusters is not None:
        needs["clusters"] = ("clusters", case.name)
    key = ("runout", case.name)
    out = [_stage(f"runout: {case.name}", key, runout_stage, needs, case=case,
                  section=_runout_section(scenario))]
    runs.append(key)
    if scenario.corridor is not None:
        cneeds = {"runout": key, "stability": ("stability", case.name),
                  "recharge": ("recharge",)}
        if sampled:
            cneeds["probability"] = ("probability", case.name)
        ckey = ("corridor", case.name)
        out.append(_stage(f"corridor: {case.name}", ckey, corridor_stage, cneeds, case=case,
                          section="corridor", show=False))
        corridors.append(ckey)
    return out


def _runout_section(scenario: Scenario) -> str:
    """The section a runout stage belongs to (``[corridor]`` alone also asks for reach)."""
    return "runout" if scenario.runout is not None else "corridor"


def _reach_layer_stages(scenario: Scenario, runs, corridors, report_needs: dict) -> list[Stage]:
    """The runout paths and the corridor table of every rain case, each one product."""
    out = [_stage("write runout paths", ("runout layers",), runout_layers_stage,
                  {"cases": Many(tuple(runs))}, section=_runout_section(scenario), show=False)]
    report_needs["runout"] = ("runout layers",)
    if scenario.corridor is not None:
        out.append(_stage("write corridor table", ("corridor layers",), corridor_layers_stage,
                          {"cases": Many(tuple(corridors))}, section="corridor", show=False))
        report_needs["corridor"] = ("corridor layers",)
    return out


def planned_stages(scenario: Scenario) -> list[str]:
    """Names of the stages a run of ``scenario`` shows, in order (for progress bars)."""
    return [s.name for s in plan(scenario) if s.show]


def stages_not_run(scenario: Scenario) -> list[dict]:
    """Configured optional sections with no stage in the plan, and why.

    Returns
    -------
    list of dict
        ``{"section": name, "reason": text}``.
    """
    planned = {s.section for s in plan(scenario)}
    out = []
    for section in OPTIONAL_SECTIONS:
        if getattr(scenario, section, None) is None or section in planned:
            continue
        if section not in BUILT_SECTIONS:
            reason = f"the {section} stage is not built in slopescreen {__version__}"
        else:
            reason = f"the {section} stage needs a [soil] section and at least one [[rain]] case"
        out.append({"section": section, "reason": reason})
    return out


def _last_uses(stages) -> dict:
    """Index of the last stage that reads each result."""
    last = {}
    for i, s in enumerate(stages):
        for need in s.needs.values():
            for key in (need.keys if isinstance(need, Many) else (need,)):
                last[key] = i
    return last


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
        ``output(folder)`` method, when it has one, just before, once the
        output folder's lock is held; an ``end()`` method is called when the
        run finishes or fails.

    Returns
    -------
    RunResult

    Raises
    ------
    InputError
        Bad input; nothing is written.
    """
    timer = _Stages(progress)
    started = _dt.datetime.now(_dt.timezone.utc)
    with timer.stage("read inputs", show=False):  # silent: bad input must print one line only
        inputs = read_inputs(scenario)
    _release_memory()
    stages = plan(scenario)
    not_run = stages_not_run(scenario)
    out = scenario.output
    out.mkdir(parents=True, exist_ok=True)
    protected = {p.resolve() for p in scenario.input_files()}
    with output_lock(out, scenario.path.name):
        recover(out, protected=protected)
        _progress_call(progress, "output", out)
        return _run_locked(scenario, inputs, stages, not_run, timer, started, progress,
                           protected)


def _run_locked(scenario, inputs, stages, not_run, timer, started, progress,
                protected) -> RunResult:
    """The stages and the commit of a run, with the output folder's lock held."""
    from ..report.explorer import block_factor
    from ..report.maps import display_step

    grid = inputs.grid
    out = scenario.output
    staging = out / f"{STAGING_PREFIX}{uuid.uuid4().hex[:8]}"
    staging.mkdir()
    _progress_call(progress, "begin", [s.name for s in stages if s.show])
    for item in not_run:
        log.warning("[%s] is configured, but %s; skipped (the report says so)",
                    item["section"], item["reason"])
    writer = None
    try:
        writer = _Writer(staging, grid, preview_step=display_step(grid.shape),
                         explorer_step=block_factor(grid.shape))
        last = _last_uses(stages)
        results: dict = {}

        hashes = inputs_sha256(scenario)
        records: dict = {}

        def manifest_now() -> dict:
            return (manifest_of(scenario, grid, writer.products, timer.timings, started, hashes)
                    | run_record(not_run) | {k: list(v) for k, v in records.items()})

        def value(need):
            if need == WRITTEN:
                return writer.snapshot()
            if need == MANIFEST:
                return manifest_now()
            if isinstance(need, Many):
                return tuple(results[k] for k in need.keys)
            return results[need]

        for i, st in enumerate(stages):
            kwargs = {name: value(need) for name, need in st.needs.items()}
            if st.case is not None:
                kwargs["case"] = st.case
            with timer.stage(st.name, show=st.show):
                result = st.fn(scenario, inputs, **kwargs)
            with timer.stage("write products", show=False):
                for emit in result.products():
                    writer.write(emit)
            if hasattr(result, "manifest_record"):
                key, record = result.manifest_record()
                records.setdefault(key, []).append(record)
            if last.get(st.key, -1) > i:
                results[st.key] = result.kept() if hasattr(result, "kept") else result
            del result
            for key in [k for k in results if last.get(k, -1) <= i]:
                del results[key]
            _release_memory()
        with timer.stage("write products", show=False):
            writer.finish()
        manifest = commit(staging, out, writer.products, manifest_now(), protected=protected)
    finally:
        if writer is not None:
            writer.close()
        shutil.rmtree(staging, ignore_errors=True)
        _progress_call(progress, "end")
    return RunResult(output=out, manifest=manifest, products=writer.products,
                     timings_s=dict(timer.timings))


def _progress_call(progress, method, *args) -> None:
    fn = getattr(progress, method, None)
    if callable(fn):
        fn(*args)
