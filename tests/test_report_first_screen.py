"""The report's first screen, its memo block and the summary files, checked against the products.

Outside references: numpy counts on the GeoTIFF products read back with rasterio (the FS
classes at the breaks of common practice 1.0 / 1.3 / 1.5, P_f >= 0.1 and >= 0.5); the
standard library's csv and html.parser; scikit-image's connected-component labelling
(skimage.measure.label, regionprops) for the worst places; the diffusion length
sqrt(4 D0 T) of Iverson (2000) computed by hand.
"""

import csv
import io
import json
import math
from html.parser import HTMLParser

import numpy as np
import pytest

from conftest import write_tif
from slopescreen.cli import main
from slopescreen.grid import read_back
from slopescreen.report.overview import cluster_places, patch_places, worst_case

SCENARIO = """
title = "Kessel ridge"
dem = "dem.tif"
output = "out"

[project]
name = "Kessel ridge access"
number = 7781
prepared_by = "R. Analyst"
checked_by = "S. Reviewer"
data_date = 2025-03-14
notes = "Pre-storm screen"

[soil.units.1]
label = "colluvium"
depth_m = { uniform = [0.8, 1.6] }
cohesion_kpa = 1.0
friction_deg = { normal = [33.0, 2.0] }
unit_weight_kn_m3 = 18.0
conductivity_m_per_day = 2.0
diffusivity_m2_per_s = 5.0e-6

[[rain]]
name = "long wet spell"
steady_mm_per_day = 60
return_period_years = 10
source = "regional wet-season record"

[[rain]]
name = "short storm"
storm_mm_per_h = 20
duration_h = 2
antecedent_mm_per_day = 1
return_period_years = 50

[uncertainty]
samples = 30
seed = 3
"""


def _dem(rows=40, cols=48, cell=5.0):
    """A slope falling south at 0.65 with two convergent hollows (m)."""
    y = np.arange(rows)[:, None] * cell
    x = np.arange(cols)[None, :] * cell
    z = 320.0 - 0.65 * y
    for x0 in (70.0, 170.0):
        z = z - 6.0 * np.exp(-((x - x0) / 20.0) ** 2) * np.clip(y / 80.0, 0, 1)
    return z.astype(np.float32)


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("first")
    write_tif(folder / "dem.tif", _dem())
    (folder / "s.toml").write_text(SCENARIO, encoding="utf-8")
    assert main(["-q", "run", str(folder / "s.toml")]) == 0
    out = folder / "out"
    manifest = json.loads((out / "manifest.json").read_text())
    return out, manifest, (out / "report.html").read_text(encoding="utf-8")


def _product(out, manifest, key, rain=None):
    [e] = [p for p in manifest["products"] if p["key"] == key and p.get("rain") == rain
           and p["kind"] == "raster"]
    return read_back(out / e["path"])[0]


def test_project_block_reaches_the_manifest_and_the_top_of_the_report(run):
    out, manifest, text = run
    assert manifest["project"] == {"name": "Kessel ridge access", "number": "7781",
                                   "prepared_by": "R. Analyst", "checked_by": "S. Reviewer",
                                   "data_date": "2025-03-14", "notes": "Pre-storm screen"}
    top = text[:text.index('id="glance"')]
    for label, value in (("Project", "Kessel ridge access"), ("Project number", "7781"),
                         ("Prepared by", "R. Analyst"), ("Checked by", "S. Reviewer"),
                         ("Date of the data", "2025-03-14"), ("Notes", "Pre-storm screen")):
        assert f"<dt>{label}:</dt><dd>{value}</dd>" in top
    assert manifest["rain"][0]["return_period_years"] == 10.0
    assert "return period 10 years; regional wet-season record" in text
    assert "return period 50 years" in text


def test_first_screen_is_summary_then_overview_map_then_cautions(run):
    _, _, text = run
    glance = text.index('id="glance"')
    overview = text.index('class="overview"')
    cautions = text.index('id="cautions"')
    assert glance < overview < cautions
    assert text.index("Worst places under") < cautions


def test_summary_files_match_the_rasters(run):
    out, manifest, _ = run
    entries = {(p["key"], p["kind"]): p for p in manifest["products"]}
    assert entries[("summary", "json")]["path"] == "summary.json"
    assert entries[("summary", "csv")]["path"] == "summary.csv"
    import hashlib

    for name in ("summary.json", "summary.csv"):
        assert manifest["product_sha256"][name] == hashlib.sha256(
            (out / name).read_bytes()).hexdigest()
    lines = (out / "summary.csv").read_text(encoding="utf-8").splitlines()
    assert lines[0].startswith("# Screening result only")
    rows = list(csv.DictReader(io.StringIO("\n".join(lines[1:]))))
    doc = json.loads((out / "summary.json").read_text())
    assert doc["project"]["name"] == "Kessel ridge access" and len(doc["rain_cases"]) == 2
    cell = manifest["grid"]["dx_m"] * manifest["grid"]["dy_m"]
    for row, jrow in zip(rows, doc["rain_cases"]):
        fs = _product(out, manifest, "factor_of_safety", row["rain_case"]).astype(np.float64)
        pf = _product(out, manifest, "failure_probability", row["rain_case"]).astype(np.float64)
        has = np.isfinite(fs)
        # numpy on the GeoTIFF, the classes at the breaks of common practice
        counts = [np.sum(has & (fs < 1.0)), np.sum((fs >= 1.0) & (fs < 1.3)),
                  np.sum((fs >= 1.3) & (fs < 1.5)), np.sum(fs >= 1.5)]
        for stem, n in zip(("fails", "thin_margin", "some_margin", "ample_margin"), counts):
            assert float(row[f"{stem}_area_m2"]) == pytest.approx(n * cell)
            assert jrow[f"{stem}_share"] == pytest.approx(n / has.sum())
        assert float(row["pf_at_least_0_1_area_m2"]) == pytest.approx(np.sum(pf >= 0.1) * cell)
        assert float(row["pf_at_least_0_5_area_m2"]) == pytest.approx(np.sum(pf >= 0.5) * cell)
        assert row["clusters"] == "" and jrow["clusters"] is None      # no [clusters] here
    assert rows[0]["return_period_years"] == "10" and rows[1]["source"] == ""


class _Contents(HTMLParser):
    """The nesting depth of every link of the contents list."""

    def __init__(self):
        super().__init__()
        self.depth, self.inside, self.links = 0, False, []

    def handle_starttag(self, tag, attrs):
        if tag == "nav":
            self.inside = True
        elif self.inside and tag == "ol":
            self.depth += 1
        elif self.inside and tag == "a":
            self.links.append((self.depth, dict(attrs)["href"]))

    def handle_endtag(self, tag):
        if tag == "nav":
            self.inside = False
        elif self.inside and tag == "ol":
            self.depth -= 1


def test_contents_numbers_sections_and_nests_the_rain_cases(run):
    _, _, text = run
    parser = _Contents()
    parser.feed(text)
    depth = dict((href, d) for d, href in parser.links)
    assert depth["#glance"] == 1 and depth["#cases"] == 1 and depth["#cautions-end"] == 1
    assert depth["#case-long-wet-spell"] == 2 and depth["#case-short-storm"] == 2
    assert depth["#products"] == 1


def test_a_storm_that_fails_less_is_explained_with_its_numbers(run):
    out, manifest, text = run
    fs = {r["name"]: _product(out, manifest, "factor_of_safety", r["name"])
          for r in manifest["rain"]}
    share = {k: np.sum(v < 1.0) / np.isfinite(v).sum() for k, v in fs.items()}
    assert share["short storm"] < share["long wet spell"]       # the case this note is for
    reach = math.sqrt(4.0 * 5.0e-6 * 2.0 * 3600.0)               # sqrt(4 D0 T), Iverson (2000)
    assert "Why a storm can fail less ground than a steady case:" in text
    assert f"√(4 D₀ T) = {reach:.2f} m" in text
    assert "I/K = 0.24" in text                                   # 20 mm/h = 0.48 m/day over 2
    assert "less than the 60 mm/day of “long wet spell”" in text


def test_worst_patches_match_scikit_image_regions():
    from skimage.measure import label, regionprops

    rng = np.random.default_rng(5)
    fs = rng.uniform(0.6, 2.0, (60, 80))
    fs[rng.random(fs.shape) < 0.03] = np.nan
    places = patch_places(fs, extent=(0.0, 80.0, 0.0, 60.0), cell_area_m2=2.0, step=3, most=4)
    regions = sorted(regionprops(label(np.nan_to_num(fs, nan=9.0) < 1.0, connectivity=2)),
                     key=lambda r: -r.area)[:4]
    assert [p["area_m2"] for p in places] == [r.area * 2.0 * 9 for r in regions]
    for p, r in zip(places, regions):
        row, col = r.centroid
        assert p["easting"] == pytest.approx(col + 0.5)
        assert p["northing"] == pytest.approx(60.0 - (row + 0.5))


def test_worst_case_and_cluster_places_rank_as_stated():
    assert worst_case({"a": {"fail_share": 0.1}, "b": {"fail_share": 0.3}, "c": None}) == "b"
    rows = [{"rain": "b", "id": i, "fs": fs, "area_m2": 10.0 * i, "centroid_easting": 0.0,
             "centroid_northing": 0.0} for i, fs in enumerate((0.9, 0.5, 0.7, 0.95), start=1)]
    assert [p["cluster"] for p in cluster_places(rows, "b", most=3)] == [2, 3, 1]


@pytest.mark.parametrize("table, key", [
    ('[project]\nnumber = 1.5', "project.number"),
    ('[project]\nname = ""', "project.name"),
    ('[project]\nchecked = "x"', "project"),
    ('project = "x"', "project"),
])
def test_bad_project_blocks_are_refused_with_one_line(tmp_path, capsys, table, key):
    write_tif(tmp_path / "dem.tif", _dem(10, 10))
    (tmp_path / "s.toml").write_text(f'dem = "dem.tif"\noutput = "out"\n{table}\n')
    assert main(["check", str(tmp_path / "s.toml")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "s.toml" in err[0] and key in err[0]
    assert not (tmp_path / "out").exists()


def test_a_return_period_must_be_positive(tmp_path, capsys):
    write_tif(tmp_path / "dem.tif", _dem(10, 10))
    text = SCENARIO.replace("return_period_years = 10", "return_period_years = 0")
    (tmp_path / "s.toml").write_text(text)
    assert main(["check", str(tmp_path / "s.toml")]) == 2
    assert "rain[0].return_period_years" in capsys.readouterr().err
