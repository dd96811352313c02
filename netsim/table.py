"""Plain tables shared by every command: aligned text, CSV, Markdown, LaTeX (booktabs) and JSON.

A :class:`Table` is a list of columns (key, header with its unit, number of significant figures)
and rows of plain values (numbers, strings, ``None``, or ``[low, high]`` intervals). Rendering is
the only thing done here; no physics.
"""

from __future__ import annotations

import csv
import io
import json
import math
import re
import textwrap
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

__all__ = ["FORMATS", "Column", "Table", "format_number", "render", "sig_for_interval", "tex_escape", "tex_label",
           "tex_number"]

FORMATS = ("table", "csv", "md", "tex", "json")

#: Width at which the text format wraps a table's notes (the rows themselves are never wrapped).
NOTE_WIDTH = 100


def format_number(value: Any, sig: int = 4, trailing_zeros: bool = False) -> str:
    """Format a cell: numbers to ``sig`` significant figures, intervals as ``[lo, hi]``.

    Integers are printed whole; ``None`` and NaN as an empty cell marker ``-``. With
    ``trailing_zeros`` the figures are all shown (``10.0`` at three figures), as they carry
    meaning when set by an uncertainty.
    """
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "-"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        if value == 0:
            return "0"
        text = f"{value:#.{sig}g}" if trailing_zeros else f"{value:.{sig}g}"
        mantissa, _, exponent = text.partition("e")
        text = mantissa.rstrip(".") + ("e" + exponent if exponent else "")
        if "e" in text:
            mantissa, exponent = text.split("e")
            text = f"{mantissa}e{int(exponent)}"
        return text
    if isinstance(value, (list, tuple)) and len(value) == 2:
        return f"[{format_number(value[0], sig, trailing_zeros)}, {format_number(value[1], sig, trailing_zeros)}]"
    return str(value)


def sig_for_interval(value: Any, interval: Any, default: int = 4) -> int:
    """Significant figures for ``value`` so that its last digit sits where its interval allows.

    The 95 % interval's half-width is kept to two significant figures and ``value`` is printed
    to the same decimal place (at least one and at most ``default + 2`` figures). Without a
    usable interval, ``default`` is returned.

    Examples
    --------
    >>> sig_for_interval(1234.5, [1200.0, 1270.0])  # half-width 35: print to the unit
    4
    """
    try:
        low, high = float(interval[0]), float(interval[1])
        value = float(value)
    except (TypeError, ValueError, IndexError, KeyError):
        return default
    half = (high - low) / 2.0
    if not (math.isfinite(half) and math.isfinite(value)) or half <= 0 or value == 0:
        return default
    place = math.floor(math.log10(half)) - 1
    return max(1, min(default + 2, math.floor(math.log10(abs(value))) - place + 1))


@dataclass(frozen=True)
class Column:
    """One column: the row key, the header shown to readers (unit included) and its precision.

    ``ci_key`` names the row key of the 95 % interval that belongs to this column's value (or
    to the interval itself, when the column shows it): the cell is then printed to the decimal
    place its uncertainty allows (see :func:`sig_for_interval`) instead of ``sig`` figures.
    """

    key: str
    header: str
    sig: int = 4
    ci_key: str | None = None

    def format(self, row: Mapping[str, Any]) -> str:
        """The text of this column's cell in ``row``."""
        value = row.get(self.key)
        if self.ci_key is None or row.get(self.ci_key) is None:
            return format_number(value, self.sig)
        interval = row[self.ci_key]
        if isinstance(value, (list, tuple)) and len(value) == 2:
            if value[0] is None or value[1] is None:  # an open bound: no centre to align on
                return f"[{format_number(value[0], self.sig)}, {format_number(value[1], self.sig)}]"
            centre = (float(value[0]) + float(value[1])) / 2.0
            sigs = [_bound_sig(v, centre, interval, self.sig) for v in value]
            return f"[{format_number(value[0], sigs[0], True)}, {format_number(value[1], sigs[1], True)}]"
        return format_number(value, sig_for_interval(value, interval, self.sig), True)


def _bound_sig(bound: Any, centre: float, interval: Any, default: int) -> int:
    """Figures for one interval bound, placed at the same decimal as the centre value."""
    sig_centre = sig_for_interval(centre, interval, default)
    try:
        if float(bound) == 0 or centre == 0:
            return sig_centre
        shift = math.floor(math.log10(abs(float(bound)))) - math.floor(math.log10(abs(centre)))
    except (TypeError, ValueError):
        return default
    return max(1, min(default + 2, sig_centre + shift))


@dataclass
class Table:
    """A titled table of rows (mappings from column key to value)."""

    title: str
    columns: Sequence[Column]
    rows: list[Mapping[str, Any]] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    def cells(self) -> list[list[str]]:
        return [[c.format(row) for c in self.columns] for row in self.rows]

    def to_records(self) -> list[dict[str, Any]]:
        """Rows as JSON-ready dicts keyed by column key (NaN becomes ``None``)."""
        return [{c.key: _jsonable(row.get(c.key)) for c in self.columns} for row in self.rows]


def _jsonable(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if hasattr(value, "item") and callable(value.item):  # numpy scalar
        return _jsonable(value.item())
    return value


def _text(table: Table) -> str:
    headers = [c.header for c in table.columns]
    body = table.cells()
    widths = [max(len(h), *(len(r[i]) for r in body)) if body else len(h) for i, h in enumerate(headers)]
    numeric = [all(_looks_numeric(r[i]) for r in body) for i in range(len(headers))]

    def line(cells: Sequence[str]) -> str:
        return "  ".join(c.rjust(w) if num else c.ljust(w) for c, w, num in zip(cells, widths, numeric)).rstrip()

    out = [table.title, line(headers), "  ".join("-" * w for w in widths)]
    out += [line(r) for r in body]
    out += [wrapped for note in table.notes for wrapped in _wrap_note(note)]
    return "\n".join(out) + "\n"


def _wrap_note(note: str) -> list[str]:
    """A note as lines of at most :data:`NOTE_WIDTH` characters, continuations indented."""
    return textwrap.wrap(note, NOTE_WIDTH, subsequent_indent="  ", break_long_words=False,
                         break_on_hyphens=False) or [""]


def _looks_numeric(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return text in ("-", "inf", "-inf")
    return True


def _csv(table: Table) -> str:
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow([c.header for c in table.columns])
    for record in table.to_records():
        writer.writerow(["" if v is None else (json.dumps(v) if isinstance(v, list) else v) for v in record.values()])
    return buf.getvalue()


def _md_escape(text: str) -> str:
    return text.replace("|", "\\|")


def _markdown(table: Table) -> str:
    headers = [_md_escape(c.header) for c in table.columns]
    body = table.cells()
    numeric = [all(_looks_numeric(r[i]) for r in body) for i in range(len(headers))]
    out = [f"**{_md_escape(table.title)}**", "", "| " + " | ".join(headers) + " |"]
    out.append("|" + "|".join("---:" if n else ":---" for n in numeric) + "|")
    out += ["| " + " | ".join(_md_escape(c) for c in row) + " |" for row in body]
    if table.notes:
        out += [""] + table.notes
    return "\n".join(out) + "\n"


_TEX_SPECIAL = {"&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_", "{": r"\{", "}": r"\}",
                "~": r"\textasciitilde{}", "^": r"\textasciicircum{}", "\\": r"\textbackslash{}",
                # Under pdflatex's default OT1 encoding these print as other glyphs (">" as an
                # inverted question mark), so they are always written as text commands.
                "<": r"\textless{}", ">": r"\textgreater{}", "|": r"\textbar{}"}


def tex_escape(text: str) -> str:
    """Escape every LaTeX special character in plain text, including those (``< > |``) that
    print as other glyphs under pdflatex's default font encoding."""
    return "".join(_TEX_SPECIAL.get(ch, ch) for ch in text)


_E_NUMBER = re.compile(r"(?<![\w.])(-?\d+(?:\.\d+)?)e([+-]?)(\d+)(?![\w.])")


def tex_number(text: str) -> str:
    """Numbers in e-notation as a typeset power of ten, without ``$`` or ``^`` (which the
    structural check reserves): ``3.59e4`` -> ``3.59\\ensuremath{\\times}10\\textsuperscript{4}``."""
    def power(m: re.Match[str]) -> str:
        sign = r"\ensuremath{-}" if m[2] == "-" else ""
        return rf"{m[1]}\ensuremath{{\times}}10\textsuperscript{{{sign}{int(m[3])}}}"
    return _E_NUMBER.sub(power, text)


def _tex_cell(text: str) -> str:
    numeric = _looks_numeric(text) or (text.startswith("[") and text.endswith("]"))
    return tex_number(text) if numeric else tex_escape(text)


def tex_label(title: str) -> str:
    """The ``\\label`` of a table: ``tab:`` and the title reduced to letters, digits and dashes."""
    return "tab:" + (re.sub(r"[^A-Za-z0-9]+", "-", title).strip("-").lower() or "table")


def _latex(table: Table) -> str:
    """A complete float: ``table`` environment, caption and label, the booktabs ``tabular``
    shrunk to the text width when it is wider (``adjustbox`` with ``max width``, which never
    enlarges), and the notes below it in small type."""
    body = table.cells()
    numeric = [all(_looks_numeric(r[i]) for r in body) for i in range(len(table.columns))]
    spec = "".join("r" if n else "l" for n in numeric)
    out = [r"% requires \usepackage{booktabs} and \usepackage{adjustbox}",
           r"\begin{table}[htbp]", r"\centering", rf"\caption{{{tex_escape(table.title)}}}",
           rf"\label{{{tex_label(table.title)}}}", r"\begin{adjustbox}{max width=\linewidth}",
           f"\\begin{{tabular}}{{{spec}}}", r"\toprule",
           " & ".join(tex_escape(c.header) for c in table.columns) + r" \\", r"\midrule"]
    out += [" & ".join(_tex_cell(c) for c in row) + r" \\" for row in body]
    out += [r"\bottomrule", r"\end{tabular}", r"\end{adjustbox}"]
    if table.notes:
        out += [r"\par\smallskip\footnotesize"]
        out += [tex_number(tex_escape(note)) + r"\par" for note in table.notes]
    out += [r"\end{table}"]
    return "\n".join(out) + "\n"


def _json(table: Table) -> str:
    return json.dumps({"title": table.title,
                       "columns": [{"key": c.key, "header": c.header} for c in table.columns],
                       "rows": table.to_records(), "notes": table.notes}, indent=2) + "\n"


_RENDERERS = {"table": _text, "csv": _csv, "md": _markdown, "tex": _latex, "json": _json}


def render(table: Table, fmt: str = "table") -> str:
    """Render ``table`` in one of :data:`FORMATS`."""
    from netsim.errors import ParameterError

    if fmt not in _RENDERERS:
        raise ParameterError("--format", fmt, "one of " + ", ".join(FORMATS))
    return _RENDERERS[fmt](table)
