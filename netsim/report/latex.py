"""Checks for the LaTeX tables written by :func:`netsim.report.render`.

:func:`check_fragment` is a structural check that needs no TeX installation: one ``table``
float with a caption and a label around one ``tabular`` (inside an ``adjustbox`` that shrinks it
to the text width), booktabs rules in the right order, every row with as many cells as the column
specification, balanced braces and no unescaped special characters. :func:`compile_fragment`
wraps the fragment in a minimal document and runs ``pdflatex`` (or ``latexmk``) when one is
installed.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import tempfile
from pathlib import Path

__all__ = ["check_fragment", "compile_fragment", "tex_engine", "wrap_document"]

_BEGIN = re.compile(r"\\begin\{tabular\}\{([^}]*)\}")
_UNESCAPED = re.compile(r"(?<!\\)[&%$#_^~<>]")


def _strip_comment(line: str) -> str:
    match = re.search(r"(?<!\\)%", line)
    return line if match is None else line[: match.start()]


def _brace_problems(text: str) -> list[str]:
    depth = 0
    for i, ch in enumerate(text):
        if ch in "{}" and i > 0 and text[i - 1] == "\\":
            continue
        depth += 1 if ch == "{" else -1 if ch == "}" else 0
        if depth < 0:
            return ["a closing brace has no opening brace"]
    return [] if depth == 0 else [f"{depth} brace(s) left open"]


def _row_problems(lines: list[str], ncols: int) -> list[str]:
    problems = []
    for number, line in enumerate(lines, start=1):
        if line in (r"\toprule", r"\midrule", r"\bottomrule"):
            continue
        if not line.endswith(r"\\"):
            problems.append(f"row {number} does not end with \\\\")
            continue
        body = line[:-2]
        cells = re.split(r"(?<!\\)&", body)
        if len(cells) != ncols:
            problems.append(f"row {number} has {len(cells)} cells, the column spec has {ncols}")
        stray = [m.group(0) for cell in cells for m in _UNESCAPED.finditer(cell)]
        if stray:
            problems.append(f"row {number} has unescaped {''.join(sorted(set(stray)))}")
    return problems


def _float_problems(lines: list[str]) -> tuple[list[str], list[str]]:
    """Problems of the ``table`` float around the tabular, and the lines of the tabular."""
    if not lines or not lines[0].startswith(r"\begin{table}"):
        return ["the table does not start with \\begin{table}"], []
    if lines[-1] != r"\end{table}":
        return ["the table does not end with \\end{table}"], []
    problems = []
    if not any(ln.startswith(r"\caption{") for ln in lines):
        problems.append("the table has no \\caption")
    if not any(re.fullmatch(r"\\label\{tab:[^{}\s]+\}", ln) for ln in lines):
        problems.append("the table has no \\label{tab:...}")
    starts = [i for i, ln in enumerate(lines) if _BEGIN.fullmatch(ln)]
    ends = [i for i, ln in enumerate(lines) if ln == r"\end{tabular}"]
    if len(starts) != 1 or len(ends) != 1 or ends[0] < starts[0]:
        return problems + ["expected one \\begin{tabular}{spec} ... \\end{tabular}"], []
    if not (lines[starts[0] - 1].startswith(r"\begin{adjustbox}{max width=")
            and lines[ends[0] + 1] == r"\end{adjustbox}"):
        problems.append("the tabular is not fitted to the page (adjustbox with max width)")
    return problems, lines[starts[0]:ends[0] + 1]


def check_fragment(text: str) -> list[str]:
    """Structural problems of a LaTeX table as :func:`~netsim.report.render` writes it (an
    empty list if none).

    Parameters
    ----------
    text : str
        The table, as written by ``render(table, "tex")``.

    Returns
    -------
    list of str
        One message per problem found.
    """
    all_lines = [ln.strip() for ln in (_strip_comment(x) for x in text.splitlines()) if ln.strip()]
    problems, lines = _float_problems(all_lines)
    if not lines:
        return problems
    spec = _BEGIN.fullmatch(lines[0]).group(1)  # type: ignore[union-attr]
    ncols = len(re.findall(r"[lcr]|p\{", spec))
    body = lines[1:-1]
    rules = [ln for ln in body if ln in (r"\toprule", r"\midrule", r"\bottomrule")]
    if rules != [r"\toprule", r"\midrule", r"\bottomrule"]:
        problems.append("expected \\toprule, \\midrule and \\bottomrule once each, in order")
    if body and (body[0] != r"\toprule" or body[-1] != r"\bottomrule"):
        problems.append("the table must open with \\toprule and close with \\bottomrule")
    if re.search(r"\\hline|\|", spec + "".join(body)):
        problems.append("vertical rules or \\hline do not belong in a booktabs table")
    return problems + _row_problems(body, ncols) + _brace_problems("\n".join(all_lines))


def tex_engine() -> list[str] | None:
    """The command that compiles a document here (pdflatex, else latexmk), or ``None``."""
    if shutil.which("pdflatex"):
        return ["pdflatex", "-interaction=nonstopmode", "-halt-on-error"]
    if shutil.which("latexmk"):
        return ["latexmk", "-pdf", "-interaction=nonstopmode", "-halt-on-error"]
    return None


def wrap_document(fragments: list[str]) -> str:
    """A minimal standalone document holding ``fragments`` (booktabs and adjustbox loaded; the
    default OT1 font encoding, as in a document that loads no font package)."""
    body = "\n\\bigskip\n\n".join(fragments)
    return ("\\documentclass{article}\n\\usepackage{booktabs}\n\\usepackage{adjustbox}\n"
            "\\usepackage[margin=2cm]{geometry}\n\\begin{document}\n"
            f"{body}\n\\end{{document}}\n")


def compile_fragment(fragments: list[str], timeout_s: float = 60.0) -> tuple[bool, str] | None:
    """Compile ``fragments`` in a minimal document; ``None`` when no TeX engine is installed.

    Returns
    -------
    (ok, log) : tuple of bool and str
        Whether a PDF was produced, and the tail of the engine's output.
    """
    command = tex_engine()
    if command is None:
        return None
    with tempfile.TemporaryDirectory() as tmp:
        source = Path(tmp) / "tables.tex"
        source.write_text(wrap_document(fragments), encoding="utf-8")
        done = subprocess.run([*command, source.name], cwd=tmp, capture_output=True, text=True,
                              timeout=timeout_s, check=False)
        ok = done.returncode == 0 and (Path(tmp) / "tables.pdf").exists()
        return ok, (done.stdout + done.stderr)[-2000:]
