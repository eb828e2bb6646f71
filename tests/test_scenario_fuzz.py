"""Random scenario files never make the command fault.

The defining property of the command line's contract (docs/scenario-format.md): whatever a
scenario file holds, ``slopescreen run`` either runs (exit 0) or refuses it with one line,
``slopescreen: error: FILE: key.path: reason``, and exit 2; exit 1 (an internal fault) never
comes from input. ``slopescreen check`` keeps the same contract and agrees with ``run`` on the
errors it can find without computing.

The documents are built from the schema of docs/scenario-format.md: a valid scenario with
random values in range and a random choice of the optional sections, then a few random
changes (a value of another type, a number out of range, NaN or infinity, a missing or an
unknown key, a section of the wrong type). The inputs are a 12 x 12-cell DEM with a soil map,
a road, culverts, engineered ground and an inventory, written once for the module. What could
make a run slow is capped: samples <= 50, one size-resolved window of at most 1 s, two area
bands, three rain cases, segments of at least 1 m.
"""

import contextlib
import datetime as dt
import io
import json
import math
import posixpath
import re
import warnings

import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, event, example, given, settings
from hypothesis import strategies as st

from conftest import write_tif
from slopescreen.cli import main

CELL = 5.0
X0, Y0 = 500000.0, 5100000.0
ROWS = COLS = 12
EPSG = 32633


# ---------------------------------------------------------------------------------------------
# Inputs, written once
# ---------------------------------------------------------------------------------------------

def _feature_collection(path, geoms, props=None):
    feats = [{"type": "Feature", "properties": {"id": i + 1} | (props[i] if props else {}),
              "geometry": shapely.geometry.mapping(g)} for i, g in enumerate(geoms)]
    doc = {"type": "FeatureCollection", "features": feats,
           "crs": {"type": "name", "properties": {"name": f"urn:ogc:def:crs:EPSG::{EPSG}"}}}
    path.write_text(json.dumps(doc), encoding="utf-8")


def _xy(row, col):
    return X0 + (col + 0.5) * CELL, Y0 - (row + 0.5) * CELL


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    folder = tmp_path_factory.mktemp("fuzz")
    r, c = np.mgrid[0:ROWS, 0:COLS]
    z = 300.0 - 0.9 * CELL * r + 1.5 * np.sin(c / 1.7) * np.cos(r / 2.3)
    z[0, 0] = z[11, 11] = np.nan                                   # nodata cells
    write_tif(folder / "dem.tif", z.astype(np.float32))
    soils = np.ones((ROWS, COLS), dtype=np.uint8)
    soils[:, 6:] = 2
    soils[0, 5] = 0                                                # a cell without a code
    write_tif(folder / "soils.tif", soils, nodata=0, dtype="uint8")
    fill = np.zeros((ROWS, COLS), dtype=np.uint8)
    fill[8, :] = 1
    write_tif(folder / "fill.tif", fill, nodata=None, dtype="uint8")
    road = shapely.LineString([_xy(8, 0.2), _xy(8.3, 6), _xy(8, 10.8)])
    _feature_collection(folder / "road.geojson", [road])
    _feature_collection(folder / "culverts.geojson", [shapely.Point(_xy(8.1, 4))])
    _feature_collection(folder / "fill.geojson", [road.buffer(4.0)])
    slides = [shapely.box(X0 + 3 + 20 * i, Y0 - 38, X0 + 19 + 20 * i, Y0 - 12) for i in range(3)]
    _feature_collection(folder / "slides.geojson", slides,
                        [{"event": "2020", "kind": k} for k in ("debris slide", "rock fall",
                                                                "debris slide")])
    (folder / "notes.txt").write_text("not a raster\n", encoding="utf-8")
    (folder / "sub").mkdir()
    return folder


# ---------------------------------------------------------------------------------------------
# TOML text (a small writer: every table inline, so one line per top-level key)
# ---------------------------------------------------------------------------------------------

def toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return "nan" if math.isnan(v) else repr(v)                 # inf, -inf, 1e+300
    if isinstance(v, (dt.date, dt.datetime)):
        return v.isoformat()
    if isinstance(v, str):
        return toml_string(v)
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{toml_string(k)} = {toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(type(v))


def toml_string(s: str) -> str:
    out = []
    for ch in s:
        if ch in '"\\':
            out.append("\\" + ch)
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04x}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def toml_document(doc: dict) -> str:
    return "".join(f"{toml_string(k)} = {toml_value(v)}\n" for k, v in doc.items())


# ---------------------------------------------------------------------------------------------
# Values in range, from the schema
# ---------------------------------------------------------------------------------------------

def numbers(low, high, *, low_open=False):
    """Floats and whole numbers in [low, high] (``(low, high]`` with ``low_open``)."""
    # > low by at least the smallest normal 32-bit float (the precision of the products)
    least = low + float(np.finfo(np.float32).tiny) if low_open else low
    floats = st.floats(least, high, allow_nan=False)
    ints = st.integers(math.ceil(low) + (1 if low_open and float(low).is_integer() else 0),
                       math.floor(high))
    return st.one_of(floats, ints) if math.ceil(low) <= math.floor(high) else floats


texts = st.text(st.characters(blacklist_categories=("Cs",)), min_size=1, max_size=12).filter(
    str.strip)
names = st.one_of(  # drawn on the maps, also with characters the map font lacks
    st.text(st.characters(min_codepoint=0x20, max_codepoint=0x17F, blacklist_categories=("Cs",)),
            min_size=1, max_size=12).filter(str.strip), texts)
dates = st.dates(dt.date(1900, 1, 1), dt.date(2100, 1, 1))
crs_texts = st.sampled_from([f"EPSG:{EPSG}", "EPSG:4326", "EPSG:3857"])

SOIL = {  # key: (low, high, low is excluded, required)
    "depth_m": (0.01, 20.0, False, True),
    "cohesion_kpa": (0.0, 500.0, False, True),
    "root_cohesion_kpa": (0.0, 500.0, False, False),
    "lateral_root_cohesion_kpa": (0.0, 500.0, False, False),
    "friction_deg": (0.0, 60.0, True, True),
    "unit_weight_kn_m3": (10.0, 25.0, False, True),
    "conductivity_m_per_day": (0.0, 1.0e4, True, True),
    "diffusivity_m2_per_s": (1.0e-12, 1.0, False, False),
}


@st.composite
def soil_property(draw, low, high, low_open):
    kind = draw(st.sampled_from(["fixed", "fixed", "uniform", "normal", "lognormal"]))
    value = numbers(low, high, low_open=low_open)
    if kind == "fixed":
        return draw(value)
    if kind == "uniform":
        a, b = sorted([draw(value), draw(value)])
        return {"uniform": [a, b]}
    if kind == "normal":
        return {"normal": [draw(value), draw(numbers(0.0, high / 4))]}
    median = draw(st.floats(max(low, 1e-3), high, allow_nan=False))
    return {"lognormal": [median, draw(numbers(0.0, 1.0))]}


@st.composite
def soil_unit(draw, storms):
    unit = {}
    if draw(st.booleans()):
        unit["label"] = draw(texts)
    for key, (low, high, low_open, required) in SOIL.items():
        if required or (key == "diffusivity_m2_per_s" and storms) or draw(st.booleans()):
            unit[key] = draw(soil_property(low, high, low_open))
    return unit


@st.composite
def rain_case(draw, name):
    case = {"name": name}
    if draw(st.booleans()):
        case["steady_mm_per_day"] = draw(numbers(0.0, 5000.0))
        return case
    case["storm_mm_per_h"] = draw(numbers(0.0, 1000.0, low_open=True))
    case["duration_h"] = draw(numbers(0.01, 720.0))
    if draw(st.booleans()):
        case["water_table_depth_m"] = draw(numbers(0.0, 20.0))
    else:
        case["antecedent_mm_per_day"] = draw(numbers(0.0, 5000.0))
    return case


def optional(draw, table, key, strategy):
    if draw(st.booleans()):
        table[key] = draw(strategy)


@st.composite
def valid_document(draw):
    """A scenario that follows every rule of docs/scenario-format.md."""
    doc = {"dem": "dem.tif", "output": "out"}
    optional(draw, doc, "title", names)
    optional(draw, doc, "dem_vertical_unit", st.sampled_from(["metre", "foot", "us_survey_foot"]))
    optional(draw, doc, "dem_date", st.one_of(dates, dates.map(str)))
    if draw(st.booleans()):
        method = draw(st.sampled_from(["dinf", "mfd", "d8"]))
        doc["routing"] = {"method": method}
        if method == "mfd":
            optional(draw, doc["routing"], "mfd_exponent", numbers(0.0, 20.0, low_open=True))
    if not draw(st.integers(0, 4)):
        return doc                                                 # terrain only
    rain_names = draw(st.lists(names, min_size=1, max_size=2, unique_by=lambda s: _slug(s)))
    rain = [draw(rain_case(n)) for n in rain_names]
    storms = any("storm_mm_per_h" in r for r in rain)
    soil = {}
    optional(draw, soil, "depth_measured", st.sampled_from(["vertical", "slope_normal"]))
    optional(draw, soil, "min_failure_depth_m", numbers(0.0, 20.0))
    with_map = draw(st.booleans())
    codes = [1, 2] if with_map else [draw(st.sampled_from([1, 7, -3]))]
    if with_map:
        soil["map"] = "soils.tif"
    soil["units"] = {str(c): draw(soil_unit(storms)) for c in codes}
    doc["soil"] = soil
    doc["rain"] = rain
    if draw(st.booleans()):
        u = {}
        optional(draw, u, "samples", st.integers(1, 50))
        optional(draw, u, "seed", st.integers(0, 2**63 - 1))
        optional(draw, u, "correlation", st.sampled_from(["cell", "unit"]))
        optional(draw, u, "method", st.sampled_from(["monte_carlo", "fosm"]))
        u.setdefault("samples", draw(st.integers(1, 50)))         # the default 400 is slow
        doc["uncertainty"] = u
    elif any(isinstance(v, dict) for unit in soil["units"].values() for v in unit.values()):
        doc["uncertainty"] = {"samples": draw(st.integers(1, 50))}
    if draw(st.booleans()):
        lo = draw(numbers(1.0, 1000.0))
        c = {"min_area_m2": lo, "max_area_m2": draw(numbers(lo, 4000.0))}
        optional(draw, c, "passive_fraction", numbers(0.0, 1.0))
        optional(draw, c, "nodata_faces", st.sampled_from(["free", "charged"]))
        optional(draw, c, "size_bands", st.sampled_from([1, 1, 1, 2]))   # each band: up to 2 s
        optional(draw, c, "size_time_limit_s", st.floats(0.05, 1.0))
        c["size_windows"] = draw(st.integers(0, 1))               # the default 5 is slow
        doc["clusters"] = c
    corridor = draw(st.booleans())
    if corridor:
        k = {"centreline": "road.geojson"}
        optional(draw, k, "centreline_crs", crs_texts)
        optional(draw, k, "segment_m", numbers(1.0, 500.0))
        optional(draw, k, "half_width_m", numbers(0.0, 1000.0))
        optional(draw, k, "start_chainage_m", st.floats(-1e6, 1e6))
        optional(draw, k, "clip_to_dem", st.booleans())
        if draw(st.booleans()):
            k["culverts"] = "culverts.geojson"
            optional(draw, k, "culverts_crs", crs_texts)
        if draw(st.booleans()):
            k["engineered_ground"] = draw(st.sampled_from(["fill.geojson", "fill.tif"]))
            if k["engineered_ground"].endswith(".geojson"):
                optional(draw, k, "engineered_ground_crs", crs_texts)
            if draw(st.booleans()):
                k["engineered_soil_unit"] = 9
                doc["soil"]["units"]["9"] = draw(soil_unit(storms))
        doc["corridor"] = k
    if draw(st.booleans()):
        r = {}
        optional(draw, r, "angle_of_reach_deg", numbers(5.0, 45.0))
        if "uncertainty" in doc:
            optional(draw, r, "source_failure_probability", numbers(0.0, 1.0, low_open=True))
        if corridor:
            optional(draw, r, "continue_past_corridor", st.booleans())
        doc["runout"] = r
    if draw(st.booleans()):
        i = {"landslides": "slides.geojson"}
        optional(draw, i, "landslides_crs", crs_texts)
        optional(draw, i, "point_buffer_m", numbers(0.0, 1000.0))
        optional(draw, i, "all_touched", st.booleans())
        if draw(st.booleans()):
            i["event_field"], i["event"] = "event", draw(st.sampled_from(["2020", 2020, "1999"]))
        if draw(st.booleans()):
            i["type_field"] = "kind"
            i["types"] = draw(st.sampled_from(["debris slide", ["debris slide", "rock fall"],
                                               ["earth flow"]]))
        optional(draw, i, "score_part", st.sampled_from(["scar", "whole"]))
        optional(draw, i, "date", dates)
        doc["inventory"] = i
    return doc


def _slug(name):
    from slopescreen.scenario import slugify

    return slugify(name)


# ---------------------------------------------------------------------------------------------
# Changes that may break it
# ---------------------------------------------------------------------------------------------

scalars = st.one_of(
    st.booleans(),
    st.integers(-2**63, 2**63 - 1),
    st.sampled_from([0, -1, 1, 2**31, -2**31, 2**63 - 1, 10**6]),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([math.nan, math.inf, -math.inf, -0.0, 1e-300, 1e300, -1.0]),
    st.text(max_size=8),
    st.sampled_from(["", " ", "dem.tif", "soils.tif", "road.geojson", "slides.geojson",
                     "notes.txt", "sub", "missing.tif", "fill.tif", "dinf", "unit", "scar",
                     "EPSG:32633", "EPSG:99999", "2020-02-30", "1", "-3", "dem\x00.tif",
                     "a" * 300, "dem.tif/x", "sub/"]),
    dates,
    st.datetimes(dt.datetime(1900, 1, 1), dt.datetime(2100, 1, 1)),
)
wild = st.recursive(scalars, lambda inner: st.one_of(
    st.lists(inner, max_size=3),
    st.dictionaries(st.sampled_from(["uniform", "normal", "lognormal", "low", "x", "1", "name"]),
                    inner, max_size=2)), max_leaves=6)

SECTIONS = ("routing", "soil", "rain", "uncertainty", "clusters", "runout", "corridor",
            "inventory")
SLOW = {  # key: (is the value slow?, a small value in range instead)
    "samples": (lambda v: _number(v) and 50 < v <= 100_000, 50),
    "size_windows": (lambda v: _number(v) and 1 < v <= 1000, 1),
    "size_bands": (lambda v: _number(v) and 2 < v <= 8, 2),
    "size_time_limit_s": (lambda v: _number(v) and 1 < v <= 3600, 1.0),
}


def _number(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def paths_of(doc, prefix=()):
    """Every key path in the document (tables and list items included)."""
    items = doc.items() if isinstance(doc, dict) else enumerate(doc)
    for key, value in items:
        path = prefix + (key,)
        yield path
        if isinstance(value, (dict, list)):
            yield from paths_of(value, path)


def capped(doc):
    """``doc`` with every value that could make a run slow replaced (see :data:`SLOW`)."""
    for path in list(paths_of(doc)):
        slow, instead = SLOW.get(path[-1], (None, None))
        if slow is not None and slow(_at(doc, path)):
            _at(doc, path[:-1])[path[-1]] = instead
    for section, key, instead in (("uncertainty", "samples", 20), ("clusters", "size_windows", 1),
                                  ("clusters", "size_time_limit_s", 0.5)):
        if isinstance(doc.get(section), dict):   # not the slow defaults (400, 5, 10 s)
            doc[section].setdefault(key, instead)
    # a run writes into its output folder: keep it inside the module's folder
    out = doc.get("output")
    if isinstance(out, str) and out.strip() and not posixpath.normpath(
            posixpath.join("base", out.replace("\\", "/"))).startswith("base/"):
        doc["output"] = "out"
    return doc


def fast_enough(doc) -> bool:
    """False for a distribution without [uncertainty] (400 samples) or many rain cases."""
    units = doc.get("soil", {}).get("units") if isinstance(doc.get("soil"), dict) else None
    drawn = isinstance(units, dict) and any(
        isinstance(v, dict) for unit in units.values() if isinstance(unit, dict)
        for v in unit.values())
    rain = doc.get("rain")
    return not (drawn and "uncertainty" not in doc) and not (isinstance(rain, list)
                                                             and len(rain) > 3)


def _at(doc, path):
    for key in path:
        doc = doc[key]
    return doc


@st.composite
def changed(draw, doc):
    """``doc`` with 0-3 random changes.

    Each change picks a top-level key, then a key path under it (so that every section is
    changed about as often, however many keys it holds), with a near-uniform choice
    (``st.randoms``) rather than one that favours the first path.
    """
    doc = _copy(doc)
    rnd = draw(st.randoms(use_true_random=False))
    for _ in range(draw(st.sampled_from([0, 1, 1, 1, 2, 3]))):
        what = draw(st.sampled_from(["value", "value", "number", "number", "drop", "unknown",
                                     "section"]))
        if what == "section" or not doc:
            doc[draw(st.sampled_from(SECTIONS))] = draw(wild)
            continue
        tops = list(doc)
        top = rnd.choices(tops, weights=[3 if k in SECTIONS else 1 for k in tops])[0]
        path = rnd.choice([p for p in paths_of(doc) if p[0] == top])
        parent = _at(doc, path[:-1])
        value = parent[path[-1]]
        if what == "number" and _number(value):
            parent[path[-1]] = draw(st.sampled_from(nudged(value)))
        elif what in ("value", "number"):
            parent[path[-1]] = draw(wild)
        elif what == "drop":
            del parent[path[-1]]
        elif isinstance(parent, dict):
            parent[draw(st.sampled_from(["colour", "depth", "samples2", "Name"]))] = draw(wild)
    return doc


def nudged(value):
    """Numbers near ``value`` and at the edges: out of range, rounded, of the other type."""
    out = [-value, 0, -0.0, -1, math.nan, math.inf, -math.inf, 1e308, -2**63]
    if math.isfinite(value) and abs(value) < 1e30:
        out += [value * 1e6, value + 1e-9, value - 1e-9, int(value), float(value),
                float(np.float32(value))]
    return out


def _copy(doc):
    if isinstance(doc, dict):
        return {k: _copy(v) for k, v in doc.items()}
    if isinstance(doc, list):
        return [_copy(v) for v in doc]
    return doc


any_documents = valid_document().flatmap(changed).map(capped)
"""Documents for ``check``, which computes nothing (no cap on time)."""
documents = any_documents.filter(fast_enough)
"""Documents for ``run``."""


# ---------------------------------------------------------------------------------------------
# The properties
# ---------------------------------------------------------------------------------------------

ERROR = re.compile(r"^slopescreen: error: \S")


def command(folder, command_name, doc):
    path = folder / "fuzz.toml"
    path.write_text(toml_document(doc), encoding="utf-8")
    err, out = io.StringIO(), io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(out):
        code = main([command_name, str(path), "-q"])
    return code, err.getvalue().splitlines()


def assert_contract(code, lines, doc):
    text = toml_document(doc)
    assert code in (0, 2), f"exit {code}: {lines}\n{text}"
    assert not any("internal fault" in line for line in lines), f"{lines}\n{text}"
    if code == 2:
        assert len(lines) == 1 and ERROR.match(lines[0]), f"{lines}\n{text}"


FUZZ = settings(deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                      HealthCheck.filter_too_much,
                                                      HealthCheck.data_too_large])


BASE = {"dem": "dem.tif", "output": "out"}
STORM = {"soil": {"units": {"1": {
    "depth_m": 5e-324, "cohesion_kpa": 0.0, "friction_deg": 1.0, "unit_weight_kn_m3": 10.0,
    "conductivity_m_per_day": 1.0, "diffusivity_m2_per_s": 1.0}}},
    "rain": [{"name": "0", "storm_mm_per_h": 1.0, "duration_h": 1.0, "antecedent_mm_per_day": 0.0}]}


@settings(FUZZ, max_examples=200)
@given(doc=any_documents)
# regressions, each once an exit 1: a path holding a NUL character (ValueError), a file name
# too long for the file system (OSError)
@example(doc=BASE | {"dem": "dem\x00.tif"})
@example(doc=BASE | {"output": "a" * 300})
def test_check_exits_0_or_2_with_one_line(inputs, doc):
    code, lines = command(inputs, "check", doc)
    assert_contract(code, lines, doc)


@settings(FUZZ, max_examples=20)
@given(doc=documents)
# regression: a soil depth that is 0 as a 32-bit float passed check, then stopped the run with
# "depth_m: got 0.0" (no file, no key)
@example(doc=BASE | STORM)
@example(doc=BASE | {"inventory": {"landslides": "\x00"}})
def test_run_exits_0_or_2_and_agrees_with_check(inputs, doc):
    checked, check_lines = command(inputs, "check", doc)
    code, lines = command(inputs, "run", doc)
    event(f"check {checked}, run {code}")
    assert_contract(checked, check_lines, doc)
    assert_contract(code, lines, doc)
    if checked == 2:    # an error found before computing: run finds the same
        assert (code, lines) == (checked, check_lines), toml_document(doc)
    else:               # check passes: run computes
        assert code == 0, f"{lines}\n{toml_document(doc)}"


# ---------------------------------------------------------------------------------------------
# Shapes the fuzzing found, each once an exit 1 or a run-time error that check had passed
# ---------------------------------------------------------------------------------------------

def _unit(**kw):
    return {"depth_m": 2.0, "cohesion_kpa": 2.0, "friction_deg": 30.0, "unit_weight_kn_m3": 18.0,
            "conductivity_m_per_day": 1.0, "diffusivity_m2_per_s": 1e-4} | kw


def _found(unit=None, rain=None, **sections):
    return BASE | {"soil": {"units": {"1": unit or _unit()}},
                   "rain": [rain or {"name": "w", "steady_mm_per_day": 10.0}]} | sections


_SURGE = {"name": "s", "storm_mm_per_h": 10.0, "duration_h": 5.0, "antecedent_mm_per_day": 2.0}
_BAND = {"min_area_m2": 50.0, "max_area_m2": 400.0, "size_windows": 1, "size_time_limit_s": 0.5}

FOUND = {  # name: (document, exit status of check and run, what the one line names)
    # ZeroDivisionError in the storm head kernel: Z^2 of a 32-bit depth underflowed
    "storm_on_a_film_of_soil": (_found(_unit(depth_m=1e-25), _SURGE), 2, "depth_m: value must be >= 0.01"),
    # HiGHS "infeasible" in the size-resolved search
    "clusters_on_a_film_of_soil": (_found(_unit(depth_m=1e-21), clusters=_BAND), 2, "depth_m"),
    # ZeroDivisionError in the storm minimum kernel
    "storm_of_no_duration": (_found(rain=_SURGE | {"duration_h": 1e-290}), 2, "rain[0].duration_h"),
    # "time_s: holds infinite values" after check passed
    "storm_on_a_soil_that_barely_drains": (
        _found(_unit(diffusivity_m2_per_s=1.2e-38), _SURGE), 2, "diffusivity_m2_per_s"),
    # "friction_deg: must be < 60 degrees" from the cluster model after check passed; 60 is in
    # the documented range and every model takes it
    "clusters_at_the_top_of_the_friction_range": (
        _found(_unit(friction_deg=60.0), clusters=_BAND), 0, None),
    # "the band [1, 1] m^2 holds no whole number of 25 m^2 cells" after check passed
    "clusters_band_narrower_than_a_cell": (
        _found(clusters=_BAND | {"min_area_m2": 1.0, "max_area_m2": 1.0}), 2,
        "[clusters].min_area_m2, max_area_m2: the band 1-1 m^2 holds no whole number"),
    # "mean_fs and sd_fs must be finite" from FOSM after check passed (0/0 derivative)
    "fosm_with_a_spread_below_the_precision_of_its_mean": (
        _found(_unit(friction_deg={"normal": [17.3, 1e-16]}),
               uncertainty={"method": "fosm", "samples": 1}), 0, None),
    # "Glyph N missing from font(s)" warnings while the maps were drawn
    "names_the_map_font_lacks": (
        _found(rain={"name": "\u96e8 \x07", "steady_mm_per_day": 10.0})
        | {"title": "\u5c71\u8c37 valley"}, 0, None),
    # 55,000 segments of a millimetre on a 55 m road: minutes of work for no use
    "corridor_segments_of_a_millimetre": (
        BASE | {"corridor": {"centreline": "road.geojson", "segment_m": 0.001}}, 2,
        "corridor.segment_m: must be >= 1"),
    # the new floors together, in a storm with Monte Carlo: they run
    "storm_at_every_floor": (
        _found(_unit(depth_m={"uniform": [0.01, 0.02]}, diffusivity_m2_per_s=1e-12),
               _SURGE | {"duration_h": 0.01}, uncertainty={"samples": 5}), 0, None),
}


@pytest.mark.parametrize("name", list(FOUND))
def test_found_cases(inputs, name):
    doc, expected, names = FOUND[name]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        checked, check_lines = command(inputs, "check", doc)
        code, lines = command(inputs, "run", doc)
    assert not [w for w in caught if "missing from font" in str(w.message)]
    assert (checked, code) == (0 if expected == 0 else 2, expected), (check_lines, lines)
    if expected == 2:
        assert check_lines == lines and len(lines) == 1 and ERROR.match(lines[0])
        assert "fuzz.toml: " in lines[0] and names in lines[0], lines
