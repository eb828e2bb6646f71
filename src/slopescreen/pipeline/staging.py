"""The staging folder: products are written there and moved in place only when the run succeeds."""

from __future__ import annotations

import json
import logging
import os
import time
from contextlib import contextmanager
from pathlib import Path

from ..errors import InputError
from ..grid import Grid, write_raster
from ..report.cautions import SHORT
from .inputs import Product

log = logging.getLogger("slopescreen.pipeline")


class _Stages:
    """Times named stages and reports progress."""

    def __init__(self, progress):
        self.timings: dict[str, float] = {}
        self.progress = progress

    @contextmanager
    def stage(self, name: str, *, show: bool = True):
        if show and self.progress is not None:
            self.progress(name)
        log.info("stage %s: start", name)
        start = time.perf_counter()
        yield
        self.timings[name] = round(time.perf_counter() - start, 3)
        log.info("stage %s: %.2f s", name, self.timings[name])


class _Writer:
    """Writes products into the staging folder and lists them."""

    def __init__(self, staging: Path, grid: Grid):
        self.staging = staging
        self.grid = grid
        self.products: list[Product] = []
        self.cluster_records: list[dict] = []  # attribute rows of clusters.gpkg, for the report
        self.size_records: list[dict] = []

    def raster(self, key, array, *, units, description, rain=None, name=None, tags=None):
        name = name or (f"{key}_{rain.slug}.tif" if rain is not None else f"{key}.tif")
        write_raster(self.staging / name, array, self.grid, description=description, units=units,
                     caution=SHORT, tags=tags)
        self.products.append(Product(key=key, path=name, kind="raster", units=units,
                                     rain=None if rain is None else rain.name))

    def file(self, key, name, *, kind, units, rain=None):
        self.products.append(Product(key=key, path=name, kind=kind, units=units, rain=rain))

    def blob(self, key, name, data: bytes, *, kind, units, rain=None):
        """Write a non-raster product (PNG map, HTML report) into the staging folder."""
        (self.staging / name).write_bytes(data)
        self.file(key, name, kind=kind, units=units, rain=rain)


def _commit(staging: Path, out: Path, products, manifest: dict, *, protected=frozenset()) -> None:
    """Move staged products into the output folder; the manifest goes last."""
    for p in products:
        target = out / p.path
        if target.exists() and target.resolve() in protected:
            raise InputError(f"{p.path}: a product would overwrite an input file; choose another output folder")
    for p in products:
        os.replace(staging / p.path, out / p.path)
    tmp = staging / "manifest.json"
    tmp.write_text(json.dumps(manifest, indent=2) + "\n", encoding="utf-8")
    os.replace(tmp, out / "manifest.json")
