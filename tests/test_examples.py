"""The examples in examples/ run as written (they are part of the documentation)."""

import runpy
from pathlib import Path

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"


def test_api_example_runs_and_writes_its_map(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    runpy.run_path(str(EXAMPLES / "api_example.py"), run_name="__main__")
    out = capsys.readouterr().out
    assert "share of the hill below FS 1" in out
    assert (tmp_path / "api_example_fs.png").read_bytes()[:4] == b"\x89PNG"
