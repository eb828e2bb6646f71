"""Drawing one product layer on map axes, with cluster outlines and legend entries.

The layer is drawn from its :class:`~slopescreen.report.styles.Style`: FS
classes, the rain needed to fail in classes whose breaks are the scenario's
steady rain cases, the cluster FS bound as "a failing cluster possible here"
or not, other products as ramps; cells with a DEM value but no product value
are laid over in grey.
"""

from __future__ import annotations

import numpy as np
from matplotlib.colors import BoundaryNorm, ListedColormap
from matplotlib.figure import Figure
from matplotlib.patches import Patch

from .styles import FS_BANDS, NO_VALUE_COLOUR, Style, bound_labels, fs_band, recharge_breaks

BAND_ALPHA = 0.88
"""Opacity of the FS band colours over the hillshade."""
DRY_ALPHA = 0.9
"""Opacity of the cells that fail even when dry, on the critical-recharge map."""
DRY_HATCH = "xxxx"
"""Hatching of the cells that fail even when dry."""
NO_VALUE_ALPHA = 0.75
"""Opacity of the grey over cells with a DEM value but no product value."""
SHADE_FLOOR = 0.35
"""Darkest grey of the hillshade under a map: grey = SHADE_FLOOR + (1 - SHADE_FLOOR) * shade."""
MAP_BACKGROUND = "#e9e9e9"
"""Colour of the map where the DEM has no value."""
OUTLINE_COLOUR = "black"
"""Colour of the failure cluster outlines."""


def _rgba(colour, alpha):
    from matplotlib.colors import to_rgba

    r, g, b, _ = to_rgba(colour)
    return (r, g, b, alpha)


def recharge_colours(style: Style, n: int) -> list:
    """``n`` class colours of the rain needed to fail, dark (little rain) to light."""
    cmap = style.cmap()          # reversed: dark at the low end
    return [cmap((i + 0.5) / n)[:3] for i in range(n)]


def draw_product(values, style: Style, *, extent, ax=None, classes=None, no_value=None,
                 rates=()):
    """Draw one product layer (no hillshade, no frame) on map axes.

    Parameters
    ----------
    values : array_like, shape (rows, cols)
        The product in its units; NaN is no value.
    style : Style
    extent : tuple of float
        (left, right, bottom, top) in CRS units.
    ax : matplotlib.axes.Axes, optional
        Axes to draw on; a new figure's axes by default.
    classes : array_like of int, optional
        Critical-recharge class codes (``"recharge"`` style): 1 is drawn as
        hatched crimson (fails even when dry), 3 is left uncoloured.
    no_value : array_like of bool, optional
        Cells with a DEM value but no product value; drawn in grey.
    rates : sequence of (str, float)
        Steady rain cases (name, mm/day): the class breaks of the
        ``"recharge"`` style (:func:`~slopescreen.report.styles.recharge_breaks`).

    Returns
    -------
    matplotlib.axes.Axes
    """
    if ax is None:
        ax = Figure().add_subplot()
    v = np.asarray(values, dtype=np.float32)
    common = dict(extent=extent, origin="upper", interpolation="nearest", zorder=2)
    if style.kind == "bands":
        band = fs_band(v)
        colours = [_rgba(c, BAND_ALPHA) if c else (0, 0, 0, 0) for _, _, c in FS_BANDS]
        cmap = ListedColormap(colours).with_extremes(bad=(0, 0, 0, 0))
        data = np.ma.masked_less(band, 0)
        ax.imshow(data, cmap=cmap, norm=BoundaryNorm(np.arange(-0.5, len(FS_BANDS)), len(FS_BANDS)),
                  **common)
    elif style.kind == "bound":
        possible = np.ma.masked_where(~(v < 1.0), np.ones(v.shape, np.float32))
        ax.imshow(possible, cmap=ListedColormap([_rgba(style.colours[0], style.alpha)]), **common)
    elif style.kind == "recharge":
        breaks, _labels = recharge_breaks(rates, v)
        colours = [_rgba(c, style.alpha) for c in recharge_colours(style, len(breaks))]
        edges = np.array((-np.inf,) + tuple(breaks[:-1]) + (np.inf,))
        cls = np.searchsorted(edges[1:-1], v, side="left").astype(np.int16)  # q <= break
        data = np.ma.masked_where(~np.isfinite(v), cls)
        ax.imshow(data, cmap=ListedColormap(colours),
                  norm=BoundaryNorm(np.arange(-0.5, len(breaks)), len(breaks)), **common)
        if classes is not None:
            cls = np.asarray(classes)
            dry = np.ma.masked_not_equal(cls, 1).astype(np.float32)
            ax.imshow(dry, cmap=ListedColormap([_rgba(FS_BANDS[0][2], DRY_ALPHA)]), **common)
            rows, cols = cls.shape
            left, right, bottom, top = extent
            xs = left + (np.arange(cols) + 0.5) * (right - left) / cols
            ys = top - (np.arange(rows) + 0.5) * (top - bottom) / rows
            if (cls == 1).any():
                ax.contourf(xs, ys, (cls == 1).astype(np.float32), levels=[0.5, 1.5], colors="none",
                            hatches=[DRY_HATCH], zorder=3)
    else:
        cmap = style.cmap().with_extremes(bad=(0, 0, 0, 0), under=(0, 0, 0, 0))
        masked = np.ma.masked_invalid(v)
        if style.transparent_below is not None:
            masked = np.ma.masked_less(masked, style.transparent_below)
        ax.imshow(masked, cmap=cmap, norm=style.norm(), alpha=style.alpha, **common)
    if no_value is not None and np.any(no_value):
        grey = np.ma.masked_where(~np.asarray(no_value, dtype=bool), np.ones(v.shape, np.float32))
        ax.imshow(grey, cmap=ListedColormap([_rgba(NO_VALUE_COLOUR, NO_VALUE_ALPHA)]), **common)
    return ax


def _outline_segments(labels, extent):
    """Cell-edge segments between cells of different positive labels (CRS units)."""
    lab = np.asarray(labels)
    rows, cols = lab.shape
    left, right, bottom, top = extent
    sx = (right - left) / cols
    sy = (top - bottom) / rows
    padded = np.zeros((rows + 2, cols + 2), dtype=lab.dtype)
    padded[1:-1, 1:-1] = lab
    segs = []
    # vertical edges: between (r, c-1) and (r, c) in the padded frame
    diff = padded[1:-1, 1:] != padded[1:-1, :-1]
    any_pos = (padded[1:-1, 1:] > 0) | (padded[1:-1, :-1] > 0)
    r, c = np.nonzero(diff & any_pos)
    x = left + c * sx
    y0 = top - r * sy
    segs.append(np.stack([np.stack([x, y0], 1), np.stack([x, y0 - sy], 1)], 1))
    diff = padded[1:, 1:-1] != padded[:-1, 1:-1]
    any_pos = (padded[1:, 1:-1] > 0) | (padded[:-1, 1:-1] > 0)
    r, c = np.nonzero(diff & any_pos)
    y = top - r * sy
    x0 = left + c * sx
    segs.append(np.stack([np.stack([x0, y], 1), np.stack([x0 + sx, y], 1)], 1))
    return np.concatenate(segs, axis=0)


def legend_entries(style: Style, outlines, lines, no_value, *, rates=(), values=None,
                   extent_cells=None) -> list[dict]:
    """The legend entries of a map, in order, as plain data.

    Each entry is ``{"kind": "patch" or "line", "label", "face", "edge",
    "hatch", "width"}`` (``face`` None: not coloured). The PNG maps draw them
    as matplotlib handles; the report's interactive map shows the same list.
    ``rates`` (steady rain cases, name and mm/day) and ``values`` give the
    classes of the rain needed to fail; ``extent_cells`` the window of the
    cluster FS bound.

    Examples
    --------
    >>> from slopescreen.report.styles import FS_STYLE
    >>> [e["label"].split(":")[0] for e in legend_entries(FS_STYLE, None, (), None)][:2]
    ['fails', 'thin margin']
    """
    out = []

    def patch(label, face, edge="none", hatch=None, width=None):
        out.append({"kind": "patch", "label": label, "face": face, "edge": edge, "hatch": hatch,
                    "width": width})

    if style.kind == "bands":
        for _, label, colour in FS_BANDS:
            if colour is None:
                patch(label, "white", "#555555")
            else:
                patch(label, colour)
    elif style.kind == "bound":
        possible, ruled_out = bound_labels(extent_cells)
        patch(possible, _hex(style.colours[0]))
        patch(ruled_out, "white", "#555555")
    elif style.kind == "recharge":
        breaks, labels = recharge_breaks(rates, values)
        for colour, label in zip(recharge_colours(style, len(breaks)), labels):
            patch(label, _hex(colour))
        patch("fails even when dry", FS_BANDS[0][2], "black", DRY_HATCH)
        patch("stable even when saturated\n(not coloured)", "white", "#555555")
    elif style.transparent_below is not None:
        patch(f"below {style.transparent_below:g} (not coloured)", "white", "#555555")
    if no_value is not None and np.any(no_value):
        patch("no value (no soil unit\nor outside the model)", NO_VALUE_COLOUR)
    if outlines is not None:
        patch("failure cluster outline", "none", OUTLINE_COLOUR, width=1.2)
    seen = set()
    for line in lines or ():
        label = line.get("label", "line")
        if label in seen:
            continue
        seen.add(label)
        out.append({"kind": "line", "label": label, "face": None,
                    "edge": line.get("colour", "#1b1b1b"), "hatch": None,
                    "width": line.get("width", 2.0)})
    return out


def _hex(colour) -> str:
    from matplotlib.colors import to_hex

    return to_hex(colour)


def _legend_handles(style: Style, outlines, lines, no_value, *, rates=(), values=None,
                    extent_cells=None):
    from matplotlib.lines import Line2D

    handles = []
    for e in legend_entries(style, outlines, lines, no_value, rates=rates, values=values,
                            extent_cells=extent_cells):
        if e["kind"] == "line":
            handles.append(Line2D([], [], color=e["edge"], linewidth=e["width"], label=e["label"]))
            continue
        kw = {"facecolor": e["face"], "edgecolor": e["edge"], "label": e["label"]}
        if e["hatch"]:
            kw["hatch"] = e["hatch"]
        if e["width"] is not None:
            kw["linewidth"] = e["width"]
        handles.append(Patch(**kw))
    return handles
