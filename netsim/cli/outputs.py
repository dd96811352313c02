"""Where commands write, checked in one place.

Results are never replaced silently: a command that would overwrite an earlier result refuses,
naming the file and the two ways on (``--force`` to replace it, ``--out DIR`` to keep both).

Every output path option (``--out DIR`` of ``run``, ``report``, ``compare``, ``design`` and
``sensitivity``; ``--out FILE`` of ``import``; ``--store PATH`` of ``sweep``) is checked here
before any work starts: a directory option must name a directory or a path that can become one
(no existing file on it or above it), a file option a path whose directory can be created, and
the first existing directory on the way must be writable. A failure is one line naming the
option, the path and what is allowed (a :class:`~netsim.errors.ParameterError`). Writing itself
runs inside :func:`writing`, which turns an ``OSError`` the checks could not foresee (a full
disk, a read-only file system, a directory made read-only meanwhile) into the same kind of line.
"""

from __future__ import annotations

import argparse
import errno
import os
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path

from netsim.errors import ParameterError

__all__ = ["add_force_option", "check_output_dir", "check_output_file", "refuse_overwrite", "writing"]


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


def _first_existing(path: Path) -> Path:
    """``path`` or its nearest ancestor that exists (``.`` for a relative path with none)."""
    for candidate in (path, *path.parents):
        if os.path.lexists(candidate):
            return candidate
    return Path(".")


def _writable(directory: Path) -> bool:
    return os.access(directory, os.W_OK | os.X_OK)


def _check_ancestors(option: str, path: Path, allowed: str, start: Path) -> None:
    """The nearest existing ancestor of ``start`` must be a directory this process may write to."""
    existing = _first_existing(start)
    if not existing.is_dir():
        raise ParameterError(option, Path(path), f"{allowed} ({existing} is a file, not a directory)")
    if not _writable(existing):
        raise ParameterError(option, Path(path), f"{allowed} ({existing} is not writable)")


def check_output_dir(option: str, path: str | Path) -> Path:
    """``path`` as a Path if it is, or can be made, a directory this process writes into.

    Refused (one line naming ``option``): an existing file at ``path`` or above it, or a first
    existing directory that is not writable.
    """
    path = Path(path)
    allowed = "a directory path that can be created and written to"
    if path.exists() and not path.is_dir():
        raise ParameterError(option, Path(path), f"{allowed} (it is an existing file)")
    _check_ancestors(option, path, allowed, path)
    return path


def check_output_file(option: str, path: str | Path) -> Path:
    """``path`` as a Path if a file can be written there: not a directory, its directory
    existing or creatable (no file in the way) and writable (SQLite stores also need the
    directory, for their journal files)."""
    path = Path(path)
    allowed = "a file path whose directory can be created and written to"
    if path.is_dir():
        raise ParameterError(option, Path(path), f"{allowed} (it is an existing directory)")
    if path.exists() and not os.access(path, os.W_OK):
        raise ParameterError(option, Path(path), f"{allowed} (the file is read-only)")
    _check_ancestors(option, path, allowed, path.parent)
    return path


_WHY = {errno.EACCES: "permission denied", errno.EPERM: "permission denied",
        errno.EROFS: "read-only file system", errno.ENOSPC: "no space left on the device",
        errno.EEXIST: "a file is in the way", errno.ENOTDIR: "a file is in the way",
        errno.EISDIR: "a directory is in the way", errno.ENAMETOOLONG: "the name is too long"}


@contextmanager
def writing(option: str, path: str | Path) -> Iterator[None]:
    """Run a command's writing step; an ``OSError`` becomes one line naming ``option``, the path
    the user gave and the file that failed."""
    try:
        yield
    except OSError as exc:
        why = _WHY.get(exc.errno or 0, exc.strerror or type(exc).__name__)
        where = f" at {exc.filename}" if exc.filename and str(exc.filename) != str(path) else ""
        raise ParameterError(option, Path(path), f"a location that can be written to (writing failed"
                                                f"{where}: {why})") from None
