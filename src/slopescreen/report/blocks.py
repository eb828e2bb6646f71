"""The building blocks of the report and the context it is made from.

A report is a list of :class:`Section`, each a list of :class:`Block`
(paragraph, table, figure, list, note), built with the small helpers
:func:`para`, :func:`note`, :func:`bullets`, :func:`table` and
:func:`figure`. :class:`ReportContext` carries the run's manifest, a reader
of its product rasters and its maps (:class:`MapImage`).
"""

from __future__ import annotations

import base64
from dataclasses import dataclass, field
from typing import Callable

import numpy as np


# ---------------------------------------------------------------------------
# Blocks and sections
# ---------------------------------------------------------------------------


@dataclass
class Block:
    """One piece of a section.

    ``kind`` is ``"p"`` (``text``, optional bold ``lead``), ``"list"``
    (``items``), ``"table"`` (``caption``, ``header``, ``rows``, ``numeric``:
    which columns are numbers), ``"figure"`` (``src``, ``alt``, ``caption``),
    ``"note"`` (a highlighted paragraph) or ``"details"`` (``caption`` shown,
    ``items`` the blocks folded away until the reader opens them; not printed).
    """

    kind: str
    text: str = ""
    lead: str = ""
    items: list = field(default_factory=list)
    caption: str = ""
    header: list = field(default_factory=list)
    rows: list = field(default_factory=list)
    numeric: list = field(default_factory=list)
    src: str = ""
    alt: str = ""
    css: str = ""
    """A figure's class in the page (``"overview"``; default a map or chart)."""
    print_rows: int | None = None
    """A table's rows printed (the rest show on screen only); None prints all."""


def para(text, lead=""):
    """A paragraph block."""
    return Block("p", text=text, lead=lead)


def note(text, lead=""):
    """A highlighted paragraph block."""
    return Block("note", text=text, lead=lead)


def bullets(items):
    """A list block."""
    return Block("list", items=list(items))


def table(caption, header, rows, numeric=None, *, print_rows=None):
    """A table block; ``numeric`` flags right-aligned columns; only the first ``print_rows``
    rows are printed (all show on screen)."""
    numeric = list(numeric) if numeric is not None else [False] * len(header)
    return Block("table", caption=caption, header=list(header), rows=[list(r) for r in rows],
                 numeric=numeric, print_rows=print_rows)


def details(summary, blocks):
    """Blocks folded under a one-line ``summary`` (for the technical detail of a section)."""
    return Block("details", caption=summary, items=list(blocks))


def figure(png: bytes, alt, caption, *, css=""):
    """A figure block with the image embedded as a data URI (``css``: its class)."""
    return Block("figure", src=data_uri(png), alt=alt, caption=caption, css=css)


@dataclass
class Section:
    """A titled part of the report (``level`` 2 or 3)."""

    id: str
    title: str
    blocks: list = field(default_factory=list)
    level: int = 2
    page_break: bool = False
    """Printed from a new page."""


def data_uri(png: bytes) -> str:
    """``data:image/png;base64,...`` of PNG bytes."""
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


# ---------------------------------------------------------------------------
# Context
# ---------------------------------------------------------------------------


@dataclass
class MapImage:
    """A map written by the run: its manifest entry, the product it shows and the PNG."""

    entry: dict
    shows: dict
    png: bytes


@dataclass
class ReportContext:
    """Everything the report is made from.

    Attributes
    ----------
    manifest : dict
        The run's manifest (products, provenance, parameters).
    read : callable
        ``read(product_entry) -> numpy.ndarray`` (float, NaN = no value).
    cell_area_m2 : float
    slope_deg, aspect_deg : numpy.ndarray, optional
        Of the original DEM.
    unit_index : numpy.ndarray of int, optional
        Soil-unit row per cell (-1 = none); rows match ``unit_labels``.
    unit_labels : list of str
    maps : list of MapImage
    tables : dict
    figures : ReportFigures or None
    explorer : dict or None
        The data of the pan-and-zoom map
        (:func:`~slopescreen.report.explorer_layers.explorer_data`); None: no map.
    """

    manifest: dict
    read: Callable
    cell_area_m2: float
    slope_deg: np.ndarray | None = None
    aspect_deg: np.ndarray | None = None
    unit_index: np.ndarray | None = None
    unit_labels: list = field(default_factory=list)
    maps: list = field(default_factory=list)
    tables: dict = field(default_factory=dict)
    """Attribute tables of vector products, e.g. ``{"clusters": [row dict, ...]}``."""
    overview: object = None
    """The first screen's map: ``{"png": bytes, "case": str, "places": [dict, ...],
    "kind": "cluster" or "patch"}`` (:mod:`slopescreen.report.overview`), or None."""
    figures: object = None
    """The numbers the report quotes (:class:`~slopescreen.report.figures.ReportFigures`), as a
    run computes them; None computes them from the products through ``read``."""
    explorer: dict | None = None

    def products(self, key, rain=None, *, any_rain=False):
        """Manifest entries with this key (and rain case, unless ``any_rain``)."""
        return [p for p in self.manifest.get("products", [])
                if p["key"] == key and (any_rain or p.get("rain") == rain)]

    def product(self, key, rain=None):
        """The one entry with this key and rain case, or None."""
        found = self.products(key, rain)
        return found[0] if found else None

    def map_of(self, key, rain=None):
        """The map of a product, or None."""
        for m in self.maps:
            if m.shows["key"] == key and m.shows.get("rain") == rain:
                return m
        return None
