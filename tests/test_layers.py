"""The house rules of the tree, checked on every run: layers, import circles, function length, no eval.

The layer rule lives in pyproject.toml ``[tool.importlinter]`` (import-linter's ``layers``,
``acyclic_siblings`` and ``forbidden`` contracts); this test runs it, so a new import that breaks a layer
fails CI.
"""

from __future__ import annotations

import ast
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
VKIT = REPO / "vkit"

MAX_FUNCTION_LINES = 80
"""Longest function allowed outside HDL templates (DEVELOPERS.md: aim under 60, never over 80)."""

LAYERS = ("core", "model", "video", "sim", "check", "report", "run")


def _lint_imports() -> Path:
    exe = Path(sys.executable).with_name("lint-imports")
    if exe.exists():
        return exe
    found = shutil.which("lint-imports")
    if not found:
        pytest.skip("import-linter not installed: pip install -e '.[test]'")
    return Path(found)


def test_import_contract_is_kept() -> None:
    done = subprocess.run([str(_lint_imports()), "--no-cache"], cwd=REPO, capture_output=True, text=True,
                          timeout=300)
    assert done.returncode == 0, done.stdout[-4000:] + done.stderr[-2000:]
    assert "3 kept, 0 broken" in done.stdout, done.stdout[-2000:]


def test_the_contract_names_every_layer() -> None:
    text = (REPO / "pyproject.toml").read_text()
    for layer in LAYERS:
        assert f'"{layer}"' in text or f"| {layer}" in text or f"{layer} |" in text, layer
    found = sorted(p.name for p in VKIT.iterdir() if p.is_dir() and (p / "__init__.py").exists())
    assert found == sorted(LAYERS), f"a new package needs its place in the contract: {found}"


def _functions() -> list[tuple[int, str]]:
    rows = []
    for path in sorted(VKIT.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                size = (node.end_lineno or node.lineno) - node.lineno + 1
                rows.append((size, f"{path.relative_to(REPO)}:{node.lineno} {node.name}"))
    return rows


def test_no_function_is_too_long_to_read_at_once() -> None:
    long = sorted((size, where) for size, where in _functions() if size > MAX_FUNCTION_LINES)
    assert not long, f"functions over {MAX_FUNCTION_LINES} lines (split into named steps): {long}"


def test_no_eval_or_exec_in_vkit() -> None:
    hits = []
    for path in sorted(VKIT.rglob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id in ("eval", "exec"):
                hits.append(f"{path.relative_to(REPO)}:{node.lineno}")
    assert not hits, hits
