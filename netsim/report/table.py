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
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

__all__ = ["Column", "Table", "FORMATS", "format_number", "render"]

FORMATS = ("table", "csv", "md", "tex", "json")


def format_number(value: Any, sig: int = 4) -> str:
    """Format a cell: numbers to ``sig`` significant figures, intervals as ``[lo, hi]``.

    Integers are printed whole; ``None`` and NaN as an empty cell marker ``-``.
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
        text = f"{value:.{sig}g}"
        if "e" in text:
            mantissa, exponent = text.split("e")
            text = f"{mantissa}e{int(exponent)}"
        return text
    if isinstance(value, (list, tuple)) and len(value) == 2:
        return f"[{format_number(value[0], sig)}, {format_number(value[1], sig)}]"
    return str(value)


@dataclass(frozen=True)
class Column:
    """One column: the row key, the header shown to readers (unit included) and its precision."""

    key: str
    header: str
    sig: int = 4


@dataclass
class Table:
    """A titled table of rows (mappings from column key to value)."""

    title: str
    columns: Sequence[Column]
    rows: list[Mapping[str, Any]] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    def cells(self) -> list[list[str]]:
        return [[format_number(row.get(c.key), c.sig) for c in self.columns] for row in self.rows]

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
    out += table.notes
    return "\n".join(out) + "\n"


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
                "~": r"\textasciitilde{}", "^": r"\textasciicircum{}", "\\": r"\textbackslash{}"}


def tex_escape(text: str) -> str:
    """Escape LaTeX special characters in plain text."""
    return "".join(_TEX_SPECIAL.get(ch, ch) for ch in text)


def _latex(table: Table) -> str:
    body = table.cells()
    numeric = [all(_looks_numeric(r[i]) for r in body) for i in range(len(table.columns))]
    spec = "".join("r" if n else "l" for n in numeric)
    out = [f"% {tex_escape(table.title)} (requires \\usepackage{{booktabs}})",
           f"\\begin{{tabular}}{{{spec}}}", r"\toprule",
           " & ".join(tex_escape(c.header) for c in table.columns) + r" \\", r"\midrule"]
    out += [" & ".join(tex_escape(c) for c in row) + r" \\" for row in body]
    out += [r"\bottomrule", r"\end{tabular}"]
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
