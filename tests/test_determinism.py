"""Two runs of one scenario write the same bytes.

The defining property of a reproducible run: every product of two runs of the same scenario
on the same inputs is byte-identical, also when numba runs on one thread in one run and on two
in the other. Only ``manifest.json`` and ``report.html`` hold the time of the run (its start
and the seconds of each stage); the manifests agree on everything else. The scenario runs
every optional stage: Monte Carlo, failure clusters with the size-resolved search, runout, the
corridor table and the inventory scores.
"""

import json
import os
import subprocess
import sys

import pytest
import shapely

from test_corridor_run import SCENARIO, X0, Y0, write_inputs
from test_inventory import write_features
from slopescreen.vectors import FIXED_TIMESTAMP, read_layer

TIMED = {"manifest.json", "report.html"}
"""Files that hold the run's start time and stage seconds."""

RUN_FIELDS = {"created", "stage_seconds", "environment"}
"""Manifest fields that describe the run rather than its products."""

CLUSTERS = ("[clusters]\nmin_area_m2 = 25\nmax_area_m2 = 2500\nsize_windows = 1\n"
            "size_time_limit_s = 1\n")


def scenario_text():
    text = SCENARIO.replace("[runout]", CLUSTERS + "[runout]")
    # one property drawn, so the probability of failure samples it
    text = text.replace("friction_deg = 35.0", "friction_deg = { normal = [35.0, 2.0] }", 1)
    return text + '[inventory]\nlandslides = "slides.geojson"\nscore_part = "whole"\n'


def write_case(folder):
    folder.mkdir()
    path = write_inputs(folder, scenario_text())
    slides = [shapely.box(X0 + 50 + 10 * i, Y0 - 60, X0 + 58 + 10 * i, Y0 - 30) for i in range(4)]
    write_features(folder / "slides.geojson", slides)
    return path


def run_in(folder, threads):
    path = write_case(folder)
    env = dict(os.environ, NUMBA_NUM_THREADS=str(threads))
    done = subprocess.run([sys.executable, "-m", "slopescreen", "run", path.name, "-q"],
                          cwd=folder, env=env, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    return folder / "out"


@pytest.fixture(scope="module")
def two_runs(tmp_path_factory):
    base = tmp_path_factory.mktemp("determinism")
    return run_in(base / "one", 1), run_in(base / "two", 2)


def files(out):
    return sorted(p.name for p in out.iterdir())


def test_both_runs_wrote_every_stage_and_the_same_files(two_runs):
    one, two = two_runs
    assert files(one) == files(two)
    manifest = json.loads((one / "manifest.json").read_text(encoding="utf-8"))
    keys = {p["key"] for p in manifest["products"]}
    assert {"failure_probability", "clusters", "cluster_fs_bound", "runout_paths",
            "corridor_segments", "inventory_scores", "map", "report"} <= keys
    assert manifest["not_run"] == []
    listed = {p["path"] for p in manifest["products"]} | {"manifest.json"}
    assert {name for name in files(one) if not name.startswith(".")} == listed   # .lock: hidden
    _, _, meta = read_layer(one / "clusters.gpkg", layer="size_resolved")
    assert meta["CAUTION"]


def test_every_product_is_byte_identical(two_runs):
    # the size-resolved search's time is in the manifest, not in clusters.gpkg
    one, two = two_runs
    for name in files(one):
        if name in TIMED:
            continue
        assert (one / name).read_bytes() == (two / name).read_bytes(), name


def test_geopackages_record_the_fixed_timestamp(two_runs):
    import sqlite3
    from contextlib import closing

    one, _ = two_runs
    for name in ("clusters.gpkg", "runout_paths.gpkg", "corridor_segments.gpkg"):
        with closing(sqlite3.connect(f"{(one / name).as_uri()}?mode=ro", uri=True)) as db:
            stamps = {row[0] for row in db.execute("SELECT last_change FROM gpkg_contents")}
            stamps |= {row[0] for row in db.execute(
                "SELECT timestamp FROM gpkg_metadata_reference")}
        assert stamps == {FIXED_TIMESTAMP}, name


def test_manifests_agree_apart_from_the_run_time(two_runs):
    first, second = (json.loads((out / "manifest.json").read_text(encoding="utf-8"))
                     for out in two_runs)
    assert RUN_FIELDS <= set(first)
    assert set(first["stage_seconds"]) == set(second["stage_seconds"])
    for manifest in (first, second):   # the hashes of the files that hold a time differ
        hashes = manifest.get("product_sha256")
        if hashes is not None:
            manifest["product_sha256"] = {k: v for k, v in hashes.items() if k not in TIMED}
        for record in manifest.get("cluster_search", []):   # a measured time, like stage_seconds
            record.pop("size_search_seconds")
    assert ({k: v for k, v in first.items() if k not in RUN_FIELDS}
            == {k: v for k, v in second.items() if k not in RUN_FIELDS})


def test_a_geopackage_written_twice_is_byte_identical_and_the_option_is_put_back(tmp_path):
    import time

    import numpy as np
    from pyogrio import get_gdal_config_option

    from slopescreen.grid import Grid
    from slopescreen.vectors import label_polygons, write_polygons

    grid = Grid.regular((6, 6), west=X0, north=Y0, cell_m=5.0, crs="EPSG:32633")
    labels = np.zeros((6, 6), dtype=np.int32)
    labels[1:3, 1:4], labels[4, 2:6] = 1, 2
    polygons = label_polygons(labels, grid)
    records = [{"id": 1, "fs": 0.8, "proven": True}, {"id": 2, "fs": 0.9, "proven": False}]
    for name in ("a.gpkg", "b.gpkg"):
        write_polygons(tmp_path / name, polygons, records, grid, layer="clusters", caution="c")
        write_polygons(tmp_path / name, polygons, records[:1], grid, layer="more", caution="c",
                       add_layer=True)
        time.sleep(0.01)         # GDAL's own stamp has milliseconds: the two would differ
    assert (tmp_path / "a.gpkg").read_bytes() == (tmp_path / "b.gpkg").read_bytes()
    assert get_gdal_config_option("OGR_CURRENT_DATE") is None
