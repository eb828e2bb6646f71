"""The parts of every map besides the product: hillshade, frame, scale bar, north arrow.

:func:`hillshade` shades the DEM under each map; :class:`MapFrame` says
where the grid lies and in which CRS; :func:`add_scale_bar` and
:func:`add_north_arrow` draw on map axes in CRS units.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from matplotlib.patches import Rectangle

from .. import _validate
from .._numba import njit_parallel, prange
from ..errors import InputError

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

    arr, valid = _validate.surface(z, name="z")
    dx, dy = _validate.cell_size(dx, dy)
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
