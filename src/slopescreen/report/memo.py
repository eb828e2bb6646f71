"""The run in one table for memos and spreadsheets: ``summary.csv`` and ``summary.json``.

One row per rain case: the case (with its return period and source when the
scenario gives them), the area and share in each factor-of-safety class, the
area and share with a probability of failure P_f of at least 0.1 and 0.5,
the failing clusters, and the worst stretches of the corridor. Every number
is one the report quotes; the files add no computation. Shares are of the
area where the model was computed.
"""

from __future__ import annotations

import csv
import io
import json

from .corridor import worst_stretches
from .styles import FS_CLASS_NAMES

CLASS_FIELDS = ("fails", "thin_margin", "some_margin", "ample_margin")
"""Field stems of the four factor-of-safety classes (:data:`~.styles.FS_CLASS_NAMES`)."""

FIELDS = (
    ("rain_case", "name of the rain case"),
    ("rain", "the rain case in words"),
    ("return_period_years", "return period the case stands for (scenario), years"),
    ("source", "where the case comes from (scenario)"),
    ("computed_area_m2", "area where the model was computed, m2"),
    *((f"{stem}_area_m2", f"area {name}, m2") for stem, name in zip(CLASS_FIELDS, FS_CLASS_NAMES)),
    *((f"{stem}_share", f"share {name}") for stem, name in zip(CLASS_FIELDS, FS_CLASS_NAMES)),
    ("pf_at_least_0_1_area_m2", "area with a probability of failure P_f >= 0.1, m2"),
    ("pf_at_least_0_1_share", "share with P_f >= 0.1"),
    ("pf_at_least_0_5_area_m2", "area with P_f >= 0.5, m2"),
    ("pf_at_least_0_5_share", "share with P_f >= 0.5"),
    ("clusters", "failing multi-cell clusters"),
    ("cluster_area_m2", "total area of the failing clusters, m2"),
    ("largest_cluster_area_m2", "area of the largest failing cluster, m2"),
    ("least_cluster_fs", "least factor of safety of a failing cluster"),
    ("corridor_segments_reached", "corridor segments that runout can reach"),
    ("corridor_segments", "corridor segments"),
    ("worst_stretches", "worst stretches of the corridor: chainage from-to m (largest "
                        "expected failed volume per segment, m3), worst first"),
)
"""Columns of ``summary.csv`` (and keys of each row of ``summary.json``) with their meaning."""


def summary_rows(rain_records, figures, *, clusters=None, corridor=None) -> list[dict]:
    """One row per rain case (see :data:`FIELDS`); None where a stage did not run.

    Parameters
    ----------
    rain_records : list of dict
        The ``rain`` records of ``manifest.json``.
    figures : mapping of str to CaseFigures
        The figures of each case (:mod:`slopescreen.report.figures`).
    clusters : sequence of dict or None
        Rows of the failing clusters (``rain``, ``area_m2``, ``fs``); None when
        the cluster stage did not run.
    corridor : sequence of dict or None
        Rows of ``corridor_segments`` (``rain``, ``from_m``, ``to_m``, ``hazard``,
        ``hazard_rank``, ``reached``); None without a corridor.

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.report.figures import case_figures
    >>> f = case_figures("wet", np.array([[0.8, 2.0], [1.2, 1.4]]), cell_area_m2=10.0)
    >>> row = summary_rows([{"name": "wet", "steady_mm_per_day": 40.0}], {"wet": f})[0]
    >>> row["fails_area_m2"], row["fails_share"], row["clusters"]
    (10.0, 0.25, None)
    """
    from .summaries import rain_text

    rows = []
    for case in rain_records:
        name = case["name"]
        fig = figures.get(name)
        if fig is None:
            continue
        f = fig.facts
        row = {"rain_case": name, "rain": rain_text(case),
               "return_period_years": case.get("return_period_years"),
               "source": case.get("source"), "computed_area_m2": f["computed_m2"]}
        for stem, (_label, area, share) in zip(CLASS_FIELDS, fig.bands):
            row[f"{stem}_area_m2"] = area
            row[f"{stem}_share"] = share
        row |= {"pf_at_least_0_1_area_m2": f["pf10_m2"], "pf_at_least_0_1_share": f["pf10_share"],
                "pf_at_least_0_5_area_m2": f["pf_m2"], "pf_at_least_0_5_share": f["pf_share"]}
        mine = [r for r in clusters or () if r["rain"] == name]
        row |= ({"clusters": len(mine),
                 "cluster_area_m2": float(sum(r["area_m2"] for r in mine)),
                 "largest_cluster_area_m2": max((float(r["area_m2"]) for r in mine), default=None),
                 "least_cluster_fs": min((float(r["fs"]) for r in mine), default=None)}
                if clusters is not None else dict.fromkeys(
                    ("clusters", "cluster_area_m2", "largest_cluster_area_m2",
                     "least_cluster_fs")))
        segs = [r for r in corridor if r["rain"] == name] if corridor is not None else []
        row["corridor_segments_reached"] = sum(1 for r in segs if r["reached"]) if segs else None
        row["corridor_segments"] = len(segs) if segs else None
        row["worst_stretches"] = "; ".join(
            f"{a:.0f}-{b:.0f} m ({h:.0f} m3)" for a, b, h in worst_stretches(segs)) if segs else None
        rows.append(row)
    return rows


def summary_json(rows, *, project, caution) -> bytes:
    """``summary.json``: the caution, the project block, the column meanings and the rows."""
    doc = {"caution": caution, "project": project or None,
           "fields": dict(FIELDS), "rain_cases": rows}
    return (json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False) + "\n").encode()


def summary_csv(rows, *, caution) -> bytes:
    """``summary.csv``: a first line with the caution, then a header and one row per case.

    Empty cells where a value does not apply; shares as fractions (0-1).

    Examples
    --------
    >>> text = summary_csv([], caution="Screening only.").decode()
    >>> text.splitlines()[0]
    '# Screening only.'
    """
    buf = io.StringIO()
    buf.write("# " + " ".join(caution.split()) + "\r\n")   # as corridor_segments.csv
    w = csv.writer(buf)
    w.writerow([k for k, _ in FIELDS])
    for row in rows:
        w.writerow(["" if row.get(k) is None else _cell(row[k]) for k, _ in FIELDS])
    return buf.getvalue().encode("utf-8")


def _cell(v):
    return f"{v:.6g}" if isinstance(v, float) else v
