"""The package's layers only point down, and no numerical module imports a display module.

The imports are read from the source with :mod:`ast` (every ``import`` statement, also those
inside functions), so a lazy import cannot hide an upward dependency.  The layer picture is
the one in the README ("How the code is organized").
"""

from __future__ import annotations

import ast
import pathlib

import pytest

PACKAGE = pathlib.Path(__file__).resolve().parents[1] / "src" / "plantcore"

#: Which other layers each layer may import.  "top" is the package facade (``__init__``),
#: ``cli``, ``commands`` (the subcommands in modules of their own), ``demo`` and ``__main__``:
#: they may import everything and nothing below them imports them.
ALLOWED = {
    "core": set(),
    "structure": {"core"},
    # sparse numerics (issue 18): below reduction, whose dense entry points hand sparse
    # models down to it
    "large": {"core"},
    "reduction": {"core", "structure", "large"},
    "analysis": {"core", "structure", "reduction", "large"},
    "files": {"core"},
    "estimation": {"core", "files"},
    "sweeps": {"core", "structure", "reduction", "analysis", "files", "large"},
    "examples": {"core", "files", "estimation"},
    "reports": {"core", "structure", "reduction", "analysis", "files", "estimation", "sweeps",
                "large"},
    "top": {"core", "structure", "reduction", "analysis", "files", "estimation", "sweeps",
            "examples", "reports", "large"},
}
#: Layers that compute; they never import the display layer or a plotting library.
NUMERICAL = ("core", "structure", "reduction", "analysis", "files", "estimation", "sweeps",
             "large")
DISPLAY_LIBRARIES = ("matplotlib",)


def module_name(path: pathlib.Path) -> str:
    parts = ("plantcore",) + path.relative_to(PACKAGE).with_suffix("").parts
    return ".".join(parts[:-1]) if parts[-1] == "__init__" else ".".join(parts)


def layer_of(module: str) -> str:
    parts = module.split(".")
    if len(parts) == 1 or parts[1] in ("cli", "commands", "demo", "__main__"):
        return "top"
    return parts[1]


def imports_of(path: pathlib.Path, module: str) -> set[str]:
    """Every module named by an import in the file (plantcore modules resolved in full)."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[:len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module
            found.add(target)
            # ``from plantcore.structure import kalman`` names a module, not a function
            for alias in node.names:
                candidate = f"{target}.{alias.name}"
                if _is_module(candidate):
                    found.add(candidate)
    return found


def _is_module(name: str) -> bool:
    if not name.startswith("plantcore"):
        return False
    rel = pathlib.Path(*name.split(".")[1:])
    return (PACKAGE / rel).with_suffix(".py").is_file() or (PACKAGE / rel / "__init__.py").is_file()


def import_graph() -> dict[str, set[str]]:
    """plantcore module -> the plantcore modules it imports."""
    return {module: {name for name in imports_of(path, module) if name.startswith("plantcore")}
            for module, path in _sources().items()}


def upward_imports(graph) -> list[str]:
    problems = []
    for module, targets in graph.items():
        layer = layer_of(module)
        for target in targets:
            other = layer_of(target)
            if other != layer and other not in ALLOWED[layer]:
                problems.append(f"{module} ({layer}) imports {target} ({other})")
    return sorted(problems)


def display_imports(graph, sources) -> list[str]:
    problems = []
    for module, path in sources.items():
        if layer_of(module) not in NUMERICAL:
            continue
        for target in imports_of(path, module):
            if target.split(".")[0] in DISPLAY_LIBRARIES or layer_of(target) == "reports" \
                    and target.startswith("plantcore"):
                problems.append(f"{module} imports the display module {target}")
    return sorted(problems)


def cycles(graph) -> list[list[str]]:
    """Strongly connected groups of more than one module (or a module importing itself),
    by Tarjan's algorithm (R. Tarjan, "Depth-first search and linear graph algorithms",
    SIAM J. Computing 1(2), 1972)."""
    index, low, stack, on_stack, found = {}, {}, [], set(), []
    counter = [0]

    def visit(v):
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on_stack.add(v)
        for w in graph.get(v, ()):
            if w not in graph:
                continue
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            group = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                group.append(w)
                if w == v:
                    break
            if len(group) > 1 or v in graph.get(v, ()):
                found.append(sorted(group))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def _sources():
    return {module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def test_every_module_belongs_to_a_known_layer():
    unknown = sorted({layer_of(m) for m in _sources()} - set(ALLOWED))
    assert unknown == [], f"modules outside the layer picture: {unknown}"


def test_imports_only_point_down():
    assert upward_imports(import_graph()) == []


def test_no_numerical_module_imports_a_display_module():
    assert display_imports(import_graph(), _sources()) == []


def test_the_import_graph_has_no_cycle():
    # The package facade imports everything; leave it out so that only real cycles show.
    graph = {m: {t for t in ts if t != "plantcore"} for m, ts in import_graph().items()}
    assert cycles(graph) == []


# --- the checks themselves fail on planted faults ----------------------------------------

def test_a_planted_upward_import_is_caught(tmp_path):
    planted = tmp_path / "structure"
    planted.mkdir()
    (planted / "bad.py").write_text("def f():\n    from plantcore.reports.html import render_html\n")
    graph = {"plantcore.structure.bad": {"plantcore.reports.html"}}
    assert upward_imports(graph) == [
        "plantcore.structure.bad (structure) imports plantcore.reports.html (reports)"]
    # and through the reader: a lazy import inside a function is seen
    assert "plantcore.reports.html" in imports_of(planted / "bad.py", "plantcore.structure.bad")
    sources = {"plantcore.structure.bad": planted / "bad.py"}
    assert display_imports(graph, sources) == [
        "plantcore.structure.bad imports the display module plantcore.reports.html"]


def test_a_planted_cycle_is_caught():
    graph = {"plantcore.a.x": {"plantcore.a.y"}, "plantcore.a.y": {"plantcore.a.z"},
             "plantcore.a.z": {"plantcore.a.x"}, "plantcore.a.w": {"plantcore.a.x"}}
    assert cycles(graph) == [["plantcore.a.x", "plantcore.a.y", "plantcore.a.z"]]


@pytest.mark.parametrize("source, expected", [
    ("from plantcore.structure import kalman\n", {"plantcore.structure",
                                                  "plantcore.structure.kalman"}),
    ("from .kalman import PART_NAMES\n", {"plantcore.structure.kalman"}),
    ("import plantcore\n", {"plantcore"}),
])
def test_the_reader_resolves_import_forms(tmp_path, source, expected):
    path = tmp_path / "probe.py"
    path.write_text(source)
    found = {t for t in imports_of(path, "plantcore.structure.probe") if t.startswith("plantcore")}
    assert found == expected
