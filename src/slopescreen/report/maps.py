"""Maps of the products over a hillshade of the DEM (PNG, matplotlib Agg).

Every map carries what a reader needs to use it on its own: a legend with
units, a scale bar, a north arrow, the CRS, the rain case and the one-line
caution. Figures are built on :class:`matplotlib.figure.Figure` with the Agg
canvas directly, so no GUI backend is ever touched.

How a product is drawn is set by its :data:`STYLES` entry (keyed by the
manifest key): factor-of-safety products in the screening bands of common
practice, probabilities and other continuous products as ramps, the
critical recharge as a ramp with its class bands. A later stage adds a key
to :data:`STYLES` and its product gets a map.

The colours are our own. Each ramp and band set runs monotonically in
CIELAB lightness (tested), so the order of the classes survives every form
of colour-vision deficiency and greyscale printing.
"""

from __future__ import annotations

import io
import math
import textwrap
from dataclasses import dataclass

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.collections import LineCollection
from matplotlib.colors import BoundaryNorm, ListedColormap, LinearSegmentedColormap, LogNorm, Normalize
from matplotlib.figure import Figure
from matplotlib.patches import Patch, Rectangle

from .. import _checks
from .._numba import njit_parallel, prange
from ..errors import InputError
from .cautions import SHORT

__all__ = [
    "FS_BANDS", "STYLES", "MapFrame", "Style", "hillshade", "fs_band", "nice_length",
    "draw_product", "add_scale_bar", "add_north_arrow", "map_figure", "png_bytes", "product_maps",
    "crs_label", "display_step",
]


# ---------------------------------------------------------------------------
# Hillshade
# ---------------------------------------------------------------------------


def hillshade(z, dx, dy, *, azimuth_deg=315.0, altitude_deg=45.0):
    r"""Lambertian hillshade of a DEM, 0 (dark) to 1 (facing the light).

    Parameters
    ----------
    z : array_like, shape (rows, cols)
        Elevations, m; NaN is nodata. Row 0 is north.
    dx, dy : float
        Cell width and height, m (> 0).
    azimuth_deg : float
        Direction the light comes from, degrees clockwise from north
        (default 315, north-west, the usual cartographic choice).
    altitude_deg : float
        Elevation of the light above the horizon, degrees in (0, 90].

    Returns
    -------
    numpy.ndarray of float32, shape (rows, cols)
        Shade in [0, 1]; NaN where ``z`` is nodata. Slopes facing away from
        the light by more than 90 degrees get 0.

    Raises
    ------
    InputError
        Bad surface or cell size (see :func:`slopescreen.terrain.slope_aspect`),
        or an altitude outside (0, 90].

    Notes
    -----
    With slope :math:`S` and aspect :math:`A` from Horn's (1981) 3x3
    differences, light zenith :math:`Z = 90^\circ - \text{altitude}` and
    azimuth :math:`\phi`, the shade is the cosine of the angle between the
    surface normal and the light (Lambert's law):

    .. math::

        h = \max\bigl(0,\ \cos Z \cos S + \sin Z \sin S \cos(\phi - A)\bigr)

    References
    ----------
    Horn, B.K.P. (1981). Hill shading and the reflectance map. Proceedings
    of the IEEE 69(1), 14-47. doi:10.1109/PROC.1981.11918 (from memory).

    Examples
    --------
    >>> import numpy as np
    >>> flat = np.zeros((4, 4))
    >>> round(float(hillshade(flat, 5.0, 5.0, altitude_deg=30.0)[1, 1]), 3)   # cos(60 deg)
    0.5
    """
    from ..terrain import slope_aspect

    arr, valid = _checks.surface(z, name="z")
    dx, dy = _checks.cell_size(dx, dy)
    alt = float(altitude_deg)
    if not (0.0 < alt <= 90.0):
        raise InputError(f"altitude_deg: expected a light elevation in (0, 90] degrees, got {altitude_deg!r}")
    az = float(azimuth_deg)
    if not math.isfinite(az):
        raise InputError(f"azimuth_deg: expected a finite direction in degrees, got {azimuth_deg!r}")
    slope, aspect = slope_aspect(arr, dx, dy)
    out = np.empty(arr.shape, dtype=np.float32)
    _hillshade_kernel(slope, aspect, math.radians(90.0 - alt), math.radians(az % 360.0), out)
    return out


@njit_parallel
def _hillshade_kernel(slope_deg, aspect_deg, zenith, azimuth, out):
    """Lambert shade from slope and aspect (degrees); aspect NaN means flat."""
    rows, cols = out.shape
    cz = math.cos(zenith)
    sz = math.sin(zenith)
    d2r = math.pi / 180.0
    for r in prange(rows):
        for c in range(cols):
            s = slope_deg[r, c]
            if np.isnan(s):
                out[r, c] = np.nan
                continue
            sr = s * d2r
            h = cz * math.cos(sr)
            a = aspect_deg[r, c]
            if not np.isnan(a):
                h += sz * math.sin(sr) * math.cos(azimuth - a * d2r)
            out[r, c] = h if h > 0.0 else 0.0


# ---------------------------------------------------------------------------
# Styles
# ---------------------------------------------------------------------------


FS_BANDS = (
    (1.0, "below 1.0: unstable under this case", "#6e1538"),
    (1.3, "1.0 to 1.3: marginal", "#d9622b"),
    (1.5, "1.3 to 1.5: moderately stable", "#f3d36b"),
    (math.inf, "1.5 and above: stable under this case\n(not coloured)", None),
)
"""Screening bands of the factor of safety (upper bound, label, colour).

Below 1, 1-1.3, 1.3-1.5 and 1.5 and above: the bands of common screening
practice (not design criteria). A band's lower bound belongs to it
(FS = 1.0 is marginal, not unstable). The stable band is left uncoloured so
the terrain shows through."""

NO_VALUE_COLOUR = "#7d7d7d"
"""Grey laid over cells that have a DEM value but no product value."""


@dataclass(frozen=True)
class Style:
    """How one product is drawn.

    Attributes
    ----------
    kind : {"bands", "ramp", "recharge"}
        FS bands, a continuous ramp, or the critical-recharge ramp with its
        class bands.
    label : str
        Legend title with the units.
    colours : tuple of str
        Ramp stops, light to dark in CIELAB lightness (for ``"ramp"``).
    vmin, vmax : float
        Ramp range in product units.
    log : bool
        Logarithmic ramp.
    transparent_below : float or None
        Values below it are not coloured (the hillshade shows).
    alpha : float
        Opacity of the coloured layer over the hillshade.
    reverse : bool
        Dark for low values (critical recharge: low = susceptible).
    """

    kind: str
    label: str
    colours: tuple = ()
    vmin: float = 0.0
    vmax: float = 1.0
    log: bool = False
    transparent_below: float | None = None
    alpha: float = 0.85
    reverse: bool = False

    def cmap(self):
        """The matplotlib colormap of a ramp style."""
        stops = self.colours[::-1] if self.reverse else self.colours
        return LinearSegmentedColormap.from_list(f"slopescreen_{self.kind}", list(stops), N=256)

    def norm(self):
        """Value-to-colour normalisation of a ramp style."""
        if self.log:
            return LogNorm(vmin=self.vmin, vmax=self.vmax, clip=True)
        return Normalize(vmin=self.vmin, vmax=self.vmax, clip=True)


_WARM = ("#fbeeb4", "#f2b15c", "#d9622b", "#8f2140", "#3d0a2c")
_COOL = ("#eef6f4", "#a8d5cd", "#4f98b0", "#24517f", "#161c44")
_EARTH = ("#f6f1e4", "#d8c08e", "#a97b44", "#6b4023", "#2f1b10")

FS_STYLE = Style("bands", "Factor of safety FS (dimensionless)\nmedian soil parameters")

STYLES = {
    "factor_of_safety": FS_STYLE,
    "cluster_fs_bound": Style("bands", "Lower bound on cluster FS (dimensionless)"),
    "failure_probability": Style("ramp", "Probability of failure P(FS < 1)\n(dimensionless, 0 to 1)",
                                 _WARM, 0.0, 1.0, transparent_below=0.01),
    "critical_recharge": Style("recharge", "Critical steady recharge (mm/day)\nlow = needs little rain",
                               _COOL, 1.0, 1000.0, log=True, reverse=True),
    "wetness": Style("ramp", "Wetness h/z (saturated fraction\nof the soil column, 0 to 1)",
                     _COOL, 0.0, 1.0, transparent_below=0.02, alpha=0.8),
    "slope": Style("ramp", "Slope (degrees)", _EARTH, 0.0, 50.0, alpha=0.7),
    "specific_catchment_area": Style("ramp", "Specific catchment area a = A/b (m)",
                                     _COOL, 5.0, 1.0e5, log=True, alpha=0.8),
}
"""Map style of each product key that gets a map."""


def fs_band(fs):
    """Screening band index of factor-of-safety values.

    Parameters
    ----------
    fs : array_like
        Factor of safety (dimensionless); NaN is nodata.

    Returns
    -------
    numpy.ndarray of int8
        0 below 1.0, 1 for 1.0-1.3, 2 for 1.3-1.5, 3 for 1.5 and above,
        -1 where nodata. Each band holds its lower bound.

    Examples
    --------
    >>> fs_band([0.99, 1.0, 1.3, 1.5, float("nan")]).tolist()
    [0, 1, 2, 3, -1]
    """
    fs = np.asarray(fs, dtype=np.float64)
    uppers = np.array([b[0] for b in FS_BANDS[:-1]])
    band = np.searchsorted(uppers, fs, side="right").astype(np.int8)
    band[np.isnan(fs)] = -1
    return band


# ---------------------------------------------------------------------------
# Frame, scale bar, north arrow
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class MapFrame:
    """Where a grid lies on the map and how to label it.

    Attributes
    ----------
    extent : tuple of float
        (left, right, bottom, top) in CRS units.
    linear_unit_m : float
        Size of the CRS unit in metres.
    crs_label : str
        CRS as shown on the map, e.g. ``"EPSG:32633 (WGS 84 / UTM zone 33N)"``.
    cell_m : float
        Cell size in metres, for the footer.
    """

    extent: tuple
    linear_unit_m: float = 1.0
    crs_label: str = "unknown CRS"
    cell_m: float | None = None

    @classmethod
    def from_grid(cls, grid) -> "MapFrame":
        """Frame of a :class:`slopescreen.grid.Grid`."""
        t = grid.transform
        rows, cols = grid.shape
        left, top = t.c, t.f
        right, bottom = left + cols * t.a, top + rows * t.e
        return cls(extent=(left, right, bottom, top), linear_unit_m=grid.linear_unit_m,
                   crs_label=crs_label(grid.crs),
                   cell_m=grid.dx_m if abs(grid.dx_m - grid.dy_m) < 1e-9 else None)


def crs_label(crs) -> str:
    """``AUTHORITY:CODE (name)`` of a rasterio CRS, or its short string."""
    if crs is None:
        return "unknown CRS"
    text = crs.to_string()
    name = None
    wkt = crs.to_wkt()
    if '"' in wkt:
        name = wkt.split('"', 2)[1]
    return f"{text} ({name})" if name and name not in text else text


def nice_length(max_length):
    """Largest 1, 2 or 5 times a power of ten that is <= ``max_length``.

    Examples
    --------
    >>> nice_length(560.0), nice_length(1999.0), nice_length(7.3)
    (500.0, 1000.0, 5.0)
    """
    if not (max_length > 0 and math.isfinite(max_length)):
        raise InputError(f"max_length: expected a positive length, got {max_length!r}")
    power = 10.0 ** math.floor(math.log10(max_length))
    for step in (5.0, 2.0, 1.0):
        if step * power <= max_length * (1 + 1e-12):
            return step * power
    return power  # pragma: no cover - 1 x power always fits


def add_scale_bar(ax, frame: MapFrame, *, fraction=0.22):
    """Draw a scale bar in the lower-left corner of a map.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Map axes in CRS units.
    frame : MapFrame
    fraction : float
        Largest share of the map width the bar may take.

    Returns
    -------
    length_m : float
        Ground length of the bar, metres.
    segments : list of matplotlib.patches.Rectangle
        The bar's two halves, in CRS units.
    """
    left, right, bottom, top = frame.extent
    width_m = (right - left) * frame.linear_unit_m
    length_m = nice_length(fraction * width_m)
    length = length_m / frame.linear_unit_m
    height = 0.012 * (top - bottom)
    x0 = left + 0.04 * (right - left)
    y0 = bottom + 0.05 * (top - bottom)
    ax.add_patch(Rectangle((x0 - 0.015 * (right - left), y0 - 0.02 * (top - bottom)),
                           length + 0.03 * (right - left), 0.075 * (top - bottom),
                           facecolor="white", edgecolor="none", alpha=0.9, zorder=20))
    segments = []
    for i, colour in enumerate(("black", "white")):
        seg = Rectangle((x0 + i * length / 2, y0), length / 2, height, facecolor=colour,
                        edgecolor="black", linewidth=0.8, zorder=21)
        ax.add_patch(seg)
        segments.append(seg)
    label = f"{length_m / 1000:g} km" if length_m >= 1000 else f"{length_m:g} m"
    ax.text(x0 + length / 2, y0 + 1.6 * height, label, ha="center", va="bottom", fontsize=8,
            zorder=22)
    return length_m, segments


def add_north_arrow(ax):
    """Draw a north arrow in the upper-right corner (the grid is north-up).

    Returns
    -------
    matplotlib.text.Text
        The ``N`` label.
    """
    x = 0.94
    ax.add_patch(Rectangle((x - 0.04, 0.80), 0.08, 0.185, transform=ax.transAxes, facecolor="white",
                           edgecolor="none", alpha=0.9, zorder=20))
    ax.annotate("", xy=(x, 0.94), xytext=(x, 0.82), xycoords="axes fraction",
                arrowprops=dict(facecolor="black", edgecolor="black", width=3, headwidth=10,
                                headlength=10), zorder=21)
    return ax.text(x, 0.945, "N", transform=ax.transAxes, ha="center", va="bottom", fontsize=11,
                   fontweight="bold", zorder=22)


# ---------------------------------------------------------------------------
# Drawing
# ---------------------------------------------------------------------------


def _rgba(colour, alpha):
    from matplotlib.colors import to_rgba

    r, g, b, _ = to_rgba(colour)
    return (r, g, b, alpha)


def draw_product(values, style: Style, *, extent, ax=None, classes=None, no_value=None):
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
        hatched dark red (fails even when dry), 3 is left uncoloured.
    no_value : array_like of bool, optional
        Cells with a DEM value but no product value; drawn in grey.

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
        colours = [_rgba(c, 0.88) if c else (0, 0, 0, 0) for _, _, c in FS_BANDS]
        cmap = ListedColormap(colours).with_extremes(bad=(0, 0, 0, 0))
        data = np.ma.masked_less(band, 0)
        ax.imshow(data, cmap=cmap, norm=BoundaryNorm(np.arange(-0.5, len(FS_BANDS)), len(FS_BANDS)),
                  **common)
    else:
        cmap = style.cmap().with_extremes(bad=(0, 0, 0, 0), under=(0, 0, 0, 0))
        masked = np.ma.masked_invalid(v)
        if style.transparent_below is not None:
            masked = np.ma.masked_less(masked, style.transparent_below)
        ax.imshow(masked, cmap=cmap, norm=style.norm(), alpha=style.alpha, **common)
        if style.kind == "recharge" and classes is not None:
            cls = np.asarray(classes)
            dry = np.ma.masked_not_equal(cls, 1).astype(np.float32)
            ax.imshow(dry, cmap=ListedColormap([_rgba(FS_BANDS[0][2], 0.9)]), **common)
            rows, cols = cls.shape
            left, right, bottom, top = extent
            xs = left + (np.arange(cols) + 0.5) * (right - left) / cols
            ys = top - (np.arange(rows) + 0.5) * (top - bottom) / rows
            if (cls == 1).any():
                ax.contourf(xs, ys, (cls == 1).astype(np.float32), levels=[0.5, 1.5], colors="none",
                            hatches=["xxxx"], zorder=3)
    if no_value is not None and np.any(no_value):
        grey = np.ma.masked_where(~np.asarray(no_value, dtype=bool), np.ones(v.shape, np.float32))
        ax.imshow(grey, cmap=ListedColormap([_rgba(NO_VALUE_COLOUR, 0.75)]), **common)
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


def _legend_handles(style: Style, outlines, lines, no_value):
    handles = []
    if style.kind == "bands":
        for _, label, colour in FS_BANDS:
            if colour is None:
                handles.append(Patch(facecolor="white", edgecolor="#555555", label=label))
            else:
                handles.append(Patch(facecolor=colour, edgecolor="none", label=label))
    elif style.kind == "recharge":
        handles.append(Patch(facecolor=FS_BANDS[0][2], hatch="xxxx", edgecolor="black",
                             label="fails even when dry"))
        handles.append(Patch(facecolor="white", edgecolor="#555555",
                             label="stable even when saturated\n(not coloured)"))
    elif style.transparent_below is not None:
        handles.append(Patch(facecolor="white", edgecolor="#555555",
                             label=f"below {style.transparent_below:g} (not coloured)"))
    if no_value is not None and np.any(no_value):
        handles.append(Patch(facecolor=NO_VALUE_COLOUR, edgecolor="none",
                             label="no value (no soil unit\nor outside the model)"))
    if outlines is not None:
        handles.append(Patch(facecolor="none", edgecolor="black", linewidth=1.2,
                             label="failure cluster outline"))
    for line in lines or ():
        from matplotlib.lines import Line2D

        handles.append(Line2D([], [], color="#1b1b1b", linewidth=2.0, label=line.get("label", "line")))
    return handles


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
               classes=None, no_value=None, outlines=None, lines=None, marks=None,
               caution=SHORT, dpi=100):
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
        Lines drawn on top (a corridor): ``{"x": array, "y": array,
        "label": str}`` in CRS units.
    marks : list of (float, str), optional
        Values marked on the colour bar with a label (steady rain rates on
        the critical-recharge scale).
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
    ax.set_facecolor("#e9e9e9")
    if shade is not None:
        ax.imshow(0.35 + 0.65 * np.asarray(shade, dtype=np.float32), cmap="gray", vmin=0.0, vmax=1.0,
                  extent=extent, origin="upper", interpolation="nearest", zorder=1)
    draw_product(v, style, extent=extent, ax=ax, classes=classes, no_value=no_value)
    if outlines is not None and np.any(np.asarray(outlines) > 0):
        ax.add_collection(LineCollection(_outline_segments(outlines, extent), colors="black",
                                         linewidths=0.9, zorder=6))
    for line in lines or ():
        ax.plot(line["x"], line["y"], color="white", linewidth=4.0, zorder=7, solid_capstyle="round")
        ax.plot(line["x"], line["y"], color="#1b1b1b", linewidth=2.0, zorder=8, solid_capstyle="round")
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
    handles = _legend_handles(style, outlines, lines, no_value)
    if style.kind == "bands":
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
        for value, text in marks or ():
            if style.vmin <= value <= style.vmax:
                cb.ax.axhline(value, color="black", linewidth=1.5)
                cb.ax.text(-0.25, value, "\n".join(textwrap.wrap(text, 20)),
                           transform=cb.ax.get_yaxis_transform(), ha="right", va="center",
                           fontsize=6.5, parse_math=False)
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


def png_bytes(fig, *, title="", caution=SHORT) -> bytes:
    """Render a figure to PNG bytes (Agg, the figure's own dpi, no tight crop).

    The PNG carries the caution in its ``Disclaimer`` text chunk (and the
    title in ``Title``), so the warning travels with the file as with the
    rasters.
    """
    from .. import __version__

    buf = io.BytesIO()
    meta = {"Software": f"slopescreen {__version__}", "Disclaimer": caution}
    if title:
        meta["Title"] = title
    fig.savefig(buf, format="png", dpi=fig.dpi, facecolor=fig.get_facecolor(), metadata=meta)
    return buf.getvalue()


def display_step(shape, max_pixels=1400) -> int:
    """Stride that brings a grid within ``max_pixels`` along its longer side."""
    return max(1, math.ceil(max(shape) / max_pixels))


MAP_TITLES = {
    "slope": "Slope",
    "specific_catchment_area": "Specific catchment area",
    "critical_recharge": "Critical steady recharge",
    "wetness": "Wetness",
    "factor_of_safety": "Factor of safety",
    "failure_probability": "Probability of failure",
    "cluster_fs_bound": "Lower bound on cluster factor of safety",
}
"""Map title of each product key with a style."""

NO_RAIN_TEXT = {
    "slope": "none (terrain product)",
    "specific_catchment_area": "none (terrain product)",
    "critical_recharge": "none (the recharge each cell can take; steady cases are marked on the scale)",
}
"""What the rain-case line says on maps of products that do not depend on rain."""


def product_maps(products, read, *, z, grid, title="", rain_texts=None, marks=(),
                 max_pixels=1400, dpi=100):
    """Render a map of every product that has a :data:`STYLES` entry.

    Parameters
    ----------
    products : list of dict
        Manifest entries (``key``, ``rain``, ``path``, ``kind``, ``units``).
    read : callable
        ``read(entry) -> numpy.ndarray`` of the product (NaN = no value).
    z : numpy.ndarray
        The DEM (m), for the hillshade; NaN is nodata.
    grid : slopescreen.grid.Grid
    title : str
        Study title, drawn under each map title.
    rain_texts : dict, optional
        Rain-case name -> the case in words.
    marks : sequence of (float, str)
        Values marked on the critical-recharge scale (steady rain cases).
    max_pixels : int
        Grids larger than this along a side are drawn at a stride (the
        products are not changed).
    dpi : float

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
    zs = np.asarray(z)[sub]
    shade = hillshade(zs, grid.dx_m * step, grid.dy_m * step)
    valid = np.asarray(grid.valid)[sub]
    frame = MapFrame.from_grid(grid)
    by_key = {(p["key"], p.get("rain")): p for p in products}
    out = []
    for p in shown:
        key, rain = p["key"], p.get("rain")
        values = read(p)[sub]
        classes = None
        no_value = valid & ~np.isfinite(values)
        if key == "critical_recharge" and ("critical_recharge_class", None) in by_key:
            classes = read(by_key[("critical_recharge_class", None)])[sub]
            classes = np.where(np.isfinite(classes), classes, 0).astype(np.int16)
            no_value = valid & (classes == 0)
        outlines = None
        labels = by_key.get(("cluster_labels", rain))
        if labels is not None and key in ("factor_of_safety", "failure_probability", "cluster_fs_bound"):
            lab = read(labels)[sub]
            outlines = np.where(np.isfinite(lab), lab, 0).astype(np.int64)
        text = rain_texts.get(rain, rain) if rain is not None else NO_RAIN_TEXT.get(key, "none")
        fig = map_figure(values, key, frame=frame, shade=shade,
                         title=MAP_TITLES.get(key, key) + (f": {rain}" if rain else ""),
                         subtitle=title, rain_text=text, classes=classes, no_value=no_value,
                         outlines=outlines, marks=marks if key == "critical_recharge" else None,
                         dpi=dpi)
        out.append((p, png_bytes(fig, title=MAP_TITLES.get(key, key) + (f": {rain}" if rain else ""))))
    return out
