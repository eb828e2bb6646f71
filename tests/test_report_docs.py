"""The docs cover every scenario key and every product, map style and report section.

The keys are taken from the validator's own source (every ``check_keys`` call of
the ``scenario`` package, read with the standard library's ``ast``) and from the registries of the
report, so a key or product added without docs fails here.
"""

import ast
import re
from pathlib import Path

import pytest

from slopescreen import scenario
from slopescreen import products
from slopescreen.report import maps

ROOT = Path(__file__).resolve().parents[1]
DOCS = ROOT / "docs"


def validator_keys():
    """Every key name accepted by a ``check_keys`` call in the scenario package."""
    keys = set(scenario.TOP_LEVEL_KEYS) | set(scenario.SECTION_PARSERS) | set(scenario.SOIL_PROPERTIES)
    calls = 0
    for source in sorted(Path(scenario.__file__).parent.glob("*.py")):
        tree = ast.parse(source.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.Call) and getattr(node.func, "id", None) == "check_keys":
                calls += 1
                for arg in node.args[2:3]:
                    if isinstance(arg, ast.Set):
                        keys |= {e.value for e in arg.elts if isinstance(e, ast.Constant)}
    assert calls >= 8                                          # every section parser was read
    return keys | {"label"}


def test_scenario_format_documents_every_key():
    text = (DOCS / "scenario-format.md").read_text(encoding="utf-8")
    documented = {w for code in re.findall(r"`([^`\n]+)`", text) for w in re.findall(r"\w+", code)}
    missing = sorted(k for k in validator_keys() if k not in documented)
    assert missing == []
    assert len(validator_keys()) > 25                          # the parse found the sections


def test_outputs_documents_every_product_and_map_style():
    text = (DOCS / "outputs.md").read_text(encoding="utf-8")
    keys = set(products.REGISTRY) | set(maps.STYLES)
    missing = sorted(k for k in keys if f"`{k}`" not in text)
    assert missing == []
    for field in ("not_run", "environment", "stage_seconds", "inputs_sha256"):
        assert f"`{field}`" in text


def test_outputs_table_agrees_with_the_registry():
    # every raster row of docs/outputs.md states the registry's units and per-rain flag
    text = (DOCS / "outputs.md").read_text(encoding="utf-8")
    rows = {m.group(1): (m.group(2).strip(), m.group(3).strip())
            for m in re.finditer(r"^\| `(\w+)` \| ([^|]+) \| ([^|]+) \|", text, re.M)}
    rasters = [p for p in products.PRODUCTS if p.kind == "raster"]
    assert len(rasters) >= 12
    for p in rasters:
        per_rain, units = rows[p.key]
        assert units == p.units, p.key
        assert (per_rain != "no") == p.per_rain, p.key


@pytest.mark.parametrize("doc", ["scenario-format.md", "outputs.md", "methods.md", "cautions.md"])
def test_docs_hold_no_absolute_path(doc):
    text = (DOCS / doc).read_text(encoding="utf-8")
    assert not re.search(r"(^|\s)/(work|tmp|home|root)/", text)
