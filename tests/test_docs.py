"""The README cannot rot: its commands parse, its Python example runs, its set-up is what CI runs.

Checks against the project's own documents (README.md, .ci/run); no physics is asserted here
beyond what the example prints.
"""

from __future__ import annotations

import math
import re
import shlex
from pathlib import Path

import pytest

from netsim.cli import build_parser

ROOT = Path(__file__).resolve().parent.parent
README = (ROOT / "README.md").read_text(encoding="utf-8")


def _code_blocks(language: str) -> list[str]:
    """The README's fenced code blocks whose info string is ``language`` ("" for plain ones)."""
    blocks: list[str] = []
    current: list[str] | None = None
    fence_language = ""
    for line in README.splitlines():
        if line.startswith("```"):
            if current is None:
                current, fence_language = [], line[3:].strip()
            else:
                if fence_language == language:
                    blocks.append("\n".join(current) + "\n")
                current = None
        elif current is not None:
            current.append(line)
    return blocks


def _netsim_commands() -> list[list[str]]:
    commands = []
    for block in _code_blocks(""):
        for line in block.splitlines():
            for part in line.split("&&"):
                words = shlex.split(part.strip())
                if words[:1] == ["netsim"]:
                    commands.append(words[1:])
    return commands


def test_the_readme_opens_with_the_job_and_two_setup_commands() -> None:
    first_block = _code_blocks("")[0].strip().splitlines()
    assert len(first_block) == 2
    install, tests = first_block
    assert install.startswith("pip install") and "netsim sweep scenarios/" in install and "netsim report" in install
    assert tests.startswith("pip install -e '.[test]'") and "python -m pytest -q" in tests
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert "python3 -m pytest -q" in ci and ".[test]" in ci


@pytest.mark.parametrize("argv", _netsim_commands(), ids=lambda argv: " ".join(argv)[:60])
def test_every_readme_command_parses(argv: list[str]) -> None:
    args = build_parser().parse_args(argv)
    assert callable(args.func)


def test_every_scenario_the_readme_names_exists() -> None:
    for name in set(re.findall(r"scenarios/[\w.-]+\.toml", README)):
        assert (ROOT / name).is_file(), name


def test_the_python_api_example_runs_and_prints_what_it_says(monkeypatch: pytest.MonkeyPatch,
                                                              capsys: pytest.CaptureFixture[str]) -> None:
    (block,) = _code_blocks("python")
    monkeypatch.chdir(ROOT)
    exec(compile(block, "README.md", "exec"), {})  # noqa: S102 -- running the documented example is the point
    first, second = capsys.readouterr().out.strip().splitlines()
    assert float(first.split()[0]) > 0
    eof, fid = (float(x) for x in second.split())
    # Werner w = 0.8: F = (1 + 3w)/4 = 0.85 (DESIGN convention); C = 2F - 1 = 0.7 and
    # EoF = h((1 + sqrt(1 - C^2))/2) (Wootters, PRL 80, 2245, 1998).
    assert fid == pytest.approx(0.85, abs=1e-12)
    x = (1 + math.sqrt(1 - 0.7**2)) / 2
    assert eof == pytest.approx(-x * math.log2(x) - (1 - x) * math.log2(1 - x), abs=1e-10)
