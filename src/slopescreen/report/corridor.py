"""The corridor and runout parts of the report: worst stretches, the strip chart, the why.

Plain functions of the rows of ``corridor_segments`` and ``runout_paths``
(docs/methods.md, "Runout reach" and "Corridor segments and strips").
"""

from __future__ import annotations

import numpy as np

from .summaries import NBSP

WORST_SEGMENTS = 10
"""Segments listed per rain case in the report's table of the worst."""


def _m(value) -> str:
    return f"{value:,.0f}{NBSP}m"


def stretch_text(a, b) -> str:
    """A chainage range in words, e.g. ``300–600 m``.

    Examples
    --------
    >>> stretch_text(300.0, 600.0).replace("\\u00a0", " ")
    '300–600 m'
    """
    return f"{a:,.0f}–{b:,.0f}{NBSP}m"


def worst_stretches(rows, *, top=5, most=3) -> list:
    """The worst stretches of a rain case: its ``top`` segments by hazard, joined where they touch.

    Parameters
    ----------
    rows : list of dict
        ``corridor_segments`` rows of one rain case.
    top : int
        Segments (with hazard > 0) considered, best rank first.
    most : int
        Stretches returned, worst first.

    Returns
    -------
    list of (from_m, to_m, largest segment hazard m^3)

    Examples
    --------
    >>> rows = [{"from_m": 0, "to_m": 100, "hazard": 5.0, "hazard_rank": 2},
    ...         {"from_m": 100, "to_m": 200, "hazard": 9.0, "hazard_rank": 1},
    ...         {"from_m": 200, "to_m": 300, "hazard": 0.0, "hazard_rank": 4},
    ...         {"from_m": 300, "to_m": 400, "hazard": 1.0, "hazard_rank": 3}]
    >>> worst_stretches(rows)
    [(0, 200, 9.0), (300, 400, 1.0)]
    """
    picked = sorted((r for r in rows if r["hazard"] > 0), key=lambda r: r["hazard_rank"])[:top]
    picked.sort(key=lambda r: r["from_m"])
    stretches = []
    for r in picked:
        if stretches and abs(stretches[-1][1] - r["from_m"]) < 1e-6:
            a, _, h = stretches[-1]
            stretches[-1] = (a, r["to_m"], max(h, r["hazard"]))
        else:
            stretches.append((r["from_m"], r["to_m"], r["hazard"]))
    stretches.sort(key=lambda s: -s[2])
    return stretches[:most]


def corridor_sentence(rain, rows) -> str:
    """One sentence for the first screen: the worst stretches of the corridor under a rain case.

    Examples
    --------
    >>> rows = [{"from_m": 0, "to_m": 100, "hazard": 0.0, "hazard_rank": 1, "reached": 0}]
    >>> corridor_sentence("wet", rows)
    'Along the corridor under “wet”, no failure source’s runout reaches any of the 1 segments.'
    """
    reached = sum(1 for r in rows if r["reached"])
    if not reached:
        return (f"Along the corridor under “{rain}”, no failure source’s runout reaches any of "
                f"the {len(rows)} segments.")
    parts = [f"{stretch_text(a, b)} (up to {h:,.0f}{NBSP}m³ per segment)"
             for a, b, h in worst_stretches(rows)]
    listed = parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1]
    return (f"Along the corridor under “{rain}”, runout can reach {reached} of {len(rows)} "
            f"segments; the worst stretches by expected failed volume reaching the line are "
            f"chainage {listed}.")


def why_text(row) -> str:
    """Why a segment ranks where it does, in words.

    Examples
    --------
    >>> why_text({"sources": 2, "max_source_volume_m3": 850.0, "min_source_fs": 0.91,
    ...           "max_source_failure_probability": 0.4, "area_fs_below_1_m2": 0.0,
    ...           "engineered_ground_m2": 0.0}).replace("\\u00a0", " ")
    '2 sources reach it (largest 850 m³, least FS 0.91, largest P_f 0.40)'
    """
    out = []
    n = row["sources"]
    if n:
        p = row["max_source_failure_probability"]
        ptext = "" if p != p else f", largest P_f {p:.2f}"
        out.append(f"{n} source{'s' if n != 1 else ''} reach{'es' if n == 1 else ''} it (largest "
                   f"{row['max_source_volume_m3']:,.0f}{NBSP}m³, least FS "
                   f"{row['min_source_fs']:.2f}{ptext})")
    if row["area_fs_below_1_m2"] > 0:
        out.append(f"{row['area_fs_below_1_m2']:,.0f}{NBSP}m² of the strip itself has FS < 1")
    if row["engineered_ground_m2"] > 0:
        out.append(f"{row['engineered_ground_m2']:,.0f}{NBSP}m² of cut or fill in the strip")
    return "; ".join(out) if out else "nothing reaches it and its strip is stable"


def worst_table_rows(rows, *, n=WORST_SEGMENTS) -> list:
    """Table rows of the ``n`` worst segments of one rain case (those with any hazard or failing
    strip), best rank first: segment, chainage, hazard, why."""
    worst = sorted((r for r in rows if r["hazard"] > 0 or r["area_fs_below_1_m2"] > 0),
                   key=lambda r: r["hazard_rank"])[:n]
    return [[str(r["hazard_rank"]), str(r["segment"]), stretch_text(r["from_m"], r["to_m"]),
             f"{r['hazard']:,.0f}{NBSP}m³", why_text(r)] for r in worst]


def strip_chart(rows_by_rain: dict, *, title: str = "", dpi=100) -> bytes:
    """PNG of the hazard along the chainage, one step line per rain case.

    Parameters
    ----------
    rows_by_rain : dict
        Rain case -> its ``corridor_segments`` rows.
    title : str
        Study title, under the chart's own title.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from .cautions import SHORT
    from .maps import png_bytes

    fig = Figure(figsize=(9.6, 3.6), dpi=dpi, facecolor="white")
    FigureCanvasAgg(fig)
    ax = fig.add_axes((0.08, 0.24, 0.70, 0.62))
    colours = ("#8f2140", "#24517f", "#d9622b", "#4f7a28", "#6b4023", "#5a3d8a")
    for i, (rain, rows) in enumerate(rows_by_rain.items()):
        if not rows:
            continue
        edges = np.array([rows[0]["from_m"]] + [r["to_m"] for r in rows])
        hazard = np.array([r["hazard"] for r in rows] + [rows[-1]["hazard"]])
        ax.step(edges, hazard, where="post", color=colours[i % len(colours)], linewidth=1.6,
                label=rain)
    ax.set_xlabel("Chainage (m)", fontsize=8.5)
    ax.set_ylabel("Expected failed volume\nreaching the segment (m³)", fontsize=8.5)
    ax.tick_params(labelsize=7.5)
    ax.grid(True, color="#dddddd", linewidth=0.6)
    ax.set_ylim(bottom=0.0)
    ax.legend(title="rain case", fontsize=7.5, title_fontsize=8, frameon=False,
              loc="upper left", bbox_to_anchor=(1.01, 1.0))
    fig.text(0.08, 0.93, "Hazard along the corridor", fontsize=11, fontweight="bold",
             parse_math=False)
    if title:
        fig.text(0.40, 0.93, title, fontsize=8.5, color="#333333", parse_math=False)
    fig.text(0.08, 0.03, SHORT, fontsize=7, color="#8a1c1c", fontweight="bold",
             parse_math=False, wrap=True)
    return png_bytes(fig, title="Hazard along the corridor")
