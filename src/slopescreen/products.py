"""The product registry: one entry per product a run can write.

Every product of a run has one :class:`ProductSpec` in :data:`PRODUCTS`: its
manifest key, kind, units, title, band description, the stage that makes it,
whether it is written per rain case, its data type and its map style. The
writer, the manifest, the maps, the report and the documentation test all
read this table, so a new product is one entry here plus the stage function
that computes it.

The registry sits beside the pipeline and the report rather than inside
either, because both read it and neither should import the other.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType

from .report.styles import (
    CLUSTER_BOUND_STYLE, FS_BANDS, FS_STYLE, PROBABILITY_STYLE, RECHARGE_STYLE, RUNOUT_STYLE,
    SCA_STYLE, SLOPE_STYLE, WETNESS_STYLE, Style,
)
from .stability import CLASS_LABELS

__all__ = ["ProductSpec", "PRODUCTS", "REGISTRY", "STYLES", "STORM_FLAGS", "RECHARGE_CLASSES", "spec",
           "title", "products_of_section"]

STORM_FLAGS = MappingProxyType({
    1: "pressure head reached its cap (saturated to the surface)",
    2: "rain intensity exceeded the saturated conductivity; the excess ran off",
    4: "least FS comes late compared with A/D0: the short-time model is doubtful",
})
"""Bits of the ``storm_flags`` band (8 marks a computed cell)."""



@dataclass(frozen=True)
class ProductSpec:
    """What the run, the manifest, the maps and the report know of one product.

    Attributes
    ----------
    key : str
        Manifest key.
    kind : {"raster", "vector", "json", "png", "html"}
        (a vector product may also be written as ``"csv"``: same key, ``KEY.csv``)
    units : str
        Units of the values (``"1"`` dimensionless).
    title : str
        Plain title, the same on maps, in the report and in the docs.
    description : str
        Band description of a raster (a format string: the writer fills
        ``{...}`` fields from the stage's values).
    stage : str
        Name of the stage that makes it (the report groups by it).
    per_rain : bool
        One product per rain case.
    dtype : str or None
        ``"float32"`` for measured values, ``"uint8"`` for classes and flags,
        ``"int32"`` for counts,
        None for non-raster products.
    style : Style or None
        Map style; a raster with a style gets a map.
    no_rain_text : str
        What the rain line of its map says when the product does not depend
        on rain.
    section : str or None
        Optional scenario section whose stage writes it (the report's
        section of that stage lists it).
    file : str or None
        File name of a product that is not named after its key.
    tags : mapping
        Metadata written with every copy of the product.
    extra_kinds : tuple of str
        Other kinds the same product is also written as (``"csv"``: the
        table of a vector product), each its own manifest entry. A raster
        with a ``style`` or ``classes`` also gets ``"sld"`` (its OGC SLD
        sidecar, ``KEY.sld``), one with ``classes`` ``"pam"`` (the GDAL PAM
        sidecar naming its categories, ``KEY.tif.aux.xml``); both are added
        here, not listed by the entry.
    classes : mapping or None
        ``code -> (label, colour)`` of a class raster (uint8): its colour
        table, category names and SLD entries (colour ``#rrggbb``, or None
        for a class the maps leave uncoloured).
    resampling : str or None
        How a raster's overviews are computed (``"average"`` or
        ``"nearest"``); None: average for float32, nearest for classes,
        flags and counts (see :attr:`overview_resampling`).
    """

    key: str
    kind: str
    units: str
    title: str
    description: str = ""
    stage: str = ""
    per_rain: bool = False
    dtype: str | None = None
    style: Style | None = None
    no_rain_text: str = "none"
    section: str | None = None
    file: str | None = None
    tags: MappingProxyType = field(default_factory=lambda: MappingProxyType({}))
    extra_kinds: tuple = ()
    classes: MappingProxyType | None = None
    resampling: str | None = None

    def __post_init__(self):
        sidecars = []
        if self.kind == "raster" and (self.style is not None or self.classes):
            sidecars.append("sld")
        if self.kind == "raster" and self.classes:
            sidecars.append("pam")
        extra = tuple(self.extra_kinds) + tuple(k for k in sidecars if k not in self.extra_kinds)
        object.__setattr__(self, "extra_kinds", extra)

    @property
    def overview_resampling(self) -> str:
        """How the overviews of this raster are computed.

        Examples
        --------
        >>> spec("slope").overview_resampling, spec("cluster_labels").overview_resampling
        ('average', 'nearest')
        """
        if self.resampling is not None:
            return self.resampling
        return "average" if self.dtype == "float32" else "nearest"

    def file_name(self, rain_slug: str | None = None, *, kind: str | None = None) -> str:
        """File name of this product (per rain case: ``KEY_RAIN.tif``).

        ``kind`` ``"csv"`` names the table copy of a vector product (``KEY.csv``),
        ``"sld"`` and ``"pam"`` the style and category sidecars of a raster.

        Examples
        --------
        >>> spec("corridor_segments").file_name(kind="csv")
        'corridor_segments.csv'
        >>> spec("factor_of_safety").file_name("wet", kind="sld")
        'factor_of_safety_wet.sld'
        >>> spec("critical_recharge_class").file_name(kind="pam")
        'critical_recharge_class.tif.aux.xml'
        """
        kind = kind or self.kind
        ext = {"raster": "tif", "vector": "gpkg", "json": "json", "png": "png", "html": "html",
               "csv": "csv", "sld": "sld", "pam": "tif.aux.xml"}[kind]
        if self.file is not None:
            return self.file if kind == self.kind else f"{self.file.rsplit('.', 1)[0]}.{ext}"
        return f"{self.key}_{rain_slug}.{ext}" if rain_slug else f"{self.key}.{ext}"


_TERRAIN = "none (terrain product)"


def _ramp_middle(style: Style) -> str:
    """The colour a ramp style gives the middle of its range (``#rrggbb``)."""
    from matplotlib.colors import to_hex

    return to_hex(style.cmap()(0.5), keep_alpha=False)


RECHARGE_CLASSES = MappingProxyType({
    0: (CLASS_LABELS[0], None),
    1: (CLASS_LABELS[1], FS_BANDS[0][2]),
    2: (CLASS_LABELS[2], _ramp_middle(RECHARGE_STYLE)),
    3: (CLASS_LABELS[3], None),
})
"""Classes of ``critical_recharge_class`` as the critical-recharge map draws them: fails
even when dry in the colour of the lowest FS band, fails under enough recharge in the
colour of the recharge ramp at its middle (the map shows the rate itself), stable even
when saturated not coloured."""

PRODUCTS = (
    ProductSpec("slope", "raster", "degrees", "Slope",
                "Slope of the original DEM (Horn 1981), degrees", "terrain",
                dtype="float32", style=SLOPE_STYLE, no_rain_text=_TERRAIN),
    ProductSpec("specific_catchment_area", "raster", "m", "Specific catchment area",
                "Specific catchment area a = A/b, m ({method})", "terrain",
                dtype="float32", style=SCA_STYLE, no_rain_text=_TERRAIN),
    ProductSpec("critical_recharge", "raster", "mm/day", "Steady rain needed to fail",
                "Critical steady recharge for FS = 1 (Montgomery-Dietrich), mm/day; nodata "
                "where the class band says no rate applies", "critical recharge",
                dtype="float32", style=RECHARGE_STYLE,
                no_rain_text="none (the steady rain each cell can take; the classes are the "
                             "scenario's steady rain cases)"),
    ProductSpec("critical_recharge_class", "raster", "class", "Steady rain needed to fail: class",
                "Stability class of the critical-recharge balance", "critical recharge",
                dtype="uint8",
                tags=MappingProxyType({f"CLASS_{k}": v for k, v in CLASS_LABELS.items()}),
                classes=RECHARGE_CLASSES),
    ProductSpec("wetness", "raster", "1", "Wetness",
                "Wetness h_w/z (saturated fraction of the soil column)", "stability",
                per_rain=True, dtype="float32", style=WETNESS_STYLE),
    ProductSpec("factor_of_safety", "raster", "1", "Factor of safety",
                "Infinite-slope factor of safety (median parameters)", "stability",
                per_rain=True, dtype="float32", style=FS_STYLE),
    ProductSpec("storm_failure_depth", "raster", "m", "Depth of the least storm factor of safety",
                "Vertical depth of the least storm FS, m", "stability", per_rain=True,
                dtype="float32"),
    ProductSpec("storm_failure_time", "raster", "h", "Time of the least storm factor of safety",
                "Time of the least storm FS since the storm began, h", "stability",
                per_rain=True, dtype="float32"),
    ProductSpec("storm_flags", "raster", "bit flags", "Storm model flags",
                "Where the storm model's limits bind (bits; 8 = computed)", "stability",
                per_rain=True, dtype="uint8",
                tags=MappingProxyType({f"BIT_{k}": v for k, v in STORM_FLAGS.items()}
                                      | {"BIT_8": "computed"})),
    ProductSpec("failure_probability", "raster", "1", "Probability of failure",
                "Probability that FS < 1 given the parameter distributions",
                "probability of failure", per_rain=True, dtype="float32",
                style=PROBABILITY_STYLE),
    ProductSpec("cluster_fs_bound", "raster", "1", "Lower bound on cluster factor of safety",
                "Proven lower bound on the FS of any cluster up to {extent} x {extent} cells "
                "that holds the cell", "clusters", per_rain=True, dtype="float32",
                style=CLUSTER_BOUND_STYLE, section="clusters"),
    ProductSpec("cluster_labels", "raster", "id", "Failure clusters",
                "Id of the failing cluster holding the cell (0 = none); see clusters.gpkg",
                "clusters", per_rain=True, dtype="float32", section="clusters",
                resampling="nearest"),
    ProductSpec("clusters", "vector", "attributes carry their units in their names",
                "Failure clusters", "Failing multi-cell clusters and the size-resolved search",
                "clusters", section="clusters", file="clusters.gpkg"),
    ProductSpec("runout_count", "raster", "1", "Runout reach: sources reaching each cell",
                "Number of failure sources whose runout reaches the cell (angle of reach)",
                "runout", per_rain=True, dtype="int32", style=RUNOUT_STYLE, section="runout"),
    ProductSpec("runout_volume", "raster", "m^3", "Runout reach: largest source volume",
                "Largest failed volume among the sources reaching the cell, m^3", "runout",
                per_rain=True, dtype="float32", section="runout"),
    ProductSpec("runout_paths", "vector", "attributes carry their units in their names",
                "Runout paths", "Path of each failure source from its crown to its runout tip",
                "runout", section="runout", file="runout_paths.gpkg"),
    ProductSpec("corridor_segments", "vector", "attributes carry their units in their names",
                "Corridor segments", "One row per corridor segment and rain case: reach, "
                "sources and hazard (GeoPackage strips and a CSV table)", "corridor",
                section="corridor", file="corridor_segments.gpkg", extra_kinds=("csv",)),
    ProductSpec("inventory_scores", "json", "1", "Agreement with mapped landslides",
                "ROC, AUC with its interval, success-rate curve and threshold scores of each "
                "hazard product against the mapped landslides, per rain case and soil unit",
                "inventory", section="inventory", file="inventory_scores.json"),
    ProductSpec("summary", "json", "attributes carry their units in their names",
                "Summary per rain case",
                "One row per rain case: area and share by factor-of-safety class and P_f "
                "threshold, failing clusters, worst corridor stretches (JSON and a CSV table)",
                "summary", file="summary.json", extra_kinds=("csv",)),
    ProductSpec("map", "png", "units of the product shown", "Map",
                "A map of one product over a hillshade", "maps"),
    ProductSpec("report", "html", "n/a", "Report",
                "The self-contained report of the run", "report", file="report.html"),
)
"""Every product a run can write, in the order the docs list them."""

REGISTRY = MappingProxyType({p.key: p for p in PRODUCTS})
"""Product key -> :class:`ProductSpec`."""

STYLES = MappingProxyType({p.key: p.style for p in PRODUCTS if p.style is not None})
"""Map style of each product that gets a map."""


def spec(key: str) -> ProductSpec:
    """The registry entry of ``key``.

    Raises
    ------
    KeyError
        ``key`` is not a registered product (a stage wrote something the
        registry does not describe).

    Examples
    --------
    >>> spec("factor_of_safety").units
    '1'
    >>> spec("slope").file_name()
    'slope.tif'
    """
    try:
        return REGISTRY[key]
    except KeyError:
        raise KeyError(f"product {key!r} is not in the product registry "
                       "(slopescreen.products.PRODUCTS)") from None


def title(key: str) -> str:
    """Plain title of a product (its key when unregistered).

    Examples
    --------
    >>> title("failure_probability")
    'Probability of failure'
    """
    entry = REGISTRY.get(key)
    return key if entry is None else entry.title


def products_of_section(section: str) -> tuple[str, ...]:
    """Keys of the products written by the stage of an optional scenario section.

    Examples
    --------
    >>> products_of_section("clusters")
    ('cluster_fs_bound', 'cluster_labels', 'clusters')
    >>> products_of_section("corridor")
    ('corridor_segments',)
    >>> products_of_section("inventory")
    ('inventory_scores',)
    """
    return tuple(p.key for p in PRODUCTS if p.section == section)
