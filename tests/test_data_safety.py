"""Nothing lost, nothing mixed: inputs protected, runs committed whole, the folder owned.

Each case found by the fuzzing pass is a test named for it. Outside references: SHA-256
(hashlib) of every file before and after; the folder compared with its manifest file by file;
a kill simulated after every file operation of the commit (os.replace, unlink), the way a
SIGKILL would stop it (no clean-up runs).
"""

import fcntl
import hashlib
import json
import os
from pathlib import Path

import numpy as np
import pytest

from conftest import tilted_plane, write_tif
from slopescreen import pipeline
from slopescreen.cli import main
from slopescreen.pipeline import commit as commit_mod
from slopescreen.pipeline.commit import JOURNAL, LOCK, folder_problems, recover
from slopescreen.pipeline.inputs import Product
from slopescreen.scenario import load_scenario

UNIT = """
depth_m = 1.0
cohesion_kpa = 2.0
friction_deg = 33.0
unit_weight_kn_m3 = 18.0
conductivity_m_per_day = 2.0
"""

BASE = """
dem = "dem.tif"
output = "{output}"
[soil.units.1]
""" + UNIT + """
[[rain]]
name = "{rain}"
steady_mm_per_day = 40
"""


def sha(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def snapshot(folder) -> dict:
    return {p.relative_to(folder).as_posix(): sha(p) for p in sorted(Path(folder).rglob("*"))
            if p.is_file()}


def case(folder, *, output="out", rain="wet", extra="", name="s.toml"):
    write_tif(folder / "dem.tif", tilted_plane(rows=14, cols=12, gradient=0.6))
    path = folder / name
    path.write_text(BASE.format(output=output, rain=rain) + extra, encoding="utf-8")
    return path


def one_error(capsys, code_expected=2):
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("slopescreen: error: "), err
    return err[0]


# ---------------------------------------------------------------------------------------------
# 1. an input named like a product is never overwritten
# ---------------------------------------------------------------------------------------------

def test_input_named_manifest_json_is_never_overwritten(tmp_path, capsys):
    write_tif(tmp_path / "dem.tif", tilted_plane(rows=14, cols=12, gradient=0.6))
    (tmp_path / "manifest.json").write_text(BASE.format(output=".", rain="wet"), encoding="utf-8")
    before = snapshot(tmp_path)
    for command in ("check", "run"):
        assert main([command, str(tmp_path / "manifest.json")]) == 2
        line = one_error(capsys)
        assert "manifest.json: output: the output folder" in line and "holds this input" in line
        assert snapshot(tmp_path) == before


def test_an_input_the_run_would_not_write_may_share_the_output_folder(tmp_path, capsys):
    path = case(tmp_path, output=".", name="scenario.toml")
    before = {k: v for k, v in snapshot(tmp_path).items()}
    assert main(["run", str(path), "-q"]) == 0
    after = snapshot(tmp_path)
    assert {k: after[k] for k in before} == before                 # inputs unchanged
    assert folder_problems(tmp_path, ignore=("dem.tif", "scenario.toml")) == []


# ---------------------------------------------------------------------------------------------
# 2. a kill during the commit never leaves a mixed set (after the next command)
# ---------------------------------------------------------------------------------------------

class _Kill(BaseException):
    """Stands for SIGKILL: nothing after it runs (no except, no finally of the commit)."""


def _earlier_run(out: Path) -> dict:
    files = {"a.tif": b"old a", "b.tif": b"old b (a product the new run does not write)",
             "keep.txt": b"a user's own file"}
    for name, data in files.items():
        (out / name).write_bytes(data)
    manifest = {"products": [{"key": "x", "rain": None, "path": n, "kind": "raster", "units": "1"}
                             for n in ("a.tif", "b.tif")],
                "product_sha256": {n: hashlib.sha256(files[n]).hexdigest()
                                   for n in ("a.tif", "b.tif")}}
    (out / "manifest.json").write_text(json.dumps(manifest))
    return manifest


def _staged(out: Path, tag: str):
    staging = out / f".slopescreen-partial-{tag}"
    staging.mkdir()
    for name, data in (("a.tif", b"new a"), ("c.tif", b"new c"), ("d.tif", b"new d")):
        (staging / name).write_bytes(data)
    products = [Product(key="x", path=n, kind="raster", units="1") for n in ("a.tif", "c.tif",
                                                                             "d.tif")]
    return staging, products


def test_a_kill_after_any_file_operation_of_the_commit_leaves_one_whole_run(tmp_path,
                                                                            monkeypatch):
    real_replace, real_unlink = os.replace, Path.unlink
    k = 0
    while True:
        k += 1
        out = tmp_path / f"k{k}"
        out.mkdir()
        _earlier_run(out)
        staging, products = _staged(out, str(k))
        count = {"n": 0}

        def counted(fn):
            def op(*args, **kwargs):
                result = fn(*args, **kwargs)
                count["n"] += 1
                if count["n"] == k:
                    raise _Kill()
                return result
            return op

        monkeypatch.setattr(os, "replace", counted(real_replace))
        monkeypatch.setattr(Path, "unlink", counted(real_unlink))
        try:
            commit_mod.commit(staging, out, products, {"products": [p.as_dict() for p in products]})
            killed = False
        except _Kill:
            killed = True
        monkeypatch.setattr(os, "replace", real_replace)
        monkeypatch.setattr(Path, "unlink", real_unlink)
        if not (out / JOURNAL).exists():
            # before the journal: the earlier run, whole; after the end: the new run, whole
            manifest = json.loads((out / "manifest.json").read_text())
            problems = folder_problems(out, ignore=("keep.txt", staging.name))
            assert problems == [], (k, problems)
            if killed:
                assert [p["path"] for p in manifest["products"]] in (["a.tif", "b.tif"],
                                                                     ["a.tif", "c.tif", "d.tif"])
        recover(out)                                   # what the next run does first
        manifest = json.loads((out / "manifest.json").read_text())
        if killed and [p["path"] for p in manifest["products"]] == ["a.tif", "b.tif"]:
            continue                                   # killed before the journal: old run kept
        assert [p["path"] for p in manifest["products"]] == ["a.tif", "c.tif", "d.tif"]
        assert folder_problems(out, ignore=("keep.txt",)) == [], k
        assert (out / "a.tif").read_bytes() == b"new a" and not (out / "b.tif").exists()
        assert (out / "keep.txt").read_bytes() == b"a user's own file"
        if not killed:
            break
    assert k >= 6                                      # journal, 3 moves, 1 removal, manifest, ...


# ---------------------------------------------------------------------------------------------
# 3. stale and foreign products; two runs at once
# ---------------------------------------------------------------------------------------------

def test_renamed_rain_case_removes_the_old_case_products(tmp_path):
    path = case(tmp_path, rain="wet")
    assert main(["run", str(path), "-q"]) == 0
    out = tmp_path / "out"
    old = sorted(p.name for p in out.glob("*_wet.*"))
    assert old
    path.write_text(BASE.format(output="out", rain="soaked"), encoding="utf-8")
    assert main(["run", str(path), "-q"]) == 0
    assert not list(out.glob("*_wet.*"))
    assert folder_problems(out) == []


def test_a_stale_product_the_user_changed_is_kept(tmp_path, caplog):
    path = case(tmp_path, rain="wet")
    assert main(["run", str(path), "-q"]) == 0
    out = tmp_path / "out"
    edited = out / "wetness_wet.tif"
    edited.write_bytes(edited.read_bytes() + b"user edit")
    path.write_text(BASE.format(output="out", rain="soaked"), encoding="utf-8")
    assert main(["run", str(path), "-q"]) == 0
    assert edited.is_file()                                     # changed since: never deleted
    assert not (out / "factor_of_safety_wet.tif").exists()      # unchanged: removed


def test_a_second_run_into_a_locked_folder_fails_at_once(tmp_path, capsys):
    path = case(tmp_path)
    out = tmp_path / "out"
    out.mkdir()
    fd = os.open(out / LOCK, os.O_RDWR | os.O_CREAT)
    fcntl.flock(fd, fcntl.LOCK_EX)                       # another run is writing here
    try:
        assert main(["run", str(path)]) == 2
        assert "another slopescreen run is writing into out" in one_error(capsys)
        assert sorted(p.name for p in out.iterdir()) == [LOCK]
    finally:
        os.close(fd)
    assert main(["run", str(path), "-q"]) == 0             # the lock is gone with its holder


# ---------------------------------------------------------------------------------------------
# 4. staging folders of killed runs
# ---------------------------------------------------------------------------------------------

def test_staging_folders_of_killed_runs_are_removed_by_the_next_run(tmp_path):
    path = case(tmp_path)
    out = tmp_path / "out"
    dead = out / ".slopescreen-partial-deadbeef"
    dead.mkdir(parents=True)
    (dead / "slope.tif").write_bytes(b"a complete-looking product of a killed run")
    assert main(["run", str(path), "-q"]) == 0
    assert not dead.exists()
    assert folder_problems(out) == []


# ---------------------------------------------------------------------------------------------
# 5. soil codes of any sign; non-finite codes
# ---------------------------------------------------------------------------------------------

def test_negative_soil_codes_with_a_table_get_values(tmp_path):
    from slopescreen.grid import read_back

    codes = np.full((14, 12), 2, dtype=np.int16)
    codes[:, :6] = -5
    write_tif(tmp_path / "soils.tif", codes, nodata=0, dtype="int16")
    text = BASE.replace("[soil.units.1]", "[soil]\nmap = \"soils.tif\"\n[soil.units.-5]") + \
        "[soil.units.2]\n" + UNIT.replace("33.0", "36.0")
    path = case(tmp_path)
    path.write_text(text.format(output="out", rain="wet"), encoding="utf-8")
    assert main(["run", str(path), "-q"]) == 0
    fs, _ = read_back(tmp_path / "out" / "factor_of_safety_wet.tif")
    assert np.isfinite(fs[:, :6]).all() and np.isfinite(fs[:, 6:]).all()
    assert fs[5, 3] < fs[5, 9]                       # the -5 unit is weaker (33 deg against 36)


def test_infinite_soil_codes_are_an_error_naming_the_file(tmp_path, capsys):
    codes = np.ones((14, 12), dtype=np.float32)
    codes[3, 3] = np.inf
    write_tif(tmp_path / "soils.tif", codes, nodata=-9999.0, dtype="float32")
    path = case(tmp_path)
    path.write_text(BASE.replace("[soil.units.1]", "[soil]\nmap = \"soils.tif\"\n[soil.units.1]")
                    .format(output="out", rain="wet"), encoding="utf-8")
    assert main(["check", str(path)]) == 2
    assert "soils.tif: soil map holds infinite values" in one_error(capsys)


# ---------------------------------------------------------------------------------------------
# 7. bad paths: exit 2, found by check
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("output, message", [
    ("dem.tif/sub", "output: dem.tif is a file, not a folder"),
    ("/", "output: / is a system or home folder"),
    ("/usr/local/share/slopescreen-out", "lies inside the system folder /usr"),
])
def test_bad_output_paths_are_found_by_check(tmp_path, capsys, output, message):
    path = case(tmp_path, output=output)
    before = snapshot(tmp_path)
    for command in ("check", "run"):
        assert main([command, str(path)]) == 2
        assert message in one_error(capsys)
    assert snapshot(tmp_path) == before


def test_an_output_folder_that_cannot_be_written_is_found_by_check(tmp_path, capsys, monkeypatch):
    # the process runs as root in CI, where every folder is writable: the permission answer is
    # replaced here (os.access is what the check asks)
    from slopescreen.pipeline import guard

    path = case(tmp_path, output="locked/out")
    (tmp_path / "locked").mkdir()
    real = os.access
    monkeypatch.setattr(guard.os, "access",
                        lambda p, mode: False if Path(p).name == "locked" else real(p, mode))
    assert main(["check", str(path)]) == 2
    assert "output: cannot write into" in one_error(capsys)


def test_demo_into_a_file_is_an_error(tmp_path, capsys):
    target = tmp_path / "notes.txt"
    target.write_text("a user's notes")
    assert main(["demo", str(target / "demo")]) == 2
    assert "notes.txt is a file, not a folder" in one_error(capsys)
    assert target.read_text() == "a user's notes"


def test_a_centreline_that_is_a_folder_is_found_by_check(tmp_path, capsys):
    path = case(tmp_path, extra='[corridor]\ncentreline = "road"\n')
    (tmp_path / "road").mkdir()
    assert main(["check", str(path)]) == 2
    assert "road" in one_error(capsys)


# ---------------------------------------------------------------------------------------------
# 8. an extreme DEM; 6. the memory guard; 10. where the run writes
# ---------------------------------------------------------------------------------------------

def test_an_undeclared_sentinel_in_the_dem_is_found_by_check(tmp_path, capsys):
    path = case(tmp_path)
    z = tilted_plane(rows=14, cols=12, gradient=0.6)
    z[4, 4] = 3.4e38
    write_tif(tmp_path / "dem.tif", z, nodata=None)
    assert main(["check", str(path)]) == 2
    line = one_error(capsys)
    assert "dem.tif: elevation" in line and "declare it in the file" in line


def test_a_run_too_big_for_the_memory_is_refused_before_reading(tmp_path, capsys, monkeypatch):
    from slopescreen.pipeline import guard

    monkeypatch.setattr(guard, "_available_bytes", lambda: 1.0e6)
    path = case(tmp_path)
    assert main(["run", str(path)]) == 2
    line = one_error(capsys)
    assert "needs about 0.4 GB of memory but 0.0 GB are available" in line
    assert "clip the DEM" in line
    assert not (tmp_path / "out").exists()


def test_the_run_says_where_it_writes_first(tmp_path, capsys):
    path = case(tmp_path, output="../elsewhere/out")
    (tmp_path / "sub").mkdir()
    moved = tmp_path / "sub" / "s.toml"
    moved.write_text(path.read_text().replace('dem = "dem.tif"', 'dem = "../dem.tif"'))
    assert main(["run", str(moved)]) == 0
    err = capsys.readouterr().err.splitlines()
    assert err[0] == f"slopescreen: writing into {(tmp_path / 'elsewhere' / 'out').resolve()}"
    assert pipeline.planned_stages(load_scenario(moved))


def test_ctrl_c_during_the_commit_is_held_until_the_commit_is_complete(tmp_path, monkeypatch):
    import signal

    out = tmp_path / "out"
    out.mkdir()
    _earlier_run(out)
    staging, products = _staged(out, "sig")
    real = commit_mod._roll_forward

    def interrupted(*args, **kwargs):
        os.kill(os.getpid(), signal.SIGINT)            # Ctrl-C in the middle of the moves
        return real(*args, **kwargs)

    monkeypatch.setattr(commit_mod, "_roll_forward", interrupted)
    # a process started in the background by a shell ignores SIGINT; a terminal's does not
    previous = signal.signal(signal.SIGINT, signal.default_int_handler)
    try:
        with pytest.raises(KeyboardInterrupt) as caught:
            commit_mod.commit(staging, out, products,
                              {"products": [p.as_dict() for p in products]})
    finally:
        signal.signal(signal.SIGINT, previous)
    assert caught.value.committed is True
    assert not (out / JOURNAL).exists()
    assert folder_problems(out, ignore=("keep.txt",)) == []
    assert [p["path"] for p in json.loads((out / "manifest.json").read_text())["products"]] == [
        "a.tif", "c.tif", "d.tif"]
