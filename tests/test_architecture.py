"""The import graph of ``fleet``: no cycles, and the layering rules of DEVELOPERS.md.

Every module under ``fleet/`` is parsed (never imported): module-level imports, imports
inside functions and imports under ``TYPE_CHECKING`` all count, relative imports are
resolved against the module's package. ``from package import name`` points at the
submodule when ``name`` is one, else at the package. Importing ``a.b.c`` also runs the
package ``a.b``, so that counts as an import of ``a.b`` too (unless the importer lives
inside ``a.b``, which is already being imported by then).
"""

from __future__ import annotations

import ast
from collections.abc import Iterable, Mapping
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PACKAGE = "fleet"

Graph = dict[str, set[str]]


def module_names(root: Path, package: str) -> dict[str, Path]:
    """Every module of ``package`` under ``root``, by dotted name (a package by its own)."""
    found: dict[str, Path] = {}
    for path in sorted((root / package).rglob("*.py")):
        parts = list(path.relative_to(root).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        found[".".join(parts)] = path
    return found


def _is_package(name: str, modules: Mapping[str, Path]) -> bool:
    return modules[name].name == "__init__.py"


def _imported(node: ast.AST, here: str, modules: Mapping[str, Path]) -> Iterable[str]:
    """The dotted names one import statement reaches, before keeping only our own."""
    if isinstance(node, ast.Import):
        return [alias.name for alias in node.names]
    if not isinstance(node, ast.ImportFrom):
        return []
    if node.level:
        package = here if _is_package(here, modules) else here.rpartition(".")[0]
        for _ in range(node.level - 1):
            package = package.rpartition(".")[0]
        base = f"{package}.{node.module}" if node.module else package
    else:
        base = node.module or ""
    return [
        f"{base}.{alias.name}" if f"{base}.{alias.name}" in modules else base
        for alias in node.names
    ]


def import_graph(root: Path, package: str) -> Graph:
    """Module → the modules of ``package`` it imports, anywhere in its source."""
    modules = module_names(root, package)
    graph: Graph = {name: set() for name in modules}
    for here, path in modules.items():
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node in ast.walk(tree):
            for name in _imported(node, here, modules):
                while name and name not in modules:  # ``import a.b.c`` of a function, say
                    name = name.rpartition(".")[0]
                if not name:
                    continue
                graph[here].add(name)
                parent = name.rpartition(".")[0]
                while parent and not here.startswith(parent + ".") and parent != package:
                    graph[here].add(parent)
                    parent = parent.rpartition(".")[0]
        graph[here].discard(here)
    return graph


def cycles(graph: Mapping[str, Iterable[str]]) -> list[list[str]]:
    """One cycle (a → … → a) through each strongly connected group of modules (Tarjan)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    groups: list[list[str]] = []

    def visit(node: str) -> None:
        index[node] = low[node] = len(index)
        stack.append(node)
        on_stack.add(node)
        for nxt in sorted(graph.get(node, ())):
            if nxt not in index:
                visit(nxt)
                low[node] = min(low[node], low[nxt])
            elif nxt in on_stack:
                low[node] = min(low[node], index[nxt])
        if low[node] == index[node]:
            group = []
            while True:
                member = stack.pop()
                on_stack.discard(member)
                group.append(member)
                if member == node:
                    break
            if len(group) > 1 or node in graph.get(node, ()):
                groups.append(sorted(group))

    for node in sorted(graph):
        if node not in index:
            visit(node)
    return [_cycle_within(group, graph) for group in groups]


def _cycle_within(group: list[str], graph: Mapping[str, Iterable[str]]) -> list[str]:
    """A shortest path from the group's first module back to itself, inside the group."""
    start, members = group[0], set(group)
    paths = {start: [start]}
    frontier = [start]
    while frontier:
        following = []
        for node in frontier:
            for nxt in sorted(graph.get(node, ())):
                if nxt == start:
                    return [*paths[node], start]
                if nxt in members and nxt not in paths:
                    paths[nxt] = [*paths[node], nxt]
                    following.append(nxt)
        frontier = following
    raise AssertionError(f"no cycle through {start}")  # a group always has one


def _within(name: str, prefix: str) -> bool:
    return name == prefix or name.startswith(prefix + ".")


def breaches(graph: Mapping[str, Iterable[str]], layer: str, forbidden: Iterable[str]) -> list[str]:
    """``importer -> imported`` for every import from ``layer`` into a forbidden package."""
    forbidden = tuple(forbidden)
    return [
        f"{here} -> {name}"
        for here in sorted(graph)
        if _within(here, layer)
        for name in sorted(graph[here])
        if any(_within(name, f) for f in forbidden)
    ]


@pytest.fixture(scope="module")
def graph() -> Graph:
    return import_graph(ROOT, PACKAGE)


def test_it_reads_every_module_of_the_package(graph: Graph) -> None:
    assert "fleet.due.engine" in graph
    assert "fleet.models" in graph  # the package itself, from its __init__.py
    # Relative imports resolve to modules: ``from .due import planned`` in fleet/forms.py.
    assert "fleet.due.planned" in graph["fleet.forms"]


def test_it_finds_no_import_cycle_in_fleet(graph: Graph) -> None:
    found = [" -> ".join(cycle) for cycle in cycles(graph)]
    assert found == [], "import cycles in fleet:\n" + "\n".join(found)


# DEVELOPERS.md, "Architecture in one page": data flows one way, views → due/services →
# models → calc.
def test_it_keeps_calc_free_of_the_rest_of_fleet(graph: Graph) -> None:
    outside = [
        line
        for line in breaches(graph, "fleet.calc", ["fleet"])
        if not _within(line.split(" -> ")[1], "fleet.calc")
    ]
    assert outside == [], "fleet.calc imports the rest of fleet:\n" + "\n".join(outside)


@pytest.mark.parametrize(
    ("layer", "forbidden"),
    [
        ("fleet.models", ["fleet.due", "fleet.services", "fleet.views", "fleet.documents"]),
        ("fleet.due", ["fleet.services", "fleet.views", "fleet.documents", "fleet.forms"]),
    ],
)
def test_it_keeps_each_layer_off_the_floors_above(
    graph: Graph, layer: str, forbidden: list[str]
) -> None:
    found = breaches(graph, layer, forbidden)
    assert found == [], f"{layer} imports from a floor above it:\n" + "\n".join(found)


def _write(root: Path, files: Mapping[str, str]) -> None:
    for name, text in files.items():
        path = root / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")


def test_it_names_a_cycle_made_of_relative_and_function_level_imports(tmp_path: Path) -> None:
    _write(
        tmp_path,
        {
            "pkg/__init__.py": "",
            "pkg/a.py": "from .sub import b\n",
            "pkg/sub/__init__.py": "",
            "pkg/sub/b.py": "def later():\n    from ..c import thing\n",
            "pkg/c.py": "import pkg.a\nthing = 1\n",
            "pkg/d.py": "from pkg import c\n",
        },
    )
    graph = import_graph(tmp_path, "pkg")
    assert graph["pkg.sub.b"] == {"pkg.c"}
    assert graph["pkg.d"] == {"pkg.c"}
    assert cycles(graph) == [["pkg.a", "pkg.sub.b", "pkg.c", "pkg.a"]]


def test_it_counts_the_package_a_deep_import_runs(tmp_path: Path) -> None:
    _write(
        tmp_path,
        {
            "pkg/__init__.py": "",
            "pkg/low/__init__.py": "from pkg.low.rows import Row\n",
            "pkg/low/rows.py": "from pkg import high\nRow = 1\n",
            "pkg/high.py": "from pkg.low.rows import Row\n",
        },
    )
    graph = import_graph(tmp_path, "pkg")
    assert graph["pkg.high"] == {"pkg.low.rows", "pkg.low"}
    # rows does not import its own package back: that one is already being imported.
    assert graph["pkg.low.rows"] == {"pkg.high"}
    assert cycles(graph) == [["pkg.high", "pkg.low.rows", "pkg.high"]]


def test_it_reports_an_import_into_a_higher_floor() -> None:
    graph = {"fleet.models.units": {"fleet.due.store", "fleet.calc.seawater"}}
    assert breaches(graph, "fleet.models", ["fleet.due"]) == [
        "fleet.models.units -> fleet.due.store"
    ]
