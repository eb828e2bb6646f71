"""Corridor inputs and stages: the centreline, culverts and engineered ground, read and
checked before any computation; the segment table per rain case; its GeoPackage and CSV.

docs/methods.md, "Corridor segments and strips" and "Culverts through road fills".
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType

import numpy as np

from ..errors import InputError
from ..grid import Grid
from ..report.cautions import SHORT
from .results import CorridorCase, VectorLayers

RASTER_SUFFIXES = (".tif", ".tiff")
"""An ``engineered_ground`` file with one of these suffixes is a raster (non-zero = engineered)."""


@dataclass(frozen=True)
class CorridorInputs:
    """The corridor on the DEM grid: centreline, segments with their strips, culverts, cut and fill.

    Attributes
    ----------
    line : shapely MultiLineString
        The centreline in the DEM's CRS, parts in file order.
    segments : slopescreen.corridor.segments.Segments
    culverts : tuple of (rows, cols)
        Cells of each culvert crossing, carved through the fill before routing.
    engineered : numpy.ndarray of bool or None
        Cut and fill cells.
    """

    line: object
    segments: object
    culverts: tuple = ()
    engineered: np.ndarray | None = None

    def strips(self):
        """The strip cells for the runout kernel."""
        from ..runout import Strips

        return Strips(self.segments.cell, self.segments.segment, int(self.segments.from_m.size))


def read_corridor(scenario, grid: Grid) -> CorridorInputs:
    """Read and check the ``[corridor]`` files onto the DEM grid (no computation on terrain).

    Raises
    ------
    InputError
        One line naming the file and the key.
    """
    from ..corridor.culverts import crossing_cells, culvert_crossings
    from ..corridor.segments import build_segments
    from ..corridor.vector_inputs import chain_lines, outside_length, polygon_mask, read_vector
    from ..grid import read_codes

    c = scenario.corridor
    name = c.centreline.name
    line = chain_lines(read_vector(c.centreline, grid, kinds=("LineString",),
                                   key="[corridor] centreline", crs=c.centreline_crs,
                                   crs_key="[corridor] centreline_crs"),
                       label=f"{name}: [corridor] centreline")
    length_m = float(line.length) * grid.linear_unit_m
    outside, first = outside_length(line, grid, start_chainage_m=c.start_chainage_m)
    if outside > 0 and not c.clip_to_dem:
        raise InputError(
            f"{name}: [corridor] centreline: {outside:,.0f} m of the line's {length_m:,.0f} m "
            f"lie outside the DEM's data (first at chainage {first:,.0f} m); extend the DEM, "
            "trim the line, or set clip_to_dem = true")
    segments = build_segments(line, grid, segment_m=c.segment_m, half_width_m=c.half_width_m,
                              start_chainage_m=c.start_chainage_m)
    if not segments.on_dem.any():
        raise InputError(f"{name}: [corridor] centreline: no segment strip covers a valid DEM "
                         "cell; check the line's CRS and the DEM")
    culverts = ()
    if c.culverts is not None:
        points = read_vector(c.culverts, grid, kinds=("Point",), key="[corridor] culverts",
                             crs=c.culverts_crs, crs_key="[corridor] culverts_crs")
        xy = np.array([(p.x, p.y) for g in points for p in getattr(g, "geoms", [g])])
        crossings = culvert_crossings(xy, line, c.half_width_m, grid,
                                      name=f"{c.culverts.name}: [corridor] culverts")
        culverts = tuple(crossing_cells(crossings.ends, grid))
    engineered = None
    if c.engineered_ground is not None:
        path = c.engineered_ground
        if path.suffix.lower() in RASTER_SUFFIXES:
            codes, has = read_codes(path, grid, name="[corridor] engineered_ground")
            engineered = has & (codes != 0) & grid.valid
        else:
            engineered = polygon_mask(read_vector(
                path, grid, kinds=("Polygon",), key="[corridor] engineered_ground",
                crs=c.engineered_ground_crs, crs_key="[corridor] engineered_ground_crs"),
                grid) & grid.valid
    return CorridorInputs(line=line, segments=segments, culverts=culverts,
                          engineered=engineered)


def corridor_stage(scenario, inputs, runout, stability, recharge, probability=None, *,
                   case) -> CorridorCase:
    """The segment rows of one rain case."""
    from ..corridor.table import segment_rows, strip_recharge

    grid = inputs.grid
    corridor = inputs.corridor
    rows = segment_rows(
        corridor.segments, rain=case.name, sources=runout.sources, reach=runout.reach,
        factor_of_safety=stability.factor_of_safety, cell_area_m2=grid.cell_area_m2,
        failure_probability=None if probability is None else probability.p_f,
        recharge=strip_recharge(recharge.q_cr_mm_per_day, recharge.stability_class),
        engineered=corridor.engineered, grid=grid)
    return CorridorCase(case=case, records=tuple(rows))


@dataclass(frozen=True)
class _SegmentLayer:
    grid: Grid
    strips: MappingProxyType
    records: tuple

    def write(self, path) -> None:
        from ..corridor.table import CORRIDOR_FIELDS
        from ..vectors import write_features

        write_features(path, dict(self.strips), list(self.records), self.grid,
                       layer="corridor_segments", caution=SHORT, geometry_type="MultiPolygon",
                       metadata={"FIELDS": ", ".join(("id",) + CORRIDOR_FIELDS)})


def corridor_layers_stage(scenario, inputs, cases) -> VectorLayers:
    """The segment rows of every rain case as ``corridor_segments.gpkg`` and ``.csv``."""
    from ..corridor.table import rows_csv

    strips = inputs.corridor.segments.strips
    records, geoms = [], {}
    for case in cases:
        for row in case.records:
            new = len(records) + 1
            records.append({"id": new} | row)
            geoms[new] = strips[row["segment"] - 1]
    rows = tuple(r for case in cases for r in case.records)
    return VectorLayers("corridor_segments",
                        _SegmentLayer(inputs.grid, MappingProxyType(geoms), tuple(records)),
                        csv=rows_csv(rows, SHORT), records=rows)
