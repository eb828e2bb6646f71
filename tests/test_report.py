"""The HTML report and the run around it: summaries, escaping, self-containment, manifest
entries, atomic writing, progress on stderr.

Outside references: areas are counted cell by cell from the GeoTIFF products with rasterio
(read back independently of the report code); the screening bands of common practice
(FS below 1, 1-1.3, 1.3-1.5, 1.5 and above); the defining property of the critical recharge
(Montgomery & Dietrich 1994: a steady case fails exactly where its recharge exceeds the
critical recharge, or where the cell fails even when dry); the HTML is parsed with the
standard library's html.parser and every embedded image is decoded with Pillow.
"""

import base64
import html as htmllib
import io
import json
from html.parser import HTMLParser

import numpy as np
import pytest
from PIL import Image

from conftest import write_line_geojson, write_tif
from slopescreen import pipeline
from slopescreen.cli import StageProgress, main
from slopescreen.grid import read_back
from slopescreen.report import html as report_html
from slopescreen.report import maps
from slopescreen.report.cautions import CAUTIONS, SHORT
from slopescreen.scenario import load_scenario

TITLE = "Ridge <script>alert(\"t\")</script> & 'q' $x$"
LABEL = "<b>\"colluvium\"</b> & <script>x</script>"

SCENARIO = f"""
title = {json.dumps(TITLE)}
dem = "dem.tif"
output = "out"

[soil]
[soil.units.1]
label = {json.dumps(LABEL)}
depth_m = {{ uniform = [0.8, 1.6] }}
cohesion_kpa = 1.0
root_cohesion_kpa = {{ uniform = [0.0, 3.0] }}
friction_deg = {{ normal = [33.0, 2.0] }}
unit_weight_kn_m3 = 18.0
conductivity_m_per_day = 2.0
diffusivity_m2_per_s = 5.0e-5

[[rain]]
name = "steady <i>20</i>"
steady_mm_per_day = 20

[[rain]]
name = "storm"
storm_mm_per_h = 25
duration_h = 6
water_table_depth_m = 0.6

[uncertainty]
samples = 40
seed = 11

[corridor]
centreline = "road.geojson"

[inventory]
landslides = "slides.geojson"
score_part = "whole"                  # the polygon is a scar
"""


def hollow_dem(rows=36, cols=44, cell=5.0):
    """A slope falling south at 0.6 with a convergent hollow down its middle (m)."""
    y = np.arange(rows)[:, None] * cell
    x = np.arange(cols)[None, :] * cell
    z = 300.0 - 0.6 * y - 5.0 * np.exp(-((x - 110.0) / 25.0) ** 2) * np.clip(y / 60.0, 0, 1)
    return z.astype(np.float32)


def write_case(folder, text=SCENARIO):
    write_tif(folder / "dem.tif", hollow_dem())
    # the road crosses the slope along row 24 of the DEM (5 m cells from 500000, 5100000)
    write_line_geojson(folder / "road.geojson", [[500004.0, 5099877.5], [500216.0, 5099877.5]])
    # one mapped scar in the hollow (cells 8-12 of columns 20-23)
    (folder / "slides.geojson").write_text(json.dumps({
        "type": "FeatureCollection",
        "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32633"}},
        "features": [{"type": "Feature", "properties": {}, "geometry": {"type": "Polygon",
                      "coordinates": [[[500100.0, 5099960.0], [500120.0, 5099960.0],
                                       [500120.0, 5099935.0], [500100.0, 5099935.0],
                                       [500100.0, 5099960.0]]]}}]}) + "\n")
    p = folder / "s.toml"
    p.write_text(text, encoding="utf-8")
    return p


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    path = write_case(folder)
    assert main(["-q", "run", str(path)]) == 0
    out = folder / "out"
    manifest = json.loads((out / "manifest.json").read_text())
    text = (out / "report.html").read_text(encoding="utf-8")
    return folder, out, manifest, text


class Tags(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags = []
        self.text = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data):
        self.text.append(data)


def parse(text):
    p = Tags()
    p.feed(text)
    return p


# ---------------------------------------------------------------------------
# Summaries on hand-made arrays
# ---------------------------------------------------------------------------


def test_format_area():
    def fa(a):
        return report_html.format_area(a).replace("\u00a0", " ")   # number and unit never split

    assert report_html.format_area(16.0) == "16\u00a0m²"
    assert fa(999.0) == "999 m²"
    assert fa(12_345.0) == "1.23 ha"
    assert fa(345_000.0) == "34.5 ha"
    assert fa(4.2e7) == "42.0 km²"


def test_band_areas_count_cells_per_band():
    fs = np.array([[0.5, 0.99, 1.0], [1.29, 1.3, 1.49], [1.5, 7.0, np.nan]])
    bands = report_html.band_areas(fs, 4.0)
    # bands of common practice; 8 cells with a value, each 4 m^2
    assert [(b, a) for b, a, _ in bands] == [("fails (FS < 1.0)", 8.0),
                                             ("thin margin (FS 1.0-1.3)", 8.0),
                                             ("some margin (FS 1.3-1.5)", 8.0),
                                             ("ample margin (FS >= 1.5)", 8.0)]
    assert sum(s for _, _, s in bands) == pytest.approx(1.0)


def test_case_facts_say_where():
    fs = np.array([[0.5, 0.5, 0.5, 2.0], [0.8, 2.0, np.nan, 2.0]])
    pf = np.array([[0.9, 0.6, 0.2, 0.0], [0.7, 0.0, np.nan, 0.0]])
    unit = np.array([[0, 0, 1, 1], [1, 1, -1, 1]])
    aspect = np.array([[0.0, 10.0, 350.0, 90.0], [180.0, 0.0, np.nan, 0.0]])
    slope = np.array([[30.0, 32.0, 34.0, 10.0], [36.0, 5.0, np.nan, 5.0]])
    f = report_html.case_facts(fs, cell_area_m2=25.0, pf=pf, slope_deg=slope, aspect_deg=aspect,
                               unit_index=unit, unit_labels=["A", "B"])
    assert f["computed_m2"] == 7 * 25.0 and f["fail_m2"] == 4 * 25.0
    assert f["fail_share"] == pytest.approx(4 / 7)
    assert f["pf_m2"] == 3 * 25.0                           # 0.9, 0.6, 0.7 exceed 0.5
    assert f["units"] == [("A", 0.5), ("B", 0.5)]
    assert f["aspects"][0] == ("north", 0.75)                # 0, 10 and 350 degrees are north
    assert f["aspects"][1] == ("south", 0.25)
    assert f["slope_p10"] == pytest.approx(np.percentile([30, 32, 34, 36], 10))
    text = report_html.describe_case("wet", "steady recharge 5 mm/day", f).replace("\u00a0", " ")
    assert "100 m²" in text and "57 %" in text and "facing north" in text


def test_case_facts_when_nothing_fails():
    f = report_html.case_facts(np.full((3, 3), 2.0), cell_area_m2=1.0)
    assert f["fail_m2"] == 0
    assert "no cell has a factor of safety below 1" in report_html.describe_case("x", "y", f)


def test_recharge_distribution():
    q = np.array([np.nan, 2.0, 5.0, 10.0, 40.0, np.nan])
    cls = np.array([1, 2, 2, 2, 2, 3])
    d = report_html.recharge_distribution(q, cls, 10.0, rates=[("wet", 6.0)])
    assert d["classes"] == [(1, 10.0, 1 / 6), (2, 40.0, 4 / 6), (3, 10.0, 1 / 6)]
    assert d["percentiles"][2] == (50, pytest.approx(7.5))
    # fails at 6 mm/day: the dry-failing cell plus q_cr = 2 and 5
    assert d["rates"] == [("wet", 6.0, 30.0, 0.5)]


def test_parameter_text_names_distribution_and_unit():
    t = report_html.parameter_text({"distribution": "normal", "mean": 34.0, "sd": 2.0,
                                    "truncated_to": [5e-324, 60.0]}, "degrees")
    assert t == "normal, mean 34 degrees, sd 2 degrees; truncated: above 0 to 60 degrees"
    assert report_html.parameter_text(1.5, "m") == "1.5 m (fixed)"
    assert report_html.parameter_text({"distribution": "uniform", "low": 1.0, "high": 2.0}, "m") \
        == "uniform, 1 to 2 m"


# ---------------------------------------------------------------------------
# A whole run
# ---------------------------------------------------------------------------


def test_manifest_lists_maps_and_report(run):
    folder, out, manifest, _ = run
    products = manifest["products"]
    for p in products:
        assert set(p) == {"key", "rain", "path", "kind", "units"}
        assert (out / p["path"]).is_file()
    shown = [(p["key"], p["rain"]) for p in products if p["key"] in maps.STYLES and p["kind"] == "raster"]
    mapped = [p for p in products if p["key"] == "map"]
    assert all(p["kind"] == "png" for p in mapped)
    assert len(mapped) == len(shown)                          # one map per product shown
    for p in mapped:
        key = p["path"][len("map_"):-len(".png")]
        assert any(key.startswith(k) for k, _ in shown)
        Image.open(out / p["path"]).verify()
    [report] = [p for p in products if p["key"] == "report"]
    assert report["kind"] == "html" and report["path"] == "report.html"
    assert manifest["not_run"] == []                            # every configured stage ran
    assert [p["path"] for p in products if p["key"] == "inventory_scores"] == [
        "inventory_scores.json"]
    assert not list(out.glob(".slopescreen-partial-*"))


def test_report_is_self_contained(run):
    _, out, _, text = run
    doc = parse(text)
    tags = [t for t, _ in doc.tags]
    assert "iframe" not in tags and "object" not in tags
    # the only scripts: the interactive map's data (JSON, not run) and its own inline code
    scripts = [a for t, a in doc.tags if t == "script"]
    assert scripts == [{"type": "application/json", "id": "ex-data"}, {}]
    assert "link" not in tags                                  # no external stylesheet
    images = [a for t, a in doc.tags if t == "img"]
    assert len(images) >= 6
    for attrs in images:
        src = attrs["src"]
        assert src.startswith("data:image/png;base64,")
        Image.open(io.BytesIO(base64.b64decode(src.split(",", 1)[1]))).verify()
        assert attrs.get("alt")
    for _, attrs in doc.tags:
        for name in ("href", "src", "action"):
            value = attrs.get(name, "")
            assert not value.startswith(("http:", "https:", "//", "file:")), value
    assert "url(" not in text                                  # no CSS fetch either


def test_user_strings_are_escaped(run):
    _, _, _, text = run
    # no user text opens a script: the two scripts are the map's data and code
    assert text.lower().count("<script") == 2
    assert '<script type="application/json" id="ex-data">' in text
    assert "<b>" not in text and "<i>" not in text
    data = text.split('<script type="application/json" id="ex-data">', 1)[1].split("</script>", 1)[0]
    assert "<" not in data and json.loads(data)["title"] == TITLE     # JSON escapes every '<' 
    # the entity forms of the HTML standard (quotes as numeric or named references)
    def escaped(s):
        return [htmllib.escape(s).replace("&quot;", q).replace("&#x27;", a)
                for q in ("&quot;", "&#34;") for a in ("&#x27;", "&#39;")]

    assert any(e in text for e in escaped(TITLE))
    assert any(e in text for e in escaped(LABEL))
    assert "steady &lt;i&gt;20&lt;/i&gt;" in text
    doc = parse(text)
    visible = "".join(doc.text)
    assert TITLE in visible and LABEL in visible                # shown as text, unchanged


def test_cautions_at_top_and_again_at_the_end(run):
    _, _, _, text = run
    for c in CAUTIONS:
        assert text.count(htmllib.escape(c)) >= 2, c
    first = text.index(htmllib.escape(CAUTIONS[0]))
    assert first < text.index("Maps and tables by rain case")
    assert text.index(htmllib.escape(SHORT)) < text.index("What fails where")


def test_report_areas_match_the_rasters(run):
    _, out, manifest, text = run
    cell = manifest["grid"]["dx_m"] * manifest["grid"]["dy_m"]
    for case in ("steady <i>20</i>", "storm"):
        [fs_e] = [p for p in manifest["products"] if p["key"] == "factor_of_safety" and p["rain"] == case and p["kind"] == "raster"]
        [pf_e] = [p for p in manifest["products"] if p["key"] == "failure_probability" and p["rain"] == case and p["kind"] == "raster"]
        fs = read_back(out / fs_e["path"])[0]
        pf = read_back(out / pf_e["path"])[0]
        below = np.sum(fs < 1.0) * cell                          # counted from the GeoTIFF
        likely = np.sum(pf >= 0.5) * cell
        possible = np.sum(pf.astype(np.float64) >= 0.1) * cell
        assert below > 0
        assert report_html.format_area(below) in text
        assert report_html.format_area(likely) in text
        assert report_html.format_area(possible) in text
    assert "What fails where" in text and "Area by factor-of-safety class" in text


def test_critical_recharge_agrees_with_steady_fs(run):
    # defining property (Montgomery & Dietrich 1994): at the same median parameters a steady
    # case fails where q exceeds q_cr, plus where the cell fails even when dry
    _, out, manifest, _ = run
    get = {(p["key"], p["rain"]): out / p["path"] for p in manifest["products"]
           if p["kind"] == "raster"}
    q = read_back(get[("critical_recharge", None)])[0]
    cls = read_back(get[("critical_recharge_class", None)])[0]
    fs = read_back(get[("factor_of_safety", "steady <i>20</i>")])[0]
    d = report_html.recharge_distribution(q, np.nan_to_num(cls).astype(int), 1.0,
                                          rates=[("steady", 20.0)])
    fails = int(np.sum(fs < 1.0))
    assert abs(d["rates"][0][2] - fails) <= max(1, 0.002 * fs.size)


def test_report_names_stages_that_did_not_run_and_provenance(run):
    folder, _, manifest, text = run
    assert "configures [corridor], but this stage did not run" not in text
    assert "configures [inventory], but this stage did not run" not in text
    assert "Agreement with mapped landslides</h2>" in text
    assert "Failure clusters</h2>" not in text                  # not configured, not shown
    assert manifest["scenario_sha256"] in text
    for digest in manifest["inputs_sha256"].values():
        assert digest in text
    assert "random seed" in text and ">11<" in text
    assert "Run time per stage" in text and "probability of failure: storm" in text
    assert "kN/m³" in text and "uniform, 0.8 to 1.6 m" in text


def test_a_configured_stage_that_cannot_run_is_named_with_its_reason(tmp_path, capsys):
    # a terrain-only scenario (no [soil], no [[rain]]) with an [inventory]: nothing to score
    write_case(tmp_path)
    (tmp_path / "t.toml").write_text('dem = "dem.tif"\noutput = "out"\n[inventory]\n'
                                     'landslides = "slides.geojson"\nscore_part = "whole"\n',
                                     encoding="utf-8")
    assert main(["run", str(tmp_path / "t.toml")]) == 0
    assert "skipped (the report says so)" in capsys.readouterr().err
    manifest = json.loads((tmp_path / "out" / "manifest.json").read_text())
    assert manifest["not_run"] == [{"section": "inventory", "reason": "the inventory stage needs "
                                    "a [soil] section and at least one [[rain]] case"}]
    text = (tmp_path / "out" / "report.html").read_text(encoding="utf-8")
    assert "configures [inventory], but this stage did not run" in text


def test_stage_section_appears_when_its_product_exists():
    # a later stage's product in the manifest brings its section; no "did not run" note
    fs = np.full((4, 5), 0.9, dtype=np.float32)
    manifest = {"title": "t", "version": "0", "scenario_sha256": "abc", "created": "now",
                "products": [{"key": "cluster_fs_bound", "rain": "r", "path": "b.tif", "kind": "raster",
                              "units": "1"}],
                "rain": [{"name": "r", "steady_mm_per_day": 5.0}], "not_run": []}
    png = maps.png_bytes(maps.map_figure(fs, "cluster_fs_bound", frame=maps.MapFrame((0, 5, 0, 4))))
    img = report_html.MapImage(entry={"key": "map", "rain": "r", "path": "map_b.png", "kind": "png",
                                      "units": "1"}, shows=manifest["products"][0], png=png)
    ctx = report_html.ReportContext(manifest=manifest, read=lambda e: fs, cell_area_m2=1.0, maps=[img])
    text = report_html.render_report(ctx)
    assert "Failure clusters</h2>" in text and "did not run" not in text
    assert text.count("data:image/png;base64,") == 1              # once, in the rain case's section
    assert "Failing clusters per rain case" in text


def test_failed_report_leaves_nothing_behind(tmp_path, monkeypatch):
    path = write_case(tmp_path, SCENARIO.replace("samples = 40", "samples = 4"))

    def broken(ctx):
        raise RuntimeError("report failed on purpose")

    monkeypatch.setattr(report_html, "render_report", broken)
    with pytest.raises(RuntimeError):
        pipeline.run(load_scenario(path))
    out = tmp_path / "out"
    # no product, no staging folder: only the hidden lock file
    assert sorted(p.name for p in out.iterdir()) == [".slopescreen.lock"]


# ---------------------------------------------------------------------------
# Progress and logging on stderr
# ---------------------------------------------------------------------------


def test_stage_progress_lines_and_bar():
    s = io.StringIO()
    p = StageProgress(s, bar=False)
    p.begin(["slope", "routing"])
    p("slope")
    p("routing")
    p("extra stage")                                            # a stage missing from the plan
    p.end()
    assert s.getvalue().splitlines() == ["  [1/2] slope", "  [2/2] routing", "  [3/3] extra stage"]
    s = io.StringIO()
    p = StageProgress(s, bar=True, tick_s=0.01)
    p.begin(["slope", "routing"])
    p("slope")
    p("routing")
    p.end()
    out = s.getvalue()
    assert "routing" in out and "2/2 stages" in out


def test_cli_shows_each_planned_stage_and_quiet_hides_them(tmp_path, capsys):
    path = write_case(tmp_path, SCENARIO.replace("samples = 40", "samples = 4"))
    assert main(["run", str(path)]) == 0
    err = capsys.readouterr().err
    plan = pipeline.planned_stages(load_scenario(path))
    lines = [ln for ln in err.splitlines() if ln.startswith("  [")]
    assert [ln.split("] ", 1)[1] for ln in lines] == plan       # the plan matches the run
    assert main(["-q", "run", str(path)]) == 0
    captured = capsys.readouterr()
    assert captured.err == "" and captured.out == ""


def test_verbose_logs_stage_times(tmp_path, capsys):
    path = write_case(tmp_path, SCENARIO.replace("samples = 40", "samples = 4"))
    assert main(["-v", "run", str(path)]) == 0
    err = capsys.readouterr().err
    assert "INFO slopescreen.pipeline: stage maps:" in err
    assert "INFO slopescreen.pipeline: stage report:" in err


def test_bad_input_prints_one_line_without_quiet(tmp_path, capsys):
    write_tif(tmp_path / "dem.tif", np.full((5, 5), -9999.0, np.float32), nodata=-9999.0)
    p = tmp_path / "s.toml"
    p.write_text('dem = "dem.tif"\noutput = "out"\n')
    assert main(["run", str(p)]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "dem.tif" in err


def test_size_resolved_answers_are_explained_with_their_proof_status():
    fs = np.full((4, 5), 0.9, dtype=np.float32)
    manifest = {"title": "t", "version": "0", "scenario_sha256": "abc", "created": "now",
                "products": [{"key": "clusters", "rain": None, "path": "clusters.gpkg",
                              "kind": "vector", "units": "attributes"}],
                "rain": [{"name": "r", "steady_mm_per_day": 5.0}], "not_run": []}
    row = {"rain": "r", "band_min_m2": 100.0, "band_max_m2": 400.0, "fs": 0.81,
           "lower_bound": 0.79, "proven": False, "method": "time_limit", "area_m2": 300.0,
           "failure_probability": 0.7}
    rows = [row, row | {"fs": 0.85, "lower_bound": 0.85, "proven": True, "method": "cut",
                        "centroid_easting": 500012.4, "centroid_northing": 5099987.6}]
    ctx = report_html.ReportContext(manifest=manifest, read=lambda e: fs, cell_area_m2=1.0,
                                    maps=[], tables={"clusters": [], "size_resolved": rows})
    text = report_html.render_report(ctx)
    assert "By size:" in text and "Not proven: 1 of 2 answers" in text
    assert "no (time_limit)" in text and "0.790" in text
    # whole units with thin spaces, E and N named: "500,012, 5,099,988" read as four numbers
    assert "centre" in text and "500\u2009012 E, 5\u2009099\u2009988 N" in text


def test_compass_sectors_counted_in_place_match_the_floor_formula():
    # Definition of the 45-degree sectors (the first centred on north):
    # floor(((a + 22.5) mod 360) / 45), in float64; checked at every edge and beside it.
    from slopescreen.report._count_kernels import case_counts

    rng = np.random.default_rng(3)
    a = rng.uniform(0, 360, 50_000).astype(np.float32)
    edges = np.array([22.5 + 45 * k for k in range(8)], dtype=np.float32)
    a[:16] = np.concatenate([edges, np.nextafter(edges, np.float32(0))])
    a[16], a[17], a[18] = np.nan, 0.0, np.float32(359.99997)
    fin = a[np.isfinite(a)].astype(np.float64)
    expected = np.bincount(np.floor(((fin + 22.5) % 360.0) / 45.0).astype(np.int64), minlength=8)
    # every cell fails (FS 0.5), so the sectors of the failing cells are those of every cell
    _, _, sectors = case_counts(np.full(a.shape, 0.5, dtype=np.float32), aspect_deg=a)
    np.testing.assert_array_equal(sectors, expected)


def test_one_pass_counts_equal_the_numpy_masks_they_replace():
    # Oracle: the plain numpy expressions in float64 (each condition its own mask), on float32
    # products with NaN, values exactly at the thresholds and one float32 ulp on either side.
    from slopescreen.report._count_kernels import band_counts, case_counts, recharge_counts

    rng = np.random.default_rng(11)
    n = 20_000
    fs = rng.uniform(0.3, 2.0, n).astype(np.float32)
    edges = np.array([1.0, 1.3, 1.5], dtype=np.float32)
    fs[:9] = np.concatenate([edges, np.nextafter(edges, np.float32(0)),
                             np.nextafter(edges, np.float32(9))])
    fs[rng.random(n) < 0.05] = np.nan
    pf = rng.uniform(0, 1, n).astype(np.float32)
    pf[:3] = [0.5, np.nextafter(np.float32(0.5), np.float32(1)), np.nan]
    wet = rng.uniform(0.9, 1.0, n).astype(np.float32)
    wet[rng.random(n) < 0.02] = np.nan
    aspect = rng.uniform(0, 360, n).astype(np.float32)
    unit = rng.integers(-1, 4, n).astype(np.int8)     # -1 and 3 lie outside a 3-row table
    f64 = fs.astype(np.float64)
    has, fail = np.isfinite(f64), np.isfinite(f64) & (f64 < 1.0)
    out, units, sectors = case_counts(fs, pf=pf, wetness=wet, aspect_deg=aspect,
                                      unit_index=unit, n_units=3)
    p64 = pf.astype(np.float64)
    assert out.tolist() == [has.sum(), fail.sum(), np.isfinite(p64).sum(), (p64 >= 0.5).sum(),
                            (fail & (wet.astype(np.float64) >= 0.999)).sum(), (p64 >= 0.1).sum()]
    assert units.tolist() == [int((fail & (unit == u)).sum()) for u in range(3)]
    a64 = aspect.astype(np.float64)[fail]
    assert sectors.tolist() == np.bincount(np.floor(((a64 + 22.5) % 360.0) / 45.0)
                                           .astype(np.int64), minlength=8).tolist()
    bands = np.digitize(f64[has], [1.0, 1.3, 1.5], right=False)   # lower bound in the band
    assert band_counts(fs, [1.0, 1.3, 1.5]).tolist() == np.bincount(bands, minlength=4).tolist()
    q = rng.uniform(0, 50, n).astype(np.float32)
    cls = rng.integers(0, 4, n).astype(np.int8)
    q[cls != 2] = np.nan
    q[:2] = [np.float32(6.0), np.nextafter(np.float32(6.0), np.float32(0))]
    cls[:2] = 2
    classes, below, rated = recharge_counts(q, cls, [6.0, 20.0])
    q64 = q.astype(np.float64)
    assert classes.tolist() == [int((cls == c).sum()) for c in range(4)]
    assert below.tolist() == [int(((cls == 2) & (q64 < r)).sum()) for r in (6.0, 20.0)]
    assert rated.tolist() == [int(((cls == 2) & np.isfinite(q64)).sum()),
                              int(np.isfinite(q64).sum())]


def test_edge_cells_match_a_scipy_erosion_of_the_data_mask():
    # Oracle: a cell touches a data edge when the 3 x 3 binary erosion of the mask (outside the
    # grid counted as no data, border_value=0) removes it (scipy.ndimage.binary_erosion).
    from scipy import ndimage

    from slopescreen.report._count_kernels import edge_cells

    rng = np.random.default_rng(5)
    values = rng.uniform(0, 40, (60, 70)).astype(np.float32)
    values[rng.random(values.shape) < 0.03] = np.nan
    values[:12, :9] = np.nan                                   # a clipped corner
    valid = np.isfinite(values)
    interior = ndimage.binary_erosion(valid, structure=np.ones((3, 3), bool), border_value=0)
    assert edge_cells(values) == int((valid & ~interior).sum())


def test_first_screen_states_the_changes_of_method_that_touch_the_run(run):
    # The first screen says why the numbers differ from the previous release, with this run's
    # count of edge cells checked against a scipy erosion of the slope product's data mask.
    from scipy import ndimage

    from slopescreen.report.changes import PREVIOUS_RELEASE

    _, out, manifest, text = run
    first = text[text.index('id="glance"'):text.index('id="cautions"')]
    # one line on the first screen, the list under the methods
    assert f"of method since slopescreen {PREVIOUS_RELEASE} touch" in first
    glance = text[text.index('id="methods"'):text.index('id="products"')]
    assert "Changes of method since the previous release that touch this run" in glance
    [slope_e] = [p for p in manifest["products"] if p["key"] == "slope" and p["kind"] == "raster"]
    valid = np.isfinite(read_back(out / slope_e["path"])[0])
    interior = ndimage.binary_erosion(valid, structure=np.ones((3, 3), bool), border_value=0)
    assert f"{int((valid & ~interior).sum()):,} cells" in glance
    assert "(Slope)" in glance
    # no dry case and no clusters in this scenario: those changes are not listed
    assert "0 mm/day is now accepted" not in glance and "not proven" not in glance
    assert "same failure depths" in glance             # the scenario has a storm case


def test_changes_listed_follow_what_the_run_used():
    # Which changes apply is read off the manifest: a dry steady case, cluster products,
    # sampled clusters; the count of modular faces is the manifest's cluster_search sum.
    from slopescreen.report.changes import changes_for

    base = {"grid": {"valid_cells": 500}, "rain": [{"name": "wet", "steady_mm_per_day": 5.0}]}
    assert [c.key for c, _ in changes_for(base, edge_cells=0)] == ["edge_slopes"]
    dry = base | {"rain": [{"name": "dry", "steady_mm_per_day": 0.0}]}
    assert "dry_case" in [c.key for c, _ in changes_for(dry)]
    clusters = base | {"products": [{"key": "cluster_labels", "rain": "wet"}],
                       "cluster_search": [{"rain": "wet", "modular_faces": 3},
                                          {"rain": "storm", "modular_faces": 1200}],
                       "uncertainty": {"samples": 40}}
    found = dict((c.key, t) for c, t in changes_for(clusters, edge_cells=25))
    assert list(found) == ["edge_slopes", "cluster_proof", "inclined_earth_pressure",
                           "cluster_pairs", "free_nodata_faces", "root_correlation"]
    assert "1,203 such pairs" in found["cluster_proof"]
    assert "25 cells (5.0 % of the cells with data)" in found["edge_slopes"]
