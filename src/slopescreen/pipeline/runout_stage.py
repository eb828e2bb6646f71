"""Runout stages of a run: the reach of each rain case's failure sources, then one paths layer.

Sources are the failing clusters where the clusters stage ran, else
connected patches of cells with FS < 1 (or with a probability of failure at
least ``[runout] source_failure_probability``). Paths run on the conditioned
DEM (culverts breached through road fills, depressions filled) and stop at
the first corridor strip unless ``continue_past_corridor`` (docs/methods.md,
"Runout reach").
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType

import numpy as np

from ..grid import Grid
from ..report.cautions import SHORT
from ..scenario.model import ANGLE_OF_REACH_RANGE_DEG, Runout
from .results import RunoutCase, VectorLayers

PATH_FIELDS = ("id", "source", "rain", "source_kind", "travel_length_m", "drop_m",
               "angle_of_reach_deg", "travel_angle_deg", "source_volume_m3", "source_area_m2",
               "source_width_m", "source_fs", "source_failure_probability", "segments_reached",
               "segments", "stopped")
"""Attributes of the ``runout_paths`` layer, in order (units in the names; ``stopped`` says why
the path ended; ``travel_angle_deg`` = atan(drop / travel length) at the tip; ``segments`` lists
the corridor segments reached, by number, comma-separated)."""


SENSITIVITY_DEG = 3.0
"""With a corridor, the reach is also found with every angle of reach this much lower
(degrees), and the report says how many more segments that reaches: angles of reach are
empirical (docs/methods.md, "Runout reach")."""


def effective_runout(scenario) -> Runout | None:
    """The ``[runout]`` section, or its defaults when only ``[corridor]`` asks for reach."""
    if scenario.runout is not None:
        return scenario.runout
    return Runout() if scenario.corridor is not None else None


def _vertical_depth(scenario, cells, stability):
    """Vertical failure depth per cell, m: the storm's depth of least FS, or the unit depth."""
    if stability.storm is not None:
        return stability.storm.depth_m
    depth = np.asarray(cells.soil.cell_map("depth_m"), dtype=np.float32)
    if cells.soil.depth_measured == "slope_normal":
        return depth / np.cos(np.radians(cells.slope_deg, dtype=np.float32))
    return np.broadcast_to(depth, cells.slope_deg.shape)       # one unit: no per-cell copy


def runout_stage(scenario, inputs, conditioned, cells, slope, stability, probability=None,
                 clusters=None, earlier=(), *, case) -> RunoutCase:
    """Sources of one rain case and where their runout reaches."""
    from ..runout import angle_of_reach_deg, cluster_sources, patch_sources, runout_reach
    from ..runout.angle import source_volume_note
    from ..runout.reach import STOP_REASONS, Strips, d8_receivers

    grid = inputs.grid
    opts = effective_runout(scenario)
    zp = conditioned.filled
    z = zp[1:-1, 1:-1]
    first_id = 1 + sum(len(e.records) for e in earlier if e.sources.kind != "cluster")
    if clusters is not None:
        sources = cluster_sources(clusters.label_raster(grid.shape), clusters.records, z)
    else:
        fs = stability.factor_of_safety
        p = None if probability is None else probability.p_f
        t = opts.source_failure_probability
        if t is not None and p is not None:
            mask, kind = p >= t, "failure_probability"            # NaN compares False
        else:
            mask, kind = fs < 1.0, "fs_below_1"
        mask &= grid.valid
        sources = patch_sources(mask, z, _vertical_depth(scenario, cells, stability),
                                fs, slope.aspect_deg, dx=grid.dx_m, dy=grid.dy_m,
                                failure_probability=p, kind=kind, first_id=first_id)
    angle = angle_of_reach_deg(sources.volume_m3, opts.angle_of_reach_deg)
    corridor = getattr(inputs, "corridor", None)
    strips = Strips.none() if corridor is None else corridor.strips()
    receivers = d8_receivers(zp, grid.dx_m, grid.dy_m)
    reach = runout_reach(zp, sources, angle, dx=grid.dx_m, dy=grid.dy_m, strips=strips,
                         continue_past_corridor=opts.continue_past_corridor,
                         receivers=receivers)
    sensitivity = {}
    if corridor is not None:
        # the same sources with every angle SENSITIVITY_DEG lower (within 5-45 degrees)
        lower = np.clip(angle - SENSITIVITY_DEG, *ANGLE_OF_REACH_RANGE_DEG)
        low = runout_reach(zp, sources, lower, dx=grid.dx_m, dy=grid.dy_m, strips=strips,
                           continue_past_corridor=opts.continue_past_corridor,
                           receivers=receivers)
        sensitivity = {"angle_change_deg": -SENSITIVITY_DEG,
                       "segments_reached": int(np.unique(reach.pair_segment).size),
                       "segments_reached_lower_angle": int(np.unique(low.pair_segment).size),
                       "sources_reaching": int(np.unique(reach.pair_source).size),
                       "sources_reaching_lower_angle": int(np.unique(low.pair_source).size)}
        del low
    del receivers
    lines = path_lines(sources, reach, grid)
    reached = np.bincount(reach.pair_source, minlength=len(sources))
    by_source: dict = {}
    for k, g in zip(reach.pair_source.tolist(), reach.pair_segment.tolist()):
        by_source.setdefault(k, []).append(g + 1)
    records = []
    for i in range(len(sources)):
        travel = float(reach.travel_m[i])
        drop = float(reach.drop_m[i])
        p_i = float(sources.failure_probability[i])
        records.append({
            "id": 0, "source": int(sources.ids[i]), "rain": case.name,
            "source_kind": sources.kind, "travel_length_m": travel, "drop_m": drop,
            "angle_of_reach_deg": float(angle[i]),
            "travel_angle_deg": float(np.degrees(np.arctan2(drop, travel))) if travel > 0 else 90.0,
            "source_volume_m3": float(sources.volume_m3[i]),
            "source_area_m2": float(sources.area_m2[i]),
            "source_width_m": float(sources.width_m[i]), "source_fs": float(sources.fs[i]),
            "source_failure_probability": p_i, "segments_reached": int(reached[i]),
            "segments": ",".join(str(g) for g in sorted(by_source.get(i, []))),
            "stopped": STOP_REASONS[int(reach.stop[i])]})
    return RunoutCase(case=case, count=reach.count, volume_m3=reach.volume_m3,
                      records=tuple(records), lines=MappingProxyType(dict(enumerate(lines))),
                      sources=sources, reach=reach,
                      angle_note=source_volume_note(opts.angle_of_reach_deg),
                      sensitivity=MappingProxyType(sensitivity))


def path_lines(sources, reach, grid: Grid) -> list:
    """LineString of each source: crown, toe, then the centres of its path cells."""
    import shapely

    cols = grid.shape[1]
    n = len(sources)
    if n == 0:
        return []
    counts = np.diff(reach.path_ptr) + 2
    cells = np.empty(int(counts.sum()), dtype=np.int64)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]]).astype(np.int64)
    cells[starts] = sources.crown
    cells[starts + 1] = sources.toe
    for_path = np.ones(cells.size, dtype=bool)
    for_path[starts] = False
    for_path[starts + 1] = False
    cells[for_path] = reach.path_cells
    r, c = np.divmod(cells, cols)
    x, y = grid.transform * (c + 0.5, r + 0.5)
    index = np.repeat(np.arange(n), counts)
    return list(shapely.linestrings(np.column_stack([x, y]), indices=index))


@dataclass(frozen=True)
class _PathLayer:
    grid: Grid
    lines: MappingProxyType
    records: tuple

    def write(self, path) -> None:
        from ..vectors import write_features

        write_features(path, dict(self.lines), list(self.records), self.grid,
                       layer="runout_paths", caution=SHORT, geometry_type="LineString",
                       metadata={"FIELDS": ", ".join(PATH_FIELDS)})


def runout_layers_stage(scenario, inputs, cases) -> VectorLayers:
    """The runout paths of every rain case as one ``runout_paths.gpkg``."""
    lines, records = {}, []
    for case in cases:
        for k, row in enumerate(case.records):
            new = len(records) + 1
            records.append(row | {"id": new})
            lines[new] = case.lines[k]
    return VectorLayers("runout_paths", _PathLayer(inputs.grid, MappingProxyType(lines),
                                                   tuple(records)), records=tuple(records))
