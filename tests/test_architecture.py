"""The house rules of DEVELOPERS.md, checked: layers, no import cycles, the public API.

- The layers contract (``[tool.importlinter]`` in ``pyproject.toml``) is run by
  import-linter itself: model < analysis < present < runs < cli, every import
  pointing down, and no cycles among the modules of any one package.
- No import cycle among the files of ``explain/`` at all (a package's
  ``__init__`` counts as a file; imports inside functions and under
  ``TYPE_CHECKING`` count too): strongly connected components of grimp's
  import graph (Tarjan's algorithm, Tarjan 1972, SIAM J. Comput. 1(2)).
- Every name ``explain`` exports imports.
"""

from __future__ import annotations

import importlib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def test_the_layers_contract_is_kept(capsys, monkeypatch):
    from importlinter.cli import lint_imports

    monkeypatch.chdir(ROOT)
    status = lint_imports(config_filename=str(ROOT / "pyproject.toml"), no_cache=True, no_logo=True)
    report = capsys.readouterr().out
    assert status == 0, report
    # both contracts were read and checked (an empty configuration would also exit 0)
    assert "2 kept, 0 broken" in report, report


def _cycles(graph) -> list[list[str]]:
    """Groups of two or more modules that import each other, directly or through others (Tarjan)."""
    index, low, on_stack, stack, found = {}, {}, set(), [], []

    def visit(start: str) -> None:
        # iterative depth-first search: the graph is deep enough to matter for recursion
        work = [(start, iter(sorted(graph.find_modules_directly_imported_by(start))))]
        index[start] = low[start] = len(index)
        stack.append(start)
        on_stack.add(start)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is not None:
                if child not in index:
                    index[child] = low[child] = len(index)
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph.find_modules_directly_imported_by(child)))))
                elif child in on_stack:
                    low[node] = min(low[node], index[child])
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                group = []
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    group.append(member)
                    if member == node:
                        break
                if len(group) > 1:
                    found.append(sorted(group))

    for module in sorted(graph.modules):
        if module not in index:
            visit(module)
    return found


#: Cycles known and not yet cut, each with who cuts it; the list only shrinks.
#: (Keep in step with ``ignore_imports`` in pyproject.toml.)
KNOWN_CYCLES = []


def test_no_import_cycle_among_the_files_of_explain():
    import grimp

    graph = grimp.build_graph("explain", include_external_packages=False)
    assert "explain.analysis.evidence" in graph.modules  # the graph is the package's, not an empty one
    found = _cycles(graph)
    assert [c for c in found if c not in KNOWN_CYCLES] == []
    # a known cycle that is gone comes off the list
    assert [c for c in KNOWN_CYCLES if c not in found] == []


def test_the_cycle_finder_finds_a_cycle():
    """The check above can fail: a graph with one cycle of three modules and one module outside it."""

    class Graph:
        edges = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}
        modules = set(edges)

        def find_modules_directly_imported_by(self, module):
            return self.edges[module]

    assert _cycles(Graph()) == [["a", "b", "c"]]


def test_every_public_name_imports():
    import explain

    assert len(explain.__all__) >= 50
    for name in explain.__all__:
        assert getattr(explain, name) is not None, name
    with pytest.raises(AttributeError):
        getattr(explain, "no_such_name")


@pytest.mark.parametrize("name", ["load_model", "explain_message", "ledger_rows", "write_ledger", "build_report"])
def test_public_names_are_the_objects_inside(name):
    """The top-level names are the library's own objects, not copies."""
    import explain

    module = importlib.import_module(explain._PUBLIC[name])
    assert getattr(explain, name) is getattr(module, name)


#: The most lines a function body may have (DEVELOPERS.md).
MAX_BODY_LINES = 80
#: Bodies still longer, each with who splits it; the list only shrinks.
def _long_bodies() -> dict[str, int]:
    """``file:function`` -> lines of its body (first statement, docstring included, to the last line)."""
    import ast

    found = {}
    for path in sorted((ROOT / "explain").rglob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                lines = node.end_lineno - node.body[0].lineno + 1
                if lines > MAX_BODY_LINES:
                    found[f"{path.relative_to(ROOT).as_posix()}:{node.name}"] = lines
    return found


def test_no_function_body_is_longer_than_80_lines():
    found = _long_bodies()
    assert found == {}, "split these functions (body lines, docstring included)"
