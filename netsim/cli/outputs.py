"""Results are never replaced silently: a command that would overwrite an earlier result
refuses, naming the file and the two ways on (``--force`` to replace it, ``--out DIR`` to keep
both)."""

from __future__ import annotations

import argparse
from collections.abc import Iterable
from pathlib import Path

__all__ = ["add_force_option", "refuse_overwrite"]


def add_force_option(parser: argparse.ArgumentParser) -> None:
    """Add ``--force`` (replace earlier results) to a command that writes files."""
    parser.add_argument("--force", action="store_true",
                        help="replace earlier results in the output directory (default: refuse)")


def _holds_something(path: Path) -> bool:
    if path.is_dir():
        return any(path.iterdir())
    return path.exists()


def refuse_overwrite(paths: Iterable[Path], force: bool, what: str) -> None:
    """A one-line :class:`NetsimError` if any of ``paths`` (files, or directories that are not
    empty) already exists and ``force`` is false."""
    from netsim.errors import NetsimError

    if force:
        return
    for path in paths:
        if _holds_something(path):
            raise NetsimError(f"{path} already holds an earlier {what}; pass --force to replace it, "
                              "or --out DIR to keep both")
