"""Inventory stages: the hazard products scored against the mapped landslides.

The critical recharge is scored once, right after it is computed; the
products of each rain case (factor of safety, probability of failure,
failing-cluster footprint) right after that case's stages, so that no raster
is held longer than it would be without an inventory; the last stage writes
every score into ``inventory_scores.json``.

docs/methods.md, "Agreement with mapped landslides".
"""

from __future__ import annotations

import math
from types import MappingProxyType

import numpy as np

from .. import __version__
from ..report.cautions import SHORT
from .results import InventoryCase, InventoryScores


def _unit_labels(scenario) -> dict:
    return {code: (unit.label or str(code)) for code, unit in scenario.soil.units.items()}


def _scored(key: str):
    from ..inventory.scores import SCORED

    return next(s for s in SCORED if s.key == key)


def inventory_recharge_stage(scenario, inputs, recharge) -> InventoryCase:
    """Scores of the critical steady recharge (one product for every rain case)."""
    from ..inventory.scores import recharge_hazard, score_product

    values = recharge_hazard(recharge.q_cr_mm_per_day, recharge.stability_class)
    row = score_product(values, inputs.inventory, _scored("critical_recharge"),
                        soil_codes=inputs.soil_codes, unit_labels=_unit_labels(scenario))
    return InventoryCase(rain=None, scores=(row,))


def inventory_case_stage(scenario, inputs, stability, probability=None, clusters=None, *,
                         case) -> InventoryCase:
    """Scores of the products of one rain case."""
    from ..inventory.scores import footprint_hazard, score_product

    common = {"rain": case.name, "soil_codes": inputs.soil_codes,
              "unit_labels": _unit_labels(scenario)}
    fs = stability.factor_of_safety
    rows = [score_product(fs, inputs.inventory, _scored("factor_of_safety"), flag=fs < 1.0,
                          **common)]
    if probability is not None:
        rows.append(score_product(probability.p_f, inputs.inventory,
                                  _scored("failure_probability"), **common))
    if clusters is not None:
        cells = clusters.cells[0] if clusters.cells else np.flatnonzero(clusters.labels > 0)
        values = footprint_hazard(cells, inputs.grid.valid)
        rows.append(score_product(values, inputs.inventory, _scored("cluster_labels"),
                                  flag=values == 1.0, **common))
    return InventoryCase(rain=case.name, scores=tuple(rows))


def inventory_scores_stage(scenario, inputs, cases) -> InventoryScores:
    """``inventory_scores.json``: the inventory as scored, the notes and every score."""
    from ..inventory.scores import NOTES, SCORED

    inv, cfg = inputs.inventory, scenario.inventory
    order = {s.key: i for i, s in enumerate(SCORED)}
    rows = sorted((r for c in cases for r in c.scores),
                  key=lambda r: (r["rain"] is not None, order[r["product"]]))
    rain_order = {r.name: i for i, r in enumerate(scenario.rain)}
    rows.sort(key=lambda r: -1 if r["rain"] is None else rain_order[r["rain"]])
    doc = {
        "tool": "slopescreen", "version": __version__, "caution": SHORT,
        "inventory": {
            "file": cfg.landslides.name, "kind": inv.kind, "features": inv.n_features,
            "selected": inv.n_selected, "off_dem": inv.n_off_dem,
            "landslides_scored": inv.n_landslides, "cells": int(inv.positive_index.size),
            "whole_cells": inv.whole_cells, "score_part": inv.score_part,
            "rasterised_by": "every touched cell" if cfg.all_touched else "cell centre",
            "point_buffer_m": cfg.point_buffer_m,
            "event": None if cfg.event_field is None else {cfg.event_field: cfg.event},
            "types": None if cfg.type_field is None else {cfg.type_field: list(cfg.types)},
            "date": None if cfg.date is None else cfg.date.isoformat(),
            "dem_date": None if scenario.dem_date is None else scenario.dem_date.isoformat(),
        },
        "notes": list(NOTES),
        "scores": [_finite(r) for r in rows],
    }
    return InventoryScores(MappingProxyType(doc))


def _finite(value):
    """``value`` with every non-finite float replaced by None (JSON has no NaN)."""
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_finite(v) for v in value]
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value
