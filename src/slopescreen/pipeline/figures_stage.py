"""The numbers the report quotes, computed as soon as their arrays exist.

These stages write no product: they sum the arrays of the stages before
them while those are still in memory, so the report never reads a product
back. The summing itself is :mod:`slopescreen.report.figures`, the same
code that a report made from products alone uses.
"""

from __future__ import annotations

from .results import FiguresResult


def terrain_figures_stage(scenario, inputs, slope, routing) -> FiguresResult:
    """Percentiles of slope and specific catchment area; the cells at a data edge."""
    from ..report._count_kernels import edge_cells
    from ..report.figures import terrain_figures

    return FiguresResult({"slope": terrain_figures(slope.slope_deg),
                          "specific_catchment_area": terrain_figures(routing.sca_m),
                          "edge_cells": edge_cells(slope.slope_deg)})


def recharge_figures_stage(scenario, inputs, recharge) -> FiguresResult:
    """Class areas and percentiles of the critical recharge, the area failing at each steady rate."""
    from ..report.summaries import recharge_distribution

    rates = [(r.name, r.steady_mm_per_day) for r in scenario.rain if not r.is_storm]
    return FiguresResult(recharge_distribution(recharge.q_cr_mm_per_day, recharge.stability_class,
                                               inputs.grid.cell_area_m2, rates))


def case_figures_stage(scenario, inputs, stability, slope, soil, probability=None, *, case):
    """What fails where under one rain case, its FS band areas and storm flag shares."""
    from ..report.figures import case_figures

    return case_figures(
        case.name, stability.factor_of_safety, cell_area_m2=inputs.grid.cell_area_m2,
        pf=None if probability is None else probability.p_f,
        wetness=None if case.is_storm else stability.wetness,
        flags=None if stability.storm is None else stability.storm.flags,
        slope_deg=slope.slope_deg, aspect_deg=slope.aspect_deg, unit_index=soil.index_array(),
        unit_labels=soil.labels)
