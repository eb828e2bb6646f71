"""OGC Styled Layer Descriptor (SLD 1.0.0) sidecars: each styled raster as the report draws it.

A raster product whose registry entry (:mod:`slopescreen.products`) has a map
``style`` or ``classes`` is written with ``KEY.sld`` (``KEY_RAIN.sld``) beside
its ``.tif``: one ``RasterSymbolizer`` whose ``ColorMap`` holds the colours
and labels of the report's maps, built from the style itself
(:mod:`slopescreen.report.styles`), so a change of a colour or a label there
changes the sidecar too. SLD is the open OGC standard for map styles; GIS
desktop and server software load it as the layer's style.

* FS band styles give ``type="intervals"``: a value takes the entry of the
  first band whose upper bound lies above it, so a band holds its lower
  bound, as on the maps.
* Ramp styles give ``type="ramp"``: stops at evenly spaced values, or
  logarithmically spaced ones for a log ramp, each coloured as the map's
  colour bar colours it; values below ``transparent_below`` are not coloured.
* Class rasters give ``type="values"``: one entry per class code.

Entries the maps leave uncoloured (the stable FS band, a class without a
colour, nodata) have opacity 0. The layer's opacity over a hillshade is the
style's ``alpha``. The screening caution is the style's ``Abstract``.
"""

from __future__ import annotations

import math
import xml.etree.ElementTree as ET

import numpy as np

from .grid import NODATA

__all__ = ["raster_sld", "RAMP_STOPS"]

SLD_NS = "http://www.opengis.net/sld"
"""Namespace of SLD 1.0.0 elements."""

_SCHEMA = "http://schemas.opengis.net/sld/1.0.0/StyledLayerDescriptor.xsd"

RAMP_STOPS = 6
"""Stops of a linear ramp; a log ramp has one per half decade (at least this many)."""

_TOP = float(np.finfo(np.float32).max)
"""Upper bound written for the open last band (the largest float32)."""


def raster_sld(entry, *, layer: str, title: str, caution: str, extent_cells=None) -> bytes:
    """The SLD 1.0.0 document of one raster product.

    Parameters
    ----------
    entry : slopescreen.products.ProductSpec
        Registry entry with a ``style`` or ``classes``.
    layer : str
        Layer name: the stem of the product's file (``factor_of_safety_wet``).
    title : str
        Human title of the layer (with the rain case).
    caution : str
        Screening caution, written as the style's ``Abstract``.
    extent_cells : int, optional
        Window of the cluster FS bound, cells on a side (named in its labels).

    Returns
    -------
    bytes
        UTF-8 XML, the same bytes for the same arguments.

    Raises
    ------
    ValueError
        The entry has neither a style nor classes.

    Examples
    --------
    >>> import xml.etree.ElementTree as ET
    >>> from slopescreen.products import spec
    >>> doc = ET.fromstring(raster_sld(spec("factor_of_safety"), layer="factor_of_safety_wet",
    ...                                title="Factor of safety: wet", caution="screening only"))
    >>> cmap = doc.find(".//{http://www.opengis.net/sld}ColorMap")
    >>> cmap.get("type"), [e.get("quantity") for e in cmap][:3]
    ('intervals', ['-9998', '1', '1.3'])
    """
    style, classes = entry.style, entry.classes
    if classes:
        cmap_type, entries, legend, opacity = "values", _class_entries(classes), entry.title, 1.0
    elif style is not None:
        legend, opacity = _one_line(style.label), style.alpha
        if style.kind == "bands":
            cmap_type, entries = "intervals", _band_entries()
        elif style.kind == "bound":
            cmap_type, entries = "intervals", _bound_entries(style, extent_cells)
        else:
            cmap_type, entries = "ramp", _ramp_entries(style, entry.units)
    else:
        raise ValueError(f"product {entry.key} has no map style or classes; it gets no SLD")

    root = ET.Element("StyledLayerDescriptor", {
        "version": "1.0.0", "xmlns": SLD_NS, "xmlns:ogc": "http://www.opengis.net/ogc",
        "xmlns:xlink": "http://www.w3.org/1999/xlink",
        "xmlns:xsi": "http://www.w3.org/2001/XMLSchema-instance",
        "xsi:schemaLocation": f"{SLD_NS} {_SCHEMA}"})
    named = ET.SubElement(root, "NamedLayer")
    ET.SubElement(named, "Name").text = layer
    user = ET.SubElement(named, "UserStyle")
    ET.SubElement(user, "Name").text = f"{layer}_style"
    ET.SubElement(user, "Title").text = title
    ET.SubElement(user, "Abstract").text = caution
    rule = ET.SubElement(ET.SubElement(user, "FeatureTypeStyle"), "Rule")
    ET.SubElement(rule, "Name").text = entry.key
    ET.SubElement(rule, "Title").text = legend
    symbolizer = ET.SubElement(rule, "RasterSymbolizer")
    ET.SubElement(symbolizer, "Opacity").text = _number(opacity)
    cmap = ET.SubElement(symbolizer, "ColorMap", {"type": cmap_type})
    for colour, quantity, label, alpha in entries:
        ET.SubElement(cmap, "ColorMapEntry", {"color": colour, "quantity": _number(quantity),
                                              "label": label, "opacity": _number(alpha)})
    ET.indent(root, space="  ")
    return ET.tostring(root, encoding="UTF-8", xml_declaration=True) + b"\n"


def _one_line(text: str) -> str:
    """A map label on one line (legends of a GIS have no line breaks)."""
    return " ".join(str(text).split())


def _number(value: float) -> str:
    """A quantity as the shortest text that reads back to the same float."""
    value = float(value)
    return str(int(value)) if value.is_integer() and abs(value) < 1e15 else repr(value)


def _hex(rgba) -> str:
    from matplotlib.colors import to_hex

    return to_hex(rgba, keep_alpha=False)


def _band_entries():
    """Intervals of the FS screening bands: (colour, upper bound, label, opacity)."""
    from .report.styles import FS_BANDS

    out = [("#ffffff", float(NODATA) + 1.0, "nodata", 0.0)]
    for upper, label, colour in FS_BANDS:
        bound = _TOP if math.isinf(upper) else upper
        out.append((colour or "#ffffff", bound, _one_line(label), 1.0 if colour else 0.0))
    return out


def _bound_entries(style, extent_cells):
    """Intervals of the cluster FS bound: a failing cluster possible below 1, ruled out above."""
    from .report.styles import bound_labels

    possible, ruled_out = (_one_line(t) for t in bound_labels(extent_cells))
    return [("#ffffff", float(NODATA) + 1.0, "nodata", 0.0),
            (_hex(style.colours[0]), 1.0, possible, 1.0),
            ("#ffffff", _TOP, ruled_out, 0.0)]


def _ramp_values(style) -> np.ndarray:
    if style.log:
        decades = math.log10(style.vmax / style.vmin)
        return np.geomspace(style.vmin, style.vmax, max(RAMP_STOPS, int(round(2 * decades)) + 1))
    return np.linspace(style.vmin, style.vmax, RAMP_STOPS)


def _ramp_entries(style, units: str):
    """Stops of a ramp style, coloured as the map's colour bar: (colour, value, label, opacity)."""
    cmap, norm = style.cmap(), style.norm()
    values = [float(f"{v:.4g}") for v in _ramp_values(style)]
    suffix = "" if units == "1" else f" {units}"
    first = style.vmin
    out = []
    below = style.transparent_below
    if below is not None and below >= style.vmin:
        first = below
        values = [below] + [v for v in values if v > below]
    out.append((_hex(cmap(norm(first))), float(NODATA), "nodata", 0.0))
    if below is not None and below >= style.vmin:
        out.append((_hex(cmap(norm(below))), below - abs(below) * 1e-6,
                    f"below {below:g}{suffix} (not coloured)", 0.0))
    for v in values:
        out.append((_hex(cmap(norm(v))), v, f"{v:g}{suffix}", 1.0))
    return out


def _class_entries(classes):
    """One entry per class code: (colour, code, label, opacity)."""
    return [(colour or "#ffffff", int(code), _one_line(label), 1.0 if colour else 0.0)
            for code, (label, colour) in sorted(classes.items())]
