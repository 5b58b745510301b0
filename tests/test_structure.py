"""The layout's house rules, checked (issue: one floor per concern).

Modules stay at or under 450 lines and functions at or under 80 lines, except the entries in the two
lists below, each with its reason; every public function and class (no leading underscore) of the
package carries a numpydoc docstring with a ``Parameters`` section when it takes arguments. These are
conventions of this project (DEVELOPERS.md, "Conventions"), not physics: no source needed.
"""
from __future__ import annotations

import ast
from pathlib import Path

import pytest

SRC = Path(__file__).resolve().parents[1] / "src" / "rhofollow"
MODULE_LINES = 450
FUNCTION_LINES = 80

# path relative to src/rhofollow -> reason it may stay longer (keep this list short)
LONG_MODULES: dict[str, str] = {}
# "path:function" -> reason
LONG_FUNCTIONS: dict[str, str] = {}


def _modules():
    return sorted(p for p in SRC.rglob("*.py"))


def _rel(path: Path) -> str:
    return path.relative_to(SRC).as_posix()


def test_modules_are_short():
    long = {}
    for path in _modules():
        n = path.read_text(encoding="utf-8").count("\n")
        if n > MODULE_LINES and _rel(path) not in LONG_MODULES:
            long[_rel(path)] = n
    assert not long, f"modules over {MODULE_LINES} lines (split them or add a reason): {long}"


def test_functions_are_short():
    long = {}
    for path in _modules():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                n = node.end_lineno - node.lineno + 1
                key = f"{_rel(path)}:{node.name}"
                if n > FUNCTION_LINES and key not in LONG_FUNCTIONS:
                    long[key] = n
    assert not long, f"functions over {FUNCTION_LINES} lines (split them or add a reason): {long}"


def _public(tree: ast.Module):
    for node in tree.body:
        if isinstance(node, (ast.FunctionDef, ast.ClassDef)) and not node.name.startswith("_"):
            yield node
            if isinstance(node, ast.ClassDef):
                for sub in node.body:
                    if isinstance(sub, ast.FunctionDef) and not sub.name.startswith("_"):
                        yield sub


@pytest.mark.parametrize("path", _modules(), ids=_rel)
def test_public_api_has_numpydoc(path):
    tree = ast.parse(path.read_text(encoding="utf-8"))
    missing = []
    for node in _public(tree):
        doc = ast.get_docstring(node)
        if not doc:
            missing.append(f"{node.name}: no docstring")
            continue
        if isinstance(node, ast.FunctionDef):
            args = [a.arg for a in node.args.args + node.args.kwonlyargs if a.arg not in ("self", "cls")]
            if args and "Parameters" not in doc:
                missing.append(f"{node.name}: no Parameters section")
    assert not missing, f"{_rel(path)}: " + "; ".join(missing)
