"""Command-line hardening: negative seeds are refused by every command that takes ``--seed``, and
a bare ``netsim`` prints its usage to stderr with exit code 2 (issue 14, items 11 and 15).

Every case runs ``main`` in process and checks: exit code 2, one error line on stderr naming the
option, the value and what is allowed, nothing on stdout, and no traceback.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import pytest

from netsim.cli import build_parser, main

ROOT = Path(__file__).resolve().parents[1]
CHAIN3 = str(ROOT / "scenarios" / "chain3.toml")

#: Every command that takes --seed, with the arguments that make it otherwise valid.
SEEDED = {
    "compare": [CHAIN3, CHAIN3, "--no-simulate"],
    "run": [CHAIN3, "--pairs", "1"],
    "design": [CHAIN3],
    "report": [CHAIN3],
    "sensitivity": [CHAIN3],
    "sweep": [CHAIN3, "--vary", "links[0].length_km=5,10", "--dry-run"],
}


def _seeded_commands() -> set[str]:
    parser = build_parser()
    commands = set()
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for name, sub in action.choices.items():
                if any("--seed" in a.option_strings for a in sub._actions):
                    commands.add(name)
    return commands


def _main(argv: list[str]) -> int:
    """``main``'s exit code, also when the parser itself exits (a refused option value)."""
    try:
        return main(argv)
    except SystemExit as exc:
        return int(exc.code or 0)


def test_the_list_covers_every_command_with_a_seed() -> None:
    # a new command with --seed must join SEEDED, so the refusal below is checked for it too
    assert _seeded_commands() == set(SEEDED)


def test_numpy_refuses_a_negative_seed() -> None:
    # the rule the CLI applies is numpy's own: seeds are non-negative integers (numpy.random.SeedSequence
    # documentation: "entropy ... non-negative"); a negative seed was echoed as if it had been used
    with pytest.raises(ValueError):
        np.random.default_rng(-1)


@pytest.mark.parametrize("command", sorted(SEEDED))
@pytest.mark.parametrize("seed", ["-1", "-7", "ten", "1.5"])
def test_every_command_refuses_a_bad_seed_in_one_line(command: str, seed: str, capsys, tmp_path,
                                                      monkeypatch) -> None:
    monkeypatch.chdir(tmp_path)  # nothing may be written, but if it were, not into the tree
    code = _main([command, *SEEDED[command], f"--seed={seed}"])
    out, err = capsys.readouterr()
    assert code == 2
    assert out == ""
    lines = err.strip().splitlines()
    shown = seed if seed.startswith("-") else repr(seed)
    assert lines == [f"netsim {command}: error: --seed = {shown} is not allowed; expected an integer >= 0"]
    assert not list(tmp_path.iterdir())


def test_the_reported_compare_case_no_longer_prints_seed_minus_one(capsys) -> None:
    # the reproducer of item 11: exit 0 and "(seed -1)" before
    code = _main(["compare", CHAIN3, CHAIN3, "--seed", "-1", "--no-simulate"])
    out, err = capsys.readouterr()
    assert code == 2
    assert "(seed -1)" not in out + err
    assert err.strip() == "netsim compare: error: --seed = -1 is not allowed; expected an integer >= 0"


def test_seed_zero_and_a_large_seed_are_accepted(capsys, tmp_path, monkeypatch) -> None:
    monkeypatch.chdir(tmp_path)
    for seed in ("0", str(2**80)):  # numpy accepts any non-negative integer as entropy (numpy docs)
        code = _main(["sweep", CHAIN3, "--vary", "links[0].length_km=5,10", "--dry-run", "--seed", seed])
        out, err = capsys.readouterr()
        assert code == 0, err
        assert "2 points" in out


def test_bare_netsim_prints_the_usage_to_stderr_and_exits_2(capsys) -> None:
    # argparse's own convention for a missing required argument (Python documentation, argparse:
    # usage and "error:" on stderr, exit status 2), which `git`-style tools without a command follow
    # (common practice); stdout stays empty so a pipe gets no help text as data
    code = _main([])
    out, err = capsys.readouterr()
    assert code == 2
    assert out == ""
    lines = err.strip().splitlines()
    assert lines[0].startswith("usage: netsim ")
    assert lines[1].startswith("netsim: error: a command is required; one of link, check, budget, run")
    assert len(lines) == 2


def test_help_still_goes_to_stdout_with_exit_0(capsys) -> None:
    # `--help` is a request, not an error: stdout, exit 0 (argparse; common practice)
    code = _main(["--help"])
    out, err = capsys.readouterr()
    assert code == 0
    assert out.startswith("usage: netsim ") and err == ""
