"""The sections of the report, in report order.

Each builder takes the :class:`~slopescreen.report.blocks.ReportContext`
and returns a :class:`~slopescreen.report.blocks.Section` (or None when the
run has nothing for it): what fails where, each rain case, critical
recharge, terrain, inputs and parameters, methods and references, products
and provenance. The sections of the optional stages are in
:mod:`slopescreen.report.stages`.
"""

from __future__ import annotations


from .blocks import Block, Section, bullets, details, figure, note, para, table
from ..products import title as product_title
from .stages import STAGE_SECTIONS
from .summaries import (
    NBSP, PROPERTY_UNITS, _map_alt, _map_caption, _pct, _units_text, case_origin, coordinate,
    describe_case, format_area, parameter_text, rain_text, storm_note,
)

# ---------------------------------------------------------------------------
# Sections
# ---------------------------------------------------------------------------


def _rain_cases(ctx):
    return ctx.manifest.get("rain") or []


def _glance(ctx, facts_by_case, terrain=None):
    blocks = []
    cases = _rain_cases(ctx)
    if not cases or not any(facts_by_case.values()):
        blocks.append(para("This run computed terrain products only (no [soil] and [[rain]] "
                           "sections), so it says nothing yet about where slopes can fail."))
        blocks.extend(_changes_line(ctx, terrain))
        return Section("glance", "What fails where", blocks)
    rows = []
    sampled = False
    for case in cases:
        f = facts_by_case.get(case["name"])
        if f is None:
            continue
        sampled = sampled or f["pf_m2"] is not None
        rows.append([case["name"], rain_text(case), case_origin(case) or "—",
                     format_area(f["fail_m2"]), _pct(f["fail_share"])]
                    + ([] if f["pf_m2"] is None and not sampled else
                       ["not computed" if f["pf10_m2"] is None else
                        f"{format_area(f['pf10_m2'])} ({_pct(f['pf10_share'])})",
                        "not computed" if f["pf_m2"] is None else
                        f"{format_area(f['pf_m2'])} ({_pct(f['pf_share'])})"]))
    header = ["rain case", "rain", "return period, source", "area FS < 1", "share"]
    if sampled:
        header += ["area P_f ≥ 0.1 (share)", "area P_f ≥ 0.5 (share)"]
        rows = [r + ["not computed", "not computed"] if len(r) < len(header) else r for r in rows]
    numeric = [False, False, False, True, True] + [True] * (len(header) - 5)
    if all(r[2] == "—" for r in rows):          # no case says where it comes from
        header, numeric = header[:2] + header[3:], numeric[:2] + numeric[3:]
        rows = [r[:2] + r[3:] for r in rows]
    blocks.append(table("Area that fails (FS below 1)" + (" and area by probability of failure P_f"
                                                          if sampled else "") + ", per rain case",
                        header, rows, numeric))
    ov = ctx.overview
    if ov is not None:
        blocks.append(figure(ov["png"], f"Map: overview of the factor of safety under {ov['case']}",
                             "The worst places under the rain case that fails the most ground: "
                             + ("the least stable failing clusters." if ov["kind"] == "cluster"
                                else "the largest connected patches below FS 1.")
                             + " Each rain case has its full maps below.", css="overview"))
        if ov["places"]:
            blocks.append(table(
                f"Worst places under “{ov['case']}”",
                ["place", "what", "least FS", "area", "easting", "northing"],
                [[str(i), f"cluster {p['cluster']}" if "cluster" in p else "patch below FS 1",
                  f"{p['fs']:.2f}", format_area(p["area_m2"]), coordinate(p["easting"]),
                  coordinate(p["northing"])] for i, p in enumerate(ov["places"], start=1)],
                [True, False, True, True, True, True]))
    corridor = ctx.tables.get("corridor_segments") or []
    for case in cases:
        f = facts_by_case.get(case["name"])
        if f is None:
            continue
        blocks.append(para(describe_case(case["name"], rain_text(case), f)))
        mine = [r for r in corridor if r["rain"] == case["name"]]
        if mine:
            from .corridor import corridor_sentence

            blocks.append(para(corridor_sentence(case["name"], mine)))
    scores = ctx.tables.get("inventory_scores")
    if scores:
        from .inventory import agreement_sentence

        sentence = agreement_sentence(scores)
        if sentence:
            blocks.append(para(sentence))
    explained = storm_note(cases, facts_by_case, ctx.manifest.get("soil"))
    if explained:
        blocks.append(note(explained, lead="Why a storm can fail less ground than a steady case:"))
    blocks.append(para("FS is the infinite-slope factor of safety at the median of every soil "
                       "parameter; P_f is the probability that FS < 1 given the stated parameter "
                       "distributions, cell by cell: P_f ≥ 0.5 is close to FS < 1 at the median, "
                       "P_f ≥ 0.1 adds the ground where failure is unlikely but not remote. "
                       "Shares are of the area where the model was computed."))
    blocks.extend(_changes_line(ctx, terrain))
    return Section("glance", "What fails where", blocks)


def _changes_line(ctx, terrain):
    """One line on the first screen: how many changes of method touch this run (the list is
    in the methods section)."""
    from .changes import PREVIOUS_RELEASE

    found = _changes_blocks(ctx, terrain)
    n = len(found[1].items) if found else 0
    if not n:
        return []
    return [para(f"{n} change{'s' if n > 1 else ''} of method since slopescreen "
                 f"{PREVIOUS_RELEASE} touch{'' if n > 1 else 'es'} this run, so its numbers "
                 "differ from a run of that release on the same inputs; they are listed under "
                 "“Methods and assumptions”.", lead="Changes:")]


def _changes_blocks(ctx, terrain):
    """Why the numbers differ from the previous release: the changes of method that touch this run."""
    from .changes import PREVIOUS_RELEASE, changes_for

    edge = None if terrain is None else terrain.get("edge_cells")
    found = changes_for(ctx.manifest, edge_cells=edge)
    if not found:
        return []
    return [para("these changes of method touch this run, so its numbers differ from a run of "
                 f"slopescreen {PREVIOUS_RELEASE} on the same inputs (in brackets, the section "
                 "of docs/methods.md that explains each; docs/migration.md lists them all).",
                 lead=f"Changes since slopescreen {PREVIOUS_RELEASE}:"),
            bullets([f"{text} ({change.section})" for change, text in found])]


def _case_sections(ctx, figures):
    out = []
    flags_text = {1: "pressure head at its cap (saturated to the surface)",
                  2: "rain above the saturated conductivity (excess ran off)",
                  4: "least FS late compared with A/D₀ (short-time solution doubtful)"}
    for case in _rain_cases(ctx):
        name = case["name"]
        fig = figures.cases.get(name)
        f = None if fig is None else fig.facts
        origin = case_origin(case)
        blocks = [para(rain_text(case) + (f" ({origin})" if origin else ""), lead="Rain:")]
        if fig is not None:
            rows = [[label, format_area(a), _pct(s)] for label, a, s in fig.bands]
            if f["pf_m2"] is not None:
                rows.append(["probability of failure P_f ≥ 0.1 (any FS class)",
                             format_area(f["pf10_m2"]), _pct(f["pf10_share"])])
                rows.append(["probability of failure P_f ≥ 0.5 (any FS class)",
                             format_area(f["pf_m2"]), _pct(f["pf_share"])])
            blocks.append(table(f"Area by factor-of-safety class (breaks of common screening "
                                f"practice), “{name}”",
                                ["factor of safety", "area", "share of the computed area"], rows,
                                [False, True, True]))
        if fig is not None and fig.flag_shares is not None:
            rows = [[flags_text[bit], _pct(share)] for bit, share in fig.flag_shares]
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


def _recharge_section(ctx, dist):
    q_e = ctx.product("critical_recharge")
    if q_e is None or dist is None:
        return None
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
        blocks.append(table("Steady rain needed to fail, where a rate applies (mm/day)",
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
    return Section("recharge", "Steady rain needed to fail (critical recharge)", blocks)


def _terrain_section(ctx, percentiles):
    blocks = []
    for key in ("slope", "specific_catchment_area"):
        e = ctx.product(key)
        if e is None:
            continue
        p = percentiles.get(key)
        if p is not None:
            blocks.append(para(f"10th, 50th and 90th percentiles: {p[0]:.3g}, {p[1]:.3g} and "
                               f"{p[2]:.3g}{NBSP}{e['units']}.", lead=product_title(key) + ":"))
        m = ctx.map_of(key)
        if m is not None:
            blocks.append(figure(m.png, _map_alt(e), _map_caption(ctx, e)))
    return Section("terrain", "Terrain", blocks) if blocks else None


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
    ] + ([["soil depth measured", DEPTH_MEASURED_TEXT[_depth_measured(m)]]] if m.get("soil")
         else []))]
    soil = m.get("soil")
    if soil:
        units = soil["units"]
        depth_title = {"slope_normal": "Soil thickness normal to the slope H"}.get(
            _depth_measured(m), PROPERTY_UNITS["depth_m"][0])
        for first in range(0, len(units), 3):
            part = units[first:first + 3]
            header = ["property (unit)"] + [f"unit {u['code']}: {u['label']}" for u in part]
            rows = [[f"{depth_title if key == 'depth_m' else title} ({unit_})"]
                    + [parameter_text(u.get(key), unit_) for u in part]
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
    ro = m.get("runout_settings")
    if ro:
        angle = ro.get("angle_of_reach_deg")
        rows = [["angle of reach", f"{angle:g}° for every source" if angle is not None else
                 "from each source's volume (Corominas 1996 debris-flow relation, coefficients "
                 "from memory), 5–45°"],
                ["sources", "failing clusters" if m.get("cluster_search") else (
                    f"patches with P_f ≥ {ro['source_failure_probability']:g}"
                    if ro.get("source_failure_probability") else "patches with FS < 1")],
                ["at a corridor strip", "the path runs on" if ro.get("continue_past_corridor")
                 else "the path stops (a road bench interrupts runout)"]]
        blocks.append(table("Runout", ["setting", "value"], rows))
    co = m.get("corridor")
    if co:
        rows = [["centreline", co["centreline"]], ["segment length", f"{co['segment_m']:g}{NBSP}m"],
                ["strip half width", f"{co['half_width_m']:g}{NBSP}m"],
                ["chainage at the first vertex", f"{co['start_chainage_m']:g}{NBSP}m"],
                ["culverts", co.get("culverts") or "none given"],
                ["engineered ground", co.get("engineered_ground") or "none given"]]
        if co.get("engineered_soil_unit") is not None:
            rows.append(["soil unit of the engineered ground", str(co["engineered_soil_unit"])])
        blocks.append(table("Corridor", ["setting", "value"], rows))
    unc = m.get("uncertainty")
    if unc:
        blocks.append(table("Uncertainty", ["setting", "value"], [
            ["method", "Monte Carlo" if unc.get("method") == "monte_carlo" else
             "first-order second-moment (FOSM)"],
            ["samples per cell", unc.get("samples")], ["seed", unc.get("seed")],
            ["independent draws per", unc.get("correlation")]]))
    return Section("inputs", "Inputs and parameters", blocks)


DEPTH_MEASURED_TEXT = {
    "vertical": "vertically (z, as in a pit); used as given",
    "slope_normal": "normal to the slope (H, as by a probe); every model uses the vertical "
                    "depth z = H / cos θ of each cell",
}
"""The report's words for each value of ``[soil] depth_measured``."""


def _depth_measured(manifest):
    """``[soil] depth_measured`` of a manifest (runs recorded before the key: vertical)."""
    return (manifest.get("soil") or {}).get("depth_measured", "vertical")


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


def _methods_section(ctx, terrain=None):
    conv = ctx.manifest.get("conventions") or {}
    blocks = [table("Methods", ["step", "method"], [list(m) for m in METHODS])]
    changes = _changes_blocks(ctx, terrain)
    if changes:
        blocks.append(details(f"Changes of method since the previous release that touch this "
                              f"run ({len(changes[1].items)})", changes))
    if conv:
        blocks.append(table("Conventions of this run", ["item", "convention"],
                            [[k.replace("_", " "), v] for k, v in conv.items()]))
    blocks.append(bullets([
        "Assumptions: the failure plane is parallel to the ground and long compared with its depth; "
        "seepage is parallel to the slope; one bulk unit weight above and below the water table; "
        "suction, bedrock flow and seismic loading are ignored.",
        "Factor-of-safety classes: fails (below 1), thin margin (1 to 1.3), some margin (1.3 to "
        "1.5) and ample margin (1.5 and above); the breaks are those of common screening "
        "practice, not design criteria, and the names are this report's.",
        "The probability of failure is per cell and conditional on the stated distributions; it is "
        "not the probability that some landslide occurs in an area, and it says nothing about timing.",
    ]))
    blocks.append(Block("list", caption="References", items=list(REFERENCES)))
    return Section("methods", "Methods and assumptions", blocks)


def _products_section(ctx):
    products = list(ctx.manifest.get("products", []))
    if not any(p["key"] == "report" for p in products):
        products.append({"key": "report", "path": "report.html", "kind": "html", "units": "n/a"})
    groups: dict = {}
    for p in products:     # one row per product: its files, kinds and rain cases together
        groups.setdefault(p["key"], []).append(p)
    rows = []
    for key, entries in groups.items():
        name = "Maps (one per mapped product and rain case)" if key == "map" else (
            "Report (this file)" if key == "report" else product_title(key))
        rains = list(dict.fromkeys(e.get("rain") for e in entries if e.get("rain")))
        kinds = list(dict.fromkeys(e["kind"] for e in entries))
        if key == "map":
            files = f"map_<product>[_<rain case>].png ({len(entries)} maps)"
        else:
            files = ", ".join(_file_pattern(key, [e for e in entries if e["kind"] == k])
                              for k in kinds)
        rows.append([name, ", ".join(rains) if rains else "—", files, ", ".join(kinds),
                     "units of each product" if key == "map" else _units_text(entries[0]["units"])])
    return Section("products", "Products of this run", [
        para("Every product is listed in manifest.json beside this report, with its SHA-256; "
             "rasters are GeoTIFF on the DEM grid with the caution in their metadata, each "
             "styled one with its SLD style (kind sld). A dash in the rain-case column marks a "
             "product that does not depend on rain; <rain case> in a file name stands for the "
             "case's name in lower case with dashes (“wet season” → wet-season)."),
        table("Products", ["product", "rain cases", "files", "kinds", "units"], rows)])


def _file_pattern(key, entries) -> str:
    """The files of one product and kind: ``KEY_<rain case>.EXT`` when one per rain case."""
    from ..scenario import slugify

    if len(entries) > 1 and all(e.get("rain") for e in entries):
        name = entries[0]["path"]
        stem = f"{key}_{slugify(entries[0]['rain'])}"
        if name.startswith(stem) and all(
                e["path"] == f"{key}_{slugify(e['rain'])}{name[len(stem):]}" for e in entries):
            return f"{key}_<rain case>{name[len(stem):]}"
    return ", ".join(e["path"] for e in entries)


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
        blocks.append(details(f"Run time per stage ({sum(times.values()):.1f} s in all)", [
            table("Run time per stage (s)", ["stage", "seconds"], rows, [False, True]),
            para("The time to write this report itself is recorded in manifest.json.")]))
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
