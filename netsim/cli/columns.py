"""Column choice for printed tables: a compact default for the terminal, ``--wide`` or ``--columns``.

Tables such as the link budget carry up to twenty columns; printed in full as aligned text they are
300 and more characters wide. The text format therefore shows a compact set of columns by default
(each command names its own), says so in a note, and offers ``--wide`` (every column) and
``--columns KEY,KEY`` (a choice by column key, in every format but JSON, which always holds every
field). CSV, Markdown and LaTeX keep every column unless ``--columns`` is given.
"""

from __future__ import annotations

import argparse
from collections.abc import Mapping, Sequence
from dataclasses import replace
from typing import Any

from netsim.report.table import Table

__all__ = ["add_column_options", "choose_columns", "requested_keys", "select_tables"]


def add_column_options(parser: Any) -> None:
    """Add ``--wide`` and ``--columns`` to a subcommand's parser."""
    parser.add_argument("--wide", action="store_true",
                        help="text format: print every column (default: a compact set that fits a "
                             "terminal; csv, md, tex and json always hold every column)")
    parser.add_argument("--columns", metavar="KEY,KEY", default=None,
                        help="print only these columns, by key (formats table, csv, md, tex); the "
                             "first column (the row's name) is always kept; an unknown key lists "
                             "the keys")


def requested_keys(args: argparse.Namespace, tables: Sequence[Table]) -> list[str] | None:
    """The keys given with ``--columns``, checked against ``tables``; None when not given."""
    from netsim.errors import ParameterError

    text = getattr(args, "columns", None)
    if text is None:
        return None
    if getattr(args, "format", None) == "json":
        raise ParameterError("--columns", text, "only with --format table, csv, md or tex (json holds every field)")
    keys = [k.strip() for k in text.split(",") if k.strip()]
    known = list(dict.fromkeys(c.key for t in tables for c in t.columns))
    unknown = [k for k in keys if k not in known]
    if not keys or unknown:
        raise ParameterError("--columns", text, "comma-separated column keys: " + ", ".join(known))
    return keys


def choose_columns(table: Table, fmt: str, args: argparse.Namespace,
                   compact: Mapping[str, Sequence[str]], keys: Sequence[str] | None) -> Table:
    """``table`` reduced to the columns the user asked for (or the compact text default).

    ``compact`` maps a table's first column key (``link``, ``demand``, ...) to its compact set;
    a table without an entry is printed whole.
    """
    if keys is not None:
        return _subset(table, keys)
    if fmt != "table" or getattr(args, "wide", False) or not table.columns:
        return table
    chosen = compact.get(table.columns[0].key)
    if chosen is None:
        return table
    shown = _subset(table, chosen)
    hidden = len(table.columns) - len(shown.columns)
    if hidden <= 0:
        return table
    choose = ", --columns KEY,KEY chooses" if hasattr(args, "columns") else ""
    note = (f"{len(shown.columns)} of {len(table.columns)} columns shown; --wide prints all "
            f"{len(table.columns)}{choose}; files written and the other --format choices hold every column.")
    return replace(shown, notes=[*shown.notes, note])


def _subset(table: Table, keys: Sequence[str]) -> Table:
    """``table`` with its first column and the columns in ``keys`` (in the table's order)."""
    wanted = {table.columns[0].key, *keys}
    columns = [c for c in table.columns if c.key in wanted]
    return replace(table, columns=columns, notes=list(table.notes))


def select_tables(tables: Sequence[Table], fmt: str, args: argparse.Namespace,
                  compact: Mapping[str, Sequence[str]]) -> list[Table]:
    """Every table through :func:`choose_columns`; with ``--columns``, only tables that hold one.

    ``args`` may lack ``wide`` and ``columns`` (a command without these options).
    """
    keys = requested_keys(args, tables)
    chosen = [choose_columns(t, fmt, args, compact, keys) for t in tables]
    if keys is None:
        return chosen
    return [t for t in chosen if any(c.key in keys for c in t.columns)]
