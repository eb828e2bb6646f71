"""Failure-cluster stages of a run: clusters per rain case, then one ``clusters.gpkg``."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType

import numpy as np

from ..grid import Grid
from ..report.cautions import SHORT
from .results import ClusterCase, ClusterLayers
from ..scenario.model import STORM_DEPTHS
from .stability_stage import (SoilCells, effective_uncertainty, min_failure_depth, rain_model,
                              rain_needs_area)

CLUSTER_FIELDS = ("id", "rain", "fs", "failure_probability", "area_m2", "volume_m3",
                  "mean_depth_m", "length_m", "width_m", "n_cells", "min_cell_fs", "lower_bound",
                  "proven", "in_area_band", "centroid_easting", "centroid_northing",
                  "modular_faces")
"""Attributes of the ``clusters`` layer, in order (units in the names; fs is dimensionless;
the centroid is in the coordinates of the DEM's CRS; modular_faces counts the faces touching
the cluster that the cut replaced by their modular lower bound)."""


SIZE_FIELDS = ("id", "rain", "band_min_m2", "band_max_m2", "fs", "failure_probability",
               "lower_bound", "relaxation_bound", "heuristic_fs", "proven", "method", "area_m2",
               "volume_m3", "mean_depth_m", "length_m", "width_m", "n_cells", "min_cell_fs",
               "centroid_easting", "centroid_northing")
"""Attributes of the ``size_resolved`` layer: the least-stable cluster per window and area band
(the search times go to the manifest, ``cluster_search``, so that the layer is the same on
every run)."""


_TABLE_NAMES = {"failure_probability": "probability"}


def _row(table, i, fields, polygon) -> dict:
    centre = polygon.centroid
    row = {}
    for key in fields:
        if key in ("centroid_easting", "centroid_northing"):
            row[key] = float(centre.x if key == "centroid_easting" else centre.y)
            continue
        value = table[_TABLE_NAMES.get(key, key)][i]
        if key in ("n_cells", "modular_faces"):
            row[key] = int(value)
        elif key in ("proven", "in_area_band"):
            row[key] = bool(value)
        elif key == "method":
            row[key] = str(value)
        else:
            row[key] = float(value)
    return row


def clusters_stage(scenario, inputs, cells: SoilCells, slope, stability, earlier=(), *,
                   case) -> ClusterCase:
    """Failing multi-cell clusters of one rain case and the cluster FS bound raster.

    Cluster ids are unique over the run: those of a case follow the clusters
    of the cases before it (``earlier``), in the scenario's order, so the
    ``cluster_labels`` rasters match the one ``clusters`` layer.
    """
    from ..clusters import ClusterOptions, ClusterStrength, ClusterUncertainty, failure_clusters
    from ..vectors import label_polygons

    soil = cells.soil
    c = scenario.clusters
    grid = inputs.grid
    # a storm's depth of least FS is vertical already; a unit's depth is as the [soil] gives it
    storm = stability.storm is not None
    depth = stability.storm.depth_m if storm else soil.cell_map("depth_m")
    unc = effective_uncertainty(scenario)
    uncertainty = None if unc is None else ClusterUncertainty(
        unit_index=soil.index_array(), table=soil.table,
        lateral_root_cohesion_kpa=[u.lateral_root_cohesion_kpa for u in soil.units],
        samples=unc.samples, seed=unc.seed, rain=rain_model(case),
        sca_m=cells.sca_m if rain_needs_area(case) else None, depth_measured=soil.depth_measured,
        # the storm FS map's failure depths (docs/methods.md, "Storm response (Iverson 2000)")
        n_depths=STORM_DEPTHS, min_failure_depth_m=min_failure_depth(scenario))
    strength = ClusterStrength(
        cohesion_kpa=soil.cell_map("cohesion_kpa"),
        root_cohesion_kpa=soil.cell_map("root_cohesion_kpa"),
        lateral_root_cohesion_kpa=soil.cell_map("lateral_root_cohesion_kpa"),
        friction_deg=soil.cell_map("friction_deg"),
        unit_weight_kn_m3=soil.cell_map("unit_weight_kn_m3"))
    options = ClusterOptions(
        min_area_m2=c.min_area_m2, max_area_m2=c.max_area_m2, passive_fraction=c.passive_fraction,
        nodata_faces=c.nodata_faces, size_resolved=c.size_windows > 0, size_bands=c.size_bands,
        size_time_limit_s=c.size_time_limit_s, size_max_clusters=c.size_windows,
        size_n_least=min(2, c.size_windows))
    result = failure_clusters(cells.slope_deg, depth, stability.wetness, dx=grid.dx_m, dy=grid.dy_m,
                              aspect_deg=slope.aspect_deg, strength=strength, options=options,
                              uncertainty=uncertainty,
                              depth_measured="vertical" if storm else soil.depth_measured)
    table = result.table
    offset = sum(len(e.records) for e in earlier)
    labels = np.where(result.labels > 0, result.labels + offset, 0).astype(np.int32)
    polygons = label_polygons(labels, grid) if len(table["id"]) else {}
    records = []
    for i in range(len(table["id"])):
        new_id = int(table["id"][i]) + offset
        records.append({"id": new_id, "rain": case.name}
                       | _row(table, i, CLUSTER_FIELDS[2:], polygons[new_id]))
    polygons = {r["id"]: polygons[r["id"]] for r in records}
    size_records, size_polygons = [], {}
    size_offset = sum(len(e.size_records) for e in earlier)
    sizes = result.size_resolved
    if sizes is not None:
        for i, mask in enumerate(sizes.masks):
            if not mask.any():
                continue
            new_id = size_offset + len(size_records) + 1
            polygon = label_polygons(sizes.grid_mask(i, grid.shape).astype(np.int32), grid)[1]
            size_polygons[new_id] = polygon
            size_records.append({"id": new_id, "rain": case.name}
                                | _row(sizes.table, i, SIZE_FIELDS[2:], polygon))
    return ClusterCase(case=case, fs_bound=result.cluster_fs_bound,
                       bound_extent_cells=result.bound_extent_cells,
                       labels=labels.astype(np.float32), records=tuple(records),
                       polygons=MappingProxyType(polygons), size_records=tuple(size_records),
                       size_polygons=MappingProxyType(size_polygons),
                       modular_faces=int(result.modular_faces),
                       undecided_cells=int(result.undecided_cells),
                       size_search_seconds=0.0 if sizes is None else round(
                           float(np.nansum(np.asarray(sizes.table["seconds"], dtype=float))), 3))


@dataclass(frozen=True)
class _Layers:
    """The two layers of ``clusters.gpkg``, written by the run's writer."""

    grid: Grid
    polygons: MappingProxyType
    records: tuple
    size_polygons: MappingProxyType
    size_records: tuple

    def write(self, path: Path) -> None:
        from ..vectors import write_polygons

        write_polygons(path, dict(self.polygons), list(self.records), self.grid, layer="clusters",
                       caution=SHORT, metadata={"FIELDS": ", ".join(CLUSTER_FIELDS)})
        if self.size_records:
            write_polygons(path, dict(self.size_polygons), list(self.size_records), self.grid,
                           layer="size_resolved", caution=SHORT, add_layer=True,
                           metadata={"FIELDS": ", ".join(SIZE_FIELDS)})


def cluster_layers_stage(scenario, inputs, cases) -> ClusterLayers:
    """The clusters of every rain case as the layers of one ``clusters.gpkg``."""
    polygons, size_polygons = {}, {}
    for case in cases:
        polygons |= dict(case.polygons)
        size_polygons |= dict(case.size_polygons)
    records = tuple(r for case in cases for r in case.records)
    size_records = tuple(r for case in cases for r in case.size_records)
    layers = _Layers(inputs.grid, MappingProxyType(polygons), records,
                     MappingProxyType(size_polygons), size_records)
    return ClusterLayers(records=records, size_records=size_records, layers=layers)
