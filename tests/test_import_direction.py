"""Imports run one way across all of faultfind's layers, and no two modules import each other.

The rule (DEVELOPERS.md, "Architecture"): the shared model (errors, model,
units, eseries) < faultfind/engine < faultfind/io < the library API
(faultfind/*.py and faultfind/drill/) < the front ends (faultfind/cli,
faultfind/tui).  A module may import its own layer or any layer below,
never one above; "no function-level imports to hide an arrow", so every
import counts: module level, inside functions, under ``if TYPE_CHECKING``,
and ``importlib.import_module("faultfind...")`` with a literal name.  Read
with the standard library's ``ast`` module from the source files, nothing
imported.  tests/test_layering.py keeps its own checks of the engine (no
pandas, no textual, no file I/O).  Layering is common practice (no source).
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PACKAGE = ROOT / "faultfind"

#: The layers, lowest first.
LAYERS = ("shared model", "engine", "io", "library", "front end")
#: Modules of the shared data model: every layer may use them.
SHARED = {"faultfind", "faultfind.errors", "faultfind.model", "faultfind.units",
          "faultfind.eseries"}
#: Packages below faultfind/ that belong to the library API (its other modules are files).
LIBRARY_PACKAGES = ("faultfind.drill",)
FRONT_ENDS = ("faultfind.cli", "faultfind.tui")


def _in(name, package) -> bool:
    return name == package or name.startswith(package + ".")


def layer_of(name: str) -> int:
    """The layer (index in :data:`LAYERS`) of a faultfind module.

    Raises
    ------
    LookupError
        A module in a package of no layer: say where it belongs here.
    """
    if name in SHARED:
        return 0
    if _in(name, "faultfind.engine"):
        return 1
    if _in(name, "faultfind.io"):
        return 2
    if any(_in(name, p) for p in FRONT_ENDS) or name == "faultfind.__main__":
        return 4
    if name.count(".") == 1 or any(_in(name, p) for p in LIBRARY_PACKAGES):
        return 3
    raise LookupError(f"{name} is in no layer: add its package to tests/test_import_direction.py")


def _modules() -> dict:
    """Every module of faultfind: dotted name -> (file, is a package)."""
    found = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = list(path.relative_to(ROOT).with_suffix("").parts)
        package = parts[-1] == "__init__"
        if package:
            parts = parts[:-1]
        found[".".join(parts)] = (path, package)
    return found


MODULES = _modules()


def imports_of(source: str, name: str, package: bool, known=None) -> list[tuple[int, str]]:
    """(line, faultfind module) of every import in ``source``, module ``name``.

    Relative imports are resolved against ``name`` (a package's own
    ``__init__`` when ``package``); ``from X import Y`` counts as importing
    ``X.Y`` when that is a module of ``known`` (default: faultfind's), else
    ``X``.  Imports anywhere in the tree count.
    """
    known = MODULES if known is None else known
    out = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            out += [(node.lineno, a.name) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = name.split(".") if package else name.split(".")[:-1]
                base = base[:len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module
            for a in node.names:
                sub = f"{target}.{a.name}"
                out.append((node.lineno, sub if sub in known else target))
        elif isinstance(node, ast.Call) and node.args and isinstance(node.args[0], ast.Constant) \
                and isinstance(node.args[0].value, str):
            f = node.func
            called = f.attr if isinstance(f, ast.Attribute) else getattr(f, "id", "")
            if called in ("import_module", "__import__"):
                out.append((node.lineno, node.args[0].value))
    result = []
    for line, target in out:
        if target.split(".")[0] != "faultfind":
            continue
        while target not in known and "." in target:  # an attribute: its module
            target = target.rsplit(".", 1)[0]
        if target != name:
            result.append((line, target))
    return sorted(result)


def _graph() -> dict:
    return {name: imports_of(path.read_text(encoding="utf-8"), name, package)
            for name, (path, package) in MODULES.items()}


GRAPH = _graph()


def test_every_module_is_found_and_has_a_layer():
    assert len(MODULES) > 60
    for name in ("faultfind.engine.mna", "faultfind.io.logbook", "faultfind.diagnose",
                 "faultfind.drill", "faultfind.cli.main", "faultfind.tui.app"):
        assert name in MODULES, name
    counts = [0] * len(LAYERS)
    for name in MODULES:
        counts[layer_of(name)] += 1
    assert all(c > 0 for c in counts), dict(zip(LAYERS, counts))
    assert layer_of("faultfind.io.report") < layer_of("faultfind.report") \
        < layer_of("faultfind.cli.log")
    with pytest.raises(LookupError):
        layer_of("faultfind.somewhere.new")


def test_the_reader_sees_every_kind_of_import():
    """Function-level, relative, ``from package import module``, TYPE_CHECKING and
    import_module imports are all found (a made-up module in faultfind/io)."""
    source = (
        "from typing import TYPE_CHECKING\n"
        "from faultfind.io import migrations as mig\n"
        "from ..units import format_value\n"
        "if TYPE_CHECKING:\n"
        "    from faultfind.tui.app import FaultfindApp\n"
        "def f():\n"
        "    from faultfind.diagnose import diagnose\n"
        "    import importlib\n"
        "    return importlib.import_module('faultfind.expect')\n")
    found = imports_of(source, "faultfind.io.made_up", False)
    assert found == [(2, "faultfind.io.migrations"), (3, "faultfind.units"),
                     (5, "faultfind.tui.app"), (7, "faultfind.diagnose"),
                     (9, "faultfind.expect")]
    upward = [t for _, t in found if layer_of(t) > layer_of("faultfind.io.made_up")]
    assert upward == ["faultfind.tui.app", "faultfind.diagnose", "faultfind.expect"]
    # a package's own relative imports resolve against the package itself
    assert imports_of("from .connection import Connection\n", "faultfind.io.logbook", True) \
        == [(1, "faultfind.io.logbook.connection")]


def test_function_level_imports_of_the_real_tree_are_read():
    """The library's logbook loads the diagnosis on use: an import inside a function."""
    assert "faultfind.diagnose" in [t for _, t in GRAPH["faultfind.logbook"]]
    assert "faultfind.diagnose" in [t for _, t in GRAPH["faultfind.cli.log.sessions"]]


@pytest.mark.parametrize("name", sorted(MODULES))
def test_no_import_reaches_a_higher_layer(name):
    own = layer_of(name)
    path = MODULES[name][0].relative_to(ROOT)
    bad = [f"{path}:{line} imports {target} ({LAYERS[layer_of(target)]})"
           for line, target in GRAPH[name] if layer_of(target) > own]
    assert not bad, f"{name} is in the {LAYERS[own]} layer: " + "; ".join(bad)


def test_no_two_modules_import_each_other():
    """No circle of imports (module level or inside functions) among faultfind's modules."""
    index, low, stack, on_stack, circles = {}, {}, [], set(), []

    def visit(v):  # Tarjan's strongly connected components
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for _, w in GRAPH[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            part = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                part.append(w)
                if w == v:
                    break
            if len(part) > 1:
                circles.append(sorted(part))

    for v in GRAPH:
        if v not in index:
            visit(v)
    assert circles == []
