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

from .blocks import ReportContext, Section, figure, note, para, table
from ..products import products_of_section
from ..products import title as product_title
from .summaries import NBSP, _map_alt, _map_caption, _units_text, format_area

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
    return f"{x:,.0f}, {y:,.0f}"


def _cluster_blocks(ctx: ReportContext, entries):
    """Failing multi-cell clusters per rain case: counts, sizes and the least stable."""
    rows = ctx.tables.get("clusters", [])
    blocks = [para(
        "A cell below FS 1 is not yet a landslide: a real failure is a group of cells whose weight "
        "overcomes the strength of its base and of its margins (passive resistance at the toe, "
        "friction and roots on the sides, roots at the head). The clusters below are the groups "
        "that fail as a whole under each rain case at the median parameters, found exactly by a "
        "minimum cut; every one was checked to have FS below 1 when recomputed.",
        lead="What this is:")]
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
            ["id", "rain case", "FS", "P(fail)", "area", "volume", "length × width", "cells",
             "proven", "in the area band", "centroid (E, N)"],
            [[str(r["id"]), r["rain"], f"{r['fs']:.3f}",
              "—" if r["failure_probability"] != r["failure_probability"]
              else f"{r['failure_probability']:.2f}", f"{r['area_m2']:,.0f}{NBSP}m²",
              f"{r['volume_m3']:,.0f}{NBSP}m³", f"{r['length_m']:.0f} × {r['width_m']:.0f}{NBSP}m",
              str(r["n_cells"]), "yes" if r["proven"] else "no",
              "yes" if r["in_area_band"] else "no", _centre(r)] for r in least],
            [False, False, True, True, True, True, True, True, False, False, True]))
    search = ctx.manifest.get("cluster_search") or []
    modular = sum(r["modular_faces"] for r in search)
    undecided = sum(r["undecided_cells"] for r in search)
    if modular or undecided:
        blocks.append(note(
            f"The exact cut could not certify every answer: {modular} margin face(s) failed the "
            "submodularity check (active thrust above the resistance at a head or toe, where the "
            "cut charges the face by a modular lower bound) and "
            f"{undecided} cell(s) stayed undecided between the tiles. Clusters touching either are "
            f"marked not proven ({sum(r['not_proven'] for r in search)} of "
            f"{sum(r['clusters'] for r in search)}): a slightly different failing set may exist "
            "there.", lead="Proof:"))
    bound = [e for e in entries if e["key"] == "cluster_fs_bound"]
    if bound:
        blocks.append(para(
            "The cluster bound map gives, per cell, a proven lower bound on the factor of safety "
            "of every cluster up to the stated extent that contains the cell; where it is at "
            "least 1, no such cluster can fail under that rain case. Its maps are in the "
            "sections of each rain case.", lead="Bound:"))
    sized = ctx.tables.get("size_resolved", [])
    if sized:
        unproven = sum(1 for r in sized if not r["proven"])
        blocks.append(para(
            "In windows of 40 × 40 cells around the least stable failing clusters (and the least "
            "stable windows of the bound map), the least stable connected cluster was searched "
            "for in each area band by an exact mixed-integer program. The lower bound is proven "
            "for every connected cluster of that band inside the window; where the answer is not "
            "proven, the time limit stopped the search and a less stable cluster of that band may "
            f"exist between the bound and the answer. Not proven: {unproven} of {len(sized)} "
            "answers.",
            lead="By size:"))
        blocks.append(table(
            "Least stable connected cluster per searched window and area band",
            ["rain case", "area band", "FS", "proven lower bound", "proven", "area", "P(fail)",
             "centroid (E, N)"],
            [[r["rain"], f"{r['band_min_m2']:,.0f}–{r['band_max_m2']:,.0f}{NBSP}m²",
              f"{r['fs']:.3f}", f"{r['lower_bound']:.3f}", "yes" if r["proven"] else
              f"no ({r['method']})", f"{r['area_m2']:,.0f}{NBSP}m²",
              "—" if r["failure_probability"] != r["failure_probability"]
              else f"{r['failure_probability']:.2f}", _centre(r)] for r in sized[:20]],
            [False, True, True, True, False, True, True, True]))
    return blocks


STAGE_SECTIONS = (
    StageSection("clusters", "Failure clusters", products_of_section("clusters"), _cluster_blocks),
    StageSection("runout", "Runout", products_of_section("runout")),
    StageSection("corridor", "Corridor", products_of_section("corridor")),
    StageSection("inventory", "Agreement with mapped landslides", products_of_section("inventory")),
)
"""Optional stages and their sections, in report order; the products of each
are the registry's entries of that section."""


def _generic_stage_blocks(ctx: ReportContext, entries):
    blocks = []
    for e in entries:
        m = ctx.map_of(e["key"], e.get("rain"))
        if m is not None:
            blocks.append(figure(m.png, _map_alt(e), _map_caption(ctx, e)))
    blocks.append(table("Products of this stage", ["product", "rain case", "file", "units"],
                        [[product_title(e["key"]), e.get("rain") or "—",
                          e["path"], _units_text(e["units"])] for e in entries]))
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
