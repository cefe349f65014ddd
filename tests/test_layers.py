"""The package layout of DESIGN §13: each layer imports only the layers below it.

Walks every module's imports with `ast` (module-level and inside functions, since the CLI
imports lazily) and fails on any import of a higher layer or of the package façade.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "src" / "reachgate"

#: Layer rank of each top-level part of the package; a module may import its own rank or lower.
LAYER_RANK = {
    "errors": 0,
    "version": 0,
    "model": 1,
    "kinematics": 2,
    "checking": 3,
    "motion": 4,
    "batch": 5,
    "search": 6,
    "render": 7,
    "cli": 8,
    "__main__": 9,
}


def _part(module_path: Path) -> str:
    relative = module_path.relative_to(PACKAGE)
    return relative.parts[0] if len(relative.parts) > 1 else relative.stem


def _imported_parts(tree: ast.AST) -> list[tuple[int, str]]:
    """(line, top-level part of reachgate) of every import of reachgate in the tree."""
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            names = [node.module]
            if node.module == "reachgate":  # from reachgate import x: x is the part
                names = [f"reachgate.{alias.name}" for alias in node.names]
        else:
            continue
        for name in names:
            parts = name.split(".")
            if parts[0] == "reachgate":
                found.append((node.lineno, parts[1] if len(parts) > 1 else "__init__"))
    return found


MODULES = sorted(p for p in PACKAGE.rglob("*.py") if p.name != "__init__.py" or p.parent != PACKAGE)


def test_every_package_part_has_a_layer():
    parts = {_part(p) for p in MODULES}
    assert parts <= set(LAYER_RANK), parts - set(LAYER_RANK)


@pytest.mark.parametrize("module_path", MODULES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_module_imports_only_its_own_layer_or_lower(module_path):
    own = _part(module_path)
    tree = ast.parse(module_path.read_text(encoding="utf-8"))
    wrong = [
        f"line {line}: imports reachgate.{part}"
        for line, part in _imported_parts(tree)
        if part == "__init__" or LAYER_RANK.get(part, 99) > LAYER_RANK[own]
    ]
    assert not wrong, f"{module_path.relative_to(PACKAGE)} ({own}) " + "; ".join(wrong)


def test_the_layer_walk_finds_an_upward_import():
    """The walk itself can fail: a checking module importing render, or the façade, is caught."""
    tree = ast.parse(
        "from reachgate.render.check_report import render\n"
        "def f():\n    import reachgate\n    from reachgate import __version__\n"
    )
    assert _imported_parts(tree) == [(1, "render"), (3, "__init__"), (4, "__version__")]
