"""Generic checks of the tables of a scenario file; each problem goes into a list, none raises.

Every function appends :class:`~netsim.errors.Problem` objects (``key.path: message``) to the
``problems`` list it is given and returns what it could accept, so that one pass reports every
problem of a file at once.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

from netsim.errors import Problem, format_value, shorten
from netsim.scenario.fields import Spec

__all__ = ["check_table", "join", "name_pair", "suggest", "table_list", "unknown_key"]


def join(path: str, key: Any) -> str:
    """The key path of ``key`` inside the table at ``path`` (quoted if not a bare TOML key)."""
    text = str(key)
    bare = text != "" and all(ch.isalnum() or ch in "_-" for ch in text)
    part = text if bare else '"' + text.replace('"', '\\"') + '"'
    part = shorten(part)
    return f"{path}.{part}" if path else part


def suggest(word: str, candidates: Iterable[str]) -> str:
    """`` did you mean 'x'?`` for the closest candidate (difflib), or an empty string. A long
    candidate is shortened as the value is (a site named by 1,000 characters would otherwise
    be shown whole beside its shortened misspelling)."""
    matches = difflib.get_close_matches(word, list(candidates), n=1, cutoff=0.5)
    return f"; did you mean {format_value(matches[0])}?" if matches else ""


def unknown_key(path: str, key: Any, known: Sequence[str], hint: str = "") -> Problem:
    """The problem for a key that a table does not know, with a did-you-mean."""
    guess = suggest(str(key), known)
    if guess:
        return Problem(path, f"unknown key{guess}{hint}")
    return Problem(path, f"unknown key; allowed keys: {', '.join(known)}{hint}")


def check_table(
    table: Any,
    path: str,
    specs: Mapping[str, Spec],
    problems: list[Problem],
    *,
    extra: Sequence[str] = (),
    forbidden: Mapping[str, str] | None = None,
) -> dict[str, Any]:
    """Check every key of one table against ``specs``; return the accepted values.

    Parameters
    ----------
    table : Any
        The value found at ``path``; anything but a table is a problem.
    specs : Mapping[str, Spec]
        The keys this table may hold and their specs.
    extra : Sequence[str]
        Further keys the caller checks itself (they are neither reported nor returned).
    forbidden : Mapping[str, str], optional
        Keys that are known elsewhere but not allowed here, with the reason shown.
    """
    if not isinstance(table, Mapping):
        problems.append(Problem(path, f"{format_value(table)} is not allowed; expected a table"))
        return {}
    known = [*specs, *extra]
    accepted: dict[str, Any] = {}
    for key, value in table.items():
        sub = join(path, key)
        spec = specs.get(key) if isinstance(key, str) else None
        if key in extra:
            continue
        if forbidden and key in forbidden:
            problems.append(Problem(sub, forbidden[key]))
        elif spec is None:
            problems.append(unknown_key(sub, key, known))
        elif not spec.accepts(value):
            problems.append(Problem(sub, spec.complaint(value)))
        else:
            accepted[key] = spec.convert(value)
    return accepted


def table_list(value: Any, path: str, problems: list[Problem]) -> list[tuple[int, Mapping[str, Any]]]:
    """The tables of an array of tables ``[[path]]`` with their indices; problems for the rest."""
    if not isinstance(value, (list, tuple)):
        problems.append(Problem(path, f"{format_value(value)} is not allowed; expected an array "
                                      f"of tables, written [[{path}]]"))
        return []
    tables = []
    for i, item in enumerate(value):
        if isinstance(item, Mapping):
            tables.append((i, item))
        else:
            problems.append(Problem(f"{path}[{i}]", f"{format_value(item)} is not allowed; "
                                                    "expected a table"))
    return tables


def name_pair(value: Any, path: str, problems: list[Problem]) -> tuple[str, str] | None:
    """Two non-empty site names written ``["A", "B"]``, else a problem and None."""
    ok = (isinstance(value, (list, tuple)) and len(value) == 2
          and all(isinstance(v, str) and v.strip() for v in value))
    if not ok:
        problems.append(Problem(path, f"{format_value(value)} is not allowed; expected two site "
                                      'names, e.g. ["Site A", "Site B"]'))
        return None
    return str(value[0]), str(value[1])
