"""How each product is drawn on a map: FS screening bands, ramps and their colours.

How a product is drawn is set by the ``style`` of its entry in the product
registry (:mod:`slopescreen.products`): factor-of-safety products in the
screening bands of common practice, probabilities and other continuous
products as ramps, the critical recharge as a ramp with its class bands.
A product whose registry entry names a style gets a map.

The colours are our own. Each ramp and band set runs monotonically in
CIELAB lightness (tested), so the order of the classes survives every form
of colour-vision deficiency and greyscale printing.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from matplotlib.colors import LinearSegmentedColormap, LogNorm, Normalize

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

PROBABILITY_STYLE = Style("ramp", "Probability of failure P(FS < 1)\n(dimensionless, 0 to 1)",
                          _WARM, 0.0, 1.0, transparent_below=0.01)
CLUSTER_BOUND_STYLE = Style("bands", "Lower bound on cluster FS (dimensionless)")
RECHARGE_STYLE = Style("recharge", "Critical steady recharge (mm/day)\nlow = needs little rain",
                       _COOL, 1.0, 1000.0, log=True, reverse=True)
WETNESS_STYLE = Style("ramp", "Wetness h/z (saturated fraction\nof the soil column, 0 to 1)",
                      _COOL, 0.0, 1.0, transparent_below=0.02, alpha=0.8)
SLOPE_STYLE = Style("ramp", "Slope (degrees)", _EARTH, 0.0, 50.0, alpha=0.7)
SCA_STYLE = Style("ramp", "Specific catchment area a = A/b (m)", _COOL, 5.0, 1.0e5, log=True,
                  alpha=0.8)
_REACH = ("#e3b04b", "#b9742f", "#7f3f1d", "#3b190a")
RUNOUT_STYLE = Style("ramp", "Failure sources whose runout\nreaches the cell (count)", _REACH,
                     1.0, 10.0, transparent_below=1.0, alpha=0.9)
"""The styles of the products that get a map; the product registry
(:mod:`slopescreen.products`) says which product is drawn in which."""


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
    fs = np.asarray(fs)
    if not np.issubdtype(fs.dtype, np.floating):
        fs = fs.astype(np.float64)
    band = np.zeros(fs.shape, dtype=np.int8)
    for upper, _label, _colour in FS_BANDS[:-1]:
        band += at_least(fs, upper)
    band[np.isnan(fs)] = -1
    return band


def at_least(values, threshold) -> np.ndarray:
    """``values >= threshold`` as if the values were float64, without a float64 copy.

    A float32 array is compared with the smallest float32 not below the
    threshold, which gives exactly the float64 comparison (a product of
    16 million cells then needs no 128 MB temporary). NaN gives False.

    Examples
    --------
    >>> import numpy as np
    >>> v = np.array([1.3, 1.29999, np.nan], dtype=np.float32)
    >>> at_least(v, 1.3).tolist(), (v.astype(np.float64) >= 1.3).tolist()
    ([False, False, False], [False, False, False])
    """
    v = np.asarray(values)
    if v.dtype == np.float32:
        t = np.float32(threshold)
        if float(t) < threshold:
            t = np.nextafter(t, np.float32(np.inf))
        return v >= t
    return v >= threshold
