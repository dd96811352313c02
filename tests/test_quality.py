"""House checks in the test run: the type checker and the linter pass on the package.

mypy and ruff are general-purpose tools from PyPI (the `test` extra); skipped if absent.
"""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def test_mypy_finds_no_type_errors_in_the_package() -> None:
    pytest.importorskip("mypy")
    done = subprocess.run([sys.executable, "-m", "mypy", "netsim"], check=False, cwd=ROOT, capture_output=True, text=True)
    assert done.returncode == 0, done.stdout[-3000:]


def test_ruff_finds_no_problems() -> None:
    if shutil.which("ruff") is None:
        pytest.skip("ruff is not installed")
    done = subprocess.run(["ruff", "check", "netsim", "tests"], check=False, cwd=ROOT, capture_output=True, text=True)
    assert done.returncode == 0, done.stdout[-3000:]


_LAYERS = ("qinfo", "scenario", "hardware", "network", "engine", "sweep", "report", "cli")


def test_dependencies_point_down_only() -> None:
    """No module imports a layer above its own (the layer order of DEVELOPERS.md, which is the
    project's own rule; ``netsim.table`` and ``netsim.errors`` sit below every layer)."""
    import ast

    root = Path(__file__).resolve().parents[1] / "netsim"
    wrong = []
    for path in root.rglob("*.py"):
        parts = path.relative_to(root).parts
        if len(parts) < 2 or parts[0] not in _LAYERS:
            continue
        mine = _LAYERS.index(parts[0])
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            names = ([a.name for a in node.names] if isinstance(node, ast.Import)
                     else [node.module or ""] if isinstance(node, ast.ImportFrom) else [])
            for name in names:
                bits = name.split(".")
                if bits[0] == "netsim" and len(bits) > 1 and bits[1] in _LAYERS \
                        and _LAYERS.index(bits[1]) > mine:
                    wrong.append(f"{path.relative_to(root)} imports {name}")
    assert wrong == []
