"""The staging folder of a run: products are written there as soon as they are final.

:class:`_Writer` writes each :class:`~slopescreen.pipeline.results.Emit` of a
stage by its registry entry (:mod:`slopescreen.products`), lists it for the
manifest and keeps a decimated copy of each raster that a map shows, so the
maps never read a full product back, and an "explorer copy" of the same
rasters for the report's pan-and-zoom map: reduced by blocks to at most
:data:`~slopescreen.report.explorer.MAX_CELLS` cells, quantised and packed
into a PNG (:func:`~slopescreen.report.explorer.explorer_copy`; about 11
bytes per embedded cell while it is made, on the writer thread, and only
the PNG, 0.1 to 1.5 bytes per embedded cell, kept). A styled or class raster gets its
sidecars at once (``KEY.sld``, and ``KEY.tif.aux.xml`` for class names), each
its own manifest entry. :mod:`slopescreen.pipeline.commit` moves the
staged files into the output folder as a whole.
"""

from __future__ import annotations

import logging
import time
from contextlib import contextmanager
from pathlib import Path
from types import MappingProxyType

import numpy as np

from ..grid import Grid, write_raster
from ..products import STYLES, spec
from ..report.cautions import SHORT
from .inputs import Product

log = logging.getLogger("slopescreen.pipeline")

MAP_OVERLAYS = ("critical_recharge_class", "cluster_labels")
"""Rasters drawn on the maps of other products (classes, cluster outlines)."""

MAX_PENDING = 2
"""Rasters the background writer may hold at once; the next waits for it (bounds the memory)."""


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
        self.timings[name] = round(self.timings.get(name, 0.0) + time.perf_counter() - start, 3)
        log.info("stage %s: %.2f s", name, self.timings[name])


class _Writer:
    """Writes products into the staging folder and lists them.

    Rasters are compressed and written on one background thread (GDAL and
    the numba kernels release the GIL, so the next stage computes meanwhile);
    at most :data:`MAX_PENDING` rasters wait, which bounds the memory held for
    them. :meth:`finish` waits for every write and raises the first failure.
    """

    def __init__(self, staging: Path, grid: Grid, *, preview_step: int, explorer_step: int = 0):
        from concurrent.futures import ThreadPoolExecutor

        self.staging = staging
        self.grid = grid
        self.products: list[Product] = []
        self.preview_step = preview_step
        self.previews: dict[tuple, np.ndarray] = {}
        self.explorer_step = explorer_step
        self._explorer: dict[tuple, object] = {}
        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="slopescreen-writer")
        # the explorer copies on a thread of their own, beside GDAL's compression
        self._copier = ThreadPoolExecutor(max_workers=1, thread_name_prefix="slopescreen-copier")
        self._pending: list = []

    def write(self, emit) -> Product:
        """Write one product of a stage; return its manifest entry."""
        entry = spec(emit.key)
        rain = emit.rain
        kind = emit.kind or entry.kind
        if kind != entry.kind and kind not in entry.extra_kinds:
            raise TypeError(f"product {entry.key}: a stage gave kind {kind}, the registry says "
                            f"{entry.kind}")
        name = emit.name or entry.file_name(None if rain is None else rain.slug, kind=kind)
        units = emit.units or entry.units
        if kind == "raster":
            self._raster(entry, emit, name)
        elif kind == "vector":
            emit.data.write(self.staging / name)
        else:
            (self.staging / name).write_bytes(emit.data)
        product = Product(key=emit.key, path=name, kind=kind, units=units,
                          rain=None if rain is None else rain.name)
        self.products.append(product)
        if kind == "raster":
            self._sidecars(entry, emit, name)
        return product

    def _sidecars(self, entry, emit, name) -> None:
        """The SLD style and the category names of a raster, beside it and in the manifest."""
        from ..grid import category_names_xml
        from ..sld import raster_sld

        rain = emit.rain
        slug = None if rain is None else rain.slug
        for kind in ("sld", "pam"):
            if kind not in entry.extra_kinds:
                continue
            if kind == "sld":
                layer = name.rsplit(".", 1)[0]
                heading = entry.title + ("" if rain is None else f": {rain.name}")
                data = raster_sld(entry, layer=layer, title=heading, caution=SHORT,
                                  extent_cells=emit.fields.get("extent"))
            else:
                data = category_names_xml(entry.classes)
            side = entry.file_name(slug, kind=kind)
            (self.staging / side).write_bytes(data)
            self.products.append(Product(key=entry.key, path=side, kind=kind, units=entry.units,
                                         rain=None if rain is None else rain.name))

    def _raster(self, entry, emit, name) -> None:
        data = emit.data
        if data.dtype != np.dtype(entry.dtype):
            raise TypeError(f"product {entry.key}: a stage gave {data.dtype}, the registry "
                            f"says {entry.dtype}")
        if data.shape != tuple(self.grid.shape):
            raise ValueError(f"product {entry.key}: shape {data.shape} is not the grid's "
                             f"{self.grid.shape}")
        if entry.key in STYLES or entry.key in MAP_OVERLAYS:
            step = self.preview_step
            rain = None if emit.rain is None else emit.rain.name
            self.previews[(entry.key, rain)] = np.ascontiguousarray(data[::step, ::step])
        while len(self._pending) >= MAX_PENDING:
            self._pending.pop(0).result()
        if self.explorer_step and (entry.key in STYLES or entry.key in MAP_OVERLAYS):
            from ..report.explorer import explorer_copy

            rain = None if emit.rain is None else emit.rain.name
            future = self._copier.submit(explorer_copy, entry.key, data, self.explorer_step)
            self._explorer[(entry.key, rain)] = future
            self._pending.append(future)
            while len(self._pending) >= MAX_PENDING:
                self._pending.pop(0).result()
        self._pending.append(self._pool.submit(
            write_raster, self.staging / name, data, self.grid,
            description=entry.description.format(**emit.fields), units=entry.units,
            caution=SHORT, tags=(dict(entry.tags) | dict(emit.tags)) or None,
            classes=entry.classes, resampling=entry.overview_resampling))

    def finish(self) -> None:
        """Wait for every background write; raise the first failure."""
        while self._pending:
            self._pending.pop(0).result()

    def close(self) -> None:
        """Stop the background writer (after a failure: pending writes are dropped)."""
        for future in self._pending:
            future.cancel()
        self._pool.shutdown(wait=True)
        self._copier.shutdown(wait=True)
        self._pending.clear()

    def snapshot(self):
        """What has been written so far, for the maps and the report (read only)."""
        from .results import Written

        return Written(products=tuple(self.products), previews=MappingProxyType(dict(self.previews)),
                       explorer=_Resolved(self._explorer))


class _Resolved:
    """A read-only mapping of explorer copies whose values are made on the writer thread.

    Looking a copy up waits for it (the maps stage never does; the report stage does).
    """

    def __init__(self, futures: dict):
        self._futures = dict(futures)

    def __getitem__(self, key):
        return self._futures[key].result()

    def __contains__(self, key):
        return key in self._futures

    def __iter__(self):
        return iter(self._futures)

    def __len__(self):
        return len(self._futures)

    def keys(self):
        return self._futures.keys()

    def get(self, key, default=None):
        return self[key] if key in self._futures else default


def _libc_trim():
    """glibc's ``malloc_trim``, or None where the C library has none."""
    import ctypes
    import ctypes.util

    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
        trim = libc.malloc_trim
    except (OSError, AttributeError):
        return None
    trim.argtypes = [ctypes.c_size_t]
    trim.restype = ctypes.c_int
    return trim


_TRIM = _libc_trim()


def _release_memory() -> None:
    """Hand the heap memory freed by a stage back to the operating system.

    glibc keeps freed blocks below its mmap threshold (GDAL's raster blocks,
    numba's and numpy's mid-sized temporaries) for reuse; between stages
    nothing reuses them, so without a trim they would add to the run's peak.
    """
    if _TRIM is not None:
        _TRIM(0)
