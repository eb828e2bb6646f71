"""The report's account of the agreement with mapped landslides.

:func:`agreement_sentence` is the first screen's one sentence,
:func:`agreement_chart` the ROC and success-rate curves, :func:`score_rows`
the table of scores; :func:`dates_caution` the warning when the DEM was made
after the landslides. Every number comes from ``inventory_scores.json``
(docs/methods.md, "Agreement with mapped landslides").
"""

from __future__ import annotations


__all__ = ["agreement_sentence", "agreement_chart", "score_rows", "unit_rows", "dates_caution"]

COLOURS = ("#8f2140", "#24517f", "#d9622b", "#4f7a28", "#6b4023", "#5a3d8a")
"""Line colours of the rain cases on the chart (the critical recharge is grey)."""


def _auc_text(row) -> str:
    lo, hi = row["auc_interval"]
    return f"{row['auc']:.2f} ({lo:.2f}–{hi:.2f})"


def agreement_sentence(doc: dict) -> str | None:
    """One sentence: how well the factor of safety ranks the mapped landslides, per rain case.

    Examples
    --------
    >>> doc = {"inventory": {"landslides_scored": 9, "cells": 148},
    ...        "scores": [{"product": "factor_of_safety", "rain": "wet", "auc": 0.81,
    ...                    "auc_interval": [0.74, 0.87]}]}
    >>> print(agreement_sentence(doc))  # doctest: +NORMALIZE_WHITESPACE
    Against the 9 mapped landslides (148 cells), the factor of safety ranks their cells above
    the other cells with an AUC of 0.81 (0.74–0.87) under “wet” (95 % interval from a bootstrap
    over landslides; 0.5 is no better than chance, 1 a perfect ranking).
    """
    rows = [r for r in doc.get("scores", []) if r["product"] == "factor_of_safety"
            and r.get("auc") is not None]
    if not rows:
        return None
    inv = doc["inventory"]
    parts = [f"{_auc_text(r)} under “{r['rain']}”" for r in rows]
    joined = parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1]
    return (f"Against the {inv['landslides_scored']:,} mapped landslides ({inv['cells']:,} cells), "
            f"the factor of safety ranks their cells above the other cells with an AUC of "
            f"{joined} (95 % interval from a bootstrap over landslides; 0.5 is no better than "
            "chance, 1 a perfect ranking).")


def _pct(x) -> str:
    return "—" if x is None else f"{100.0 * x:.0f} %"


def score_rows(doc: dict) -> list[list[str]]:
    """Rows of the scores table: product, rain case, AUC and interval, DeLong SE, success area,
    threshold scores, sample sizes."""
    out = []
    for r in doc.get("scores", []):
        name = r["label"]
        rain = r["rain"] or "every case"
        if r.get("auc") is None:
            out.append([name, rain, "not scored: " + str(r.get("not_scored", ""))]
                       + [""] * (len(SCORE_HEADER) - 3))
            continue
        t = r.get("threshold") or {}
        out.append([
            name, rain, _auc_text(r), f"{r['delong_se']:.3f}", f"{r['success_area']:.2f}",
            t.get("rule", "—"), _pct(t.get("true_positive_rate")),
            _pct(t.get("area_flagged_share")), _pct(t.get("landslides_hit_share")),
            "—" if t.get("true_skill_statistic") is None else f"{t['true_skill_statistic']:.2f}",
            f"{r['n_landslides']:,} / {r['n_positive_cells']:,} / {r['n_negative_cells']:,}",
        ])
    return out


SCORE_HEADER = ["product", "rain case", "AUC (95 % interval)", "DeLong SE", "success-rate area",
                "threshold", "landslide cells flagged", "area flagged", "landslides hit",
                "true skill", "landslides / their cells / other cells"]
"""Columns of :func:`score_rows`."""


def unit_rows(doc: dict) -> list[list[str]]:
    """Rows of the per-soil-unit table (units with enough landslides), and those skipped."""
    out = []
    for r in doc.get("scores", []):
        for u in r.get("units", []):
            out.append([f"{u['label']} ({u['unit']})", r["label"], r["rain"] or "every case",
                        _auc_text(u), f"{u['success_area']:.2f}",
                        f"{u['n_landslides']:,} / {u['n_positive_cells']:,} / "
                        f"{u['n_negative_cells']:,}"])
    return out


def dates_caution(doc: dict) -> str | None:
    """The warning when the DEM postdates the landslides (their scars are in the DEM).

    Examples
    --------
    >>> dates_caution({"inventory": {"date": "2021-01-15", "dem_date": "2022-03-01"}})[:40]
    'The DEM (2022-03-01) was made after the '
    >>> dates_caution({"inventory": {"date": "2021-01-15", "dem_date": None}}) is None
    True
    """
    inv = doc.get("inventory", {})
    made, slid = inv.get("dem_date"), inv.get("date")
    if not made or not slid or made <= slid:
        return None
    return (f"The DEM ({made}) was made after the mapped landslides ({slid}): their scars and "
            "deposits are in the DEM, so the slope, the flow paths and the wetness at the "
            "landslides are those of the ground after failure (scars are often steeper at the "
            "head and gentler below). The agreement measured here may be higher or lower than "
            "a map made before the landslides would have shown.")


def agreement_chart(doc: dict, *, title: str = "", dpi=100) -> bytes:
    """PNG: ROC curves (left) and success-rate curves (right) of the scored products.

    Factor of safety and probability of failure are drawn per rain case (solid,
    dashed), the critical recharge in grey; the diagonal is a ranking no
    better than chance.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from .cautions import SHORT
    from .maps import png_bytes

    rows = [r for r in doc.get("scores", []) if r.get("roc") is not None
            and r["product"] in ("factor_of_safety", "failure_probability", "critical_recharge")]
    rains = list(dict.fromkeys(r["rain"] for r in rows if r["rain"] is not None))
    fig = Figure(figsize=(9.6, 4.4), dpi=dpi, facecolor="white")
    FigureCanvasAgg(fig)
    roc = fig.add_axes((0.06, 0.20, 0.27, 0.64))
    success = fig.add_axes((0.40, 0.20, 0.27, 0.64))
    short = {"factor_of_safety": "FS", "failure_probability": "probability of failure",
             "critical_recharge": "critical recharge"}
    for r in rows:
        if r["rain"] is None:
            colour, style = "#777777", ":"
        else:
            colour = COLOURS[rains.index(r["rain"]) % len(COLOURS)]
            style = "-" if r["product"] == "factor_of_safety" else "--"
        label = short[r["product"]] + (f", {r['rain']}" if r["rain"] else "") + f" ({r['auc']:.2f})"
        roc.plot(r["roc"]["false_positive_rate"], r["roc"]["true_positive_rate"], style,
                 color=colour, linewidth=1.5, label=label)
        success.plot(r["success_rate"]["area_share"], r["success_rate"]["captured_share"], style,
                     color=colour, linewidth=1.5)
    for ax, xl, yl, name in ((roc, "Share of other cells ranked as hazardous",
                              "Share of landslide cells", "ROC"),
                             (success, "Share of the area, most hazardous first",
                              "Share of landslide cells captured", "Success rate")):
        ax.plot([0, 1], [0, 1], color="#bbbbbb", linewidth=0.8)
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 1)
        ax.set_xlabel(xl, fontsize=8)
        ax.set_ylabel(yl, fontsize=8)
        ax.set_title(name, fontsize=9)
        ax.tick_params(labelsize=7.5)
        ax.grid(True, color="#eeeeee", linewidth=0.6)
    if rows:
        fig.legend(*roc.get_legend_handles_labels(), title="product, rain case (AUC)",
                   fontsize=7, title_fontsize=7.5, frameon=False, loc="upper left",
                   bbox_to_anchor=(0.69, 0.84))
    fig.text(0.07, 0.93, "Agreement with the mapped landslides", fontsize=11,
             fontweight="bold", parse_math=False)
    if title:
        fig.text(0.48, 0.93, title, fontsize=8.5, color="#333333", parse_math=False)
    fig.text(0.07, 0.03, SHORT, fontsize=7, color="#8a1c1c", fontweight="bold",
             parse_math=False, wrap=True)
    return png_bytes(fig, title="Agreement with the mapped landslides")

