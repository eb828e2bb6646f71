"""One parser per optional section of the scenario, registered in :data:`SECTION_PARSERS`."""

from __future__ import annotations

import datetime as _dt
from pathlib import Path
from typing import Any, Callable

from .fields import (
    SOIL_PROPERTIES,
    Ctx,
    _describe,
    check_keys,
    get_bool,
    get_crs,
    get_date,
    get_int,
    get_number,
    get_path,
    get_string,
    get_texts,
    parse_parameter,
)
from .model import (
    ANGLE_OF_REACH_RANGE_DEG,
    DEPTH_MEASURED,
    MIN_FAILURE_DEPTH_M,
    ROUTING_METHODS,
    Clusters,
    Corridor,
    Inventory,
    Project,
    RainCase,
    Routing,
    Runout,
    Soil,
    SoilUnit,
    Uncertainty,
)


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
    from .. import parameters as P

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
    check_keys(table, ctx, {"map", "units", "depth_measured", "min_failure_depth_m"},
               required=("units",))
    min_depth = get_number(table, "min_failure_depth_m", ctx, default=MIN_FAILURE_DEPTH_M,
                           low=0.0, high=20.0)
    soil_map = get_path(table, "map", ctx)
    depth_measured = get_string(table, "depth_measured", ctx, default="vertical",
                                choices=DEPTH_MEASURED)
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
        if not -2**31 < code < 2**31:
            raise c.fail(f"unit code is out of the 32-bit integer range ({-2**31 + 1} to "
                         f"{2**31 - 1})")
        units[code] = _parse_soil_unit(unit_table, c, code)
    return {"soil": Soil(map=soil_map, units=units, depth_measured=depth_measured,
                         min_failure_depth_m=min_depth)}


def _parse_rain(table, ctx: Ctx, base: Path):
    if not isinstance(table, list) or not table:
        raise ctx.fail("expected one or more [[rain]] tables")
    cases = []
    names = set()
    for i, item in enumerate(table):
        c = ctx.child(i)
        check_keys(item, c, {"name", "steady_mm_per_day", "storm_mm_per_h", "duration_h",
                             "water_table_depth_m", "antecedent_mm_per_day",
                             "return_period_years", "source"}, required=("name",))
        about = {"return_period_years": get_number(item, "return_period_years", c, low=0.0,
                                                   high=1.0e6, low_open=True),
                 "source": get_string(item, "source", c)}
        name = get_string(item, "name", c, required=True)
        if name in names:
            raise c.child("name").fail(f"rain case name {name!r} is used twice; names must differ")
        names.add(name)
        steady = get_number(item, "steady_mm_per_day", c, low=0.0, high=5000.0)  # 0: a dry case
        storm = get_number(item, "storm_mm_per_h", c, low=0.0, high=1000.0, low_open=True)
        if steady is None and storm is None:
            raise c.fail("give steady_mm_per_day (steady recharge) or storm_mm_per_h with "
                         "duration_h and water_table_depth_m or antecedent_mm_per_day (a storm)")
        if steady is not None and storm is not None:
            raise c.child("storm_mm_per_h").fail(
                "a rain case is either steady (steady_mm_per_day) or a storm (storm_mm_per_h), not both")
        if steady is not None:
            for key in ("duration_h", "water_table_depth_m", "antecedent_mm_per_day"):
                if key in item:
                    raise c.child(key).fail("applies only to a storm case (storm_mm_per_h)")
            cases.append(RainCase(name=name, steady_mm_per_day=steady, **about))
        else:
            # at least 36 s: a storm time t / (Z^2 / 4 D0) must stay a 32-bit float
            duration = get_number(item, "duration_h", c, low=0.01, high=24.0 * 30, required=True)
            if ("water_table_depth_m" in item) == ("antecedent_mm_per_day" in item):
                key = "antecedent_mm_per_day" if "antecedent_mm_per_day" in item else (
                    "water_table_depth_m")
                raise c.child(key).fail(
                    "a storm needs exactly one of water_table_depth_m (one water table under "
                    "every cell) and antecedent_mm_per_day (the steady water table of that "
                    "recharge, per cell)")
            table_depth = get_number(item, "water_table_depth_m", c, low=0.0, high=20.0)
            ante = get_number(item, "antecedent_mm_per_day", c, low=0.0, high=5000.0)
            cases.append(RainCase(name=name, storm_mm_per_h=storm, duration_h=duration,
                                  water_table_depth_m=table_depth, antecedent_mm_per_day=ante,
                                  **about))
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
    check_keys(table, ctx, {"min_area_m2", "max_area_m2", "passive_fraction", "nodata_faces",
                            "size_windows", "size_bands", "size_time_limit_s"},
               required=("min_area_m2", "max_area_m2"))
    lo = get_number(table, "min_area_m2", ctx, low=0.0, low_open=True)
    hi = get_number(table, "max_area_m2", ctx, low=0.0, low_open=True)
    if lo > hi:
        raise ctx.child("min_area_m2").fail(f"{lo:g} is greater than max_area_m2 {hi:g}")
    passive = get_number(table, "passive_fraction", ctx, default=0.5, low=0.0, high=1.0)
    return {"clusters": Clusters(
        min_area_m2=lo, max_area_m2=hi, passive_fraction=passive,
        nodata_faces=get_string(table, "nodata_faces", ctx, default="free",
                                choices=("free", "charged")),
        size_windows=get_int(table, "size_windows", ctx, default=5, low=0, high=1000),
        size_bands=get_int(table, "size_bands", ctx, default=1, low=1, high=8),
        size_time_limit_s=get_number(table, "size_time_limit_s", ctx, default=10.0, low=0.0,
                                     high=3600.0, low_open=True))}


def _parse_runout(table, ctx: Ctx, base: Path):
    check_keys(table, ctx, {"angle_of_reach_deg", "source_failure_probability",
                            "continue_past_corridor"})
    lo, hi = ANGLE_OF_REACH_RANGE_DEG
    return {"runout": Runout(
        angle_of_reach_deg=get_number(table, "angle_of_reach_deg", ctx, low=lo, high=hi),
        source_failure_probability=get_number(table, "source_failure_probability", ctx,
                                              low=0.0, high=1.0, low_open=True),
        continue_past_corridor=get_bool(table, "continue_past_corridor", ctx))}


def _parse_corridor(table, ctx: Ctx, base: Path):
    check_keys(table, ctx, {"centreline", "centreline_crs", "segment_m", "half_width_m",
                            "start_chainage_m", "clip_to_dem", "culverts", "culverts_crs",
                            "engineered_ground", "engineered_ground_crs",
                            "engineered_soil_unit"}, required=("centreline",))
    paths = {}
    for key in ("centreline", "culverts", "engineered_ground"):
        path = get_path(table, key, ctx, required=key == "centreline")
        if path is not None and not path.is_file():
            raise ctx.child(key).fail(f"{path.name} is not a file")
        paths[key] = path
    for key in ("culverts_crs", "engineered_ground_crs"):
        if key in table and paths[key[:-4]] is None:
            raise ctx.child(key).fail(f"applies only with {key[:-4]} = \"FILE\"")
    unit = get_int(table, "engineered_soil_unit", ctx, low=-2**31, high=2**31 - 1)
    if unit is not None and paths["engineered_ground"] is None:
        raise ctx.child("engineered_soil_unit").fail(
            "applies only with engineered_ground = \"FILE\" (where the unit lies)")
    return {"corridor": Corridor(
        centreline=paths["centreline"],
        # at least 1 m: a table row per metre of road is the finest a DEM supports
        segment_m=get_number(table, "segment_m", ctx, default=100.0, low=1.0),
        half_width_m=get_number(table, "half_width_m", ctx, default=10.0, low=0.0,
                                high=1000.0),
        start_chainage_m=get_number(table, "start_chainage_m", ctx, default=0.0),
        centreline_crs=get_crs(table, "centreline_crs", ctx),
        clip_to_dem=get_bool(table, "clip_to_dem", ctx),
        culverts=paths["culverts"], culverts_crs=get_crs(table, "culverts_crs", ctx),
        engineered_ground=paths["engineered_ground"],
        engineered_ground_crs=get_crs(table, "engineered_ground_crs", ctx),
        engineered_soil_unit=unit,
    )}


def _parse_inventory(table, ctx: Ctx, base: Path):
    check_keys(table, ctx, {"landslides", "landslides_crs", "point_buffer_m", "all_touched",
                            "event_field", "event", "type_field", "types", "score_part", "date"},
               required=("landslides",))
    path = get_path(table, "landslides", ctx, required=True)
    if not path.is_file():
        raise ctx.child("landslides").fail(f"{path.name} is not a file")
    event = get_texts(table, "event", ctx)
    if len(event) > 1:
        raise ctx.child("event").fail("expected one event (a text), got a list")
    fields = {}
    for field_key, value_key, value in (("event_field", "event", event),
                                        ("type_field", "types", get_texts(table, "types", ctx))):
        fields[field_key] = get_string(table, field_key, ctx)
        if bool(value) != (fields[field_key] is not None):
            missing, given = (field_key, value_key) if value else (value_key, field_key)
            raise ctx.child(given).fail(f"needs {missing} as well ({field_key} names the "
                                        f"attribute, {value_key} the value(s) to keep)")
        fields[value_key] = value
    return {"inventory": Inventory(
        landslides=path, landslides_crs=get_crs(table, "landslides_crs", ctx),
        point_buffer_m=get_number(table, "point_buffer_m", ctx, default=0.0, low=0.0,
                                  high=1000.0),
        all_touched=get_bool(table, "all_touched", ctx),
        event_field=fields["event_field"], event=event[0] if event else None,
        type_field=fields["type_field"], types=fields["types"],
        score_part=get_string(table, "score_part", ctx, default="scar",
                              choices=("scar", "whole")),
        date=get_date(table, "date", ctx))}


def _parse_project(table, ctx: Ctx, base: Path):
    if not isinstance(table, dict):
        raise ctx.fail("expected a table [project] of texts (name, number, prepared_by, "
                       "checked_by, data_date, notes)")
    keys = ("name", "number", "prepared_by", "checked_by", "data_date", "notes")
    check_keys(table, ctx, set(keys))
    values = {}
    for key in keys:
        v = table.get(key)
        if key == "number" and isinstance(v, int) and not isinstance(v, bool):
            v = str(v)                                  # a project number written bare
        if key == "data_date" and isinstance(v, _dt.date) and not isinstance(v, _dt.datetime):
            values[key] = v
            continue
        if v is not None and not isinstance(v, str):
            raise ctx.child(key).fail(
                f"expected text{' or a date' if key == 'data_date' else ''}, got {_describe(v)}")
        if v is not None and not v.strip():
            raise ctx.child(key).fail("is empty; leave the key out instead")
        values[key] = v
    return {"project": Project(**values)}


SECTION_PARSERS: dict[str, Callable[[Any, Ctx, Path], dict]] = {
    "routing": _parse_routing,
    "soil": _parse_soil,
    "rain": _parse_rain,
    "uncertainty": _parse_uncertainty,
    "clusters": _parse_clusters,
    "runout": _parse_runout,
    "corridor": _parse_corridor,
    "inventory": _parse_inventory,
    "project": _parse_project,
}
"""Parser of each optional section. A parser takes (value, context, scenario
folder) and returns keyword arguments for :class:`Scenario`."""
