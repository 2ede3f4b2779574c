"""The shape of the code: module and function sizes, who may import whom, options declared once.

These rules are the project's own (DEVELOPERS.md, "Layout"); nothing here checks a computation.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = {"logger": "coilshift.logger", "analysis": "coilshift.analysis", "cli": "coilshift.cli",
            "sim": "coilshift.sim", "api": "coilshift"}
#: a module longer than this is doing more than one job
MAX_MODULE_LINES = 450
#: a longer function needs a reason, given in its docstring after this phrase
MAX_FUNCTION_LINES = 80
LONG_REASON = "Why this is long:"
#: package -> packages it must never import
FORBIDDEN = {
    "coilshift.logger": ("coilshift.analysis", "coilshift.cli", "coilshift.sim"),
    "coilshift.analysis": ("coilshift.cli", "coilshift.sim"),
    "coilshift.sim": ("coilshift.cli",),
}


def _source_files() -> list[Path]:
    return sorted(p for d in PACKAGES for p in (ROOT / d).rglob("*.py") if "__pycache__" not in p.parts)


def _module_name(path: Path) -> str:
    rel = path.relative_to(ROOT).with_suffix("")
    parts = list(rel.parts)
    name = ".".join([PACKAGES[parts[0]]] + parts[1:])
    return name.removesuffix(".__init__")


def _imports(tree: ast.AST) -> list[str]:
    names = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names += [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.append(node.module)
            names += [f"{node.module}.{a.name}" for a in node.names]
    return names


FILES = _source_files()


def test_the_tree_is_found():
    assert len(FILES) > 40


@pytest.mark.parametrize("path", FILES, ids=lambda p: str(p.relative_to(ROOT)))
def test_module_size(path):
    lines = path.read_text().count("\n")
    assert lines <= MAX_MODULE_LINES, f"{path.relative_to(ROOT)} has {lines} lines (at most {MAX_MODULE_LINES})"


@pytest.mark.parametrize("path", FILES, ids=lambda p: str(p.relative_to(ROOT)))
def test_function_size(path):
    tree = ast.parse(path.read_text())
    long = []
    for node in ast.walk(tree):
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            n = node.end_lineno - node.lineno + 1
            if n > MAX_FUNCTION_LINES and LONG_REASON not in (ast.get_docstring(node) or ""):
                long.append(f"{node.name} ({n} lines)")
    assert not long, f"{path.relative_to(ROOT)}: {', '.join(long)} without '{LONG_REASON}' in the docstring"


@pytest.mark.parametrize("path", FILES, ids=lambda p: str(p.relative_to(ROOT)))
def test_import_direction(path):
    me = _module_name(path)
    banned = next((v for k, v in FORBIDDEN.items() if me == k or me.startswith(k + ".")), ())
    bad = [n for n in _imports(ast.parse(path.read_text())) if n.startswith(banned)] if banned else []
    assert not bad, f"{me} imports {sorted(set(bad))}"


def test_no_command_module_imports_another():
    cmds = {p for p in FILES if p.parent.name == "cli" and p.name.startswith("cmd_")}
    names = {_module_name(p) for p in cmds}
    bad = []
    for p in cmds:
        others = {n for n in _imports(ast.parse(p.read_text())) if n in names and n != _module_name(p)}
        bad += [f"{p.name} -> {o}" for o in sorted(others)]
    assert not bad, bad


def test_every_subpackage_says_what_lives_there():
    inits = [p for p in FILES if p.name == "__init__.py"]
    assert len(inits) >= 10
    for p in inits:
        doc = ast.get_docstring(ast.parse(p.read_text()))
        assert doc and len(doc) > 40, f"{p.relative_to(ROOT)} has no docstring saying what lives there"


def _option_declarations() -> dict[str, list[str]]:
    """Option string -> the files (and lines) whose add_argument calls declare it."""
    found: dict[str, list[str]] = {}
    for p in FILES:
        if p.parent.name != "cli":
            continue
        for node in ast.walk(ast.parse(p.read_text())):
            if isinstance(node, ast.Call) and getattr(node.func, "attr", "") == "add_argument":
                for a in node.args:
                    if isinstance(a, ast.Constant) and isinstance(a.value, str) and a.value.startswith("-"):
                        found.setdefault(a.value, []).append(f"{p.name}:{node.lineno}")
    return found


def test_each_option_is_declared_once():
    repeated = {opt: where for opt, where in _option_declarations().items() if len(where) > 1}
    assert not repeated, f"declared more than once (define shared options in cli/options.py): {repeated}"
