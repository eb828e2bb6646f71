"""The first screen's overview map: the factor-of-safety classes of the worst rain case, with
the worst places numbered.

The worst rain case is the one with the largest share of its computed area below FS 1. Its
worst places are the least stable failing clusters when the cluster stage ran, otherwise the
largest connected patches of cells with FS < 1 (8-connected, at the maps' display stride).
"""

from __future__ import annotations

import numpy as np

from .cautions import SHORT

WORST_PLACES = 5
"""Places numbered on the overview map and listed beside it."""


def worst_case(facts_by_case: dict) -> str | None:
    """Name of the rain case with the largest share below FS 1 (the first on a tie).

    Examples
    --------
    >>> worst_case({"dry": {"fail_share": 0.01}, "wet": {"fail_share": 0.2}})
    'wet'
    """
    best, share = None, -1.0
    for name, f in facts_by_case.items():
        if f is not None and f["fail_share"] > share:
            best, share = name, f["fail_share"]
    return best


def patch_places(fs, *, extent, cell_area_m2, step=1, most=WORST_PLACES) -> list[dict]:
    """The largest connected patches of FS < 1, largest first.

    Parameters
    ----------
    fs : numpy.ndarray, shape (rows, cols)
        Factor of safety at the display stride ``step`` (NaN no value).
    extent : tuple of float
        (left, right, bottom, top) of the grid in CRS units.
    cell_area_m2 : float
        Area of one cell of the full grid.
    step : int
        Display stride: a shown cell stands for ``step**2`` cells.
    most : int

    Returns
    -------
    list of dict
        ``easting``, ``northing`` (centroid), ``area_m2``, ``fs`` (least FS).

    Examples
    --------
    >>> fs = np.array([[0.5, 0.6, 2.0], [2.0, 2.0, 2.0], [2.0, 2.0, 0.9]])
    >>> [p["area_m2"] for p in patch_places(fs, extent=(0, 3, 0, 3), cell_area_m2=1.0)]
    [2.0, 1.0]
    """
    from scipy import ndimage

    f = np.asarray(fs, dtype=np.float64)
    fails = np.isfinite(f) & (f < 1.0)
    labels, n = ndimage.label(fails, structure=np.ones((3, 3), dtype=bool))
    if n == 0:
        return []
    index = np.arange(1, n + 1)
    sizes = ndimage.sum_labels(fails, labels, index)
    least = ndimage.minimum(f, labels, index)
    centres = ndimage.center_of_mass(fails, labels, index)
    rows, cols = f.shape
    left, right, bottom, top = extent
    order = np.argsort(-sizes, kind="stable")[:most]
    return [{"easting": left + (centres[i][1] + 0.5) * (right - left) / cols,
             "northing": top - (centres[i][0] + 0.5) * (top - bottom) / rows,
             "area_m2": float(sizes[i]) * cell_area_m2 * step * step, "fs": float(least[i])}
            for i in order]


def cluster_places(records, case, most=WORST_PLACES) -> list[dict]:
    """The least stable failing clusters of ``case``, least FS first.

    Examples
    --------
    >>> rows = [{"rain": "wet", "id": 1, "fs": 0.9, "area_m2": 50.0, "centroid_easting": 1.0,
    ...          "centroid_northing": 2.0}]
    >>> cluster_places(rows, "wet")[0]["cluster"]
    1
    """
    mine = sorted((r for r in records if r["rain"] == case), key=lambda r: r["fs"])[:most]
    return [{"easting": r["centroid_easting"], "northing": r["centroid_northing"],
             "area_m2": float(r["area_m2"]), "fs": float(r["fs"]), "cluster": r["id"]}
            for r in mine]


def overview_png(fs, *, frame, shade, places, lines=(), title="", dpi=100) -> bytes:
    """A small map of the FS classes with the places numbered, as PNG bytes.

    Parameters
    ----------
    fs : numpy.ndarray
        Factor of safety at the display stride (NaN no value).
    frame : MapFrame
    shade : numpy.ndarray
        Hillshade in [0, 1], same shape.
    places : list of dict
        ``easting``, ``northing`` of each place, numbered in order from 1.
    lines : sequence of dict
        Lines to draw (the corridor centreline, mapped landslides).
    title : str
        What the map shows, drawn above it.
    """
    from matplotlib.figure import Figure
    from matplotlib.patches import Patch

    from .map_layers import draw_product
    from .map_parts import add_north_arrow, add_scale_bar
    from .maps import png_bytes
    from .styles import FS_BANDS, FS_STYLE

    left, right, bottom, top = frame.extent
    aspect = (top - bottom) / max(right - left, 1e-9)
    w_in = 6.4
    map_w = 4.3
    map_h = min(max(map_w * aspect, 2.0), 4.6)
    fig = Figure(figsize=(w_in, map_h + 0.75), dpi=dpi, facecolor="white")
    ax = fig.add_axes((0.02, 0.45 / (map_h + 0.75), map_w / w_in, map_h / (map_h + 0.75)))
    ax.set_facecolor("#e9e9e9")
    ax.imshow(0.35 + 0.65 * np.asarray(shade, dtype=np.float32), cmap="gray", vmin=0.0,
              vmax=1.0, extent=frame.extent, origin="upper", interpolation="nearest", zorder=1)
    draw_product(fs, FS_STYLE, extent=frame.extent, ax=ax)
    for line in lines:
        ax.plot(line["x"], line["y"], color=line.get("colour", "#1b1b1b"),
                linewidth=0.8 * line.get("width", 2.0), zorder=7)
    for i, p in enumerate(places, start=1):
        ax.annotate(str(i), (p["easting"], p["northing"]), xytext=(7, 7),
                    textcoords="offset points", fontsize=9, fontweight="bold", zorder=9,
                    bbox={"boxstyle": "circle,pad=0.2", "facecolor": "white",
                          "edgecolor": "#1b1b1b", "linewidth": 0.8},
                    arrowprops={"arrowstyle": "-", "color": "#1b1b1b", "linewidth": 0.8})
    ax.set_xlim(left, right)
    ax.set_ylim(bottom, top)
    ax.set_aspect("equal", adjustable="box", anchor="NW")
    ax.set_xticks([])
    ax.set_yticks([])
    add_scale_bar(ax, frame)
    add_north_arrow(ax)
    handles = [Patch(facecolor=c or "white", edgecolor="none" if c else "#555555", label=label)
               for _, label, c in FS_BANDS]
    lax = fig.add_axes((0.02 + map_w / w_in + 0.01, 0.3, 1.0 - map_w / w_in - 0.04, 0.6))
    lax.axis("off")
    lax.legend(handles=handles, loc="upper left", fontsize=7, title="Factor of safety",
               title_fontsize=7.5, frameon=False, alignment="left", borderaxespad=0.0)
    if title:
        fig.text(0.02, 1.0 - 0.28 / (map_h + 0.75), title, fontsize=9.5, fontweight="bold",
                 parse_math=False)
    fig.text(0.02, 0.08 / (map_h + 0.75), SHORT, fontsize=6, color="#8a1c1c", wrap=True,
             parse_math=False)
    return png_bytes(fig, title=title or "Overview", palette=True)
