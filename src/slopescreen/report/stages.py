"""Report sections of the optional stages.

A stage's section appears when one of its products is in the manifest, and
a configured stage that did not run is named with the reason. A later stage
adds its entry to :data:`STAGE_SECTIONS` (and, if it likes, its own
builder); the template does not change.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from .blocks import ReportContext, Section, details, figure, note, para, table
from ..products import products_of_section
from .summaries import NBSP, _map_alt, _map_caption, coordinate, format_area

@dataclass(frozen=True)
class StageSection:
    """A report section that exists only when its stage ran.

    Attributes
    ----------
    section : str
        Scenario section that configures the stage (``"clusters"`` ...).
    title : str
    keys : tuple of str
        Product keys that show the stage ran.
    build : callable or None
        ``build(ctx, entries) -> list of Block``; None lists the stage's
        products and their maps.
    """

    section: str
    title: str
    keys: tuple
    build: Callable | None = None


def _centre(row) -> str:
    """Centroid of a cluster as "easting, northing" in the CRS's units ("—" when absent)."""
    x, y = row.get("centroid_easting"), row.get("centroid_northing")
    if x is None or y is None or x != x or y != y:
        return "—"
    return f"{coordinate(x)} E, {coordinate(y)} N"


def _cluster_blocks(ctx: ReportContext, entries):
    """Failing multi-cell clusters per rain case: counts, sizes and the least stable."""
    rows = ctx.tables.get("clusters", [])
    settings = ctx.manifest.get("clusters_settings") or {}
    blocks = [para(
        "A cell below FS 1 is not yet a landslide. A real failure is a group of neighbouring "
        "cells that slides together: its weight is resisted by the strength of its base and of "
        "its margins (the ground it must push at its toe, friction and roots along its sides, "
        "roots across its head). A failure cluster is such a group whose resistance falls "
        "short as a whole under the rain case, at the median soil parameters.",
        lead="What a cluster is:"),
        para("the tool checked that its answer is exact: no other group of cells in that part "
             "of the map fails more clearly. “Not proven” means the check could not finish "
             "there, and a slightly different failing group may exist.", lead="“Proven”:")]
    if settings:
        blocks.append(para(
            f"failures of {settings['min_area_m2']:,.0f} to {settings['max_area_m2']:,.0f}{NBSP}m² "
            "(the scenario's [clusters] min_area_m2 and max_area_m2).",
            lead="Sizes asked for:"))
    cases = [r["name"] for r in ctx.manifest.get("rain", [])]
    summary = []
    for name in cases:
        mine = [r for r in rows if r["rain"] == name]
        if not mine:
            summary.append([name, "0", "—", "—", "—"])
            continue
        areas = np.array([r["area_m2"] for r in mine])
        volumes = np.array([r["volume_m3"] for r in mine])
        summary.append([name, str(len(mine)), format_area(float(areas.sum())),
                        f"{np.median(areas):,.0f}{NBSP}m² / {areas.max():,.0f}{NBSP}m²",
                        f"{volumes.sum():,.0f}{NBSP}m³"])
    blocks.append(table("Failing clusters per rain case",
                        ["rain case", "clusters", "total area", "median / largest area",
                         "total volume"], summary, [False, True, True, True, True]))
    least = sorted(rows, key=lambda r: r["fs"])[:15]
    if least:
        blocks.append(table(
            "The least stable clusters (up to 15)",
            ["id", "rain case", "FS", "P_f", "area", "volume", "length × width", "cells",
             "proven", "in the sizes asked for", "centre"],
            [[str(r["id"]), r["rain"], f"{r['fs']:.3f}",
              "—" if r["failure_probability"] != r["failure_probability"]
              else f"{r['failure_probability']:.2f}", f"{r['area_m2']:,.0f}{NBSP}m²",
              f"{r['volume_m3']:,.0f}{NBSP}m³", f"{r['length_m']:.0f} × {r['width_m']:.0f}{NBSP}m",
              str(r["n_cells"]), "yes" if r["proven"] else "no",
              "yes" if r["in_area_band"] else "no", _centre(r)] for r in least],
            [False, False, True, True, True, True, True, True, False, False, True]))
    bound = [e for e in entries if e["key"] == "cluster_fs_bound"]
    if bound:
        blocks.append(para(
            "its map shows where a failing cluster cannot be ruled out (coloured) and where none "
            "that fits the bound's window can fail (not coloured). A coloured cell does not say "
            "that a cluster fails there, only that the bound does not exclude one; the failing "
            "clusters themselves are outlined on the factor-of-safety maps of each rain case.",
            lead="Cluster bound map:"))
    sized = ctx.tables.get("size_resolved", [])
    one_band = settings.get("size_bands", 1) == 1 and settings
    if sized:
        unproven = sum(1 for r in sized if not r["proven"])
        blocks.append(para(
            "Around the least stable failing clusters, the least stable group of connected "
            "cells of each size asked for was sought; a proven answer is the least stable such "
            f"group there. Not proven: {unproven} of {len(sized)} answers (a time limit stopped "
            "the search; a less stable group may exist between the lower bound and the answer).",
            lead="By size:"))
        blocks.append(table(
            "Least stable group of connected cells per searched window and size",
            ["rain case", "sizes", "FS", "proven lower bound", "proven", "area", "P_f",
             "centre"],
            [[r["rain"], (f"{settings['min_area_m2']:,.0f}–{settings['max_area_m2']:,.0f}"
                          f"{NBSP}m² (as asked)") if one_band else
              f"{r['band_min_m2']:,.0f}–{r['band_max_m2']:,.0f}{NBSP}m² (whole cells)",
              f"{r['fs']:.3f}", f"{r['lower_bound']:.3f}", "yes" if r["proven"] else
              f"no ({r['method']})", f"{r['area_m2']:,.0f}{NBSP}m²",
              "—" if r["failure_probability"] != r["failure_probability"]
              else f"{r['failure_probability']:.2f}", _centre(r)] for r in sized[:20]],
            [False, True, True, True, False, True, True, True]))
    search = ctx.manifest.get("cluster_search") or []
    modular = sum(r["modular_faces"] for r in search)
    undecided = sum(r["undecided_cells"] for r in search)
    inner = [para(
        "The failing clusters are found exactly as a minimum cut of a graph whose nodes are "
        "cells and whose edges carry the margin resistances; every cluster found was checked "
        "to have FS below 1 when recomputed. The cluster bound is a proven lower bound on the "
        "FS of every cluster up to the bound's window that holds the cell. The search by size "
        "solves a mixed-integer program per window and size band (with its LP relaxation as "
        "the lower bound), under the time limit of [clusters] size_time_limit_s; sizes are "
        "searched in whole cells.")]
    if modular or undecided:
        inner.append(note(
            f"The exact cut could not certify every answer: {modular} margin face(s) failed the "
            "submodularity check (active thrust above the resistance at a head or toe, where the "
            "cut charges the face by a modular lower bound) and "
            f"{undecided} cell(s) stayed undecided between the tiles. Clusters touching either are "
            f"marked not proven ({sum(r['not_proven'] for r in search)} of "
            f"{sum(r['clusters'] for r in search)}).", lead="Proof:"))
    blocks.append(details("How the clusters are found and proven (solver details)", inner))
    return blocks


def _runout_maps(ctx, entries):
    out = []
    for e in entries:
        if e["key"] != "runout_count" or e.get("kind", "raster") != "raster":
            continue
        m = ctx.map_of(e["key"], e.get("rain"))
        if m is not None:
            out.append(figure(m.png, _map_alt(e), _map_caption(ctx, e) + " Blue lines: runout "
                              "paths that reach the corridor; black: the centreline."))
    return out


def _runout_blocks(ctx: ReportContext, entries):
    import statistics

    rows = ctx.tables.get("runout_paths", [])
    notes = {r["rain"]: r for r in ctx.manifest.get("runout", [])}
    blocks = [para(
        "Each failure source (a failing cluster, or a connected patch of cells with FS < 1) "
        "runs out from its crown down the steepest-descent path of the conditioned DEM until the "
        "travel angle from the crown, atan(drop / horizontal path length), falls below the angle "
        "of reach; the deposit keeps the source's width, and a corridor strip stops the path. "
        "Angles of reach are empirical: the reach shown is a screening estimate, and a lower "
        "angle reaches farther.", lead="Method:")]
    if notes:
        first = next(iter(notes.values()))
        blocks.append(para(first.get("angle_of_reach", ""), lead="Angle of reach:"))
    table_rows = []
    for rain in dict.fromkeys(r["rain"] for r in rows):
        mine = [r for r in rows if r["rain"] == rain]
        travel = [r["travel_length_m"] for r in mine]
        table_rows.append([
            rain, f"{len(mine):,}", f"{statistics.median(travel):,.0f}{NBSP}m",
            f"{max(travel):,.0f}{NBSP}m", f"{statistics.median(r['angle_of_reach_deg'] for r in mine):.1f}°",
            f"{sum(1 for r in mine if r['segments_reached'] > 0):,}"])
    if table_rows:
        blocks.append(table("Runout of the failure sources per rain case",
                            ["rain case", "sources", "median travel", "longest travel",
                             "median angle of reach", "reaching the corridor"],
                            table_rows, [False, True, True, True, True, True]))
    else:
        blocks.append(para("No rain case has a failure source, so nothing runs out."))
    if not ctx.tables.get("corridor_segments"):
        blocks += _runout_maps(ctx, entries)
    return blocks


def _corridor_blocks(ctx: ReportContext, entries):
    from .corridor import corridor_sentence, strip_chart, worst_table_rows

    rows = ctx.tables.get("corridor_segments", [])
    by_rain: dict = {}
    for r in rows:
        by_rain.setdefault(r["rain"], []).append(r)
    blocks = [para(
        "The centreline is cut into segments along its chainage; each segment covers a strip on "
        "both sides. A segment is reached when the runout footprint of a failure source enters "
        "its strip. Its hazard is the expected volume of failed soil reaching it, the sum over "
        "reaching sources of probability of failure × volume (a source without a probability "
        "counts as certain). Rank 1 is the worst segment of a rain case.", lead="Method:")]
    blocks += [para(corridor_sentence(rain, mine)) for rain, mine in by_rain.items()]
    for record in ctx.manifest.get("runout", []):
        if "segments_reached_lower_angle" in record:
            blocks.append(para(
                f"under “{record['rain']}”, with every angle of reach "
                f"{-record['angle_change_deg']:g}° lower, runout would reach "
                f"{record['segments_reached_lower_angle']} segments from "
                f"{record['sources_reaching_lower_angle']} sources, against "
                f"{record['segments_reached']} segments from {record['sources_reaching']} sources "
                "at the angles used.", lead="Sensitivity:"))
    if rows:
        blocks.append(figure(strip_chart(by_rain, title=ctx.manifest.get("title", "")),
                             "Chart: expected failed volume reaching each corridor segment along "
                             "the chainage, per rain case",
                             "Hazard along the corridor: expected failed volume reaching each "
                             "segment (m³), by chainage, one line per rain case."))
    for rain, mine in by_rain.items():
        worst = worst_table_rows(mine)
        if worst:
            blocks.append(table(f"Worst segments under “{rain}”",
                                ["rank", "segment", "chainage", "hazard", "why"], worst,
                                [True, True, True, True, False], print_rows=5))
    runout_entries = [p for p in ctx.manifest.get("products", []) if p["key"] == "runout_count"]
    blocks += _runout_maps(ctx, runout_entries)
    return blocks


def _inventory_blocks(ctx: ReportContext, entries):
    from .blocks import bullets
    from .inventory import (
        SCORE_HEADER, agreement_chart, agreement_sentence, dates_caution, score_rows, unit_rows,
    )

    doc = ctx.tables.get("inventory_scores") or {}
    inv = doc.get("inventory", {})
    blocks = [para(
        "Each hazard product ranks the cells from most to least hazardous (lower factor of "
        "safety, higher probability of failure, lower critical recharge, inside a failing "
        "cluster). The ROC curve and its area (AUC) say how often a cell of a mapped landslide "
        "ranks above a cell outside the landslides; the success-rate curve, what share of the "
        "landslide cells lies in the most hazardous share of the area. Threshold scores say "
        "what the map flags as failing: the share of landslide cells and of the area it flags, "
        "the share of landslides with at least one flagged cell, and the true skill statistic "
        "(true-positive rate minus false-positive rate).", lead="Method:")]
    if inv:
        part = ("the upper half of each polygon's relief (so that mapped deposits do not count "
                "as sources)" if inv.get("score_part") == "scar" else "every cell")
        blocks.append(para(
            f"{inv['file']}: {inv['features']:,} features ({inv['kind']}), {inv['selected']:,} "
            f"selected, {inv['landslides_scored']:,} on the DEM's data"
            + (f" ({inv['off_dem']:,} off it, not scored)" if inv.get("off_dem") else "")
            + f"; {inv['cells']:,} cells scored, from {part}; polygons rasterised by "
            f"{inv['rasterised_by']}.", lead="Inventory:"))
    sentence = agreement_sentence(doc)
    if sentence:
        blocks.append(para(sentence))
    caution = dates_caution(doc)
    if caution:
        blocks.append(note(caution, lead="Dates:"))
    rows = score_rows(doc)
    if rows:
        blocks.append(figure(agreement_chart(doc, title=ctx.manifest.get("title", "")),
                             "Chart: ROC and success-rate curves of the hazard products against "
                             "the mapped landslides",
                             "ROC (left) and success-rate (right) curves; the diagonal is a "
                             "ranking no better than chance."))
        blocks.append(table("Agreement with the mapped landslides", SCORE_HEADER, rows,
                            [False, False, True, True, True, False, True, True, True, True,
                             True]))
    units = unit_rows(doc)
    if units:
        blocks.append(table("Agreement per soil unit",
                            ["soil unit", "product", "rain case", "AUC (95 % interval)",
                             "success-rate area", "landslides / their cells / other cells"],
                            units, [False, False, False, True, True, True]))
    skipped = {(u["unit"], u["label"], u["reason"]) for r in doc.get("scores", [])
               for u in r.get("units_not_scored", [])}
    if skipped:
        blocks.append(para("; ".join(f"{label} ({code}): {reason}"
                                     for code, label, reason in sorted(skipped)) + ".",
                           lead="Soil units without scores of their own:"))
    blocks.append(note(
        "These scores test the map on the landslides it is compared with. Parameters chosen "
        "to fit this inventory (by hand or by a sweep) make the scores overstate the map's "
        "skill on landslides it has not seen; only scores on landslides held out of the choice "
        "are a fair test.", lead="Over-fitting:"))
    notes = doc.get("notes", [])
    if notes:
        blocks.append(bullets(notes))
    return blocks


STAGE_SECTIONS = (
    StageSection("clusters", "Failure clusters", products_of_section("clusters"), _cluster_blocks),
    StageSection("runout", "Runout", products_of_section("runout"), _runout_blocks),
    StageSection("corridor", "Corridor", products_of_section("corridor"), _corridor_blocks),
    StageSection("inventory", "Agreement with mapped landslides", products_of_section("inventory"),
                 _inventory_blocks),
)
"""Optional stages and their sections, in report order; the products of each
are the registry's entries of that section."""


def _generic_stage_blocks(ctx: ReportContext, entries):
    blocks = []
    for e in entries:
        if e.get("kind", "raster") != "raster":  # a raster's sidecars share its map
            continue
        m = ctx.map_of(e["key"], e.get("rain"))
        if m is not None:
            blocks.append(figure(m.png, _map_alt(e), _map_caption(ctx, e)))
    return blocks



def _stage_sections(ctx):
    out = []
    not_run = {n["section"]: n["reason"] for n in ctx.manifest.get("not_run", [])}
    for st in STAGE_SECTIONS:
        entries = [p for p in ctx.manifest.get("products", []) if p["key"] in st.keys]
        if entries:
            builder = st.build or _generic_stage_blocks
            out.append(Section(st.section, st.title, builder(ctx, entries)))
        elif st.section in not_run:
            out.append(Section(st.section, st.title, [note(
                f"The scenario configures [{st.section}], but this stage did not run: "
                f"{not_run[st.section]}. No {st.section} product was written, and nothing in this "
                "report depends on it.", lead="Did not run.")]))
    return out
