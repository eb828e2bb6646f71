"""The self-contained HTML report of a run.

:func:`render_report` turns a run's manifest, its product rasters and its
maps into one HTML file: images are embedded as base64 data URIs, the CSS is
inline, there is no script and nothing is fetched from the network. Every
string is escaped by the template engine (jinja2 with autoescape on), so a
title or a label holding markup is shown as text.

The report is a list of sections, each a list of blocks (paragraph, table,
figure, list). Sections for optional stages are registered in
:data:`STAGE_SECTIONS`: a stage's section appears when one of its products is
in the manifest, and a configured stage that did not run is named with the
reason. A later stage adds its entry (and, if it likes, its own builder);
the template does not change.

The summaries (areas below FS 1, areas with a probability of failure above
0.5, the critical-recharge distribution, and the plain-words account of what
fails where) are plain numpy functions of the product arrays, tested on
their own.
"""

from __future__ import annotations

import base64
import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from .cautions import CAUTIONS, SHORT

__all__ = [
    "Block", "Section", "StageSection", "STAGE_SECTIONS", "ReportContext", "MapImage",
    "band_areas", "case_facts", "recharge_distribution", "describe_case", "render_report",
    "data_uri", "format_area",
]

NBSP = "\u00a0"
"""No-break space between a number and its unit, so "5.3 %" never wraps."""

ASPECT_SECTORS = ("north", "north-east", "east", "south-east", "south", "south-west", "west",
                  "north-west")
"""Compass sectors of 45 degrees, the first centred on north."""

PROPERTY_UNITS = {
    "depth_m": ("Depth to the failure plane (vertical)", "m"),
    "cohesion_kpa": ("Effective soil cohesion c'", "kPa"),
    "root_cohesion_kpa": ("Basal root cohesion", "kPa"),
    "lateral_root_cohesion_kpa": ("Lateral root cohesion", "kPa"),
    "friction_deg": ("Effective friction angle", "degrees"),
    "unit_weight_kn_m3": ("Bulk unit weight", "kN/m³"),
    "conductivity_m_per_day": ("Saturated hydraulic conductivity", "m/day"),
    "diffusivity_m2_per_s": ("Hydraulic diffusivity D₀", "m²/s"),
}
"""Name and unit of every soil property, in the order of the report."""

PRODUCT_TITLES = {
    "slope": "Slope",
    "specific_catchment_area": "Specific catchment area",
    "critical_recharge": "Critical steady recharge",
    "critical_recharge_class": "Critical-recharge class",
    "wetness": "Wetness (saturated fraction of the soil column)",
    "factor_of_safety": "Factor of safety",
    "failure_probability": "Probability of failure",
    "storm_failure_depth": "Depth of the least storm factor of safety",
    "storm_failure_time": "Time of the least storm factor of safety",
    "storm_flags": "Storm model flags",
    "cluster_fs_bound": "Lower bound on the factor of safety of failure clusters",
    "cluster_labels": "Failure clusters",
    "clusters": "Failure clusters",
    "runout": "Runout",
    "corridor_segments": "Corridor segments",
    "inventory_scores": "Agreement with mapped landslides",
    "map": "Map",
    "report": "Report",
}
"""Plain title of each product key."""


# ---------------------------------------------------------------------------
# Blocks and sections
# ---------------------------------------------------------------------------


@dataclass
class Block:
    """One piece of a section.

    ``kind`` is ``"p"`` (``text``, optional bold ``lead``), ``"list"``
    (``items``), ``"table"`` (``caption``, ``header``, ``rows``, ``numeric``:
    which columns are numbers), ``"figure"`` (``src``, ``alt``, ``caption``)
    or ``"note"`` (a highlighted paragraph).
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


def para(text, lead=""):
    """A paragraph block."""
    return Block("p", text=text, lead=lead)


def note(text, lead=""):
    """A highlighted paragraph block."""
    return Block("note", text=text, lead=lead)


def bullets(items):
    """A list block."""
    return Block("list", items=list(items))


def table(caption, header, rows, numeric=None):
    """A table block; ``numeric`` flags right-aligned columns."""
    numeric = list(numeric) if numeric is not None else [False] * len(header)
    return Block("table", caption=caption, header=list(header), rows=[list(r) for r in rows],
                 numeric=numeric)


def figure(png: bytes, alt, caption):
    """A figure block with the image embedded as a data URI."""
    return Block("figure", src=data_uri(png), alt=alt, caption=caption)


@dataclass
class Section:
    """A titled part of the report (``level`` 2 or 3)."""

    id: str
    title: str
    blocks: list = field(default_factory=list)
    level: int = 2


def data_uri(png: bytes) -> str:
    """``data:image/png;base64,...`` of PNG bytes."""
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


# ---------------------------------------------------------------------------
# Summaries (plain numpy, tested on their own)
# ---------------------------------------------------------------------------


def format_area(area_m2) -> str:
    """Area in words: m² below 0.1 ha, hectares above, km² beyond 1000 ha.

    Examples
    --------
    >>> [a.replace(NBSP, " ") for a in (format_area(480.0), format_area(12_345.0), format_area(4.2e7))]
    ['480 m²', '1.23 ha', '42.0 km²']
    """
    a = float(area_m2)
    if a < 1000.0:
        return f"{a:.0f}{NBSP}m²"
    ha = a / 1.0e4
    if ha < 10:
        return f"{ha:.2f}{NBSP}ha"
    if ha < 1000:
        return f"{ha:.1f}{NBSP}ha"
    return f"{a / 1.0e6:.1f}{NBSP}km²"


def _pct(share) -> str:
    s = 100.0 * float(share)
    if s == 0:
        return f"0{NBSP}%"
    if s < 0.1:
        return f"<{NBSP}0.1{NBSP}%"
    return f"{s:.1f}{NBSP}%" if s < 10 else f"{s:.0f}{NBSP}%"


def band_areas(fs, cell_area_m2):
    """Area and share of the computed cells in each screening band of FS.

    Parameters
    ----------
    fs : array_like
        Factor of safety (dimensionless); NaN is no value.
    cell_area_m2 : float
        Plan area of one cell, m².

    Returns
    -------
    list of (str, float, float)
        (band label, area m², share of the cells with a value) for the bands
        below 1, 1-1.3, 1.3-1.5 and 1.5 and above (common practice).

    Examples
    --------
    >>> [(b, a, s) for b, a, s in band_areas([0.5, 1.0, 1.35, 2.0, float("nan")], 10.0)][:2]
    [('below 1.0', 10.0, 0.25), ('1.0 to 1.3', 10.0, 0.25)]
    """
    from .maps import FS_BANDS, fs_band

    band = fs_band(fs)
    n = int((band >= 0).sum())
    labels = ("below 1.0", "1.0 to 1.3", "1.3 to 1.5", "1.5 and above")
    out = []
    for i, label in enumerate(labels[:len(FS_BANDS)]):
        count = int((band == i).sum())
        out.append((label, count * float(cell_area_m2), count / n if n else 0.0))
    return out


def _sector(aspect_deg):
    a = np.asarray(aspect_deg, dtype=np.float64)
    return np.floor(((a + 22.5) % 360.0) / 45.0).astype(np.int64)


def case_facts(fs, *, cell_area_m2, pf=None, wetness=None, slope_deg=None, aspect_deg=None,
               unit_index=None, unit_labels=()):
    """What fails and where, for one rain case, as numbers.

    Parameters
    ----------
    fs : array_like
        Factor of safety; NaN is no value.
    cell_area_m2 : float
        Plan area of one cell, m².
    pf : array_like, optional
        Probability of failure (0-1).
    wetness, slope_deg, aspect_deg : array_like, optional
        Wetness h/z, slope (degrees) and aspect (degrees clockwise from
        north) on the same grid.
    unit_index : array_like of int, optional
        Row of the soil unit per cell (-1 = none), matching ``unit_labels``.
    unit_labels : sequence of str

    Returns
    -------
    dict
        ``computed_m2``, ``fail_m2``, ``fail_share``, ``pf_m2`` and
        ``pf_share`` (P_f > 0.5, None without ``pf``), ``units`` (list of
        (label, share of the failing area), largest first), ``slope_p10``,
        ``slope_p90`` (degrees), ``aspects`` (list of (sector, share)),
        ``saturated_share`` (share of the failing area with wetness >= 0.999).

    Examples
    --------
    >>> import numpy as np
    >>> f = case_facts(np.array([[0.8, 2.0], [0.9, 1.1]]), cell_area_m2=25.0,
    ...                aspect_deg=np.array([[10.0, 0.0], [200.0, 0.0]]))
    >>> f["fail_m2"], f["fail_share"], f["aspects"]
    (50.0, 0.5, [('north', 0.5), ('south', 0.5)])
    """
    fs = np.asarray(fs, dtype=np.float64)
    has = np.isfinite(fs)
    fail = has & (fs < 1.0)
    n, k = int(has.sum()), int(fail.sum())
    facts = {"computed_m2": n * cell_area_m2, "fail_m2": k * cell_area_m2,
             "fail_share": k / n if n else 0.0, "pf_m2": None, "pf_share": None, "units": [],
             "slope_p10": None, "slope_p90": None, "aspects": [], "saturated_share": None}
    if pf is not None:
        pf = np.asarray(pf, dtype=np.float64)
        hp = np.isfinite(pf)
        m = int((hp & (pf > 0.5)).sum())
        facts["pf_m2"] = m * cell_area_m2
        facts["pf_share"] = m / int(hp.sum()) if hp.any() else 0.0
    if k == 0:
        return facts
    if unit_index is not None and len(unit_labels):
        idx = np.asarray(unit_index)[fail]
        counts = np.bincount(idx[idx >= 0], minlength=len(unit_labels))
        order = np.argsort(-counts, kind="stable")
        facts["units"] = [(unit_labels[i], float(counts[i] / k)) for i in order if counts[i] > 0]
    if slope_deg is not None:
        s = np.asarray(slope_deg, dtype=np.float64)[fail]
        s = s[np.isfinite(s)]
        if s.size:
            facts["slope_p10"], facts["slope_p90"] = (float(v) for v in np.percentile(s, [10, 90]))
    if aspect_deg is not None:
        a = np.asarray(aspect_deg, dtype=np.float64)[fail]
        a = a[np.isfinite(a)]
        if a.size:
            counts = np.bincount(_sector(a), minlength=8)
            order = np.argsort(-counts, kind="stable")
            facts["aspects"] = [(ASPECT_SECTORS[i], float(counts[i] / a.size)) for i in order if counts[i] > 0]
    if wetness is not None:
        w = np.asarray(wetness, dtype=np.float64)[fail]
        facts["saturated_share"] = float(np.mean(w >= 0.999)) if w.size else None
    return facts


def recharge_distribution(q_cr, classes, cell_area_m2, rates=()):
    """Distribution of the critical steady recharge.

    Parameters
    ----------
    q_cr : array_like
        Critical recharge, mm/day (NaN where no rate applies).
    classes : array_like of int
        1 fails even when dry, 2 fails under enough recharge, 3 stable even
        when saturated, 0 no value.
    cell_area_m2 : float
    rates : sequence of (str, float)
        Steady rain cases (name, mm/day) to compare with.

    Returns
    -------
    dict
        ``classes``: list of (class, area m², share); ``percentiles``: list of
        (p, mm/day) for p in 10, 25, 50, 75, 90 of the cells with a rate;
        ``rates``: list of (name, mm/day, area m², share) of the area that
        fails at or below the rate (class 1 plus q_cr < rate).

    Examples
    --------
    >>> d = recharge_distribution([float("nan"), 4.0, 9.0], [1, 2, 2], 10.0, rates=[("wet", 5.0)])
    >>> d["rates"]
    [('wet', 5.0, 20.0, 0.6666666666666666)]
    """
    q = np.asarray(q_cr, dtype=np.float64)
    c = np.asarray(classes)
    n = int((c > 0).sum())
    out = {"classes": [], "percentiles": [], "rates": []}
    for code in (1, 2, 3):
        k = int((c == code).sum())
        out["classes"].append((code, k * cell_area_m2, k / n if n else 0.0))
    has = (c == 2) & np.isfinite(q)
    if has.any():
        out["percentiles"] = [(p, float(v)) for p, v in
                              zip((10, 25, 50, 75, 90), np.percentile(q[has], [10, 25, 50, 75, 90]))]
    dry = int((c == 1).sum())
    for name, rate in rates:
        k = dry + int((has & (q < rate)).sum())
        out["rates"].append((name, rate, k * cell_area_m2, k / n if n else 0.0))
    return out


def _join(words):
    words = list(words)
    if len(words) <= 1:
        return "".join(words)
    return ", ".join(words[:-1]) + " and " + words[-1]


def describe_case(name, rain_text, facts) -> str:
    """One paragraph, in plain words, of what fails where under one rain case.

    Parameters
    ----------
    name : str
        Rain-case name.
    rain_text : str
        The case in words (:func:`rain_text`).
    facts : dict
        From :func:`case_facts`.

    Returns
    -------
    str

    Examples
    --------
    >>> import numpy as np
    >>> f = case_facts(np.array([0.8, 2.0, 2.0, 2.0]), cell_area_m2=400.0)
    >>> describe_case("wet", "steady recharge 5 mm/day", f)[:60].replace(NBSP, " ")
    'Under “wet” (steady recharge 5 mm/day), 400 m², 25 % of the '
    """
    lead = f"Under “{name}” ({rain_text}), "
    if facts["fail_m2"] == 0:
        text = (lead + "no cell has a factor of safety below 1 at the median soil parameters "
                f"(of {format_area(facts['computed_m2'])} computed).")
    else:
        text = (lead + f"{format_area(facts['fail_m2'])}, {_pct(facts['fail_share'])} of the "
                f"{format_area(facts['computed_m2'])} computed, has a factor of safety below 1 at the "
                "median soil parameters.")
        where = []
        if facts["units"]:
            top = [u for u in facts["units"][:3] if u[1] >= 0.05] or facts["units"][:1]
            where.append("in " + _join(f"{label} ({_pct(share)})" for label, share in top))
        if facts["slope_p10"] is not None:
            where.append(f"on slopes of {facts['slope_p10']:.0f} to {facts['slope_p90']:.0f} degrees "
                         "(10th to 90th percentile)")
        if facts["aspects"]:
            picked, total = [], 0.0
            for sector, share in facts["aspects"]:
                picked.append(sector)
                total += share
                if total >= 0.5 or len(picked) == 3:
                    break
            where.append(f"facing {_join(picked)} ({_pct(total)})")
        if where:
            text += " It lies mostly " + "; ".join(where) + "."
        if facts["saturated_share"] is not None:
            text += (f" {_pct(facts['saturated_share'])} of it is saturated to the surface "
                     "(wetness 1) in this case.")
    if facts["pf_m2"] is not None:
        text += (f" {format_area(facts['pf_m2'])} ({_pct(facts['pf_share'])}) has a probability of "
                 "failure above 0.5 given the parameter distributions.")
    return text


# ---------------------------------------------------------------------------
# Context and optional stages
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


@dataclass(frozen=True)
class StageSection:
    """A report section that exists only when its stage ran.

    Attributes
    ----------
    section : str
        Scenario section that configures the stage (``"clusters"`` ...).
    title : str
    keys : tuple of str
        Product keys that show the stage ran.
    build : callable or None
        ``build(ctx, entries) -> list of Block``; None lists the stage's
        products and their maps.
    """

    section: str
    title: str
    keys: tuple
    build: Callable | None = None


def _cluster_blocks(ctx: ReportContext, entries):
    """Failing multi-cell clusters per rain case: counts, sizes and the least stable."""
    rows = ctx.tables.get("clusters", [])
    blocks = [para(
        "A cell below FS 1 is not yet a landslide: a real failure is a group of cells whose weight "
        "overcomes the strength of its base and of its margins (passive resistance at the toe, "
        "friction and roots on the sides, roots at the head). The clusters below are the groups "
        "that fail as a whole under each rain case at the median parameters, found exactly by a "
        "minimum cut; every one was checked to have FS below 1 when recomputed.",
        lead="What this is:")]
    cases = [r["name"] for r in ctx.manifest.get("rain", [])]
    summary = []
    for name in cases:
        mine = [r for r in rows if r["rain"] == name]
        if not mine:
            summary.append([name, "0", "—", "—", "—"])
            continue
        areas = np.array([r["area_m2"] for r in mine])
        volumes = np.array([r["volume_m3"] for r in mine])
        summary.append([name, str(len(mine)), format_area(float(areas.sum())),
                        f"{np.median(areas):,.0f}{NBSP}m² / {areas.max():,.0f}{NBSP}m²",
                        f"{volumes.sum():,.0f}{NBSP}m³"])
    blocks.append(table("Failing clusters per rain case",
                        ["rain case", "clusters", "total area", "median / largest area",
                         "total volume"], summary, [False, True, True, True, True]))
    least = sorted(rows, key=lambda r: r["fs"])[:15]
    if least:
        blocks.append(table(
            "The least stable clusters (up to 15)",
            ["id", "rain case", "FS", "area", "volume", "length × width", "cells", "proven",
             "in the area band"],
            [[str(r["id"]), r["rain"], f"{r['fs']:.3f}", f"{r['area_m2']:,.0f}{NBSP}m²",
              f"{r['volume_m3']:,.0f}{NBSP}m³", f"{r['length_m']:.0f} × {r['width_m']:.0f}{NBSP}m",
              str(r["n_cells"]), "yes" if r["proven"] else "no",
              "yes" if r["in_area_band"] else "no"] for r in least],
            [False, False, True, True, True, True, True, False, False]))
    bound = [e for e in entries if e["key"] == "cluster_fs_bound"]
    if bound:
        blocks.append(para(
            "The cluster bound map gives, per cell, a proven lower bound on the factor of safety "
            "of every cluster up to the stated extent that contains the cell; where it is at "
            "least 1, no such cluster can fail under that rain case. Its maps are in the "
            "sections of each rain case.", lead="Bound:"))
    blocks.append(note(
        "Not in this version: the size-resolved search for the least stable cluster inside the "
        "scenario's area band, and the probability that each cluster fails given the parameter "
        "distributions.", lead="Limits."))
    return blocks


STAGE_SECTIONS = (
    StageSection("clusters", "Failure clusters",
                 ("cluster_fs_bound", "clusters", "cluster_labels"), _cluster_blocks),
    StageSection("runout", "Runout", ("runout",)),
    StageSection("corridor", "Corridor", ("corridor_segments",)),
    StageSection("inventory", "Agreement with mapped landslides", ("inventory_scores",)),
)
"""Optional stages and their sections, in report order."""


def _generic_stage_blocks(ctx: ReportContext, entries):
    blocks = []
    for e in entries:
        m = ctx.map_of(e["key"], e.get("rain"))
        if m is not None:
            blocks.append(figure(m.png, _map_alt(e), _map_caption(ctx, e)))
    blocks.append(table("Products of this stage", ["product", "rain case", "file", "units"],
                        [[PRODUCT_TITLES.get(e["key"], e["key"]), e.get("rain") or "—",
                          e["path"], _units_text(e["units"])] for e in entries]))
    return blocks


# ---------------------------------------------------------------------------
# Text helpers
# ---------------------------------------------------------------------------


def rain_text(case: dict) -> str:
    """A rain case of the manifest in words."""
    if case.get("steady_mm_per_day") is not None:
        return f"steady recharge {case['steady_mm_per_day']:g} mm/day"
    total = case["storm_mm_per_h"] * case["duration_h"]
    return (f"storm of {case['storm_mm_per_h']:g} mm/h for {case['duration_h']:g} h ({total:g} mm), "
            f"water table {case['water_table_depth_m']:g} m below the surface before it")


def _num(v) -> str:
    return f"{v:.4g}" if isinstance(v, float) else str(v)


def parameter_text(record, unit) -> str:
    """A soil parameter of the manifest (number or distribution) in words with its unit."""
    if record is None:
        return "not given"
    if not isinstance(record, dict):
        return f"{_num(float(record))} {unit} (fixed)"
    kind = record["distribution"]
    if kind == "uniform":
        text = f"uniform, {_num(record['low'])} to {_num(record['high'])} {unit}"
    elif kind == "normal":
        text = f"normal, mean {_num(record['mean'])} {unit}, sd {_num(record['sd'])} {unit}"
    else:
        text = f"lognormal, median {_num(record['median'])} {unit}, sd of ln {_num(record['sd_of_log'])}"
    bounds = record.get("truncated_to")
    if bounds:
        lo, hi = bounds
        if lo is None:
            low = "no lower limit"
        elif 0 < lo < 1e-300:      # the open bound "> 0" is stored as the next float above 0
            low = "above 0"
        else:
            low = f"from {_num(float(lo))}"
        high = "no upper limit" if hi is None else f"to {_num(float(hi))} {unit}"
        text += f"; truncated: {low} {high}"
    return text


def _map_alt(entry) -> str:
    title = PRODUCT_TITLES.get(entry["key"], entry["key"])
    return f"Map: {title}" + (f", rain case {entry['rain']}" if entry.get("rain") else "")


def _units_text(units) -> str:
    return "dimensionless" if units == "1" else units


def _map_caption(ctx, entry) -> str:
    title = PRODUCT_TITLES.get(entry["key"], entry["key"])
    m = ctx.map_of(entry["key"], entry.get("rain"))
    file = f" Map file: {m.entry['path']}; raster: {entry['path']}." if m else ""
    return f"{title} ({_units_text(entry['units'])}).{file}"


# ---------------------------------------------------------------------------
# Sections
# ---------------------------------------------------------------------------


def _rain_cases(ctx):
    return ctx.manifest.get("rain") or []


def _facts(ctx, case_name):
    fs_e = ctx.product("factor_of_safety", case_name)
    if fs_e is None:
        return None
    pf_e = ctx.product("failure_probability", case_name)
    case = next((c for c in _rain_cases(ctx) if c["name"] == case_name), {})
    # saturation to the surface is a steady-state notion; storm wetness is an equivalent head
    wet_e = ctx.product("wetness", case_name) if case.get("steady_mm_per_day") is not None else None
    return case_facts(ctx.read(fs_e), cell_area_m2=ctx.cell_area_m2,
                      pf=None if pf_e is None else ctx.read(pf_e),
                      wetness=None if wet_e is None else ctx.read(wet_e),
                      slope_deg=ctx.slope_deg, aspect_deg=ctx.aspect_deg,
                      unit_index=ctx.unit_index, unit_labels=ctx.unit_labels)


def _glance(ctx, facts_by_case):
    blocks = []
    cases = _rain_cases(ctx)
    if not cases or not any(facts_by_case.values()):
        blocks.append(para("This run computed terrain products only (no [soil] and [[rain]] "
                           "sections), so it says nothing yet about where slopes can fail."))
        return Section("glance", "What fails where", blocks)
    for case in cases:
        f = facts_by_case.get(case["name"])
        if f is None:
            continue
        blocks.append(para(describe_case(case["name"], rain_text(case), f)))
    rows = []
    for case in cases:
        f = facts_by_case.get(case["name"])
        if f is None:
            continue
        rows.append([case["name"], rain_text(case), format_area(f["fail_m2"]), _pct(f["fail_share"]),
                     "not computed" if f["pf_m2"] is None else format_area(f["pf_m2"]),
                     "" if f["pf_share"] is None else _pct(f["pf_share"])])
    blocks.append(table("Area below FS 1 and area with a probability of failure above 0.5, per rain case",
                        ["rain case", "rain", "area FS < 1", "share", "area P_f > 0.5", "share"],
                        rows, [False, False, True, True, True, True]))
    blocks.append(para("FS is the infinite-slope factor of safety at the median of every soil "
                       "parameter; P_f is the probability that FS < 1 given the stated parameter "
                       "distributions, cell by cell. Shares are of the area where the model was "
                       "computed. The maps below show where."))
    return Section("glance", "What fails where", blocks)


def _case_sections(ctx, facts_by_case):
    out = []
    flags_text = {1: "pressure head at its cap (saturated to the surface)",
                  2: "rain above the saturated conductivity (excess ran off)",
                  4: "least FS late compared with A/D₀ (short-time solution doubtful)"}
    for case in _rain_cases(ctx):
        name = case["name"]
        f = facts_by_case.get(name)
        blocks = [para(rain_text(case), lead="Rain:")]
        fs_e = ctx.product("factor_of_safety", name)
        if fs_e is not None:
            rows = [[label, format_area(a), _pct(s)] for label, a, s in
                    band_areas(ctx.read(fs_e), ctx.cell_area_m2)]
            if f is not None and f["pf_m2"] is not None:
                rows.append(["probability of failure above 0.5 (any FS band)", format_area(f["pf_m2"]),
                             _pct(f["pf_share"])])
            blocks.append(table(f"Area by factor-of-safety band (common screening practice), “{name}”",
                                ["factor of safety", "area", "share of the computed area"], rows,
                                [False, True, True]))
        flags_e = ctx.product("storm_flags", name)
        if flags_e is not None:
            flags = ctx.read(flags_e)
            fin = np.isfinite(flags) & (flags > 0)
            n = int(fin.sum())
            bits = np.where(fin, flags, 0).astype(np.int64)
            rows = [[text, _pct(((bits & bit) > 0).sum() / n if n else 0.0)]
                    for bit, text in flags_text.items()]
            blocks.append(table("Where the storm model's limits bind", ["flag", "share of cells"], rows,
                                [False, True]))
        for key in ("factor_of_safety", "failure_probability", "wetness", "cluster_fs_bound"):
            e = ctx.product(key, name)
            m = ctx.map_of(key, name)
            if e is not None and m is not None:
                blocks.append(figure(m.png, _map_alt(e), _map_caption(ctx, e)))
        out.append(Section(f"case-{_anchor(name)}", f"Rain case: {name}", blocks, level=3))
    return out


def _anchor(text):
    from ..scenario import slugify

    return slugify(text)


def _recharge_section(ctx):
    q_e = ctx.product("critical_recharge")
    c_e = ctx.product("critical_recharge_class")
    if q_e is None or c_e is None:
        return None
    rates = [(c["name"], c["steady_mm_per_day"]) for c in _rain_cases(ctx)
             if c.get("steady_mm_per_day") is not None]
    dist = recharge_distribution(ctx.read(q_e), ctx.read(c_e), ctx.cell_area_m2, rates)
    labels = {1: "fails even when dry", 2: "fails under enough recharge (a rate is given)",
              3: "stable even when saturated"}
    blocks = [para("The steady recharge, per unit of horizontal area, that brings a cell to FS = 1 "
                   "at the median soil parameters (Montgomery and Dietrich 1994 with cohesion). "
                   "Low values mark ground that needs little water to fail. It is a relative index "
                   "of topographic control, not a rainfall threshold.")]
    blocks.append(table("Stability classes", ["class", "area", "share"],
                        [[labels[c], format_area(a), _pct(s)] for c, a, s in dist["classes"]],
                        [False, True, True]))
    if dist["percentiles"]:
        blocks.append(table("Critical recharge where a rate applies (mm/day)",
                            ["percentile", "critical recharge (mm/day)"],
                            [[f"{p}th", f"{v:.3g}"] for p, v in dist["percentiles"]], [False, True]))
    if dist["rates"]:
        blocks.append(table("Area that fails at or below each steady rain case (class 1 plus q_cr "
                            "below the rate)", ["rain case", "rate (mm/day)", "area", "share"],
                            [[n, f"{r:g}", format_area(a), _pct(s)] for n, r, a, s in dist["rates"]],
                            [False, True, True, True]))
    m = ctx.map_of("critical_recharge")
    if m is not None:
        blocks.append(figure(m.png, _map_alt(q_e), _map_caption(ctx, q_e)))
    return Section("recharge", "Critical recharge", blocks)


def _terrain_section(ctx):
    blocks = []
    for key in ("slope", "specific_catchment_area"):
        e = ctx.product(key)
        if e is None:
            continue
        v = ctx.read(e)
        fin = v[np.isfinite(v)]
        if fin.size:
            p = np.percentile(fin, [10, 50, 90])
            blocks.append(para(f"10th, 50th and 90th percentiles: {p[0]:.3g}, {p[1]:.3g} and "
                               f"{p[2]:.3g}{NBSP}{e['units']}.", lead=PRODUCT_TITLES[key] + ":"))
        m = ctx.map_of(key)
        if m is not None:
            blocks.append(figure(m.png, _map_alt(e), _map_caption(ctx, e)))
    return Section("terrain", "Terrain", blocks) if blocks else None


def _stage_sections(ctx):
    out = []
    not_run = {n["section"]: n["reason"] for n in ctx.manifest.get("not_run", [])}
    for st in STAGE_SECTIONS:
        entries = [p for p in ctx.manifest.get("products", []) if p["key"] in st.keys]
        if entries:
            builder = st.build or _generic_stage_blocks
            out.append(Section(st.section, st.title, builder(ctx, entries)))
        elif st.section in not_run:
            out.append(Section(st.section, st.title, [note(
                f"The scenario configures [{st.section}], but this stage did not run: "
                f"{not_run[st.section]}. No {st.section} product was written, and nothing in this "
                "report depends on it.", lead="Did not run.")]))
    return out


def _inputs_section(ctx):
    m = ctx.manifest
    g = m.get("grid", {})
    blocks = [table("Run inputs", ["item", "value"], [
        ["study title", m.get("title", "")],
        ["DEM grid", f"{g.get('rows')} × {g.get('cols')} cells of {g.get('dx_m', 0):g} × "
                     f"{g.get('dy_m', 0):g} m; {g.get('valid_cells')} cells with data"],
        ["CRS", str(g.get("crs", ""))],
        ["flow routing", _routing_text(m.get("routing") or {})],
        ["soil map", (m.get("soil") or {}).get("map") or "none (one soil unit covers the DEM)"],
    ])]
    soil = m.get("soil")
    if soil:
        units = soil["units"]
        for first in range(0, len(units), 3):
            part = units[first:first + 3]
            header = ["property (unit)"] + [f"unit {u['code']}: {u['label']}" for u in part]
            rows = [[f"{title} ({unit_})"] + [parameter_text(u.get(key), unit_) for u in part]
                    for key, (title, unit_) in PROPERTY_UNITS.items() if any(key in u for u in part)]
            caption = "Soil units and their parameters" + (
                f" ({first // 3 + 1} of {(len(units) + 2) // 3})" if len(units) > 3 else "")
            blocks.append(table(caption, header, rows))
        blocks.append(para("The deterministic maps use the median of each distribution; the "
                           "probability of failure samples them. Normal and lognormal "
                           "distributions are truncated to each property's physical range."))
    cases = _rain_cases(ctx)
    if cases:
        blocks.append(table("Rain cases", ["rain case", "kind", "values"],
                            [[c["name"], "storm (Iverson 2000)" if c.get("storm_mm_per_h") else
                              "steady recharge", rain_text(c)] for c in cases]))
    unc = m.get("uncertainty")
    if unc:
        blocks.append(table("Uncertainty", ["setting", "value"], [
            ["method", "Monte Carlo" if unc.get("method") == "monte_carlo" else
             "first-order second-moment (FOSM)"],
            ["samples per cell", unc.get("samples")], ["seed", unc.get("seed")],
            ["independent draws per", unc.get("correlation")]]))
    return Section("inputs", "Inputs and parameters", blocks)


def _routing_text(r):
    names = {"dinf": "D-infinity (Tarboton 1997)", "mfd": "multiple flow direction (Freeman 1991)",
             "d8": "D8 (O'Callaghan and Mark 1984)"}
    text = names.get(r.get("method"), str(r.get("method")))
    if r.get("mfd_exponent"):
        text += f", exponent {r['mfd_exponent']:g}"
    return text


METHODS = (
    ("Slope", "Horn's (1981) 3×3 finite differences on the original DEM; the conditioned DEM is "
              "used for routing only."),
    ("Conditioning", "Priority-Flood depression filling (Barnes, Lehman and Mulla 2014) and drainage "
                     "over flats (Garbrecht and Martz 1997; Barnes, Lehman and Mulla 2014)."),
    ("Specific catchment area", "a = A/b: upslope planimetric area (own cell included) over an "
                                "effective contour width chosen so an inclined plane gives a = L at "
                                "every orientation to the grid."),
    ("Steady wetness", "W = min(1, q a / (T sin θ)) with T = K z cos θ (O'Loughlin 1986; Montgomery "
                       "and Dietrich 1994)."),
    ("Storm response", "Iverson's (2000) one-dimensional transient pressure head with infiltration "
                       "limited to K; the least FS over depth and time, during and after the storm."),
    ("Factor of safety", "Infinite slope, vertical depth z, slope-parallel seepage: "
                         "FS = (c' + c_r)/(γ z sin θ cos θ) + (1 − W γ_w/γ) tan φ'/tan θ, clipped to "
                         "[0, 100] (Skempton and DeLory 1957)."),
    ("Critical recharge", "FS = 1 solved for the steady recharge (Montgomery and Dietrich 1994 with "
                          "cohesion)."),
    ("Probability of failure", "Monte Carlo P(FS < 1) from the parameter distributions, or FOSM "
                               "(Duncan 2000); per cell, conditional on the distributions."),
)
"""Short account of each method, in report order."""

REFERENCES = (
    "Barnes, R., Lehman, C., Mulla, D. (2014). Priority-Flood: an optimal depression-filling and "
    "watershed-labeling algorithm for digital elevation models. Computers & Geosciences 62, 117–127.",
    "Barnes, R., Lehman, C., Mulla, D. (2014). An efficient assignment of drainage direction over flat "
    "surfaces in raster digital elevation models. Computers & Geosciences 62, 128–135.",
    "Duncan, J.M. (2000). Factors of safety and reliability in geotechnical engineering. Journal of "
    "Geotechnical and Geoenvironmental Engineering 126(4), 307–316.",
    "Freeman, T.G. (1991). Calculating catchment area with divergent flow based on a regular grid. "
    "Computers & Geosciences 17(3), 413–422.",
    "Garbrecht, J., Martz, L.W. (1997). The assignment of drainage direction over flat surfaces in "
    "raster digital elevation models. Journal of Hydrology 193, 204–213.",
    "Horn, B.K.P. (1981). Hill shading and the reflectance map. Proceedings of the IEEE 69(1), 14–47.",
    "Iverson, R.M. (2000). Landslide triggering by rain infiltration. Water Resources Research 36(7), "
    "1897–1910. doi:10.1029/2000WR900090.",
    "Montgomery, D.R., Dietrich, W.E. (1994). A physically based model for the topographic control on "
    "shallow landsliding. Water Resources Research 30(4), 1153–1171.",
    "O'Callaghan, J.F., Mark, D.M. (1984). The extraction of drainage networks from digital elevation "
    "data. Computer Vision, Graphics, and Image Processing 28, 323–344.",
    "O'Loughlin, E.M. (1986). Prediction of surface saturation zones in natural catchments by "
    "topographic analysis. Water Resources Research 22(5), 794–804. doi:10.1029/WR022i005p00794.",
    "Skempton, A.W., DeLory, F.A. (1957). Stability of natural slopes in London Clay. Proc. 4th "
    "International Conference on Soil Mechanics and Foundation Engineering, London, 2, 378–381.",
    "Tarboton, D.G. (1997). A new method for the determination of flow directions and upslope areas in "
    "grid digital elevation models. Water Resources Research 33(2), 309–319. doi:10.1029/96WR03137.",
)
"""References cited in the report."""


def _methods_section(ctx):
    conv = ctx.manifest.get("conventions") or {}
    blocks = [table("Methods", ["step", "method"], [list(m) for m in METHODS])]
    if conv:
        blocks.append(table("Conventions of this run", ["item", "convention"],
                            [[k.replace("_", " "), v] for k, v in conv.items()]))
    blocks.append(bullets([
        "Assumptions: the failure plane is parallel to the ground and long compared with its depth; "
        "seepage is parallel to the slope; one bulk unit weight above and below the water table; "
        "suction, bedrock flow and seismic loading are ignored.",
        "Factor-of-safety bands (below 1, 1 to 1.3, 1.3 to 1.5, 1.5 and above) are the screening "
        "bands of common practice, not design criteria.",
        "The probability of failure is per cell and conditional on the stated distributions; it is "
        "not the probability that some landslide occurs in an area, and it says nothing about timing.",
    ]))
    blocks.append(Block("list", caption="References", items=list(REFERENCES)))
    return Section("methods", "Methods and assumptions", blocks)


def _products_section(ctx):
    shown = {m.entry["path"]: m.shows for m in ctx.maps}

    def title(p):
        if p["key"] == "map" and p["path"] in shown:
            return "Map: " + PRODUCT_TITLES.get(shown[p["path"]]["key"], shown[p["path"]]["key"]).lower()
        return PRODUCT_TITLES.get(p["key"], p["key"])

    rows = [[title(p), p["key"], p.get("rain") or "—", p["path"], p["kind"], _units_text(p["units"])]
            for p in ctx.manifest.get("products", [])]
    if not any(p["key"] == "report" for p in ctx.manifest.get("products", [])):
        rows.append(["Report (this file)", "report", "—", "report.html", "html", "n/a"])
    return Section("products", "Products of this run", [
        para("Every product is listed in manifest.json beside this report; rasters are GeoTIFF on the "
             "DEM grid with the caution in their metadata. A dash in the rain-case column marks a "
             "product that does not depend on rain."),
        table("Products", ["product", "key", "rain case", "file", "kind", "units"], rows)])


def _provenance_section(ctx):
    m = ctx.manifest
    unc = m.get("uncertainty") or {}
    rows = [["tool", f"{m.get('tool', 'slopescreen')} {m.get('version', '')}"],
            ["run started", str(m.get("created", "")).replace("T", " ").replace("+00:00", " UTC")],
            ["scenario SHA-256", m.get("scenario_sha256", "")],
            ["random seed", unc.get("seed", "no sampling in this run") if unc else
             "no sampling in this run"]]
    env = m.get("environment") or {}
    for k, v in env.items():
        rows.append([k, v])
    blocks = [table("Run", ["item", "value"], rows)]
    hashes = m.get("inputs_sha256") or {}
    if hashes:
        blocks.append(table("Input files (paths relative to the output folder)",
                            ["file", "SHA-256"], [[k, v] for k, v in hashes.items()]))
    times = m.get("stage_seconds") or {}
    if times:
        rows = [[k, f"{v:.2f}"] for k, v in times.items()]
        rows.append(["total of the stages above", f"{sum(times.values()):.2f}"])
        blocks.append(table("Run time per stage (s)", ["stage", "seconds"], rows, [False, True]))
        blocks.append(para("The time to write this report itself is recorded in manifest.json."))
    stage_rows = []
    not_run = {n["section"]: n["reason"] for n in m.get("not_run", [])}
    keys = {p["key"] for p in m.get("products", [])}
    for st in STAGE_SECTIONS:
        ran = bool(keys & set(st.keys))
        state = "ran" if ran else (f"configured, did not run: {not_run[st.section]}"
                                   if st.section in not_run else "not part of this run")
        stage_rows.append([st.title, state])
    blocks.append(table("Optional stages", ["stage", "state"], stage_rows))
    return Section("provenance", "Provenance", blocks)


# ---------------------------------------------------------------------------
# Rendering
# ---------------------------------------------------------------------------


def _environment():
    from jinja2 import Environment, PackageLoader, StrictUndefined

    return Environment(loader=PackageLoader("slopescreen.report", "templates"), autoescape=True,
                       undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True)


def render_report(ctx: ReportContext) -> str:
    """The report of a run as one self-contained HTML document.

    Parameters
    ----------
    ctx : ReportContext

    Returns
    -------
    str
        HTML5 text (UTF-8 when written). Images are data URIs; no script,
        no external resource.

    Notes
    -----
    Sections, in order: what fails where (first screen), cautions, each
    rain case (tables and maps), critical recharge, terrain, the optional
    stages (or why they did not run), inputs and parameters, methods and
    assumptions with references, products, provenance, cautions again.

    Examples
    --------
    >>> ctx = ReportContext(manifest={"title": "<b>t</b>", "scenario_sha256": "0"},
    ...                     read=None, cell_area_m2=1.0)
    >>> page = render_report(ctx)
    >>> "&lt;b&gt;t&lt;/b&gt;" in page and "<script" not in page
    True
    """
    facts = {}
    for case in _rain_cases(ctx):
        facts[case["name"]] = _facts(ctx, case["name"])
    glance = _glance(ctx, facts)
    body = []
    cases = _case_sections(ctx, facts)
    if cases:
        body.append(Section("cases", "Maps and tables by rain case",
                            [para("Each rain case is computed on its own; the maps show the same "
                                  "ground under each case.")]))
        body.extend(cases)
    for part in (_recharge_section(ctx), _terrain_section(ctx)):
        if part is not None:
            body.append(part)
    body.extend(_stage_sections(ctx))
    body.extend([_inputs_section(ctx), _methods_section(ctx), _products_section(ctx),
                 _provenance_section(ctx)])
    toc = [(s.id, s.title, s.level) for s in [glance] + body]
    m = ctx.manifest
    template = _environment().get_template("report.html.j2")
    created = str(m.get("created", "")).replace("T", " ").replace("+00:00", " UTC")
    return template.render(title=m.get("title") or "slopescreen run", manifest=m, short=SHORT,
                           cautions=CAUTIONS, glance=glance, sections=body, toc=toc,
                           created=created, version=m.get("version", ""))
