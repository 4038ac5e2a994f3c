"""The engine's layering: numpy and scipy only, no screens, no tables, no files.

common.md: engine modules (faultfind/engine/) import numpy/scipy only -- no
pandas, no textual, no file I/O; layout.md: "the engine knows nothing of
files, databases or screens".  Checked two ways: importing every engine module
in a fresh interpreter and looking at ``sys.modules``, and scanning the
engine's source with the standard library's ``ast`` module.
"""

from __future__ import annotations

import ast
import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
ENGINE = ROOT / "faultfind" / "engine"
MODULES = sorted(p for p in ENGINE.glob("*.py"))
NAMES = ["faultfind.engine"] + [f"faultfind.engine.{p.stem}" for p in MODULES
                                if p.stem != "__init__"]

FORBIDDEN_LOADED = ("pandas", "textual")
#: Standard-library modules that read or write files, databases or terminals.
IO_MODULES = {"io", "os", "pathlib", "shutil", "tempfile", "glob", "csv", "json", "tomllib",
              "sqlite3", "pickle", "shelve", "fileinput", "builtins", "subprocess", "sys"}
#: Calls that read or write files.
IO_CALLS = {"open", "read_text", "write_text", "read_bytes", "write_bytes", "loadtxt", "savetxt",
            "genfromtxt", "fromfile", "tofile", "savez", "savez_compressed", "save", "mmap"}
#: faultfind modules the engine may use: the shared data model and errors.
ALLOWED_FAULTFIND = {"faultfind.model", "faultfind.errors"}


def test_engine_modules_found():
    assert len(NAMES) > 10
    assert "faultfind.engine.updates" in NAMES and "faultfind.engine.mna" in NAMES


def test_importing_the_engine_loads_neither_pandas_nor_textual():
    """Each engine module imported in turn in a fresh interpreter; after each,
    none of pandas and textual may be in ``sys.modules``."""
    code = (
        "import importlib, json, sys\n"
        f"names = {NAMES!r}\n"
        f"bad = {FORBIDDEN_LOADED!r}\n"
        "found = {}\n"
        "for n in names:\n"
        "    importlib.import_module(n)\n"
        "    hit = [m for m in sys.modules if m.split('.')[0] in bad]\n"
        "    if hit:\n"
        "        found[n] = sorted(hit)[:5]\n"
        "        break\n"
        "print(json.dumps({'found': found, 'numpy': 'numpy' in sys.modules}))\n"
    )
    p = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True,
                       timeout=120)
    assert p.returncode == 0, p.stderr
    doc = json.loads(p.stdout.strip().splitlines()[-1])
    assert doc["numpy"]                        # the import really happened
    assert doc["found"] == {}, f"engine import loaded {doc['found']}"


def _imports(tree):
    """(module name, is relative, level) of every import in a module."""
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for a in node.names:
                yield a.name, 0
        elif isinstance(node, ast.ImportFrom):
            yield (node.module or ""), node.level


def _absolute(name, level, package="faultfind.engine"):
    if level == 0:
        return name
    base = package.split(".")[: len(package.split(".")) - (level - 1)]
    return ".".join(base + ([name] if name else []))


@pytest.mark.parametrize("path", MODULES, ids=[p.name for p in MODULES])
def test_engine_source_imports_numpy_scipy_and_the_model_only(path):
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    for name, level in _imports(tree):
        full = _absolute(name, level)
        top = full.split(".")[0]
        if top == "faultfind":
            assert (full.startswith("faultfind.engine") or full in ALLOWED_FAULTFIND), (
                f"{path.name} imports {full}: the engine must not reach the I/O, CLI or UI layers")
        elif top in ("numpy", "scipy", "__future__"):
            continue
        else:
            assert top in sys.stdlib_module_names, f"{path.name} imports third-party {full}"
            assert top not in IO_MODULES, f"{path.name} imports {full}: file/terminal I/O"


@pytest.mark.parametrize("path", MODULES, ids=[p.name for p in MODULES])
def test_engine_source_has_no_file_io(path):
    text = path.read_text(encoding="utf-8")
    tree = ast.parse(text, filename=str(path))
    for node in ast.walk(tree):
        if isinstance(node, ast.Call):
            f = node.func
            if isinstance(f, ast.Name):
                name = f.id
            elif isinstance(f, ast.Attribute):
                name = f.attr
            else:
                name = ""
            assert name not in IO_CALLS, f"{path.name}:{node.lineno}: call to {name}()"
    # The plain text scan the brief asks for, besides the syntax-tree one.
    code_lines = [ln.split("#")[0] for ln in text.splitlines()]
    for i, ln in enumerate(code_lines, 1):
        assert "open(" not in ln, f"{path.name}:{i}: {ln.strip()}"
        assert "pathlib" not in ln and "Path(" not in ln, f"{path.name}:{i}: {ln.strip()}"
