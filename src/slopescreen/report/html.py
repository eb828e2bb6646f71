"""The self-contained HTML report of a run.

:func:`render_report` turns a run's manifest, its product rasters and its
maps into one HTML file: images are embedded as base64 data URIs, the CSS is
inline and nothing is fetched from the network. The one script is our own
pan-and-zoom map (``templates/explorer.js``, inlined, with its layers as JSON
in the page: :mod:`slopescreen.report.explorer_layers`); a report without
map data has no script. Every
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

The parts live in modules of their own: the blocks and the context in
:mod:`~slopescreen.report.blocks`, the summaries and text helpers in
:mod:`~slopescreen.report.summaries`, the sections in
:mod:`~slopescreen.report.sections` and :mod:`~slopescreen.report.stages`.
The public names of those modules stay importable from this one.
"""

from __future__ import annotations

from .blocks import Block, MapImage, ReportContext, Section, data_uri, para
from .cautions import CAUTIONS, SHORT
from .sections import (
    _case_sections, _glance, _inputs_section, _methods_section, _products_section,
    _provenance_section, _recharge_section, _terrain_section,
)
from .stages import STAGE_SECTIONS, StageSection, _stage_sections
from .summaries import (
    band_areas, case_facts, describe_case, format_area, parameter_text, rain_text,
    recharge_distribution,
)

__all__ = [
    "Block", "Section", "StageSection", "STAGE_SECTIONS", "ReportContext", "MapImage",
    "band_areas", "case_facts", "recharge_distribution", "describe_case", "render_report",
    "data_uri", "format_area", "parameter_text", "rain_text",
]


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
        HTML5 text (UTF-8 when written). Images are data URIs; no external
        resource. With ``ctx.explorer`` the page holds the interactive map's
        script and data (inline); without, no script.

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
    from .figures import figures_from_products

    figures = ctx.figures if ctx.figures is not None else figures_from_products(ctx)
    facts = {name: fig.facts for name, fig in figures.cases.items()}
    glance = _glance(ctx, facts, figures.terrain)
    body = []
    cases = _case_sections(ctx, figures)
    if cases:
        body.append(Section("cases", "Maps and tables by rain case",
                            [para("Each rain case is computed on its own; the maps show the same "
                                  "ground under each case.")]))
        body.extend(cases)
    for part in (_recharge_section(ctx, figures.recharge), _terrain_section(ctx, figures.terrain)):
        if part is not None:
            body.append(part)
    body.extend(_stage_sections(ctx))
    body.extend([_inputs_section(ctx), _methods_section(ctx, figures.terrain)])
    appendix = [_products_section(ctx), _provenance_section(ctx)]
    for letter, part in zip("AB", appendix):
        part.title = f"Appendix {letter}: {part.title}"
    body.extend(appendix)
    toc = contents([glance] + body)
    if ctx.explorer:
        toc.insert(1, ("explorer", "Pan-and-zoom map", []))
    m = ctx.manifest
    template = _environment().get_template("report.html.j2")
    created = str(m.get("created", "")).replace("T", " ").replace("+00:00", " UTC")
    return template.render(title=m.get("title") or "slopescreen run", manifest=m, short=SHORT,
                           cautions=tuple(m.get("cautions") or CAUTIONS), glance=glance,
                           sections=body, toc=toc,
                           project=project_rows(m), created=created, version=m.get("version", ""),
                           explorer=ctx.explorer,
                           explorer_js=_explorer_script() if ctx.explorer else "")


def contents(sections) -> list:
    """The contents list: ``(id, title, [(id, title), ...])`` per level-2 section, its
    level-3 sections nested under it (so that only the level-2 entries take numbers).

    Examples
    --------
    >>> toc = contents([Section("a", "A"), Section("b", "B", level=3), Section("c", "C")])
    >>> [(i, t, [x for x, _ in sub]) for i, t, sub in toc]
    [('a', 'A', ['b']), ('c', 'C', [])]
    """
    out = []
    for s in sections:
        if s.level > 2 and out:
            out[-1][2].append((s.id, s.title))
        else:
            out.append((s.id, s.title, []))
    return out


PROJECT_FIELDS = (("name", "Project"), ("number", "Project number"),
                  ("prepared_by", "Prepared by"), ("checked_by", "Checked by"),
                  ("data_date", "Date of the data"), ("notes", "Notes"))
"""The ``[project]`` keys in the report's memo block, in order, with their labels."""


def project_rows(manifest) -> list:
    """(label, value) rows of the memo block: the ``[project]`` keys given, then the run.

    Examples
    --------
    >>> project_rows({"project": {"name": "Ridge road"}, "created": "2026-01-02T03:04:05+00:00"})
    [('Project', 'Ridge road'), ('Run started', '2026-01-02 03:04:05 UTC')]
    """
    given = manifest.get("project") or {}
    rows = [(label, str(given[key])) for key, label in PROJECT_FIELDS if given.get(key)]
    if manifest.get("created"):
        rows.append(("Run started",
                     str(manifest["created"]).replace("T", " ").replace("+00:00", " UTC")))
    return rows


def _explorer_script():
    """The interactive map's script (our own file in the package), safe to inline.

    Returns
    -------
    markupsafe.Markup
        The script text; it never holds ``</`` (checked), so it cannot close
        its ``<script>`` element.
    """
    from importlib.resources import files

    from markupsafe import Markup

    text = files("slopescreen.report").joinpath("templates", "explorer.js").read_text("utf-8")
    if "</" in text or "<!--" in text:
        raise ValueError("explorer.js must not hold '</' or '<!--' (it is inlined in a <script>)")
    return Markup(text)
