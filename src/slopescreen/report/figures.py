"""The numbers the report quotes, computed from the product arrays.

A run computes them where the arrays are still in memory, as each stage
finishes (so the report never reads a product back); a report made from a
manifest and a reader alone computes the same numbers from the products
(:func:`figures_from_products`). Both go through the same functions:
:func:`case_figures`, :func:`terrain_figures` and
:func:`~slopescreen.report.summaries.recharge_distribution`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType

import numpy as np

from ._count_kernels import edge_cells
from .quantiles import percentiles
from .summaries import band_areas, case_facts, recharge_distribution

__all__ = ["CaseFigures", "ReportFigures", "case_figures", "terrain_figures",
           "figures_from_products", "STORM_FLAG_BITS"]

STORM_FLAG_BITS = (1, 2, 4)
"""The bits of ``storm_flags`` whose share the report gives."""

TERRAIN_PERCENTILES = (10, 50, 90)


@dataclass(frozen=True)
class CaseFigures:
    """Figures of one rain case: what fails where, FS band areas, storm flag shares."""

    name: str
    facts: dict
    bands: tuple
    flag_shares: tuple | None = None

    def products(self):
        return ()


@dataclass(frozen=True)
class ReportFigures:
    """Every figure the report quotes."""

    cases: MappingProxyType = field(default_factory=lambda: MappingProxyType({}))
    recharge: dict | None = None
    terrain: MappingProxyType = field(default_factory=lambda: MappingProxyType({}))
    """Percentiles of ``slope`` and ``specific_catchment_area``; ``edge_cells``: cells with
    data that touch a data edge (:func:`slopescreen.report._count_kernels.edge_cells`)."""


def case_figures(name, fs, *, cell_area_m2, pf=None, wetness=None, flags=None, slope_deg=None,
                 aspect_deg=None, unit_index=None, unit_labels=()) -> CaseFigures:
    """The figures of one rain case (see :func:`~slopescreen.report.summaries.case_facts`).

    ``wetness`` is given for steady cases only (saturation to the surface is a
    steady-state notion; storm wetness is an equivalent head); ``flags`` is
    the ``storm_flags`` band of a storm case.

    Examples
    --------
    >>> import numpy as np
    >>> f = case_figures("wet", np.array([[0.8, 2.0], [1.2, 1.4]]), cell_area_m2=10.0)
    >>> f.facts["fail_m2"], [b[1] for b in f.bands]
    (10.0, [10.0, 10.0, 10.0, 10.0])
    """
    facts = case_facts(fs, cell_area_m2=cell_area_m2, pf=pf, wetness=wetness,
                       slope_deg=slope_deg, aspect_deg=aspect_deg, unit_index=unit_index,
                       unit_labels=unit_labels)
    bands = tuple(band_areas(fs, cell_area_m2))
    shares = None
    if flags is not None:
        f = np.asarray(flags)
        computed = np.isfinite(f) & (f > 0) if np.issubdtype(f.dtype, np.floating) else f > 0
        n = int(computed.sum())
        bits = np.where(computed, f, 0).astype(np.uint8)
        shares = tuple((bit, ((bits & bit) > 0).sum() / n if n else 0.0) for bit in STORM_FLAG_BITS)
    return CaseFigures(name, facts, bands, shares)


def terrain_figures(values) -> tuple | None:
    """10th, 50th and 90th percentiles of a terrain product (None without a value).

    Examples
    --------
    >>> terrain_figures(np.array([1.0, 2.0, np.nan, 3.0], dtype=np.float32))
    (1.2, 2.0, 2.8)
    """
    return percentiles(values, TERRAIN_PERCENTILES)


def steady_rates(rain_records) -> list:
    """(name, mm/day) of the steady rain cases of a manifest's ``rain`` list."""
    return [(c["name"], c["steady_mm_per_day"]) for c in rain_records
            if c.get("steady_mm_per_day") is not None]


def figures_from_products(ctx) -> ReportFigures:
    """Every figure of the report, computed from the products through ``ctx.read``."""
    cases = {}
    for case in ctx.manifest.get("rain") or []:
        name = case["name"]
        fs_e = ctx.product("factor_of_safety", name)
        if fs_e is None:
            continue
        pf_e = ctx.product("failure_probability", name)
        steady = case.get("steady_mm_per_day") is not None
        wet_e = ctx.product("wetness", name) if steady else None
        flags_e = ctx.product("storm_flags", name)
        cases[name] = case_figures(
            name, ctx.read(fs_e), cell_area_m2=ctx.cell_area_m2,
            pf=None if pf_e is None else ctx.read(pf_e),
            wetness=None if wet_e is None else ctx.read(wet_e),
            flags=None if flags_e is None else ctx.read(flags_e), slope_deg=ctx.slope_deg,
            aspect_deg=ctx.aspect_deg, unit_index=ctx.unit_index, unit_labels=ctx.unit_labels)
    recharge = None
    q_e, c_e = ctx.product("critical_recharge"), ctx.product("critical_recharge_class")
    if q_e is not None and c_e is not None:
        recharge = recharge_distribution(ctx.read(q_e), ctx.read(c_e), ctx.cell_area_m2,
                                    steady_rates(ctx.manifest.get("rain") or []))
    terrain = {}
    for key in ("slope", "specific_catchment_area"):
        e = ctx.product(key)
        if e is not None:
            values = ctx.read(e)
            terrain[key] = terrain_figures(values)
            if key == "slope":
                terrain["edge_cells"] = edge_cells(values)
    return ReportFigures(MappingProxyType(cases), recharge, MappingProxyType(terrain))
