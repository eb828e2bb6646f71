"""The maps (PNG) and the self-contained HTML report of a run.

The maps are drawn from the writer's copies of the mapped products at the
display stride, so no product is read back for a map; the report reads a
full product back (float32, one at a time) only where it sums areas.
"""

from __future__ import annotations

import numpy as np

from .results import MapsResult, ReportResult, Written


def _reader(written: Written, *, previews: bool):
    """``read(entry)``: the writer's map copy, or the product read back (the last one kept)."""
    from ..grid import read_band

    cache: dict[str, np.ndarray] = {}

    def read(entry) -> np.ndarray:
        if previews:
            return written.previews[(entry["key"], entry.get("rain"))]
        path = entry["path"]
        if path not in cache:
            cache.clear()  # large grids: hold one product at a time
            cache[path] = read_band(written.staging / path)
        return cache[path]

    return read


def maps_stage(scenario, inputs, written: Written) -> MapsResult:
    """One map per product whose registry entry has a style."""
    from ..report import html, maps
    from ..scenario import slugify

    rain_records = [{k: v for k, v in vars(r).items() if v is not None} for r in scenario.rain]
    rain_texts = {r["name"]: html.rain_text(r) for r in rain_records}
    cases = {r.name: r for r in scenario.rain}
    marks = [(r.steady_mm_per_day, f"{r.name}: {r.steady_mm_per_day:g} mm/day")
             for r in scenario.rain if not r.is_storm]
    out = []
    for shown, png in maps.product_maps(written.entries(), _reader(written, previews=True),
                                        z=inputs.z, grid=inputs.grid, title=scenario.title,
                                        rain_texts=rain_texts, marks=marks):
        rain = shown.get("rain")
        name = f"map_{shown['key']}" + (f"_{slugify(rain)}" if rain else "") + ".png"
        out.append((shown, name, png, cases.get(rain), shown["units"]))
    return MapsResult(tuple(out))


def report_stage(scenario, inputs, written: Written, manifest: dict, maps: MapsResult, slope,
                 soil=None, clusters=None) -> ReportResult:
    """The self-contained report: maps embedded, every parameter, the cautions."""
    from ..report import html

    by_path = {p.path: p.as_dict() for p in written.products}
    images = [html.MapImage(entry=by_path[name], shows=shown, png=png)
              for shown, name, png, _rain, _units in maps.maps]
    ctx = html.ReportContext(
        manifest=manifest, read=_reader(written, previews=False),
        cell_area_m2=inputs.grid.cell_area_m2, slope_deg=slope.slope_deg,
        aspect_deg=slope.aspect_deg,
        unit_index=None if soil is None else soil.index_array(),
        unit_labels=[] if soil is None else soil.labels, maps=images,
        tables={"clusters": [] if clusters is None else list(clusters.records),
                "size_resolved": [] if clusters is None else list(clusters.size_records)})
    return ReportResult(html.render_report(ctx).encode("utf-8"))
