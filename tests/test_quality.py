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
