"""fleet/calc stays pure: no Django, no clock, no I/O, no settings (DEVELOPERS.md, floor 1)."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

CALC_DIR = Path(__file__).resolve().parents[2] / "fleet" / "calc"
CALC_FILES = sorted(CALC_DIR.glob("*.py"))

# Calls that read the clock or the outside world.
FORBIDDEN_ATTRIBUTES = {"now", "today", "utcnow", "time", "monotonic", "environ", "getenv"}
FORBIDDEN_CALLS = {"open", "input", "print"}
FORBIDDEN_MODULES = {"django", "os", "time", "pathlib", "socket", "requests", "random"}


def _imported_roots(tree: ast.AST) -> set[str]:
    roots: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            roots.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            roots.add(node.module.split(".")[0])
    return roots


def test_it_finds_the_calc_modules() -> None:
    names = {p.stem for p in CALC_FILES}
    assert {"seawater", "rtd", "anodes", "seals", "battery", "pressure", "buoyancy"} <= names
    assert {"ranging", "_checks", "__init__"} <= names


@pytest.mark.parametrize("path", CALC_FILES, ids=lambda p: p.name)
def test_it_imports_no_django_or_io_module(path: Path) -> None:
    roots = _imported_roots(ast.parse(path.read_text(), filename=str(path)))
    assert not roots & FORBIDDEN_MODULES, f"{path.name} imports {roots & FORBIDDEN_MODULES}"


@pytest.mark.parametrize("path", CALC_FILES, ids=lambda p: p.name)
def test_it_reads_no_clock_and_opens_no_file(path: Path) -> None:
    tree = ast.parse(path.read_text(), filename=str(path))
    for node in ast.walk(tree):
        if isinstance(node, ast.Attribute):
            assert node.attr not in FORBIDDEN_ATTRIBUTES, f"{path.name}:{node.lineno} .{node.attr}"
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
            assert node.func.id not in FORBIDDEN_CALLS, f"{path.name}:{node.lineno} {node.func.id}"


def test_the_import_check_catches_a_django_import() -> None:
    # The guard above must be able to fail.
    tree = ast.parse("from django.conf import settings\nimport django.db.models\n")
    assert _imported_roots(tree) == {"django"}
