"""The ``netsim`` command line: parsing and printing only, no physics.

Each subcommand lives in its own module in this package and exposes
``register(subparsers) -> None``, which adds its parser and sets ``func`` (a callable taking the
parsed namespace and returning an exit code). Errors a user can cause are :class:`NetsimError`;
they are printed as one line on stderr and the process exits with code 2, without a traceback.
Ctrl-C exits with code 130 after the command has had its chance to leave files consistent.
"""

from __future__ import annotations

import argparse
import difflib
import importlib
import importlib.util
import re
import sys
from collections.abc import Sequence
from typing import Any, NoReturn

from netsim import __version__
from netsim.errors import NetsimError, format_value, shorten
from netsim.interrupts import interrupt_deferred, interrupt_guarded

__all__ = ["OneLineParser", "build_parser", "main", "seed_value"]

#: Subcommand modules, in the order ``netsim --help`` lists them.
COMMANDS = ("link", "check", "budget", "run", "sweep", "sensitivity", "report", "compare", "profiles", "design",
            "import")


class OneLineParser(argparse.ArgumentParser):
    """An argument parser whose errors are a single line and exit code 2. Prefixes of options
    are never taken for the option (``--pair 10`` is refused and ``--pairs`` suggested): a typo
    must not run a long job with a value meant for something else."""

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        kwargs["allow_abbrev"] = False
        super().__init__(*args, **kwargs)

    def error(self, message: str) -> NoReturn:
        self.exit(2, f"{self.prog}: error: {house_style(message)}\n")


_KINDS = {"int": "an integer", "float": "a number"}

#: What to do after Ctrl-C, by command.
_RESUME = {"sweep": "; run the same command again to resume (finished points are not rerun)"}


def house_style(message: str) -> str:
    """An argparse complaint about a value in the form every netsim error takes:
    ``--pairs = 'ten' is not allowed; expected an integer``. Other messages pass unchanged."""
    match = re.fullmatch(r"argument (\S+?)(?:/\S+)?: invalid (int|float) value: '(.*)'", message)
    if match:
        return f"{match[1]} = {format_value(match[3])} is not allowed; expected {_KINDS[match[2]]}"
    match = re.fullmatch(r"argument (\S+?)(?:/\S+)?: invalid choice: '(.*)' \(choose from (.*)\)", message)
    if match:
        choices = ", ".join(c.strip().strip("'") for c in match[3].split(","))
        return f"{match[1]} = {format_value(match[2])} is not allowed; expected one of {choices}"
    match = re.fullmatch(r"argument (\S+?)(?:/\S+)?: (\1 = .*)", message, flags=re.DOTALL)
    if match:  # a value refused by the option's own type (e.g. seed_value): already house style
        return match[2]
    return message


#: What ``--seed`` takes in every command.
SEED_ALLOWED = "an integer >= 0"


def seed_value(text: str) -> int:
    """The ``type`` of every ``--seed`` option: an integer >= 0 (numpy's seeds are non-negative;
    a negative one must not be echoed back as if it had been used)."""
    try:
        seed = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"--seed = {format_value(text)} is not allowed; "
                                         f"expected {SEED_ALLOWED}") from None
    if seed < 0:
        raise argparse.ArgumentTypeError(f"--seed = {format_value(seed)} is not allowed; expected {SEED_ALLOWED}")
    return seed


def build_parser() -> argparse.ArgumentParser:
    parser = OneLineParser(
        prog="netsim",
        description="Planning estimates for metropolitan quantum networks.",
    )
    parser.add_argument("--version", action="version", version=f"netsim {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=OneLineParser)
    for name in COMMANDS:
        module_name = f"netsim.cli.{name}_cmd"
        if importlib.util.find_spec(module_name) is None:
            continue
        importlib.import_module(module_name).register(sub)
    return parser


def _command_names(parser: argparse.ArgumentParser) -> list[str]:
    """The subcommands the parser knows, in the order ``netsim --help`` lists them."""
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            return list(action.choices)
    return []


def _unknown_option(parser: argparse.ArgumentParser, command: str | None, extra: list[str]) -> str:
    """One line for arguments no option takes, naming the command, with the nearest option."""
    prog = f"netsim {command}" if command else "netsim"
    options: list[str] = []
    for action in parser._actions:  # the subcommand's parser holds its option strings
        if isinstance(action, argparse._SubParsersAction) and command in action.choices:
            options = [o for a in action.choices[command]._actions for o in a.option_strings]
    word = extra[0].split("=", 1)[0]
    close = difflib.get_close_matches(word, options, n=1) if word.startswith("-") else []
    hint = f"did you mean {close[0]}? " if close else ""
    return (f"{prog}: error: {shorten(' '.join(extra))}: not an option or argument of {prog}; "
            f"{hint}see {prog} --help")


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; Ctrl-C while it is still starting (importing, parsing) exits 130
    with one line, as Ctrl-C during a command does (see :func:`netsim.interrupts.interrupt_guarded`
    for a Ctrl-C that lands where Python cannot raise it)."""
    try:
        with interrupt_guarded():
            return _main(argv)
    except KeyboardInterrupt:
        print("netsim: interrupted", file=sys.stderr)
        return 130


def _main(argv: Sequence[str] | None = None) -> int:
    with interrupt_deferred():  # the commands' modules load here (see netsim.interrupts)
        parser = build_parser()
    args, extra = parser.parse_known_args(argv)
    if extra:
        print(_unknown_option(parser, getattr(args, "command", None), extra), file=sys.stderr)
        return 2
    if not getattr(args, "func", None):
        # as argparse does for a missing required argument: the usage and one line on stderr, exit 2
        parser.print_usage(sys.stderr)
        print(f"netsim: error: a command is required; one of {', '.join(_command_names(parser))} "
              "(netsim --help describes them)", file=sys.stderr)
        return 2
    args.argv = list(argv) if argv is not None else None  # the command as typed, for provenance
    try:
        return int(args.func(args) or 0)
    except NetsimError as exc:
        for line in str(exc).splitlines() or [type(exc).__name__]:
            print(f"netsim {args.command}: error: {line}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"netsim {args.command}: interrupted; results written so far are kept"
              + _RESUME.get(args.command, ""), file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
