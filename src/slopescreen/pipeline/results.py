"""Typed, frozen results of the stages of a run.

Each stage returns one of these; nothing is written into an object a stage
was handed. A result lists the products it makes with :meth:`products`
(``Emit`` values that the runner hands to the writer) and keeps the arrays
that later stages read (:meth:`kept`, where a result can let go of what
it has written); a result may add a record to the manifest
(:meth:`manifest_record`). Per-cell results hold arrays of the grid's shape.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np

from ..scenario.model import RainCase



def _empty():
    return field(default_factory=lambda: MappingProxyType({}))


@dataclass(frozen=True)
class Emit:
    """One product a stage hands to the writer.

    Attributes
    ----------
    key : str
        Product key in the registry (:mod:`slopescreen.products`).
    data : numpy.ndarray, bytes or object with ``write(path)``
        A raster of the grid's shape in the registry's dtype, the bytes of a
        map or the report, or vector layers.
    rain : RainCase or None
        The rain case of a per-rain product.
    fields : mapping
        Values for the ``{...}`` fields of the registry's description.
    tags : mapping
        Metadata beyond the registry's own.
    name, units : str or None
        File name and units when not the registry's (maps).
    kind : str or None
        ``"csv"`` for the table copy of a vector product (same key).
    """

    key: str
    data: Any
    rain: RainCase | None = None
    fields: MappingProxyType = _empty()
    tags: MappingProxyType = _empty()
    name: str | None = None
    units: str | None = None
    kind: str | None = None


@dataclass(frozen=True)
class Written:
    """What the writer has written so far: manifest entries, map previews and the copies of
    the interactive map (``(key, rain) ->`` :class:`~slopescreen.report.explorer.ExplorerCopy`)."""

    products: tuple
    previews: MappingProxyType
    explorer: Any = _empty()

    def entries(self) -> list[dict]:
        """Manifest entries of the products written so far."""
        return [p.as_dict() for p in self.products]


@dataclass(frozen=True)
class SlopeResult:
    """Slope and aspect of the original DEM (Horn 1981)."""

    slope_deg: np.ndarray
    aspect_deg: np.ndarray

    def products(self):
        return (Emit("slope", self.slope_deg),)


@dataclass(frozen=True)
class ConditionedDem:
    """The depression-filled DEM (routing only; never used for slope)."""

    filled: np.ndarray

    def products(self):
        return ()


@dataclass(frozen=True)
class RoutingResult:
    """Upslope area and specific catchment area of the routing method."""

    area_m2: np.ndarray
    sca_m: np.ndarray
    method: str

    def products(self):
        return (Emit("specific_catchment_area", self.sca_m,
                     fields=MappingProxyType({"method": self.method})),)


@dataclass(frozen=True)
class RechargeResult:
    """Critical steady recharge (mm/day) and its stability class."""

    q_cr_mm_per_day: np.ndarray
    stability_class: np.ndarray

    def products(self):
        return (Emit("critical_recharge", self.q_cr_mm_per_day),
                Emit("critical_recharge_class", self.stability_class))


@dataclass(frozen=True)
class StormExtras:
    """Where and when the least storm FS occurs, and the model's flags."""

    depth_m: np.ndarray
    time_h: np.ndarray
    flags: np.ndarray


@dataclass(frozen=True)
class StabilityResult:
    """Wetness and factor of safety of one rain case at the median parameters."""

    case: RainCase
    wetness: np.ndarray
    factor_of_safety: np.ndarray
    storm: StormExtras | None = None
    fs_tags: MappingProxyType = _empty()

    def products(self):
        out = []
        if self.storm is not None:
            out += [Emit("storm_failure_depth", self.storm.depth_m, self.case),
                    Emit("storm_failure_time", self.storm.time_h, self.case),
                    Emit("storm_flags", self.storm.flags, self.case)]
        out += [Emit("wetness", self.wetness, self.case),
                Emit("factor_of_safety", self.factor_of_safety, self.case, tags=self.fs_tags)]
        return tuple(out)


@dataclass(frozen=True)
class ProbabilityResult:
    """Probability of failure of one rain case."""

    case: RainCase
    p_f: np.ndarray
    method: str

    def products(self):
        return (Emit("failure_probability", self.p_f, self.case,
                     tags=MappingProxyType({"METHOD": self.method})),)


@dataclass(frozen=True)
class ClusterCase:
    """Failing clusters of one rain case, as attribute rows and outlines."""

    case: RainCase
    fs_bound: np.ndarray
    bound_extent_cells: int
    labels: np.ndarray
    records: tuple
    polygons: MappingProxyType
    size_records: tuple = ()
    size_polygons: MappingProxyType = _empty()
    modular_faces: int = 0
    undecided_cells: int = 0
    size_search_seconds: float = 0.0
    cells: tuple = ()
    """After :meth:`kept`: (flat cell indices, cluster ids) of the cluster cells."""

    def manifest_record(self):
        """The cut's proof status of this case, for ``manifest.json`` (``cluster_search``)."""
        return "cluster_search", {
            "rain": self.case.name, "clusters": len(self.records),
            "not_proven": sum(1 for r in self.records if not r["proven"]),
            "modular_faces": self.modular_faces, "undecided_cells": self.undecided_cells,
            "size_search_seconds": self.size_search_seconds,
            "bound_extent_cells": int(self.bound_extent_cells)}

    def kept(self):
        """What later stages read: the rows, outlines and cluster cells, not the rasters."""
        from dataclasses import replace

        flat = self.labels.reshape(-1)
        where = np.flatnonzero(flat > 0)
        return replace(self, fs_bound=None, labels=None,
                       cells=(where, flat[where].astype(np.int64)))

    def label_raster(self, shape) -> np.ndarray:
        """The cluster id per cell (0 = none), from the kept cluster cells."""
        if self.labels is not None:
            return self.labels.astype(np.int64)
        out = np.zeros(int(np.prod(shape)), dtype=np.int64)
        if self.cells:
            out[self.cells[0]] = self.cells[1]
        return out.reshape(shape)

    def products(self):
        e = self.bound_extent_cells
        return (Emit("cluster_fs_bound", self.fs_bound, self.case,
                     fields=MappingProxyType({"extent": e}),
                     tags=MappingProxyType({"EXTENT_CELLS": str(e),
                                            "MEANING": "at least 1: no such cluster can fail"})),
                Emit("cluster_labels", self.labels, self.case))


@dataclass(frozen=True)
class ClusterLayers:
    """The clusters of every rain case, for ``clusters.gpkg`` and the report."""

    records: tuple
    size_records: tuple
    layers: Any = field(default=None, repr=False)

    def products(self):
        return (Emit("clusters", self.layers),)


@dataclass(frozen=True)
class RunoutCase:
    """Runout reach of the failure sources of one rain case.

    ``count``/``volume_m3`` are the rasters (dropped by :meth:`kept`);
    ``records`` and ``lines`` the rows and LineStrings of ``runout_paths``;
    ``sources`` the :class:`~slopescreen.runout.Sources` and ``reach`` the
    :class:`~slopescreen.runout.Reach` without its rasters, for the corridor.
    """

    case: RainCase
    count: np.ndarray | None
    volume_m3: np.ndarray | None
    records: tuple
    lines: MappingProxyType
    sources: Any = field(default=None, repr=False)
    reach: Any = field(default=None, repr=False)
    angle_note: str = ""
    sensitivity: MappingProxyType = _empty()
    """With a corridor: segments and sources reaching it at the angles used and at angles
    ``angle_change_deg`` lower."""

    def products(self):
        if self.count is None:
            return ()
        return (Emit("runout_count", self.count, self.case),
                Emit("runout_volume", self.volume_m3, self.case))

    def kept(self):
        from dataclasses import replace

        return replace(self, count=None, volume_m3=None, sources=self.sources.sparse(),
                       reach=replace(self.reach, count=None, volume_m3=None))

    def manifest_record(self):
        """Sources and reach of this case, for ``manifest.json`` (``runout``)."""
        return "runout", {"rain": self.case.name, "sources": len(self.records),
                          "source_kind": getattr(self.sources, "kind", ""),
                          "angle_of_reach": self.angle_note} | dict(self.sensitivity)


@dataclass(frozen=True)
class VectorLayers:
    """One vector product of every rain case (an object with ``write(path)``), and a table."""

    key: str
    layers: Any = field(default=None, repr=False)
    csv: bytes | None = None
    records: tuple = ()

    def products(self):
        out = [Emit(self.key, self.layers)]
        if self.csv is not None:
            out.append(Emit(self.key, self.csv, kind="csv"))
        return tuple(out)


@dataclass(frozen=True)
class CorridorCase:
    """The corridor segment rows of one rain case."""

    case: RainCase
    records: tuple

    def products(self):
        return ()


@dataclass(frozen=True)
class InventoryCase:
    """Scores of the products of one rain case (or of the critical recharge) against the
    mapped landslides."""

    rain: str | None
    scores: tuple

    def products(self):
        return ()


@dataclass(frozen=True)
class InventoryScores:
    """Every score against the mapped landslides: ``inventory_scores.json`` and the report."""

    document: MappingProxyType

    def products(self):
        import json

        text = json.dumps(dict(self.document), indent=1, allow_nan=False) + "\n"
        return (Emit("inventory_scores", text.encode("utf-8")),)


@dataclass(frozen=True)
class MapsResult:
    """The PNG maps: (manifest entry shown, file name, bytes) per map."""

    maps: tuple

    def products(self):
        return tuple(Emit("map", png, rain=rain, name=name, units=units)
                     for _shown, name, png, rain, units in self.maps)


@dataclass(frozen=True)
class ReportResult:
    """The self-contained HTML report."""

    html: bytes

    def products(self):
        return (Emit("report", self.html),)


@dataclass(frozen=True)
class SummaryResult:
    """``summary.json`` and ``summary.csv``: the run in one row per rain case."""

    json: bytes
    csv: bytes

    def products(self):
        return (Emit("summary", self.json), Emit("summary", self.csv, kind="csv"))


@dataclass(frozen=True)
class ExplorerExtras:
    """Copies for the interactive map of what is no product (the soil unit per cell, with the
    units' labels in index order)."""

    copies: MappingProxyType
    labels: tuple = ()

    def products(self):
        return ()


@dataclass(frozen=True)
class FiguresResult:
    """Numbers the report quotes, computed while the arrays are in memory (no product)."""

    value: Any

    def products(self):
        return ()
