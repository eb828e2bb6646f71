"""The maps (PNG) and the self-contained HTML report of a run.

The maps are drawn from the writer's copies of the mapped products at the
display stride, and the report quotes the figures computed while the arrays
were in memory: no product is read back.
"""

from __future__ import annotations

from types import MappingProxyType

from .results import ExplorerExtras, MapsResult, ReportResult, SummaryResult, Written


def _preview_reader(written: Written):
    """``read(entry)``: the writer's copy of a mapped product at the display stride."""
    return lambda entry: written.previews[(entry["key"], entry.get("rain"))]


CENTRELINE = {"label": "road or pipeline centreline", "colour": "#1b1b1b", "width": 2.0}
LANDSLIDE = {"label": "mapped landslide", "colour": "#0b6e4f", "width": 1.0}
REACHING_PATH = {"label": "runout path reaching the corridor", "colour": "#2747a8", "width": 1.1}
"""How the lines drawn on the maps look (colour, width in points) and their legend labels."""


def map_lines(inputs) -> list:
    """The centreline and the outlines of mapped landslides (crosses for points), for every map."""
    import shapely

    out = []
    if inputs.corridor is not None:
        for part in inputs.corridor.line.geoms:
            xy = shapely.get_coordinates(part)
            out.append(CENTRELINE | {"x": xy[:, 0], "y": xy[:, 1]})
    half = 1.5 * max(inputs.grid.dx_m, inputs.grid.dy_m) / inputs.grid.linear_unit_m
    for geom in inputs.landslides:
        for g in getattr(geom, "geoms", [geom]):
            if g.geom_type == "Point":
                for dx, dy in ((half, half), (half, -half)):
                    out.append(LANDSLIDE | {"x": [g.x - dx, g.x + dx], "y": [g.y - dy, g.y + dy]})
                continue
            for ring in [g.exterior, *g.interiors]:
                xy = shapely.get_coordinates(ring)
                out.append(LANDSLIDE | {"x": xy[:, 0], "y": xy[:, 1]})
    return out


def path_lines_by_rain(runout) -> dict:
    """``("runout_count", rain) -> lines`` of the runout paths that reach the corridor."""
    import shapely

    out: dict = {}
    if runout is None:
        return out
    lines = runout.layers.lines
    for row in runout.records:
        if row["segments_reached"] > 0:
            xy = shapely.get_coordinates(lines[row["id"]])
            out.setdefault(("runout_count", row["rain"]), []).append(
                REACHING_PATH | {"x": xy[:, 0], "y": xy[:, 1]})
    return out


def _overview(scenario, inputs, written: Written, cases, clusters) -> dict | None:
    """The first screen's map of the worst rain case, with its worst places numbered."""
    from ..report import overview
    from ..report.map_parts import MapFrame, hillshade
    from ..report.maps import display_step

    case = overview.worst_case({c.name: c.facts for c in cases})
    fs = None if case is None else written.previews.get(("factor_of_safety", case))
    if fs is None:
        return None
    grid = inputs.grid
    step = display_step(grid.shape)
    frame = MapFrame.from_grid(grid)
    if clusters is not None and any(r["rain"] == case for r in clusters.records):
        places, kind = overview.cluster_places(clusters.records, case), "cluster"
    else:
        places = overview.patch_places(fs, extent=frame.extent,
                                       cell_area_m2=grid.cell_area_m2, step=step)
        kind = "patch"
    zs = inputs.z[::step, ::step]
    png = overview.overview_png(fs, frame=frame, shade=hillshade(zs, grid.dx_m * step,
                                                                 grid.dy_m * step),
                                places=places, lines=map_lines(inputs),
                                title=f"Factor of safety under “{case}”, worst places numbered")
    return {"png": png, "case": case, "places": places, "kind": kind}


def summary_stage(scenario, inputs, manifest: dict, cases=(), clusters=None,
                  corridor=None) -> SummaryResult:
    """``summary.json`` and ``summary.csv`` from the figures the report quotes."""
    from ..report.cautions import SHORT
    from ..report.memo import summary_csv, summary_json, summary_rows

    rows = summary_rows(manifest.get("rain") or [], {c.name: c for c in cases},
                        clusters=None if clusters is None else clusters.records,
                        corridor=None if corridor is None else corridor.records)
    return SummaryResult(json=summary_json(rows, project=manifest.get("project"), caution=SHORT),
                         csv=summary_csv(rows, caution=SHORT))


def maps_stage(scenario, inputs, written: Written, runout=None, clusters=()) -> MapsResult:
    """One map per product whose registry entry has a style, with the centreline and the
    mapped landslides on every map and the reaching runout paths on the runout maps."""
    from ..report import html, maps
    from ..scenario import slugify

    rain_records = [{k: v for k, v in vars(r).items() if v is not None} for r in scenario.rain]
    rain_texts = {r["name"]: html.rain_text(r) for r in rain_records}
    cases = {r.name: r for r in scenario.rain}
    rates = [(r.name, r.steady_mm_per_day) for r in scenario.rain if not r.is_storm]
    extents = {c.bound_extent_cells for c in clusters}
    out = []
    for shown, png in maps.product_maps(written.entries(), _preview_reader(written),
                                        z=inputs.z, grid=inputs.grid, title=scenario.title,
                                        rain_texts=rain_texts, rates=rates,
                                        extent_cells=extents.pop() if len(extents) == 1 else None,
                                        lines=map_lines(inputs),
                                        extra_lines=path_lines_by_rain(runout)):
        rain = shown.get("rain")
        name = f"map_{shown['key']}" + (f"_{slugify(rain)}" if rain else "") + ".png"
        out.append((shown, name, png, cases.get(rain), shown["units"]))
    return MapsResult(tuple(out))


def explorer_soil_stage(scenario, inputs, soil) -> ExplorerExtras:
    """The soil unit per cell for the report's interactive map, copied while it is in memory."""
    from ..report.explorer import block_factor, explorer_copy

    k = block_factor(inputs.grid.shape)
    return ExplorerExtras(MappingProxyType({"soil_unit": explorer_copy(
        "soil_unit", soil.index_array(), k)}), labels=tuple(soil.labels))


def _bound_extent(manifest) -> int | None:
    """The cluster FS bound's window (cells on a side) when every rain case has the same one."""
    extents = {r.get("bound_extent_cells") for r in manifest.get("cluster_search") or ()}
    return extents.pop() if len(extents) == 1 else None


def report_stage(scenario, inputs, written: Written, manifest: dict, maps: MapsResult, terrain,
                 recharge=None, cases=(), clusters=None, runout=None,
                 corridor=None, inventory=None, explorer=None) -> ReportResult:
    """The self-contained report: maps embedded, every parameter, the cautions.

    Every number it quotes was computed by the figures stages while the
    arrays were in memory; no product is read back.
    """
    from ..report import html
    from ..report.explorer_layers import explorer_data
    from ..report.figures import ReportFigures

    by_path = {p.path: p.as_dict() for p in written.products}
    images = [html.MapImage(entry=by_path[name], shows=shown, png=png)
              for shown, name, png, _rain, _units in maps.maps]
    figures = ReportFigures(cases=MappingProxyType({c.name: c for c in cases}),
                            recharge=None if recharge is None else recharge.value,
                            terrain=MappingProxyType(terrain.value))
    ctx = html.ReportContext(
        manifest=manifest, read=None, cell_area_m2=inputs.grid.cell_area_m2, maps=images,
        figures=figures, overview=_overview(scenario, inputs, written, cases, clusters),
        tables={"clusters": [] if clusters is None else list(clusters.records),
                "size_resolved": [] if clusters is None else list(clusters.size_records),
                "runout_paths": [] if runout is None else list(runout.records),
                "corridor_segments": [] if corridor is None else list(corridor.records),
                "inventory_scores": {} if inventory is None else dict(inventory.document)},
        explorer=explorer_data(
            written, inputs.grid, inputs.z, rains=[r.name for r in scenario.rain],
            soil=None if explorer is None else explorer.copies.get("soil_unit"),
            soil_labels=[] if explorer is None else list(explorer.labels),
            lines=map_lines(inputs), paths=path_lines_by_rain(runout),
            segments=None if inputs.corridor is None else inputs.corridor.segments,
            title=scenario.title,
            rates=[(r.name, r.steady_mm_per_day) for r in scenario.rain if not r.is_storm],
            extent_cells=_bound_extent(manifest)))
    return ReportResult(html.render_report(ctx).encode("utf-8"))
