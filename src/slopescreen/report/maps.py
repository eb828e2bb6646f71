"""Maps of the products over a hillshade of the DEM (PNG, matplotlib Agg).

Every map carries what a reader needs to use it on its own: a legend with
units, a scale bar, a north arrow, the CRS, the rain case and the one-line
caution. Figures are built on :class:`matplotlib.figure.Figure` with the Agg
canvas directly, so no GUI backend is ever touched.

How a product is drawn, and in which colours, is set by the style of its
entry in the product registry (:mod:`slopescreen.products`); a product whose
entry has a style gets a map, titled with the entry's title.

The parts live in modules of their own: the styles and colours in
:mod:`~slopescreen.report.styles`, the hillshade, frame, scale bar and
north arrow in :mod:`~slopescreen.report.map_parts`, the product layer and
its legend entries in :mod:`~slopescreen.report.map_layers`. Every name
stays importable from this module.
"""

from __future__ import annotations

import io
import math
import textwrap

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.collections import LineCollection
from matplotlib.figure import Figure

from ..errors import InputError
from .cautions import SHORT
from ..products import STYLES, spec
from .map_layers import (
    MAP_BACKGROUND, OUTLINE_COLOUR, SHADE_FLOOR, _legend_handles, _outline_segments, draw_product,
)
from .map_parts import (
    MapFrame, add_north_arrow, add_scale_bar, crs_label, hillshade, nice_length,
)
from .styles import FS_BANDS, Style, fs_band

__all__ = [
    "FS_BANDS", "STYLES", "MapFrame", "Style", "hillshade", "fs_band", "nice_length",
    "draw_product", "add_scale_bar", "add_north_arrow", "map_figure", "png_bytes", "product_maps",
    "crs_label", "display_step",
]


def _layout(extent, map_width_in=6.2, max_height_in=7.0):
    """Figure size and axes rectangles (inches) that keep the map's aspect ratio."""
    left, right, bottom, top = extent
    ratio = (top - bottom) / (right - left)
    w = map_width_in
    h = w * ratio
    if h > max_height_in:
        h, w = max_height_in, max_height_in / ratio
    h = max(h, 2.5)
    margin_l, gap, panel, margin_r = 0.85, 0.3, 2.7, 0.15
    header, footer = 0.95, 1.05
    fig_w = margin_l + max(w, 4.0) + gap + panel + margin_r
    fig_h = header + max(h, 3.4) + footer
    return {"size": (fig_w, fig_h), "map": (margin_l, footer, w, h),
            "panel": (margin_l + max(w, 4.0) + gap, footer, panel, max(h, 3.4)),
            "header": fig_h - header, "footer": footer}


def map_figure(values, key, *, frame: MapFrame, shade=None, title="", subtitle="", rain_text="",
               classes=None, no_value=None, outlines=None, lines=None, rates=(),
               extent_cells=None, caution=SHORT, dpi=100):
    """A complete map of one product: hillshade, layer, legend, scale, north, CRS, caution.

    Parameters
    ----------
    values : array_like, shape (rows, cols)
        The product, in its units (NaN = no value).
    key : str
        Manifest key; selects the style in :data:`STYLES`.
    frame : MapFrame
    shade : array_like, optional
        Hillshade in [0, 1] (:func:`hillshade`), same shape.
    title, subtitle : str
        Map title (product name) and second line (study title). Drawn as
        plain text: user text is never parsed as mathtext.
    rain_text : str
        The rain case shown, in words (or why the product has none).
    classes : array_like of int, optional
        Critical-recharge classes (see :func:`draw_product`).
    no_value : array_like of bool, optional
        Cells with a DEM value but no product value.
    outlines : array_like of int, optional
        Cluster labels (0 = none); drawn as outlines.
    lines : list of dict, optional
        Lines drawn on top (a corridor, outlines of mapped landslides, runout
        paths): ``{"x": array, "y": array, "label": str}`` in CRS units, with
        optional ``"colour"`` and ``"width"`` (points); one legend entry per label.
    rates : sequence of (str, float)
        The scenario's steady rain cases (name, mm/day): the class breaks of
        the rain needed to fail (:func:`~slopescreen.report.styles.recharge_breaks`).
    extent_cells : int, optional
        Window of the cluster FS bound, cells on a side (its legend states it).
    caution : str
        One-line caution for the footer.
    dpi : float

    Returns
    -------
    matplotlib.figure.Figure
        With attribute ``map_ax`` (the map axes).

    Raises
    ------
    InputError
        Unknown key or arrays of different shapes.

    Examples
    --------
    >>> import numpy as np
    >>> fs = np.array([[0.8, 1.2], [1.4, 3.0]])
    >>> fig = map_figure(fs, "factor_of_safety", frame=MapFrame((0.0, 10.0, 0.0, 10.0)))
    >>> png_bytes(fig)[:4]
    b'\\x89PNG'
    """
    if key not in STYLES:
        raise InputError(f"key: no map style for product {key!r}; known: {', '.join(sorted(STYLES))}")
    style = STYLES[key]
    v = np.asarray(values)
    for name, arr in (("shade", shade), ("classes", classes), ("no_value", no_value),
                      ("outlines", outlines)):
        if arr is not None and np.shape(arr) != v.shape:
            raise InputError(f"{name}: shape {np.shape(arr)} differs from the product {v.shape}")
    extent = frame.extent
    lay = _layout(extent)
    fw, fh = lay["size"]

    def rect(x, y, w, h):
        return (x / fw, y / fh, w / fw, h / fh)

    fig = Figure(figsize=(fw, fh), dpi=dpi, facecolor="white")
    FigureCanvasAgg(fig)
    ax = fig.add_axes(rect(*lay["map"]))
    ax.set_facecolor(MAP_BACKGROUND)
    if shade is not None:
        ax.imshow(SHADE_FLOOR + (1.0 - SHADE_FLOOR) * np.asarray(shade, dtype=np.float32), cmap="gray", vmin=0.0, vmax=1.0,
                  extent=extent, origin="upper", interpolation="nearest", zorder=1)
    draw_product(v, style, extent=extent, ax=ax, classes=classes, no_value=no_value,
                 rates=rates)
    if outlines is not None and np.any(np.asarray(outlines) > 0):
        ax.add_collection(LineCollection(_outline_segments(outlines, extent), colors=OUTLINE_COLOUR,
                                         linewidths=0.9, zorder=6))
    for line in lines or ():
        width = line.get("width", 2.0)
        ax.plot(line["x"], line["y"], color="white", linewidth=2.0 * width, zorder=7,
                solid_capstyle="round")
        ax.plot(line["x"], line["y"], color=line.get("colour", "#1b1b1b"), linewidth=width,
                zorder=8, solid_capstyle="round")
    left, right, bottom, top = extent
    ax.set_xlim(left, right)
    ax.set_ylim(bottom, top)
    ax.set_aspect("equal", adjustable="box", anchor="NW")
    ax.ticklabel_format(style="plain", useOffset=False)
    ax.tick_params(labelsize=7)
    unit = "m" if abs(frame.linear_unit_m - 1.0) < 1e-12 else "CRS units"
    ax.set_xlabel(f"Easting ({unit})", fontsize=8)
    ax.set_ylabel(f"Northing ({unit})", fontsize=8)
    add_scale_bar(ax, frame)
    add_north_arrow(ax)

    x0 = lay["map"][0] / fw
    top_y = lay["header"] / fh
    fig.text(x0, top_y + 0.52 / fh, title, fontsize=13, fontweight="bold", va="bottom",
             parse_math=False)
    if subtitle:
        fig.text(x0, top_y + 0.30 / fh, subtitle, fontsize=9.5, va="bottom", color="#333333",
                 parse_math=False)
    if rain_text:
        fig.text(x0, top_y + 0.08 / fh, f"Rain case: {rain_text}", fontsize=9.5, va="bottom",
                 parse_math=False)

    # legend panel, right of the map
    px, py, pw, ph = lay["panel"]
    handles = _legend_handles(style, outlines, lines, no_value, rates=rates, values=v,
                              extent_cells=extent_cells)
    if style.kind in ("bands", "bound", "recharge"):
        lax = fig.add_axes(rect(px, py, pw, ph))
        lax.axis("off")
        lax.legend(handles=handles, loc="upper left", title=style.label, fontsize=7.5,
                   title_fontsize=8, frameon=False, alignment="left", borderaxespad=0.0)
    else:
        from matplotlib.cm import ScalarMappable

        bar_h = min(2.6, 0.55 * ph)
        cax = fig.add_axes(rect(px + 1.25, py + ph - bar_h - 0.05, 0.18, bar_h))
        cb = fig.colorbar(ScalarMappable(norm=style.norm(), cmap=style.cmap()), cax=cax)
        cb.ax.tick_params(labelsize=7)
        if style.log:
            from matplotlib.ticker import FuncFormatter, LogLocator

            cb.ax.yaxis.set_major_locator(LogLocator(base=10.0))
            cb.ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
        cb.set_label(style.label, fontsize=8)
        if handles:
            lax = fig.add_axes(rect(px, py, pw, ph - bar_h - 0.25))
            lax.axis("off")
            lax.legend(handles=handles, loc="upper left", fontsize=7.5, frameon=False,
                       borderaxespad=0.0)

    # footer: CRS and caution
    cell = f"; cells {frame.cell_m:g} m" if frame.cell_m else ""
    fig.text(x0, 0.40 / fh, f"CRS: {frame.crs_label}; north is up (grid north){cell}", fontsize=7.5,
             color="#333333", va="bottom", parse_math=False)
    fig.text(x0, 0.06 / fh, "\n".join(textwrap.wrap(caution, 150)), fontsize=7.5, color="#8a1c1c",
             fontweight="bold", va="bottom", parse_math=False)
    fig.map_ax = ax
    return fig


def png_bytes(fig, *, title="", caution=SHORT, palette=False) -> bytes:
    """Render a figure to PNG bytes (Agg, the figure's own dpi, no tight crop).

    The figure is opaque (a white face), so the PNG is written as RGB without
    an alpha channel, at zlib level 3: on the report's maps that is smaller and
    about twice as fast to encode as RGBA at the default level 6, with the same
    pixels. The PNG carries the caution in its ``Disclaimer`` text chunk (and
    the title in ``Title``), so the warning travels with the file as with the
    rasters. With ``palette`` (a classed map) it is written as an 8-bit palette
    PNG of at most 256 colours (median-cut, no dithering): the classes keep
    their colours exactly when there are few of them, and the file is smaller.
    """
    from PIL import Image, PngImagePlugin

    from .. import __version__

    from ._glyphs import replace_missing_glyphs

    canvas = fig.canvas if isinstance(fig.canvas, FigureCanvasAgg) else FigureCanvasAgg(fig)
    replace_missing_glyphs(fig)   # characters the font lacks are drawn as U+FFFD, no warning
    canvas.draw()
    rgba = np.asarray(canvas.buffer_rgba())
    if not (rgba[..., 3] == 255).all():
        raise ValueError("png_bytes: the figure is not opaque (give it a face colour)")
    info = PngImagePlugin.PngInfo()
    meta = {"Software": f"slopescreen {__version__}", "Disclaimer": caution}
    if title:
        meta["Title"] = title
    for key, text in meta.items():
        info.add_text(key, text)
    dpi = float(fig.dpi)
    buf = io.BytesIO()
    image = Image.fromarray(np.ascontiguousarray(rgba[..., :3]))
    if palette:
        image = image.quantize(colors=256, method=Image.Quantize.MEDIANCUT,
                               dither=Image.Dither.NONE)
    image.save(buf, format="png", compress_level=3, pnginfo=info, dpi=(dpi, dpi))
    return buf.getvalue()


MAP_PIXELS = 800
"""Most grid cells drawn along a side of a map. The map area of a figure is at most 620 x 700
pixels at 100 dpi, so a finer stride would not show: the products are drawn at the stride
that brings them within this (the products themselves are never resampled)."""


def display_step(shape, max_pixels=MAP_PIXELS) -> int:
    """Stride that brings a grid within ``max_pixels`` along its longer side."""
    return max(1, math.ceil(max(shape) / max_pixels))


def product_maps(products, read, *, z, grid, title="", rain_texts=None, rates=(),
                 max_pixels=MAP_PIXELS, dpi=100, lines=(), extra_lines=None, extent_cells=None):
    """Render a map of every product that has a :data:`STYLES` entry.

    Parameters
    ----------
    products : list of dict
        Manifest entries (``key``, ``rain``, ``path``, ``kind``, ``units``).
    read : callable
        ``read(entry) -> numpy.ndarray`` of the product (NaN = no value):
        the whole product, or its copy at the display stride (a run's
        writer keeps one of each mapped product, so the maps never read a
        product back).
    z : numpy.ndarray
        The DEM (m), for the hillshade; NaN is nodata.
    grid : slopescreen.grid.Grid
    title : str
        Study title, drawn under each map title.
    rain_texts : dict, optional
        Rain-case name -> the case in words.
    rates : sequence of (str, float)
        Steady rain cases (name, mm/day): the classes of the rain needed to fail.
    max_pixels : int
        Grids larger than this along a side are drawn at a stride (the
        products are not changed).
    dpi : float
    lines : sequence of dict
        Lines drawn on every map (the corridor centreline, mapped
        landslides; see :func:`map_figure`).
    extra_lines : dict, optional
        ``(key, rain) -> list of line dicts`` drawn on that map only (the
        runout paths that reach the corridor).
    extent_cells : int, optional
        Window of the cluster FS bound, cells on a side (stated in its legend).

    Returns
    -------
    list of (dict, bytes)
        The entry each map shows and the PNG bytes, in the order of
        ``products``.
    """
    rain_texts = rain_texts or {}
    shown = [p for p in products if p["key"] in STYLES and p.get("kind") == "raster"]
    if not shown:
        return []
    step = display_step(grid.shape, max_pixels)
    sub = (slice(None, None, step), slice(None, None, step))
    shown_shape = tuple(-(-n // step) for n in grid.shape)

    def at_stride(arr):
        arr = np.asarray(arr)
        if arr.shape == tuple(grid.shape):
            return arr[sub]
        if arr.shape == shown_shape:
            return arr
        raise InputError(f"{p['path']}: shape {arr.shape} is neither the grid {grid.shape} nor "
                         f"its display stride {shown_shape}")

    zs = np.asarray(z)[sub]
    shade = hillshade(zs, grid.dx_m * step, grid.dy_m * step)
    valid = np.asarray(grid.valid)[sub]
    frame = MapFrame.from_grid(grid)
    by_key = {(p["key"], p.get("rain")): p for p in products}
    out = []
    for p in shown:
        key, rain = p["key"], p.get("rain")
        values = at_stride(read(p))
        if values.dtype.kind in "iu":                  # counts: nodata is negative
            values = np.where(values < 0, np.nan, values).astype(np.float32)
        classes = None
        no_value = valid & ~np.isfinite(values)
        if key == "critical_recharge" and ("critical_recharge_class", None) in by_key:
            classes = at_stride(read(by_key[("critical_recharge_class", None)]))
            classes = np.where(np.isfinite(classes), classes, 0).astype(np.int16)
            no_value = valid & (classes == 0)
        outlines = None
        labels = by_key.get(("cluster_labels", rain))
        if labels is not None and key in ("factor_of_safety", "failure_probability", "cluster_fs_bound"):
            lab = at_stride(read(labels))
            outlines = np.where(np.isfinite(lab), lab, 0).astype(np.int64)
        entry = spec(key)
        text = rain_texts.get(rain, rain) if rain is not None else entry.no_rain_text
        heading = entry.title + (f": {rain}" if rain else "")
        fig = map_figure(values, key, frame=frame, shade=shade, title=heading,
                         subtitle=title, rain_text=text, classes=classes, no_value=no_value,
                         outlines=outlines, rates=rates, extent_cells=extent_cells,
                         lines=list((extra_lines or {}).get((key, rain), [])) + list(lines),
                         dpi=dpi)
        out.append((p, png_bytes(fig, title=heading,
                                 palette=STYLES[key].kind in ("bands", "bound", "recharge"))))
    return out
