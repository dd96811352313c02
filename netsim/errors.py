"""The one exception hierarchy of netsim.

Every error a user can cause is a :class:`NetsimError`. Its message is a single line that names
the parameter as the user wrote it (``links[3].length_km``), the value received and what is
allowed. The command line prints that line and exits with code 2, without a traceback.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from collections.abc import Callable
from typing import Any

__all__ = [
    "NetsimError",
    "checked_number",
    "nonnegative",
    "probability",
    "ParameterError",
    "Problem",
    "ScenarioError",
    "StoreError",
    "format_value",
    "integer_digits",
    "shorten",
]

#: The longest value, key or name an error message shows whole; longer ones are cut by
#: :func:`shorten` (the first characters, "..." and the full length), so that a line stays a line.
SHOWN_CHARACTERS = 60
PATH_CHARACTERS = 4 * SHOWN_CHARACTERS


class NetsimError(Exception):
    """Base class of every error netsim raises on bad input or an unusable file."""


def shorten(text: str, limit: int = SHOWN_CHARACTERS) -> str:
    """``text`` whole when it has at most ``limit`` characters, else its first ``limit``
    characters, ``...`` and its length: ``'zzzz...' (5000 characters)``. Every message builder
    passes values, keys and names through here (via :func:`format_value` and :class:`Problem`)."""
    if not text.isprintable():  # a line break or control character in a key would split the line
        text = "".join(c if c.isprintable() else repr(c)[1:-1] for c in text)
    if len(text) <= limit:
        return text
    return f"{text[:limit]}... ({len(text)} characters)"


def integer_digits(value: int) -> int:
    """The number of decimal digits of ``value``, without converting it to text (Python refuses to
    convert integers beyond 4300 digits)."""
    magnitude = abs(value)
    if magnitude < 10:
        return 1
    digits = int(math.log10(magnitude)) + 1
    if 10 ** (digits - 1) > magnitude:
        digits -= 1
    elif 10 ** digits <= magnitude:
        digits += 1
    return digits


def format_value(value: Any) -> str:
    """Render a received value compactly for an error message (long ones shortened)."""
    if isinstance(value, bool):
        return repr(value)
    if isinstance(value, float):
        return repr(value) if not math.isfinite(value) else f"{value:g}"
    if isinstance(value, os.PathLike):
        # a file path is what the user must find again: shown whole up to a longer limit
        text = os.fspath(value)
        if len(text) <= PATH_CHARACTERS:
            return repr(str(text))
        return f"{str(text)[:PATH_CHARACTERS]!r}... ({len(text)} characters)"
    if isinstance(value, str):
        if len(value) <= SHOWN_CHARACTERS:
            return repr(value)
        return f"{value[:SHOWN_CHARACTERS]!r}... ({len(value)} characters)"
    if isinstance(value, int) and value.bit_length() > 200:
        return f"{'a negative' if value < 0 else 'an'} integer of {integer_digits(value)} digits"
    return shorten(repr(value))


class ParameterError(NetsimError, ValueError):
    """A parameter outside its allowed range.

    Parameters
    ----------
    name : str
        The parameter as the user wrote it, e.g. ``"p"`` or ``"links[3].length_km"``.
    value : Any
        The value received.
    allowed : str
        What is allowed, e.g. ``"a number in [0, 1]"``.
    """

    def __init__(self, name: str, value: Any, allowed: str) -> None:
        self.name = name
        self.value = value
        self.allowed = allowed
        super().__init__(f"{shorten(name, PATH_CHARACTERS)} = {format_value(value)} is not allowed; expected {allowed}")


@dataclass(frozen=True)
class Problem:
    """One problem found in a scenario or sweep file: where, and what is wrong."""

    path: str
    message: str

    def __str__(self) -> str:
        # the keys in a path are shortened where the path is built; this is the safety net
        return f"{shorten(self.path, 4 * SHOWN_CHARACTERS)}: {self.message}" if self.path else self.message


class ScenarioError(NetsimError):
    """A scenario (or sweep specification) with one or more problems, all reported at once.

    ``str(error)`` is one line per problem, each prefixed with the file name when known.
    """

    def __init__(self, problems: list[Problem], source: str | None = None) -> None:
        self.problems = list(problems)
        self.source = source
        prefix = f"{shorten(source, 4 * SHOWN_CHARACTERS)}: " if source else ""
        super().__init__("\n".join(prefix + str(p) for p in self.problems))


class StoreError(NetsimError):
    """A result store that cannot be used (corrupt, foreign, or from another scenario)."""


def checked_number(name: str, value: Any, allowed: str, test: Callable[[float], bool]) -> float:
    """``float(value)`` when ``test`` holds for it, else a :class:`ParameterError` naming ``name``.

    NaN fails every comparison, so a ``test`` written as a comparison also rejects NaN.
    """
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise ParameterError(name, value, allowed) from None
    if not test(x):
        raise ParameterError(name, value, allowed)
    return x


def probability(name: str, value: Any) -> float:
    """``value`` as a float in [0, 1], or a ParameterError naming ``name``."""
    return checked_number(name, value, "a number in [0, 1]", lambda x: 0.0 <= x <= 1.0)


def nonnegative(name: str, value: Any) -> float:
    """``value`` as a finite float >= 0, or a ParameterError naming ``name``."""
    return checked_number(name, value, "a finite number >= 0", lambda x: math.isfinite(x) and x >= 0)
