"""The typed scenario: frozen dataclasses in SI units, built by the section parsers."""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .fields import slugify


DEPTH_MEASURED = ("vertical", "slope_normal")
"""Accepted values of ``[soil] depth_measured``."""

ROUTING_METHODS = ("dinf", "mfd", "d8")
"""Accepted values of ``[routing].method``."""


VERTICAL_UNITS = {"metre": 1.0, "foot": 0.3048, "us_survey_foot": 1200.0 / 3937.0}
"""Accepted values of ``dem_vertical_unit`` and their size in metres."""


@dataclass(frozen=True)
class Routing:
    """Flow routing options (``[routing]``)."""

    method: str = "dinf"
    mfd_exponent: float = 1.1


@dataclass(frozen=True)
class SoilUnit:
    """Soil and vegetation properties of one soil unit (``[soil.units.CODE]``).

    Every property is a :class:`slopescreen.parameters.Parameter` (fixed or a
    distribution), in the unit its name states.
    """

    code: int
    label: str
    depth_m: Any
    cohesion_kpa: Any
    root_cohesion_kpa: Any
    lateral_root_cohesion_kpa: Any
    friction_deg: Any
    unit_weight_kn_m3: Any
    conductivity_m_per_day: Any
    diffusivity_m2_per_s: Any


#: Default ``[soil] min_failure_depth_m``, m: the shallowest failure plane a
#: storm product considers (common practice; a c' = 0 soil otherwise "fails"
#: at a few centimetres). docs/methods.md, "Storm response (Iverson 2000)".
MIN_FAILURE_DEPTH_M = 0.3

#: Number of failure depths every storm product tries between the minimum
#: failure depth and the soil base.
STORM_DEPTHS = 20


@dataclass(frozen=True)
class Soil:
    """The ``[soil]`` section: an optional unit map, one table per unit and
    the minimum credible failure depth of the storm products, m."""

    map: Path | None
    units: dict[int, SoilUnit]
    depth_measured: str = "vertical"
    """How the units' ``depth_m`` was measured: ``"vertical"`` (z, as in a pit) or
    ``"slope_normal"`` (H, normal to the slope, as by a probe); the kernels use
    z = H / cos(theta) per cell (docs/methods.md, "Slope-normal soil thickness")."""
    min_failure_depth_m: float = MIN_FAILURE_DEPTH_M


@dataclass(frozen=True)
class RainCase:
    """One ``[[rain]]`` case: steady recharge or a storm (Iverson 2000).

    Exactly one of ``steady_mm_per_day`` and ``storm_mm_per_h`` is set; a
    storm has ``duration_h`` and exactly one of ``water_table_depth_m`` (one
    water table under every cell) and ``antecedent_mm_per_day`` (the steady
    water table of a background recharge, per cell).
    """

    name: str
    steady_mm_per_day: float | None = None
    storm_mm_per_h: float | None = None
    duration_h: float | None = None
    water_table_depth_m: float | None = None
    antecedent_mm_per_day: float | None = None
    return_period_years: float | None = None
    """Return period the case stands for, years (shown in the report; not used in the model)."""
    source: str | None = None
    """Where the case comes from (a design-storm table, a forecast, a record), in words."""

    @property
    def is_storm(self) -> bool:
        """True for a storm case, False for steady recharge."""
        return self.storm_mm_per_h is not None

    @property
    def slug(self) -> str:
        """File-name-safe form of the case name (lower case, ``-`` separated)."""
        return slugify(self.name)


@dataclass(frozen=True)
class Project:
    """``[project]``: who the screening is for and by, for the report's memo block.

    Every field is optional text (``data_date`` may also be a TOML date); none
    changes a computed number.
    """

    name: str | None = None
    number: str | None = None
    prepared_by: str | None = None
    checked_by: str | None = None
    data_date: _dt.date | str | None = None
    notes: str | None = None

    def record(self) -> dict:
        """The fields given, for ``manifest.json`` (a date as ISO 8601 text)."""
        return {k: (v.isoformat() if isinstance(v, _dt.date) else v)
                for k, v in vars(self).items() if v is not None}


@dataclass(frozen=True)
class Uncertainty:
    """``[uncertainty]``: how the probability of failure is estimated."""

    samples: int = 400
    seed: int = 0
    correlation: str = "cell"
    method: str = "monte_carlo"


@dataclass(frozen=True)
class Clusters:
    """``[clusters]``: multi-cell failure clusters.

    ``min_area_m2``/``max_area_m2`` bound the size-resolved search;
    ``passive_fraction`` is the share of full Rankine passive resistance
    counted at the toe (full passive pressure needs large strains);
    ``nodata_faces`` whether margin faces towards nodata are free (default)
    or charged like any margin.
    ``size_windows`` windows around the least-stable failing clusters are
    searched per rain case (0: no size-resolved search), in ``size_bands``
    geometric area bands, each with ``size_time_limit_s`` for its
    mixed-integer solves.
    """

    min_area_m2: float
    max_area_m2: float
    passive_fraction: float = 0.5
    nodata_faces: str = "free"
    size_windows: int = 5
    size_bands: int = 1
    size_time_limit_s: float = 10.0


#: Accepted range of ``[runout] angle_of_reach_deg`` and of the volume relation's angle, degrees.
ANGLE_OF_REACH_RANGE_DEG = (5.0, 45.0)


@dataclass(frozen=True)
class Runout:
    """``[runout]``: reach of each failure source along its flow path (angle of reach).

    ``angle_of_reach_deg`` fixes the crown-to-tip angle of every source; None
    (the default) takes it from each source's volume by the debris-flow
    relation of docs/methods.md, "Runout reach". ``source_failure_probability``
    makes sources of the cells whose probability of failure reaches it (where no
    cluster stage runs; needs ``[uncertainty]``); by default a source is a
    connected patch of cells with FS < 1. ``continue_past_corridor`` lets a
    path run on past the first corridor strip it meets (switchbacks); by
    default it stops there.
    """

    angle_of_reach_deg: float | None = None
    source_failure_probability: float | None = None
    continue_past_corridor: bool = False


@dataclass(frozen=True)
class Corridor:
    """``[corridor]``: road or pipeline centreline, its segments and strips, and what lies on it.

    Lengths are metres along the line (``segment_m``, ``start_chainage_m``)
    and across it (``half_width_m``, the strip each segment covers on both
    sides). ``*_crs`` names the CRS of a file that has none. ``culverts``
    are points where water passes through the road fill; ``engineered_ground``
    polygons or a raster (non-zero cells) of cut and fill, optionally given
    their own soil unit (``engineered_soil_unit``).
    """

    centreline: Path
    segment_m: float = 100.0
    half_width_m: float = 10.0
    start_chainage_m: float = 0.0
    centreline_crs: str | None = None
    clip_to_dem: bool = False
    culverts: Path | None = None
    culverts_crs: str | None = None
    engineered_ground: Path | None = None
    engineered_ground_crs: str | None = None
    engineered_soil_unit: int | None = None


@dataclass(frozen=True)
class Inventory:
    """``[inventory]``: mapped landslides to compare the map with.

    ``landslides`` is a GeoJSON or GeoPackage file of polygons or points
    (``landslides_crs`` names the CRS of a file that has none). Points mark
    source cells, widened to a disc of ``point_buffer_m``; polygons are
    rasterised by cell centre, or every cell they touch with
    ``all_touched``. ``event_field``/``event`` and ``type_field``/``types``
    keep a subset of the features by their attributes. ``score_part``
    ``"scar"`` scores only the upper part of each polygon (the cells in the
    upper half of its relief), ``"whole"`` every cell. ``date`` is when the
    landslides happened (compared with the scenario's ``dem_date``).
    See docs/methods.md, "Agreement with mapped landslides".
    """

    landslides: Path
    landslides_crs: str | None = None
    point_buffer_m: float = 0.0
    all_touched: bool = False
    event_field: str | None = None
    event: str | None = None
    type_field: str | None = None
    types: tuple = ()
    score_part: str = "scar"
    date: _dt.date | None = None


@dataclass(frozen=True)
class Scenario:
    """A validated scenario. Paths are absolute; values are in SI units."""

    path: Path
    sha256: str
    title: str
    dem: Path
    output: Path
    dem_vertical_unit: str | None
    routing: Routing
    soil: Soil | None = None
    rain: tuple[RainCase, ...] = ()
    uncertainty: Uncertainty | None = None
    clusters: Clusters | None = None
    runout: Runout | None = None
    corridor: Corridor | None = None
    inventory: Inventory | None = None
    project: Project | None = None
    dem_date: _dt.date | None = None
    extra: dict = field(default_factory=dict)

    def input_files(self) -> list[Path]:
        """Every input file the scenario names (never written by a run)."""
        files = [self.path, self.dem]
        if self.soil is not None and self.soil.map is not None:
            files.append(self.soil.map)
        if self.corridor is not None:
            files += [p for p in (self.corridor.centreline, self.corridor.culverts,
                                  self.corridor.engineered_ground) if p is not None]
        if self.inventory is not None:
            files.append(self.inventory.landslides)
        return files
