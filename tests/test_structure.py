"""The package's shape: no import cycles between its modules, and every docstring example runs.

The import graph is read from the source with the standard library's ``ast`` (imports inside
functions count too: a deferred import still ties two modules together). The one exception is
the package's own ``__init__``, a facade whose functions import the pipeline on call.
"""

from __future__ import annotations

import ast
import doctest
import importlib
import pkgutil
from pathlib import Path

import pytest

import sitebuild

PACKAGE = Path(sitebuild.__file__).parent


def _module_name(path: Path, package: Path) -> str:
    parts = list(path.relative_to(package.parent).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def import_graph(package: Path = PACKAGE) -> dict[str, set[str]]:
    """Return module -> the package's modules it imports (at any depth in the file)."""
    files = {_module_name(p, package): p for p in package.rglob("*.py")}
    graph: dict[str, set[str]] = {}
    for name, path in files.items():
        here = name if path.name == "__init__.py" else name.rpartition(".")[0]
        tree = ast.parse(path.read_text(encoding="utf-8"))
        # The root facade: only its top-level imports count.
        nodes = tree.body if name == package.name else ast.walk(tree)
        deps: set[str] = set()
        for node in nodes:
            if isinstance(node, ast.Import):
                deps.update(a.name for a in node.names if a.name in files)
            elif isinstance(node, ast.ImportFrom):
                if node.level:
                    base = here.split(".")[: len(here.split(".")) - node.level + 1]
                    target = ".".join(base + ([node.module] if node.module else []))
                else:
                    target = node.module or ""
                for alias in node.names:
                    sub = f"{target}.{alias.name}"
                    if sub in files:
                        deps.add(sub)
                    elif target in files:
                        deps.add(target)
        graph[name] = deps - {name}
    return graph


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Return the strongly connected groups of more than one module (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            group = []
            while True:
                w = stack.pop()
                group.append(w)
                if w == v:
                    break
            if len(group) > 1:
                found.append(sorted(group))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def test_the_package_has_no_import_cycles():
    found = cycles(import_graph())
    assert found == [], "\n".join(" <-> ".join(group) for group in found)


def test_the_cycle_check_finds_a_cycle(tmp_path):
    # The check can fail: two modules importing each other (one inside a function).
    package = tmp_path / "pkg"
    package.mkdir()
    (package / "__init__.py").write_text("")
    (package / "a.py").write_text("from .b import thing\n")
    (package / "b.py").write_text("def thing():\n    from . import a\n")
    (package / "c.py").write_text("from . import a\n")
    assert cycles(import_graph(package)) == [["pkg.a", "pkg.b"]]


def _modules() -> list[str]:
    names = [sitebuild.__name__]
    for info in pkgutil.walk_packages(sitebuild.__path__, prefix="sitebuild."):
        if not info.name.endswith("__main__"):  # running it is the command line itself
            names.append(info.name)
    return sorted(names)


@pytest.mark.parametrize("name", _modules())
def test_docstring_examples_run(name):
    # The same check as ``pytest --doctest-modules sitebuild``, one test per module so the
    # examples run under the normal suite (and spread over xdist workers).
    if name == "sitebuild.engines.dask":
        pytest.importorskip("distributed")
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.ELLIPSIS, report=False, verbose=False)
    assert result.failed == 0, f"{result.failed} of {result.attempted} examples failed in {name}"
