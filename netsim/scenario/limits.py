"""Size limits of a scenario file, checked before the TOML parser or any recursive walk runs.

A scenario is a few tables of sites, links and demands: a few kilobytes, nested four levels deep
(file > ``[sweep]`` > ``vary`` > a list of values). The parser and the loader walk nested arrays,
inline tables and dotted keys recursively, so a file nested a thousand levels deep, or a key of
five thousand parts, would exhaust Python's stack; an integer literal beyond 4300 digits is
refused by Python's own integer conversion. These limits turn each such file into one
:class:`~netsim.errors.Problem` line, far from anything a real network needs:

``MAX_FILE_BYTES``
    the size of the file (8 MiB; a generated 1,000-site metro scenario is under 1 MiB).
``MAX_DEPTH``
    levels of nesting, counting tables, arrays, inline tables and the parts of dotted keys and
    ``[a.b.c]`` headers alike (32).
``MAX_INTEGER_DIGITS``
    digits of an integer literal (4300, Python's limit on converting text to an integer; every
    integer key of a scenario has a far smaller upper bound, reported by the loader).

:func:`scan_text` checks the text (before parsing), :func:`deepest` the parsed data (before the
loader copies it), both without recursion.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from typing import Any

from netsim.errors import Problem, shorten

__all__ = ["MAX_DEPTH", "MAX_FILE_BYTES", "MAX_INTEGER_DIGITS", "deepest", "depth_problem", "scan_text"]

MAX_FILE_BYTES = 8 * 1024 * 1024
MAX_DEPTH = 32
MAX_INTEGER_DIGITS = 4300

_KEY = r"""(?:[A-Za-z0-9_-]++|"(?:[^"\\\n]|\\.)*+"|'[^'\n]*+')"""
_DOTTED = rf"{_KEY}(?:[ \t]*+\.[ \t]*+{_KEY})*+"
# One token of the text: comments and strings are skipped whole, so brackets and digits inside
# them do not count. Possessive quantifiers keep the scan linear on any input.
_TOKEN = re.compile(
    rf'''(?P<other>[^"'#\[\]{{}}A-Za-z0-9_+-]++)'''  # spaces, '=', ',' ...: skipped in one step
    rf'''|(?P<open>[\[{{])|(?P<close>[\]}}])'''
    rf'''|(?P<comment>\#[^\n]*+)'''
    rf'''|(?P<mlstring>"""(?:[^\\]|\\.)*?"""|\'\'\'.*?\'\'\')'''
    rf'''|(?P<assign>{_DOTTED})[ \t]*+=(?!=)'''
    rf'''|(?P<dotted>{_KEY}(?:[ \t]*+\.[ \t]*+{_KEY})++)'''
    rf'''|(?P<string>"(?:[^"\\\n]|\\.)*+"|'[^'\n]*+')'''
    rf'''|(?<![0-9A-Za-z_])(?P<integer>[+-]?[0-9][0-9_]*+)(?![.eE0-9_A-Za-z])'''
    rf'''|(?P<word>[A-Za-z0-9_+-]++)''',  # any other bare word, consumed whole (keeps the scan linear)
    re.DOTALL,
)
_PART = re.compile(_KEY)
_HEADER = re.compile(rf"(\[\[?)[ \t]*+({_DOTTED})")


def _line(text: str, pos: int) -> int:
    return text.count("\n", 0, pos) + 1


def _parts(dotted: str) -> list[str]:
    return [m.group() for m in _PART.finditer(dotted)]


def scan_text(text: str) -> list[Problem]:
    """Problems of the raw TOML text: nesting deeper than :data:`MAX_DEPTH`, a key with more
    than :data:`MAX_DEPTH` parts, or an integer literal longer than :data:`MAX_INTEGER_DIGITS`
    digits (named by the key it is assigned to). Empty when the text is within every limit.

    The scan is a tokenizer, not a parser: it may miss a problem of a file that is not valid TOML
    (the parser then reports the syntax error), but it never refuses a valid file within the limits.
    """
    problems: list[Problem] = []
    depth = 0
    header = ""  # the table the scan is in, as a key path (``sites[2]``), and its name (``sites``)
    table = ""
    key = ""
    arrays: dict[str, int] = {}
    for match in _TOKEN.finditer(text):
        kind = match.lastgroup
        if kind == "open":
            start = text.rfind("\n", 0, match.start()) + 1
            if depth == 0 and text[start:match.start()].strip() == "":
                header_match = _HEADER.match(text, match.start())
                if header_match:
                    parts = _parts(header_match[2])
                    if len(parts) > MAX_DEPTH:
                        return [_long_key(parts, text, match.start())]
                    table, key = ".".join(parts), ""
                    header = table
                    if header_match[1] == "[[":
                        arrays[table] = arrays.get(table, -1) + 1
                        header = f"{table}[{arrays[table]}]"
            depth += 1
            if depth > MAX_DEPTH:
                where = ".".join(p for p in (header, key) if p)
                problems.append(Problem(shorten(where), f"arrays, inline tables and dotted keys nest more "
                                        f"than {MAX_DEPTH} levels deep here (line {_line(text, match.start())}), "
                                        f"which is not allowed; expected at most {MAX_DEPTH} levels"))
                return problems
        elif kind == "close":
            depth = max(0, depth - 1)
        elif kind == "assign":  # (a "dotted" token is a float or part of a header: not counted)
            parts = _parts(match.group(kind))
            if len(parts) > MAX_DEPTH:
                return [_long_key(parts, text, match.start())]
            if depth == 0:  # a key of the table, not one inside an inline table
                key = ".".join(parts)
        elif kind == "integer":
            digits = sum(ch.isdigit() for ch in match.group(kind))
            if digits > MAX_INTEGER_DIGITS:
                where = ".".join(p for p in (header, key) if p)
                problems.append(Problem(shorten(where), f"an integer of {digits} digits (line "
                                        f"{_line(text, match.start())}) is not allowed; expected at most "
                                        f"{MAX_INTEGER_DIGITS} digits{_allowed(table, key)}"))
    return problems


def _long_key(parts: list[str], text: str, pos: int) -> Problem:
    return Problem(shorten(".".join(parts)), f"a key of {len(parts)} parts (line {_line(text, pos)}) is not "
                                             f"allowed; expected at most {MAX_DEPTH} parts")


def _allowed(header: str, key: str) -> str:
    """``; <key> takes <what is allowed>`` for a key of the scenario reference, else ''."""
    from netsim.scenario.fields import (
        COSTS_FIELDS,
        DEMAND_FIELDS,
        LINK_FIELDS,
        NETWORK_FIELDS,
        PROTOCOL_FIELDS,
        SITE_FIELDS,
    )

    tables = {"network": NETWORK_FIELDS, "sites": SITE_FIELDS, "links": LINK_FIELDS,
              "demands": DEMAND_FIELDS, "costs": COSTS_FIELDS, "protocol": PROTOCOL_FIELDS,
              "defaults.site": SITE_FIELDS, "defaults.link": LINK_FIELDS}
    spec = tables.get(header, {}).get(key)
    return f" ({key} takes {spec.allowed()})" if spec is not None else ""


def deepest(data: Any) -> tuple[int, str]:
    """The nesting depth of parsed data (tables and arrays; a scalar at the top is depth 0) and
    the key path of its deepest point, found without recursion."""
    best, where = 0, ""
    stack: list[tuple[Any, int, str]] = [(data, 0, "")]
    while stack:
        value, level, path = stack.pop()
        if isinstance(value, Mapping):
            children: Any = ((f"{path}.{k}" if path else str(k), v) for k, v in value.items())
        elif isinstance(value, (list, tuple)):
            children = ((f"{path}[{i}]", v) for i, v in enumerate(value))
        else:
            continue
        if level + 1 > best:
            best, where = level + 1, path
        if best > MAX_DEPTH:
            break
        stack.extend((v, level + 1, p) for p, v in children)
    return best, where


def depth_problem(data: Any) -> Problem | None:
    """A problem when ``data`` nests deeper than :data:`MAX_DEPTH` levels, else None."""
    depth, where = deepest(data)
    if depth <= MAX_DEPTH:
        return None
    return Problem(shorten(where), f"nesting more than {MAX_DEPTH} levels deep is not allowed; expected "
                                   f"at most {MAX_DEPTH} levels of tables, arrays and dotted-key parts")
