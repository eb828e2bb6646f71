"""Read and validate a scenario file (TOML) into typed objects in SI units.

One scenario file drives one run. The format is a public contract, documented
key by key in ``docs/scenario-format.md``. Paths are relative to the scenario
file; units live in the key names; unknown keys are errors.

The validator is a small core (:func:`load_scenario`) plus one parser per
section, registered in :data:`SECTION_PARSERS`. A later stage adds its
section by registering a parser; the core does not change.

Every error is a :class:`~slopescreen.errors.ScenarioError` whose one-line
message names the file and the key path, what was received and what is
expected, e.g. ``scenario.toml: [soil.units.1].depth_m: must be > 0 m, got -1``.
"""

from __future__ import annotations

import hashlib
import math
import tomllib
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

from .errors import InputWarning, ScenarioError

ROUTING_METHODS = ("dinf", "mfd", "d8")
"""Accepted values of ``[routing].method``."""

VERTICAL_UNITS = {"metre": 1.0, "foot": 0.3048, "us_survey_foot": 1200.0 / 3937.0}
"""Accepted values of ``dem_vertical_unit`` and their size in metres."""


# ---------------------------------------------------------------------------
# Typed scenario
# ---------------------------------------------------------------------------


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


@dataclass(frozen=True)
class Soil:
    """The ``[soil]`` section: an optional unit map and one table per unit."""

    map: Path | None
    units: dict[int, SoilUnit]


@dataclass(frozen=True)
class RainCase:
    """One ``[[rain]]`` case: steady recharge or a storm (Iverson 2000).

    Exactly one of ``steady_mm_per_day`` and ``storm_mm_per_h`` is set.
    """

    name: str
    steady_mm_per_day: float | None = None
    storm_mm_per_h: float | None = None
    duration_h: float | None = None
    water_table_depth_m: float | None = None

    @property
    def is_storm(self) -> bool:
        """True for a storm case, False for steady recharge."""
        return self.storm_mm_per_h is not None

    @property
    def slug(self) -> str:
        """File-name-safe form of the case name (lower case, ``-`` separated)."""
        return slugify(self.name)


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
    counted at the toe (full passive pressure needs large strains).
    ``size_windows`` windows around the least-stable failing clusters are
    searched per rain case (0: no size-resolved search), in ``size_bands``
    geometric area bands, each with ``size_time_limit_s`` for its
    mixed-integer solves.
    """

    min_area_m2: float
    max_area_m2: float
    passive_fraction: float = 0.5
    size_windows: int = 5
    size_bands: int = 1
    size_time_limit_s: float = 10.0


@dataclass(frozen=True)
class Corridor:
    """``[corridor]``: road or pipeline centreline and segment length."""

    centreline: Path
    segment_m: float


@dataclass(frozen=True)
class Inventory:
    """``[inventory]``: mapped landslides to compare the map with."""

    landslides: Path


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
    corridor: Corridor | None = None
    inventory: Inventory | None = None
    extra: dict = field(default_factory=dict)

    def input_files(self) -> list[Path]:
        """Every input file the scenario names (never written by a run)."""
        files = [self.path, self.dem]
        if self.soil is not None and self.soil.map is not None:
            files.append(self.soil.map)
        if self.corridor is not None:
            files.append(self.corridor.centreline)
        if self.inventory is not None:
            files.append(self.inventory.landslides)
        return files


# ---------------------------------------------------------------------------
# Reading helpers: each knows the file and the key path for its messages
# ---------------------------------------------------------------------------


class Ctx:
    """Where a value sits: the scenario file and a key path, for error messages."""

    def __init__(self, file: Path, path: str = ""):
        self.file = file
        self.path = path

    def child(self, key) -> "Ctx":
        """Context of a key inside this table."""
        if isinstance(key, int):
            return Ctx(self.file, f"{self.path}[{key}]")
        if not self.path:
            return Ctx(self.file, str(key))
        return Ctx(self.file, f"{self.path}.{key}")

    def where(self) -> str:
        """``file: key.path`` as used at the start of every message."""
        return f"{self.file.name}: {self.path}" if self.path else self.file.name

    def fail(self, message: str) -> ScenarioError:
        """Build the error for this place (the caller raises it)."""
        return ScenarioError(f"{self.where()}: {message}")


def _describe(value) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def check_keys(table: dict, ctx: Ctx, allowed, required=()) -> None:
    """Refuse unknown keys and report missing required ones."""
    if not isinstance(table, dict):
        raise ctx.fail(f"expected a table, got {_describe(table)}")
    for key in table:
        if key not in allowed:
            choices = ", ".join(sorted(allowed))
            raise ctx.child(key).fail(f"unknown key; accepted keys here are: {choices}")
    for key in required:
        if key not in table:
            raise ctx.child(key).fail("required key is missing")


def get_number(table, key, ctx: Ctx, *, default=None, low=None, high=None,
               low_open=False, required=False) -> float | None:
    """Read a finite number in [low, high] (``low_open`` makes it > low)."""
    c = ctx.child(key)
    if key not in table:
        if required:
            raise c.fail("required key is missing")
        return default
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise c.fail(f"expected a number, got {_describe(value)}")
    value = float(value)
    if not math.isfinite(value):
        raise c.fail(f"expected a finite number, got {value}")
    if low is not None and (value < low or (low_open and value == low)):
        op = ">" if low_open else ">="
        raise c.fail(f"must be {op} {low:g}, got {value:g}")
    if high is not None and value > high:
        raise c.fail(f"must be <= {high:g}, got {value:g}")
    return value


def get_int(table, key, ctx: Ctx, *, default=None, low=None, high=None) -> int | None:
    """Read an integer in [low, high]."""
    c = ctx.child(key)
    if key not in table:
        return default
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, int):
        raise c.fail(f"expected a whole number, got {_describe(value)}")
    if low is not None and value < low:
        raise c.fail(f"must be >= {low}, got {value}")
    if high is not None and value > high:
        raise c.fail(f"must be <= {high}, got {value}")
    return value


def get_string(table, key, ctx: Ctx, *, default=None, choices=None, required=False) -> str | None:
    """Read a non-empty string, optionally one of ``choices``."""
    c = ctx.child(key)
    if key not in table:
        if required:
            raise c.fail("required key is missing")
        return default
    value = table[key]
    if not isinstance(value, str) or not value.strip():
        raise c.fail(f"expected a non-empty text, got {_describe(value)}")
    if choices is not None and value not in choices:
        raise c.fail(f"expected one of {', '.join(choices)}; got {value!r}")
    return value


def get_path(table, key, ctx: Ctx, *, must_exist=True, required=False) -> Path | None:
    """Read a path relative to the scenario file and resolve it."""
    text = get_string(table, key, ctx, required=required)
    if text is None:
        return None
    path = (ctx.file.parent / text).resolve()
    if must_exist and not path.exists():
        raise ctx.child(key).fail(f"file not found: {text} (paths are relative to the scenario file)")
    return path


def slugify(name: str) -> str:
    """Turn a rain-case name into a file-name-safe slug."""
    out = []
    for ch in name.lower():
        if ch.isascii() and ch.isalnum():
            out.append(ch)
        elif out and out[-1] != "-":
            out.append("-")
    slug = "".join(out).strip("-")
    return slug or "case"


# ---------------------------------------------------------------------------
# Parameters: a number or a distribution table
# ---------------------------------------------------------------------------

# name -> (low, high, low_open, warn_low, warn_high, required, default)
SOIL_PROPERTIES = {
    "depth_m": (0.0, 20.0, True, None, 5.0, True, None),
    "cohesion_kpa": (0.0, 500.0, False, None, None, True, None),
    "root_cohesion_kpa": (0.0, 500.0, False, None, None, False, 0.0),
    "lateral_root_cohesion_kpa": (0.0, 500.0, False, None, None, False, 0.0),
    "friction_deg": (0.0, 60.0, True, None, None, True, None),
    "unit_weight_kn_m3": (10.0, 25.0, False, 14.0, 23.0, True, None),
    "conductivity_m_per_day": (0.0, 1.0e4, True, None, None, True, None),
    "diffusivity_m2_per_s": (0.0, 1.0, True, None, None, False, None),
}
"""Accepted range of each soil property: (low, high, low is excluded, warn below,
warn above, required, default). Ranges follow common screening practice."""


def parse_parameter(value, ctx: Ctx, *, low, high, low_open=False, warn_low=None, warn_high=None):
    """Parse a fixed number or a distribution table into a Parameter.

    ``{ uniform = [low, high] }``, ``{ normal = [mean, sd] }`` (truncated to
    the physical range), ``{ lognormal = [median, sd_of_log] }``.
    """
    from . import parameters as P

    def in_range(x, what):
        if x < low or (low_open and x == low) or x > high:
            op = ">" if low_open else ">="
            raise ctx.fail(f"{what} must be {op} {low:g} and <= {high:g}, got {x:g}")
        if (warn_low is not None and x < warn_low) or (warn_high is not None and x > warn_high):
            warnings.warn(
                f"{ctx.where()}: {what} {x:g} is outside the usual range "
                f"{warn_low if warn_low is not None else low:g}-{warn_high if warn_high is not None else high:g}; check it",
                InputWarning, stacklevel=4)

    if isinstance(value, bool):
        raise ctx.fail(f"expected a number or a distribution table, got {value!r}")
    if isinstance(value, (int, float)):
        x = float(value)
        if not math.isfinite(x):
            raise ctx.fail(f"expected a finite number, got {x}")
        in_range(x, "value")
        return P.fixed(x)
    if not isinstance(value, dict) or len(value) != 1:
        raise ctx.fail("expected a number or a table with exactly one of uniform, normal, "
                       f"lognormal; got {_describe(value)}")
    (kind, args), = value.items()
    c = ctx.child(kind)
    if kind not in ("uniform", "normal", "lognormal"):
        raise c.fail("unknown distribution; accepted: uniform, normal, lognormal")
    if (not isinstance(args, list) or len(args) != 2
            or any(isinstance(a, bool) or not isinstance(a, (int, float)) for a in args)
            or not all(math.isfinite(float(a)) for a in args)):
        raise c.fail(f"expected a list of two numbers, got {_describe(args)}")
    a, b = float(args[0]), float(args[1])
    if kind == "uniform":
        if a > b:
            raise c.fail(f"low {a:g} is greater than high {b:g}")
        in_range(a, "low")
        in_range(b, "high")
        dist = P.uniform(a, b)
    elif kind == "normal":
        if b < 0:
            raise c.fail(f"standard deviation must be >= 0, got {b:g}")
        in_range(a, "mean")
        dist = P.normal(a, b)
    else:
        if a <= 0:
            raise c.fail(f"median must be > 0, got {a:g}")
        if b < 0:
            raise c.fail(f"sd of log must be >= 0, got {b:g}")
        in_range(a, "median")
        dist = P.lognormal(a, b)
    lo = math.nextafter(low, math.inf) if low_open else low
    return dist.truncated(lo, high)


# ---------------------------------------------------------------------------
# Section parsers
# ---------------------------------------------------------------------------


def _parse_routing(table, ctx: Ctx, base: Path):
    check_keys(table, ctx, {"method", "mfd_exponent"})
    method = get_string(table, "method", ctx, default="dinf", choices=ROUTING_METHODS)
    exponent = get_number(table, "mfd_exponent", ctx, default=1.1, low=0.0, high=20.0, low_open=True)
    if "mfd_exponent" in table and method != "mfd":
        raise ctx.child("mfd_exponent").fail('applies only to method = "mfd"')
    return {"routing": Routing(method=method, mfd_exponent=exponent)}


def _parse_soil_unit(table, ctx: Ctx, code: int) -> SoilUnit:
    allowed = set(SOIL_PROPERTIES) | {"label"}
    required = [k for k, spec in SOIL_PROPERTIES.items() if spec[5]]
    check_keys(table, ctx, allowed, required)
    label = get_string(table, "label", ctx, default=f"unit {code}")
    values = {}
    from . import parameters as P

    for key, (low, high, low_open, wlo, whi, _req, default) in SOIL_PROPERTIES.items():
        if key in table:
            values[key] = parse_parameter(table[key], ctx.child(key), low=low, high=high,
                                          low_open=low_open, warn_low=wlo, warn_high=whi)
        elif default is not None:
            values[key] = P.fixed(default)
        else:
            values[key] = None
    return SoilUnit(code=code, label=label, **values)


def _parse_soil(table, ctx: Ctx, base: Path):
    check_keys(table, ctx, {"map", "units"}, required=("units",))
    soil_map = get_path(table, "map", ctx)
    units_table = table["units"]
    uctx = ctx.child("units")
    if not isinstance(units_table, dict) or not units_table:
        raise uctx.fail("expected at least one table [soil.units.CODE]")
    units = {}
    for key, unit_table in units_table.items():
        c = uctx.child(key)
        try:
            code = int(key)
        except ValueError:
            raise c.fail("unit code must be a whole number (the value in the soil map)") from None
        if not -2**31 <= code < 2**31:
            raise c.fail("unit code is out of the 32-bit integer range")
        units[code] = _parse_soil_unit(unit_table, c, code)
    if soil_map is None and len(units) != 1:
        raise ctx.child("map").fail(
            f"{len(units)} soil units are given but no map says where each lies; "
            "add map = \"soil_units.tif\" or keep exactly one unit")
    return {"soil": Soil(map=soil_map, units=units)}


def _parse_rain(table, ctx: Ctx, base: Path):
    if not isinstance(table, list) or not table:
        raise ctx.fail("expected one or more [[rain]] tables")
    cases = []
    names = set()
    for i, item in enumerate(table):
        c = ctx.child(i)
        check_keys(item, c, {"name", "steady_mm_per_day", "storm_mm_per_h", "duration_h",
                             "water_table_depth_m"}, required=("name",))
        name = get_string(item, "name", c, required=True)
        if name in names:
            raise c.child("name").fail(f"rain case name {name!r} is used twice; names must differ")
        names.add(name)
        steady = get_number(item, "steady_mm_per_day", c, low=0.0, high=5000.0, low_open=True)
        storm = get_number(item, "storm_mm_per_h", c, low=0.0, high=1000.0, low_open=True)
        if steady is None and storm is None:
            raise c.fail("give steady_mm_per_day (steady recharge) or storm_mm_per_h with "
                         "duration_h and water_table_depth_m (a storm)")
        if steady is not None and storm is not None:
            raise c.child("storm_mm_per_h").fail(
                "a rain case is either steady (steady_mm_per_day) or a storm (storm_mm_per_h), not both")
        if steady is not None:
            for key in ("duration_h", "water_table_depth_m"):
                if key in item:
                    raise c.child(key).fail("applies only to a storm case (storm_mm_per_h)")
            cases.append(RainCase(name=name, steady_mm_per_day=steady))
        else:
            duration = get_number(item, "duration_h", c, low=0.0, high=24.0 * 30, low_open=True,
                                  required=True)
            table_depth = get_number(item, "water_table_depth_m", c, low=0.0, high=20.0,
                                     required=True)
            cases.append(RainCase(name=name, storm_mm_per_h=storm, duration_h=duration,
                                  water_table_depth_m=table_depth))
    slugs = [r.slug for r in cases]
    if len(set(slugs)) != len(slugs):
        raise ctx.fail("two rain case names give the same file name; make them differ in letters or digits")
    return {"rain": tuple(cases)}


def _parse_uncertainty(table, ctx: Ctx, base: Path):
    check_keys(table, ctx, {"samples", "seed", "correlation", "method"})
    return {"uncertainty": Uncertainty(
        samples=get_int(table, "samples", ctx, default=400, low=1, high=100_000),
        seed=get_int(table, "seed", ctx, default=0, low=0, high=2**63 - 1),
        correlation=get_string(table, "correlation", ctx, default="cell", choices=("cell", "unit")),
        method=get_string(table, "method", ctx, default="monte_carlo",
                          choices=("monte_carlo", "fosm")),
    )}


def _parse_clusters(table, ctx: Ctx, base: Path):
    check_keys(table, ctx, {"min_area_m2", "max_area_m2", "passive_fraction", "size_windows",
                            "size_bands", "size_time_limit_s"},
               required=("min_area_m2", "max_area_m2"))
    lo = get_number(table, "min_area_m2", ctx, low=0.0, low_open=True)
    hi = get_number(table, "max_area_m2", ctx, low=0.0, low_open=True)
    if lo > hi:
        raise ctx.child("min_area_m2").fail(f"{lo:g} is greater than max_area_m2 {hi:g}")
    passive = get_number(table, "passive_fraction", ctx, default=0.5, low=0.0, high=1.0)
    return {"clusters": Clusters(
        min_area_m2=lo, max_area_m2=hi, passive_fraction=passive,
        size_windows=get_int(table, "size_windows", ctx, default=5, low=0, high=1000),
        size_bands=get_int(table, "size_bands", ctx, default=1, low=1, high=8),
        size_time_limit_s=get_number(table, "size_time_limit_s", ctx, default=10.0, low=0.0,
                                     high=3600.0, low_open=True))}


def _parse_corridor(table, ctx: Ctx, base: Path):
    check_keys(table, ctx, {"centreline", "segment_m"}, required=("centreline",))
    return {"corridor": Corridor(
        centreline=get_path(table, "centreline", ctx, required=True),
        segment_m=get_number(table, "segment_m", ctx, default=100.0, low=0.0, low_open=True),
    )}


def _parse_inventory(table, ctx: Ctx, base: Path):
    check_keys(table, ctx, {"landslides"}, required=("landslides",))
    return {"inventory": Inventory(landslides=get_path(table, "landslides", ctx, required=True))}


SECTION_PARSERS: dict[str, Callable[[Any, Ctx, Path], dict]] = {
    "routing": _parse_routing,
    "soil": _parse_soil,
    "rain": _parse_rain,
    "uncertainty": _parse_uncertainty,
    "clusters": _parse_clusters,
    "corridor": _parse_corridor,
    "inventory": _parse_inventory,
}
"""Parser of each optional section. A parser takes (value, context, scenario
folder) and returns keyword arguments for :class:`Scenario`."""

TOP_LEVEL_KEYS = ("title", "dem", "output", "dem_vertical_unit")


# ---------------------------------------------------------------------------
# Core
# ---------------------------------------------------------------------------


def load_scenario(path) -> Scenario:
    """Read, parse and validate a scenario file.

    Parameters
    ----------
    path : str or os.PathLike
        The scenario TOML file.

    Returns
    -------
    Scenario
        Validated, with absolute paths and SI units.

    Raises
    ------
    ScenarioError
        The file is missing, not TOML, or holds an unknown key, a wrong type,
        an out-of-range value or an inconsistent combination. The message is
        one line naming the file and the key path.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (folder / "dem.tif").write_bytes(b"")
    >>> _ = (folder / "s.toml").write_text('dem = "dem.tif"\\noutput = "out"\\n')
    >>> load_scenario(folder / "s.toml").routing.method
    'dinf'
    """
    path = Path(path)
    ctx = Ctx(path)
    if not path.is_file():
        raise ScenarioError(f"{path}: scenario file not found")
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise ScenarioError(f"{path}: cannot read the scenario file ({exc.strerror})") from None
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise ScenarioError(f"{path.name}: not a text file; a scenario is a TOML text file") from None
    except tomllib.TOMLDecodeError as exc:
        raise ScenarioError(f"{path.name}: not valid TOML ({exc})") from None
    path = path.resolve()
    ctx = Ctx(path)
    check_keys(data, ctx, set(TOP_LEVEL_KEYS) | set(SECTION_PARSERS), required=("dem", "output"))
    title = get_string(data, "title", ctx, default=path.stem)
    dem = get_path(data, "dem", ctx, required=True)
    output_text = get_string(data, "output", ctx, required=True)
    output = (path.parent / output_text).resolve()
    vertical = get_string(data, "dem_vertical_unit", ctx, choices=tuple(VERTICAL_UNITS))
    kwargs: dict[str, Any] = {"routing": Routing()}
    for key, parser in SECTION_PARSERS.items():
        if key in data:
            kwargs.update(parser(data[key], ctx.child(key), path.parent))
    scenario = Scenario(path=path, sha256=hashlib.sha256(raw).hexdigest(), title=title, dem=dem,
                        output=output, dem_vertical_unit=vertical, **kwargs)
    _check_combination(scenario, ctx)
    return scenario


def _check_combination(s: Scenario, ctx: Ctx) -> None:
    """Checks that involve more than one section."""
    if s.rain and s.soil is None:
        raise ctx.child("soil").fail("rain cases need soil properties: add a [soil] section")
    if s.soil is not None and not s.rain:
        raise ctx.child("rain").fail("a [soil] section needs at least one [[rain]] case")
    if s.uncertainty is not None and s.soil is None:
        raise ctx.child("uncertainty").fail("needs a [soil] section with distributions")
    if s.soil is not None and any(r.is_storm for r in s.rain):
        for unit in s.soil.units.values():
            if unit.diffusivity_m2_per_s is None:
                raise ctx.child("soil").child("units").child(unit.code).child(
                    "diffusivity_m2_per_s").fail("required when a rain case is a storm")
    inputs = {p.resolve() for p in s.input_files()}
    if s.output.resolve() in inputs or s.output.is_file():
        raise ctx.child("output").fail("must be a folder, not an input or existing file")
