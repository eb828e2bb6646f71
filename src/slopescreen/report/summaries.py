"""Summaries of the product arrays and the report's wording.

Plain numpy functions of the product arrays, tested on their own: areas in
each factor-of-safety band, what fails where under one rain case, the
distribution of the critical recharge, and the plain-words account of a
case. Beside them the small text helpers the sections share (a rain case,
a soil parameter, an area or a share in words) and the titles and units
of the soil properties (product titles come from the product registry).
"""

from __future__ import annotations

import numpy as np

from ..products import title as product_title
from ._count_kernels import band_counts, case_counts, recharge_counts
from .quantiles import percentiles
from .styles import at_least

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
    [('fails (FS < 1.0)', 10.0, 0.25), ('thin margin (FS 1.0-1.3)', 10.0, 0.25)]
    """
    from .styles import FS_BANDS, FS_CLASS_NAMES

    counts = band_counts(fs, [upper for upper, _, _ in FS_BANDS[:-1]])
    n = int(counts.sum())
    labels = FS_CLASS_NAMES
    out = []
    for i, label in enumerate(labels[:len(FS_BANDS)]):
        count = int(counts[i])
        out.append((label, count * float(cell_area_m2), count / n if n else 0.0))
    return out


def _floats(values) -> np.ndarray:
    """A float array as it is (float32 stays float32: no copy of a whole product)."""
    v = np.asarray(values)
    return v if np.issubdtype(v.dtype, np.floating) else v.astype(np.float64)


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
        ``pf_share`` (P_f >= 0.5, None without ``pf``), ``pf10_m2`` and
        ``pf10_share`` (P_f >= 0.1), ``units`` (list of
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
    fs = _floats(fs)
    labels = list(unit_labels)
    use_units = unit_index is not None and len(labels) > 0
    counts, unit_counts, sector_counts = case_counts(
        fs, pf=pf, wetness=wetness, aspect_deg=aspect_deg,
        unit_index=unit_index if use_units else None, n_units=len(labels) if use_units else 0)
    n, k, n_pf, m, saturated, m10 = (int(c) for c in counts)
    facts = {"computed_m2": n * cell_area_m2, "fail_m2": k * cell_area_m2,
             "fail_share": k / n if n else 0.0, "pf_m2": None, "pf_share": None,
             "pf10_m2": None, "pf10_share": None, "units": [],
             "slope_p10": None, "slope_p90": None, "aspects": [], "saturated_share": None}
    if pf is not None:
        facts["pf_m2"] = m * cell_area_m2  # P_f >= 0.5 (values compared as float64)
        facts["pf_share"] = m / n_pf if n_pf else 0.0
        facts["pf10_m2"] = m10 * cell_area_m2
        facts["pf10_share"] = m10 / n_pf if n_pf else 0.0
    if k == 0:
        return facts
    if use_units:
        order = np.argsort(-unit_counts, kind="stable")
        facts["units"] = [(labels[i], float(unit_counts[i] / k)) for i in order
                          if unit_counts[i] > 0]
    if slope_deg is not None:
        fail = np.isfinite(fs) & ~at_least(fs, 1.0)
        p = percentiles(np.asarray(slope_deg)[fail], (10, 90))
        if p is not None:
            facts["slope_p10"], facts["slope_p90"] = p
    if aspect_deg is not None:
        total = int(sector_counts.sum())
        if total:
            order = np.argsort(-sector_counts, kind="stable")
            facts["aspects"] = [(ASPECT_SECTORS[i], float(sector_counts[i] / total))
                                for i in order if sector_counts[i] > 0]
    if wetness is not None:
        facts["saturated_share"] = float(saturated / k)
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
    q = _floats(q_cr)
    c = np.asarray(classes)
    if np.issubdtype(c.dtype, np.floating):  # a class band read back with NaN nodata
        c = np.where(np.isfinite(c), c, 0).astype(np.int8)
    rates = list(rates)
    class_counts, rate_counts, (n_rated, n_finite) = recharge_counts(
        q, c, [rate for _, rate in rates])
    n = int(class_counts[1:].sum())
    out = {"classes": [], "percentiles": [], "rates": []}
    for code in (1, 2, 3):
        k = int(class_counts[code])
        out["classes"].append((code, k * cell_area_m2, k / n if n else 0.0))
    if n_rated:
        ps = (10, 25, 50, 75, 90)
        # where every finite rate is of class 2, the percentiles need no copy of those cells
        rated = q if n_rated == n_finite else q[(c == 2) & np.isfinite(q)]
        out["percentiles"] = list(zip(ps, percentiles(rated, ps)))
    dry = int(class_counts[1])
    for (name, rate), below in zip(rates, rate_counts):
        k = dry + int(below)
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
        text += (f" Given the parameter distributions, {format_area(facts['pf10_m2'])} "
                 f"({_pct(facts['pf10_share'])}) has a probability of failure P_f of 0.1 or more "
                 f"and {format_area(facts['pf_m2'])} ({_pct(facts['pf_share'])}) of 0.5 or more.")
    return text



# ---------------------------------------------------------------------------
# Text helpers
# ---------------------------------------------------------------------------


def rain_text(case: dict) -> str:
    """A rain case of the manifest in words."""
    if case.get("steady_mm_per_day") is not None:
        if case["steady_mm_per_day"] == 0:
            return "dry: no recharge (0 mm/day), the soil drained"
        return f"steady recharge {case['steady_mm_per_day']:g} mm/day"
    total = case["storm_mm_per_h"] * case["duration_h"]
    storm = f"storm of {case['storm_mm_per_h']:g} mm/h for {case['duration_h']:g} h ({total:g} mm)"
    if case.get("antecedent_mm_per_day") is not None:
        return (f"{storm}, starting from the steady water table of "
                f"{case['antecedent_mm_per_day']:g} mm/day of background recharge (shallower in "
                f"hollows than on spurs)")
    return f"{storm}, water table {case['water_table_depth_m']:g} m below the surface before it"


def case_origin(case: dict) -> str:
    """The return period and source of a rain case in words ("" when the scenario gives neither).

    Examples
    --------
    >>> case_origin({"return_period_years": 100.0, "source": "design-storm table"})
    'return period 100 years; design-storm table'
    """
    parts = []
    if case.get("return_period_years") is not None:
        parts.append(f"return period {case['return_period_years']:g} years")
    if case.get("source"):
        parts.append(str(case["source"]))
    return "; ".join(parts)


def coordinate(value) -> str:
    """A map coordinate in whole units, digits grouped by thin spaces (no commas, which read
    as separators between the easting and the northing).

    Examples
    --------
    >>> coordinate(5101940.4) == "5\u2009101\u2009940"
    True
    """
    if value is None or value != value:
        return "—"
    return f"{value:,.0f}".replace(",", "\u2009")


def _central(record) -> float | None:
    """The central value of a soil parameter of the manifest (a number or a distribution)."""
    if record is None:
        return None
    if not isinstance(record, dict):
        return float(record)
    kind = record["distribution"]
    if kind == "uniform":
        return 0.5 * (record["low"] + record["high"])
    return float(record["mean"] if kind == "normal" else record["median"])


def storm_note(cases, facts_by_case, soil) -> str:
    """Why a storm case fails less ground than a steady case, when one does ("" otherwise).

    The steady case sets the water table that a long wet spell builds from the whole upslope
    catchment; a storm adds only the pressure that diffuses down from the surface in its
    duration, a depth of about sqrt(4 D0 T) (Iverson 2000; docs/methods.md, "Storm response
    (Iverson 2000)"), on top of the water table it starts from.

    Examples
    --------
    >>> cases = [{"name": "wet", "steady_mm_per_day": 40.0},
    ...          {"name": "storm", "storm_mm_per_h": 20.0, "duration_h": 12.0,
    ...           "antecedent_mm_per_day": 5.0}]
    >>> facts = {"wet": {"fail_share": 0.2}, "storm": {"fail_share": 0.05}}
    >>> soil = {"units": [{"diffusivity_m2_per_s": 1e-5, "depth_m": 1.2,
    ...                    "conductivity_m_per_day": 1.0}]}
    >>> text = storm_note(cases, facts, soil)
    >>> "1.31 m" in text, "I/K = 0.48" in text
    (True, True)
    """
    import math

    steady = [c for c in cases if c.get("steady_mm_per_day") is not None
              and facts_by_case.get(c["name"]) is not None]
    out = []
    units = (soil or {}).get("units") or []
    d0 = [v for v in (_central(u.get("diffusivity_m2_per_s")) for u in units) if v]
    depth = [v for v in (_central(u.get("depth_m")) for u in units) if v]
    k = [v for v in (_central(u.get("conductivity_m_per_day")) for u in units) if v]
    for c in cases:
        f = facts_by_case.get(c["name"])
        if c.get("storm_mm_per_h") is None or f is None or not steady:
            continue
        wetter = max(steady, key=lambda s: facts_by_case[s["name"]]["fail_share"])
        if facts_by_case[wetter["name"]]["fail_share"] <= f["fail_share"]:
            continue
        t_s = c["duration_h"] * 3600.0
        reach = sorted({math.sqrt(4.0 * d * t_s) for d in d0})
        reach_text = (f"{reach[0]:.2f} m" if len(reach) == 1 or reach[-1] - reach[0] < 0.005
                      else f"{reach[0]:.2f}-{reach[-1]:.2f} m") if reach else "a short way"
        depth_text = (f"{min(depth):.2g}-{max(depth):.2g} m" if depth and max(depth) > min(depth)
                      else f"{depth[0]:.2g} m" if depth else "the soil depth")
        start = (f"the steady water table of {c['antecedent_mm_per_day']:g} mm/day of background "
                 f"recharge, less than the {wetter['steady_mm_per_day']:g} mm/day of “"
                 f"{wetter['name']}”" if c.get("antecedent_mm_per_day") is not None else
                 f"a water table {c['water_table_depth_m']:g} m below the surface everywhere")
        i_m_per_day = c["storm_mm_per_h"] * 24.0 / 1000.0
        ratios = sorted({min(i_m_per_day, kk) / kk for kk in k})
        ratio_text = "" if not ratios else (
            "; the rise scales with the storm's intensity over the saturated conductivity, here "
            + (f"I/K = {ratios[0]:.2g}" if ratios[-1] - ratios[0] < 0.005
               else f"I/K = {ratios[0]:.2g}-{ratios[-1]:.2g}") + " (1 at most: rain beyond K runs off)")
        out.append(
            f"the storm “{c['name']}” fails {_pct(f['fail_share'])} of the computed area, less "
            f"than the steady case “{wetter['name']}” "
            f"({_pct(facts_by_case[wetter['name']]['fail_share'])}). That is what the model "
            "predicts, not an error: a steady case is the water table a long wet spell builds "
            "from the whole catchment upslope, while a storm adds only the pressure that "
            f"diffuses down from the surface: in its {c['duration_h']:g} h it reaches about "
            f"√(4 D₀ T) = {reach_text} at the soils' diffusivity (soil depths {depth_text})"
            f"{ratio_text}; and it starts from {start} (Iverson 2000; docs/methods.md, “Storm "
            "response (Iverson 2000)”). A longer or more intense storm, a wetter start or a "
            "more diffusive soil brings the storm closer to the steady case.")
    return " ".join(s[0].upper() + s[1:] for s in out)


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
    title = product_title(entry["key"])
    return f"Map: {title}" + (f", rain case {entry['rain']}" if entry.get("rain") else "")


def _units_text(units) -> str:
    return "dimensionless" if units == "1" else units


def _map_caption(ctx, entry) -> str:
    title = product_title(entry["key"])
    m = ctx.map_of(entry["key"], entry.get("rain"))
    file = f" Map file: {m.entry['path']}; raster: {entry['path']}." if m else ""
    return f"{title} ({_units_text(entry['units'])}).{file}"
