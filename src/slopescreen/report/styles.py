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
    (1.0, "fails: FS below 1.0", "#b3122e"),
    (1.3, "thin margin: FS 1.0 to 1.3", "#ee7b30"),
    (1.5, "some margin: FS 1.3 to 1.5", "#f7d44c"),
    (math.inf, "ample margin: FS 1.5 or more\n(not coloured)", None),
)
"""Screening classes of the factor of safety (upper bound, map label, colour).

The breaks 1.0, 1.3 and 1.5 are common screening practice (not design
criteria); the class names are our own and say what the number means: whether
the case fails the slope and, if not, how much margin is left. A class holds
its lower bound (FS = 1.0 has a thin margin, it does not fail). The ample-margin
class is left uncoloured so the terrain shows through."""

FS_CLASS_NAMES = ("fails (FS < 1.0)", "thin margin (FS 1.0-1.3)", "some margin (FS 1.3-1.5)",
                  "ample margin (FS >= 1.5)")
"""The same classes in one line each, for tables and the summary files."""

NO_VALUE_COLOUR = "#7d7d7d"
"""Grey laid over cells that have a DEM value but no product value."""


@dataclass(frozen=True)
class Style:
    """How one product is drawn.

    Attributes
    ----------
    kind : {"bands", "ramp", "recharge", "bound"}
        FS classes, a continuous ramp, the rain needed to fail (classes
        whose breaks are the scenario's steady rain cases; see
        :func:`recharge_breaks`), or the cluster FS bound (two classes: a
        failing cluster possible, or ruled out; see :func:`bound_labels`).
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


_VIOLET = ("#f1ebf7", "#c6a9e0", "#9368c4", "#62379b", "#3a1663")
_GREEN = ("#f3f8d6", "#b9de8c", "#61b06f", "#247560", "#0f4140")
_BLUE = ("#eef6f4", "#a8d5cd", "#4f98b0", "#24517f", "#161c44")
_SLATE = ("#f4f4f2", "#c9ccd6", "#8d94ad", "#545b7a", "#292d45")
_EARTH = ("#f6f1e4", "#d8c08e", "#a97b44", "#6b4023", "#2f1b10")
_REACH = ("#e3b04b", "#b9742f", "#7f3f1d", "#3b190a")
# one ramp per quantity: the FS classes are crimson-orange-yellow, the probability of
# failure violet, the rain needed to fail green, wetness blue, catchment area slate, slope
# earth, runout gold-brown

FS_STYLE = Style("bands", "Factor of safety FS (dimensionless)\nmedian soil parameters")

PROBABILITY_STYLE = Style("ramp", "Probability of failure P_f = P(FS < 1)\n(0 to 1)",
                          _VIOLET, 0.0, 1.0, transparent_below=0.01)
CLUSTER_BOUND_STYLE = Style("bound", "Failing clusters: where one\ncannot be ruled out",
                            ("#d4589b",), alpha=0.55)
RECHARGE_STYLE = Style("recharge", "Steady rain needed to fail (mm/day)\ndark = little rain",
                       _GREEN, 1.0, 1000.0, log=True, reverse=True)
WETNESS_STYLE = Style("ramp", "Wetness h/z (saturated fraction\nof the soil column, 0 to 1)",
                      _BLUE, 0.0, 1.0, transparent_below=0.02, alpha=0.8)
SLOPE_STYLE = Style("ramp", "Slope (degrees)", _EARTH, 0.0, 50.0, alpha=0.7)
SCA_STYLE = Style("ramp", "Specific catchment area a = A/b (m)", _SLATE, 5.0, 1.0e5, log=True,
                  alpha=0.8)
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


def bound_labels(extent_cells: int | None = None) -> tuple[str, str]:
    """Legend labels of the cluster FS bound: (bound below 1, bound 1 or more).

    A bound below 1 does not say that a cluster fails there, only that a
    failing cluster holding the cell cannot be ruled out by the bound; a
    bound of 1 or more proves that no cluster that fits the bound's window
    (``extent_cells`` cells on a side) and holds the cell can fail.

    Examples
    --------
    >>> bound_labels(8)[1]
    'no cluster up to 8 x 8 cells can fail here\\n(not coloured)'
    """
    window = (f"up to {extent_cells} x {extent_cells} cells" if extent_cells
              else "that fits the bound's window")
    return ("a failing cluster is possible here\n(bound below 1)",
            f"no cluster {window} can fail here\n(not coloured)")


def recharge_breaks(rates, values=None) -> tuple[tuple[float, ...], tuple[str, ...]]:
    """Class breaks of the rain needed to fail, from the scenario's steady rain cases.

    Parameters
    ----------
    rates : sequence of (str, float)
        Steady rain cases (name, mm/day), in any order; rates <= 0 are left out.
    values : array_like, optional
        The critical recharge (mm/day, NaN where no rate applies), for a
        scenario with no steady case: the breaks are then its 20th, 40th, 60th
        and 80th percentiles (never fixed decade bins).

    Returns
    -------
    breaks : tuple of float
        Upper bounds of the classes (the last is inf), mm/day.
    labels : tuple of str
        One label per class.

    Notes
    -----
    With steady cases r_1 < ... < r_k: "fails under <case 1>" (q <= r_1), then
    "fails under <case i>, not <case i-1>", then "within twice the wettest case"
    (r_k < q <= 2 r_k) and "more than twice the wettest case". A cell fails
    under a steady case exactly when its critical recharge is at most the
    case's rate (docs/methods.md, "Critical recharge").

    Examples
    --------
    >>> breaks, labels = recharge_breaks([("wet", 40.0), ("dry", 6.0)])
    >>> breaks
    (6.0, 40.0, 80.0, inf)
    >>> labels[1]
    'fails under wet (6-40), not dry'
    """
    steady = sorted((float(r), str(n)) for n, r in rates if r is not None and float(r) > 0.0)
    merged: list[tuple[float, str]] = []
    for r, n in steady:                    # cases of one rate share a class
        if merged and merged[-1][0] == r:
            merged[-1] = (r, f"{merged[-1][1]}, {n}")
        else:
            merged.append((r, n))
    if not merged:
        v = np.asarray([] if values is None else values, dtype=np.float64)
        v = v[np.isfinite(v)]
        if v.size == 0:
            return (math.inf,), ("fails under enough steady rain",)
        qs = sorted({float(f"{x:.3g}") for x in np.percentile(v, [20, 40, 60, 80])})
        labels = [f"up to {qs[0]:g} (lowest fifth)"] + [
            f"{a:g}-{b:g}" for a, b in zip(qs[:-1], qs[1:])] + [f"more than {qs[-1]:g}"]
        return tuple(qs) + (math.inf,), tuple(labels)
    breaks, labels = [], []
    for i, (r, n) in enumerate(merged):
        breaks.append(r)
        if i == 0:
            labels.append(f"fails under {n} (up to {r:g})")
        else:
            labels.append(f"fails under {n} ({merged[i - 1][0]:g}-{r:g}), not {merged[i - 1][1]}")
    top = merged[-1][0]
    breaks += [2.0 * top, math.inf]
    labels += [f"within twice the wettest case ({top:g}-{2 * top:g})",
               f"more than twice the wettest case (over {2 * top:g})"]
    return tuple(breaks), tuple(labels)
