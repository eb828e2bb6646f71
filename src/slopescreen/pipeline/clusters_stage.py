"""Failure-cluster stage of a run: clusters per rain case, gathered into clusters.gpkg."""

from __future__ import annotations

import numpy as np

from ..grid import Grid
from ..report.cautions import SHORT
from .staging import _Writer


CLUSTER_FIELDS = ("id", "rain", "fs", "failure_probability", "area_m2", "volume_m3",
                  "mean_depth_m", "length_m", "width_m", "n_cells", "min_cell_fs", "lower_bound",
                  "proven", "in_area_band", "centroid_easting", "centroid_northing")
"""Attributes of the ``clusters`` layer, in order (units in the names; fs is dimensionless;
the centroid is in the coordinates of the DEM's CRS)."""


SIZE_FIELDS = ("id", "rain", "band_min_m2", "band_max_m2", "fs", "failure_probability",
               "lower_bound", "relaxation_bound", "heuristic_fs", "proven", "method", "area_m2",
               "volume_m3", "mean_depth_m", "length_m", "width_m", "n_cells", "min_cell_fs",
               "seconds", "centroid_easting", "centroid_northing")
"""Attributes of the ``size_resolved`` layer: the least-stable cluster per window and area band."""


_TABLE_NAMES = {"failure_probability": "probability"}


class _ClusterCollector:
    """Gathers the failing clusters of every rain case into one GeoPackage layer."""

    def __init__(self, grid: Grid):
        self.grid = grid
        self.polygons: dict = {}
        self.records: list[dict] = []
        self.next_id = 1
        self.size_polygons: dict = {}
        self.size_records: list[dict] = []

    @staticmethod
    def _row(table, i, fields, polygon) -> dict:
        centre = polygon.centroid
        row = {}
        for key in fields:
            if key in ("centroid_easting", "centroid_northing"):
                row[key] = float(centre.x if key == "centroid_easting" else centre.y)
                continue
            value = table[_TABLE_NAMES.get(key, key)][i]
            if key in ("n_cells",):
                row[key] = int(value)
            elif key in ("proven", "in_area_band"):
                row[key] = bool(value)
            elif key == "method":
                row[key] = str(value)
            else:
                row[key] = float(value)
        return row

    def add_sizes(self, case_name: str, sizes) -> None:
        """Add the size-resolved answers of one case (rows with a cluster only)."""
        from ..vectors import label_polygons

        for i, mask in enumerate(sizes.masks):
            if not mask.any():
                continue
            new_id = len(self.size_records) + 1
            grid_mask = sizes.grid_mask(i, self.grid.shape)
            polygon = label_polygons(grid_mask.astype(np.int32), self.grid)[1]
            self.size_polygons[new_id] = polygon
            self.size_records.append({"id": new_id, "rain": case_name}
                                     | self._row(sizes.table, i, SIZE_FIELDS[2:], polygon))

    def add(self, case_name: str, result) -> np.ndarray:
        """Add one case's clusters; return its label raster with layer-wide ids."""
        from ..vectors import label_polygons

        table = result.table
        n = len(table["id"])
        offset = self.next_id - 1
        labels = np.where(result.labels > 0, result.labels + offset, 0).astype(np.int32)
        if n == 0:
            return labels
        polys = label_polygons(labels, self.grid)
        for i in range(n):
            new_id = int(table["id"][i]) + offset
            self.records.append({"id": new_id, "rain": case_name}
                                | self._row(table, i, CLUSTER_FIELDS[2:], polys[new_id]))
            self.polygons[new_id] = polys[new_id]
        self.next_id += n
        return labels

    def write(self, w: "_Writer") -> None:
        from ..vectors import write_polygons

        name = "clusters.gpkg"
        write_polygons(w.staging / name, self.polygons, self.records, self.grid, layer="clusters",
                       caution=SHORT, metadata={"FIELDS": ", ".join(CLUSTER_FIELDS)})
        if self.size_records:
            write_polygons(w.staging / name, self.size_polygons, self.size_records, self.grid,
                           layer="size_resolved", caution=SHORT, add_layer=True,
                           metadata={"FIELDS": ", ".join(SIZE_FIELDS)})
        w.file("clusters", name, kind="vector", units="attributes carry their units in their names")
        w.cluster_records = list(self.records)
        w.size_records = list(self.size_records)


def _clusters_for_case(scenario, inputs, case, slope, depth, wet, m, index, units, w, collector,
                       uncertainty=None):
    """Failing multi-cell clusters of one rain case, and the cluster FS bound raster."""
    from ..clusters import failure_clusters

    lateral = np.array([u.lateral_root_cohesion_kpa.central() for u in units] + [np.nan],
                       dtype=np.float64)[index].astype(np.float32)
    c = scenario.clusters
    grid = inputs.grid
    result = failure_clusters(
        slope, depth, wet, dx=grid.dx_m, dy=grid.dy_m, aspect_deg=inputs.aspect_deg,
        cohesion_kpa=m["cohesion_kpa"], root_cohesion_kpa=m["root_cohesion_kpa"],
        lateral_root_cohesion_kpa=lateral, friction_deg=m["friction_deg"],
        unit_weight_kn_m3=m["unit_weight_kn_m3"], passive_fraction=c.passive_fraction,
        min_area_m2=c.min_area_m2, max_area_m2=c.max_area_m2,
        size_resolved=c.size_windows > 0, size_bands=c.size_bands,
        size_time_limit_s=c.size_time_limit_s, size_max_clusters=c.size_windows,
        size_n_least=min(2, c.size_windows), uncertainty=uncertainty)
    labels = collector.add(case.name, result)
    if result.size_resolved is not None:
        collector.add_sizes(case.name, result.size_resolved)
    extent = result.bound_extent_cells
    w.raster("cluster_fs_bound", result.cluster_fs_bound, units="1", rain=case,
             description=f"Proven lower bound on the FS of any cluster up to {extent} x {extent} "
                         "cells that holds the cell",
             tags={"EXTENT_CELLS": str(extent), "MEANING": "at least 1: no such cluster can fail"})
    w.raster("cluster_labels", labels.astype(np.float32), units="id", rain=case,
             description="Id of the failing cluster holding the cell (0 = none); see clusters.gpkg")
