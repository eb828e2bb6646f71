"""The import graph shows the real dependencies (the contributor guide's rules, checked).

* A package's front file (``__init__.py``) imports only the names of its ``__all__``.
* No module, in the package or in the tests, imports a private name (``_x``) through a
  package's front file: private helpers come from the module that defines them.

Read with the standard library's ``ast``; nothing is imported.
"""

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SRC = ROOT / "src" / "slopescreen"
PACKAGES = {p.parent for p in SRC.rglob("__init__.py")}


def _modules():
    return sorted(SRC.rglob("*.py")) + sorted((ROOT / "tests").glob("*.py"))


def _target(path: Path, node: ast.ImportFrom) -> Path | None:
    """File or package folder that ``from ... import`` reads, inside the package; else None."""
    if node.level:
        base = path.parent
        for _ in range(node.level - 1):
            base = base.parent
        parts = (node.module or "").split(".") if node.module else []
    else:
        if not (node.module or "").startswith("slopescreen"):
            return None
        base = SRC.parent
        parts = node.module.split(".")
    target = base.joinpath(*parts) if parts else base
    return target if target.is_dir() or target.with_suffix(".py").exists() else None


@pytest.mark.parametrize("init", sorted(SRC.rglob("__init__.py")), ids=lambda p: str(p.relative_to(SRC)))
def test_front_files_import_only_their_public_names(init):
    tree = ast.parse(init.read_text(encoding="utf-8"))
    exported = None
    imported = set()
    for node in tree.body:
        if isinstance(node, ast.Assign) and any(getattr(t, "id", "") == "__all__" for t in node.targets):
            exported = {e.value for e in node.value.elts}
        elif isinstance(node, ast.ImportFrom):
            imported |= {a.asname or a.name for a in node.names}
        elif isinstance(node, ast.Import):
            imported |= {a.asname or a.name for a in node.names}
    if not imported:
        return
    assert exported is not None, "a front file that imports names lists them in __all__"
    assert not {n for n in imported if n.startswith("_")}
    assert imported <= exported | {"annotations"}


def test_no_private_name_is_imported_through_a_front_file():
    offending = []
    for path in _modules():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if not isinstance(node, ast.ImportFrom):
                continue
            target = _target(path, node)
            if target is None or not target.is_dir() or target not in PACKAGES:
                continue
            for alias in node.names:
                submodule = (target / alias.name).with_suffix(".py").exists() or (target / alias.name).is_dir()
                if alias.name.startswith("_") and not alias.name.startswith("__") and not submodule:
                    offending.append(f"{path.relative_to(ROOT)}:{node.lineno} {alias.name}")
    assert offending == []
    assert len(_modules()) > 100                       # the walk found the package and tests
