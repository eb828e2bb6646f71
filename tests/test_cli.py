"""Command line: exit codes, one-line errors, nothing written on bad input."""

import json
import subprocess
import sys

import numpy as np
import pytest
from rasterio.transform import Affine, from_origin

from conftest import tilted_plane, write_tif
from slopescreen.cli import main


def run_cli(capsys, *args):
    code = main(list(args))
    out, err = capsys.readouterr()
    return code, out, err


def scenario(tmp_path, extra=""):
    p = tmp_path / "scenario.toml"
    p.write_text('dem = "dem.tif"\noutput = "out"\n' + extra, encoding="utf-8")
    return p


def assert_bad_input(capsys, tmp_path, *args, names=()):
    before = sorted(p.name for p in tmp_path.rglob("*"))
    code, out, err = run_cli(capsys, *args)
    assert code == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert "Traceback" not in err
    for name in names:
        assert name in lines[0], lines[0]
    assert sorted(p.name for p in tmp_path.rglob("*")) == before  # nothing written
    return lines[0]


BAD_DEMS = {
    "geographic": dict(crs="EPSG:4326", transform=from_origin(10.0, 45.0, 1e-4, 1e-4)),
    "rotated": dict(transform=Affine(5.0, 0.5, 500000.0, 0.5, -5.0, 5100000.0)),
}


@pytest.mark.parametrize("case", sorted(BAD_DEMS))
def test_bad_dem_exit_2(tmp_path, capsys, case):
    write_tif(tmp_path / "dem.tif", tilted_plane(), **BAD_DEMS[case])
    s = scenario(tmp_path)
    for command in ("check", "run"):
        assert_bad_input(capsys, tmp_path, command, str(s), names=("dem.tif",))


@pytest.mark.parametrize("fill", [-9999.0, np.nan])
def test_all_nodata_exit_2(tmp_path, capsys, fill):
    write_tif(tmp_path / "dem.tif", np.full((6, 6), fill, dtype=np.float32), nodata=-9999.0)
    line = assert_bad_input(capsys, tmp_path, "run", str(scenario(tmp_path)), names=("dem.tif",))
    assert "nodata" in line


def test_too_small_exit_2(tmp_path, capsys):
    write_tif(tmp_path / "dem.tif", np.ones((2, 2), dtype=np.float32))
    assert_bad_input(capsys, tmp_path, "run", str(scenario(tmp_path)), names=("dem.tif", "3x3"))


def test_not_a_raster_exit_2(tmp_path, capsys):
    (tmp_path / "dem.tif").write_text("not a raster")
    assert_bad_input(capsys, tmp_path, "run", str(scenario(tmp_path)), names=("dem.tif",))


def test_missing_dem_exit_2(tmp_path, capsys):
    assert_bad_input(capsys, tmp_path, "check", str(scenario(tmp_path)), names=("scenario.toml", "dem"))


def test_unknown_routing_method_exit_2(tmp_path, capsys):
    write_tif(tmp_path / "dem.tif", tilted_plane())
    s = scenario(tmp_path, '[routing]\nmethod = "steepest"\n')
    assert_bad_input(capsys, tmp_path, "run", str(s), names=("scenario.toml", "routing.method"))


def test_unknown_key_exit_2(tmp_path, capsys):
    write_tif(tmp_path / "dem.tif", tilted_plane())
    s = scenario(tmp_path, "[routing]\nmethd = 'dinf'\n")
    assert_bad_input(capsys, tmp_path, "check", str(s), names=("routing.methd",))


def test_missing_scenario_exit_2(tmp_path, capsys):
    assert_bad_input(capsys, tmp_path, "run", str(tmp_path / "none.toml"), names=("none.toml",))


def test_check_writes_nothing(tmp_path, capsys):
    write_tif(tmp_path / "dem.tif", tilted_plane())
    s = scenario(tmp_path)
    code, out, err = run_cli(capsys, "check", str(s))
    assert code == 0, err
    assert "OK" in out
    assert not (tmp_path / "out").exists()


def test_run_writes_products_and_manifest(tmp_path, capsys):
    write_tif(tmp_path / "dem.tif", tilted_plane())
    dem_bytes = (tmp_path / "dem.tif").read_bytes()
    s = scenario(tmp_path)
    code, out, err = run_cli(capsys, "-q", "run", str(s))
    assert code == 0, err
    manifest = json.loads((tmp_path / "out" / "manifest.json").read_text())
    assert manifest["tool"] == "slopescreen"
    keys = {p["key"] for p in manifest["products"]}
    assert {"slope", "specific_catchment_area"} <= keys
    for p in manifest["products"]:
        assert (tmp_path / "out" / p["path"]).is_file()
        assert set(p) == {"key", "rain", "path", "kind", "units"}
    units = {p["key"]: p["units"] for p in manifest["products"]}
    assert units["slope"] == "degrees" and units["specific_catchment_area"] == "m"
    assert manifest["cautions"] and any("licensed" in c for c in manifest["cautions"])
    assert not list((tmp_path / "out").glob(".slopescreen-partial-*"))
    assert (tmp_path / "dem.tif").read_bytes() == dem_bytes


def test_module_entry_point_bad_input(tmp_path):
    # the real process: exit status and stderr as a shell user sees them
    proc = subprocess.run([sys.executable, "-m", "slopescreen", "run", str(tmp_path / "x.toml")],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1 and "x.toml" in proc.stderr


def test_console_script_flushes_its_output_before_it_ends(tmp_path):
    # The console script ends the process with os._exit once the run is committed: what it
    # printed into a pipe (block-buffered) must still arrive, with the exit status, and the
    # committed products must be complete. The script sits beside this interpreter.
    from pathlib import Path

    script = Path(sys.executable).with_name("slopescreen")
    write_tif(tmp_path / "dem.tif", tilted_plane())
    s = scenario(tmp_path)
    proc = subprocess.run([str(script), "run", str(s)], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    assert "wrote " in proc.stdout and "manifest.json" in proc.stdout
    assert proc.stdout.rstrip().endswith("read the cautions in the report.")
    manifest = json.loads((tmp_path / "out" / "manifest.json").read_text())
    for p in manifest["products"]:
        assert (tmp_path / "out" / p["path"]).stat().st_size > 0
    proc = subprocess.run([str(script), "check", str(tmp_path / "missing.toml")],
                          capture_output=True, text=True)
    assert proc.returncode == 2 and proc.stderr.count("\n") == 1


def test_flags_after_the_command(tmp_path, capsys):
    write_tif(tmp_path / "dem.tif", tilted_plane())
    s = scenario(tmp_path)
    code, out, err = run_cli(capsys, "check", "-q", str(s))
    assert code == 0 and out == "" and err == ""
    code, out, err = run_cli(capsys, "-q", "check", str(s))
    assert code == 0 and out == ""
    code, out, err = run_cli(capsys, "check", str(s))
    assert code == 0 and "OK" in out
