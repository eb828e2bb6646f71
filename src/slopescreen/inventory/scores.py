"""Scores of the hazard maps against mapped landslides (the ``inventory_scores`` product).

Each scored product is ranked from most to least hazardous (lower factor of
safety, higher probability of failure, lower critical recharge, inside a
failing cluster) and compared with the inventory's cells by
:func:`slopescreen.inventory.agreement.rank_agreement` (ROC, AUC with its
bootstrap interval over landslides and DeLong standard error, success-rate
curve) and, where the product has a natural threshold, by
:func:`slopescreen.inventory.agreement.threshold_agreement` (true-positive
rate, share of area flagged, share of landslides hit, true skill statistic).
The same scores are repeated per soil unit that holds at least
:data:`MIN_UNIT_LANDSLIDES` landslides.

See docs/methods.md, "Agreement with mapped landslides".
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["MIN_UNIT_LANDSLIDES", "BOOTSTRAP_SAMPLES", "BOOTSTRAP_SEED", "SCORED", "Scored",
           "recharge_hazard", "footprint_hazard", "score_product", "NOTES"]

MIN_UNIT_LANDSLIDES = 10
"""Fewest landslides a soil unit needs for scores of its own."""

BOOTSTRAP_SAMPLES = 1000
"""Resamples of the landslides behind each AUC interval."""

BOOTSTRAP_SEED = 0
"""Seed of the bootstrap (the interval is the same on every run of the same inputs)."""


@dataclass(frozen=True)
class Scored:
    """How one product is ranked against the inventory.

    Attributes
    ----------
    key : str
        Product key (the registry's).
    label : str
        What the scores call it.
    higher_is_hazard : bool
        True where a higher value is more hazardous.
    threshold : str or None
        The rule of its threshold scores, when it has one.
    """

    key: str
    label: str
    higher_is_hazard: bool
    threshold: str | None = None


SCORED = (
    Scored("factor_of_safety", "factor of safety", False, "FS < 1"),
    Scored("failure_probability", "probability of failure", True),
    Scored("critical_recharge", "critical steady recharge", False),
    Scored("cluster_labels", "failing-cluster footprint", True, "inside a failing cluster"),
)
"""The products scored, in the order the scores list them (a later hazard product adds
its entry here and its values in the inventory stage)."""

NOTES = (
    "Cells of one landslide are not independent (they share its soil, slope and wetness), so "
    "the AUC interval comes from a percentile bootstrap that resamples whole landslides with "
    "replacement, the other cells held fixed; the DeLong standard error beside it treats every "
    "cell as independent and is given for reference only: it is usually too small.",
    "The AUC and the success-rate area depend only on the ranking of the cells: a change that "
    "scales the factor of safety everywhere leaves them unchanged. The threshold scores at "
    "FS = 1 (true-positive rate, share of area flagged, true skill statistic) are the ones that "
    "see such a change.",
    "Ties count one half, as in the Mann-Whitney statistic; a product with few distinct values "
    "(the cluster footprint: inside or not) has a ROC curve of few vertices.",
    "Cells where the critical recharge has no value because they fail even when dry rank as the "
    "most hazardous (0 mm/day); cells stable even when saturated rank as the least hazardous.",
)
"""What every reader of the scores should know, written into the JSON and the report."""


def recharge_hazard(q_cr_mm_per_day: np.ndarray, stability_class: np.ndarray) -> np.ndarray:
    """Critical recharge as a ranking value: 0 where the cell fails dry, +inf where it never fails.

    Parameters
    ----------
    q_cr_mm_per_day : numpy.ndarray of float32
        The ``critical_recharge`` product (NaN where no rate applies).
    stability_class : numpy.ndarray of uint8
        The ``critical_recharge_class`` product (1 fails even when dry, 2 fails
        under enough recharge, 3 stable even when saturated, 0 nodata).

    Returns
    -------
    numpy.ndarray of float32
        Lower is more hazardous; NaN at nodata cells.

    Examples
    --------
    >>> q = np.array([np.nan, 12.0, np.nan, np.nan], dtype=np.float32)
    >>> recharge_hazard(q, np.array([1, 2, 3, 0], dtype=np.uint8)).tolist()
    [0.0, 12.0, inf, nan]
    """
    out = np.where(stability_class == 2, q_cr_mm_per_day, np.float32(np.nan)).astype(np.float32)
    out[stability_class == 1] = 0.0
    out[stability_class == 3] = np.inf
    return out


def footprint_hazard(cluster_cells: np.ndarray, valid: np.ndarray) -> np.ndarray:
    """1 inside a failing cluster, 0 elsewhere on the data, NaN off it.

    Examples
    --------
    >>> footprint_hazard(np.array([1]), np.array([[True, True], [False, True]])).tolist()
    [[0.0, 1.0], [nan, 0.0]]
    """
    out = np.where(valid, np.float32(0.0), np.float32(np.nan)).astype(np.float32)
    out.reshape(-1)[np.asarray(cluster_cells, dtype=np.int64)] = 1.0
    out[~valid] = np.nan
    return out


def score_product(values: np.ndarray, inventory, scored: Scored, *, rain=None, flag=None,
                  soil_codes=None, unit_labels=None, n_boot: int = BOOTSTRAP_SAMPLES,
                  seed: int = BOOTSTRAP_SEED) -> dict:
    """The scores of one product (one rain case) against the inventory, as a JSON-ready dict.

    Parameters
    ----------
    values : numpy.ndarray
        The product on the grid (NaN where it has no value).
    inventory : slopescreen.inventory.landslides.InventoryCells
    scored : Scored
    rain : str or None
        Rain case of the product.
    flag : numpy.ndarray of bool, optional
        Cells the threshold rule flags (``scored.threshold``).
    soil_codes : numpy.ndarray of int, optional
        Soil unit per cell; with it, units holding at least
        :data:`MIN_UNIT_LANDSLIDES` landslides get scores of their own.
    unit_labels : mapping, optional
        Unit code -> label.
    n_boot, seed : int
        Bootstrap resamples and seed.

    Returns
    -------
    dict
        ``product``, ``rain``, ``hazard_order``, the scores of every scored
        cell (``n_positive_cells`` ... ``auc``, ``auc_interval`` ...,
        ``roc``, ``success_rate``, ``threshold``), and ``units`` and
        ``units_not_scored``; ``not_scored`` (the reason) instead of the scores
        where the product cannot be scored.
    """
    order = ("higher values are more hazardous" if scored.higher_is_hazard
             else "lower values are more hazardous")
    out = {"product": scored.key, "label": scored.label, "rain": rain, "hazard_order": order}
    try:
        out |= _scores(values, inventory.positive_index, inventory.groups,
                       inventory.landslide_cells, scored, flag, n_boot, seed, curves=True)
    except ValueError as exc:  # e.g. no cell outside the landslides has a value
        return out | {"not_scored": str(exc), "units": [], "units_not_scored": []}
    units, skipped = [], []
    codes = None if soil_codes is None else np.asarray(soil_codes)
    if codes is not None and len(unit_labels or {}) > 1:
        present = [int(c) for c in np.unique(codes.reshape(-1)[inventory.positive_index])
                   if int(c) in unit_labels]
        flat_codes = codes.reshape(-1)
        for code in present:
            label = (unit_labels or {}).get(code, str(code))
            own = [c[flat_codes[c] == code] for c in inventory.landslide_cells]
            n = sum(1 for c in own if c.size)
            if n < MIN_UNIT_LANDSLIDES:
                skipped.append({"unit": code, "label": label, "landslides": n,
                                "reason": f"fewer than {MIN_UNIT_LANDSLIDES} landslides"})
                continue
            inside = flat_codes[inventory.positive_index] == code
            masked = np.where(codes == code, values, np.float32(np.nan))
            unit_flag = None if flag is None else flag & (codes == code)
            try:
                row = {"unit": code, "label": label} | _scores(
                    masked, inventory.positive_index[inside], inventory.groups[inside], own,
                    scored, unit_flag, n_boot, seed, curves=False)
            except ValueError as exc:
                skipped.append({"unit": code, "label": label, "landslides": n,
                                "reason": str(exc)})
                continue
            finally:
                del masked
            units.append(row)
    out["units"] = units
    out["units_not_scored"] = skipped
    return out


def _scores(values, positive_index, groups, landslide_cells, scored: Scored, flag, n_boot, seed,
            *, curves: bool) -> dict:
    from .agreement import rank_agreement, threshold_agreement

    a = rank_agreement(values, positive_index, groups, higher_is_hazard=scored.higher_is_hazard,
                       n_boot=n_boot, seed=seed)
    out = {
        "n_positive_cells": int(a.n_positive), "n_negative_cells": int(a.n_negative),
        "n_landslides": int(a.n_landslides), "auc": float(a.auc),
        "auc_interval": [float(a.auc_ci[0]), float(a.auc_ci[1])], "auc_interval_level": 0.95,
        "auc_bootstrap_se": float(a.auc_bootstrap_se), "bootstrap_samples": int(a.boot_samples),
        "bootstrap_seed": int(a.seed), "delong_se": float(a.delong_se),
        "mann_whitney_u": float(a.mann_whitney_u), "success_area": float(a.success_area),
    }
    if curves:
        out["roc"] = {"false_positive_rate": _list(a.roc_fpr),
                      "true_positive_rate": _list(a.roc_tpr)}
        out["success_rate"] = {"area_share": _list(a.success_area_share),
                               "captured_share": _list(a.success_captured_share)}
    if flag is not None and scored.threshold is not None:
        scored_cells = ~np.isnan(values)
        t = threshold_agreement(flag & scored_cells, positive_index, landslide_cells,
                                scored=scored_cells)
        out["threshold"] = {"rule": scored.threshold} | t
    else:
        out["threshold"] = None
    return out


def _list(a) -> list:
    return [round(float(v), 6) for v in np.asarray(a)]
