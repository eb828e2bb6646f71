"""Changes of method that move a run's numbers against the previous release.

A reviewer who compares this report with one made by the previous release
needs to know why the numbers moved before reading them. :data:`CHANGES`
lists each change of method with the release that made it and a test of
whether it touches a run (from the run's manifest); :func:`changes_for` picks
those that apply, and the report's first screen states them, each with a
count of this run's cells where one can be made (docs/methods.md, "Maps and
the report"). docs/migration.md has the same list for users of the library.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

__all__ = ["MethodChange", "CHANGES", "PREVIOUS_RELEASE", "changes_for"]

PREVIOUS_RELEASE = "0.1.0"
"""The release the changes are counted from."""


@dataclass(frozen=True)
class MethodChange:
    """One change of method since :data:`PREVIOUS_RELEASE`.

    Attributes
    ----------
    key : str
        Short stable name.
    text : str
        What changed and which way it moves the numbers, in one or two
        sentences; ``{edge_cells}``, ``{edge_share}`` and ``{modular_faces}``
        are filled in with this run's counts where they appear.
    section : str
        The docs/methods.md section that explains it.
    applies : callable
        ``applies(manifest) -> bool``: whether the change touches this run.
    """

    key: str
    text: str
    section: str
    applies: Callable[[dict], bool]


def _always(manifest) -> bool:
    return True


def _has_rain(manifest) -> bool:
    return bool(manifest.get("rain"))


def _has_dry_case(manifest) -> bool:
    return any(c.get("steady_mm_per_day") == 0 for c in manifest.get("rain") or [])


def _has_storm(manifest) -> bool:
    return any(c.get("steady_mm_per_day") is None for c in manifest.get("rain") or [])


def _has_antecedent_storm(manifest) -> bool:
    return any(c.get("antecedent_mm_per_day") is not None for c in manifest.get("rain") or [])


def _has_clusters(manifest) -> bool:
    return any(p.get("key") == "cluster_labels" for p in manifest.get("products") or [])


def _sampled_clusters(manifest) -> bool:
    return _has_clusters(manifest) and manifest.get("uncertainty") is not None


CHANGES = (
    MethodChange(
        "edge_slopes",
        "Slopes at data edges (grid margins, holes, clipped outlines) now come from a plane "
        "fitted to the neighbours that have values; before, a missing neighbour roughly halved "
        "the slope there, so every edge looked more stable than it is. In this run "
        "{edge_cells} cells ({edge_share} of the cells with data) touch an edge; elsewhere the "
        "slope is unchanged.",
        "Slope", _always),
    MethodChange(
        "dry_case",
        "A steady rain case of 0 mm/day is now accepted: the dry factor of safety, with no "
        "water table.",
        "Infinite-slope factor of safety", _has_dry_case),
    MethodChange(
        "storm_depths",
        "Storm cases search the same failure depths in the FS map, the Monte Carlo, FOSM and "
        "the failure-cluster Monte Carlo: "
        "from the minimum credible failure depth ([soil] min_failure_depth_m, 0.3 m by "
        "default) down to the soil base. Before, the map searched from a few centimetres "
        "and the probabilities used the base only, so a cell could show FS < 1 with a "
        "probability of failure of 0.",
        "Storm response (Iverson 2000)", _has_storm),
    MethodChange(
        "antecedent_table",
        "A storm case with antecedent_mm_per_day starts from the steady water table of that "
        "background recharge in each cell, so hollows start wetter than spurs of the same "
        "slope; before, a storm took one water-table depth under every cell and its map did "
        "not depend on the contributing area.",
        "Storm response (Iverson 2000)", _has_antecedent_storm),
    MethodChange(
        "cluster_proof",
        "A failure cluster that touches a margin cell pair charged by its modular lower bound "
        "(a pair whose earth-pressure terms break the exact min-cut form) is now reported as "
        "not proven; before it was reported as proven. In this run {modular_faces} such pairs "
        "were charged by their bound, over every rain case.",
        "Multi-cell failure clusters", _has_clusters),
    MethodChange(
        "inclined_earth_pressure",
        "Earth pressures on the margins of a failure cluster now use the inclined-ground "
        "coefficients of Mazindrani and Ganjali (1997) at the face's slope, acting parallel "
        "to the ground, instead of the level-ground Rankine values; near the friction angle "
        "the passive resistance falls sharply, so clusters are larger and less stable, and "
        "more faces break the exact min-cut form (see the proof note of each case).",
        "Multi-cell failure clusters", _has_clusters),
    MethodChange(
        "cluster_pairs",
        "The margins of a failure cluster are now charged over 16 cell pairs per cell (the 8 "
        "neighbours and the 8 knight moves) with Cauchy-Crofton weights, so a margin costs "
        "the same whatever its angle to the grid; before, the 4 faces of a cell were charged "
        "and a slope-aligned slab's FS moved by up to 8 % with its angle to the grid. Small "
        "clusters now carry less margin than their perimeter (corners are counted short), so "
        "their FS is a few per cent lower.",
        "Multi-cell failure clusters", _has_clusters),
    MethodChange(
        "free_nodata_faces",
        "A cluster face toward a nodata cell (usually a cut, a bank or water) is now a free "
        "face, with no passive resistance and no thrust, unless [clusters] nodata_faces = "
        "\"charged\" keeps the earlier rule.",
        "Multi-cell failure clusters", _has_clusters),
    MethodChange(
        "root_correlation",
        "In the Monte Carlo of clusters, lateral root cohesion is now drawn at the same "
        "quantile as the basal root cohesion of the same soil unit (the same roots), not "
        "independently; this widens the spread of a cluster's FS and so moves its "
        "probability of failure away from the middle.",
        "Multi-cell failure clusters", _sampled_clusters),
)
"""Every change of method since :data:`PREVIOUS_RELEASE`, in the order the report lists them."""


def changes_for(manifest, *, edge_cells=None) -> list[tuple[MethodChange, str]]:
    """The changes that touch a run, each with its text filled in.

    Parameters
    ----------
    manifest : dict
        The run's manifest.
    edge_cells : int, optional
        Cells with data that touch a data edge (the report's terrain figures).

    Returns
    -------
    list of (MethodChange, str)

    Examples
    --------
    >>> m = {"grid": {"valid_cells": 1000}, "rain": [{"name": "dry", "steady_mm_per_day": 0.0}]}
    >>> [c.key for c, _ in changes_for(m, edge_cells=40)]
    ['edge_slopes', 'dry_case']
    >>> changes_for(m, edge_cells=40)[0][1].split(". In this run ")[1][:40]
    '40 cells (4.0 % of the cells with data) '
    """
    valid = (manifest.get("grid") or {}).get("valid_cells")
    if edge_cells is None or not valid:
        edge, share = "some", "a share"
    else:
        edge = f"{int(edge_cells):,}"
        pct = 100.0 * edge_cells / valid
        share = f"{pct:.1f} %" if pct >= 0.1 or pct == 0 else "< 0.1 %"
    searches = manifest.get("cluster_search") or []
    modular = f"{sum(int(r.get('modular_faces', 0)) for r in searches):,}" if searches else "no"
    out = []
    for change in CHANGES:
        if change.applies(manifest):
            out.append((change, change.text.format(edge_cells=edge, edge_share=share,
                                                   modular_faces=modular)))
    return out
