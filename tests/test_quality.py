"""House checks in the test run: the type checker and the linter pass on the package.

mypy and ruff are general-purpose tools from PyPI listed in the `test` extra of pyproject.toml; both run
as ``sys.executable -m ...`` so the interpreter running the tests finds them whatever PATH holds, and a
missing tool fails the run instead of skipping the check.
"""

from __future__ import annotations

import re
import subprocess
import sys
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def _test_extra() -> list[str]:
    """The distribution names in pyproject's `test` extra (version pins dropped)."""
    data = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    return [re.split(r"[<>=!~\[ ;]", req, maxsplit=1)[0].lower() for req in data["project"]["optional-dependencies"]["test"]]


def test_the_test_extra_lists_the_house_tools() -> None:
    extra = _test_extra()
    assert "mypy" in extra and "ruff" in extra, extra


def test_mypy_finds_no_type_errors_in_the_package() -> None:
    done = subprocess.run([sys.executable, "-m", "mypy", "netsim"], check=False, cwd=ROOT, capture_output=True, text=True)
    assert done.returncode == 0, (done.stdout + done.stderr)[-3000:]


def test_ruff_finds_no_problems() -> None:
    done = subprocess.run([sys.executable, "-m", "ruff", "check", "netsim", "tests"], check=False, cwd=ROOT, capture_output=True, text=True)
    assert done.returncode == 0, (done.stdout + done.stderr)[-3000:]


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


def test_no_test_skips_when_a_module_is_missing() -> None:
    """netsim's own modules and every dependency in pyproject are imported plainly: a missing or
    broken import must fail the run, not skip the tests that would show it."""
    import ast

    found = []
    for path in sorted((ROOT / "tests").rglob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Attribute) and node.attr in {"importorskip", "find_spec"}:
                found.append(f"{path.relative_to(ROOT)}:{node.lineno} {node.attr}")
    assert found == []
