"""Maps (PNG) and the self-contained HTML report of a run, written into the staging folder."""

from __future__ import annotations

import numpy as np

from ..scenario import Scenario
from .inputs import Inputs, unit_index_map
from .records import _manifest, _run_record
from .staging import _Writer


def _report(scenario: Scenario, inputs: Inputs, slope_deg, w: _Writer, stages, started,
            not_run) -> None:
    """Maps of the products (PNG) and the self-contained report (HTML), into the staging folder."""
    from ..grid import read_back
    from ..report import html, maps
    from ..scenario import slugify
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
