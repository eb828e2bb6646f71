"""The layers, styles and overlays of the report's pan-and-zoom map, as data for the page.

:func:`explorer_data` gathers what ``templates/explorer.js`` draws: the
hillshade base, one layer per mapped product and rain case (the run's
writer made its quantised copy, :mod:`slopescreen.report.explorer`), the
arrays a click reads (FS, probability of failure, soil unit, slope, cluster
id, corridor segment), and the line overlays (centreline, mapped landslides,
corridor segment strips, runout paths reaching the corridor, failing
cluster outlines). Colours, band labels and legend entries come from the
styles of the product registry (:mod:`slopescreen.report.styles`,
:func:`slopescreen.report.map_layers.legend_entries`), so the interactive map
and the PNG maps read the same.
"""

from __future__ import annotations

import base64
import math

import numpy as np

from ..products import STYLES, spec
from .cautions import SHORT
from .explorer import (
    QUANTISERS, ExplorerCopy, block_factor, coarser, decimate, shade_png,
)
from .map_layers import (
    BAND_ALPHA, DRY_ALPHA, MAP_BACKGROUND, NO_VALUE_ALPHA, OUTLINE_COLOUR, SHADE_FLOOR,
    legend_entries,
)
from .map_parts import crs_label, hillshade
from .styles import FS_BANDS, NO_VALUE_COLOUR

__all__ = ["explorer_data", "ramp_lut", "within_budget", "SEGMENT_STRIP", "MAP_BUDGET_BYTES",
           "COARSENED_FIRST"]

SEGMENT_STRIP = {"label": "corridor segment strip", "colour": "#5c3d8a", "width": 1.0}
"""How the outlines of the corridor segment strips look on the interactive map."""

OUTLINED = ("factor_of_safety", "failure_probability", "cluster_fs_bound")
"""Layers whose PNG maps carry the failure cluster outlines."""

MAP_BUDGET_BYTES = 24_000_000
"""Most bytes of the map's data in the page (the report's other parts come on top)."""

COARSENED_FIRST = (("specific_catchment_area", "wetness", "slope"),
                   ("critical_recharge", "critical_recharge_class"),
                   ("factor_of_safety", "failure_probability", "cluster_fs_bound", "runout_count"))
"""Which layers go to a coarser level of the pyramid first when the map exceeds its budget:
the descriptive layers, then the critical recharge with its classes, the hazard layers last,
each group at most two levels (4 x 4 of its cells) before the next is touched. Ids, soil
units and segments are small and stay at the finest level."""


def _b64_size(copy) -> int:
    return 4 * -(-len(copy.png) // 3)


def within_budget(copies: dict, other_bytes: int, budget: int = MAP_BUDGET_BYTES) -> dict:
    """Copies, some taken to coarser levels of the pyramid, whose base64 fits ``budget``.

    Parameters
    ----------
    copies : dict
        Name -> :class:`~slopescreen.report.explorer.ExplorerCopy`.
    other_bytes : int
        Bytes of the rest of the map's data (hillshade, lines).
    budget : int

    Returns
    -------
    dict
        The same names; a layer of a group of :data:`COARSENED_FIRST` reduced by 2 x 2
        blocks per level (:func:`~slopescreen.report.explorer.coarser`) until the total
        fits or every group has gone as far as it may.

    Examples
    --------
    >>> import numpy as np
    >>> from slopescreen.report.explorer import explorer_copy
    >>> rng = np.random.default_rng(0)
    >>> c = {"s": explorer_copy("slope", rng.random((64, 64)) * 60, 1),
    ...      "f": explorer_copy("factor_of_safety", rng.random((64, 64)) * 3, 1)}
    >>> size = sum(4 * -(-len(x.png) // 3) for x in c.values())     # base64 bytes
    >>> small = within_budget(c, 0, budget=size * 3 // 4)
    >>> small["s"].k, small["f"].k
    (2, 1)
    """
    out = dict(copies)

    def total():
        return other_bytes + sum(_b64_size(c) for c in out.values())

    for group in COARSENED_FIRST:
        for _level in range(2):
            if total() <= budget:
                return out
            names = [n for n, c in out.items() if c.key in group and min(c.shape) > 1]
            for n in names:
                out[n] = coarser(out[n])
    return out


def ramp_lut(style) -> str:
    """The 256 colours of a ramp style as one hex string (``rrggbb`` each), low to high.

    Examples
    --------
    >>> from slopescreen.report.styles import SLOPE_STYLE
    >>> lut = ramp_lut(SLOPE_STYLE)
    >>> len(lut), lut[:6]
    (1536, 'f6f1e4')
    """
    rgba = style.cmap()(np.arange(256))
    rgb = np.rint(np.asarray(rgba)[:, :3] * 255.0).astype(np.uint8)
    return rgb.tobytes().hex()


def _class_lut(style, breaks) -> str:
    """A ramp LUT of the rain needed to fail that is constant within each class.

    The page colours a value by its bin of 256 along the log scale from
    ``vmin`` to ``vmax``; each bin takes the colour of the class holding the
    bin's middle value, so a class edge is placed to within half a bin
    (0.6 % of a decade on 1-1000 mm/day).
    """
    from .map_layers import recharge_colours

    colours = np.asarray(recharge_colours(style, len(breaks)))
    lo, hi = math.log10(style.vmin), math.log10(style.vmax)
    middle = 10.0 ** (lo + (np.arange(256) + 0.5) * (hi - lo) / 256.0)
    cls = np.searchsorted(np.asarray(breaks[:-1], dtype=np.float64), middle, side="left")
    rgb = np.rint(colours[cls] * 255.0).astype(np.uint8)
    return rgb.tobytes().hex()


def _style_of(key: str, outlined: bool, *, rates=(), extent_cells=None, values=None) -> dict:
    from matplotlib.colors import to_hex

    from .styles import bound_labels, recharge_breaks

    style = STYLES[key]
    q = QUANTISERS[key]
    out = {"kind": style.kind, "label": style.label, "alpha": style.alpha,
           "legend": legend_entries(style, True if outlined else None, (), True, rates=rates,
                                    values=values, extent_cells=extent_cells)}
    if style.kind == "bands":
        out["bands"] = [{"code": None if not math.isfinite(upper)
                         else 1 + int(round((upper - q.lo) / q.step)),
                         "colour": colour, "label": label} for upper, label, colour in FS_BANDS]
        out["alpha"] = BAND_ALPHA
    elif style.kind == "bound":   # two classes, drawn by the page as bands: below 1 or not
        possible, ruled_out = bound_labels(extent_cells)
        out["kind"] = "bands"
        out["bands"] = [{"code": 1 + int(round((1.0 - q.lo) / q.step)),
                         "colour": to_hex(style.colours[0]), "label": possible},
                        {"code": None, "colour": None, "label": ruled_out}]
    else:
        lut = ramp_lut(style)
        if style.kind == "recharge":
            lut = _class_lut(style, recharge_breaks(rates, values)[0])
        out.update(lut=lut, vmin=style.vmin, vmax=style.vmax, log=style.log,
                   below=style.transparent_below)
    if style.kind == "recharge":
        out["dry"] = {"colour": FS_BANDS[0][2], "alpha": DRY_ALPHA}
    return out


def _to_cells(x, y, left, top, cx, cy) -> list:
    """CRS coordinates as flat [col, row, col, row, ...] of the embedded grid (0.01 cell)."""
    cols = (np.asarray(x, dtype=np.float64) - left) / cx
    rows = (top - np.asarray(y, dtype=np.float64)) / cy
    return np.round(np.stack([cols, rows], 1).reshape(-1), 2).tolist()


def _segment_copy(segments, shape, k) -> ExplorerCopy:
    """The corridor segment index per embedded cell (the first segment of the block's cells)."""
    from .explorer import pack_png

    rows, cols = shape
    out_c = -(-cols // k)
    out_r = -(-rows // k)
    r, c = np.divmod(np.asarray(segments.cell, dtype=np.int64), cols)
    block = (r // k) * out_c + c // k
    seg = np.full(out_r * out_c, np.iinfo(np.int64).max, dtype=np.int64)
    np.minimum.at(seg, block, np.asarray(segments.segment, dtype=np.int64))
    values = np.where(seg == np.iinfo(np.int64).max, np.nan, seg).reshape(out_r, out_c)
    codes = QUANTISERS["corridor_segment"].encode(values)
    return ExplorerCopy("corridor_segment", (out_r, out_c), int(k), pack_png(codes))


def _line_overlays(lines, left, top, cx, cy, rain=None, suffix="") -> list:
    """Lines grouped by label into overlays."""
    groups: dict = {}
    for line in lines:
        label = line.get("label", "line")
        g = groups.setdefault(label, {"kind": "lines", "label": label + suffix,
                                      "colour": line.get("colour", "#1b1b1b"),
                                      "width": line.get("width", 2.0), "rain": rain, "paths": []})
        g["paths"].append(_to_cells(line["x"], line["y"], left, top, cx, cy))
    return list(groups.values())


def _strip_lines(segments) -> list:
    import shapely

    out = []
    for strip in segments.strips:
        for poly in getattr(strip, "geoms", [strip]):
            if poly.is_empty:
                continue
            for ring in [poly.exterior, *poly.interiors]:
                xy = shapely.get_coordinates(ring)
                out.append(SEGMENT_STRIP | {"x": xy[:, 0], "y": xy[:, 1]})
    return out


def explorer_data(written, grid, z, *, rains=(), soil=None, soil_labels=(), lines=(),
                  paths=None, segments=None, title="", rates=(), extent_cells=None) -> dict | None:
    """The data of the report's pan-and-zoom map, or None when no mapped product was copied.

    Parameters
    ----------
    written : slopescreen.pipeline.results.Written
        What the writer wrote, with its explorer copies.
    grid : slopescreen.grid.Grid
    z : numpy.ndarray
        The DEM (m; NaN nodata), for the hillshade.
    rains : sequence of str
        Rain-case names in scenario order.
    soil : ExplorerCopy, optional
        The soil unit index per embedded cell.
    soil_labels : sequence of str
        Unit labels in index order.
    lines : sequence of dict
        Lines on every map (centreline, mapped landslides), as the PNG maps take them.
    paths : dict, optional
        ``("runout_count", rain) -> lines``: the runout paths reaching the corridor.
    segments : slopescreen.corridor.segments.Segments, optional
    title : str
        Study title.
    rates : sequence of (str, float)
        Steady rain cases (name, mm/day): the classes of the rain needed to fail.
    extent_cells : int, optional
        Window of the cluster FS bound, cells on a side (its legend states it).

    Returns
    -------
    dict or None
        JSON-ready: ``grid``, ``shade``, ``arrays`` (id -> packed codes and
        their quantiser), ``layers``, ``values``, ``overlays``, ``caution``
        and the notes the page shows.
    """
    import json

    copies = written.explorer
    entries = [p for p in written.entries()
               if p["kind"] == "raster" and p["key"] in STYLES and (p["key"], p["rain"]) in copies]
    if not entries:
        return None
    k = block_factor(grid.shape)
    rows, cols = grid.shape
    t = grid.transform
    left, top, cx, cy = float(t.c), float(t.f), float(t.a) * k, float(-t.e) * k
    overlays = []
    if segments is not None:
        overlays += _line_overlays(_strip_lines(segments), left, top, cx, cy)
    centre = [ln for ln in lines if ln.get("label") != "mapped landslide"]
    slides = [ln for ln in lines if ln.get("label") == "mapped landslide"]
    overlays = _line_overlays(centre, left, top, cx, cy) + overlays
    overlays += _line_overlays(slides, left, top, cx, cy)
    for (_key, rain), found in sorted((paths or {}).items(), key=lambda kv: str(kv[0][1])):
        overlays += _line_overlays(found, left, top, cx, cy, rain=rain, suffix=f": {rain}")
    zs = decimate(z, k, "mean") if k > 1 else np.asarray(z, dtype=np.float32)
    shade = hillshade(zs, grid.dx_m * k, grid.dy_m * k) if np.isfinite(zs).any() else zs
    shade = base64.b64encode(shade_png(shade)).decode("ascii")
    del zs

    named = {name: copies[name] for name in copies}
    if soil is not None:
        named["soil"] = soil
    if segments is not None:
        named["segment"] = _segment_copy(segments, grid.shape, k)
    named = within_budget(named, len(shade) + len(json.dumps(overlays)))
    arrays: dict = {}
    ids: dict = {}
    for name, copy in named.items():
        ids[name] = f"a{len(arrays)}"
        arrays[ids[name]] = copy.as_dict()
    layers = []
    for p in entries:
        key, rain = p["key"], p["rain"]
        entry = spec(key)
        outlined = key in OUTLINED and ("cluster_labels", rain) in ids
        layers.append({
            "id": ids[(key, rain)], "key": key, "rain": rain,
            "title": entry.title + (f": {rain}" if rain else ""),
            "group": rain or "Terrain and recharge", "units": p["units"], "file": p["path"],
            "style": _style_of(key, outlined, rates=rates, extent_cells=extent_cells,
                               values=written.previews.get((key, rain))),
            "classes": ids.get(("critical_recharge_class", None))
            if key == "critical_recharge" else None})

    def per_rain(key):        # [rain, array id] in scenario order (the page keeps it)
        return [[r, ids[(key, r)]] for r in rains if (key, r) in ids]

    values = {"fs": per_rain("factor_of_safety"), "pf": per_rain("failure_probability"),
              "bound": per_rain("cluster_fs_bound"), "cluster": per_rain("cluster_labels"),
              "slope": ids.get(("slope", None)), "soil": ids.get("soil"),
              "segment": ids.get("segment")}
    for r in rains:
        if ("cluster_labels", r) in ids:
            overlays.append({"kind": "outline", "label": f"failure cluster outline: {r}",
                             "colour": OUTLINE_COLOUR, "width": 1.2, "rain": r,
                             "array": ids[("cluster_labels", r)]})
    rounding = {"fs": QUANTISERS["factor_of_safety"].rounding,
                "pf": QUANTISERS["failure_probability"].rounding,
                "slope": QUANTISERS["slope"].rounding}
    coarsest = max(c.k for c in named.values())
    decimation = None
    if coarsest > 1:
        levels = sorted({c.k for c in named.values()})
        sizes = ", ".join(f"{n} x {n}" for n in levels)
        decimation = (
            f"Values are at the displayed resolution: a map cell is a block of grid cells "
            f"({sizes}; {cx * grid.linear_unit_m / k * levels[0]:g} m and coarser), holding the "
            "least factor of safety, cluster FS bound and critical recharge of the block, the "
            "largest probability of failure and runout count, the worst critical-recharge "
            "class, the most common soil unit and the mean slope, wetness and specific "
            "catchment area (each value on a click says its block). For full detail open the "
            "GeoTIFF products (factor_of_safety_*.tif and the others) in a GIS.")
    return {
        "version": 1, "title": title, "caution": SHORT,
        "grid": {"rows": int(-(-rows // k)), "cols": int(-(-cols // k)), "k": int(k),
                 "full_rows": int(rows), "full_cols": int(cols), "left": left, "top": top,
                 "cell_x": cx, "cell_y": cy, "unit_m": float(grid.linear_unit_m),
                 "crs": crs_label(grid.crs)},
        "base": {"background": MAP_BACKGROUND, "floor": SHADE_FLOOR,
                 "no_value": {"colour": NO_VALUE_COLOUR, "alpha": NO_VALUE_ALPHA}},
        "shade": shade, "arrays": arrays, "layers": layers, "values": values,
        "overlays": overlays, "soil_labels": list(soil_labels),
        "segments": None if segments is None else {
            "from_m": np.round(np.asarray(segments.from_m, dtype=np.float64), 1).tolist(),
            "to_m": np.round(np.asarray(segments.to_m, dtype=np.float64), 1).tolist()},
        "rounding": rounding, "decimation": decimation,
    }
