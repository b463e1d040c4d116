"""The import graph of calib/: no circle at all, and the layers of ARCHITECTURE.md kept.

The graph is built from the source with :mod:`ast`, so imports hidden inside
functions count as much as those at the top of a module (a function-level
import is a circle put off, not removed).  Imports under ``if TYPE_CHECKING:``
are left out: they never run.  An edge goes to the module named: ``from
calib.fit import inverse`` to ``calib.fit.inverse`` when that is a module,
``from calib.fit.curve import fit_curve`` to ``calib.fit.curve``.

Circles are the strongly connected components of the graph (Tarjan's
algorithm, R. Tarjan, SIAM J. Comput. 1(2), 1972, from memory), the algorithm
itself checked against a small graph whose components are known by hand.

ARCHITECTURE.md: the QC rule in checks/ and quantify/ both read concentrations
off a curve through fit/'s inverse prediction; neither imports the other.
"""

from __future__ import annotations

import ast
import functools
from collections.abc import Iterable, Mapping
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent / "calib"

def _module_name(path: Path, root: Path) -> str:
    parts = list(path.relative_to(root.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _is_type_checking(test: ast.expr) -> bool:
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING")


def _imports(tree: ast.AST, package: str) -> Iterable[tuple[str, str | None]]:
    """(module, name) of every import that runs, at any depth."""
    stack: list[ast.AST] = [tree]
    while stack:
        node = stack.pop()
        if isinstance(node, ast.If) and _is_type_checking(node.test):
            stack.extend(node.orelse)
            continue
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield alias.name, None
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[:len(base) - node.level + 1]
                module = ".".join(base + ([node.module] if node.module else []))
            else:
                module = node.module or ""
            for alias in node.names:
                yield module, alias.name
        stack.extend(ast.iter_child_nodes(node))


def import_graph(root: Path = ROOT) -> dict[str, set[str]]:
    """Module → the calib modules it imports (module-level and function-level)."""
    files = {_module_name(p, root): p for p in root.rglob("*.py")}
    graph: dict[str, set[str]] = {name: set() for name in files}
    for name, path in files.items():
        package = name if path.name == "__init__.py" else name.rpartition(".")[0]
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for module, item in _imports(tree, package):
            if not module.startswith("calib"):
                continue
            target = f"{module}.{item}" if item and f"{module}.{item}" in files else module
            if target in files and target != name:
                graph[name].add(target)
    return graph


def strongly_connected(graph: Mapping[str, Iterable[str]]) -> list[frozenset[str]]:
    """Components of more than one node (or a node importing itself), Tarjan's algorithm."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    on_stack: set[str] = set()
    stack: list[str] = []
    out: list[frozenset[str]] = []
    counter = 0
    for start in sorted(graph):
        if start in index:
            continue
        # Iterative depth-first search: (node, iterator over its successors).
        work = [(start, iter(sorted(graph.get(start, ()))))]
        index[start] = low[start] = counter
        counter += 1
        stack.append(start)
        on_stack.add(start)
        while work:
            node, successors = work[-1]
            advanced = False
            for nxt in successors:
                if nxt not in index:
                    index[nxt] = low[nxt] = counter
                    counter += 1
                    stack.append(nxt)
                    on_stack.add(nxt)
                    work.append((nxt, iter(sorted(graph.get(nxt, ())))))
                    advanced = True
                    break
                if nxt in on_stack:
                    low[node] = min(low[node], index[nxt])
            if advanced:
                continue
            work.pop()
            if work:
                parent = work[-1][0]
                low[parent] = min(low[parent], low[node])
            if low[node] == index[node]:
                members = set()
                while True:
                    top = stack.pop()
                    on_stack.discard(top)
                    members.add(top)
                    if top == node:
                        break
                if len(members) > 1 or node in graph.get(node, ()):
                    out.append(frozenset(members))
    return out


@functools.cache
def _calib_graph() -> dict[str, set[str]]:
    return import_graph()


def _describe(cycles: Iterable[frozenset[str]]) -> str:
    return "\n".join("  " + " ↔ ".join(sorted(c)) for c in cycles) or "  (none)"


def test_components_of_a_known_graph() -> None:
    # Worked by hand (common practice for checking a graph algorithm): a→b→c→a is one
    # circle, d→e→d another, f stands alone, g imports itself.
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a", "d"}, "d": {"e"}, "e": {"d", "f"},
             "f": set(), "g": {"g"}}
    assert sorted(sorted(c) for c in strongly_connected(graph)) == [
        ["a", "b", "c"], ["d", "e"], ["g"]]


def test_function_level_imports_are_seen(tmp_path: Path) -> None:
    pkg = tmp_path / "calib"
    (pkg / "checks").mkdir(parents=True)
    (pkg / "__init__.py").write_text("")
    (pkg / "checks" / "__init__.py").write_text("")
    (pkg / "checks" / "rule.py").write_text(
        "def f():\n    from calib.quantify import batch\n    return batch\n")
    (pkg / "quantify").mkdir()
    (pkg / "quantify" / "__init__.py").write_text("")
    (pkg / "quantify" / "batch.py").write_text(
        "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    from calib.checks import x\n"
        "from . import helper\nimport calib.checks.rule\n")
    (pkg / "quantify" / "helper.py").write_text("")
    graph = import_graph(pkg)
    assert graph["calib.checks.rule"] == {"calib.quantify.batch"}
    # The TYPE_CHECKING import is left out; the relative one is resolved.
    assert graph["calib.quantify.batch"] == {"calib.quantify.helper", "calib.checks.rule"}
    assert strongly_connected(graph) == [frozenset({"calib.checks.rule",
                                                    "calib.quantify.batch"})]


def test_checks_never_import_quantify() -> None:
    graph = _calib_graph()
    edges = sorted((a, b) for a, targets in graph.items() for b in targets
                   if a.startswith("calib.checks") and b.startswith("calib.quantify"))
    assert edges == [], f"checks imports quantify: {edges}"


def test_no_circle_between_checks_and_quantify() -> None:
    mixed = [c for c in strongly_connected(_calib_graph())
             if any(m.startswith("calib.checks") for m in c)
             and any(m.startswith("calib.quantify") for m in c)]
    assert not mixed, "circles through checks and quantify:\n" + _describe(mixed)


def test_no_circle_at_all() -> None:
    # Issue 18: every circle is gone; a function-level import that closes one fails here.
    found = strongly_connected(_calib_graph())
    assert not found, "import circles:\n" + _describe(found)


@pytest.mark.parametrize("module", ["calib.fit.inverse", "calib.fit.calcurve", "calib.fit.qc"])
def test_shared_reading_back_sits_below_checks_and_quantify(module: str) -> None:
    # ARCHITECTURE.md layering: fit/ imports neither checks/ nor quantify/.
    graph = _calib_graph()
    seen, todo = set(), [module]
    while todo:
        node = todo.pop()
        if node in seen:
            continue
        seen.add(node)
        todo.extend(graph[node])
    above = sorted(m for m in seen if m.startswith(("calib.checks", "calib.quantify")))
    assert above == [], f"{module} reaches {above}"


#: quantify's only ways into the checks, left for issue 18 item 4: a run file's curves are
#: checked first (calib.workflow.check_file), and a record's stored profile gives the QC rule.
KNOWN_QUANTIFY_TO_CHECKS = {("calib.quantify.source", "calib.checks.profile"),
                            ("calib.quantify.source", "calib.checks.overrides"),
                            ("calib.quantify.source", "calib.workflow")}


def test_quantify_reaches_the_checks_only_where_known() -> None:
    graph = _calib_graph()
    edges = {(a, b) for a, targets in graph.items() for b in targets
             if a.startswith("calib.quantify") and b.startswith(("calib.checks", "calib.workflow"))}
    assert edges <= KNOWN_QUANTIFY_TO_CHECKS, f"new: {sorted(edges - KNOWN_QUANTIFY_TO_CHECKS)}"
    assert edges == KNOWN_QUANTIFY_TO_CHECKS, (
        f"gone (remove from the list): {sorted(KNOWN_QUANTIFY_TO_CHECKS - edges)}")


def test_record_never_imports_report() -> None:
    # ARCHITECTURE.md: record/ (the evidence) never imports report/ (the drawing of it);
    # issuing, signing and verifying are handed calib.report.RecordPages instead.
    graph = _calib_graph()
    edges = sorted((a, b) for a, targets in graph.items() for b in targets
                   if a.startswith("calib.record") and b.startswith("calib.report"))
    assert edges == [], f"record imports report: {edges}"


#: ARCHITECTURE.md's layers, from the ground up; a module imports only its own package or a
#: lower layer.  checks/ and quantify/ share a layer and import neither each other;
#: record/, report/, export/ and archive/ share one (record never imports report: above).
LAYERS = {
    "errors": 0, "options": 0, "run": 0, "verdict_words": 0, "fonts": 0, "resources": 0,
    "cautions": 0, "output": 0, "tabular": 0, "labsettings": 0,
    "io": 1, "fit": 2, "checks": 3, "quantify": 3,
    "record": 4, "report": 4, "export": 4, "archive": 4,
    "workflow": 5, "service": 5, "service_trend": 5,
    "cli": 6, "web": 6, "__main__": 7,
}

#: Upward edges left when this test was written: quantify's curve source checks a run file
#: (through calib.workflow) or reads an issued record and its stored profile, so it sits
#: above the layer it is filed in.  The list only shrinks.
KNOWN_UPWARD = KNOWN_QUANTIFY_TO_CHECKS | {("calib.quantify.source", "calib.record.record"),
                                          ("calib.quantify.source", "calib.record.verify")}


def _layer(module: str) -> tuple[str, int]:
    top = module.split(".")[1] if "." in module else ""
    return top, LAYERS.get(top, -1)


def test_every_module_has_a_layer() -> None:
    missing = sorted(m for m in _calib_graph() if m != "calib" and _layer(m)[1] < 0)
    assert not missing, f"add to LAYERS: {missing}"


def test_layers_import_only_downwards() -> None:
    upward = set()
    for a, targets in _calib_graph().items():
        (top_a, la) = _layer(a)
        for b in targets:
            (top_b, lb) = _layer(b)
            if top_a != top_b and (lb > la or (lb == la and la == 3)):
                upward.add((a, b))
    assert upward <= KNOWN_UPWARD, f"upward imports: {sorted(upward - KNOWN_UPWARD)}"
    assert upward == KNOWN_UPWARD, f"gone (remove from the list): {sorted(KNOWN_UPWARD - upward)}"
